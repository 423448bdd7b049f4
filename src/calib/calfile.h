/* Calibration files: JSON written by `spume calibrate` and read by `measure --calib`. */
#ifndef SP_CALIB_CALFILE_H
#define SP_CALIB_CALFILE_H

#include "calib/calibrate.h"

/* Write r to path (a temporary sibling, renamed into place when complete). Keys: see
 * docs/methods-calib.md; at least "mm_per_px", "mm_per_px_uncertainty", "rotation_deg". */
int sp_calfile_write(const char *path, const sp_calib_result *r, sp_error *err);

/* Read a calibration file. Required: "mm_per_px" (0 < v <= 1000), "mm_per_px_uncertainty"
 * (0 <= u < mm_per_px), "rotation_deg" (|v| <= 180). Optional "homography" (9 finite numbers) and
 * "distortion" (object with model, k1, k2, centre_px, norm_px) are checked when present. Bad JSON,
 * a missing key or an absurd value gives SP_ERR_INPUT naming the file and the key. */
int sp_calfile_read(const char *path, sp_calib_result *r, sp_error *err);

#endif

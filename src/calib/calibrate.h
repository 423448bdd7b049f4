/* The calibrate job: millimetres per pixel (and rotation, perspective, radial distortion) from an
 * image of a dot-grid target, or from two points a known length apart. */
#ifndef SP_CALIB_CALIBRATE_H
#define SP_CALIB_CALIBRATE_H

#include "calib/lattice.h"
#include "spume.h"

typedef struct sp_calib_settings {
    double pitch_mm;   /* grid mode: centre-to-centre spacing of the dots (required, > 0) */
    int polarity;      /* SP_DOTS_AUTO (default), SP_DOTS_DARK or SP_DOTS_LIGHT */
    double min_dot_px; /* smallest dot diameter accepted (default 4) */
    int min_dots;      /* fewest dots on the grid (default 12, at least 9) */
    int distortion;    /* radial terms: -1 = chosen by F-test (default), 0, 1 or 2 */

    /* Two-point mode (used when two_point = 1): a ruler or object of known length. */
    int two_point;
    double points[4];   /* x1, y1, x2, y2 in pixels (origin at the top-left pixel's centre) */
    double length_mm;   /* the length between them */
    double length_u_mm; /* its standard uncertainty (default 0) */
    double point_u_px;  /* standard uncertainty of each endpoint per axis (default 0.5 px) */
} sp_calib_settings;

void sp_calib_settings_default(sp_calib_settings *s);

typedef struct sp_calib_result {
    char method[16];              /* "grid" or "two_point" */
    char image[4096];             /* the image calibrated from */
    int width, height;            /* its size */
    double mm_per_px;             /* at the image centre */
    double mm_per_px_uncertainty; /* standard uncertainty (1 sigma) */
    double rotation_deg;          /* grid +x (or the line p1->p2) in the image, counter-clockwise, y up */
    double rotation_uncertainty_deg;
    /* Grid mode only (zero otherwise). */
    double pitch_mm;
    int polarity; /* SP_DOTS_DARK or SP_DOTS_LIGHT */
    int dots_found, dots_used;
    double rms_px, max_px;                       /* reprojection residuals */
    double scale_x_mm_per_px, scale_y_mm_per_px; /* along the grid axes at the centre */
    double scale_variation; /* relative spread of the local scale over the image corners */
    int has_homography;
    double homography[9]; /* grid mm (x right, y up) -> undistorted pixels, row-major */
    sp_radial radial;     /* terms = 0: no distortion correction */
    /* Two-point mode only. */
    double points[4];
    double length_mm;
} sp_calib_result;

/* Calibrate from `image` (read through the io layer; 8/16-bit grey or colour). *res is filled on
 * success. Bad input (unreadable image, no or too few dots, blobs that are not a grid, bad pitch,
 * points outside the image) gives SP_ERR_INPUT with one line naming the file. */
int sp_calibrate(const char *image, const sp_calib_settings *s, sp_calib_result *res, sp_error *err);

/* Map an observed pixel position to undistorted pixels (identity when no distortion is recorded),
 * so that mm = mm_per_px × pixels holds near the centre. Returns 0, or -1 outside the model's
 * range. */
int sp_calib_undistort(const sp_calib_result *r, double x, double y, double *xu, double *yu);

#endif

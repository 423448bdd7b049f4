/* Probe for the calibration tests: runs the calibrate job on one image and prints what it found.
 *
 * Usage: probe_calib_run IMAGE PITCH_MM [DISTORTION_TERMS] [OUT.json]
 *   DISTORTION_TERMS: -1 (auto, default), 0, 1 or 2. OUT.json: also write the calibration file.
 * Output lines (17 significant digits):
 *   scale MM_PER_PX U ROT_DEG U_ROT
 *   fit DOTS_FOUND DOTS_USED RMS MAX TERMS K1 K2
 *   H h0 .. h8                (grid mm -> undistorted px)
 *   dot I J X Y               (one per indexed dot)
 * On failure: "ERROR code message" and the exit status is the code. */
#include "calib/calfile.h"
#include "calib/calibrate.h"
#include "calib/dots.h"
#include "calib/lattice.h"
#include "io/source_internal.h"

#include <stdio.h>
#include <stdlib.h>

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: probe_calib_run IMAGE PITCH_MM [TERMS] [OUT.json]\n");
        return 2;
    }
    sp_calib_settings s;
    sp_calib_settings_default(&s);
    s.pitch_mm = atof(argv[2]);
    if (argc > 3)
        s.distortion = atoi(argv[3]);
    sp_calib_result r;
    sp_error err = {0};
    int rc = sp_calibrate(argv[1], &s, &r, &err);
    if (!rc && argc > 4)
        rc = sp_calfile_write(argv[4], &r, &err);
    if (rc) {
        printf("ERROR %d %s\n", rc, err.msg);
        return rc;
    }
    printf("scale %.17g %.17g %.17g %.17g\n", r.mm_per_px, r.mm_per_px_uncertainty, r.rotation_deg,
           r.rotation_uncertainty_deg);
    printf("fit %d %d %.17g %.17g %d %.17g %.17g\n", r.dots_found, r.dots_used, r.rms_px, r.max_px,
           r.radial.terms, r.radial.k1, r.radial.k2);
    printf("H");
    for (int k = 0; k < 9; k++)
        printf(" %.17g", r.homography[k]);
    printf("\n");
    /* The dots again, through the same stages, for comparison with outside detectors. */
    sp_image im = {0};
    sp_dot *d = NULL;
    int n = 0, ni = 0;
    if (sp_still_read(argv[1], &im, NULL, 0, &err) ||
        sp_dots_find(&im, s.polarity, s.min_dot_px, &d, &n, NULL, argv[1], &err) ||
        sp_lattice_index(d, n, s.min_dots, &ni, argv[1], &err)) {
        printf("ERROR %d %s\n", err.code, err.msg);
        free(d);
        sp_image_free(&im);
        return err.code ? err.code : 1;
    }
    for (int k = 0; k < n; k++)
        if (d[k].indexed)
            printf("dot %d %d %.17g %.17g\n", d[k].i, d[k].j, d[k].x, d[k].y);
    free(d);
    sp_image_free(&im);
    return 0;
}

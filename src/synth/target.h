/* Synthetic calibration targets: a square grid of round dots of known pitch seen through a known
 * scale, rotation, mild perspective and radial distortion, with blur, noise and uneven light. */
#ifndef SP_SYNTH_TARGET_H
#define SP_SYNTH_TARGET_H

#include "spume.h"

typedef struct sp_target_opts {
    int width, height;         /* image size (default 1024×768) */
    int bytes;                 /* 1 = 8-bit (default), 2 = 16-bit */
    double pitch_mm;           /* dot spacing (default 1) */
    double dot_diam_mm;        /* dot diameter (default 0.5) */
    double mm_per_px;          /* scale at the image centre (default 0.025) */
    double rotation_deg;       /* grid +x in the image, counter-clockwise with y up (default 0) */
    double persp_x, persp_y;   /* perspective: relative change of the scale from the centre to the
                                  right / bottom edge (default 0; e.g. 0.05 = 5%) */
    double offset_x, offset_y; /* grid origin offset from the image centre, in pitches (0.31, 0.17) */
    int cols, rows;            /* dots in a finite grid centred on the image; 0 = fill the image */
    double k1, k2;             /* radial distortion, the model of calib/lattice.h (default 0) */
    double blur_px;            /* Gaussian blur sigma (default 0.8) */
    double noise;              /* Gaussian noise sigma, fraction of full scale (default 0.01) */
    double vignette;           /* light in the corners relative to the centre (default 1 = flat) */
    double level;              /* transmission of dark dots, or of the background for light dots (0.08) */
    int light_dots;            /* 1: light dots on a dark ground (default 0) */
    uint64_t seed;             /* noise seed (default 1) */
} sp_target_opts;

void sp_target_opts_default(sp_target_opts *o);

/* Render the target to out_png (written under a temporary name, then renamed) and its truth to
 * <out_png without .png>_truth.json: the options, the homography grid mm -> undistorted pixels, and
 * every dot (lattice index, true centre in observed pixels) lying wholly inside the image.
 * Deterministic for the same options. Returns SP_ERR_INPUT for bad options or an unwritable path. */
int sp_synth_target(const char *out_png, const sp_target_opts *o, sp_error *err);

#endif

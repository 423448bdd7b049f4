/* One frame through the detection stages: normalise → threshold → fill → label → measure. */
#ifndef SP_DETECT_DETECT_H
#define SP_DETECT_DETECT_H

#include "detect/measure.h"

#define SP_OTSU_BINS 256
#define SP_OTSU_RANGE 1.25f /* normalised transmission histogram covers [0, 1.25) */

typedef struct sp_detect_opts {
    double threshold; /* fixed transmission level (default 0.7); ignored when otsu is set */
    int otsu;         /* 1: Otsu (1979) on each frame's transmission histogram */
    int flicker;      /* 1: estimate the frame's light gain (default 1); 0: gain 1 */
    int fill;         /* 1: fill holes (refraction spots) (default 1) */
    sp_measure_opts measure;
} sp_detect_opts;

void sp_detect_opts_default(sp_detect_opts *o);

typedef struct sp_detect_result {
    sp_bubble *bubbles; /* owned by the detector, valid until its next run */
    int n;
    double gain;   /* light gain used */
    double level;  /* transmission level used for the mask */
    double gas_px; /* summed filled area of the kept bubbles, pixels */
} sp_detect_result;

typedef struct sp_detector sp_detector; /* per-thread workspace */

sp_detector *sp_detector_new(void);
void sp_detector_free(sp_detector *d);

/* Precompute what the per-frame passes need from bg (w×h floats; see sp_norm_plan): later runs
 * given the same bg pointer use it. Call again after changing bg's content in place. */
int sp_detector_set_background(sp_detector *d, const float *bg, int w, int h, sp_error *err);

/* Detect the bubbles of one frame against bg (frame-sized floats). nthreads is passed to the
 * labeller (1 when frames are already processed in parallel). */
int sp_detect_run(sp_detector *d, const sp_image *frame, const float *bg, const sp_detect_opts *o,
                  int nthreads, sp_detect_result *res, sp_error *err);

#endif

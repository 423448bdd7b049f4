/* Dots of a calibration target: found by threshold and labelling, located to sub-pixel accuracy
 * by a background-subtracted intensity-weighted centroid. */
#ifndef SP_CALIB_DOTS_H
#define SP_CALIB_DOTS_H

#include "spume.h"

enum { SP_DOTS_AUTO = 0, SP_DOTS_DARK = 1, SP_DOTS_LIGHT = 2 };

typedef struct sp_dot {
    double x, y;    /* centre, pixels (origin at the top-left pixel's centre, y down) */
    double diam_px; /* area-equivalent diameter of the thresholded blob */
    int i, j;       /* lattice index (set by sp_lattice_index), x to the right, j upward */
    int indexed;    /* 1 once sp_lattice_index placed the dot on the lattice */
} sp_dot;

/* Find the dots of im. polarity: SP_DOTS_AUTO picks the minority class of Otsu's split.
 * min_diam_px: blobs smaller than this are noise. *dots is malloc'd, owned by the caller (free()).
 * *polarity_out (may be NULL) receives the polarity used. `what` names the file in errors.
 * Returns SP_ERR_INPUT when the image holds no usable dots. */
int sp_dots_find(const sp_image *im, int polarity, double min_diam_px, sp_dot **dots, int *n,
                 int *polarity_out, const char *what, sp_error *err);

#endif

/* Sharpness of a bubble's outline, for the depth-of-field flag (internal to the detect layer).
 *
 * Sharpness is the mean transmission gradient across the central half of the local edge step,
 * divided by that step: 0.5 / w, with w the distance between the crossings of 25 % and 75 % of the
 * step measured along the outline normal, in 1/px; the median over the outline. A pixel-sharp edge
 * gives about 1/px; a defocus disc of radius R widens the central half to about 0.4·R + 0.5 px
 * (pillbox line-spread function convolved with the pixel), so sharpness falls as 1/R. The in-focus
 * band is a minimum sharpness (docs/methods-accuracy.md says how to set it from a traverse). */
#ifndef SP_DETECT_FOCUS_H
#define SP_DETECT_FOCUS_H

#include "detect/edges.h"
#include "detect/ellipse.h"

/* Default minimum sharpness, 1/px: the value this estimator gives for a plain step blurred by a
 * defocus disc of 1.5 px radius (tests/unit/test_detect_accuracy.c measures it), i.e. a circle of
 * confusion of three pixels. A plain step under a 1 px disc gives about 0.56; a thin grey shoulder at
 * the outline (total reflection) widens the measured step, so the default sits one notch lower.
 * Set it for a given optics from a traverse (docs/methods-accuracy.md). */
#define SP_FOCUS_MIN_SHARPNESS_DEFAULT 0.47

/* Median sharpness of n points with 25..75 % widths wid[i] along directions dir[2i], dir[2i+1],
 * against the outline ellipse el (its normal at each point). Points whose pair direction is more
 * than 60° from the normal, or whose width is NaN, are skipped; a width that fell off the profile
 * counts as the profile's length (8 px). scratch holds n floats. Returns 0 when no point is usable. */
double sp_focus_sharpness(const double *xy, const float *wid, const int8_t *dir, int n, const sp_ellipse *el,
                          float *scratch);

/* The same over traced contour points pts[i0..i1) (cyclic indices modulo nc). */
double sp_focus_sharpness_arc(const sp_contour_pt *pts, int nc, int i0, int i1, const sp_ellipse *el,
                              float *scratch);

#endif

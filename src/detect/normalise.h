/* Flat-field normalisation against the background and the per-frame light level. */
#ifndef SP_DETECT_NORMALISE_H
#define SP_DETECT_NORMALISE_H

#include "detect/frameview.h"

/* Frame-wide gain of the light relative to bg (flicker, drift the background missed): the median
 * of frame/bg over a sparse grid of pixels that are clearly light (ratio within ±30% of the
 * previous estimate), so bubbles and dust do not pull it. Returns 1 when there is nothing to
 * measure it on. */
float sp_norm_gain(const sp_image *frame, const float *bg);

/* mask[y·w + x] = 1 where frame < level · gain · bg (the pixel passes less than `level` of its
 * light), else 0. One pass of compares over the frame. */
void sp_norm_mask(const sp_frame_view *v, float level, uint8_t *mask);

/* Histogram of normalised transmission over [0, range) in nbins bins (values beyond go to the last
 * bin), on every pixel; for an automatic threshold. */
void sp_norm_hist(const sp_frame_view *v, float range, uint64_t *hist, int nbins);

#endif

/* Background (the light each pixel sees with no bubble in front of it), estimated as a per-pixel
 * percentile of frames sampled across the recording. Bubbles move, so at each pixel most samples
 * show the light; a percentile above the median tolerates a pixel covered in up to half the
 * samples. */
#ifndef SP_DETECT_BACKGROUND_H
#define SP_DETECT_BACKGROUND_H

#include "spume.h"

/* Most frames one estimate may hold, whatever the caller asks (bounds memory). */
#define SP_BG_MAX_SAMPLES 255

typedef struct sp_bg_builder sp_bg_builder;

/* Prepare to collect up to nmax frames of w×h at `bytes` per sample. Memory: nmax·w·h·bytes. */
int sp_bg_builder_new(sp_bg_builder **out, int w, int h, int bytes, int nmax, sp_error *err);
/* Copy one frame in (it must have the builder's geometry). */
int sp_bg_builder_add(sp_bg_builder *b, const sp_image *frame, sp_error *err);
int sp_bg_builder_count(const sp_bg_builder *b);
/* Per-pixel `percentile` (0..100, linear interpolation between order statistics) of the frames
 * added so far, into bg (w·h floats, row stride w). nthreads 0 = OpenMP default. */
int sp_bg_builder_finish(sp_bg_builder *b, double percentile, float *bg, int nthreads, sp_error *err);
void sp_bg_builder_free(sp_bg_builder *b);

/* Background straight from one image of the empty field (a frame recorded with no bubbles). */
int sp_bg_from_image(const sp_image *img, float *bg, sp_error *err);

#endif

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
/* Forget the frames added so far. */
void sp_bg_builder_reset(sp_bg_builder *b);
/* Per-pixel `percentile` (0..100, linear interpolation between order statistics) of the frames
 * added so far, into bg (w·h floats, row stride w). nthreads 0 = OpenMP default. */
int sp_bg_builder_finish(sp_bg_builder *b, double percentile, float *bg, int nthreads, sp_error *err);
void sp_bg_builder_free(sp_bg_builder *b);

/* Guard for bubbles that sit still (on a wall, at a nozzle) through most of the sampled frames: the
 * percentile then shows them as part of the light, and the detector would never see them. Fit a
 * smooth surface to the light (a least-squares polynomial of degree 4 in x and y, refitted without
 * the points more than 10 % below it, so dark spots do not pull it down), mark background pixels
 * darker than `level` × that surface, and refill each marked blob — grown by 3 px to take its
 * blurred rim — from the surface scaled to the light just around it. Blobs that touch the frame
 * border or cover more than max_frac of the frame (walls, nozzles, vignetted corners) are kept as
 * they are. Faint dust (transmission above `level`) stays in the background and is divided out as
 * before; an opaque speck darker than `level` becomes a still object in every frame.
 * Defaults: level 0.5, max_frac 0.02. *n_filled = blobs refilled (may be NULL). */
int sp_bg_guard_still(float *bg, int w, int h, double level, double max_frac, int *n_filled, sp_error *err);

/* Background straight from one image of the empty field (a frame recorded with no bubbles). */
int sp_bg_from_image(const sp_image *img, float *bg, sp_error *err);

#endif

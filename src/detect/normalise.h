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

/* What the two per-frame passes above need from one background, computed once: the gain's sampling
 * grid as a compact array, and the largest background value of each tile of the frame. With it,
 * sp_norm_gain_planned and sp_norm_mask_planned give bit-identical results to the plain functions
 * while reading the float background only where a tile may hold mask pixels: a tile whose darkest
 * frame sample is at least level·gain times its brightest background value has none. Rebuild it
 * whenever the background's content changes. */
typedef struct sp_norm_plan {
    int w, h;
    int grid, gx0, gnx, gny; /* gain grid: columns gx0 + i·grid, rows gx0 + j·grid */
    float *gbg;              /* background at the grid points, gny rows of gnx */
    int ntx, nty;            /* tiles of SP_NORM_TILE × SP_NORM_TILE pixels */
    float *tmax;             /* per tile: largest background value (+inf if any is not a number) */
    uint16_t *tmin;          /* per tile: darkest sample of the scanned frame */
    const sp_image *scanned; /* the frame tmin belongs to */
    uint8_t *need;           /* per tile column: work space of the mask pass */
    uint8_t *colmin8;        /* per column: work space */
    uint16_t *colmin16;
    float *work; /* per grid column: work space of the gain pass */
    int *bins;
} sp_norm_plan;

#define SP_NORM_TILE 16

int sp_norm_plan_build(sp_norm_plan *p, const float *bg, int w, int h, sp_error *err);
void sp_norm_plan_free(sp_norm_plan *p);
/* One read of the frame: the darkest sample of each tile, and (gain not NULL) the frame's gain as
 * sp_norm_gain gives it. */
void sp_norm_plan_scan(sp_norm_plan *p, const sp_image *frame, float *gain);
/* sp_norm_mask for the frame last scanned (else the plain pass). rows (h bytes, or NULL) lets a
 * caller that keeps its mask buffer skip clearing what is clear already: on entry, rows[y] = 0 says
 * row y of mask holds only zeros; on return, rows[y] says whether row y holds a mask pixel (1 for
 * every row after the plain pass). */
void sp_norm_mask_planned(sp_norm_plan *p, const sp_frame_view *v, float level, uint8_t *mask, uint8_t *rows);

#endif

/* Connected-component labelling of a binary mask, 8-connected, with per-component statistics
 * gathered in the same pass. */
#ifndef SP_DETECT_LABEL_H
#define SP_DETECT_LABEL_H

#include "spume.h"

/* Border-contact bits of a component. */
enum { SP_BORDER_LEFT = 1, SP_BORDER_TOP = 2, SP_BORDER_RIGHT = 4, SP_BORDER_BOTTOM = 8 };

typedef struct sp_component {
    int64_t area;            /* pixel count (m00) */
    int x0, y0, x1, y1;      /* bounding box, inclusive */
    int64_t m10, m01;        /* raw moments: sum x, sum y (exact integers) */
    int64_t m20, m11, m02;   /* raw moments: sum x², sum xy, sum y² */
    double cx, cy;           /* centroid, pixel centres at integer coordinates */
    double mu20, mu11, mu02; /* central moments (sums, not divided by area) */
    int border;              /* SP_BORDER_* bits of the image sides the component touches */
} sp_component;

/* Reusable workspace (union-find tables, per-strip buffers). Not shared between threads. */
typedef struct sp_labeler sp_labeler;

sp_labeler *sp_labeler_new(void);
void sp_labeler_free(sp_labeler *lb);

/* Label mask (w×h, row stride mstride bytes, non-zero = foreground).
 * labels: w×h int32, row stride w, written with 0 for background and 1..n for components, numbered
 *         in raster order of each component's first pixel (top-to-bottom, left-to-right), so the
 *         result does not depend on nthreads.
 * *comps: array of n components (index i holds label i+1), owned by lb and valid until the next
 *         call or sp_labeler_free. nthreads: strips processed in parallel (0 = OpenMP default,
 *         1 = serial). */
int sp_label_run(sp_labeler *lb, const uint8_t *mask, ptrdiff_t mstride, int w, int h, int32_t *labels,
                 const sp_component **comps, int *n, int nthreads, sp_error *err);

/* The same, told which rows of mask hold foreground (rows[y] = 0: row y is all zeros and is not
 * read; rows NULL: every row is read). */
int sp_label_run_rows(sp_labeler *lb, const uint8_t *mask, ptrdiff_t mstride, int w, int h,
                      const uint8_t *rows, int32_t *labels, const sp_component **comps, int *n, int nthreads,
                      sp_error *err);

/* Sparse writing (off by default): the labeller then clears only the runs it wrote into the same
 * labels buffer (same size) on its previous call, and writes only the new runs, instead of writing
 * every pixel: the result is the same as long as nobody else writes into that buffer between calls.
 * A frame is mostly background, so this spares a store per pixel. */
void sp_labeler_set_sparse(sp_labeler *lb, int on);

#endif

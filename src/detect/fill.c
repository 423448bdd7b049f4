/* Hole filling as background-run labelling.
 *
 * A hole is a 4-connected background component that does not reach the image border (the dual of
 * 8-connected foreground; equal to scipy.ndimage.binary_fill_holes with its default cross
 * structure). Rather than flooding pixel by pixel from the border, each row is cut into background
 * runs (the gaps between foreground runs, found eight bytes at a time), runs that overlap in
 * consecutive rows are joined in an array union-find (Wu, Otoo & Suzuki 2009), and every set with
 * no run on the border is painted. The work grows with the number of runs, which is small for
 * bubble masks.
 */
#include "detect/fill.h"

#include "detect/bytescan.h"

#include <stdlib.h>
#include <string.h>

typedef struct brun {
    uint16_t x0, x1; /* inclusive */
    int32_t label;
} brun;

struct sp_filler {
    brun *runs;
    size_t cap_runs;
    uint32_t *row_start;
    size_t cap_rows;
    int32_t *parent;
    uint8_t *open; /* the set reaches the border */
    size_t cap_labels, cap_open;
};

sp_filler *sp_filler_new(void)
{
    return calloc(1, sizeof(sp_filler));
}

void sp_filler_free(sp_filler *f)
{
    if (!f)
        return;
    free(f->runs);
    free(f->row_start);
    free(f->parent);
    free(f->open);
    free(f);
}

static int grow(void **p, size_t *cap, size_t need, size_t sz)
{
    if (need <= *cap)
        return 0;
    size_t n = *cap ? *cap : 256;
    while (n < need) {
        if (n > SIZE_MAX / 2 / sz)
            return -1;
        n *= 2;
    }
    void *q = realloc(*p, n * sz);
    if (!q)
        return -1;
    *p = q;
    *cap = n;
    return 0;
}

static int32_t find(int32_t *parent, int32_t a)
{
    while (parent[a] != a) {
        parent[a] = parent[parent[a]];
        a = parent[a];
    }
    return a;
}

int sp_fill_holes(sp_filler *f, uint8_t *mask, int w, int h, sp_error *err)
{
    return sp_fill_holes_rows(f, mask, w, h, NULL, err);
}

int sp_fill_holes_rows(sp_filler *f, uint8_t *mask, int w, int h, const uint8_t *rows, sp_error *err)
{
    int rc;
    if (!f || !mask)
        return sp_error_set(err, SP_ERR_INTERNAL, "fill: null argument");
    if ((rc = sp_check_dims(w, h, "fill", err)))
        return rc;
    if (w < 3 || h < 3)
        return SP_OK; /* every background pixel touches the border */

    size_t per_row = (size_t)w / 2 + 1, nruns = 0, nlabels = 0;
    if (grow((void **)&f->row_start, &f->cap_rows, (size_t)h + 1, sizeof(uint32_t)))
        goto fail;
    f->row_start[0] = 0;
    for (int y = 0; y < h; y++) {
        if (grow((void **)&f->runs, &f->cap_runs, nruns + per_row, sizeof(brun)) ||
            grow((void **)&f->parent, &f->cap_labels, nlabels + per_row, sizeof(int32_t)) ||
            grow((void **)&f->open, &f->cap_open, nlabels + per_row, 1))
            goto fail;
        const uint8_t *row = mask + (size_t)y * (size_t)w;
        size_t p = y ? f->row_start[y - 1] : 0, pend = y ? f->row_start[y] : 0;
        brun *rs = f->runs;
        const int empty = rows && !rows[y]; /* one background run, not read */
        int x = 0;
        while (x < w) {
            int a0 = empty ? 0 : sp_scan_to(row, x, w, 1); /* next background pixel */
            if (a0 >= w)
                break;
            int e = empty ? w : sp_scan_to(row, a0, w, 0);
            int a1 = e - 1;
            /* 4-connected: a run above must share a column. */
            while (p < pend && rs[p].x1 < a0)
                p++;
            int32_t lab = -1;
            for (size_t q = p; q < pend && rs[q].x0 <= a1; q++) {
                int32_t r = find(f->parent, rs[q].label);
                if (lab < 0)
                    lab = r;
                else if (r != lab) {
                    /* smaller root wins; the border flag follows the root */
                    int32_t lo = r < lab ? r : lab, hi = r < lab ? lab : r;
                    f->parent[hi] = lo;
                    f->open[lo] |= f->open[hi];
                    lab = lo;
                }
            }
            if (lab < 0) {
                lab = (int32_t)nlabels++;
                f->parent[lab] = lab;
                f->open[lab] = 0;
            }
            if (y == 0 || y == h - 1 || a0 == 0 || a1 == w - 1)
                f->open[lab] = 1;
            rs[nruns].x0 = (uint16_t)a0;
            rs[nruns].x1 = (uint16_t)a1;
            rs[nruns].label = lab;
            nruns++;
            x = e;
        }
        f->row_start[y + 1] = (uint32_t)nruns;
    }
    /* Paint the runs of closed sets (interior rows only: border rows are open by definition). */
    for (int y = 1; y < h - 1; y++) {
        uint8_t *row = mask + (size_t)y * (size_t)w;
        for (uint32_t i = f->row_start[y]; i < f->row_start[y + 1]; i++) {
            const brun *q = &f->runs[i];
            if (!f->open[find(f->parent, q->label)])
                memset(row + q->x0, 1, (size_t)q->x1 - q->x0 + 1);
        }
    }
    return SP_OK;

fail:
    return sp_error_set(err, SP_ERR_INTERNAL, "fill: out of memory for a %dx%d mask", w, h);
}

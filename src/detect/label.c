/* Connected-component labelling, 8-connected, run based.
 *
 * Method: the run-based two-scan scheme of He, Chao & Suzuki (2008, IEEE TIP 17:749): the first
 * scan turns each row into foreground runs and gives every run a provisional label taken from the
 * runs it touches in the row above; equivalences are recorded in an array union-find whose root
 * is always the smallest label of its set (Wu, Otoo & Suzuki 2009, Pattern Anal. Appl. 12:117)
 * instead of He's equivalence lists. The second scan works on runs, not pixels.
 *
 * Parallelism: the image is cut into horizontal strips scanned independently; their label sets are
 * then joined at the seams. Because provisional labels are created in raster order and roots are
 * set minima, the root of a component is the label of its first run, so the final numbering (in
 * raster order of each component's first pixel) and every statistic are the same at any strip
 * count. Moments are integer sums, so their accumulation order does not matter either.
 */
#include "detect/label.h"

#include <limits.h>
#include "detect/bytescan.h"

#include <stdlib.h>
#include <string.h>

#include <omp.h>

__extension__ typedef __int128 i128;

typedef struct run {
    uint16_t x0, x1; /* inclusive; SP_MAX_DIM = 16384 fits */
    int32_t label;   /* provisional label, local to the strip */
} run;

typedef struct strip {
    int y0, y1; /* rows [y0, y1) */
    run *runs;  /* runs of all rows of the strip, in raster order */
    size_t nruns, cap_runs;
    uint32_t *row_start; /* row r of the strip has runs [row_start[r], row_start[r + 1]) */
    size_t cap_rows;
    int32_t *parent; /* union-find over local labels */
    size_t nlabels, cap_labels;
    int failed; /* out of memory inside the parallel scan */
} strip;

struct sp_labeler {
    strip *strips;
    int cap_strips;
    int32_t *gparent; /* union-find over all labels (strip offsets applied) */
    size_t cap_gparent;
    int32_t *final; /* provisional global label -> final label 1..n */
    size_t cap_final;
    size_t *offset; /* first global label of each strip, ns + 1 entries */
    size_t cap_offset;
    sp_component *comps;
    size_t cap_comps;
    int sparse;           /* see sp_labeler_set_sparse */
    int32_t *last_labels; /* buffer of the last successful call, whose runs are still in strips */
    int last_w, last_h, last_ns;
};

void sp_labeler_set_sparse(sp_labeler *lb, int on)
{
    lb->sparse = on;
    lb->last_labels = NULL;
}

sp_labeler *sp_labeler_new(void)
{
    return calloc(1, sizeof(sp_labeler));
}

void sp_labeler_free(sp_labeler *lb)
{
    if (!lb)
        return;
    for (int i = 0; i < lb->cap_strips; i++) {
        free(lb->strips[i].runs);
        free(lb->strips[i].row_start);
        free(lb->strips[i].parent);
    }
    free(lb->strips);
    free(lb->gparent);
    free(lb->final);
    free(lb->offset);
    free(lb->comps);
    free(lb);
}

/* Grow *p to hold at least need elements of size sz (amortised doubling). */
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
        parent[a] = parent[parent[a]]; /* path halving */
        a = parent[a];
    }
    return a;
}

/* Join the sets of a and b; the smaller root wins so roots stay set minima. */
static void unite(int32_t *parent, int32_t a, int32_t b)
{
    a = find(parent, a);
    b = find(parent, b);
    if (a < b)
        parent[b] = a;
    else if (b < a)
        parent[a] = b;
}

/* First scan of one strip: runs, provisional labels, local equivalences. */
static int scan_strip(strip *s, const uint8_t *mask, ptrdiff_t mstride, int w, const uint8_t *occupied)
{
    int rows = s->y1 - s->y0;
    size_t per_row = (size_t)w / 2 + 1; /* most runs a row can hold */
    s->nruns = 0;
    s->nlabels = 0;
    if (grow((void **)&s->row_start, &s->cap_rows, (size_t)rows + 1, sizeof(uint32_t)))
        return -1;
    s->row_start[0] = 0;
    for (int r = 0; r < rows; r++) {
        if (grow((void **)&s->runs, &s->cap_runs, s->nruns + per_row, sizeof(run)) ||
            grow((void **)&s->parent, &s->cap_labels, s->nlabels + per_row, sizeof(int32_t)))
            return -1;
        const uint8_t *row = mask + (ptrdiff_t)(s->y0 + r) * mstride;
        size_t p = r ? s->row_start[r - 1] : 0, pend = r ? s->row_start[r] : 0;
        run *rs = s->runs;
        int x = occupied && !occupied[s->y0 + r] ? w : 0; /* a row known to be empty is not read */
        for (;;) {
            x = sp_scan_to(row, x, w, 0);
            if (x >= w)
                break;
            int e = sp_scan_to(row, x, w, 1); /* one past the run */
            int a0 = x, a1 = e - 1;
            /* Runs above that end left of a0-1 cannot touch this run or any later one. */
            while (p < pend && rs[p].x1 + 1 < a0)
                p++;
            int32_t lab = -1;
            for (size_t q = p; q < pend && rs[q].x0 <= a1 + 1; q++) {
                if (lab < 0)
                    lab = rs[q].label;
                else
                    unite(s->parent, lab, rs[q].label);
            }
            if (lab < 0) {
                lab = (int32_t)s->nlabels++;
                s->parent[lab] = lab;
            }
            rs[s->nruns].x0 = (uint16_t)a0;
            rs[s->nruns].x1 = (uint16_t)a1;
            rs[s->nruns].label = lab;
            s->nruns++;
            x = e;
        }
        s->row_start[r + 1] = (uint32_t)s->nruns;
    }
    return 0;
}

/* Zero the runs the strip wrote on the previous call. */
static void clear_strip(const strip *s, int w, int32_t *labels)
{
    for (int r = 0; r < s->y1 - s->y0; r++) {
        int32_t *out = labels + (size_t)(s->y0 + r) * (size_t)w;
        for (uint32_t i = s->row_start[r]; i < s->row_start[r + 1]; i++)
            memset(out + s->runs[i].x0, 0, (size_t)(s->runs[i].x1 - s->runs[i].x0 + 1) * sizeof *out);
    }
}

static void write_strip(const strip *s, const int32_t *final, size_t off, int w, int32_t *labels, int clear)
{
    for (int r = 0; r < s->y1 - s->y0; r++) {
        int32_t *out = labels + (size_t)(s->y0 + r) * (size_t)w;
        if (clear)
            memset(out, 0, (size_t)w * sizeof *out);
        for (uint32_t i = s->row_start[r]; i < s->row_start[r + 1]; i++) {
            const run *q = &s->runs[i];
            int32_t v = final[off + (size_t)q->label];
            for (int x = q->x0; x <= q->x1; x++)
                out[x] = v;
        }
    }
}

/* Σ_{k=0..n} k² */
static int64_t sum_sq(int64_t n)
{
    return n * (n + 1) * (2 * n + 1) / 6;
}

/* Central second moment Σ(a-ā)(b-b̄) = (m00·mab − ma·mb)/m00, numerator exact in 128 bits
 * (|m00·mab| < 2^26·2^56), so there is no cancellation whatever the image position. */
static double central(int64_t m00, int64_t mab, int64_t ma, int64_t mb)
{
    i128 num = (i128)m00 * mab - (i128)ma * mb;
    return (double)((long double)num / (long double)m00);
}

int sp_label_run(sp_labeler *lb, const uint8_t *mask, ptrdiff_t mstride, int w, int h, int32_t *labels,
                 const sp_component **comps, int *n, int nthreads, sp_error *err)
{
    return sp_label_run_rows(lb, mask, mstride, w, h, NULL, labels, comps, n, nthreads, err);
}

int sp_label_run_rows(sp_labeler *lb, const uint8_t *mask, ptrdiff_t mstride, int w, int h,
                      const uint8_t *rows, int32_t *labels, const sp_component **comps, int *n, int nthreads,
                      sp_error *err)
{
    int rc = SP_OK;
    if (comps)
        *comps = NULL;
    if (n)
        *n = 0;
    if (!lb || !mask || !labels || !comps || !n)
        return sp_error_set(err, SP_ERR_INTERNAL, "label: null argument");
    if ((rc = sp_check_dims(w, h, "label", err)))
        return rc;
    if (mstride < w)
        return sp_error_set(err, SP_ERR_INTERNAL, "label: mask stride %td is below the width %d", mstride, w);

    /* Sparse mode: undo the previous call's runs while they are still in the strips, or start from
     * a zeroed buffer. Until this call succeeds, the buffer's state is unknown. */
    int clear_rows = 1;
    if (lb->sparse) {
        if (lb->last_labels == labels && lb->last_w == w && lb->last_h == h)
            for (int i = 0; i < lb->last_ns; i++)
                clear_strip(&lb->strips[i], w, labels);
        else
            memset(labels, 0, (size_t)w * (size_t)h * sizeof *labels);
        lb->last_labels = NULL;
        clear_rows = 0;
    }

    int nt = nthreads > 0 ? nthreads : omp_get_max_threads();
    int ns = nt < h ? nt : h;
    if (ns < 1)
        ns = 1;
    if (ns > lb->cap_strips) {
        strip *t = realloc(lb->strips, (size_t)ns * sizeof *t);
        if (!t)
            goto fail;
        memset(t + lb->cap_strips, 0, (size_t)(ns - lb->cap_strips) * sizeof *t);
        lb->strips = t;
        lb->cap_strips = ns;
    }
    if (grow((void **)&lb->offset, &lb->cap_offset, (size_t)ns + 1, sizeof(size_t)))
        goto fail;
    for (int i = 0; i < ns; i++) {
        lb->strips[i].y0 = (int)((long long)h * i / ns);
        lb->strips[i].y1 = (int)((long long)h * (i + 1) / ns);
        lb->strips[i].failed = 0;
    }

    /* First scan, strips in parallel. */
#pragma omp parallel for num_threads(ns) schedule(static, 1)
    for (int i = 0; i < ns; i++)
        lb->strips[i].failed = scan_strip(&lb->strips[i], mask, mstride, w, rows) != 0;
    size_t total = 0;
    for (int i = 0; i < ns; i++) {
        if (lb->strips[i].failed)
            goto fail;
        lb->offset[i] = total;
        total += lb->strips[i].nlabels;
    }
    lb->offset[ns] = total;
    if (total > INT32_MAX)
        return sp_error_set(err, SP_ERR_INTERNAL, "label: %zu provisional labels overflow", total);

    /* Global equivalences: strip tables side by side, then the seams. */
    if (grow((void **)&lb->gparent, &lb->cap_gparent, total + 1, sizeof(int32_t)) ||
        grow((void **)&lb->final, &lb->cap_final, total + 1, sizeof(int32_t)))
        goto fail;
    for (int i = 0; i < ns; i++) {
        const strip *s = &lb->strips[i];
        for (size_t l = 0; l < s->nlabels; l++)
            lb->gparent[lb->offset[i] + l] = (int32_t)(lb->offset[i] + (size_t)s->parent[l]);
    }
    for (int i = 1; i < ns; i++) {
        const strip *a = &lb->strips[i - 1], *b = &lb->strips[i];
        int ra = a->y1 - a->y0 - 1;
        size_t p = a->row_start[ra], pend = a->row_start[ra + 1];
        for (uint32_t k = b->row_start[0]; k < b->row_start[1]; k++) {
            const run *c = &b->runs[k];
            while (p < pend && a->runs[p].x1 + 1 < c->x0)
                p++;
            for (size_t q = p; q < pend && a->runs[q].x0 <= c->x1 + 1; q++)
                unite(lb->gparent, (int32_t)(lb->offset[i - 1] + (size_t)a->runs[q].label),
                      (int32_t)(lb->offset[i] + (size_t)c->label));
        }
    }
    /* Roots are set minima, i.e. the label of each component's first run: numbering roots in
     * label order numbers components in raster order of their first pixel. */
    int32_t count = 0;
    for (size_t g = 0; g < total; g++) {
        int32_t r = find(lb->gparent, (int32_t)g);
        lb->final[g] = (size_t)r == g ? ++count : lb->final[r];
    }

    if (grow((void **)&lb->comps, &lb->cap_comps, (size_t)count + 1, sizeof(sp_component)))
        goto fail;
    for (int32_t c = 0; c < count; c++) {
        sp_component *k = &lb->comps[c];
        memset(k, 0, sizeof *k);
        k->x0 = INT_MAX;
        k->y0 = INT_MAX;
        k->x1 = -1;
        k->y1 = -1;
    }

    /* Second scan: labels image in parallel; statistics per run (closed forms over a run). */
#pragma omp parallel for num_threads(ns) schedule(static, 1)
    for (int i = 0; i < ns; i++)
        write_strip(&lb->strips[i], lb->final, lb->offset[i], w, labels, clear_rows);
    for (int i = 0; i < ns; i++) {
        const strip *s = &lb->strips[i];
        for (int r = 0; r < s->y1 - s->y0; r++) {
            int64_t y = s->y0 + r;
            for (uint32_t j = s->row_start[r]; j < s->row_start[r + 1]; j++) {
                const run *q = &s->runs[j];
                sp_component *k = &lb->comps[lb->final[lb->offset[i] + (size_t)q->label] - 1];
                int64_t a = q->x0, b = q->x1, len = b - a + 1;
                int64_t sx = (a + b) * len / 2;
                int64_t sxx = sum_sq(b) - (a > 0 ? sum_sq(a - 1) : 0);
                k->area += len;
                k->m10 += sx;
                k->m01 += y * len;
                k->m20 += sxx;
                k->m11 += y * sx;
                k->m02 += y * y * len;
                if (a < k->x0)
                    k->x0 = (int)a;
                if (b > k->x1)
                    k->x1 = (int)b;
                if (y < k->y0)
                    k->y0 = (int)y;
                if (y > k->y1)
                    k->y1 = (int)y;
            }
        }
    }
    for (int32_t c = 0; c < count; c++) {
        sp_component *k = &lb->comps[c];
        k->cx = (double)k->m10 / (double)k->area; /* exact integers below 2^53: one rounding */
        k->cy = (double)k->m01 / (double)k->area;
        k->mu20 = central(k->area, k->m20, k->m10, k->m10);
        k->mu11 = central(k->area, k->m11, k->m10, k->m01);
        k->mu02 = central(k->area, k->m02, k->m01, k->m01);
        k->border = (k->x0 == 0 ? SP_BORDER_LEFT : 0) | (k->y0 == 0 ? SP_BORDER_TOP : 0) |
                    (k->x1 == w - 1 ? SP_BORDER_RIGHT : 0) | (k->y1 == h - 1 ? SP_BORDER_BOTTOM : 0);
    }
    *comps = lb->comps;
    *n = count;
    if (lb->sparse) {
        lb->last_labels = labels;
        lb->last_w = w;
        lb->last_h = h;
        lb->last_ns = ns;
    }
    return SP_OK;

fail:
    return sp_error_set(err, SP_ERR_INTERNAL, "label: out of memory for a %dx%d mask", w, h);
}

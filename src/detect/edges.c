/* Sub-pixel outline of one labelled component; the method is described in edges.h. */
#include "detect/edges.h"

#include "detect/select.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#ifdef __SSE2__
#include <emmintrin.h>
#endif

static const int dir4[4][2] = {{1, 0}, {-1, 0}, {0, 1}, {0, -1}};

/* Grow a buffer to hold `need` elements of `size` bytes (contents kept, amortised growth). */
static int reserve(void **p, size_t *cap, size_t need, size_t size, sp_error *err)
{
    if (need <= *cap)
        return SP_OK;
    if (need > SIZE_MAX / size / 2)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: workspace size overflow");
    size_t n = need + need / 2;
    void *q = realloc(*p, n * size);
    if (!q)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: out of memory for %zu workspace entries", n);
    *p = q;
    *cap = n;
    return SP_OK;
}

void sp_edges_release(sp_edges *e)
{
    if (!e)
        return;
    free(e->ext);
    free(e->stack);
    free(e->opair);
    free(e->cell_pair);
    free(e->nv);
    free(e->pair_ok);
    free(e->pair_t);
    free(e->pair_w);
    free(e->vals);
    free(e->vbin);
    free(e->vsel);
    free(e->xy);
    free(e->wid);
    free(e->pdir);
    free(e->cpt);
    memset(e, 0, sizeof *e);
}

static inline int lab_at(const int32_t *labels, int w, int h, int x, int y)
{
    if (x < 0 || y < 0 || x >= w || y >= h)
        return -1;
    return labels[(size_t)y * (size_t)w + (size_t)x];
}

static inline uint64_t load8(const uint8_t *p)
{
    uint64_t v;
    memcpy(&v, p, sizeof v);
    return v;
}

/* Some byte of v is zero (the classic bit trick; bytes here are 0..2). */
static inline int has_zero_byte(uint64_t v)
{
    return ((v - 0x0101010101010101ull) & ~v & 0x8080808080808080ull) != 0;
}

/* One window row: 0 for the component's cells, `other` elsewhere (a separate function so the
 * compiler knows the two rows do not overlap, and vectorises). */
static void window_row(uint8_t *restrict o, const int32_t *restrict lr, int label, uint8_t other, int n)
{
    for (int x = 0; x < n; x++)
        o[x] = lr[x] == label ? 0 : other;
}

int sp_edges_exterior(sp_edges *e, const int32_t *labels, int w, int h, int label, const sp_component *c,
                      int holes_filled, sp_error *err)
{
    if (c->x0 < 0 || c->y0 < 0 || c->x1 >= w || c->y1 >= h || c->x0 > c->x1 || c->y0 > c->y1)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: component %d bounding box outside the frame",
                            label);
    e->wx0 = c->x0 - 1;
    e->wy0 = c->y0 - 1;
    e->ww = c->x1 - c->x0 + 3;
    e->wh = c->y1 - c->y0 + 3;
    const size_t ww = (size_t)e->ww, nw = ww * (size_t)e->wh;
    if (nw > UINT32_MAX >> 2)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: component %d window too large", label);
    int rc = reserve((void **)&e->ext, &e->ext_cap, nw, 1, err);
    if (!rc && !holes_filled)
        rc = reserve((void **)&e->stack, &e->stack_cap, nw, sizeof(int32_t), err);
    /* Room for an outline about the window's perimeter; a ragged one grows the list below. */
    if (!rc)
        rc = reserve((void **)&e->opair, &e->opair_cap, 4 * (ww + (size_t)e->wh) + 16, sizeof(uint32_t), err);
    if (rc)
        return rc;
    /* With holes filled, a cell the component encloses would be a hole of the mask (background) or
     * another component reached only through one (labels are 8-connected): neither exists, so all
     * cells outside the component are exterior. */
    const uint8_t other = holes_filled ? 2 : 1;
    /* The window's frame columns [xa, xb): only its 1-px padding can fall off the frame. */
    const int xa = e->wx0 < 0 ? -e->wx0 : 0, xb = e->wx0 + e->ww > w ? w - e->wx0 : e->ww;
    for (int y = 0; y < e->wh; y++) {
        uint8_t *row = e->ext + (size_t)y * ww;
        int yy = e->wy0 + y;
        if (yy < 0 || yy >= h) {
            memset(row, other, ww);
            continue;
        }
        memset(row, other, (size_t)xa);
        memset(row + xb, other, ww - (size_t)xb);
        window_row(row + xa, labels + (size_t)yy * (size_t)w + (size_t)(e->wx0 + xa), label, other, xb - xa);
    }
    /* 4-connected flood of non-component cells from the window frame: the dual of the 8-connected
     * component, so a diagonal gap in the outline does not leak into an enclosed region. */
    size_t sp = 0;
    for (int y = 0; y < e->wh && !holes_filled; y++)
        for (int x = 0; x < e->ww; x++)
            if (y == 0 || x == 0 || y == e->wh - 1 || x == e->ww - 1) {
                size_t i = (size_t)y * e->ww + x;
                if (e->ext[i] == 1) {
                    e->ext[i] = 2;
                    e->stack[sp++] = (int32_t)i;
                }
            }
    while (sp) {
        int32_t i = e->stack[--sp];
        int x = i % e->ww, y = i / e->ww;
        const int nb[4][2] = {{1, 0}, {-1, 0}, {0, 1}, {0, -1}};
        for (int k = 0; k < 4; k++) {
            int xx = x + nb[k][0], yy = y + nb[k][1];
            if (xx < 0 || yy < 0 || xx >= e->ww || yy >= e->wh)
                continue;
            size_t j = (size_t)yy * e->ww + xx;
            if (e->ext[j] == 1) {
                e->ext[j] = 2;
                e->stack[sp++] = (int32_t)j;
            }
        }
    }
    /* The outline pairs, listed once for the stages that walk them: a component pixel and its
     * 4-neighbour in the exterior and inside the frame (the window's padding holds every neighbour;
     * padding off the frame is exterior but pairs with nothing). Runs of eight cells with no
     * component cell, or eight component cells whose neighbours are all component, are skipped
     * whole. */
    const int left_off = e->wx0<0, right_off = e->wx0 + e->ww> w;
    const int top_off = e->wy0<0, bottom_off = e->wy0 + e->wh> h;
    e->nopair = 0;
    for (int wy = 1; wy < e->wh - 1; wy++) {
        const uint8_t *r = e->ext + (size_t)wy * ww, *ru = r - ww, *rd = r + ww;
        const int up_ok = !(wy == 1 && top_off), down_ok = !(wy == e->wh - 2 && bottom_off);
        int wx = 1;
        while (wx < e->ww - 1) {
            if (wx + 8 < e->ww) { /* cells wx..wx+7 and their neighbours lie in the window */
                uint64_t c0 = load8(r + wx);
                if (!has_zero_byte(c0) ||
                    (c0 | load8(r + wx - 1) | load8(r + wx + 1) | load8(ru + wx) | load8(rd + wx)) == 0) {
                    wx += 8;
                    continue;
                }
            }
            if (r[wx] == 0) {
                if (e->nopair + 4 > e->opair_cap &&
                    (rc = reserve((void **)&e->opair, &e->opair_cap, e->nopair + 4, sizeof(uint32_t), err)))
                    return rc;
                uint32_t i = (uint32_t)((size_t)wy * ww + (size_t)wx) << 2;
                /* dir4's order: +x, -x, +y, -y. */
                if (r[wx + 1] == 2 && !(wx == e->ww - 2 && right_off))
                    e->opair[e->nopair++] = i | 0;
                if (r[wx - 1] == 2 && !(wx == 1 && left_off))
                    e->opair[e->nopair++] = i | 1;
                if (rd[wx] == 2 && down_ok)
                    e->opair[e->nopair++] = i | 2;
                if (ru[wx] == 2 && up_ok)
                    e->opair[e->nopair++] = i | 3;
            }
            wx++;
        }
    }
    return SP_OK;
}

/* A walk over the outline pairs in their (raster) order: it follows the window row, so finding a
 * pair's pixel needs no division. */
typedef struct pair_walk {
    size_t row0; /* window index of the row's first cell */
    int wy;
} pair_walk;

/* Pixel (x, y) and direction (dx, dy) of outline pair k, k not below the walk's last. */
static inline void opair_at(const sp_edges *e, pair_walk *pw, size_t k, int *x, int *y, int *dx, int *dy)
{
    uint32_t p = e->opair[k];
    size_t i = p >> 2;
    int d = (int)(p & 3);
    while (i >= pw->row0 + (size_t)e->ww) {
        pw->row0 += (size_t)e->ww;
        pw->wy++;
    }
    *x = e->wx0 + (int)(i - pw->row0);
    *y = e->wy0 + pw->wy;
    *dx = dir4[d][0];
    *dy = dir4[d][1];
}

static inline int ext_at(const sp_edges *e, int x, int y)
{
    int wx = x - e->wx0, wy = y - e->wy0;
    if (wx < 0 || wy < 0 || wx >= e->ww || wy >= e->wh)
        return 2;
    return e->ext[(size_t)wy * e->ww + wx];
}

/* On x86-64, the patch rows are also compiled for AVX2 and the variant picked at load time (twice the
 * divisions per instruction; IEEE division gives the same bits at any width). */
#if defined(__x86_64__) && defined(__GNUC__)
#define ROW_CLONES __attribute__((target_clones("avx2", "default")))
#else
#define ROW_CLONES
#endif

/* One row of the patch: sp_view_norm's arithmetic, bit for bit (raw / (bg · gain) where that divisor
 * is positive, else 0). Dividing by 1 where the result is then multiplied by 0 (raw is finite) keeps
 * the loop free of branches, so the compiler vectorises it. One body for both sample depths. */
#define NORM_ROW(name, sample_t)                                                                             \
    ROW_CLONES static void name(float *restrict o, const sample_t *restrict raw, const float *restrict bg,   \
                                float gain, int n)                                                           \
    {                                                                                                        \
        for (int i = 0; i < n; i++) {                                                                        \
            float b = bg[i] * gain;                                                                          \
            int pos = b > 0.f;                                                                               \
            float d = pos ? b : 1.f;                                                                         \
            float q = (float)raw[i] / d;                                                                     \
            o[i] = q * (float)pos;                                                                           \
        }                                                                                                    \
    }
NORM_ROW(norm_row8, uint8_t)
NORM_ROW(norm_row16, uint16_t)

/* Fill e->nv over the bounding box grown by SP_EDGE_REACH_PX, clipped to the frame. Its size is at
 * most the frame's, which the sources bound (sp_check_dims). */
static int make_patch(sp_edges *e, const sp_frame_view *v, const sp_component *c, sp_error *err)
{
    const sp_image *f = v->frame;
    const int w = f->width, h = f->height, R = SP_EDGE_REACH_PX;
    int x0 = c->x0 > R ? c->x0 - R : 0, y0 = c->y0 > R ? c->y0 - R : 0;
    int x1 = c->x1 < w - 1 - R ? c->x1 + R : w - 1, y1 = c->y1 < h - 1 - R ? c->y1 + R : h - 1;
    e->px0 = x0;
    e->py0 = y0;
    e->pw = x1 - x0 + 1;
    e->ph = y1 - y0 + 1;
    int rc = reserve((void **)&e->nv, &e->nv_cap, (size_t)e->pw * (size_t)e->ph, sizeof(float), err);
    if (rc)
        return rc;
    /* Every read moves along a row or a column from a pixel of the window (bounding box grown by 1),
     * so the corners beyond both its row and its column range are never read: marked NaN, not
     * computed. */
    const int cx0 = c->x0 - 1 > x0 ? c->x0 - 1 : x0, cx1 = c->x1 + 1 < x1 ? c->x1 + 1 : x1;
    for (int y = y0; y <= y1; y++) {
        float *o = e->nv + (size_t)(y - y0) * (size_t)e->pw;
        int a = x0, b = x1; /* columns computed */
        if (y < c->y0 - 1 || y > c->y1 + 1) {
            a = cx0;
            b = cx1;
            for (int x = x0; x < a; x++)
                o[x - x0] = NAN;
            for (int x = b + 1; x <= x1; x++)
                o[x - x0] = NAN;
        }
        const float *bg = v->bg + (size_t)y * (size_t)w + (size_t)a;
        if (f->bytes == 1)
            norm_row8(o + (a - x0), sp_row8(f, y) + a, bg, v->gain, b - a + 1);
        else
            norm_row16(o + (a - x0), sp_row16(f, y) + a, bg, v->gain, b - a + 1);
    }
    return SP_OK;
}

/* Patch value at frame position (x, y), which must lie in the patch. */
static inline float patch_at(const sp_edges *e, int x, int y)
{
    return e->nv[(size_t)(y - e->py0) * (size_t)e->pw + (size_t)(x - e->px0)];
}

#define QBINS 1024 /* transmission bins over [0, 2) for the quantile's first pass */
#define QBINS2 256 /* sub-bins of one bin, for its second */

/* Samples for a quantile (in e->vals; e->vbin holds as many bins). */
typedef struct gatherer {
    float *v;
    uint16_t *bin;
    float *sel;
    size_t n;
} gatherer;

static int gather_begin(sp_edges *e, gatherer *g, size_t cap, sp_error *err)
{
    int rc = reserve((void **)&e->vals, &e->vals_cap, cap, sizeof(float), err);
    if (!rc)
        rc = reserve((void **)&e->vbin, &e->vbin_cap, cap, sizeof(uint16_t), err);
    if (!rc)
        rc = reserve((void **)&e->vsel, &e->vsel_cap, cap, sizeof(float), err);
    if (rc)
        return rc;
    g->v = e->vals;
    g->bin = e->vbin;
    g->sel = e->vsel;
    g->n = 0;
    return SP_OK;
}

/* Histogram bins of the samples v[0..n) scaled by `scale` after subtracting `base`, clamped to
 * [0, nb − 1] (NaN to 0): a monotone map, so a bin's samples all lie between those of the bins
 * around it. A loop of its own, which vectorises. */
static void bins_of(const float *restrict v, uint16_t *restrict bin, size_t n, float base, float scale,
                    int nb)
{
    for (size_t i = 0; i < n; i++) {
        float f = (v[i] - base) * scale;
        f = f > 0.f ? f : 0.f;
        f = f < (float)(nb - 1) ? f : (float)(nb - 1);
        bin[i] = (uint16_t)(int)f;
    }
}

/* The bin holding rank k of n binned samples; *below = samples in the bins before it. Two tables,
 * even and odd samples: neighbours often share a bin, and one table would make each increment wait
 * for the last. */
static int rank_bin(const uint16_t *bin, size_t n, int nb, size_t k, size_t *below)
{
    uint32_t hist[2][QBINS];
    memset(hist[0], 0, (size_t)nb * sizeof hist[0][0]);
    memset(hist[1], 0, (size_t)nb * sizeof hist[1][0]);
    size_t i = 0;
    for (; i + 1 < n; i += 2) {
        hist[0][bin[i]]++;
        hist[1][bin[i + 1]]++;
    }
    if (i < n)
        hist[0][bin[i]]++;
    size_t s = 0;
    int b = 0;
    while (s + hist[0][b] + hist[1][b] <= k) {
        s += hist[0][b] + hist[1][b];
        b++;
    }
    *below = s;
    return b;
}

/* The samples of bin b copied to out, without a branch (a bin often holds a tenth of the samples, too
 * many for a branch to be predicted); returns their count. */
static size_t bin_members(const float *restrict v, const uint16_t *restrict bin, size_t n, int b,
                          float *restrict out)
{
    size_t m = 0;
    for (size_t i = 0; i < n; i++) {
        out[m] = v[i];
        m += bin[i] == b;
    }
    return m;
}

/* q-quantile (0..1) of the gathered samples: the element of rank round(q·(n−1)), exact (its value does
 * not depend on the method). Large sets go through histograms first (a radix selection): QBINS bins
 * of transmission over [0, 2), then, when the rank's bin still holds many samples (transmissions
 * crowd near the light and the dark levels), that bin split QBINS2 ways; a selection among the few
 * values left ends it: quickselect's unpredictable branches on thousands of values cost several
 * times more. Reorders the samples. */
static float quantile(gatherer *g, double q)
{
    size_t n = g->n;
    size_t k = (size_t)(q * (double)(n - 1) + 0.5);
    if (k >= n)
        k = n - 1;
    if (n < 256)
        return sp_select_float(g->v, n, k);
    size_t below;
    bins_of(g->v, g->bin, n, 0.f, QBINS / 2, QBINS);
    int b = rank_bin(g->bin, n, QBINS, k, &below);
    size_t m = bin_members(g->v, g->bin, n, b, g->sel);
    k -= below;
    if (m < 64)
        return sp_select_float(g->sel, m, k);
    /* Bin b spans [b, b + 1) / (QBINS / 2) (the last bin, everything above): the same map refined. */
    bins_of(g->sel, g->bin, m, (float)b / (QBINS / 2), (float)QBINS2 * (QBINS / 2), QBINS2);
    b = rank_bin(g->bin, m, QBINS2, k, &below);
    m = bin_members(g->sel, g->bin, m, b, g->v);
    return sp_select_float(g->v, m, k - below);
}

/* Smallest of v[0..n) (never NaN here), in four independent chains: one would wait on each
 * comparison in turn. 1e30 when n = 0. */
static float min_float(const float *v, size_t n)
{
    float m[4] = {1e30f, 1e30f, 1e30f, 1e30f};
    size_t i = 0;
    for (; i + 4 <= n; i += 4)
        for (int j = 0; j < 4; j++)
            m[j] = v[i + j] < m[j] ? v[i + j] : m[j];
    for (; i < n; i++)
        m[0] = v[i] < m[0] ? v[i] : m[0];
    float a = m[0] < m[1] ? m[0] : m[1], b = m[2] < m[3] ? m[2] : m[3];
    return a < b ? a : b;
}

int sp_edges_levels(sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                    const sp_component *c, sp_error *err)
{
    int w = v->frame->width, h = v->frame->height;
    int rc = make_patch(e, v, c, err);
    if (rc)
        return rc;
    /* The component's pixels, copied run by run (a row of a bubble is one run or a few), the window's
     * bytes examined eight at a time. */
    gatherer g;
    const int bw = c->x1 - c->x0 + 1;
    if ((rc = gather_begin(e, &g, (size_t)c->area, err)))
        return rc;
    const size_t lim = e->vals_cap < e->vbin_cap ? e->vals_cap : e->vbin_cap;
    for (int y = c->y0; y <= c->y1; y++) {
        const uint8_t *er = e->ext + (size_t)(y - e->wy0) * e->ww + (size_t)(c->x0 - e->wx0);
        const float *pr = e->nv + (size_t)(y - e->py0) * (size_t)e->pw + (size_t)(c->x0 - e->px0);
        int x = 0;
        while (x < bw) {
            while (x + 8 <= bw && !has_zero_byte(load8(er + x)))
                x += 8;
            while (x < bw && er[x] != 0)
                x++;
            int a = x;
            while (x + 8 <= bw && load8(er + x) == 0)
                x += 8;
            while (x < bw && er[x] == 0)
                x++;
            size_t len = (size_t)(x - a);
            if (len > lim - g.n)
                len = lim - g.n; /* only if the component's area was wrong */
            memcpy(g.v + g.n, pr + a, len * sizeof(float));
            g.n += len;
        }
    }
    const float nmin = min_float(g.v, g.n);
    if (g.n == 0)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: component %d has no pixels", label);
    e->n_min = nmin;
    e->n_dark = quantile(&g, 0.2);

    if ((rc = gather_begin(e, &g, 8 * e->nopair, err)))
        return rc;
    const ptrdiff_t pw = e->pw;
    pair_walk pwk = {0, 0};
    for (size_t q = 0; q < e->nopair; q++) {
        int x, y, dx, dy;
        opair_at(e, &pwk, q, &x, &y, &dx, &dy);
        /* Samples k = 3..10 out, up to the frame's edge or another bubble. */
        int kmax = dx > 0 ? w - 1 - x : dx < 0 ? x : dy > 0 ? h - 1 - y : y;
        kmax = kmax < SP_EDGE_REACH_PX ? kmax : SP_EDGE_REACH_PX;
        const int32_t *lp = labels + (size_t)y * (size_t)w + (size_t)x;
        const float *pp = e->nv + (size_t)(y - e->py0) * (size_t)pw + (size_t)(x - e->px0);
        const ptrdiff_t ls = dx + (ptrdiff_t)dy * w, ps = dx + (ptrdiff_t)dy * pw;
        for (int k = 3; k <= kmax; k++) {
            if (lp[k * ls] != 0)
                break; /* met another bubble */
            g.v[g.n++] = pp[k * ps];
        }
    }
    /* No visible surroundings: the background model's own light level. */
    e->n_light = g.n ? quantile(&g, 0.5) : 1.0f;
    return SP_OK;
}

/* Segments j = k + 3 (0..6) of the profile s[k + 3] = n(p + k·d), k = −3..4, that cross `level`
 * upwards, s[j] < level <= s[j + 1] (NaN samples cross nothing), as bits: found without branches,
 * whose outcome the data decide and the processor would mispredict when all are tested. */
static inline unsigned up_crossings(const double s[8], double level)
{
    unsigned lt = 0, ge = 0; /* bit j: s[j] < level, s[j] >= level (both clear for NaN) */
#ifdef __SSE2__
    const __m128d l = _mm_set1_pd(level);
    for (int j = 0; j < 8; j += 2) {
        __m128d v = _mm_loadu_pd(s + j);
        lt |= (unsigned)_mm_movemask_pd(_mm_cmplt_pd(v, l)) << j;
        ge |= (unsigned)_mm_movemask_pd(_mm_cmpge_pd(v, l)) << j;
    }
#else
    for (int j = 0; j < 8; j++) {
        lt |= (unsigned)(s[j] < level) << j;
        ge |= (unsigned)(s[j] >= level) << j;
    }
#endif
    return lt & ge >> 1 & 0x7f;
}

/* Position of the crossing in segment j, linear between its samples. */
static inline double segment_crossing(const double s[8], int j, double level)
{
    return (j - 3) + (level - s[j]) / (s[j + 1] - s[j]);
}

/* Position of the upward crossing of `level` nearest to the p–q step (segments k = 0, −1, 1, −2, 2,
 * −3, 3: nearest first, the inner one of two equally near); NaN if none. Where it lies varies with
 * the blur, so the segment is chosen by bit arithmetic rather than by a chain of branches: the
 * highest crossing segment of 0..3 against the lowest of 4..6. */
static inline double crossing(const double s[8], double level)
{
    unsigned m = up_crossings(s, level);
    if (!m)
        return NAN;
    /* Highest of 0..3 (−1 if none) and lowest of 4..6 (7 if none): "none" is 4 away, farther than any. */
    int jl = 30 - __builtin_clz((m & 0x0f) << 1 | 1), jh = __builtin_ctz((m & 0x70) | 0x80);
    return segment_crossing(s, 3 - jl <= jh - 3 ? jl : jh, level);
}

/* The profile at position t (in samples, k = −3..4), linearly interpolated; NaN outside. */
static double profile_at(const double s[8], double t)
{
    if (!(t >= -3.0 && t <= 4.0))
        return NAN;
    int k = (int)t; /* floor(t) */
    k -= k > t;
    if (k >= 4)
        return s[7];
    double f = t - k;
    return s[k + 3] + f * (s[k + 4] - s[k + 3]);
}

static inline int in_patch(const sp_edges *e, int x, int y)
{
    return x >= e->px0 && y >= e->py0 && x < e->px0 + e->pw && y < e->py0 + e->ph;
}

/* Profile s[k + 3] = n(p + k·d), k = −3..4, across the outline at pixel (x, y) of the window towards
 * its neighbour (x + dx, y + dy); NaN marks samples off the frame (within the reach, off the patch). */
static void profile(const sp_edges *e, int x, int y, int dx, int dy, double s[8])
{
    const float *p = e->nv + (size_t)(y - e->py0) * (size_t)e->pw + (size_t)(x - e->px0);
    const ptrdiff_t st = dx + (ptrdiff_t)dy * e->pw;
    if (in_patch(e, x - 3 * dx, y - 3 * dy) && in_patch(e, x + 4 * dx, y + 4 * dy)) {
        for (int k = -3; k <= 4; k++) /* both ends in the patch, so every sample between */
            s[k + 3] = (double)p[k * st];
        return;
    }
    for (int k = -3; k <= 4; k++)
        s[k + 3] = in_patch(e, x + k * dx, y + k * dy) ? (double)p[k * st] : NAN;
}

/* Nearest upward crossing of `level` to position t0 (the first of two equally near). */
static inline double crossing_near(const double s[8], double level, double t0)
{
    unsigned m = up_crossings(s, level);
    if (!(m & (m - 1))) /* none or one, the usual case: it is the nearest (t and t0 are finite) */
        return m ? segment_crossing(s, __builtin_ctz(m), level) : NAN;
    double best = NAN, bd = 1e30;
    for (; m; m &= m - 1) {
        int j = __builtin_ctz(m);
        double t = segment_crossing(s, j, level);
        if (fabs(t - t0) < bd) {
            bd = fabs(t - t0);
            best = t;
        }
    }
    return best;
}

/* One outline pair: the crossing t (samples along the pair direction from the component pixel),
 * the inner level of its local step (NaN if unread) and the width between the 25 % and 75 % crossings
 * of that step (NaN if either falls off the profile). Returns 0 when no crossing was found. */
static int pair_point(const sp_edges *e, int x, int y, int dx, int dy, double glevel, double light,
                      double frac, double *t_out, double *nin_out, double *w_out)
{
    double s[8];
    profile(e, x, y, dx, dy, s);
    double t = crossing(s, glevel);
    *nin_out = NAN;
    *w_out = NAN;
    if (isnan(t))
        return 0;
    double nin = profile_at(s, t - SP_EDGE_INSET_PX);
    if (isfinite(nin) && nin < light) {
        double t2 = crossing(s, nin + frac * (light - nin));
        if (!isnan(t2))
            t = t2;
        *nin_out = nin;
        /* Sharpness: the width of the central half of the same local step. */
        double step = light - nin;
        double t25 = crossing_near(s, nin + 0.25 * step, t), t75 = crossing_near(s, nin + 0.75 * step, t);
        if (!isnan(t25) && !isnan(t75) && t75 >= t25)
            *w_out = t75 - t25;
    }
    *t_out = t;
    return 1;
}

int sp_edges_points(sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                    const sp_component *c, double frac, sp_error *err)
{
    (void)v;      /* the transmission patch was filled by sp_edges_levels */
    (void)labels; /* the outline pairs were listed by sp_edges_exterior */
    (void)label;
    (void)c;
    const double light = e->n_light, step = light - e->n_dark;
    const double glevel = e->n_dark + frac * step;
    int rc;
    e->n = 0;

    /* The crossing of edge_level of the local step, from the transmission SP_EDGE_INSET_PX inside
     * the crossing of the component-wide level to the light. Every buffer holds one entry per pair. */
    const size_t np = e->nopair;
    if (np > e->pair_cap) {
        size_t c1 = e->pair_cap, c2 = e->pair_cap, c3 = e->pair_cap;
        if ((rc = reserve((void **)&e->pair_ok, &c1, np, 1, err)) ||
            (rc = reserve((void **)&e->pair_t, &c2, np, sizeof(double), err)) ||
            (rc = reserve((void **)&e->pair_w, &c3, np, sizeof(float), err)))
            return rc;
        e->pair_cap = c1 < c2 ? (c1 < c3 ? c1 : c3) : (c2 < c3 ? c2 : c3);
    }
    if ((rc = reserve((void **)&e->xy, &e->xy_cap, 2 * np, sizeof(double), err)))
        return rc;
    if (np > e->aux_cap) {
        size_t cap = e->aux_cap;
        size_t cap2 = e->aux_cap;
        if ((rc = reserve((void **)&e->wid, &cap, np, sizeof(float), err)) ||
            (rc = reserve((void **)&e->pdir, &cap2, 2 * np, 1, err)))
            return rc;
        e->aux_cap = cap < cap2 / 2 ? cap : cap2 / 2;
    }
    gatherer g;
    if ((rc = gather_begin(e, &g, np, err)))
        return rc;
    e->cached_level = glevel;
    e->cached_light = light;
    pair_walk pwk = {0, 0};
    for (size_t q = 0; q < np; q++) {
        int x, y, dx, dy;
        opair_at(e, &pwk, q, &x, &y, &dx, &dy);
        double t;
        double nin;
        double wd;
        e->pair_ok[q] = (int8_t)pair_point(e, x, y, dx, dy, glevel, light, frac, &t, &nin, &wd);
        e->pair_t[q] = t;
        e->pair_w[q] = (float)wd;
        if (!e->pair_ok[q])
            continue;
        if (isfinite(nin))
            g.v[g.n++] = (float)nin;
        e->xy[2 * e->n] = x + t * dx;
        e->xy[2 * e->n + 1] = y + t * dy;
        e->wid[e->n] = (float)wd;
        e->pdir[2 * e->n] = (int8_t)dx;
        e->pdir[2 * e->n + 1] = (int8_t)dy;
        e->n++;
    }
    /* Median inner level of the local steps, for the partial-coverage area. */
    e->n_step_in = g.n ? quantile(&g, 0.5) : e->n_dark;
    return SP_OK;
}

int sp_edges_trace(sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                   const sp_component *c, double frac, sp_error *err)
{
    /* Directions clockwise on screen (y down): E, S, W, N. */
    static const int D[4][2] = {{1, 0}, {0, 1}, {-1, 0}, {0, -1}};
    int w = v->frame->width, h = v->frame->height;
    const double light = e->n_light, glevel = e->n_dark + frac * (light - e->n_dark);
    e->nc = 0;
    /* Start: the first component pixel in raster order; its north side faces the exterior. */
    int sx = -1, sy = c->y0;
    for (int x = c->x0; x <= c->x1; x++)
        if (labels[(size_t)sy * w + x] == label) {
            sx = x;
            break;
        }
    if (sx < 0)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: component %d has no pixel on its top row", label);
    const int cached = e->pair_cap >= e->nopair && e->cached_level == glevel && e->cached_light == light;
    int rc;
    if (cached) {
        /* Each window cell's first outline pair, for find_pair. */
        size_t nw = (size_t)e->ww * (size_t)e->wh;
        if ((rc = reserve((void **)&e->cell_pair, &e->cell_pair_cap, nw, sizeof(int32_t), err)))
            return rc;
        memset(e->cell_pair, 0xff, nw * sizeof(int32_t));
        for (size_t k = e->nopair; k-- > 0;)
            e->cell_pair[e->opair[k] >> 2] = (int32_t)k;
    }
    /* Each crack is walked once: one per outline pair, plus those along the frame's edge. */
    size_t maxc = 4 * (size_t)c->area + 4 * (size_t)(e->ww + e->wh) + 8;
    if ((rc = reserve((void **)&e->cpt, &e->c_cap, e->nopair + 2 * (size_t)(e->ww + e->wh) + 8,
                      sizeof(sp_contour_pt), err)))
        return rc;
    /* The walk runs on window cells: a cell not in the exterior lies in the bounding box (the padding
     * is exterior), so its eight neighbours are in the window. */
    const ptrdiff_t ww = e->ww;
    const ptrdiff_t off[4] = {1, ww, -1, -ww};  /* D as window index steps */
    static const uint32_t d4[4] = {0, 2, 1, 3}; /* D's directions in dir4's order (pair codes) */
    const uint8_t *ext = e->ext;
    ptrdiff_t i = (ptrdiff_t)(sy - e->wy0) * ww + (sx - e->wx0);
    int x = sx, y = sy, d = 3;
    for (size_t it = 0; it < maxc; it++) {
        if ((size_t)e->nc >= e->c_cap &&
            (rc = reserve((void **)&e->cpt, &e->c_cap, (size_t)e->nc + 1, sizeof(sp_contour_pt), err)))
            return rc;
        int dx = D[d][0], dy = D[d][1];
        double t = 0, nin, wd = NAN;
        int ok = x + dx >= 0 && y + dy >= 0 && x + dx < w && y + dy < h;
        if (ok) {
            /* The same pair as in sp_edges_points: its result when cached (the cell's pairs follow its
             * first one, in dir4's order), else computed. */
            long q = -1;
            if (cached)
                for (int32_t k = e->cell_pair[i];
                     k >= 0 && (size_t)k < e->nopair && e->opair[k] >> 2 == (uint32_t)i; k++)
                    if ((e->opair[k] & 3) == d4[d]) {
                        q = k;
                        break;
                    }
            if (q >= 0) {
                ok = e->pair_ok[q];
                t = e->pair_t[q];
                wd = e->pair_w[q];
            } else {
                ok = pair_point(e, x, y, dx, dy, glevel, light, frac, &t, &nin, &wd);
            }
            ok = ok && fabs(t) <= 2.5;
        }
        sp_contour_pt *q = &e->cpt[e->nc++];
        q->x = ok ? x + t * dx : x + 0.5 * dx;
        q->y = ok ? y + t * dy : y + 0.5 * dy;
        q->wid = ok ? (float)wd : NAN;
        q->dx = (int8_t)dx;
        q->dy = (int8_t)dy;
        q->ok = (uint8_t)ok;
        /* Walk along this crack in direction d+1 (exterior on the left); the diagonal cell first so
         * the object is 8-connected, as labelled. */
        int m = (d + 1) & 3;
        if (ext[i + off[m] + off[d]] != 2) {
            i += off[m] + off[d];
            x += D[m][0] + dx;
            y += D[m][1] + dy;
            d = (d + 3) & 3;
        } else if (ext[i + off[m]] != 2) {
            i += off[m];
            x += D[m][0];
            y += D[m][1];
        } else {
            d = m;
        }
        if (x == sx && y == sy && d == 3)
            return SP_OK;
    }
    return sp_error_set(err, SP_ERR_INTERNAL, "measure: contour of component %d does not close", label);
}

double sp_edges_area(const sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                     const sp_component *c)
{
    int w = v->frame->width, h = v->frame->height;
    double step = (double)e->n_light - (double)e->n_step_in;
    if (!(step > 1e-3))
        return (double)c->area;
    double area = 0;
    /* Walk the padded window: the exterior band lies at most 1 px outside the bounding box. */
    for (int wy = 0; wy < e->wh; wy++)
        for (int wx = 0; wx < e->ww; wx++) {
            int x = e->wx0 + wx, y = e->wy0 + wy;
            int state = e->ext[(size_t)wy * e->ww + wx];
            if (state == 1) {
                area += 1.0; /* enclosed: part of the bubble's projection */
                continue;
            }
            int lab = lab_at(labels, w, h, x, y);
            if (lab < 0)
                continue;
            /* Is the pixel on the band: next to a pixel of the other side? */
            int band = 0;
            for (int ddy = -1; ddy <= 1 && !band; ddy++)
                for (int ddx = -1; ddx <= 1 && !band; ddx++) {
                    if (!ddx && !ddy)
                        continue;
                    int s2 = ext_at(e, x + ddx, y + ddy);
                    band = state == 0 ? s2 == 2 : s2 == 0;
                }
            if (state == 0 && !band) {
                area += 1.0;
                continue;
            }
            if (!band || (state == 2 && lab != 0))
                continue; /* far exterior, or another bubble's pixel */
            double cov = ((double)e->n_light - (double)patch_at(e, x, y)) / step;
            /* Loose clamp only: clamping at 0 and 1 would turn the noise of the band into a bias. */
            if (cov < -0.25)
                cov = -0.25;
            if (cov > 1.25)
                cov = 1.25;
            area += cov;
        }
    (void)label;
    return area;
}

/* Per-pixel percentile background over sampled frames. */
#include "detect/background.h"

#include <math.h>
#include <omp.h>
#include <stdlib.h>
#include <string.h>

struct sp_bg_builder {
    int w, h, bytes, nmax, n;
    uint8_t *planes; /* n frames, each w·h·bytes, packed without padding */
};

int sp_bg_builder_new(sp_bg_builder **out, int w, int h, int bytes, int nmax, sp_error *err)
{
    *out = NULL;
    int rc = sp_check_dims(w, h, "background", err);
    if (rc)
        return rc;
    if (nmax < 1 || nmax > SP_BG_MAX_SAMPLES || (bytes != 1 && bytes != 2))
        return sp_error_set(err, SP_ERR_INTERNAL, "background: bad sample count %d or depth %d", nmax, bytes);
    sp_bg_builder *b = calloc(1, sizeof *b);
    size_t plane = (size_t)w * (size_t)h * (size_t)bytes;
    if (!b || !(b->planes = malloc(plane * (size_t)nmax))) {
        free(b);
        return sp_error_set(err, SP_ERR_INTERNAL, "background: out of memory for %d frames of %dx%d", nmax, w,
                            h);
    }
    b->w = w;
    b->h = h;
    b->bytes = bytes;
    b->nmax = nmax;
    *out = b;
    return SP_OK;
}

int sp_bg_builder_add(sp_bg_builder *b, const sp_image *f, sp_error *err)
{
    if (f->width != b->w || f->height != b->h || f->bytes != b->bytes)
        return sp_error_set(err, SP_ERR_INTERNAL, "background: frame geometry differs from the first");
    if (b->n >= b->nmax)
        return sp_error_set(err, SP_ERR_INTERNAL, "background: more than %d frames added", b->nmax);
    size_t row = (size_t)b->w * (size_t)b->bytes;
    uint8_t *dst = b->planes + (size_t)b->n * row * (size_t)b->h;
    for (int y = 0; y < b->h; y++)
        memcpy(dst + (size_t)y * row, (const uint8_t *)f->data + (ptrdiff_t)y * f->stride, row);
    b->n++;
    return SP_OK;
}

int sp_bg_builder_count(const sp_bg_builder *b)
{
    return b->n;
}

void sp_bg_builder_reset(sp_bg_builder *b)
{
    b->n = 0;
}

#define SEL_CHUNK 64 /* pixels selected together: their samples stay in L1 across the bit rounds */

/* The k-th smallest (0-based) of each pixel's n samples, for the len pixels at offset off of every
 * plane: a bitwise binary search on the value (radix selection). The answer is the largest c with
 * #{v < c} <= k; it is built from the top bit down, each round counting for every pixel how many of
 * its samples lie below the candidate. Every round is a pass of compares over contiguous bytes, which
 * the compiler vectorises, where a per-pixel quickselect gathers samples a plane apart. n <= 255, so
 * counts fit a byte. */
static void select8(const uint8_t *planes, size_t plane, int n, size_t off, int len, int k, uint8_t *out,
                    uint8_t *next)
{
    uint8_t res[SEL_CHUNK] = {0}, cand[SEL_CHUNK], cnt[SEL_CHUNK];
    for (int bit = 7; bit >= 0; bit--) {
        for (int x = 0; x < len; x++) {
            cand[x] = (uint8_t)(res[x] | (1u << bit));
            cnt[x] = 0;
        }
        for (int j = 0; j < n; j++) {
            const uint8_t *p = planes + (size_t)j * plane + off;
            for (int x = 0; x < len; x++)
                cnt[x] = (uint8_t)(cnt[x] + (p[x] < cand[x]));
        }
        for (int x = 0; x < len; x++)
            if (cnt[x] <= k)
                res[x] = cand[x];
    }
    memcpy(out, res, (size_t)len);
    if (!next)
        return;
    /* The (k+1)-th smallest: the same value if more than k + 1 samples are at most it, else the
     * smallest sample above it. One more pass instead of a second search. */
    uint8_t le[SEL_CHUNK] = {0}, above[SEL_CHUNK];
    memset(above, 0xff, sizeof above);
    for (int j = 0; j < n; j++) {
        const uint8_t *p = planes + (size_t)j * plane + off;
        for (int x = 0; x < len; x++) {
            le[x] = (uint8_t)(le[x] + (p[x] <= res[x]));
            uint8_t q = p[x] > res[x] ? p[x] : 0xff; /* written without a branch: it vectorises */
            above[x] = q < above[x] ? q : above[x];
        }
    }
    for (int x = 0; x < len; x++)
        next[x] = le[x] > k + 1 ? res[x] : above[x];
}

static void select16(const uint16_t *planes, size_t plane, int n, size_t off, int len, int k, uint16_t *out)
{
    uint16_t res[SEL_CHUNK] = {0}, cand[SEL_CHUNK];
    uint8_t cnt[SEL_CHUNK];
    for (int bit = 15; bit >= 0; bit--) {
        for (int x = 0; x < len; x++) {
            cand[x] = (uint16_t)(res[x] | (1u << bit));
            cnt[x] = 0;
        }
        for (int j = 0; j < n; j++) {
            const uint16_t *p = planes + (size_t)j * plane + off;
            for (int x = 0; x < len; x++)
                cnt[x] = (uint8_t)(cnt[x] + (p[x] < cand[x]));
        }
        for (int x = 0; x < len; x++)
            if (cnt[x] <= k)
                res[x] = cand[x];
    }
    memcpy(out, res, sizeof *out * (size_t)len);
}

int sp_bg_builder_finish(sp_bg_builder *b, double percentile, float *bg, int nthreads, sp_error *err)
{
    if (b->n < 1)
        return sp_error_set(err, SP_ERR_INPUT, "background: no frames to estimate the light from");
    if (!(percentile >= 0 && percentile <= 100))
        return sp_error_set(err, SP_ERR_INPUT, "background: percentile %g outside 0..100", percentile);
    const int n = b->n;
    const size_t plane = (size_t)b->w * (size_t)b->h;
    const double pos = percentile / 100.0 * (n - 1);
    const int lo = (int)floor(pos);
    const int hi = lo + 1 < n ? lo + 1 : lo;
    const double frac = pos - lo;
    const int nt = nthreads > 0 ? nthreads : omp_get_max_threads();
    const long long nchunks = (long long)((plane + SEL_CHUNK - 1) / SEL_CHUNK);
#pragma omp parallel for num_threads(nt) schedule(static)
    for (long long c = 0; c < nchunks; c++) {
        size_t off = (size_t)c * SEL_CHUNK;
        int len = plane - off < SEL_CHUNK ? (int)(plane - off) : SEL_CHUNK;
        float *d = bg + off;
        if (b->bytes == 1) {
            uint8_t va[SEL_CHUNK], vb[SEL_CHUNK];
            select8(b->planes, plane, n, off, len, lo, va, hi != lo ? vb : NULL);
            if (hi == lo)
                memcpy(vb, va, sizeof va);
            for (int x = 0; x < len; x++)
                d[x] = (float)(va[x] + frac * (vb[x] - va[x]));
        } else {
            const uint16_t *pl = (const uint16_t *)b->planes;
            uint16_t va[SEL_CHUNK], vb[SEL_CHUNK];
            select16(pl, plane, n, off, len, lo, va);
            if (hi != lo)
                select16(pl, plane, n, off, len, hi, vb);
            else
                memcpy(vb, va, sizeof va);
            for (int x = 0; x < len; x++)
                d[x] = (float)(va[x] + frac * (vb[x] - va[x]));
        }
    }
    return SP_OK;
}

void sp_bg_builder_free(sp_bg_builder *b)
{
    if (!b)
        return;
    free(b->planes);
    free(b);
}

int sp_bg_from_image(const sp_image *img, float *bg, sp_error *err)
{
    (void)err;
    for (int y = 0; y < img->height; y++) {
        float *d = bg + (size_t)y * (size_t)img->width;
        if (img->bytes == 1) {
            const uint8_t *s = sp_row8(img, y);
            for (int x = 0; x < img->width; x++)
                d[x] = s[x];
        } else {
            const uint16_t *s = sp_row16(img, y);
            for (int x = 0; x < img->width; x++)
                d[x] = s[x];
        }
    }
    return SP_OK;
}

#define POLY_DEG 4
#define POLY_N 15 /* terms x^i y^j, i + j <= 4 */
#define GUARD_GRID 4
#define GUARD_GROW 3
#define GUARD_RING 6

static void poly_terms(double x, double y, double *t)
{
    /* Powers by multiplication: this runs for every pixel of the background. */
    double px[POLY_DEG + 1], py[POLY_DEG + 1];
    px[0] = py[0] = 1.0;
    for (int i = 1; i <= POLY_DEG; i++) {
        px[i] = px[i - 1] * x;
        py[i] = py[i - 1] * y;
    }
    int k = 0;
    for (int d = 0; d <= POLY_DEG; d++)
        for (int j = 0; j <= d; j++)
            t[k++] = px[d - j] * py[j];
}

/* Solve the POLY_N normal equations in place by Gaussian elimination with partial pivoting. */
static int solve(double A[POLY_N][POLY_N], double *b, double *c)
{
    for (int i = 0; i < POLY_N; i++) {
        int p = i;
        for (int r = i + 1; r < POLY_N; r++)
            if (fabs(A[r][i]) > fabs(A[p][i]))
                p = r;
        if (fabs(A[p][i]) < 1e-12)
            return -1;
        if (p != i) {
            for (int k = 0; k < POLY_N; k++) {
                double t = A[i][k];
                A[i][k] = A[p][k];
                A[p][k] = t;
            }
            double t = b[i];
            b[i] = b[p];
            b[p] = t;
        }
        for (int r = i + 1; r < POLY_N; r++) {
            double f = A[r][i] / A[i][i];
            for (int k = i; k < POLY_N; k++)
                A[r][k] -= f * A[i][k];
            b[r] -= f * b[i];
        }
    }
    for (int i = POLY_N - 1; i >= 0; i--) {
        double s = b[i];
        for (int k = i + 1; k < POLY_N; k++)
            s -= A[i][k] * c[k];
        c[i] = s / A[i][i];
    }
    return 0;
}

static double poly_at(const double *c, double x, double y)
{
    double t[POLY_N], s = 0;
    poly_terms(x, y, t);
    for (int k = 0; k < POLY_N; k++)
        s += c[k] * t[k];
    return s;
}

int sp_bg_guard_still(float *bg, int w, int h, double level, double max_frac, int *n_filled, sp_error *err)
{
    int rc = sp_check_dims(w, h, "background guard", err);
    if (rc)
        return rc;
    if (n_filled)
        *n_filled = 0;
    if (w < 2 * GUARD_GRID || h < 2 * GUARD_GRID)
        return SP_OK;
    const size_t npx = (size_t)w * (size_t)h;
    const double sx = 2.0 / (w - 1), sy = 2.0 / (h - 1);
    double c[POLY_N] = {0};
    /* A smooth quartic needs no more than some 3·10^4 points: large frames use a coarser grid. */
    int grid = GUARD_GRID;
    while (grid < 64 && (double)w * h / ((double)grid * grid) > 32768)
        grid *= 2;
    /* Robust fit: all grid points first, then only those not more than 10 % below the surface. */
    for (int it = 0; it < 5; it++) {
        double A[POLY_N][POLY_N] = {{0}}, b[POLY_N] = {0}, t[POLY_N], cn[POLY_N];
        long used = 0;
        for (int y = grid / 2; y < h; y += grid)
            for (int x = grid / 2; x < w; x += grid) {
                double v = bg[(size_t)y * w + x], X = x * sx - 1, Y = y * sy - 1;
                if (it > 0 && v < 0.9 * poly_at(c, X, Y))
                    continue;
                poly_terms(X, Y, t);
                for (int i = 0; i < POLY_N; i++) {
                    for (int k = i; k < POLY_N; k++)
                        A[i][k] += t[i] * t[k];
                    b[i] += t[i] * v;
                }
                used++;
            }
        if (used < 4 * POLY_N)
            break;
        for (int i = 0; i < POLY_N; i++)
            for (int k = 0; k < i; k++)
                A[i][k] = A[k][i];
        if (solve(A, b, cn))
            break;
        memcpy(c, cn, sizeof c);
    }
    float *fit = malloc(sizeof *fit * npx);
    uint8_t *mk = calloc(npx, 1); /* 1 dark, 2 dark and seen, 3 to refill */
    int32_t *stack = malloc(sizeof *stack * npx);
    if (!fit || !mk || !stack) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "background guard: out of memory for %dx%d", w, h);
        goto fail;
    }
    for (int y = 0; y < h; y++) {
        /* The surface along a row is a quartic in x: its coefficients once per row, then Horner. */
        double Y = y * sy - 1, py[POLY_DEG + 1], a[POLY_DEG + 1] = {0};
        py[0] = 1.0;
        for (int j = 1; j <= POLY_DEG; j++)
            py[j] = py[j - 1] * Y;
        for (int d = 0, k = 0; d <= POLY_DEG; d++)
            for (int j = 0; j <= d; j++, k++)
                a[d - j] += c[k] * py[j];
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * w + x;
            double X = x * sx - 1;
            fit[i] = (float)((((a[4] * X + a[3]) * X + a[2]) * X + a[1]) * X + a[0]);
            mk[i] = fit[i] > 0 && bg[i] < level * fit[i];
        }
    }
    /* One blob at a time (8-connected flood), in raster order so the result is deterministic. */
    for (size_t s0 = 0; s0 < npx; s0++) {
        if (mk[s0] != 1)
            continue;
        size_t sp = 0, area = 0;
        int border = 0, bx0 = w, by0 = h, bx1 = -1, by1 = -1;
        mk[s0] = 2;
        stack[sp++] = (int32_t)s0;
        while (sp) {
            int32_t i = stack[--sp];
            int x = i % w, y = i / w;
            area++;
            border |= x == 0 || y == 0 || x == w - 1 || y == h - 1;
            bx0 = x < bx0 ? x : bx0;
            by0 = y < by0 ? y : by0;
            bx1 = x > bx1 ? x : bx1;
            by1 = y > by1 ? y : by1;
            for (int dy = -1; dy <= 1; dy++)
                for (int dx = -1; dx <= 1; dx++) {
                    int xx = x + dx, yy = y + dy;
                    if (xx < 0 || yy < 0 || xx >= w || yy >= h)
                        continue;
                    size_t j = (size_t)yy * w + xx;
                    if (mk[j] == 1) {
                        mk[j] = 2;
                        stack[sp++] = (int32_t)j;
                    }
                }
        }
        if (border || (double)area > max_frac * (double)npx) {
            for (int y = by0; y <= by1; y++) /* kept: set aside so no later blob takes it as its own */
                for (int x = bx0; x <= bx1; x++)
                    if (mk[(size_t)y * w + x] == 2)
                        mk[(size_t)y * w + x] = 5;
            continue;
        }
        /* Light ratio just around the blob: pixels of the grown box that are neither dark nor rim. */
        int gx0 = bx0 - GUARD_RING, gy0 = by0 - GUARD_RING, gx1 = bx1 + GUARD_RING, gy1 = by1 + GUARD_RING;
        gx0 = gx0 < 0 ? 0 : gx0;
        gy0 = gy0 < 0 ? 0 : gy0;
        gx1 = gx1 >= w ? w - 1 : gx1;
        gy1 = gy1 >= h ? h - 1 : gy1;
        double rs = 0;
        long rn = 0;
        for (int y = gy0; y <= gy1; y++)
            for (int x = gx0; x <= gx1; x++) {
                size_t i = (size_t)y * w + x;
                int near = 0;
                for (int yy = y - GUARD_GROW; yy <= y + GUARD_GROW && !near; yy++)
                    for (int xx = x - GUARD_GROW; xx <= x + GUARD_GROW && !near; xx++)
                        near = xx >= 0 && yy >= 0 && xx < w && yy < h && mk[(size_t)yy * w + xx] >= 1;
                if (!near && fit[i] > 0) {
                    rs += bg[i] / fit[i];
                    rn++;
                }
            }
        double r = rn ? rs / rn : 1.0;
        for (int y = by0 - GUARD_GROW; y <= by1 + GUARD_GROW; y++)
            for (int x = bx0 - GUARD_GROW; x <= bx1 + GUARD_GROW; x++) {
                if (x < 0 || y < 0 || x >= w || y >= h)
                    continue;
                int near = 0;
                for (int yy = y - GUARD_GROW; yy <= y + GUARD_GROW && !near; yy++)
                    for (int xx = x - GUARD_GROW; xx <= x + GUARD_GROW && !near; xx++)
                        near = xx >= 0 && yy >= 0 && xx < w && yy < h && mk[(size_t)yy * w + xx] == 2;
                if (near)
                    mk[(size_t)y * w + x] = mk[(size_t)y * w + x] == 2 ? 2 : 3;
            }
        for (int y = by0 - GUARD_GROW; y <= by1 + GUARD_GROW; y++)
            for (int x = bx0 - GUARD_GROW; x <= bx1 + GUARD_GROW; x++) {
                if (x < 0 || y < 0 || x >= w || y >= h)
                    continue;
                size_t i = (size_t)y * w + x;
                if (mk[i] == 2 || mk[i] == 3) {
                    bg[i] = (float)(r * fit[i]);
                    mk[i] = 4; /* done: neither dark nor refilled again */
                }
            }
        if (n_filled)
            (*n_filled)++;
    }
    rc = SP_OK;
fail:
    free(fit);
    free(mk);
    free(stack);
    return rc;
}

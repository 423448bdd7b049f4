/* Flat-field normalisation: transmission = frame / (gain · background). */
#include "detect/normalise.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#ifdef __SSE2__
#include <emmintrin.h>
#endif

#define GAIN_BINS 2048     /* ratio resolution 1/1024 over [0, 2) */
#define GAIN_GRID 4        /* every 4th pixel of every 4th row ... */
#define GAIN_SAMPLES 32768 /* ... or a coarser grid, doubled until it holds no more than this */

/* Median of the histogram's bins [k0, k1] (their centres), or 0 when they hold fewer than 16. */
static float hist_median(const uint32_t *hist, int k0, int k1)
{
    uint64_t total = 0;
    for (int k = k0; k <= k1; k++)
        total += hist[k];
    if (total < 16)
        return 0.f;
    uint64_t half = (total + 1) / 2, acc = 0;
    for (int k = k0; k <= k1; k++) {
        acc += hist[k];
        if (acc >= half)
            return (k + 0.5f) / (GAIN_BINS / 2);
    }
    return 0.f;
}

/* The median of some 10^4 ratios (camera noise of a few per cent) is good to a few 1e-4, below the
 * histogram's 1/1024 bins; more samples only cost memory traffic on large frames. */
static int gain_grid(int w, int h)
{
    int grid = GAIN_GRID;
    while (grid < 64 && (double)w * h / ((double)grid * grid) > GAIN_SAMPLES)
        grid *= 2;
    return grid;
}

/* The gain from the histogram of frame / background: two medians, over a wide window first, then over
 * ±30% around it, which drops bubbles and dust. */
static float gain_of(const uint32_t *hist)
{
    const int nb = GAIN_BINS;
    float g = hist_median(hist, nb / 4, nb - 1);
    if (g <= 0.f)
        return 1.f;
    int k0 = (int)ceilf(0.7f * g * (nb / 2) - 0.5f), k1 = (int)floorf(1.3f * g * (nb / 2) - 0.5f);
    if (k0 < 0)
        k0 = 0;
    if (k1 > nb - 1)
        k1 = nb - 1;
    float g2 = hist_median(hist, k0, k1);
    return g2 > 0.f ? g2 : g;
}

float sp_norm_gain(const sp_image *f, const float *bg)
{
    static const int nb = GAIN_BINS;
    uint32_t hist[GAIN_BINS];
    memset(hist, 0, sizeof hist);
    const int w = f->width;
    const int grid = gain_grid(f->width, f->height);
    for (int y = grid / 2; y < f->height; y += grid) {
        const float *b = bg + (size_t)y * (size_t)w;
        for (int x = grid / 2; x < w; x += grid) {
            float raw = f->bytes == 1 ? sp_row8(f, y)[x] : sp_row16(f, y)[x];
            if (!(b[x] > 0.f) || raw >= 2.f * b[x])
                continue;
            int k = (int)(raw / b[x] * (nb / 2));
            hist[k < nb ? k : nb - 1]++;
        }
    }
    return gain_of(hist);
}

void sp_norm_mask(const sp_frame_view *v, float level, uint8_t *mask)
{
    const sp_image *f = v->frame;
    const int w = f->width;
    const float k = level * v->gain;
    for (int y = 0; y < f->height; y++) {
        const float *b = v->bg + (size_t)y * (size_t)w;
        uint8_t *m = mask + (size_t)y * (size_t)w;
        if (f->bytes == 1) {
            const uint8_t *s = sp_row8(f, y);
            for (int x = 0; x < w; x++)
                m[x] = (float)s[x] < k * b[x];
        } else {
            const uint16_t *s = sp_row16(f, y);
            for (int x = 0; x < w; x++)
                m[x] = (float)s[x] < k * b[x];
        }
    }
}

void sp_norm_hist(const sp_frame_view *v, float range, uint64_t *hist, int nbins)
{
    memset(hist, 0, sizeof *hist * (size_t)nbins);
    const sp_image *f = v->frame;
    const float scale = nbins / range;
    for (int y = 0; y < f->height; y++)
        for (int x = 0; x < f->width; x++) {
            float n = sp_view_norm(v, x, y);
            int k = (int)(n * scale);
            if (k < 0)
                k = 0;
            if (k >= nbins)
                k = nbins - 1;
            hist[k]++;
        }
}

void sp_norm_plan_free(sp_norm_plan *p)
{
    if (!p)
        return;
    free(p->gbg);
    free(p->tmax);
    free(p->need);
    free(p->tmin);
    free(p->colmin8);
    free(p->colmin16);
    free(p->work);
    free(p->bins);
    memset(p, 0, sizeof *p);
}

int sp_norm_plan_build(sp_norm_plan *p, const float *bg, int w, int h, sp_error *err)
{
    int rc = sp_check_dims(w, h, "normalise", err);
    if (rc)
        return rc;
    const int T = SP_NORM_TILE;
    int grid = gain_grid(w, h), gx0 = grid / 2;
    int gnx = w > gx0 ? (w - gx0 + grid - 1) / grid : 0, gny = h > gx0 ? (h - gx0 + grid - 1) / grid : 0;
    int ntx = (w + T - 1) / T, nty = (h + T - 1) / T;
    if (p->w != w || p->h != h) {
        sp_norm_plan_free(p);
        p->gbg = malloc(sizeof *p->gbg * ((size_t)gnx * (size_t)gny + 1));
        p->tmax = malloc(sizeof *p->tmax * (size_t)ntx * (size_t)nty);
        p->need = malloc((size_t)ntx);
        p->tmin = malloc(sizeof *p->tmin * (size_t)ntx * (size_t)nty);
        p->colmin8 = malloc((size_t)w);
        p->colmin16 = malloc(sizeof *p->colmin16 * (size_t)w);
        p->work = malloc(sizeof *p->work * ((size_t)gnx + 1));
        p->bins = malloc(sizeof *p->bins * ((size_t)gnx + 1));
        if (!p->gbg || !p->tmax || !p->need || !p->tmin || !p->colmin8 || !p->colmin16 || !p->work ||
            !p->bins) {
            sp_norm_plan_free(p);
            return sp_error_set(err, SP_ERR_INTERNAL, "normalise: out of memory for a %dx%d frame", w, h);
        }
        p->w = w;
        p->h = h;
    }
    p->grid = grid;
    p->gx0 = gx0;
    p->gnx = gnx;
    p->gny = gny;
    p->ntx = ntx;
    p->nty = nty;
    for (int j = 0; j < gny; j++)
        for (int i = 0; i < gnx; i++)
            p->gbg[(size_t)j * gnx + i] = bg[(size_t)(gx0 + j * grid) * (size_t)w + (size_t)(gx0 + i * grid)];
    for (int ty = 0; ty < nty; ty++)
        for (int tx = 0; tx < ntx; tx++) {
            float m = -INFINITY;
            for (int y = ty * T; y < h && y < (ty + 1) * T; y++)
                for (int x = tx * T; x < w && x < (tx + 1) * T; x++) {
                    float b = bg[(size_t)y * (size_t)w + (size_t)x];
                    m = b != b ? INFINITY : b > m ? b : m;
                }
            p->tmax[(size_t)ty * ntx + tx] = m;
        }
    return SP_OK;
}

/* Grid row y (row j of the gain grid): its samples, their ratio bins, counted into hist. */
static void grid_row(const sp_norm_plan *p, const sp_image *f, int y, uint32_t *hist, int j)
{
    float *raw = p->work;
    int *bin = p->bins;
    if (f->bytes == 1) {
        const uint8_t *s = sp_row8(f, y) + p->gx0;
        int i = 0;
#ifdef __SSE2__
        /* Every 4th byte: the low byte of each 32-bit lane of 16 bytes, kept within the row. */
        if (p->grid == 4)
            for (const __m128i lo = _mm_set1_epi32(0xFF); 4 * i + 16 <= f->width - p->gx0; i += 4) {
                __m128i v = _mm_loadu_si128((const __m128i *)(const void *)(s + 4 * i));
                _mm_storeu_ps(raw + i, _mm_cvtepi32_ps(_mm_and_si128(v, lo)));
            }
#endif
        for (; i < p->gnx; i++)
            raw[i] = (float)s[(size_t)i * (size_t)p->grid];
    } else {
        const uint16_t *s = sp_row16(f, y) + p->gx0;
        for (int i = 0; i < p->gnx; i++)
            raw[i] = (float)s[(size_t)i * (size_t)p->grid];
    }
    /* The same arithmetic as sp_norm_gain, in a loop without branches: samples it skips get bin -1
     * (the divisor and the clamp before the conversion only keep those lanes defined). */
    const float *b = p->gbg + (size_t)j * p->gnx;
    int i = 0;
#if defined(__GNUC__)
    /* Four lanes at a time (the compiler does not turn the selects into vector code itself). */
    typedef float v4f __attribute__((vector_size(16)));
    typedef int32_t v4i __attribute__((vector_size(16)));
    const v4f one = {1.f, 1.f, 1.f, 1.f}, top = {GAIN_BINS - 1, GAIN_BINS - 1, GAIN_BINS - 1, GAIN_BINS - 1};
    for (; i + 4 <= p->gnx; i += 4) {
        v4f bb, r;
        memcpy(&bb, b + i, sizeof bb);
        memcpy(&r, raw + i, sizeof r);
        v4i pos = bb > 0.f, ok = pos & (r < 2.f * bb);
        v4f d = (v4f)(((v4i)bb & pos) | ((v4i)one & ~pos));
        v4f q = r / d * (float)(GAIN_BINS / 2);
        v4i lo = q < top;
        q = (v4f)(((v4i)q & lo) | ((v4i)top & ~lo));
        v4i k = __builtin_convertvector(q, v4i) | ~ok;
        memcpy(bin + i, &k, sizeof k);
    }
#endif
    for (; i < p->gnx; i++) {
        float bb = b[i], r = raw[i];
        int ok = (bb > 0.f) & (r < 2.f * bb);
        float q = r / (bb > 0.f ? bb : 1.f) * (GAIN_BINS / 2);
        int k = (int)(q < (float)(GAIN_BINS - 1) ? q : (float)(GAIN_BINS - 1));
        bin[i] = ok ? k : -1;
    }
    /* Four interleaved counts: most ratios fall in the same few bins, and one count would make
     * each increment wait for the last. */
    for (int i = 0; i < p->gnx; i++)
        if (bin[i] >= 0)
            hist[(i & 3) * GAIN_BINS + bin[i]]++;
}

/* cm[x] = the smallest sample of column x over rows [y0, y1) of f, for either sample depth. */
#define COLUMN_MINIMA(cm, row_fn)                                                                            \
    do {                                                                                                     \
        memcpy(cm, row_fn(f, y0), sizeof *cm *(size_t)w);                                                    \
        for (int y = y0 + 1; y < y1; y++) {                                                                  \
            const __typeof__(*cm) *s = row_fn(f, y);                                                         \
            for (int x = 0; x < w; x++)                                                                      \
                cm[x] = s[x] < cm[x] ? s[x] : cm[x];                                                         \
        }                                                                                                    \
    } while (0)

void sp_norm_plan_scan(sp_norm_plan *p, const sp_image *f, float *gain)
{
    const int w = f->width, h = f->height, T = SP_NORM_TILE;
    uint32_t hist[4 * GAIN_BINS];
    memset(hist, 0, sizeof hist);
    p->scanned = NULL;
    if (w != p->w || h != p->h) {
        if (gain)
            *gain = 1.f;
        return;
    }
    for (int ty = 0; ty < p->nty; ty++) {
        int y0 = ty * T, y1 = y0 + T < h ? y0 + T : h;
        uint16_t *dark = p->tmin + (size_t)ty * p->ntx;
        /* Darkest sample of each tile: column minima over the tile row, then over each tile. */
        if (f->bytes == 1) {
            uint8_t *cm = p->colmin8;
            COLUMN_MINIMA(cm, sp_row8);
            for (int tx = 0; tx < p->ntx; tx++) {
                uint8_t m = 255;
                int x = tx * T;
#if defined(__SSE2__) && SP_NORM_TILE == 16
                if (x + 16 <= w) { /* the minimum of 16 bytes by halving */
                    __m128i v = _mm_loadu_si128((const __m128i *)(const void *)(cm + x));
                    v = _mm_min_epu8(v, _mm_srli_si128(v, 8));
                    v = _mm_min_epu8(v, _mm_srli_si128(v, 4));
                    v = _mm_min_epu8(v, _mm_srli_si128(v, 2));
                    v = _mm_min_epu8(v, _mm_srli_si128(v, 1));
                    m = (uint8_t)_mm_cvtsi128_si32(v);
                    x = w;
                }
#endif
                for (; x < w && x < (tx + 1) * T; x++)
                    m = cm[x] < m ? cm[x] : m;
                dark[tx] = m;
            }
        } else {
            uint16_t *cm = p->colmin16;
            COLUMN_MINIMA(cm, sp_row16);
            for (int tx = 0; tx < p->ntx; tx++) {
                uint16_t m = 65535;
                for (int x = tx * T; x < w && x < (tx + 1) * T; x++)
                    m = cm[x] < m ? cm[x] : m;
                dark[tx] = m;
            }
        }
        /* The gain's grid rows in this tile row, while its pixels are in cache. */
        if (gain)
            for (int y = y0; y < y1; y++)
                if (y >= p->gx0 && (y - p->gx0) % p->grid == 0 && (y - p->gx0) / p->grid < p->gny)
                    grid_row(p, f, y, hist, (y - p->gx0) / p->grid);
    }
    p->scanned = f;
    if (gain) {
        for (int k = 0; k < GAIN_BINS; k++)
            hist[k] += hist[GAIN_BINS + k] + hist[2 * GAIN_BINS + k] + hist[3 * GAIN_BINS + k];
        *gain = gain_of(hist);
    }
}

/* Mask of one tile row's pixels [x0, x1) of row y, as sp_norm_mask. */
static int mask_span(const sp_image *f, const float *b, float k, int y, int x0, int x1, uint8_t *m)
{
    uint8_t any = 0;
    if (f->bytes == 1) {
        const uint8_t *s = sp_row8(f, y);
        for (int x = x0; x < x1; x++) {
            m[x] = (float)s[x] < k * b[x];
            any |= m[x];
        }
    } else {
        const uint16_t *s = sp_row16(f, y);
        for (int x = x0; x < x1; x++) {
            m[x] = (float)s[x] < k * b[x];
            any |= m[x];
        }
    }
    return any;
}

void sp_norm_mask_planned(sp_norm_plan *p, const sp_frame_view *v, float level, uint8_t *mask, uint8_t *rows)
{
    const sp_image *f = v->frame;
    const int w = f->width, h = f->height, T = SP_NORM_TILE;
    const float k = level * v->gain;
    if (!(k > 0.f) || p->scanned != f || w != p->w || h != p->h) {
        sp_norm_mask(v, level, mask);
        if (rows)
            memset(rows, 1, (size_t)h);
        return;
    }
    /* k·b rounds monotonically in b, so a tile whose darkest sample is at least k·max(b) holds no
     * pixel below k·b. */
    for (int ty = 0; ty < p->nty; ty++) {
        int y0 = ty * T, y1 = y0 + T < h ? y0 + T : h;
        const float *tm = p->tmax + (size_t)ty * p->ntx;
        const uint16_t *dark = p->tmin + (size_t)ty * p->ntx;
        int any = 0;
        for (int tx = 0; tx < p->ntx; tx++) {
            p->need[tx] = !((float)dark[tx] >= k * tm[tx]);
            any |= p->need[tx];
        }
        /* The tiles that need the compare lie where the bubbles are, scattered over a background too
         * large for the cache: ask for all their rows at once rather than wait for each in turn. */
        if (any)
            for (int y = y0; y < y1; y++)
                for (int tx = 0; tx < p->ntx; tx++)
                    if (p->need[tx]) {
                        __builtin_prefetch(v->bg + (size_t)y * (size_t)w + (size_t)tx * T);
                        __builtin_prefetch((const char *)f->data + (ptrdiff_t)y * f->stride +
                                           (ptrdiff_t)tx * T * f->bytes);
                    }
        for (int y = y0; y < y1; y++) {
            uint8_t *m = mask + (size_t)y * (size_t)w;
            /* A row already clear from the last frame is not cleared again. */
            const int dirty = !rows || rows[y];
            if (!any) {
                if (dirty)
                    memset(m, 0, (size_t)w);
                if (rows)
                    rows[y] = 0;
                continue;
            }
            const float *b = v->bg + (size_t)y * (size_t)w;
            /* Runs of tiles that need the compare, the rest cleared. */
            int tx = 0, set = 0;
            while (tx < p->ntx) {
                int t1 = tx;
                while (t1 < p->ntx && p->need[t1] == p->need[tx])
                    t1++;
                int x0 = tx * T, x1 = t1 * T < w ? t1 * T : w;
                if (p->need[tx])
                    set |= mask_span(f, b, k, y, x0, x1, m);
                else if (dirty)
                    memset(m + x0, 0, (size_t)(x1 - x0));
                tx = t1;
            }
            if (rows)
                rows[y] = (uint8_t)set;
        }
    }
}

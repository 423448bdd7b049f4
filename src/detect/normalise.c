/* Flat-field normalisation: transmission = frame / (gain · background). */
#include "detect/normalise.h"

#include <math.h>
#include <string.h>

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

float sp_norm_gain(const sp_image *f, const float *bg)
{
    /* One histogram of frame / background on a grid of pixels, then two medians: over a wide window
     * first, then over ±30% around it, which drops bubbles and dust. */
    static const int nb = GAIN_BINS;
    uint32_t hist[GAIN_BINS];
    memset(hist, 0, sizeof hist);
    const int w = f->width;
    /* The median of some 10^4 ratios (camera noise of a few per cent) is good to a few 1e-4, below
     * the histogram's 1/1024 bins; more samples only cost memory traffic on large frames. */
    int grid = GAIN_GRID;
    while (grid < 64 && (double)f->width * f->height / ((double)grid * grid) > GAIN_SAMPLES)
        grid *= 2;
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
    /* Bins whose centre lies in [0.5, 2) for the first median, then within ±30% of it. */
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

/* Flat-field normalisation: transmission = frame / (gain · background). */
#include "detect/normalise.h"

#include <string.h>

#define GAIN_BINS 2048 /* ratio resolution 1/1024 over [0, 2) */
#define GAIN_GRID 4    /* every 4th pixel of every 4th row */

static float median_ratio(const sp_image *f, const float *bg, float lo, float hi)
{
    static const int nb = GAIN_BINS;
    uint32_t hist[GAIN_BINS];
    memset(hist, 0, sizeof hist);
    uint64_t total = 0;
    const int w = f->width;
    for (int y = GAIN_GRID / 2; y < f->height; y += GAIN_GRID) {
        const float *b = bg + (size_t)y * (size_t)w;
        for (int x = GAIN_GRID / 2; x < w; x += GAIN_GRID) {
            float raw = f->bytes == 1 ? sp_row8(f, y)[x] : sp_row16(f, y)[x];
            if (!(b[x] > 0.f))
                continue;
            float r = raw / b[x];
            if (r < lo || r > hi)
                continue;
            int k = (int)(r * (nb / 2));
            if (k >= nb)
                k = nb - 1;
            hist[k]++;
            total++;
        }
    }
    if (total < 16)
        return 0.f;
    uint64_t half = (total + 1) / 2, acc = 0;
    for (int k = 0; k < nb; k++) {
        acc += hist[k];
        if (acc >= half)
            return (k + 0.5f) / (nb / 2);
    }
    return 0.f;
}

float sp_norm_gain(const sp_image *frame, const float *bg)
{
    /* Two rounds: a wide window first, then ±30% around it, which drops bubbles and dust. */
    float g = median_ratio(frame, bg, 0.5f, 1.999f);
    if (g <= 0.f)
        return 1.f;
    float g2 = median_ratio(frame, bg, g * 0.7f, g * 1.3f);
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

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

/* Insertion sort: n is at most SP_BG_MAX_SAMPLES and the values are small integers. */
static void sort_u16(uint16_t *v, int n)
{
    for (int i = 1; i < n; i++) {
        uint16_t x = v[i];
        int j = i - 1;
        while (j >= 0 && v[j] > x) {
            v[j + 1] = v[j];
            j--;
        }
        v[j + 1] = x;
    }
}

int sp_bg_builder_finish(sp_bg_builder *b, double percentile, float *bg, int nthreads, sp_error *err)
{
    if (b->n < 1)
        return sp_error_set(err, SP_ERR_INPUT, "background: no frames to estimate the light from");
    if (!(percentile >= 0 && percentile <= 100))
        return sp_error_set(err, SP_ERR_INPUT, "background: percentile %g outside 0..100", percentile);
    const int n = b->n, w = b->w, h = b->h;
    const size_t plane = (size_t)w * (size_t)h;
    const double pos = percentile / 100.0 * (n - 1);
    const int lo = (int)floor(pos);
    const int hi = lo + 1 < n ? lo + 1 : lo;
    const double frac = pos - lo;
    const int nt = nthreads > 0 ? nthreads : omp_get_max_threads();
#pragma omp parallel num_threads(nt)
    {
        uint16_t v[SP_BG_MAX_SAMPLES];
#pragma omp for schedule(static)
        for (int y = 0; y < h; y++) {
            for (int x = 0; x < w; x++) {
                size_t i = (size_t)y * (size_t)w + (size_t)x;
                if (b->bytes == 1)
                    for (int k = 0; k < n; k++)
                        v[k] = b->planes[(size_t)k * plane + i];
                else
                    for (int k = 0; k < n; k++)
                        v[k] = ((const uint16_t *)b->planes)[(size_t)k * plane + i];
                sort_u16(v, n);
                bg[i] = (float)(v[lo] + frac * (v[hi] - v[lo]));
            }
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

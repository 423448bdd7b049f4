/* Background percentile, flat-field normalisation, gain and mask. */
#include "check.h"
#include "detect/background.h"
#include "detect/normalise.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static void fill8(sp_image *im, int v)
{
    for (int y = 0; y < im->height; y++)
        memset((uint8_t *)im->data + y * im->stride, v, (size_t)im->width);
}

static int cmp_int(const void *a, const void *b)
{
    return *(const int *)a - *(const int *)b;
}

/* Random samples with many ties, 8- and 16-bit, several counts and percentiles: every pixel equals
 * the percentile by sorting (linear between the two order statistics around p/100·(n−1)). */
static void random_percentiles(void)
{
    const int w = 70, h = 3; /* 210 pixels: chunks of 64 and a partial one */
    const double pcts[] = {0, 10, 50, 73.3, 100};
    const int counts[] = {1, 2, 7, 40, 255};
    sp_error err;
    srand(99);
    for (int bytes = 1; bytes <= 2; bytes++)
        for (int ci = 0; ci < 5; ci++) {
            int n = counts[ci];
            int maxv = bytes == 1 ? (ci % 2 ? 256 : 9) : (ci % 2 ? 65536 : 40);
            sp_bg_builder *b = NULL;
            sp_image im = {0};
            int *v = malloc(sizeof *v * (size_t)n * (size_t)(w * h)), *col = malloc(sizeof *col * (size_t)n);
            float *bg = malloc(sizeof *bg * (size_t)(w * h));
            if (!v || !col || !bg || sp_bg_builder_new(&b, w, h, bytes, n, &err) ||
                sp_image_alloc(&im, w, h, bytes, &err)) {
                CHECK(0, "random percentiles: setup");
                return;
            }
            for (int k = 0; k < n; k++) {
                for (int i = 0; i < w * h; i++) {
                    int x = rand() % maxv;
                    v[(size_t)k * (size_t)(w * h) + (size_t)i] = x;
                    if (bytes == 1)
                        ((uint8_t *)im.data)[(i / w) * im.stride + i % w] = (uint8_t)x;
                    else
                        ((uint16_t *)((uint8_t *)im.data + (i / w) * im.stride))[i % w] = (uint16_t)x;
                }
                sp_bg_builder_add(b, &im, &err);
            }
            for (int pi = 0; pi < 5; pi++) {
                CHECK(sp_bg_builder_finish(b, pcts[pi], bg, 2, &err) == 0, "finish");
                int bad = 0;
                for (int i = 0; i < w * h; i++) {
                    for (int k = 0; k < n; k++)
                        col[k] = v[(size_t)k * (size_t)(w * h) + (size_t)i];
                    qsort(col, (size_t)n, sizeof *col, cmp_int);
                    double pos = pcts[pi] / 100.0 * (n - 1);
                    int lo = (int)pos, hi = lo + 1 < n ? lo + 1 : lo;
                    double want = col[lo] + (pos - lo) * (col[hi] - col[lo]);
                    bad += fabs(bg[i] - want) > 1e-3 * (1 + fabs(want));
                }
                CHECK(bad == 0, "%d-bit, %d samples, percentile %g: %d pixels differ from sorting", 8 * bytes,
                      n, pcts[pi], bad);
            }
            sp_bg_builder_free(b);
            sp_image_free(&im);
            free(v);
            free(col);
            free(bg);
        }
}

int main(void)
{
    random_percentiles();
    sp_error err;
    const int w = 37, h = 11;
    sp_bg_builder *b = NULL;
    CHECK(sp_bg_builder_new(&b, w, h, 1, 5, &err) == 0, "new");
    sp_image im = {0};
    sp_image_alloc(&im, w, h, 1, &err);
    /* Five frames with values 10, 50, 20, 40, 30 everywhere: median 30, 25th percentile 20,
     * 90th percentile 46 (linear between order statistics 40 and 50). */
    int vals[5] = {10, 50, 20, 40, 30};
    for (int k = 0; k < 5; k++) {
        fill8(&im, vals[k]);
        CHECK(sp_bg_builder_add(b, &im, &err) == 0, "add %d", k);
    }
    CHECK(sp_bg_builder_add(b, &im, &err) != 0, "a sixth frame is refused");
    float *bg = malloc(sizeof(float) * w * h);
    CHECK(sp_bg_builder_finish(b, 50, bg, 1, &err) == 0, "median");
    CHECK_NEAR(bg[0], 30, 0, "median");
    CHECK_NEAR(bg[w * h - 1], 30, 0, "median last pixel");
    sp_bg_builder_finish(b, 25, bg, 2, &err);
    CHECK_NEAR(bg[5], 20, 0, "25th percentile");
    sp_bg_builder_finish(b, 90, bg, 2, &err);
    CHECK_NEAR(bg[5], 46, 1e-5, "90th percentile");
    CHECK(sp_bg_builder_finish(b, 101, bg, 1, &err) == SP_ERR_INPUT, "percentile out of range");
    sp_bg_builder_free(b);

    /* 16-bit frames keep their depth. */
    CHECK(sp_bg_builder_new(&b, w, h, 2, 3, &err) == 0, "new16");
    sp_image im16 = {0};
    sp_image_alloc(&im16, w, h, 2, &err);
    for (int k = 0; k < 3; k++) {
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
                ((uint16_t *)((uint8_t *)im16.data + y * im16.stride))[x] = (uint16_t)(4000 + 100 * k + x);
        sp_bg_builder_add(b, &im16, &err);
    }
    sp_bg_builder_finish(b, 50, bg, 1, &err);
    CHECK_NEAR(bg[3], 4103, 0, "16-bit median");
    sp_bg_builder_free(b);

    /* Gain: a frame 7% brighter than its background, with a dark blob covering 20% of it, has gain
     * 1.07 to within the histogram resolution (1/1024). */
    for (int i = 0; i < w * h; i++)
        bg[i] = 100.f + (float)(i % w);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            float v = 1.07f * bg[y * w + x];
            if (x < w / 5)
                v *= 0.2f;
            ((uint8_t *)im.data)[y * im.stride + x] = (uint8_t)(v + 0.5f);
        }
    float g = sp_norm_gain(&im, bg);
    CHECK_NEAR(g, 1.07, 0.004, "gain");

    /* Mask: pixels passing less than 70% of their light. */
    sp_frame_view v = {&im, bg, g};
    uint8_t *mask = malloc((size_t)w * h);
    sp_norm_mask(&v, 0.7f, mask);
    int bad = 0;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++)
            bad += mask[y * w + x] != (x < w / 5);
    CHECK(bad == 0, "%d pixels misclassified", bad);
    CHECK_NEAR(sp_view_norm(&v, w - 1, 0), 1.0, 0.01, "normalised light");

    free(mask);
    free(bg);
    sp_image_free(&im);
    sp_image_free(&im16);
    return check_report();
}

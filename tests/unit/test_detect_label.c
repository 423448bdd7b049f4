/* Edge cases of sp_label_run: empty, full, 1×1, bad sizes, workspace reuse, thread counts, and
 * exact moments on masks as wide as SP_MAX_DIM. Expected values come from brute-force pixel loops
 * written here and from the closed form of a discrete uniform variance, Σ(x−x̄)² = w(w²−1)/12 per
 * row (common knowledge, not a published check value). */
#include "detect/label.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int failures;

#define CHECK(cond, ...)                                                                                     \
    do {                                                                                                     \
        if (!(cond)) {                                                                                       \
            failures++;                                                                                      \
            fprintf(stderr, "%s:%d: ", __FILE__, __LINE__);                                                  \
            fprintf(stderr, __VA_ARGS__);                                                                    \
            fprintf(stderr, "\n");                                                                           \
        }                                                                                                    \
    } while (0)

static int rel_close(double a, long double b, double rel)
{
    long double d = fabsl((long double)a - b), s = fabsl(b) > 1 ? fabsl(b) : 1;
    return d <= rel * s;
}

/* Brute-force check of every component against the labels image. */
static void brute_check(const uint8_t *m, int w, int h, const int32_t *lab, const sp_component *c, int n)
{
    int64_t *acc = calloc((size_t)n * 6 + 6, sizeof *acc);
    if (!acc) {
        CHECK(0, "out of memory");
        return;
    }
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            int32_t l = lab[(size_t)y * w + x];
            if ((m[(size_t)y * w + x] != 0) != (l > 0) || l < 0 || l > n) {
                CHECK(0, "label %d at (%d,%d) disagrees with the mask", l, x, y);
                free(acc);
                return;
            }
            if (!l)
                continue;
            int64_t *a = acc + (size_t)(l - 1) * 6;
            a[0]++, a[1] += x, a[2] += y, a[3] += (int64_t)x * x, a[4] += (int64_t)x * y,
                a[5] += (int64_t)y * y;
        }
    for (int i = 0; i < n; i++) {
        int64_t *a = acc + (size_t)i * 6;
        CHECK(a[0] == c[i].area && a[1] == c[i].m10 && a[2] == c[i].m01 && a[3] == c[i].m20 &&
                  a[4] == c[i].m11 && a[5] == c[i].m02,
              "component %d raw moments differ from the brute-force sums", i + 1);
    }
    /* central moments by a second pass around the exact centroid (long double) */
    long double *mu = calloc((size_t)n * 3 + 3, sizeof *mu);
    if (!mu) {
        free(acc);
        return;
    }
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            int32_t l = lab[(size_t)y * w + x];
            if (!l)
                continue;
            int64_t *a = acc + (size_t)(l - 1) * 6;
            long double dx = x - (long double)a[1] / a[0], dy = y - (long double)a[2] / a[0];
            mu[(l - 1) * 3] += dx * dx, mu[(l - 1) * 3 + 1] += dx * dy, mu[(l - 1) * 3 + 2] += dy * dy;
        }
    for (int i = 0; i < n; i++)
        CHECK(rel_close(c[i].mu20, mu[i * 3], 1e-12) && rel_close(c[i].mu11, mu[i * 3 + 1], 1e-12) &&
                  rel_close(c[i].mu02, mu[i * 3 + 2], 1e-12),
              "component %d central moments (%.17g %.17g %.17g) vs two-pass (%.17Lg %.17Lg %.17Lg)", i + 1,
              c[i].mu20, c[i].mu11, c[i].mu02, mu[i * 3], mu[i * 3 + 1], mu[i * 3 + 2]);
    free(mu);
    free(acc);
}

static void test_empty_full_single(sp_labeler *lb)
{
    sp_error err;
    const sp_component *c;
    int n;
    uint8_t m[13 * 7];
    int32_t lab[13 * 7];
    memset(m, 0, sizeof m);
    CHECK(sp_label_run(lb, m, 13, 13, 7, lab, &c, &n, 2, &err) == SP_OK && n == 0, "empty mask: n=%d", n);
    for (int i = 0; i < 13 * 7; i++)
        CHECK(lab[i] == 0, "empty mask: non-zero label");
    memset(m, 255, sizeof m);
    CHECK(sp_label_run(lb, m, 13, 13, 7, lab, &c, &n, 3, &err) == SP_OK && n == 1, "full mask: n=%d", n);
    if (n == 1) {
        CHECK(c[0].area == 91 && c[0].x0 == 0 && c[0].y0 == 0 && c[0].x1 == 12 && c[0].y1 == 6,
              "full mask: area/bbox");
        CHECK(c[0].border == 15, "full mask touches all four sides, border=%d", c[0].border);
        CHECK(c[0].cx == 6.0 && c[0].cy == 3.0, "full mask centroid");
        /* uniform variance: 7 rows · 13(13²−1)/12 = 1274, 13 columns · 7(7²−1)/12 = 364 */
        CHECK(c[0].mu20 == 1274.0 && c[0].mu02 == 364.0 && c[0].mu11 == 0.0, "full mask mu");
    }
    uint8_t one = 1;
    int32_t l1 = -7;
    CHECK(sp_label_run(lb, &one, 1, 1, 1, &l1, &c, &n, 4, &err) == SP_OK && n == 1 && l1 == 1, "1x1 full");
    if (n == 1)
        CHECK(c[0].area == 1 && c[0].border == 15 && c[0].mu20 == 0 && c[0].cx == 0, "1x1 stats");
    one = 0;
    CHECK(sp_label_run(lb, &one, 1, 1, 1, &l1, &c, &n, 1, &err) == SP_OK && n == 0 && l1 == 0, "1x1 empty");
}

static void test_bad_input(sp_labeler *lb)
{
    sp_error err;
    const sp_component *c;
    int n;
    uint8_t m[4] = {0};
    int32_t lab[4];
    sp_error_clear(&err);
    CHECK(sp_label_run(lb, m, 2, 0, 2, lab, &c, &n, 1, &err) == SP_ERR_INPUT && strstr(err.msg, "label"),
          "zero width must be SP_ERR_INPUT naming the stage: '%s'", err.msg);
    CHECK(sp_label_run(lb, m, 20000, 20000, 1, lab, &c, &n, 1, &err) == SP_ERR_INPUT,
          "width above SP_MAX_DIM must be refused");
    CHECK(sp_label_run(lb, m, 1, 2, 2, lab, &c, &n, 1, &err) == SP_ERR_INTERNAL, "stride below width");
    CHECK(strchr(err.msg, '\n') == NULL && err.msg[0], "one-line message");
}

/* Sparse 16384×64 mask: a disc near the right edge, a full-width line, a diagonal, scattered
 * pixels; moments must match brute force and the results must not depend on the thread count. */
static void test_wide(sp_labeler *lb)
{
    const int w = SP_MAX_DIM, h = 64;
    sp_error err;
    const sp_component *c;
    int n, n1 = 0;
    uint8_t *m = calloc((size_t)w * h, 1);
    int32_t *lab = malloc((size_t)w * h * sizeof *lab), *lab1 = malloc((size_t)w * h * sizeof *lab);
    sp_component *c1 = NULL;
    if (!m || !lab || !lab1) {
        CHECK(0, "out of memory");
        goto done;
    }
    for (int y = 0; y < h; y++)
        for (int x = w - 80; x < w; x++)
            if ((x - (w - 40)) * (x - (w - 40)) + (y - 30) * (y - 30) <= 30 * 30)
                m[(size_t)y * w + x] = 1;
    for (int x = 0; x < w - 200; x++)
        m[(size_t)50 * w + x] = 1;
    for (int i = 0; i < 40; i++)
        m[(size_t)(5 + i) * w + 16000 + i] = 1;
    srand(12345);
    for (int i = 0; i < 300; i++)
        m[(size_t)(rand() % h) * w + (size_t)(rand() % w)] = 1;
    for (int t = 1; t <= 4; t++) {
        if (sp_label_run(lb, m, w, w, h, lab, &c, &n, t, &err)) {
            CHECK(0, "wide: %s", err.msg);
            goto done;
        }
        if (t == 1) {
            brute_check(m, w, h, lab, c, n);
            n1 = n;
            memcpy(lab1, lab, (size_t)w * h * sizeof *lab);
            c1 = malloc((size_t)n * sizeof *c1);
            if (!c1)
                goto done;
            memcpy(c1, c, (size_t)n * sizeof *c1);
        } else {
            CHECK(n == n1 && !memcmp(lab, lab1, (size_t)w * h * sizeof *lab) &&
                      !memcmp(c, c1, (size_t)n * sizeof *c1),
                  "wide: %d threads differ from 1", t);
        }
    }
done:
    free(c1);
    free(m);
    free(lab);
    free(lab1);
}

/* Largest accepted frame, full: raw moments near 2^53 and m10·m01 near 1e23, so the textbook
 * m11 − m10·m01/m00 in doubles leaves a rounding residue where the exact mu11 is 0. */
static void test_max_full(sp_labeler *lb)
{
    const int w = SP_MAX_DIM, h = (int)(SP_MAX_PIXELS / SP_MAX_DIM);
    sp_error err;
    const sp_component *c;
    int n;
    uint8_t *m = malloc((size_t)w * h);
    int32_t *lab = malloc((size_t)w * h * sizeof *lab);
    if (!m || !lab) {
        CHECK(0, "out of memory");
        goto done;
    }
    memset(m, 1, (size_t)w * h);
    if (sp_label_run(lb, m, w, w, h, lab, &c, &n, 2, &err)) {
        CHECK(0, "max full: %s", err.msg);
        goto done;
    }
    CHECK(n == 1, "max full: n=%d", n);
    if (n == 1) {
        long double mu20 = (long double)h * w * ((long double)w * w - 1) / 12;
        long double mu02 = (long double)w * h * ((long double)h * h - 1) / 12;
        CHECK(c[0].area == (int64_t)w * h, "max full: area");
        CHECK(rel_close(c[0].mu20, mu20, 1e-15) && rel_close(c[0].mu02, mu02, 1e-15) && c[0].mu11 == 0,
              "max full: mu20 %.17g (want %.17Lg), mu02 %.17g (want %.17Lg), mu11 %.17g", c[0].mu20, mu20,
              c[0].mu02, mu02, c[0].mu11);
        CHECK(c[0].cx == (w - 1) / 2.0 && c[0].cy == (h - 1) / 2.0, "max full: centroid");
    }
done:
    free(m);
    free(lab);
}

/* Random masks: brute force, thread independence, workspace reuse across sizes. */
static void test_random(sp_labeler *lb)
{
    sp_error err;
    const sp_component *c;
    int n;
    srand(777);
    for (int k = 0; k < 60; k++) {
        int w = 1 + rand() % 150, h = 1 + rand() % 150, dens = 1 + rand() % 70;
        uint8_t *m = malloc((size_t)w * h);
        int32_t *lab = malloc((size_t)w * h * sizeof *lab), *lab2 = malloc((size_t)w * h * sizeof *lab);
        if (!m || !lab || !lab2) {
            CHECK(0, "out of memory");
            free(m), free(lab), free(lab2);
            return;
        }
        for (int i = 0; i < w * h; i++)
            m[i] = (uint8_t)((rand() % 100) < dens ? 1 + rand() % 255 : 0);
        if (sp_label_run(lb, m, w, w, h, lab, &c, &n, 1 + k % 5, &err) == SP_OK) {
            brute_check(m, w, h, lab, c, n);
            int n2;
            CHECK(sp_label_run(lb, m, w, w, h, lab2, &c, &n2, 1, &err) == SP_OK && n2 == n &&
                      !memcmp(lab, lab2, (size_t)w * h * sizeof *lab),
                  "random %dx%d: thread count changes the labels", w, h);
        } else
            CHECK(0, "random: %s", err.msg);
        free(m), free(lab), free(lab2);
    }
}

/* Sparse writing: a sequence of masks into one buffer (thread counts varying between calls) gives
 * the same labels as full writing; a different buffer in between forces a full clear. */
static void test_sparse(void)
{
    sp_labeler *sp = sp_labeler_new(), *full = sp_labeler_new();
    const int w = 97, h = 61;
    uint8_t *m = malloc((size_t)w * h);
    int32_t *lab = malloc((size_t)w * h * sizeof *lab), *ref = malloc((size_t)w * h * sizeof *lab),
            *other = malloc((size_t)w * h * sizeof *lab);
    sp_error err;
    const sp_component *c;
    int n, n2;
    if (!sp || !full || !m || !lab || !ref || !other) {
        CHECK(0, "out of memory");
        goto done;
    }
    sp_labeler_set_sparse(sp, 1);
    for (size_t i = 0; i < (size_t)w * h; i++)
        lab[i] = 12345 + (int32_t)i; /* garbage: the first sparse call must clear it */
    srand(4242);
    for (int k = 0; k < 40; k++) {
        int dens = rand() % 60;
        for (int i = 0; i < w * h; i++)
            m[i] = (uint8_t)((rand() % 100) < dens);
        int32_t *dst = k == 20 ? other : lab;
        if (k == 21)
            memset(other, 0x55, (size_t)w * h * sizeof *other);
        CHECK(sp_label_run(sp, m, w, w, h, dst, &c, &n, 1 + k % 3, &err) == SP_OK, "sparse: %s", err.msg);
        CHECK(sp_label_run(full, m, w, w, h, ref, &c, &n2, 1, &err) == SP_OK && n2 == n, "full: %s", err.msg);
        CHECK(!memcmp(dst, ref, (size_t)w * h * sizeof *lab), "sparse call %d differs from full writing", k);
    }
done:
    free(m), free(lab), free(ref), free(other);
    sp_labeler_free(sp);
    sp_labeler_free(full);
}

int main(void)
{
    test_sparse();
    sp_labeler *lb = sp_labeler_new();
    if (!lb)
        return 1;
    test_empty_full_single(lb);
    test_bad_input(lb);
    test_random(lb);
    test_wide(lb);
    test_max_full(lb);
    test_empty_full_single(lb); /* reuse after the largest frame */
    sp_labeler_free(lb);
    if (failures)
        fprintf(stderr, "%d failures\n", failures);
    else
        printf("label: all checks passed\n");
    return failures != 0;
}

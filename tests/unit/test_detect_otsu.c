/* Edge cases of sp_otsu_hist. Expected values: a brute-force search over all splits written here
 * in exact rational form (Otsu 1979: between-class variance w0·w1·(μ0 − μ1)²), the REFERENCES.md
 * case {20: 50, 60: 10, 200: 40} → 60, and the documented -1 cases. */
#include "detect/threshold.h"

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

/* Lowest maximiser by long double search; only used where the maximum is well separated. */
static int brute(const uint64_t *h, int nb)
{
    long double W = 0, S = 0, best = -1;
    int bt = -1;
    for (int i = 0; i < nb; i++)
        W += h[i], S += (long double)h[i] * i;
    long double w0 = 0, s0 = 0;
    for (int t = 0; t < nb - 1; t++) {
        w0 += h[t], s0 += (long double)h[t] * t;
        if (w0 == 0 || w0 == W)
            continue;
        long double d = s0 * W - S * w0, v = d * d / (w0 * (W - w0));
        if (v > best * (1 + 1e-15L))
            best = v, bt = t;
    }
    return bt;
}

int main(void)
{
    uint64_t h[65536];
    memset(h, 0, sizeof h);
    CHECK(sp_otsu_hist(h, 256) == -1, "empty histogram");
    h[17] = 5;
    CHECK(sp_otsu_hist(h, 256) == -1, "one occupied bin");
    CHECK(sp_otsu_hist(NULL, 256) == -1 && sp_otsu_hist(h, 1) == -1, "bad arguments");
    h[18] = 1;
    CHECK(sp_otsu_hist(h, 256) == 17, "two adjacent bins split between them: %d", sp_otsu_hist(h, 256));
    memset(h, 0, sizeof h);
    h[20] = 50, h[60] = 10, h[200] = 40; /* REFERENCES.md, Otsu (1979) plateau [60, 199] */
    CHECK(sp_otsu_hist(h, 256) == 60, "reference plateau: %d", sp_otsu_hist(h, 256));
    memset(h, 0, sizeof h);
    h[0] = 1, h[1] = 1; /* nbins = 2 */
    CHECK(sp_otsu_hist(h, 2) == 0, "two bins");
    /* exact tie {a, a+d, a+2d} with equal counts: t = a and t = a+d score the same; lowest wins */
    memset(h, 0, sizeof h);
    h[1000] = h[31000] = h[61000] = 123456789;
    CHECK(sp_otsu_hist(h, 65536) == 1000, "16-bit exact tie: %d", sp_otsu_hist(h, 65536));
    /* large counts near the documented bound (2^48 in all) */
    memset(h, 0, sizeof h);
    h[100] = 1ull << 46, h[40000] = 1ull << 46, h[65535] = 1ull << 45;
    CHECK(sp_otsu_hist(h, 65536) == brute(h, 65536), "large counts: %d vs %d", sp_otsu_hist(h, 65536),
          brute(h, 65536));
    h[0] = 1ull << 48;
    CHECK(sp_otsu_hist(h, 65536) == -1, "total above 2^48 is refused");
    /* random 16-bit histograms against the brute-force search */
    srand(4242);
    for (int k = 0; k < 40; k++) {
        memset(h, 0, sizeof h);
        int c1 = rand() % 65536, c2 = rand() % 65536, s = 1 + rand() % 3000;
        for (int i = 0; i < 20000; i++) {
            int c = (i & 1) ? c1 : c2, v = c + (rand() % (2 * s + 1)) - s;
            if (v >= 0 && v < 65536)
                h[v] += 1 + (uint64_t)(rand() % 1000);
        }
        int got = sp_otsu_hist(h, 65536), want = brute(h, 65536);
        CHECK(got == want, "random 16-bit histogram %d: %d vs brute force %d", k, got, want);
    }
    if (failures)
        fprintf(stderr, "%d failures\n", failures);
    else
        printf("otsu: all checks passed\n");
    return failures != 0;
}

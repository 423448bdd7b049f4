/* Global thresholds.
 *
 * Otsu (1979, IEEE Trans. SMC 9:62): pick the split t maximising the between-class variance
 * w0·w1·(μ0 − μ1)². With W, S the total count and sum and w0, s0 those of bins 0..t, this equals
 * (s0·W − S·w0)² / (w0·w1·W²), so the comparison between two splits needs only integers. We compare
 * exactly (D_a²·den_b against D_b²·den_a in 320-bit arithmetic), which makes the tie rule — the
 * lowest t wins — a property of the histogram, not of rounding. skimage.filters.threshold_otsu
 * takes the first argmax of a floating-point evaluation of the same quantity and returns the bin's
 * value, so for an 8-bit image our t is skimage's threshold (foreground = image > t).
 *
 * Bounds for the exact arithmetic: nbins <= 65536 and a total count <= 2^48 (far above any frame
 * or recording-length histogram); outside them the function returns -1.
 */
#include "detect/threshold.h"

#include <string.h>

__extension__ typedef unsigned __int128 u128;

#define LIMBS 12 /* 32-bit limbs: 384 bits > the 2^320 bound below */

/* out = a·b, little-endian 32-bit limbs, out has na + nb limbs. */
static void mul_limbs(const uint32_t *a, int na, const uint32_t *b, int nb, uint32_t *out)
{
    memset(out, 0, (size_t)(na + nb) * sizeof *out);
    for (int i = 0; i < na; i++) {
        uint64_t carry = 0;
        for (int j = 0; j < nb; j++) {
            uint64_t t = (uint64_t)a[i] * b[j] + out[i + j] + carry;
            out[i + j] = (uint32_t)t;
            carry = t >> 32;
        }
        out[i + nb] = (uint32_t)carry;
    }
}

static void to_limbs(u128 v, uint32_t l[4])
{
    for (int i = 0; i < 4; i++, v >>= 32)
        l[i] = (uint32_t)v;
}

/* D²·den as LIMBS limbs; D < 2^113, den < 2^96. */
static void score(u128 d, u128 den, uint32_t out[LIMBS])
{
    uint32_t dl[4], nl[4], d2[8];
    to_limbs(d, dl);
    to_limbs(den, nl);
    mul_limbs(dl, 4, dl, 4, d2);
    mul_limbs(d2, 8, nl, 4, out);
}

static int cmp_limbs(const uint32_t *a, const uint32_t *b)
{
    for (int i = LIMBS - 1; i >= 0; i--)
        if (a[i] != b[i])
            return a[i] < b[i] ? -1 : 1;
    return 0;
}

int sp_otsu_hist(const uint64_t *hist, int nbins)
{
    if (!hist || nbins < 2 || nbins > 65536)
        return -1;
    uint64_t W = 0, S = 0;
    int occupied = 0;
    for (int i = 0; i < nbins; i++) {
        if (hist[i] > (1ull << 48) || W + hist[i] > (1ull << 48))
            return -1;
        W += hist[i];
        S += hist[i] * (uint64_t)i; /* < 2^48 · 2^16 */
        occupied += hist[i] != 0;
    }
    if (occupied < 2)
        return -1;

    int best = -1;
    u128 bd = 0, bden = 0; /* best |D| and w0·w1 */
    uint64_t w0 = 0, s0 = 0;
    for (int t = 0; t < nbins - 1; t++) {
        w0 += hist[t];
        s0 += hist[t] * (uint64_t)t;
        uint64_t w1 = W - w0;
        if (w0 == 0 || w1 == 0)
            continue;
        u128 a = (u128)s0 * W, b = (u128)S * w0;
        u128 d = a > b ? a - b : b - a;
        u128 den = (u128)w0 * w1;
        if (best < 0) {
            best = t, bd = d, bden = den;
            continue;
        }
        /* d²/den > bd²/bden  <=>  d²·bden > bd²·den; strictly greater keeps the lowest t on ties */
        uint32_t x[LIMBS], y[LIMBS];
        score(d, bden, x);
        score(bd, den, y);
        if (cmp_limbs(x, y) > 0)
            best = t, bd = d, bden = den;
    }
    return best;
}

/* Byte scanning for the run-based mask stages (fill, label). */
#ifndef SP_DETECT_BYTESCAN_H
#define SP_DETECT_BYTESCAN_H

#include <stdint.h>
#include <string.h>

/* Index of the first byte of p[x..n) that is non-zero (want_zero = 0) or zero (want_zero = 1), or
 * n. Bubble masks are mostly background and runs are long: empty stretches go 32 bytes at a time,
 * the rest eight at a time. */
static inline int sp_scan_to(const uint8_t *p, int x, int n, int want_zero)
{
    const uint64_t ones = 0x0101010101010101ull, highs = 0x8080808080808080ull;
    if (!want_zero)
        while (x + 32 <= n) {
            uint64_t v[4];
            memcpy(v, p + x, sizeof v);
            if (v[0] | v[1] | v[2] | v[3])
                break;
            x += 32;
        }
    while (x + 8 <= n) {
        uint64_t v;
        memcpy(&v, p + x, 8);
        /* zero-byte detector: flags exactly the zero bytes up to the first one (Mycroft's trick) */
        uint64_t hit = want_zero ? ((v - ones) & ~v & highs) : v;
        if (hit) {
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
            return x + (__builtin_ctzll(hit) >> 3);
#else
            break;
#endif
        }
        x += 8;
    }
    while (x < n && ((p[x] == 0) != want_zero))
        x++;
    return x;
}

#endif

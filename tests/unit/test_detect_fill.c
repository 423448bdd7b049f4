/* Edge cases of sp_fill_holes: tiny sizes, a ring, diagonal leaks (4-connected background escapes
 * through a diagonal gap only if the gap shares an edge), holes touching the border, nested rings,
 * reuse of the workspace, bad sizes. Expected masks are written out by hand. */
#include "detect/fill.h"

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

/* Fill `in` (rows of '0'/'1') and compare with `want`. */
static void case_str(sp_filler *f, const char *name, int w, int h, const char *in, const char *want)
{
    uint8_t m[256];
    sp_error err;
    for (int i = 0; i < w * h; i++)
        m[i] = in[i] == '1';
    if (sp_fill_holes(f, m, w, h, &err)) {
        CHECK(0, "%s: %s", name, err.msg);
        return;
    }
    for (int i = 0; i < w * h; i++)
        if (m[i] != (want[i] == '1')) {
            CHECK(0, "%s: pixel (%d,%d) is %d", name, i % w, i / w, m[i]);
            return;
        }
}

int main(void)
{
    sp_filler *f = sp_filler_new();
    sp_error err;
    if (!f)
        return 1;
    case_str(f, "1x1 empty", 1, 1, "0", "0");
    case_str(f, "1x1 full", 1, 1, "1", "1");
    case_str(f, "ring", 3, 3, "111101111", "111111111");
    case_str(f, "open ring", 3, 3, "111101101", "111101101");
    case_str(f, "diagonal corners do not leak", 4, 4, "0110100110010110", "0110111111110110");
    case_str(f, "two-row image", 5, 2, "1111110001", "1111110001");
    case_str(f, "hole reaching the right side", 5, 3, "111111100011111", "111111100011111");
    case_str(f, "nested", 7, 7,
             "1111111"
             "1000001"
             "1011101"
             "1010101"
             "1011101"
             "1000001"
             "1111111",
             "1111111111111111111111111111111111111111111111111");
    case_str(f, "two holes, one open", 7, 3, "111111110101001111111", "111111111111001111111");
    uint8_t m[4] = {0};
    CHECK(sp_fill_holes(f, m, 0, 4, &err) == SP_ERR_INPUT && strstr(err.msg, "fill"), "zero width");
    CHECK(sp_fill_holes(f, m, 4, 20000, &err) == SP_ERR_INPUT, "height above SP_MAX_DIM");
    /* a wide sparse frame: one ring near the right edge of a 16384-wide mask */
    int w = SP_MAX_DIM, h = 32;
    uint8_t *big = calloc((size_t)w * h, 1);
    if (big) {
        for (int y = 10; y <= 20; y++)
            for (int x = w - 30; x <= w - 20; x++)
                big[(size_t)y * w + x] = (y == 10 || y == 20 || x == w - 30 || x == w - 20);
        CHECK(sp_fill_holes(f, big, w, h, &err) == SP_OK, "wide: %s", err.msg);
        size_t ones = 0;
        for (size_t i = 0; i < (size_t)w * h; i++)
            ones += big[i];
        CHECK(ones == 121, "wide: %zu foreground pixels after filling, want 11x11 = 121", ones);
        free(big);
    }
    sp_filler_free(f);
    if (failures)
        fprintf(stderr, "%d failures\n", failures);
    else
        printf("fill: all checks passed\n");
    return failures != 0;
}

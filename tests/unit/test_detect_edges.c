/* The outline stages' shortcuts against their plain definitions (edges.h, docs/methods-bubspeed.md):
 * - the transmission patch holds sp_view_norm's value bit for bit at every position a stage reads
 *   (8- and 16-bit frames, a flicker gain, zero, negative, NaN and tiny background values), and
 *   covers exactly the frame within the reach of the bounding box;
 * - the dark and light levels are the exact order statistics of their samples (component pixels; the
 *   samples 3..10 px out along the outline pairs, stopping at the frame or another label), found here
 *   by sorting: sets large enough for the histogram path, with values crowded into one bin so the
 *   second level runs too, and small ones;
 * - components touching each side of the frame, so the clipped window and patch are exercised. */
#include "check.h"
#include "detect/edges.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static unsigned rng = 12345u;
static double urand(void)
{
    rng = rng * 1664525u + 1013904223u;
    return (rng >> 8) * (1.0 / 16777216.0);
}

static int cmp_float(const void *a, const void *b)
{
    float x = *(const float *)a, y = *(const float *)b;
    return x < y ? -1 : x > y;
}

static int same_float(float a, float b)
{
    return memcmp(&a, &b, sizeof a) == 0;
}

enum { W = 96, H = 80 };

/* One scene: a disc of label 1 (centre cx, cy, radius r, clipped by the frame), a second label nearby
 * (blocks some light samples), transmissions crowded near `dark` inside and near 1 outside. */
static void scene(int bytes, double cx, double cy, double r, double dark, sp_image *im, float *bg,
                  int32_t *labels, sp_component *c)
{
    im->width = W;
    im->height = H;
    im->bytes = bytes;
    im->bits = bytes == 1 ? 8 : 12;
    im->stride = (ptrdiff_t)W * bytes;
    double full = bytes == 1 ? 200.0 : 3000.0;
    memset(c, 0, sizeof *c);
    c->x0 = W;
    c->y0 = H;
    c->x1 = c->y1 = -1;
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            size_t i = (size_t)y * W + x;
            double b = full * (0.8 + 0.2 * urand());
            int in = (x - cx) * (x - cx) + (y - cy) * (y - cy) <= r * r;
            int other = !in && (x - cx - r - 6) * (x - cx - r - 6) + (y - cy) * (y - cy) <= 9;
            labels[i] = in ? 1 : other ? 2 : 0;
            double n = in ? dark + 0.004 * urand() : other ? 0.3 : 0.995 + 0.01 * urand();
            double raw = n * b * 0.93;
            if (bytes == 1)
                ((uint8_t *)im->data)[i] = (uint8_t)(raw > 255 ? 255 : raw);
            else
                ((uint16_t *)im->data)[i] = (uint16_t)(raw > 4095 ? 4095 : raw);
            bg[i] = (float)b;
            if (in) {
                c->area++;
                c->x0 = x < c->x0 ? x : c->x0;
                c->x1 = x > c->x1 ? x : c->x1;
                c->y0 = y < c->y0 ? y : c->y0;
                c->y1 = y > c->y1 ? y : c->y1;
            }
        }
    /* Awkward background values the division must treat as sp_view_norm does. */
    const float odd[] = {0.f, -3.f, NAN, 1e-40f, INFINITY};
    for (int k = 0; k < 40; k++)
        bg[(size_t)(urand() * H) * W + (size_t)(urand() * W)] = odd[k % 5];
}

static void check_scene(const char *name, int bytes, double cx, double cy, double r, double dark)
{
    static uint16_t data[W * H];
    static float bg[W * H];
    static int32_t labels[W * H];
    sp_image im = {0};
    im.data = data;
    sp_component c;
    scene(bytes, cx, cy, r, dark, &im, bg, labels, &c);
    sp_frame_view v = {&im, bg, 0.93f};
    sp_edges e;
    memset(&e, 0, sizeof e);
    sp_error err;
    int rc = sp_edges_exterior(&e, labels, W, H, 1, &c, 1, &err);
    if (!rc)
        rc = sp_edges_levels(&e, &v, labels, 1, &c, &err);
    CHECK(rc == 0, "%s: edges failed: %s", name, err.msg);
    if (rc) {
        sp_edges_release(&e);
        return;
    }
    /* Patch extent: the frame within SP_EDGE_REACH_PX of the bounding box. */
    const int R = SP_EDGE_REACH_PX;
    int px0 = c.x0 - R < 0 ? 0 : c.x0 - R, py0 = c.y0 - R < 0 ? 0 : c.y0 - R;
    int px1 = c.x1 + R > W - 1 ? W - 1 : c.x1 + R, py1 = c.y1 + R > H - 1 ? H - 1 : c.y1 + R;
    CHECK(e.px0 == px0 && e.py0 == py0 && e.pw == px1 - px0 + 1 && e.ph == py1 - py0 + 1,
          "%s: patch %d,%d %dx%d", name, e.px0, e.py0, e.pw, e.ph);
    /* Bit-identical wherever a stage can read: rows or columns of the window (box + 1). */
    long bad = 0, read = 0;
    for (int y = py0; y <= py1; y++)
        for (int x = px0; x <= px1; x++) {
            if ((y < c.y0 - 1 || y > c.y1 + 1) && (x < c.x0 - 1 || x > c.x1 + 1))
                continue;
            read++;
            float want = sp_view_norm(&v, x, y);
            bad += !same_float(want, e.nv[(size_t)(y - py0) * e.pw + (x - px0)]);
        }
    CHECK(bad == 0 && read > 0, "%s: %ld of %ld patch values differ from sp_view_norm", name, bad, read);

    /* Reference levels by sorting the samples named in edges.h. */
    float *s = malloc(sizeof(float) * (size_t)(W * H * 8));
    size_t n = 0;
    float nmin = 1e30f;
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
            if (labels[(size_t)y * W + x] == 1) {
                s[n++] = sp_view_norm(&v, x, y);
                nmin = s[n - 1] < nmin ? s[n - 1] : nmin;
            }
    qsort(s, n, sizeof *s, cmp_float);
    float dark_want = s[(size_t)(0.2 * (double)(n - 1) + 0.5)];
    CHECK(same_float(e.n_dark, dark_want), "%s: dark level %.9g, sorted %.9g (n %zu)", name, e.n_dark,
          dark_want, n);
    CHECK(same_float(e.n_min, nmin), "%s: minimum %.9g vs %.9g", name, e.n_min, nmin);
    static const int d4[4][2] = {{1, 0}, {-1, 0}, {0, 1}, {0, -1}};
    n = 0;
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            if (labels[(size_t)y * W + x] != 1)
                continue;
            for (int d = 0; d < 4; d++) {
                int qx = x + d4[d][0], qy = y + d4[d][1];
                if (qx < 0 || qy < 0 || qx >= W || qy >= H || labels[(size_t)qy * W + qx] == 1)
                    continue; /* not an outline pair (holes filled: exterior = not the component) */
                for (int k = 3; k <= 10; k++) {
                    int sx = x + k * d4[d][0], sy = y + k * d4[d][1];
                    if (sx < 0 || sy < 0 || sx >= W || sy >= H || labels[(size_t)sy * W + sx] != 0)
                        break;
                    s[n++] = sp_view_norm(&v, sx, sy);
                }
            }
        }
    qsort(s, n, sizeof *s, cmp_float);
    float light_want = n ? s[(size_t)(0.5 * (double)(n - 1) + 0.5)] : 1.0f;
    CHECK(same_float(e.n_light, light_want), "%s: light level %.9g, sorted %.9g (n %zu)", name, e.n_light,
          light_want, n);
    free(s);
    sp_edges_release(&e);
}

int main(void)
{
    for (int bytes = 1; bytes <= 2; bytes++) {
        check_scene("centre", bytes, 48, 40, 20, 0.2);
        check_scene("small", bytes, 40, 30, 6, 0.25);   /* fewer than 256 samples: quickselect only */
        check_scene("left-top", bytes, 5, 3, 14, 0.15); /* cut by two sides */
        check_scene("right-bottom", bytes, W - 3, H - 6, 16, 0.3);
        check_scene("top-edge", bytes, 50, 0, 12, 0.2);
        check_scene("row", bytes, 48, 40, 0.6, 0.2); /* a single pixel */
    }
    return check_report();
}

/* The planned normalisation (sp_norm_plan: tile maxima of the background, a compact gain grid) must
 * give bit for bit what the plain passes give: the same gain and the same mask, on 8- and 16-bit
 * frames whose sizes are not multiples of the tile, with backgrounds holding zeros and NaNs, with
 * bubbles, exact ties (frame == level·gain·bg) and a stride wider than the row; and a kept mask
 * buffer with its row occupancy carried from frame to frame through fill and label. */
#include "check.h"
#include "detect/fill.h"
#include "detect/label.h"
#include "detect/normalise.h"

#include <stdlib.h>
#include <string.h>

static uint32_t rng = 12345;
static uint32_t rnd(void)
{
    rng = rng * 1664525u + 1013904223u;
    return rng >> 8;
}

static void one_case(int w, int h, int bytes, int odd_bg, int trial)
{
    sp_error err;
    sp_image im;
    memset(&im, 0, sizeof im);
    CHECK(sp_image_alloc(&im, w + 7, h, bytes, &err) == 0, "alloc");
    im.width = w; /* a stride wider than the row */
    float *bg = malloc(sizeof *bg * (size_t)w * h);
    uint8_t *m1 = malloc((size_t)w * h), *m2 = malloc((size_t)w * h);
    const float full = bytes == 1 ? 200.f : 3000.f;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            float b = full * (0.6f + 0.4f * (float)x / (float)w) + (float)(rnd() % 9);
            if (odd_bg && rnd() % 97 == 0)
                b = rnd() % 2 ? 0.f : NAN;
            bg[(size_t)y * w + x] = b;
        }
    /* Frame: the light times a gain, noise, a few dark discs, and some pixels set to exact ties. */
    const float gain = 0.9f + 0.2f * (float)(rnd() % 100) / 100.f;
    int nd = 1 + trial % 5;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            float b = bg[(size_t)y * w + x];
            float v = (b == b ? b : full) * gain + (float)((int)(rnd() % 7) - 3);
            for (int k = 0; k < nd; k++) {
                int cx = (int)((k * 7919 + trial * 131) % w), cy = (int)((k * 104729 + trial * 71) % h);
                int r = 3 + (k * 5 + trial) % 20;
                if ((x - cx) * (x - cx) + (y - cy) * (y - cy) < r * r)
                    v *= 0.3f + 0.1f * (float)(k % 3);
            }
            if (rnd() % 211 == 0)
                v = 0.7f * b; /* near the level: ties and their neighbours */
            float top = bytes == 1 ? 255.f : 65535.f;
            v = v < 0 || v != v ? 0 : v > top ? top : v;
            if (bytes == 1)
                ((uint8_t *)im.data + (ptrdiff_t)y * im.stride)[x] = (uint8_t)(v + 0.5f);
            else
                ((uint16_t *)((char *)im.data + (ptrdiff_t)y * im.stride))[x] = (uint16_t)(v + 0.5f);
        }
    sp_norm_plan plan;
    memset(&plan, 0, sizeof plan);
    CHECK(sp_norm_plan_build(&plan, bg, w, h, &err) == 0, "plan %dx%d", w, h);
    float g1 = sp_norm_gain(&im, bg), g2 = -1.f;
    sp_norm_plan_scan(&plan, &im, &g2);
    CHECK(memcmp(&g1, &g2, sizeof g1) == 0, "%dx%d %d-byte trial %d: gain %.9g vs planned %.9g", w, h, bytes,
          trial, g1, g2);
    const float levels[3] = {0.7f, 0.35f, 0.97f};
    for (int l = 0; l < 3; l++) {
        sp_frame_view v = {&im, bg, g1};
        memset(m1, 7, (size_t)w * h);
        memset(m2, 9, (size_t)w * h);
        sp_norm_mask(&v, levels[l], m1);
        sp_norm_mask_planned(&plan, &v, levels[l], m2, NULL);
        size_t bad = 0, on = 0;
        for (size_t i = 0; i < (size_t)w * h; i++) {
            bad += m1[i] != m2[i];
            on += m1[i];
        }
        CHECK(bad == 0, "%dx%d %d-byte trial %d level %.2f: %zu of %zu mask pixels differ (%zu set)", w, h,
              bytes, trial, levels[l], bad, (size_t)w * h, on);
    }
    /* A kept mask buffer: after a frame with other dark places (the first mask), the planned pass told
     * which rows were set clears only those, reports each row's occupancy, and fill and label told
     * the same give what they give reading every row. */
    {
        uint8_t *keep = malloc((size_t)w * h), *rows = malloc((size_t)h), *ref = malloc((size_t)w * h);
        for (size_t i = 0; i < (size_t)w * h; i++) /* every third row dirty, the others clear */
            keep[i] = (uint8_t)((i / (size_t)w) % 3 == 0 && rnd() % 5 == 0);
        for (int y = 0; y < h; y++) {
            rows[y] = 0;
            for (int x = 0; x < w; x++)
                rows[y] |= keep[(size_t)y * w + x];
        }
        sp_frame_view v = {&im, bg, g1};
        sp_norm_mask(&v, 0.7f, ref);
        sp_norm_mask_planned(&plan, &v, 0.7f, keep, rows);
        CHECK(memcmp(ref, keep, (size_t)w * h) == 0, "%dx%d trial %d: kept buffer cleared and masked", w, h,
              trial);
        int rbad = 0;
        for (int y = 0; y < h; y++) {
            uint8_t any = 0;
            for (int x = 0; x < w; x++)
                any |= ref[(size_t)y * w + x];
            rbad += rows[y] != any;
        }
        CHECK(rbad == 0, "%dx%d trial %d: %d rows reported wrongly", w, h, trial, rbad);
        sp_filler *fl = sp_filler_new();
        sp_error e2;
        CHECK(sp_fill_holes(fl, ref, w, h, &e2) == 0 && sp_fill_holes_rows(fl, keep, w, h, rows, &e2) == 0 &&
                  memcmp(ref, keep, (size_t)w * h) == 0,
              "%dx%d trial %d: fill told the rows", w, h, trial);
        sp_labeler *lb = sp_labeler_new();
        int32_t *l1 = malloc(sizeof *l1 * (size_t)w * h), *l2 = malloc(sizeof *l2 * (size_t)w * h);
        const sp_component *c1 = NULL, *c2 = NULL;
        int n1 = -1, n2 = -2;
        CHECK(sp_label_run(lb, ref, w, w, h, l1, &c1, &n1, 1, &e2) == 0, "label");
        sp_component first = n1 > 0 ? c1[0] : (sp_component){0};
        CHECK(sp_label_run_rows(lb, keep, w, w, h, rows, l2, &c2, &n2, 2, &e2) == 0 && n1 == n2 &&
                  memcmp(l1, l2, sizeof *l1 * (size_t)w * h) == 0 &&
                  (n1 == 0 || memcmp(&first, &c2[0], sizeof first) == 0),
              "%dx%d trial %d: label told the rows (%d vs %d components)", w, h, trial, n1, n2);
        sp_labeler_free(lb);
        sp_filler_free(fl);
        free(l1);
        free(l2);
        free(keep);
        free(rows);
        free(ref);
    }
    /* A frame that was not scanned falls back to the plain pass. */
    sp_image other = im;
    sp_frame_view v = {&other, bg, g1};
    sp_norm_mask(&v, 0.7f, m1);
    sp_norm_mask_planned(&plan, &v, 0.7f, m2, NULL);
    CHECK(memcmp(m1, m2, (size_t)w * h) == 0, "unscanned frame");
    sp_norm_plan_free(&plan);
    sp_image_free(&im);
    free(bg);
    free(m1);
    free(m2);
}

int main(void)
{
    const int sizes[][2] = {{1, 1}, {5, 3}, {16, 16}, {17, 33}, {64, 48}, {100, 77}, {257, 129}, {640, 80}};
    int trial = 0;
    for (size_t s = 0; s < sizeof sizes / sizeof sizes[0]; s++)
        for (int bytes = 1; bytes <= 2; bytes++)
            for (int odd = 0; odd <= 1; odd++)
                for (int r = 0; r < 3; r++)
                    one_case(sizes[s][0], sizes[s][1], bytes, odd, trial++);
    return check_report();
}

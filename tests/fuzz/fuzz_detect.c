/* libFuzzer target: one frame through the whole detection chain (src/detect/detect.h) with the
 * frame's size, depth, pixels, background and options taken from the input. Every stage must read
 * only its buffers (ASan) and compute only defined values (UBSan), and the planned pixel passes
 * (sp_norm_plan: tile skipping, the compact gain grid, rows left clear) must give exactly what the
 * plain passes give: a detector told the background and one not told must agree bit for bit. Both
 * detectors live across inputs, so workspaces are reused at changing sizes as in a real run.
 * fixtures/fuzz-regress/fuzz_detect/tile-at-the-level is what this target found within seconds when
 * the tile test was loosened on purpose (a tile skipped though a pixel lies at the level); the
 * ordinary suite replays it so that such a slip fails there too. */
#include "fuzz_common.h"

#include "detect/detect.h"

static int same_double(double a, double b)
{
    return memcmp(&a, &b, sizeof a) == 0;
}

static int same_bubble(const sp_bubble *a, const sp_bubble *b)
{
    const double da[] = {a->x,        a->y,         a->area_px,  a->major_px, a->minor_px,
                         a->tilt_deg, a->d_area_px, a->d_vol_px, a->aspect,   a->solidity,
                         a->contrast, a->sharpness, a->u_d_px};
    const double db[] = {b->x,        b->y,         b->area_px,  b->major_px, b->minor_px,
                         b->tilt_deg, b->d_area_px, b->d_vol_px, b->aspect,   b->solidity,
                         b->contrast, b->sharpness, b->u_d_px};
    for (size_t i = 0; i < sizeof da / sizeof da[0]; i++)
        if (!same_double(da[i], db[i]))
            return 0;
    return a->edge == b->edge && a->split == b->split && a->fit == b->fit && a->cluster == b->cluster &&
           a->in_focus == b->in_focus && a->x0 == b->x0 && a->y0 == b->y0 && a->x1 == b->x1 && a->y1 == b->y1;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static sp_detector *planned, *plain;
    if (!planned && (!(planned = sp_detector_new()) || !(plain = sp_detector_new())))
        abort();
    if (size < 5)
        return 0;
    const int w = 1 + data[0] % 96, h = 1 + data[1] % 96, flags = data[2], bgmode = data[3] % 4;
    const int bytes = flags & 1 ? 2 : 1;
    const float full = bytes == 1 ? 200.f : 3000.f;
    const uint8_t *px = data + 4;
    const size_t npx = size - 4;
    sp_error err;
    sp_image im = {0};
    if (sp_image_alloc(&im, w, h, bytes, &err))
        abort();
    im.bits = bytes * 8;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            size_t i = ((size_t)y * w + x) * (size_t)bytes;
            uint8_t *row = (uint8_t *)im.data + (ptrdiff_t)y * im.stride;
            if (bytes == 1) {
                row[x] = px[i % npx];
            } else {
                uint16_t v = (uint16_t)(px[i % npx] | px[(i + 1) % npx] << 8);
                memcpy(row + 2 * x, &v, 2);
            }
        }
    /* Backgrounds: flat, a gradient, a gradient with dead (zero) pixels, or the frame's own values
     * (so that ties with the threshold are common). */
    float *bg = malloc(sizeof *bg * (size_t)w * (size_t)h);
    if (!bg)
        abort();
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * w + x;
            float b = full;
            if (bgmode == 1 || bgmode == 2)
                b = full * (0.5f + (float)(x + y) / (float)(w + h));
            if (bgmode == 2 && px[(i * 7) % npx] % 13 == 0)
                b = 0.f;
            if (bgmode == 3)
                b = bytes == 1 ? (float)sp_row8(&im, y)[x] : (float)sp_row16(&im, y)[x];
            bg[i] = b;
        }
    sp_detect_opts o;
    sp_detect_opts_default(&o);
    o.fill = !(flags & 2);
    o.measure.split = !(flags & 4);
    o.otsu = (flags & 8) != 0;
    o.flicker = !(flags & 16);
    o.threshold = 0.3 + 0.1 * (flags >> 5);
    sp_detect_result r1, r2;
    sp_error e1, e2;
    if (sp_detector_set_background(planned, bg, w, h, &e1))
        abort();
    int rc1 = sp_detect_run(planned, &im, bg, &o, 1, &r1, &e1);
    int rc2 = sp_detect_run(plain, &im, bg, &o, 1, &r2, &e2);
    if (rc1 != rc2 || (rc1 && rc1 != SP_ERR_INTERNAL && rc1 != SP_ERR_INPUT)) {
        fprintf(stderr, "planned status %d (%s), plain %d (%s)\n", rc1, e1.msg, rc2, e2.msg);
        abort();
    }
    if (!rc1) {
        if (r1.n != r2.n || !same_double(r1.gain, r2.gain) || !same_double(r1.level, r2.level) ||
            !same_double(r1.gas_px, r2.gas_px)) {
            fprintf(stderr, "planned %d bubbles (gain %.9g), plain %d (gain %.9g)\n", r1.n, r1.gain, r2.n,
                    r2.gain);
            abort();
        }
        for (int i = 0; i < r1.n; i++)
            if (!same_bubble(&r1.bubbles[i], &r2.bubbles[i])) {
                fprintf(stderr, "bubble %d differs: planned d %.9g, plain d %.9g\n", i,
                        r1.bubbles[i].d_vol_px, r2.bubbles[i].d_vol_px);
                abort();
            }
    }
    free(bg);
    sp_image_free(&im);
    return 0;
}

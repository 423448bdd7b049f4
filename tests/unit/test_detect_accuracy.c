/* Real-world accuracy of the per-frame chain (sp_detect_run) on rendered frames with known truth:
 * splitting of overlapping pairs, the focus sharpness of a defocused edge, ±5 % flicker, and a bubble
 * that sits still through most of the frames the background is estimated from.
 *
 * Truth: bubbles are flat dark ellipses (transmission 0.15) on light; overlapping shadows multiply.
 * Pixels an outline crosses get 8×8 supersampled coverage, so the drawn ellipse is the reference
 * (the edge level ½ of the dark-to-light step lies on it). Defocus is a pillbox (disc) kernel. */
#include "check.h"
#include "detect/background.h"
#include "detect/detect.h"
#include "detect/focus.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

typedef struct ell {
    double cx, cy, a, b, th;
} ell;

static unsigned rng = 88172645u;
static double urand(void)
{
    rng ^= rng << 13;
    rng ^= rng >> 17;
    rng ^= rng << 5;
    return (rng >> 8) / 16777216.0;
}
static double gauss(void)
{
    double u = urand() + 1e-12, v = urand();
    return sqrt(-2 * log(u)) * cos(2 * M_PI * v);
}

static double ell_r(const ell *e, double x, double y)
{
    double dx = x - e->cx, dy = y - e->cy;
    double u = dx * cos(e->th) + dy * sin(e->th), v = -dx * sin(e->th) + dy * cos(e->th);
    return sqrt((u / e->a) * (u / e->a) + (v / e->b) * (v / e->b));
}

/* Dark coverage of pixel (x, y) by ellipse e. */
static double coverage(const ell *e, int x, int y)
{
    double r = ell_r(e, x, y), m = 1.0 / e->b;
    if (r < 1 - 1.5 * m)
        return 1;
    if (r > 1 + 1.5 * m)
        return 0;
    int in = 0;
    for (int j = 0; j < 8; j++)
        for (int i = 0; i < 8; i++)
            in += ell_r(e, x - 0.5 + (i + 0.5) / 8, y - 0.5 + (j + 0.5) / 8) <= 1;
    return in / 64.0;
}

/* Transmission of ne ellipses into t (w×h), shadows multiplying. */
static void render(float *t, int w, int h, const ell *e, int ne)
{
    for (int i = 0; i < w * h; i++)
        t[i] = 1.f;
    for (int k = 0; k < ne; k++) {
        int x0 = (int)floor(e[k].cx - e[k].a - 2), x1 = (int)ceil(e[k].cx + e[k].a + 2);
        int y0 = (int)floor(e[k].cy - e[k].a - 2), y1 = (int)ceil(e[k].cy + e[k].a + 2);
        for (int y = y0 < 0 ? 0 : y0; y <= y1 && y < h; y++)
            for (int x = x0 < 0 ? 0 : x0; x <= x1 && x < w; x++)
                t[y * w + x] *= (float)(1 - 0.85 * coverage(&e[k], x, y));
    }
}

static void pillbox(float *t, int w, int h, double R)
{
    int K = (int)ceil(R + 0.5), kw = 2 * K + 1;
    double *k = calloc((size_t)kw * kw, sizeof *k), sum = 0;
    float *o = malloc(sizeof *o * w * h);
    for (int j = 0; j < kw; j++)
        for (int i = 0; i < kw; i++) {
            int in = 0;
            for (int q = 0; q < 16; q++)
                for (int p = 0; p < 16; p++) {
                    double x = i - K - 0.5 + (p + 0.5) / 16, y = j - K - 0.5 + (q + 0.5) / 16;
                    in += x * x + y * y <= R * R;
                }
            k[j * kw + i] = in;
            sum += in;
        }
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double s = 0;
            for (int j = 0; j < kw; j++)
                for (int i = 0; i < kw; i++) {
                    int xx = x + i - K, yy = y + j - K;
                    xx = xx < 0 ? 0 : xx >= w ? w - 1 : xx;
                    yy = yy < 0 ? 0 : yy >= h ? h - 1 : yy;
                    s += k[j * kw + i] * t[yy * w + xx];
                }
            o[y * w + x] = (float)(s / sum);
        }
    memcpy(t, o, sizeof *o * w * h);
    free(o);
    free(k);
}

/* Light: 40000 at the centre, vignetted to about 70 % in the corners. */
static float light_at(int x, int y, int w, int h)
{
    double u = (x - 0.5 * w) / w, v = (y - 0.5 * h) / h;
    return (float)(40000.0 * (1.0 - 0.6 * (u * u + v * v)));
}

/* 16-bit frame = transmission × light × gain + noise (sigma in grey levels). */
static void to_frame(const float *t, int w, int h, double gain, double sigma, sp_image *im)
{
    for (int y = 0; y < h; y++) {
        uint16_t *row = (uint16_t *)((uint8_t *)im->data + (ptrdiff_t)y * im->stride);
        for (int x = 0; x < w; x++) {
            double v = t[y * w + x] * light_at(x, y, w, h) * gain + sigma * gauss();
            row[x] = (uint16_t)(v < 0 ? 0 : v > 65535 ? 65535 : lround(v));
        }
    }
}

static void light_bg(float *bg, int w, int h)
{
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++)
            bg[y * w + x] = light_at(x, y, w, h);
}

/* Index of the detection nearest (x, y) within tol, or -1. */
static int nearest(const sp_detect_result *r, double x, double y, double tol)
{
    int best = -1;
    double bd = tol;
    for (int i = 0; i < r->n; i++) {
        double d = hypot(r->bubbles[i].x - x, r->bubbles[i].y - y);
        if (d <= bd) {
            bd = d;
            best = i;
        }
    }
    return best;
}

/* Overlapping pairs, centre distance 0.7..0.9 × the sum of the radii, radii 5..30 px, sizes 1:1 to 2:1,
 * aspect 0.8..1, random orientation; 60 grey levels of noise on 40000. */
static void test_split(sp_detector *d)
{
    const int w = 160, h = 160;
    float *t = malloc(sizeof *t * w * h), *bg = malloc(sizeof *bg * w * h);
    sp_image im = {0};
    sp_error err;
    sp_image_alloc(&im, w, h, 2, &err);
    light_bg(bg, w, h);
    sp_detect_opts o;
    sp_detect_opts_default(&o);
    static const double r1s[] = {10, 14, 20, 30}, ratios[] = {1.0, 0.8, 0.6, 0.5}, fs[] = {0.7, 0.8, 0.9};
    int n = 0, sep = 0, within = 0, pieces = 0, flagged = 0, wrong = 0;
    double worst = 0;
    for (int i = 0; i < 4; i++)
        for (int j = 0; j < 4; j++)
            for (int k = 0; k < 3; k++)
                for (int rep = 0; rep < 3; rep++) {
                    double r1 = r1s[i], r2 = r1 * ratios[j], D = fs[k] * (r1 + r2), phi = 2 * M_PI * urand();
                    double asp1 = 0.8 + 0.2 * urand(), asp2 = 0.8 + 0.2 * urand();
                    /* Equal-area axes a = r/sqrt(asp), b = r·sqrt(asp). */
                    ell e[2] = {{80 + 0.3 * urand() - D / 2 * cos(phi), 80 + 0.3 * urand() - D / 2 * sin(phi),
                                 r1 / sqrt(asp1), r1 * sqrt(asp1), M_PI * urand()},
                                {80 + D / 2 * cos(phi), 80 + D / 2 * sin(phi), r2 / sqrt(asp2),
                                 r2 * sqrt(asp2), M_PI * urand()}};
                    render(t, w, h, e, 2);
                    to_frame(t, w, h, 1.0, 60.0, &im);
                    sp_detect_result r;
                    if (sp_detect_run(d, &im, bg, &o, 1, &r, &err)) {
                        CHECK(0, "detect: %s", err.msg);
                        continue;
                    }
                    n++;
                    flagged += r.n == 1 && r.bubbles[0].cluster;
                    if (r.n != 2 || r.bubbles[0].split == 0 || r.bubbles[0].split != r.bubbles[1].split) {
                        if (!(r.n == 1 && r.bubbles[0].cluster))
                            printf("  unsplit: r1 %.0f ratio %.1f f %.1f n %d cluster %d solidity %.3f\n", r1,
                                   ratios[j], fs[k], r.n, r.n ? r.bubbles[0].cluster : -1,
                                   r.n ? r.bubbles[0].solidity : 0);
                        wrong += !(r.n == 1 && r.bubbles[0].cluster); /* unsplit and not flagged: a guess */
                        continue;
                    }
                    int ok = 1;
                    for (int q = 0; q < 2; q++) {
                        int m = nearest(&r, e[q].cx, e[q].cy, 0.25 * e[q].b + 1);
                        if (m < 0) {
                            ok = 0;
                            continue;
                        }
                        double dt = 2 * sqrt(e[q].a * e[q].b), dm = r.bubbles[m].d_area_px;
                        double rel = fabs(dm - dt) / dt;
                        worst = rel > worst ? rel : worst;
                        if (rel > 0.05)
                            printf("  piece off: r1 %.0f ratio %.1f f %.1f truth %.2f measured %.2f\n", r1,
                                   ratios[j], fs[k], dt, dm);
                        pieces++;
                        within += rel <= 0.05;
                    }
                    sep += ok;
                }
    printf(
        "split: %d pairs, %d separated (%.1f %%), %d unsplit and flagged, %d wrong; pieces within 5 %%: %d "
        "of %d, worst %.2f %%\n",
        n, sep, 100.0 * sep / n, flagged, wrong, within, pieces, 100 * worst);
    CHECK(sep >= 0.9 * n, "separated %d of %d", sep, n);
    /* Every piece within 5 %: a small piece seen over too little of its outline to pin it down is not
     * guessed, its cluster is flagged instead (split.c). */
    CHECK(within == pieces, "pieces within 5 %%: %d of %d", within, pieces);
    CHECK(wrong == 0, "%d pairs neither split nor flagged", wrong);

    /* A single ellipse of any aspect is not split nor flagged. */
    int single_bad = 0;
    for (int q = 0; q < 20; q++) {
        double r0 = 6 + 30 * urand(), asp = 0.45 + 0.55 * urand();
        ell e = {80 + urand(), 80 + urand(), r0 / sqrt(asp), r0 * sqrt(asp), M_PI * urand()};
        render(t, w, h, &e, 1);
        to_frame(t, w, h, 1.0, 60.0, &im);
        sp_detect_result r;
        sp_detect_run(d, &im, bg, &o, 1, &r, &err);
        single_bad += r.n != 1 || r.bubbles[0].split || r.bubbles[0].cluster;
    }
    CHECK(single_bad == 0, "%d of 20 single ellipses split or flagged", single_bad);
    sp_image_free(&im);
    free(t);
    free(bg);
}

/* Sharpness of a disc's outline against the pillbox radius of its defocus. */
static double sharpness_at(sp_detector *d, double R, double r0)
{
    const int w = 96, h = 96;
    float *t = malloc(sizeof *t * w * h), *bg = malloc(sizeof *bg * w * h);
    sp_image im = {0};
    sp_error err;
    sp_image_alloc(&im, w, h, 2, &err);
    light_bg(bg, w, h);
    sp_detect_opts o;
    sp_detect_opts_default(&o);
    double sum = 0;
    int m = 0;
    for (int rep = 0; rep < 4; rep++) {
        ell e = {48 + urand(), 48 + urand(), r0, r0, 0};
        render(t, w, h, &e, 1);
        if (R > 0)
            pillbox(t, w, h, R);
        to_frame(t, w, h, 1.0, 20.0, &im);
        sp_detect_result r;
        if (sp_detect_run(d, &im, bg, &o, 1, &r, &err) == 0 && r.n == 1) {
            sum += r.bubbles[0].sharpness;
            m++;
        }
    }
    sp_image_free(&im);
    free(t);
    free(bg);
    return m ? sum / m : 0;
}

static void test_focus(sp_detector *d)
{
    static const double Rs[] = {0, 0.5, 1.0, 1.5, 2.0, 3.0};
    double s[6];
    for (int i = 0; i < 6; i++) {
        s[i] = sharpness_at(d, Rs[i], 20);
        printf("focus: pillbox radius %.1f px -> sharpness %.3f /px\n", Rs[i], s[i]);
    }
    for (int i = 1; i < 6; i++)
        CHECK(s[i] < s[i - 1], "sharpness falls with defocus: R %.1f %.3f vs R %.1f %.3f", Rs[i], s[i],
              Rs[i - 1], s[i - 1]);
    /* The documented default is the sharpness of a step under a defocus disc of 1.5 px radius. */
    CHECK(fabs(s[3] - SP_FOCUS_MIN_SHARPNESS_DEFAULT) <= 0.05 * SP_FOCUS_MIN_SHARPNESS_DEFAULT,
          "default %.3f vs measured %.3f at R = 1.5 px", SP_FOCUS_MIN_SHARPNESS_DEFAULT, s[3]);
    double s_small = sharpness_at(d, 1.0, 8), s_big = sharpness_at(d, 1.0, 40);
    printf("focus: R 1 px on radius 8 / 40 px -> %.3f / %.3f\n", s_small, s_big);
    CHECK(fabs(s_small - s[2]) <= 0.15 * s[2] && fabs(s_big - s[2]) <= 0.15 * s[2],
          "sharpness does not depend much on size: %.3f %.3f %.3f", s_small, s[2], s_big);
}

/* ±5 % flicker from frame to frame: same bubbles, same sizes. */
static void test_flicker(sp_detector *d)
{
    const int w = 320, h = 240, nb = 8, nf = 24;
    float *t = malloc(sizeof *t * w * h), *bg = malloc(sizeof *bg * w * h);
    sp_image im = {0};
    sp_error err;
    sp_image_alloc(&im, w, h, 2, &err);
    light_bg(bg, w, h);
    sp_detect_opts o;
    sp_detect_opts_default(&o);
    ell e[8];
    for (int k = 0; k < nb; k++) {
        double r0 = 5 + 20 * urand(), asp = 0.6 + 0.4 * urand();
        e[k] = (ell){40 + 80 * (k % 4) + 5 * urand(), 60 + 120 * (k / 4) + 5 * urand(), r0 / sqrt(asp),
                     r0 * sqrt(asp), M_PI * urand()};
    }
    render(t, w, h, e, nb);
    double ref[8] = {0}, sum_rel = 0;
    int n_rel = 0, false_det = 0, missed = 0;
    for (int f = -1; f < nf; f++) {
        /* Frame -1 is the reference without flicker; then gains 0.95..1.05, alternating in sign. */
        double g = f < 0 ? 1.0 : 1.0 + (f % 2 ? 1 : -1) * 0.05 * (0.2 + 0.8 * urand());
        to_frame(t, w, h, g, 40.0, &im);
        sp_detect_result r;
        if (sp_detect_run(d, &im, bg, &o, 1, &r, &err)) {
            CHECK(0, "detect: %s", err.msg);
            continue;
        }
        int matched = 0;
        for (int k = 0; k < nb; k++) {
            int m = nearest(&r, e[k].cx, e[k].cy, 1.0);
            if (m < 0) {
                missed++;
                continue;
            }
            matched++;
            if (f < 0)
                ref[k] = r.bubbles[m].d_vol_px;
            else {
                sum_rel += (r.bubbles[m].d_vol_px - ref[k]) / ref[k];
                n_rel++;
            }
        }
        false_det += r.n - matched;
    }
    double bias = n_rel ? sum_rel / n_rel : 1;
    printf("flicker: %d detections compared, mean diameter change %.4f %%, %d false, %d missed\n", n_rel,
           100 * bias, false_det, missed);
    CHECK(false_det == 0, "%d false detections under flicker", false_det);
    CHECK(missed == 0, "%d bubbles missed under flicker", missed);
    CHECK(fabs(bias) <= 0.005, "diameter bias under flicker %.4f %% <= 0.5 %%", 100 * bias);
    sp_image_free(&im);
    free(t);
    free(bg);
}

/* A bubble held still for 100 of 160 frames; others cross the field. Background: median of all frames. */
static int still_run(sp_detector *d, int guard, int *moving_found, int *moving_total, int *false_det)
{
    const int w = 160, h = 128, nf = 160;
    float *t = malloc(sizeof *t * w * h), *bg = malloc(sizeof *bg * w * h);
    sp_image *frames = calloc(nf, sizeof *frames);
    sp_error err;
    sp_bg_builder *b = NULL;
    sp_bg_builder_new(&b, w, h, 2, nf, &err);
    ell still = {40.3, 70.6, 9, 7.5, 0.3};
    unsigned saved = rng;
    for (int f = 0; f < nf; f++) {
        ell e[3];
        int ne = 0;
        if (f >= 30 && f < 130)
            e[ne++] = still;
        /* Two bubbles rising through the frame at 3 px per frame, wrapping. */
        e[ne++] = (ell){110, fmod(200 - 3.0 * f, 160) - 16, 8, 6, 0.2};
        e[ne++] = (ell){135, fmod(260 - 3.0 * f, 160) - 16, 6, 6, 0};
        render(t, w, h, e, ne);
        sp_image_alloc(&frames[f], w, h, 2, &err);
        to_frame(t, w, h, 1.0, 40.0, &frames[f]);
        sp_bg_builder_add(b, &frames[f], &err);
    }
    rng = saved;
    sp_bg_builder_finish(b, 50, bg, 1, &err);
    sp_bg_builder_free(b);
    int filled = 0;
    if (guard)
        CHECK(sp_bg_guard_still(bg, w, h, 0.5, 0.05, &filled, &err) == 0, "guard: %s", err.msg);
    sp_detect_opts o;
    sp_detect_opts_default(&o);
    int seen = 0;
    *moving_found = *moving_total = *false_det = 0;
    for (int f = 0; f < nf; f++) {
        sp_detect_result r;
        sp_detect_run(d, &frames[f], bg, &o, 1, &r, &err);
        int m = nearest(&r, still.cx, still.cy, 1.0);
        if (f >= 30 && f < 130)
            seen += m >= 0;
        else
            *false_det += m >= 0;
        double ys[2] = {fmod(200 - 3.0 * f, 160) - 16, fmod(260 - 3.0 * f, 160) - 16}, xs[2] = {110, 135};
        for (int q = 0; q < 2; q++)
            if (ys[q] > 12 && ys[q] < h - 12) { /* fully inside */
                (*moving_total)++;
                *moving_found += nearest(&r, xs[q], ys[q], 1.0) >= 0;
            }
        sp_image_free(&frames[f]);
    }
    free(frames);
    free(t);
    free(bg);
    if (guard)
        printf("still: guard refilled %d blob(s)\n", filled);
    return seen;
}

static void test_still(sp_detector *d)
{
    int mf, mt, fd;
    int seen0 = still_run(d, 0, &mf, &mt, &fd);
    printf("still: without the guard the still bubble is found in %d of 100 frames\n", seen0);
    CHECK(seen0 < 100, "the scene must defeat the plain median (found %d of 100)", seen0);
    int seen = still_run(d, 1, &mf, &mt, &fd);
    printf("still: with the guard %d of 100; moving bubbles %d of %d; false at the still spot %d\n", seen, mf,
           mt, fd);
    CHECK(seen == 100, "still bubble found in %d of 100 frames", seen);
    CHECK(mf == mt, "moving bubbles found %d of %d", mf, mt);
    CHECK(fd == 0, "%d detections at the still bubble's place while it is away", fd);
}

int main(void)
{
    sp_detector *d = sp_detector_new();
    test_focus(d);
    test_split(d);
    test_flicker(d);
    test_still(d);
    sp_detector_free(d);
    return check_report();
}

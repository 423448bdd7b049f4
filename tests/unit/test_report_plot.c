/* Axis ticks (Heckbert 1990, "Nice numbers for graph labels", Graphics Gems I: expected values
 * worked by hand from the published rule), data-to-pixel mapping, and the SVG of known points. */
#include "check.h"
#include "report/plot.h"
#include "report/sbuf.h"
#include "report/canvas.h"

#include <stdlib.h>
#include <string.h>

static void expect_ticks(double lo, double hi, int target, int log, const double *want, int n)
{
    sp_axis ax;
    sp_axis_fit(&ax, lo, hi, target, log);
    CHECK(ax.nticks == n, "[%g, %g] target %d log %d: %d ticks, want %d", lo, hi, target, log, ax.nticks, n);
    for (int i = 0; i < n && i < ax.nticks; i++)
        CHECK(fabs(ax.tick[i] - want[i]) <= 1e-9 * fmax(1, fabs(want[i])), "[%g, %g] tick %d: %.12g want %g",
              lo, hi, i, ax.tick[i], want[i]);
    CHECK((ax.lo <= lo + 1e-12 && ax.hi >= hi - 1e-12) || lo == hi, "[%g, %g]: range [%g, %g] does not cover",
          lo, hi, ax.lo, ax.hi);
}

int main(void)
{
    /* Nice numbers. */
    CHECK_NEAR(sp_nice_number(0.0714, 1), 0.1, 1e-15, "nice round 0.0714 (7.14 >= 7)");
    CHECK_NEAR(sp_nice_number(0.0614, 1), 0.05, 1e-15, "nice round 0.0614");
    CHECK_NEAR(sp_nice_number(1.43, 1), 1, 1e-15, "nice round 1.43");
    CHECK_NEAR(sp_nice_number(9.57, 0), 10, 1e-12, "nice ceil 9.57");
    CHECK_NEAR(sp_nice_number(2.5, 0), 5, 1e-12, "nice ceil 2.5");
    CHECK_NEAR(sp_nice_number(340, 1), 500, 1e-9, "nice round 340");

    /* [0, 1], 6 ticks: range 1, step nice(0.2) = 0.2. */
    double a[] = {0, 0.2, 0.4, 0.6, 0.8, 1.0};
    expect_ticks(0, 1, 6, 0, a, 6);
    /* [0.13, 9.7], 8: range nice(9.57) = 10, step nice(10/7 = 1.43) = 1 -> 0..10. */
    double b[] = {0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10};
    expect_ticks(0.13, 9.7, 8, 0, b, 11);
    /* [-3.2, 47], 6: range nice(50.2) = 100, step nice(20) = 20 -> -20..60. */
    double c[] = {-20, 0, 20, 40, 60};
    expect_ticks(-3.2, 47, 6, 0, c, 5);
    /* 20 frames at 60 fps: [0, 0.31667], 8: range 0.5, step nice(0.0714) = 0.1 -> 0..0.4. */
    double d[] = {0, 0.1, 0.2, 0.3, 0.4};
    expect_ticks(0, 19.0 / 60, 8, 0, d, 5);
    /* [0, 0.3], 6: range 0.5, step nice(0.1) = 0.1 ... and [0, 0.3], 8: step nice(0.0714) = 0.1;
     * [0, 0.2], 8: range 0.2, step nice(0.0286) = 0.02 (2.86 < 3) -> 11 ticks. */
    double d2[] = {0, 0.02, 0.04, 0.06, 0.08, 0.1, 0.12, 0.14, 0.16, 0.18, 0.2};
    expect_ticks(0, 0.2, 8, 0, d2, 11);
    /* A single value widens by 10 % each way: [4.5, 5.5], 6: range 1, step 0.2 -> 4.4..5.6. */
    double e[] = {4.4, 4.6, 4.8, 5.0, 5.2, 5.4, 5.6};
    expect_ticks(5, 5, 6, 0, e, 7);
    /* Log: [0.8, 30] spans decades 0.1..100 (3 decades: labels at powers of ten only). */
    double f[] = {0.1, 1, 10, 100};
    expect_ticks(0.8, 30, 8, 1, f, 4);
    /* Log within one decade: 1-2-5 labels. */
    double g[] = {1, 2, 5, 10};
    expect_ticks(1.2, 7, 8, 1, g, 4);
    /* Empty or non-finite data: [0, 1]; log [1, 10]. */
    sp_axis ax;
    sp_axis_fit(&ax, NAN, NAN, 6, 0);
    CHECK(ax.lo == 0 && ax.hi == 1, "NaN data: [%g, %g]", ax.lo, ax.hi);
    sp_axis_fit(&ax, -1, 5, 6, 1);
    CHECK(ax.lo == 1 && ax.hi == 10, "log of non-positive data: [%g, %g]", ax.lo, ax.hi);

    /* Labels: decimals follow the step; no "-0". */
    char s[64];
    sp_axis_fit(&ax, 0, 19.0 / 60, 8, 0);
    sp_axis_label(&ax, ax.tick[3], s, sizeof s);
    CHECK(strcmp(s, "0.3") == 0, "label '%s' want 0.3", s);
    sp_axis_fit(&ax, 0, 0.2, 8, 0);
    sp_axis_label(&ax, ax.tick[3], s, sizeof s);
    CHECK(strcmp(s, "0.06") == 0, "label '%s' want 0.06", s);
    sp_axis_fit(&ax, -1e-17, 1, 6, 0);
    sp_axis_label(&ax, ax.tick[0], s, sizeof s);
    CHECK(strcmp(s, "0.0") == 0, "label '%s' want 0.0", s);

    /* Mapping and a plot of known points: (2, 30) on x [0, 10] y [0, 60] in a 520x340 frame with
     * margins 64/16/30/46 lands at x = 64 + 0.2*440 = 152, y = 294 - 0.5*264 = 162. */
    sp_sbuf buf = {0};
    sp_plot p = {.b = &buf, .id = 7};
    sp_axis_fit(&p.x, 0.13, 9.7, 8, 0);
    sp_axis_fit(&p.y, 0, 60, 6, 0);
    sp_plot_begin(&p, "known", "x", "y");
    double px = 2, py = 30;
    sp_plot_points(&p, &px, &py, 1, "#000", 0, 3, 0);
    sp_plot_end(&p);
    CHECK_NEAR(sp_plot_px(&p, 0), 64, 1e-12, "px(lo)");
    CHECK_NEAR(sp_plot_px(&p, 10), 504, 1e-12, "px(hi)");
    CHECK_NEAR(sp_plot_py(&p, 60), 30, 1e-12, "py(hi)");
    CHECK(!buf.failed && strstr(buf.s, "<circle cx=\"152.00\" cy=\"162.00\"") != NULL,
          "known point not at 152,162");
    CHECK(strstr(buf.s, "data-v=\"10\">10</text>") != NULL, "x tick 10 missing");
    CHECK(strstr(buf.s, "clip-path=\"url(#clip7)\"") != NULL, "clip path id");
    /* Log mapping: 10 sits at the middle of [1, 100]. */
    sp_axis_fit(&p.x, 1, 100, 8, 1);
    CHECK_NEAR(sp_plot_px(&p, 10), 64 + 220, 1e-9, "log px(10)");
    CHECK(isnan(sp_plot_px(&p, -1)), "log px of a negative value is NaN");
    sp_sbuf_free(&buf);

    /* Escaping and base64 (RFC 4648 test vectors). */
    sp_sbuf t = {0};
    sp_sbuf_esc(&t, "a<b & \"c\">");
    CHECK(strcmp(t.s, "a&lt;b &amp; &quot;c&quot;&gt;") == 0, "escape: %s", t.s);
    sp_sbuf_free(&t);
    const char *vec[][2] = {{"f", "Zg=="}, {"fo", "Zm8="}, {"foo", "Zm9v"}, {"foobar", "Zm9vYmFy"}};
    for (int i = 0; i < 4; i++) {
        sp_sbuf_base64(&t, (const unsigned char *)vec[i][0], strlen(vec[i][0]));
        CHECK(t.s && strcmp(t.s, vec[i][1]) == 0, "base64(%s) = %s", vec[i][0], t.s ? t.s : "(null)");
        sp_sbuf_free(&t);
    }

    /* Ellipse outline: every drawn pixel within sqrt(2)/2 px of the true curve (sampled finely). */
    sp_canvas cv = {0};
    sp_image img = {0};
    sp_error err;
    CHECK(sp_image_alloc(&img, 64, 64, 1, &err) == 0, "alloc");
    memset(img.data, 0, (size_t)img.stride * 64);
    img.bits = 8;
    CHECK(sp_canvas_from_image(&cv, &img, &err) == 0, "canvas");
    const sp_rgb red = {255, 0, 0};
    double cx = 31.3, cy = 30.6, maj = 40, min = 22, tilt = 30;
    sp_canvas_ellipse(&cv, cx, cy, maj, min, tilt, 0, red);
    int drawn = 0;
    double worst = 0, th = tilt * M_PI / 180;
    for (int y = 0; y < 64; y++)
        for (int x = 0; x < 64; x++) {
            if (cv.rgb[(y * 64 + x) * 3] != 255)
                continue;
            drawn++;
            double best = 1e9;
            for (int k = 0; k < 4000; k++) {
                double ph = 2 * M_PI * k / 4000, u = maj / 2 * cos(ph), v = min / 2 * sin(ph);
                double ex = cx + u * cos(th) - v * sin(th), ey = cy - (u * sin(th) + v * cos(th));
                best = fmin(best, hypot(ex - x, ey - y));
            }
            worst = fmax(worst, best);
        }
    CHECK(drawn > 80, "ellipse drew %d pixels", drawn);
    CHECK(worst <= 0.7072, "farthest ellipse pixel %.3f px from the curve", worst);
    /* Counter-clockwise tilt with y up: the major-axis end at +30 deg lies up and to the right. */
    int ex = (int)lround(cx + maj / 2 * cos(th)), ey = (int)lround(cy - maj / 2 * sin(th));
    CHECK(cv.rgb[(ey * 64 + ex) * 3] == 255, "major-axis end at (%d, %d) not drawn", ex, ey);
    unsigned char *png = NULL;
    size_t npng = 0;
    CHECK(sp_canvas_png(&cv, &png, &npng, "test", &err) == 0 && npng > 8 && png[1] == 'P' && png[2] == 'N',
          "PNG signature");
    free(png);
    sp_canvas_free(&cv);
    sp_image_free(&img);
    return check_report();
}

/* Unit tests of the moment ellipse, the direct least-squares ellipse fit and the hull area.
 * Check values: /work/shared/REFERENCES.md "Second-moment ellipse" and "Direct least-squares ellipse
 * fit" (Fitzgibbon, Pilu & Fisher 1999; Halir & Flusser 1998). */
#include "detect/ellipse.h"
#include "detect/hull.h"
#include "detect/split.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

static int failures;
#define CHECK(cond, ...)                                                                                     \
    do {                                                                                                     \
        if (!(cond)) {                                                                                       \
            failures++;                                                                                      \
            printf("FAIL %s:%d: ", __FILE__, __LINE__);                                                      \
            printf(__VA_ARGS__);                                                                             \
            printf("\n");                                                                                    \
        }                                                                                                    \
    } while (0)

static double axis_diff(double t1, double t2)
{
    double d = fmod(t1 - t2, M_PI);
    if (d > M_PI / 2)
        d -= M_PI;
    if (d < -M_PI / 2)
        d += M_PI;
    return fabs(d);
}

/* REFERENCES.md: pixelised ellipse a 20, b 10, θ 30°, centred on a pixel centre → 633 px,
 * a 19.962, b 10.093, θ 30.43° (pixel centres, no 1/12 pixel-extent term). */
static void test_moments_reference(void)
{
    double t = 30.0 * M_PI / 180.0;
    double m00 = 0, m10 = 0, m01 = 0, m20 = 0, m11 = 0, m02 = 0;
    for (int y = -30; y <= 30; y++)
        for (int x = -30; x <= 30; x++) {
            double u = x * cos(t) + y * sin(t), v = -x * sin(t) + y * cos(t);
            if ((u / 20) * (u / 20) + (v / 10) * (v / 10) <= 1.0) {
                m00 += 1, m10 += x, m01 += y, m20 += (double)x * x, m11 += (double)x * y,
                    m02 += (double)y * y;
            }
        }
    double cx = m10 / m00, cy = m01 / m00;
    sp_ellipse e;
    int rc = sp_ellipse_from_moments(m00, cx, cy, m20 - m00 * cx * cx, m11 - m00 * cx * cy,
                                     m02 - m00 * cy * cy, &e);
    CHECK(rc == 0, "from_moments failed");
    CHECK(m00 == 633, "pixel count %g, REFERENCES.md 633", m00);
    CHECK(fabs(e.a - 19.962) < 0.0006, "a %.5f, REFERENCES.md 19.962", e.a);
    CHECK(fabs(e.b - 10.093) < 0.0006, "b %.5f, REFERENCES.md 10.093", e.b);
    CHECK(fabs(e.theta * 180 / M_PI - 30.43) < 0.006, "theta %.4f deg, REFERENCES.md 30.43",
          e.theta * 180 / M_PI);
    printf("moments: %g px, a %.4f, b %.4f, theta %.3f deg\n", m00, e.a, e.b, e.theta * 180 / M_PI);

    /* A continuous ellipse's moments: variance a²/4 along the axis (definition, exact). */
    double a = 7, b = 3, th = -1.1;
    double l1 = a * a / 4, l2 = b * b / 4, c = cos(th), s = sin(th);
    rc = sp_ellipse_from_moments(2.0, 1, 2, 2 * (l1 * c * c + l2 * s * s), 2 * (l1 - l2) * c * s,
                                 2 * (l1 * s * s + l2 * c * c), &e);
    CHECK(rc == 0 && fabs(e.a - a) < 1e-12 && fabs(e.b - b) < 1e-12 && axis_diff(e.theta, th) < 1e-12,
          "analytic moments: a %.15g b %.15g theta %.15g", e.a, e.b, e.theta);
    CHECK(sp_ellipse_from_moments(0, 0, 0, 1, 0, 1, &e) != 0, "m00 = 0 must fail");
    CHECK(sp_ellipse_from_moments(5, 0, 0, 1, 0, 0, &e) != 0, "a line has no ellipse");
}

static double urand(unsigned *s)
{
    *s = *s * 1664525u + 1013904223u;
    return (*s >> 8) / 16777216.0;
}

/* REFERENCES.md: on noise-free points the direct fit returns the parameters to 1e-9. */
static void test_fit_noise_free(void)
{
    unsigned seed = 12345;
    double worst = 0, worst_t = 0;
    double *xy = malloc(2 * 2000 * sizeof *xy);
    for (int trial = 0; trial < 400; trial++) {
        double a = 4 + 400 * urand(&seed);
        double b = a * (0.2 + 0.8 * urand(&seed));
        double th = (urand(&seed) - 0.5) * M_PI;
        double cx = -2000 + 6000 * urand(&seed), cy = 4000 * urand(&seed);
        int n = 6 + (int)(urand(&seed) * 1500);
        double span = trial % 4 == 0 ? M_PI : 2 * M_PI; /* every 4th: half the outline only */
        double p0 = urand(&seed) * 2 * M_PI;
        for (int i = 0; i < n; i++) {
            double p = p0 + span * (i + urand(&seed) * 0.9) / n;
            double u = a * cos(p), v = b * sin(p);
            xy[2 * i] = cx + u * cos(th) - v * sin(th);
            xy[2 * i + 1] = cy + u * sin(th) + v * cos(th);
        }
        sp_ellipse e;
        int rc = sp_ellipse_fit(xy, n, &e);
        CHECK(rc == 0, "trial %d: fit failed", trial);
        if (rc)
            continue;
        double err = fmax(fmax(fabs(e.cx - cx), fabs(e.cy - cy)), fmax(fabs(e.a - a), fabs(e.b - b)));
        CHECK(err < 1e-9, "trial %d (a %.3f b %.3f n %d): parameter error %.3g > 1e-9", trial, a, b, n, err);
        if (err > worst)
            worst = err;
        if (b < 0.99 * a) {
            double et = axis_diff(e.theta, th);
            CHECK(et < 1e-9, "trial %d: theta error %.3g rad", trial, et);
            if (et > worst_t)
                worst_t = et;
        }
        CHECK(e.theta > -M_PI / 2 && e.theta <= M_PI / 2 && e.a >= e.b, "trial %d: range", trial);
    }
    printf("noise-free fit: worst parameter error %.2e px, theta %.2e rad (400 ellipses, a 4..404 px)\n",
           worst, worst_t);

    /* Degenerate inputs. */
    sp_ellipse e;
    CHECK(sp_ellipse_fit(xy, 5, &e) != 0, "5 points must fail");
    for (int i = 0; i < 20; i++)
        xy[2 * i] = i, xy[2 * i + 1] = 2 * i + 1;
    CHECK(sp_ellipse_fit(xy, 20, &e) != 0, "collinear points must fail");
    for (int i = 0; i < 20; i++) { /* hyperbola x² − y² = 1 */
        double t = -1.5 + 3.0 * i / 19;
        xy[2 * i] = (i % 2 ? -1 : 1) * cosh(t), xy[2 * i + 1] = sinh(t);
    }
    /* The direct method is ellipse-specific (Fitzgibbon et al. 1999): even hyperbolic data give a
     * real ellipse, never another conic. */
    int rc = sp_ellipse_fit(xy, 20, &e);
    CHECK(rc == 0 && e.a >= e.b && e.b > 0 && isfinite(e.a), "hyperbola points: rc %d a %g b %g", rc, e.a,
          e.b);
    free(xy);
}

/* Hull areas checked by hand (shoelace on the known hull). */
static void test_hull(void)
{
    int32_t sq[8] = {0, 0, 1, 0, 1, 1, 0, 1}, w[32];
    CHECK(sp_hull_area2(sq, 4, w) == 2, "unit square");
    /* L-shape corners of 3×3 minus a 2×2 notch: hull is the pentagon (0,0)(3,0)(3,1)(1,3)(0,3): area 7. */
    int32_t L[12] = {0, 0, 3, 0, 3, 1, 1, 1, 1, 3, 0, 3};
    CHECK(sp_hull_area2(L, 6, w) == 14, "L shape: twice area %lld, want 14",
          (long long)sp_hull_area2(L, 6, w));
    int32_t line[6] = {0, 0, 1, 1, 2, 2};
    CHECK(sp_hull_area2(line, 3, w) == 0, "collinear");
}

static uint64_t rng_state = 0x9e3779b97f4a7c15ull;
static double u01(void) /* xorshift64, uniform in [0, 1) */
{
    rng_state ^= rng_state << 13;
    rng_state ^= rng_state >> 7;
    rng_state ^= rng_state << 17;
    return (double)(rng_state >> 11) * 0x1p-53;
}

static int same_double(double a, double b)
{
    return (isnan(a) && isnan(b)) || memcmp(&a, &b, sizeof a) == 0;
}

/* sp_hypot must give the C library's hypot bit for bit (the outline residuals and the splitter's
 * chord lengths are compared with thresholds): random pairs over forty binary orders of magnitude,
 * where sqrt(x² + y²) alone differs in the last bit for about one pair in seven, and the values the
 * fast path hands back to the library. */
static void test_hypot_library(void)
{
    long bad = 0, naive = 0;
    const long n = 2000000;
    for (long i = 0; i < n; i++) {
        double x = (2 * u01() - 1) * ldexp(1.0, (int)(u01() * 40) - 20);
        double y = (2 * u01() - 1) * ldexp(1.0, (int)(u01() * 40) - 20);
        double want = hypot(x, y), got = sp_hypot(x, y);
        if (!same_double(want, got) && bad++ < 3)
            printf("hypot(%a, %a): library %a, sp_hypot %a\n", x, y, want, got);
        naive += !same_double(want, sqrt(x * x + y * y));
    }
    CHECK(bad == 0, "sp_hypot differs from the library's hypot for %ld of %ld pairs", bad, n);
    CHECK(naive > 0, "the sample never tells sqrt(x^2 + y^2) from hypot: it tests nothing");
    const double special[] = {0.0,      -0.0,     1e-310, 0x1p-511, 0x1p-512,  1.0, 3.0,
                              0x1p+511, 0x1p+512, 1e300,  INFINITY, -INFINITY, NAN};
    const int ns = (int)(sizeof special / sizeof special[0]);
    for (int i = 0; i < ns; i++)
        for (int j = 0; j < ns; j++)
            CHECK(same_double(hypot(special[i], special[j]), sp_hypot(special[i], special[j])),
                  "hypot(%a, %a)", special[i], special[j]);
}

/* The ellipse frame's distance is the per-call formula (cos/sin of theta, hypot of the gradient)
 * computed once per ellipse: same value bit for bit; and its inside test agrees with distance <= 0,
 * the centre (where the gradient vanishes) included. */
static void test_frame_distance(void)
{
    long bad_d = 0, bad_in = 0, inside = 0;
    for (int k = 0; k < 200; k++) {
        sp_ellipse el = {100 * u01(), 100 * u01(), 0, 0, u01() * M_PI - M_PI / 2};
        el.b = 1 + 40 * u01();
        el.a = el.b * (1 + 2 * u01());
        sp_ellipse_frame f;
        sp_ellipse_frame_init(&f, &el);
        for (int i = 0; i < 500; i++) {
            double x = i == 0 ? el.cx : el.cx + (2 * u01() - 1) * 1.5 * el.a;
            double y = i == 0 ? el.cy : el.cy + (2 * u01() - 1) * 1.5 * el.a;
            if (i == 1) { /* a pixel centre */
                x = floor(x);
                y = floor(y);
            }
            /* Reference: the distance as computed per call before the frame existed. */
            double c = cos(el.theta), s = sin(el.theta), px = x - el.cx, py = y - el.cy;
            double u = px * c + py * s, v = -px * s + py * c, a2 = el.a * el.a, b2 = el.b * el.b;
            double F = u * u / a2 + v * v / b2 - 1.0, g = 2.0 * hypot(u / a2, v / b2);
            double want = g > 1e-12 ? F / g : -el.b;
            double got = sp_ellipse_frame_distance(&f, x, y);
            bad_d += !same_double(want, got);
            bad_in += sp_ellipse_frame_inside(&f, x, y) != (want <= 0);
            inside += want <= 0;
        }
    }
    CHECK(bad_d == 0, "frame distance differs from the per-call formula at %ld points", bad_d);
    CHECK(bad_in == 0, "inside test disagrees with distance <= 0 at %ld points", bad_in);
    CHECK(inside > 1000 && inside < 99000, "points inside: %ld of 100000 (both sides must be tested)",
          inside);
    sp_ellipse el = {3.0, 4.0, 5.0, 2.0, 0.3};
    sp_ellipse_frame fc;
    sp_ellipse_frame_init(&fc, &el);
    CHECK(sp_ellipse_frame_distance(&fc, 3.0, 4.0) == -2.0, "centre: distance -b, got %g",
          sp_ellipse_frame_distance(&fc, 3.0, 4.0));
}

int main(void)
{
    test_moments_reference();
    test_fit_noise_free();
    test_hull();
    test_hypot_library();
    test_frame_distance();
    if (failures)
        printf("%d failure(s)\n", failures);
    return failures ? 1 : 0;
}

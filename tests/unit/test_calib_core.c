/* Unit tests of the calibration layer: lattice indexing and the homography/distortion fit on exact
 * and noisy point sets, the two-point mode, calibration files (round trip and bad files), and bad
 * target images. Rendered-target accuracy and the OpenCV comparison are in
 * tests/ref/test_calib_opencv.py. */
#include "calib/calfile.h"
#include "calib/calibrate.h"
#include "calib/lattice.h"
#include "io/png.h"
#include "check.h"

#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static char dir[256];

static void path_of(char *buf, size_t n, const char *name)
{
    snprintf(buf, n, "%s/%s", dir, name);
}

/* Box–Muller from a small LCG: reproducible noise without the synth layer. */
static unsigned long long lcg = 12345;
static double unit_rand(void)
{
    lcg = lcg * 6364136223846793005ULL + 1442695040888963407ULL;
    return ((lcg >> 11) + 0.5) / 9007199254740992.0;
}
static double gauss(void)
{
    return sqrt(-2 * log(unit_rand())) * cos(2 * M_PI * unit_rand());
}

/* Grid points through a known mapping: similarity (scale s mm/px, rotation rot), perspective (a, b
 * per px, about the centre), radial k1. Dots are listed shuffled, with noise sigma px. */
static int make_points(sp_dot *d, int w, int h, double s, double rot_deg, double a, double b, double k1,
                       double sigma)
{
    double c = cos(rot_deg * M_PI / 180), sn = sin(rot_deg * M_PI / 180), cx = 0.5 * (w - 1),
           cy = 0.5 * (h - 1);
    sp_radial r = {k1 != 0, k1, 0, cx, cy, 0.5 * hypot(w - 1, h - 1)};
    int n = 0;
    for (int j = -30; j <= 30; j++)
        for (int i = -30; i <= 30; i++) {
            double X = i + 0.3, Y = j + 0.2; /* mm, pitch 1 */
            double u = (c * X - sn * Y) / s, v = -(sn * X + c * Y) / s, wz = 1 + a * u + b * v;
            double xu = cx + u / wz, yu = cy + v / wz, x, y;
            sp_radial_apply(&r, xu, yu, &x, &y);
            if (x < 5 || y < 5 || x > w - 6 || y > h - 6)
                continue;
            d[n].x = x + sigma * gauss();
            d[n].y = y + sigma * gauss();
            d[n].diam_px = 1e-3; /* point-like: no perspective bias to remove */
            n++;
        }
    for (int k = n - 1; k > 0; k--) {
        int q = (int)(unit_rand() * (k + 1));
        sp_dot t = d[k];
        d[k] = d[q];
        d[q] = t;
    }
    return n;
}

static void test_fit_points(void)
{
    static sp_dot d[61 * 61];
    sp_error err = {0};
    struct {
        double s, rot, a, b, k1, sigma;
        int terms;
    } cs[] = {{0.025, 0, 0, 0, 0, 0, 0},
              {0.03, 27, 4e-5, -6e-5, 0, 0, 0},
              {0.02, -30, -5e-5, 3e-5, 0.02, 0, 1},
              {0.025, 12, 0, 0, -0.03, 0.05, 1},
              {0.04, -8, 6e-5, 6e-5, 0, 0.05, 0}};
    for (size_t c = 0; c < sizeof cs / sizeof cs[0]; c++) {
        int n = make_points(d, 1024, 768, cs[c].s, cs[c].rot, cs[c].a, cs[c].b, cs[c].k1, cs[c].sigma),
            ni = 0;
        int rc = sp_lattice_index(d, n, 12, &ni, "points", &err);
        CHECK(rc == 0 && ni == n, "case %zu: indexed %d of %d (%s)", c, ni, n, err.msg);
        sp_grid_fit f;
        rc = sp_grid_fit_run(d, n, 1.0, 1024, 768, -1, &f, "points", &err);
        CHECK(rc == 0, "case %zu: fit failed: %s", c, err.msg);
        double tol = cs[c].sigma > 0 ? 1e-4 : 1e-9;
        CHECK_NEAR(f.mm_per_px / cs[c].s, 1, tol, "relative scale");
        CHECK_NEAR(f.rotation_deg, cs[c].rot, cs[c].sigma > 0 ? 0.01 : 1e-7, "rotation");
        CHECK(f.radial.terms == cs[c].terms, "case %zu: %d radial terms chosen, expected %d (F %g %g)", c,
              f.radial.terms, cs[c].terms, f.f_stat[0], f.f_stat[1]);
        if (cs[c].terms)
            CHECK_NEAR(f.radial.k1, cs[c].k1, cs[c].sigma > 0 ? 2e-4 : 1e-8, "k1");
        if (cs[c].sigma > 0) {
            /* Residual-based uncertainty: the noise is the only error here, so the RMS residual
             * per point is close to sigma·sqrt(2) and the scale error within 4 u. */
            CHECK_NEAR(f.rms_px, cs[c].sigma * sqrt(2.0), 0.2 * cs[c].sigma, "rms residual");
            CHECK(fabs(f.mm_per_px - cs[c].s) < 4 * f.mm_per_px_u, "case %zu: error %g vs u %g", c,
                  f.mm_per_px - cs[c].s, f.mm_per_px_u);
            CHECK(f.mm_per_px_u > 0 && f.mm_per_px_u < 1e-3 * cs[c].s, "case %zu: u %g", c, f.mm_per_px_u);
        } else {
            CHECK(f.rms_px < 1e-6, "case %zu: rms %g on exact points", c, f.rms_px);
        }
    }
    /* Rotations wrap into (-45°, 45°]: a grid turned by 60° reads as -30°. */
    int n = make_points(d, 1024, 768, 0.025, 60, 0, 0, 0, 0), ni;
    sp_grid_fit f;
    CHECK(sp_lattice_index(d, n, 12, &ni, "points", &err) == 0 &&
              sp_grid_fit_run(d, n, 1.0, 1024, 768, 0, &f, "points", &err) == 0,
          "60°: %s", err.msg);
    CHECK_NEAR(f.rotation_deg, -30, 1e-7, "60° grid folds to -30°");
}

static void test_radial_inverse(void)
{
    sp_radial r = {2, -0.05, 0.01, 511.5, 383.5, 639.3};
    double worst = 0;
    for (int k = 0; k < 100; k++) {
        double x = unit_rand() * 1023, y = unit_rand() * 767, xd, yd, xu, yu;
        sp_radial_apply(&r, x, y, &xd, &yd);
        CHECK(sp_radial_invert(&r, xd, yd, &xu, &yu) == 0, "invert");
        worst = fmax(worst, hypot(xu - x, yu - y));
    }
    CHECK(worst < 1e-9, "radial inverse error %g px", worst);
}

/* An 8-bit image of mid grey with dark discs (4×4 supersampled) at the given centres. */
static int write_discs(const char *path, int w, int h, const double *c, int n, double rad)
{
    sp_image im = {0};
    sp_error err;
    if (sp_image_alloc(&im, w, h, 1, &err))
        return -1;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            int in = 0;
            for (int k = 0; k < n; k++)
                if (fabs(x - c[2 * k]) < rad + 2 && fabs(y - c[2 * k + 1]) < rad + 2)
                    for (int s = 0; s < 16; s++) {
                        double px = x - 0.375 + 0.25 * (s % 4), py = y - 0.375 + 0.25 * (s / 4);
                        in += hypot(px - c[2 * k], py - c[2 * k + 1]) < rad;
                    }
            ((uint8_t *)im.data + y * im.stride)[x] = (uint8_t)lround(220 - 200.0 * (in > 16 ? 16 : in) / 16);
        }
    int rc = sp_png_write(path, &im, &err);
    sp_image_free(&im);
    return rc;
}

static void test_images(void)
{
    char p[512], q[512];
    sp_calib_settings s;
    sp_calib_result r;
    sp_error err = {0};
    static double c[2 * 400];

    /* A clean rotated grid: scale and rotation from the whole job. Pitch 30 px at 12°. */
    int n = 0;
    double rot = 12 * M_PI / 180;
    for (int j = -12; j <= 12; j++)
        for (int i = -12; i <= 12; i++) {
            double u = 30 * (i + 0.25), v = 30 * (j + 0.4);
            double x = 320 + u * cos(rot) + v * sin(rot), y = 240 - u * sin(rot) + v * cos(rot);
            if (x > 12 && y > 12 && x < 627 && y < 467 && n < 400)
                c[2 * n] = x, c[2 * n + 1] = y, n++;
        }
    path_of(p, sizeof p, "grid.png");
    CHECK(write_discs(p, 640, 480, c, n, 8) == 0, "write grid");
    sp_calib_settings_default(&s);
    s.pitch_mm = 0.6;
    int rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == 0, "grid: %s", err.msg);
    CHECK_NEAR(r.mm_per_px, 0.02, 0.02 * 2e-3, "grid scale (0.2%)");
    CHECK_NEAR(r.rotation_deg, 12, 0.1, "grid rotation");
    CHECK(r.dots_used >= n - n / 20, "grid: %d of %d dots used", r.dots_used,
          n); /* edge dots may lack a ring */
    CHECK(!strcmp(r.method, "grid"), "method %s", r.method);

    /* Round trip through a calibration file. */
    path_of(q, sizeof q, "cal.json");
    CHECK(sp_calfile_write(q, &r, &err) == 0, "write: %s", err.msg);
    sp_calib_result back;
    CHECK(sp_calfile_read(q, &back, &err) == 0, "read: %s", err.msg);
    CHECK(back.mm_per_px == r.mm_per_px && back.mm_per_px_uncertainty == r.mm_per_px_uncertainty &&
              back.rotation_deg == r.rotation_deg,
          "round trip changed the values");
    CHECK(back.has_homography && !memcmp(back.homography, r.homography, sizeof r.homography), "homography");

    /* Bad pitch. */
    double bad_pitch[] = {0, -1, NAN, INFINITY};
    for (int k = 0; k < 4; k++) {
        s.pitch_mm = bad_pitch[k];
        rc = sp_calibrate(p, &s, &r, &err);
        CHECK(rc == SP_ERR_INPUT && strstr(err.msg, p) && strstr(err.msg, "pitch"), "pitch %g: %d %s",
              bad_pitch[k], rc, err.msg);
    }
    s.pitch_mm = 1;

    /* Two-point mode on the same image: 100 px known to be 5 mm. */
    s.two_point = 1;
    double pts[4] = {100, 200, 200, 200};
    memcpy(s.points, pts, sizeof pts);
    s.length_mm = 5;
    rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == 0, "two-point: %s", err.msg);
    CHECK_NEAR(r.mm_per_px, 0.05, 1e-15, "two-point scale");
    CHECK_NEAR(r.mm_per_px_uncertainty, 0.05 * sqrt(2.0) * 0.5 / 100, 1e-15, "two-point uncertainty");
    CHECK_NEAR(r.rotation_deg, 0, 1e-12, "two-point direction");
    double pts2[4] = {100, 300, 200, 200}; /* up and to the right: +45° with y up */
    memcpy(s.points, pts2, sizeof pts2);
    rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == 0 && fabs(r.rotation_deg - 45) < 1e-12, "two-point 45°: %g", r.rotation_deg);
    double pts3[4] = {100, 200, 700, 200};
    memcpy(s.points, pts3, sizeof pts3);
    rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, p) && strstr(err.msg, "outside"), "point outside: %s",
          err.msg);
    memcpy(s.points, pts, sizeof pts);
    s.length_mm = 0;
    rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "length"), "zero length: %s", err.msg);
    s.two_point = 0;

    /* No dots: a flat image. */
    path_of(p, sizeof p, "flat.png");
    CHECK(write_discs(p, 200, 150, c, 0, 8) == 0, "write flat");
    rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, p) && strstr(err.msg, "no dots"), "flat: %d %s", rc, err.msg);

    /* Too few dots: a 2×3 grid. */
    double few[12] = {50, 50, 80, 50, 110, 50, 50, 80, 80, 80, 110, 80};
    path_of(p, sizeof p, "few.png");
    CHECK(write_discs(p, 200, 150, few, 6, 8) == 0, "write few");
    rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, p) && strstr(err.msg, "too few"), "few: %d %s", rc, err.msg);

    /* Round blobs scattered at random: not a grid. */
    n = 0;
    for (int tries = 0; tries < 5000 && n < 60; tries++) {
        double x = 20 + unit_rand() * 600, y = 20 + unit_rand() * 440;
        int ok = 1;
        for (int k = 0; k < n && ok; k++)
            ok = hypot(x - c[2 * k], y - c[2 * k + 1]) > 26;
        if (ok)
            c[2 * n] = x, c[2 * n + 1] = y, n++;
    }
    path_of(p, sizeof p, "scatter.png");
    CHECK(write_discs(p, 640, 480, c, n, 8) == 0, "write scatter");
    rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, p) && (strstr(err.msg, "grid") || strstr(err.msg, "too few")),
          "scatter: %d %s", rc, err.msg);

    /* Not an image. */
    path_of(p, sizeof p, "junk.png");
    FILE *f = fopen(p, "wb");
    if (f) {
        fputs("not a png at all", f);
        fclose(f);
    }
    rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, p), "junk: %d %s", rc, err.msg);
    path_of(p, sizeof p, "missing.png");
    rc = sp_calibrate(p, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, p), "missing: %d %s", rc, err.msg);
}

static void expect_bad_file(const char *name, const char *text, const char *needle)
{
    char p[512];
    path_of(p, sizeof p, name);
    FILE *f = fopen(p, "wb");
    if (!f) {
        CHECK(0, "cannot write %s", p);
        return;
    }
    fputs(text, f);
    fclose(f);
    sp_calib_result r;
    sp_error err = {0};
    int rc = sp_calfile_read(p, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, p) && strstr(err.msg, needle), "%s: %d %s", name, rc,
          err.msg);
}

static void test_bad_files(void)
{
    expect_bad_file("b1.json", "{\"mm_per_px\": 0.02, \"mm_per_px_uncertainty\": 1e-5", "not a calibration");
    expect_bad_file("b2.json", "[1, 2]", "not a calibration");
    expect_bad_file("b3.json", "{\"mm_per_px\": 0.02, \"rotation_deg\": 0}", "mm_per_px_uncertainty");
    expect_bad_file("b4.json", "{\"mm_per_px\": -1, \"mm_per_px_uncertainty\": 0, \"rotation_deg\": 0}",
                    "\"mm_per_px\"");
    expect_bad_file("b5.json", "{\"mm_per_px\": \"big\", \"mm_per_px_uncertainty\": 0, \"rotation_deg\": 0}",
                    "\"mm_per_px\"");
    expect_bad_file("b6.json", "{\"mm_per_px\": 0.02, \"mm_per_px_uncertainty\": 0.5, \"rotation_deg\": 0}",
                    "mm_per_px_uncertainty");
    expect_bad_file("b7.json", "{\"mm_per_px\": 0.02, \"mm_per_px_uncertainty\": 0, \"rotation_deg\": 400}",
                    "rotation_deg");
    expect_bad_file(
        "b8.json",
        "{\"mm_per_px\": 0.02, \"mm_per_px_uncertainty\": 0, \"rotation_deg\": 0, \"homography\": [1,2]}",
        "homography");
    expect_bad_file(
        "b9.json",
        "{\"mm_per_px\": 0.02, \"mm_per_px_uncertainty\": 0, \"rotation_deg\": 0, \"distortion\": "
        "{\"model\": \"radial_polynomial\", \"k1\": 7, \"k2\": 0, \"centre_px\": [1, 1], \"norm_px\": 5}}",
        "distortion");
    expect_bad_file("b10.json", "", "not a calibration");
    sp_calib_result r;
    sp_error err = {0};
    int rc = sp_calfile_read("/nonexistent/cal.json", &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "/nonexistent/cal.json"), "missing file: %s", err.msg);
    rc = sp_calfile_write("/nonexistent/dir/cal.json", &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "/nonexistent/dir/cal.json"), "unwritable: %s", err.msg);
}

int main(void)
{
    snprintf(dir, sizeof dir, "/tmp/spume_test_calib_%ld", (long)getpid());
    char cmd[300];
    snprintf(cmd, sizeof cmd, "mkdir -p %s", dir);
    if (system(cmd) != 0)
        return 1;
    test_fit_points();
    test_radial_inverse();
    test_images();
    test_bad_files();
    snprintf(cmd, sizeof cmd, "rm -rf %s", dir);
    if (system(cmd) != 0)
        fprintf(stderr, "could not remove %s\n", dir);
    return check_report();
}

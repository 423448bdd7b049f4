/* Unit tests of the synthesiser: the renderer's silhouette is exact (area, centroid, axes and
 * tilt by second moments), the blurs conserve light, and whole runs are byte-identical at 1 and
 * 2 threads; bad output directories and scenario names fail with SP_ERR_INPUT. */
#include "synth/render.h"
#include "synth/synth.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#define PI 3.14159265358979323846

static int failures = 0;
#define CHECK(cond, ...)                                                                                     \
    do {                                                                                                     \
        if (!(cond)) {                                                                                       \
            failures++;                                                                                      \
            fprintf(stderr, "FAIL %s:%d: ", __FILE__, __LINE__);                                             \
            fprintf(stderr, __VA_ARGS__);                                                                    \
            fprintf(stderr, "\n");                                                                           \
        }                                                                                                    \
    } while (0)

static sp_bubble_look flat(double x, double y, double a, double b, double tilt)
{
    sp_bubble_look lk;
    memset(&lk, 0, sizeof lk);
    lk.x_px = x;
    lk.y_px = y;
    lk.a_px = a;
    lk.b_px = b;
    lk.tilt_deg = tilt;
    lk.contrast = 1.0; /* band = shoulder = spot = 0: a black silhouette, deficit = coverage */
    lk.shoulder_px = 1.0;
    return lk;
}

typedef struct moments {
    double m00, cx, cy, a, b, tilt_deg;
} moments;

/* Second-moment ellipse of the patch (REFERENCES.md: semi-axes 2·sqrt(λ), θ = ½ atan2(2μ11,
 * μ20 − μ02)), with y up so the angle follows the CONTRACT's convention. */
static moments patch_moments(const sp_patch *p)
{
    moments m = {0};
    double sx = 0, sy = 0;
    for (int j = 0; j < p->h; j++)
        for (int i = 0; i < p->w; i++) {
            double d = p->d[(size_t)j * p->w + i];
            m.m00 += d;
            sx += d * (p->x0 + i);
            sy += d * (p->y0 + j);
        }
    m.cx = sx / m.m00;
    m.cy = sy / m.m00;
    double mu20 = 0, mu02 = 0, mu11 = 0;
    for (int j = 0; j < p->h; j++)
        for (int i = 0; i < p->w; i++) {
            double d = p->d[(size_t)j * p->w + i];
            double dx = p->x0 + i - m.cx, dyu = -(p->y0 + j - m.cy);
            mu20 += d * dx * dx;
            mu02 += d * dyu * dyu;
            mu11 += d * dx * dyu;
        }
    mu20 /= m.m00;
    mu02 /= m.m00;
    mu11 /= m.m00;
    double tr = mu20 + mu02, det = mu20 * mu02 - mu11 * mu11;
    double disc = sqrt(fmax(0.0, tr * tr / 4 - det));
    m.a = 2.0 * sqrt(tr / 2 + disc);
    m.b = 2.0 * sqrt(tr / 2 - disc);
    m.tilt_deg = 0.5 * atan2(2 * mu11, mu20 - mu02) * 180.0 / PI;
    return m;
}

static void test_coverage(void)
{
    sp_patch p = {0};
    const double radii[] = {2.5, 3.7, 5.0, 10.0, 25.3, 80.0};
    const double offs[][2] = {{0.0, 0.0}, {0.37, 0.81}, {0.5, 0.5}, {0.13, 0.29}};
    for (size_t r = 0; r < sizeof radii / sizeof radii[0]; r++)
        for (size_t k = 0; k < 4; k++) {
            sp_bubble_look lk = flat(200 + offs[k][0], 210 + offs[k][1], radii[r], radii[r], 0.0);
            CHECK(sp_render_bubble(&lk, 500, 500, &p) == 0, "render failed");
            moments m = patch_moments(&p);
            double area = PI * radii[r] * radii[r];
            CHECK(fabs(m.m00 - area) <= 0.005 * area, "disc r=%g: coverage %.4f vs area %.4f", radii[r],
                  m.m00, area);
            CHECK(fabs(m.cx - lk.x_px) < 0.01 && fabs(m.cy - lk.y_px) < 0.01, "disc r=%g centroid %.4f,%.4f",
                  radii[r], m.cx, m.cy);
        }
    /* Ellipses at several tilts: area, centroid, semi-axes and tilt recovered by moments. */
    const double tilts[] = {0.0, 30.0, 75.0, 90.0, -45.0, -80.0};
    for (size_t t = 0; t < sizeof tilts / sizeof tilts[0]; t++) {
        sp_bubble_look lk = flat(150.3, 140.6, 30.0, 12.0, tilts[t]);
        CHECK(sp_render_bubble(&lk, 400, 400, &p) == 0, "render failed");
        moments m = patch_moments(&p);
        double area = PI * 30.0 * 12.0;
        CHECK(fabs(m.m00 - area) <= 0.005 * area, "ellipse tilt %g: coverage %.3f vs %.3f", tilts[t], m.m00,
              area);
        CHECK(fabs(m.a - 30.0) < 0.1 && fabs(m.b - 12.0) < 0.1, "ellipse tilt %g: axes %.3f %.3f", tilts[t],
              m.a, m.b);
        double dt = fmod(m.tilt_deg - tilts[t] + 450.0, 180.0) - 90.0; /* difference modulo 180 */
        CHECK(fabs(dt) < 0.2, "ellipse tilt %g: moments give %.3f", tilts[t], m.tilt_deg);
    }
    /* A point on the +major axis in pixel coordinates (y down) is inside: tilt 30° points up-right. */
    {
        sp_bubble_look lk = flat(100, 100, 30, 6, 30.0);
        CHECK(sp_render_bubble(&lk, 200, 200, &p) == 0, "render failed");
        int ix = 100 + (int)lround(25 * cos(PI / 6)) - p.x0, iy = 100 - (int)lround(25 * sin(PI / 6)) - p.y0;
        int jx = 100 + (int)lround(25 * cos(PI / 6)) - p.x0, jy = 100 + (int)lround(25 * sin(PI / 6)) - p.y0;
        CHECK(p.d[(size_t)iy * p.w + ix] > 0.99f, "tilt +30 should cover the upper right");
        CHECK(p.d[(size_t)jy * p.w + jx] < 0.01f, "tilt +30 should leave the lower right empty");
    }
    /* Blurs move light but do not create or destroy it (far from the frame edge). */
    {
        sp_bubble_look lk = flat(200.2, 200.7, 20.0, 14.0, 20.0);
        lk.blur_px = 4.6;
        lk.motion_dx = 3.3;
        lk.motion_dy = -2.1;
        CHECK(sp_render_bubble(&lk, 400, 400, &p) == 0, "render failed");
        moments m = patch_moments(&p);
        double area = PI * 20.0 * 14.0;
        CHECK(fabs(m.m00 - area) <= 0.005 * area, "blurred: sum %.3f vs area %.3f", m.m00, area);
        CHECK(fabs(m.cx - 200.2) < 0.05 && fabs(m.cy - 200.7) < 0.05, "blurred centroid %.3f %.3f", m.cx,
              m.cy);
        float mx = 0;
        for (int i = 0; i < p.w * p.h; i++)
            mx = p.d[i] > mx ? p.d[i] : mx;
        CHECK(mx <= 1.0f + 1e-5f, "deficit above 1: %g", mx);
    }
    /* A full look: the spot is brighter than the band, the shoulder greyer than the band. */
    {
        sp_bubble_look lk = flat(100, 100, 40, 40, 0);
        lk.band = 0.05;
        lk.shoulder = 0.4;
        lk.shoulder_px = 2.0;
        lk.spot = 0.8;
        lk.spot_frac = 0.3;
        CHECK(sp_render_bubble(&lk, 200, 200, &p) == 0, "render failed");
        float centre = p.d[(size_t)(100 - p.y0) * p.w + (100 - p.x0)];
        float band = p.d[(size_t)(100 - p.y0) * p.w + (125 - p.x0)];
        float shoulder = p.d[(size_t)(100 - p.y0) * p.w + (139 - p.x0)];
        CHECK(fabs(centre - 0.2f) < 0.01f, "spot deficit %g, want 0.2", centre);
        CHECK(fabs(band - 0.95f) < 0.01f, "band deficit %g, want 0.95", band);
        CHECK(fabs(shoulder - 0.6f) < 0.02f, "shoulder deficit %g, want 0.6", shoulder);
    }
    sp_patch_free(&p);
}

static int slurp(const char *path, unsigned char **buf, size_t *n)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return -1;
    fseek(f, 0, SEEK_END);
    long len = ftell(f);
    fseek(f, 0, SEEK_SET);
    *buf = malloc(len > 0 ? (size_t)len : 1);
    *n = len > 0 ? (size_t)len : 0;
    size_t got = *buf ? fread(*buf, 1, *n, f) : 0;
    fclose(f);
    return got == *n ? 0 : -1;
}

static int same_file(const char *a, const char *b)
{
    unsigned char *x = NULL, *y = NULL;
    size_t nx = 0, ny = 0;
    int ok = slurp(a, &x, &nx) == 0 && slurp(b, &y, &ny) == 0 && nx == ny && nx > 0 && memcmp(x, y, nx) == 0;
    free(x);
    free(y);
    return ok;
}

static void test_determinism(const char *base)
{
    const char *scen[] = {"plume", "sizing"};
    for (int s = 0; s < 2; s++) {
        char d1[512], d2[512];
        snprintf(d1, sizeof d1, "%s/%s_t1", base, scen[s]);
        snprintf(d2, sizeof d2, "%s/%s_t2", base, scen[s]);
        sp_synth_opts o;
        sp_synth_opts_default(&o);
        o.frames = 7; /* not a multiple of the batch size at either thread count */
        o.width = 320;
        o.height = 288;
        o.bytes = s == 0 ? 1 : 2;
        o.bits = 12;
        sp_error err;
        o.threads = 1;
        int rc1 = sp_synth_run(scen[s], d1, &o, &err);
        CHECK(rc1 == 0, "%s threads 1: %s", scen[s], err.msg);
        o.threads = 2;
        int rc2 = sp_synth_run(scen[s], d2, &o, &err);
        CHECK(rc2 == 0, "%s threads 2: %s", scen[s], err.msg);
        const char *files[] = {"truth_bubbles.csv",
                               "truth_tracks.csv",
                               "scene.json",
                               "video.mkv",
                               "frames/frame_00000.png",
                               "frames/frame_00003.png",
                               "frames/frame_00006.png"};
        for (size_t i = 0; i < sizeof files / sizeof files[0]; i++) {
            char a[1024], b[1024];
            snprintf(a, sizeof a, "%s/%s", d1, files[i]);
            snprintf(b, sizeof b, "%s/%s", d2, files[i]);
            CHECK(same_file(a, b), "%s: %s differs between 1 and 2 threads", scen[s], files[i]);
        }
        /* A different seed gives a different scene. */
        char d3[512];
        snprintf(d3, sizeof d3, "%s/%s_seed", base, scen[s]);
        o.seed = 99;
        o.video = 0;
        CHECK(sp_synth_run(scen[s], d3, &o, &err) == 0, "seed 99: %s", err.msg);
        char a[1024], b[1024];
        snprintf(a, sizeof a, "%s/frames/frame_00000.png", d1);
        snprintf(b, sizeof b, "%s/frames/frame_00000.png", d3);
        CHECK(!same_file(a, b), "%s: seed does not change the frames", scen[s]);
    }
}

static void test_errors(const char *base)
{
    sp_synth_opts o;
    sp_synth_opts_default(&o);
    o.frames = 1;
    o.png = 0;
    o.video = 0;
    sp_error err;
    char file[512], sub[600];
    snprintf(file, sizeof file, "%s/plainfile", base);
    FILE *f = fopen(file, "w");
    CHECK(f != NULL, "cannot create %s", file);
    if (f)
        fclose(f);
    snprintf(sub, sizeof sub, "%s/out", file);
    sp_error_clear(&err);
    int rc = sp_synth_run("sizing", sub, &o, &err);
    CHECK(rc == SP_ERR_INPUT, "directory under a file: rc %d", rc);
    CHECK(strstr(err.msg, file) != NULL && strchr(err.msg, '\n') == NULL, "message should name it: %s",
          err.msg);
    rc = sp_synth_run("nonesuch", base, &o, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "nonesuch"), "unknown scenario: rc %d %s", rc, err.msg);
    o.bytes = 2;
    o.bits = 20;
    rc = sp_synth_run("sizing", base, &o, &err);
    CHECK(rc == SP_ERR_INPUT, "bits 20: rc %d", rc);
    o.bits = 12;
    o.width = 100000;
    rc = sp_synth_run("sizing", base, &o, &err);
    CHECK(rc == SP_ERR_INPUT, "huge width: rc %d", rc);
    const char *const *names = sp_synth_scenarios();
    CHECK(names && names[0] && names[1] && names[2] && names[3] && names[4] && !names[5], "five scenarios listed");
}

int main(void)
{
    char base[] = "/tmp/spume_test_synth_XXXXXX";
    if (!mkdtemp(base)) {
        fprintf(stderr, "cannot make a temporary directory\n");
        return 1;
    }
    test_coverage();
    test_determinism(base);
    test_errors(base);
    char cmd[700];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", base);
    if (system(cmd) != 0)
        fprintf(stderr, "note: could not remove %s\n", base);
    if (failures)
        fprintf(stderr, "%d check(s) failed\n", failures);
    else
        printf("all synth render checks passed\n");
    return failures ? 1 : 0;
}

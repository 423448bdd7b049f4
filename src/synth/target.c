#include "synth/target.h"

#include "core/jsonw.h"
#include "io/png.h"
#include "synth/rng.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

void sp_target_opts_default(sp_target_opts *o)
{
    memset(o, 0, sizeof *o);
    o->width = 1024;
    o->height = 768;
    o->bytes = 1;
    o->pitch_mm = 1;
    o->dot_diam_mm = 0.5;
    o->mm_per_px = 0.025;
    o->offset_x = 0.31;
    o->offset_y = 0.17;
    o->blur_px = 0.8;
    o->noise = 0.01;
    o->vignette = 1;
    o->level = 0.08;
    o->seed = 1;
}

/* The geometry of one target: grid mm -> undistorted pixels by H (a similarity then a perspective
 * that fixes the image centre with unit derivative there, so the centre's scale and rotation are
 * exactly the options'), then the radial polynomial p_d = c + (p_u − c)(1 + k1ρ² + k2ρ⁴). */
typedef struct geom {
    double H[9], Hi[9];
    double cx, cy, norm, k1, k2;
} geom;

static void radial(const geom *g, double xu, double yu, double *xd, double *yd)
{
    double dx = xu - g->cx, dy = yu - g->cy, r2 = (dx * dx + dy * dy) / (g->norm * g->norm);
    double f = 1 + g->k1 * r2 + g->k2 * r2 * r2;
    *xd = g->cx + dx * f;
    *yd = g->cy + dy * f;
}

static void unradial(const geom *g, double xd, double yd, double *xu, double *yu)
{
    double dx = xd - g->cx, dy = yd - g->cy, rd = hypot(dx, dy) / g->norm, ru = rd;
    if (rd == 0 || (g->k1 == 0 && g->k2 == 0)) {
        *xu = xd, *yu = yd;
        return;
    }
    for (int it = 0; it < 30; it++) {
        double r2 = ru * ru;
        double step =
            (ru * (1 + g->k1 * r2 + g->k2 * r2 * r2) - rd) / (1 + 3 * g->k1 * r2 + 5 * g->k2 * r2 * r2);
        ru -= step;
        if (fabs(step) < 1e-14)
            break;
    }
    *xu = g->cx + dx * ru / rd;
    *yu = g->cy + dy * ru / rd;
}

static void apply_h(const double H[9], double x, double y, double *u, double *v)
{
    double w = H[6] * x + H[7] * y + H[8];
    *u = (H[0] * x + H[1] * y + H[2]) / w;
    *v = (H[3] * x + H[4] * y + H[5]) / w;
}

static int inv3(const double a[9], double b[9])
{
    double d = a[0] * (a[4] * a[8] - a[5] * a[7]) - a[1] * (a[3] * a[8] - a[5] * a[6]) +
               a[2] * (a[3] * a[7] - a[4] * a[6]);
    if (!(fabs(d) > 1e-300))
        return -1;
    b[0] = (a[4] * a[8] - a[5] * a[7]) / d;
    b[1] = (a[2] * a[7] - a[1] * a[8]) / d;
    b[2] = (a[1] * a[5] - a[2] * a[4]) / d;
    b[3] = (a[5] * a[6] - a[3] * a[8]) / d;
    b[4] = (a[0] * a[8] - a[2] * a[6]) / d;
    b[5] = (a[2] * a[3] - a[0] * a[5]) / d;
    b[6] = (a[3] * a[7] - a[4] * a[6]) / d;
    b[7] = (a[1] * a[6] - a[0] * a[7]) / d;
    b[8] = (a[0] * a[4] - a[1] * a[3]) / d;
    return 0;
}

static void geom_init(geom *g, const sp_target_opts *o)
{
    double c = cos(o->rotation_deg * M_PI / 180), s = sin(o->rotation_deg * M_PI / 180), k = 1 / o->mm_per_px;
    double S[9] = {c * k, -s * k, 0, -s * k, -c * k, 0, 0, 0, 1};
    g->cx = 0.5 * (o->width - 1);
    g->cy = 0.5 * (o->height - 1);
    g->norm = 0.5 * hypot(o->width - 1, o->height - 1);
    g->k1 = o->k1;
    g->k2 = o->k2;
    double a = o->persp_x / (0.5 * o->width), b = o->persp_y / (0.5 * o->height);
    /* Scale at the right edge is 1/(1 + a·W/2) of the centre's: persp_x > 0 shrinks it. */
    double P[9] = {1 + a * g->cx, b * g->cx, g->cx, a * g->cy, 1 + b * g->cy, g->cy, a, b, 1};
    for (int r = 0; r < 3; r++)
        for (int q = 0; q < 3; q++)
            g->H[r * 3 + q] = P[r * 3] * S[q] + P[r * 3 + 1] * S[3 + q] + P[r * 3 + 2] * S[6 + q];
    inv3(g->H, g->Hi);
}

/* Grid position (mm) of dot (i, j). Finite grids are centred on the image centre. */
static void dot_mm(const sp_target_opts *o, int i, int j, double *X, double *Y)
{
    double ci = o->cols > 0 ? 0.5 * (o->cols - 1) : 0, cj = o->rows > 0 ? 0.5 * (o->rows - 1) : 0;
    *X = (i - ci + o->offset_x) * o->pitch_mm;
    *Y = (j - cj + o->offset_y) * o->pitch_mm;
}

/* Distance (mm) from grid point (X, Y) to the nearest dot's centre, minus the dot radius. */
static double dot_sdf(const sp_target_opts *o, double X, double Y)
{
    double ci = o->cols > 0 ? 0.5 * (o->cols - 1) : 0, cj = o->rows > 0 ? 0.5 * (o->rows - 1) : 0;
    int i = (int)lround(X / o->pitch_mm - o->offset_x + ci),
        j = (int)lround(Y / o->pitch_mm - o->offset_y + cj);
    if (o->cols > 0)
        i = i < 0 ? 0 : i >= o->cols ? o->cols - 1 : i;
    if (o->rows > 0)
        j = j < 0 ? 0 : j >= o->rows ? o->rows - 1 : j;
    double dx, dy;
    dot_mm(o, i, j, &dx, &dy);
    return hypot(X - dx, Y - dy) - 0.5 * o->dot_diam_mm;
}

static double sdf_at_pixel(const sp_target_opts *o, const geom *g, double x, double y)
{
    double xu, yu, X, Y;
    unradial(g, x, y, &xu, &yu);
    apply_h(g->Hi, xu, yu, &X, &Y);
    return dot_sdf(o, X, Y);
}

static int check_opts(const sp_target_opts *o, const char *path, sp_error *err)
{
    int rc = sp_check_dims(o->width, o->height, path, err);
    if (rc)
        return rc;
    if (o->width < 16 || o->height < 16)
        return sp_error_set(err, SP_ERR_INPUT, "%s: target image too small (%dx%d)", path, o->width,
                            o->height);
    if (o->bytes != 1 && o->bytes != 2)
        return sp_error_set(err, SP_ERR_INPUT, "%s: bytes must be 1 or 2", path);
    if (!(o->pitch_mm > 0) || !(o->mm_per_px > 0) || !(o->dot_diam_mm > 0) || o->dot_diam_mm >= o->pitch_mm ||
        !isfinite(o->pitch_mm) || !isfinite(o->mm_per_px))
        return sp_error_set(err, SP_ERR_INPUT, "%s: need 0 < dot diameter < pitch and a scale > 0", path);
    if (o->pitch_mm / o->mm_per_px < 4 ||
        o->pitch_mm / o->mm_per_px > 0.5 * (o->width > o->height ? o->width : o->height))
        return sp_error_set(err, SP_ERR_INPUT, "%s: pitch of %g px out of range", path,
                            o->pitch_mm / o->mm_per_px);
    if (!(fabs(o->persp_x) <= 0.5) || !(fabs(o->persp_y) <= 0.5) || !(fabs(o->k1) <= 0.3) ||
        !(fabs(o->k2) <= 0.3))
        return sp_error_set(err, SP_ERR_INPUT, "%s: perspective within ±0.5 and distortion within ±0.3 only",
                            path);
    if (!(o->blur_px >= 0 && o->blur_px <= 20) || !(o->noise >= 0 && o->noise <= 0.5) ||
        !(o->vignette > 0 && o->vignette <= 1) || !(o->level >= 0 && o->level < 1) || o->cols < 0 ||
        o->rows < 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: blur, noise, vignette or level out of range", path);
    return SP_OK;
}

/* Separable Gaussian blur of a w×h float image in place. */
static int blur(float *c, int w, int h, double sigma)
{
    if (sigma <= 0)
        return 0;
    int r = (int)ceil(3.5 * sigma);
    double *k = malloc(sizeof *k * (size_t)(2 * r + 1));
    float *t = malloc(sizeof *t * (size_t)w * h);
    if (!k || !t) {
        free(k);
        free(t);
        return -1;
    }
    double sum = 0;
    for (int i = -r; i <= r; i++)
        sum += k[i + r] = exp(-0.5 * i * i / (sigma * sigma));
    for (int i = 0; i <= 2 * r; i++)
        k[i] /= sum;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double s = 0;
            for (int i = -r; i <= r; i++) {
                int xx = x + i < 0 ? -(x + i) - 1 : x + i >= w ? 2 * w - (x + i) - 1 : x + i;
                xx = xx < 0 ? 0 : xx >= w ? w - 1 : xx;
                s += k[i + r] * c[(size_t)y * w + xx];
            }
            t[(size_t)y * w + x] = (float)s;
        }
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double s = 0;
            for (int i = -r; i <= r; i++) {
                int yy = y + i < 0 ? -(y + i) - 1 : y + i >= h ? 2 * h - (y + i) - 1 : y + i;
                yy = yy < 0 ? 0 : yy >= h ? h - 1 : yy;
                s += k[i + r] * t[(size_t)yy * w + x];
            }
            c[(size_t)y * w + x] = (float)s;
        }
    free(k);
    free(t);
    return 0;
}

static int write_truth(const char *path, const sp_target_opts *o, const geom *g, sp_error *err)
{
    char tmp[4200];
    int n = snprintf(tmp, sizeof tmp, "%s.%ld.partial", path, (long)getpid());
    if (n < 0 || (size_t)n >= sizeof tmp)
        return sp_error_set(err, SP_ERR_INPUT, "%s: path too long", path);
    FILE *f = fopen(tmp, "wb");
    if (!f)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot create: %s", path, strerror(errno));
    sp_jsonw j;
    sp_jsonw_init(&j, f);
    sp_jsonw_obj(&j);
    sp_jsonw_kint(&j, "width", o->width);
    sp_jsonw_kint(&j, "height", o->height);
    sp_jsonw_knum(&j, "pitch_mm", o->pitch_mm);
    sp_jsonw_knum(&j, "dot_diam_mm", o->dot_diam_mm);
    sp_jsonw_knum(&j, "mm_per_px", o->mm_per_px);
    sp_jsonw_knum(&j, "rotation_deg", o->rotation_deg);
    sp_jsonw_knum(&j, "persp_x", o->persp_x);
    sp_jsonw_knum(&j, "persp_y", o->persp_y);
    sp_jsonw_knum(&j, "k1", o->k1);
    sp_jsonw_knum(&j, "k2", o->k2);
    sp_jsonw_knum(&j, "norm_px", g->norm);
    sp_jsonw_knum(&j, "blur_px", o->blur_px);
    sp_jsonw_knum(&j, "noise", o->noise);
    sp_jsonw_knum(&j, "vignette", o->vignette);
    sp_jsonw_kbool(&j, "light_dots", o->light_dots);
    sp_jsonw_kint(&j, "cols", o->cols);
    sp_jsonw_kint(&j, "rows", o->rows);
    sp_jsonw_key(&j, "homography");
    sp_jsonw_arr(&j);
    for (int k = 0; k < 9; k++)
        sp_jsonw_num(&j, g->H[k] / g->H[8]);
    sp_jsonw_arr_end(&j);
    /* Dots wholly inside: every index whose centre lands in the frame with a margin of the dot's
     * radius at the centre scale (generous: perspective may enlarge it a little) plus 2 px. */
    double rpx = 0.5 * o->dot_diam_mm / o->mm_per_px * 1.6 + 2;
    sp_jsonw_key(&j, "dots");
    sp_jsonw_arr(&j);
    int span = (int)ceil(2 * hypot(o->width, o->height) * o->mm_per_px / o->pitch_mm) + 2;
    int i0 = o->cols > 0 ? 0 : -span, i1 = o->cols > 0 ? o->cols - 1 : span;
    int j0 = o->rows > 0 ? 0 : -span, j1 = o->rows > 0 ? o->rows - 1 : span;
    for (int jj = j0; jj <= j1; jj++)
        for (int ii = i0; ii <= i1; ii++) {
            double X, Y, xu, yu, x, y;
            dot_mm(o, ii, jj, &X, &Y);
            double w = g->H[6] * X + g->H[7] * Y + g->H[8];
            if (!(w > 0))
                continue;
            apply_h(g->H, X, Y, &xu, &yu);
            radial(g, xu, yu, &x, &y);
            if (x < rpx || y < rpx || x > o->width - 1 - rpx || y > o->height - 1 - rpx)
                continue;
            sp_jsonw_arr(&j);
            sp_jsonw_int(&j, ii);
            sp_jsonw_int(&j, jj);
            sp_jsonw_num(&j, X);
            sp_jsonw_num(&j, Y);
            sp_jsonw_num(&j, x);
            sp_jsonw_num(&j, y);
            sp_jsonw_arr_end(&j);
        }
    sp_jsonw_arr_end(&j);
    sp_jsonw_obj_end(&j);
    fputc('\n', f);
    int bad = ferror(f);
    bad |= fclose(f) != 0;
    if (bad || rename(tmp, path) != 0) {
        int e = errno;
        unlink(tmp);
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot write: %s", path, strerror(e));
    }
    return SP_OK;
}

int sp_synth_target(const char *out_png, const sp_target_opts *o, sp_error *err)
{
    int rc = SP_OK, w = o->width, h = o->height;
    float *cov = NULL;
    sp_image im = {0};
    char tmp[4200], truth[4200];
    if ((rc = check_opts(o, out_png, err)))
        return rc;
    size_t len = strlen(out_png);
    if (len < 5 || strcmp(out_png + len - 4, ".png") || len + 32 > sizeof truth)
        return sp_error_set(err, SP_ERR_INPUT, "%s: the target file name must end in .png", out_png);
    snprintf(truth, sizeof truth, "%.*s_truth.json", (int)(len - 4), out_png);
    snprintf(tmp, sizeof tmp, "%s.%ld.partial.png", out_png, (long)getpid());

    geom g;
    geom_init(&g, o);
    cov = malloc(sizeof *cov * (size_t)w * h);
    if (!cov) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", out_png);
        goto fail;
    }
    /* Coverage of each pixel by dots: exact away from the outlines; pixels within two pixels' worth
     * of millimetres of an outline are supersampled 16×16. */
    double band = 2.0 * o->mm_per_px *
                  (1 + 2 * (fabs(o->persp_x) + fabs(o->persp_y)) + 2 * (fabs(o->k1) + fabs(o->k2)));
#pragma omp parallel for schedule(dynamic, 8)
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double d = sdf_at_pixel(o, &g, x, y);
            float c;
            if (d < -band) {
                c = 1;
            } else if (d > band) {
                c = 0;
            } else {
                int in = 0;
                for (int sy = 0; sy < 16; sy++)
                    for (int sx = 0; sx < 16; sx++)
                        in += sdf_at_pixel(o, &g, x - 0.5 + (sx + 0.5) / 16, y - 0.5 + (sy + 0.5) / 16) < 0;
                c = (float)(in / 256.0);
            }
            cov[(size_t)y * w + x] = c;
        }
    if (blur(cov, w, h, o->blur_px)) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", out_png);
        goto fail;
    }
    if ((rc = sp_image_alloc(&im, w, h, o->bytes, err)))
        goto fail;
    double full = o->bytes == 1 ? 255 : 65535;
    uint64_t key = rng_key(o->seed, RNG_NOISE, 0, 0);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double c = cov[(size_t)y * w + x];
            /* Vignetting: light falls with the squared distance from the centre to `vignette` in the
             * corners. */
            double rr = (hypot(x - g.cx, y - g.cy) / g.norm);
            double light = 1 - (1 - o->vignette) * rr * rr;
            double t = o->light_dots ? o->level + (1 - o->level) * c : 1 - (1 - o->level) * c;
            double v = 0.9 * full * light * t + o->noise * full * rng_normal(key, (uint64_t)y * w + x);
            v = v < 0 ? 0 : v > full ? full : v;
            if (o->bytes == 1)
                ((uint8_t *)im.data + (ptrdiff_t)y * im.stride)[x] = (uint8_t)lround(v);
            else
                ((uint16_t *)((uint8_t *)im.data + (ptrdiff_t)y * im.stride))[x] = (uint16_t)lround(v);
        }
    if ((rc = sp_png_write(tmp, &im, err)))
        goto fail;
    if (rename(tmp, out_png) != 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", out_png, strerror(errno));
        unlink(tmp);
        goto fail;
    }
    rc = write_truth(truth, o, &g, err);
fail:
    if (rc)
        unlink(tmp);
    free(cov);
    sp_image_free(&im);
    return rc;
}

#include "calib/dots.h"

#include "detect/ellipse.h"
#include "detect/label.h"
#include "detect/threshold.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Blobs kept as dots: filled area over the moment ellipse's area, and minor/major axis ratio.
 * A digital disc of radius >= 2 px fills its moment ellipse to within a few per cent; mild
 * perspective keeps the aspect near 1. */
#define FILL_LO 0.85
#define FILL_HI 1.15
#define ASPECT_MIN 0.5
/* Dots whose area is this far from the median dot are something else (dust, merged dots). */
#define AREA_SPREAD 2.5

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static double median_of(double *v, int n)
{
    qsort(v, (size_t)n, sizeof *v, cmp_double);
    return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

static inline double pix(const sp_image *im, int x, int y)
{
    return im->bytes == 1 ? (double)sp_row8(im, y)[x] : (double)sp_row16(im, y)[x];
}

/* Solve the 3x3 system m·p = r by Cramer's rule; 0 when singular. */
static int solve3(const double m[9], const double r[3], double p[3])
{
    double d = m[0] * (m[4] * m[8] - m[5] * m[7]) - m[1] * (m[3] * m[8] - m[5] * m[6]) +
               m[2] * (m[3] * m[7] - m[4] * m[6]);
    if (!(fabs(d) > 1e-12))
        return 0;
    for (int k = 0; k < 3; k++) {
        double t[9];
        memcpy(t, m, sizeof t);
        for (int r0 = 0; r0 < 3; r0++)
            t[r0 * 3 + k] = r[r0];
        p[k] = (t[0] * (t[4] * t[8] - t[5] * t[7]) - t[1] * (t[3] * t[8] - t[5] * t[6]) +
                t[2] * (t[3] * t[7] - t[4] * t[6])) /
               d;
    }
    return 1;
}

/* Sub-pixel centre of one dot around (cx, cy), blob radius r (px). The local light is a plane fitted
 * to a ring just outside the blob (so vignetting does not pull the centre); the dot level is the
 * median of the core. Each pixel then weighs by its fraction of the step from light to dot, clamped
 * to [0, 1]: for a blurred, anti-aliased disc this is its coverage, whose centroid is the disc's
 * centre. Pixels of other blobs are left out. Two passes re-centre the window. */
static int refine_centre(const sp_image *im, const int32_t *labels, int32_t self, double sign, double r,
                         double *cx, double *cy, double *scratch)
{
    int w = im->width, h = im->height;
    double ring_in = r + 1.5, ring_out = r + 1.5 + fmax(2.0, 0.5 * r);
    double core = fmax(0.0, r - 1.5);
    for (int pass = 0; pass < 2; pass++) {
        int x0 = (int)floor(*cx - ring_out), x1 = (int)ceil(*cx + ring_out);
        int y0 = (int)floor(*cy - ring_out), y1 = (int)ceil(*cy + ring_out);
        if (x0 < 0 || y0 < 0 || x1 >= w || y1 >= h)
            return 0;
        double m[9] = {0}, rv[3] = {0};
        int nring = 0, ncore = 0;
        for (int y = y0; y <= y1; y++)
            for (int x = x0; x <= x1; x++) {
                double dx = x - *cx, dy = y - *cy, d = sqrt(dx * dx + dy * dy);
                int32_t l = labels[(size_t)y * w + x];
                if (l != 0 && l != self)
                    continue;
                double v = pix(im, x, y);
                if (d >= ring_in && d <= ring_out) {
                    double b[3] = {1, dx, dy};
                    for (int a = 0; a < 3; a++) {
                        for (int c = 0; c < 3; c++)
                            m[a * 3 + c] += b[a] * b[c];
                        rv[a] += b[a] * v;
                    }
                    nring++;
                } else if (d <= core && l == self) {
                    scratch[ncore++] = v;
                }
            }
        double pl[3];
        if (nring < 8 || !solve3(m, rv, pl))
            return 0;
        double fg;
        if (ncore > 0) {
            fg = median_of(scratch, ncore);
        } else {
            fg = pix(im, (int)lround(*cx), (int)lround(*cy));
        }
        double sx = 0, sy = 0, sw = 0;
        for (int y = y0; y <= y1; y++)
            for (int x = x0; x <= x1; x++) {
                double dx = x - *cx, dy = y - *cy;
                if (dx * dx + dy * dy > ring_in * ring_in)
                    continue;
                int32_t l = labels[(size_t)y * w + x];
                if (l != 0 && l != self)
                    continue;
                double bg = pl[0] + pl[1] * dx + pl[2] * dy;
                double step = bg - fg;
                if (sign * step <= 0)
                    return 0;
                double wt = (bg - pix(im, x, y)) / step;
                wt = wt < 0 ? 0 : wt > 1 ? 1 : wt;
                sx += wt * x;
                sy += wt * y;
                sw += wt;
            }
        if (!(sw > 0))
            return 0;
        *cx = sx / sw;
        *cy = sy / sw;
    }
    return 1;
}

int sp_dots_find(const sp_image *im, int polarity, double min_diam_px, sp_dot **dots, int *n,
                 int *polarity_out, const char *what, sp_error *err)
{
    int rc = SP_OK, w = im->width, h = im->height;
    uint8_t *mask = NULL;
    int32_t *labels = NULL;
    double *areas = NULL, *scratch = NULL;
    sp_dot *out = NULL;
    sp_labeler *lb = NULL;
    *dots = NULL;
    *n = 0;
    if ((rc = sp_check_dims(w, h, what, err)))
        return rc;
    if (w < 8 || h < 8)
        return sp_error_set(err, SP_ERR_INPUT, "%s: image too small for a calibration target (%dx%d)", what,
                            w, h);

    /* Otsu (1979) on a 256-bin histogram of the native samples. */
    double maxv =
        im->bytes == 1 ? 255.0 : (double)((1u << (im->bits > 0 && im->bits <= 16 ? im->bits : 16)) - 1);
    uint64_t hist[256] = {0};
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double v = pix(im, x, y);
            int b = (int)(v * 256.0 / (maxv + 1.0));
            hist[b < 0 ? 0 : b > 255 ? 255 : b]++;
        }
    int t = sp_otsu_hist(hist, 256);
    if (t < 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: no dots found (the image is flat)", what);
    double thr = (t + 1) * (maxv + 1.0) / 256.0; /* dark class: v < thr */
    uint64_t ndark = 0;
    for (int b = 0; b <= t; b++)
        ndark += hist[b];
    int pol = polarity;
    if (pol != SP_DOTS_DARK && pol != SP_DOTS_LIGHT)
        pol = ndark * 2 <= (uint64_t)w * h ? SP_DOTS_DARK : SP_DOTS_LIGHT;
    if (polarity_out)
        *polarity_out = pol;

    size_t npx = (size_t)w * h;
    mask = malloc(npx);
    labels = malloc(npx * sizeof *labels);
    lb = sp_labeler_new();
    if (!mask || !labels || !lb) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", what);
        goto fail;
    }
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            int dark = pix(im, x, y) < thr;
            mask[(size_t)y * w + x] = (uint8_t)(pol == SP_DOTS_DARK ? dark : !dark);
        }
    const sp_component *comps = NULL;
    int nc = 0;
    if ((rc = sp_label_run(lb, mask, w, w, h, labels, &comps, &nc, 1, err)))
        goto fail;

    areas = malloc(sizeof *areas * (size_t)(nc > 0 ? nc : 1));
    out = malloc(sizeof *out * (size_t)(nc > 0 ? nc : 1));
    if (!areas || !out) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", what);
        goto fail;
    }
    /* Shape gate first, then a size gate about the median of the survivors. */
    double min_area = 0.25 * M_PI * min_diam_px * min_diam_px;
    int na = 0;
    int64_t max_area = 0;
    for (int k = 0; k < nc; k++) {
        const sp_component *c = &comps[k];
        sp_ellipse e;
        if (c->border || (double)c->area < min_area ||
            sp_ellipse_from_moments((double)c->area, c->cx, c->cy, c->mu20, c->mu11, c->mu02, &e))
            continue;
        double fill = (double)c->area / (M_PI * e.a * e.b);
        if (fill < FILL_LO || fill > FILL_HI || e.b < ASPECT_MIN * e.a)
            continue;
        areas[na++] = (double)c->area;
    }
    if (na == 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: no dots found (no round blobs of %g px or more)", what,
                          min_diam_px);
        goto fail;
    }
    double amed = median_of(areas, na);
    for (int k = 0; k < nc; k++)
        if (comps[k].area > max_area)
            max_area = comps[k].area;
    scratch = malloc(sizeof *scratch * (size_t)(max_area * 4 + 64));
    if (!scratch) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", what);
        goto fail;
    }
    int nd = 0;
    double sign = pol == SP_DOTS_DARK ? 1.0 : -1.0;
    for (int k = 0; k < nc; k++) {
        const sp_component *c = &comps[k];
        sp_ellipse e;
        if (c->border || (double)c->area < min_area ||
            sp_ellipse_from_moments((double)c->area, c->cx, c->cy, c->mu20, c->mu11, c->mu02, &e))
            continue;
        double fill = (double)c->area / (M_PI * e.a * e.b);
        double a = (double)c->area;
        if (fill < FILL_LO || fill > FILL_HI || e.b < ASPECT_MIN * e.a || a < amed / AREA_SPREAD ||
            a > amed * AREA_SPREAD)
            continue;
        double r = sqrt(a / M_PI), cx = c->cx, cy = c->cy;
        if (!refine_centre(im, labels, k + 1, sign, r, &cx, &cy, scratch))
            continue;
        out[nd].x = cx;
        out[nd].y = cy;
        out[nd].diam_px = 2 * r;
        out[nd].i = out[nd].j = 0;
        out[nd].indexed = 0;
        nd++;
    }
    if (nd == 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: no dots found (no blob stands clear of its surroundings)",
                          what);
        goto fail;
    }
    *dots = out;
    *n = nd;
    out = NULL;
fail:
    free(mask);
    free(labels);
    free(areas);
    free(scratch);
    free(out);
    sp_labeler_free(lb);
    return rc;
}

/* Measurement of one labelled component: moment ellipse, sub-pixel edge ellipse, diameters, shape.
 *
 * Size follows the edge, not the threshold: bubbles from fit_min_px up get a direct least-squares
 * ellipse (Halir & Flusser 1998) through the sub-pixel outline at the documented edge level (see
 * edges.h); smaller ones keep the moment ellipse of the filled pixels, rescaled to the sub-pixel
 * area from partial coverage, since too few outline points remain there to pin five parameters. */
#include "detect/measure.h"
#include "detect/edges.h"
#include "detect/focus.h"
#include "detect/hull.h"
#include "detect/split.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

struct sp_measurer {
    sp_edges edges;
    sp_splitter *splitter;
    float *scratch;  /* per outline point, for the sharpness median */
    double last_rms; /* outline residual of the last measured component's fitted ellipse (0 if not fitted) */
    double last_ab;  /* its a·b */
    size_t scratch_cap;
    int32_t *pts; /* hull input and work space */
    size_t pts_cap;
};

void sp_measure_opts_default(sp_measure_opts *o)
{
    o->min_diam_px = 3.0;
    o->max_diam_px = 0.0;
    o->fit_min_px = 8.0;
    o->edge_level = 0.5;
    o->min_sharpness = SP_FOCUS_MIN_SHARPNESS_DEFAULT;
    o->split = 1;
    o->split_solidity = 0.9;
    o->holes_filled = 0;
}

sp_measurer *sp_measurer_new(void)
{
    sp_measurer *m = calloc(1, sizeof(sp_measurer));
    if (m && !(m->splitter = sp_splitter_new())) {
        free(m);
        return NULL;
    }
    return m;
}

void sp_measurer_free(sp_measurer *m)
{
    if (!m)
        return;
    sp_edges_release(&m->edges);
    sp_splitter_free(m->splitter);
    free(m->scratch);
    free(m->pts);
    free(m);
}

/* Solidity: filled area over the area of the convex hull of the filled pixels' corner points. Only
 * the leftmost and rightmost corner at each corner-grid height can be on the hull: listed by height,
 * they come already in the order the monotone chain needs (coordinates given as (y, x)). */
static int solidity(sp_measurer *m, const sp_edges *e, const sp_component *c, double *out, sp_error *err)
{
    int rows = c->y1 - c->y0 + 1;
    size_t need = (size_t)(rows + 1) * 2 * 2 * 3 + 8; /* points + monotone-chain work (2n + 2) */
    if (need > m->pts_cap) {
        int32_t *p = realloc(m->pts, need * sizeof *p);
        if (!p)
            return sp_error_set(err, SP_ERR_INTERNAL, "measure: out of memory for the hull of %d rows", rows);
        m->pts = p;
        m->pts_cap = need;
    }
    int n = 0, pl = -1, pr = -1; /* extremes of the row above, -1 when none */
    for (int y = c->y0; y <= c->y1 + 1; y++) {
        int xl = -1, xr = -1;
        if (y <= c->y1) {
            /* The component's cells of the row, from its window (sp_edges_exterior): 0 there. */
            const uint8_t *row = e->ext + (size_t)(y - e->wy0) * (size_t)e->ww;
            for (int x = c->x0; x <= c->x1; x++)
                if (row[x - e->wx0] == 0) {
                    xl = x;
                    break;
                }
            for (int x = c->x1; x >= c->x0 && xl >= 0; x--)
                if (row[x - e->wx0] == 0) {
                    xr = x;
                    break;
                }
        }
        /* Pixel (x, r) covers the corner-grid square [x, x+1] × [r, r+1]: height y takes corners from
         * rows y − 1 and y. */
        int lo = xl, hi = xr >= 0 ? xr + 1 : -1;
        if (pl >= 0 && (lo < 0 || pl < lo))
            lo = pl;
        if (pr >= 0 && pr + 1 > hi)
            hi = pr + 1;
        if (lo >= 0) {
            int32_t q[4] = {y, lo, y, hi};
            memcpy(m->pts + 2 * n, q, sizeof q);
            n += 2;
        }
        pl = xl;
        pr = xr;
    }
    int64_t a2 = sp_hull_area2_sorted(m->pts, n, m->pts + 2 * n);
    double s = a2 > 0 ? 2.0 * (double)c->area / (double)a2 : 1.0;
    *out = s > 1.0 ? 1.0 : s;
    return SP_OK;
}

/* A fitted ellipse must agree with the moment ellipse of the same pixels: a wild fit means the outline
 * points do not describe this bubble (clipped by the frame, overlapping neighbour, noise). */
static int fit_plausible(const sp_ellipse *f, const sp_ellipse *mo)
{
    if (!isfinite(f->a) || !isfinite(f->b) || !isfinite(f->cx) || !isfinite(f->cy))
        return 0;
    if (hypot(f->cx - mo->cx, f->cy - mo->cy) > 1.0 + 0.5 * mo->b)
        return 0;
    double ra = f->a / mo->a, rb = f->b / mo->b;
    return ra > 0.67 && ra < 1.5 && rb > 0.67 && rb < 1.5;
}

/* Standard uncertainty of an equivalent diameter d (px), from three independent parts added in
 * quadrature (GUM, JCGM 100:2008, law of propagation for uncorrelated inputs):
 *  - fit: outline points scatter rms about the ellipse; n points of which neighbours share pixels
 *    (about n/2 independent) pin the mean radius to rms/sqrt(n/2), the diameter to twice that, and
 *    an arc that covers only part of the outline (span < 1, split pieces) pins it less well;
 *  - quantisation: the pixel grid and the edge-level interpolation leave a position error of order
 *    0.05 px on a sharp edge and about an eighth of the edge width W = 0.5 / sharpness on a blurred
 *    one, common to the whole outline, so it does not average out;
 *  - blur: a defocus disc moves the half-step contour of a curved outline by about W²/d (the
 *    outline's curvature times the square of the edge width), taken as a standard uncertainty
 *    rather than corrected because the disc's shape is not known.
 * The constants were set on rendered discs (tests/unit/test_detect_focus.c), not on the scenes the
 * coverage test uses. */
static double diam_uncertainty(double d, double rms, int n, double span, double sharpness, int fitted)
{
    double W = sharpness > 0 ? 0.5 / sharpness : 2.0;
    double u_fit = 0;
    if (fitted && n > 0)
        u_fit = 2.0 * rms * sqrt(2.0 / n) / sqrt(span > 0.1 ? span : 0.1);
    else
        u_fit = 0.12; /* moment ellipse rescaled to a partial-coverage area: no outline residual */
    double u_q = hypot(0.03, 0.28 * W);
    double u_b = d > 0 ? W * W / d : 0;
    return sqrt(u_fit * u_fit + u_q * u_q + u_b * u_b);
}

/* RMS geometric residual of the outline points about el. */
static double fit_rms(const sp_edges *e, const sp_ellipse *el)
{
    double ss = 0;
    sp_ellipse_frame f;
    sp_ellipse_frame_init(&f, el);
    for (int i = 0; i < e->n; i++) {
        double d = sp_ellipse_frame_distance(&f, e->xy[2 * i], e->xy[2 * i + 1]);
        ss += d * d;
    }
    return e->n ? sqrt(ss / e->n) : 0;
}

static int reserve_scratch(sp_measurer *m, size_t n, sp_error *err)
{
    if (n <= m->scratch_cap)
        return SP_OK;
    float *p = realloc(m->scratch, n * sizeof *p);
    if (!p)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: out of memory for %zu outline points", n);
    m->scratch = p;
    m->scratch_cap = n;
    return SP_OK;
}

static double tilt_of(const sp_ellipse *el)
{
    /* Image angles run from +x towards +y (down); the contract counts counter-clockwise with y up. */
    double tilt = -el->theta * 180.0 / M_PI;
    if (tilt <= -90.0)
        tilt += 180.0;
    if (tilt > 90.0)
        tilt -= 180.0;
    return tilt;
}

int sp_measure_component(sp_measurer *m, const sp_frame_view *v, const int32_t *labels, int label,
                         const sp_component *c, const sp_measure_opts *o, sp_bubble *out, int *keep,
                         sp_error *err)
{
    *keep = 0;
    if (!m || !v || !v->frame || !labels || !c || !o || !out)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: missing argument");
    const int w = v->frame->width, h = v->frame->height;
    if (c->area <= 0)
        return SP_OK;
    /* Gate on the filled pixel count first: it is free, and specks need no further work. */
    double d_pix = sqrt(4.0 * (double)c->area / M_PI);
    if (d_pix < o->min_diam_px || (o->max_diam_px > 0 && d_pix > o->max_diam_px))
        return SP_OK;

    /* Moments of the pixel squares, not their centres: + 1/12 per pixel on each variance, so a
     * one-row component still has a width. */
    sp_ellipse mo;
    double a12 = (double)c->area / 12.0;
    if (sp_ellipse_from_moments((double)c->area, c->cx, c->cy, c->mu20 + a12, c->mu11, c->mu02 + a12, &mo))
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: component %d has degenerate moments", label);

    sp_edges *e = &m->edges;
    int rc = sp_edges_exterior(e, labels, w, h, label, c, o->holes_filled, err);
    if (!rc)
        rc = sp_edges_levels(e, v, labels, label, c, err);
    if (rc)
        return rc;

    sp_ellipse el = mo;
    int fitted = 0;
    double area;
    e->n_step_in = e->n_dark;
    if (e->n_light - e->n_dark > 1e-3) {
        /* Outline points for every bubble: the small ones need the local step's inner level for
         * their partial-coverage area. */
        rc = sp_edges_points(e, v, labels, label, c, o->edge_level, err);
        if (rc)
            return rc;
        sp_ellipse f;
        if (d_pix >= o->fit_min_px && e->n >= 6 && sp_ellipse_fit(e->xy, e->n, &f) == 0 &&
            fit_plausible(&f, &mo)) {
            el = f;
            fitted = 1;
        }
    }
    if (fitted) {
        area = M_PI * el.a * el.b;
    } else {
        /* Rescale the moment ellipse to the sub-pixel area so axes and d_area agree. */
        area = sp_edges_area(e, v, labels, label, c);
        double a0 = M_PI * mo.a * mo.b;
        if (area > 0 && a0 > 0) {
            double k = sqrt(area / a0);
            el.a *= k;
            el.b *= k;
        } else {
            area = (double)c->area;
        }
    }

    double sol = 1.0;
    rc = solidity(m, e, c, &sol, err);
    if (rc)
        return rc;

    /* Sharpness of the outline against the ellipse it was sized with. */
    double sharp = 0, rms = 0;
    if (e->n > 0) {
        if ((rc = reserve_scratch(m, (size_t)e->n, err)))
            return rc;
        sharp = sp_focus_sharpness(e->xy, e->wid, e->pdir, e->n, &el, m->scratch);
        if (fitted)
            rms = fit_rms(e, &el);
    }

    m->last_rms = rms;
    m->last_ab = el.a * el.b;
    memset(out, 0, sizeof *out);
    out->x = c->cx;
    out->y = c->cy;
    out->area_px = (double)c->area;
    out->major_px = 2.0 * el.a;
    out->minor_px = 2.0 * el.b;
    out->tilt_deg = tilt_of(&el);
    out->d_area_px = sqrt(4.0 * area / M_PI);
    out->d_vol_px = cbrt(out->major_px * out->major_px * out->minor_px);
    out->aspect = out->minor_px / out->major_px;
    out->solidity = sol;
    double ct = 1.0 - (double)e->n_min;
    out->contrast = ct < 0 ? 0 : ct > 1 ? 1 : ct;
    out->edge = c->border != 0;
    out->split = 0;
    out->fit = fitted;
    out->sharpness = sharp;
    out->in_focus = sharp >= o->min_sharpness;
    out->u_d_px = diam_uncertainty(out->d_vol_px, rms, e->n, 1.0, sharp, fitted);
    out->x0 = c->x0;
    out->y0 = c->y0;
    out->x1 = c->x1;
    out->y1 = c->y1;
    *keep = 1;
    return SP_OK;
}

/* Normalised transmission at a sub-pixel point, bilinear; NaN off the frame. */
static double view_bilinear(const sp_frame_view *v, double x, double y)
{
    int x0 = (int)floor(x), y0 = (int)floor(y);
    if (x0 < 0 || y0 < 0 || x0 + 1 >= v->frame->width || y0 + 1 >= v->frame->height)
        return NAN;
    double fx = x - x0, fy = y - y0;
    return (1 - fy) * ((1 - fx) * sp_view_norm(v, x0, y0) + fx * sp_view_norm(v, x0 + 1, y0)) +
           fy * ((1 - fx) * sp_view_norm(v, x0, y0 + 1) + fx * sp_view_norm(v, x0 + 1, y0 + 1));
}

/* Does piece i's free outline (the part no other piece covers) run along the image's edge? The median
 * transmission there, as a fraction of the step, must sit near the edge level: a piece drawn too large
 * or too small over its hidden side shows up where its outline is free. */
static int piece_on_edge(const sp_frame_view *v, const sp_edges *e, const sp_split_piece *pc, int np, int i,
                         double frac, float *scratch)
{
    const sp_ellipse *el = &pc[i].el;
    double step = (double)e->n_light - (double)e->n_step_in;
    int m = 0;
    sp_ellipse_frame f[SP_SPLIT_MAX];
    for (int j = 0; j < np; j++)
        sp_ellipse_frame_init(&f[j], &pc[j].el);
    const double ct = f[i].c, st = f[i].s;
    for (int k = 0; k < 64; k++) {
        double t = 2 * M_PI * k / 64;
        double u = el->a * cos(t), w = el->b * sin(t);
        double x = el->cx + u * ct - w * st, y = el->cy + u * st + w * ct;
        int covered = 0;
        for (int j = 0; j < np && !covered; j++)
            covered = j != i && sp_ellipse_frame_distance(&f[j], x, y) < 1.5;
        double n = covered ? NAN : view_bilinear(v, x, y);
        if (isfinite(n))
            scratch[m++] = (float)((n - e->n_step_in) / step - frac);
    }
    if (m < 8)
        return 0;
    /* Median by partial insertion sort: m is at most 64. */
    for (int a = 1; a < m; a++)
        for (int b = a; b > 0 && scratch[b] < scratch[b - 1]; b--) {
            float t = scratch[b];
            scratch[b] = scratch[b - 1];
            scratch[b - 1] = t;
        }
    return fabs(scratch[m / 2]) <= 0.2;
}

int sp_measure_split(sp_measurer *m, const sp_frame_view *v, const int32_t *labels, int label,
                     const sp_component *c, const sp_measure_opts *o, sp_bubble *whole, sp_bubble *pieces,
                     int max, int *np, sp_error *err)
{
    *np = 0;
    whole->cluster = 0;
    sp_edges *e = &m->edges;
    if (!o->split || !(e->n_light - e->n_dark > 1e-3))
        return SP_OK;
    const int w = v->frame->width;
    int rc = sp_edges_trace(e, v, labels, label, c, o->edge_level, err);
    if (rc)
        return rc;
    if ((rc = reserve_scratch(m, (size_t)e->nc, err)))
        return rc;
    sp_split_piece pc[SP_SPLIT_MAX];
    int n = 0, status = SP_SPLIT_SINGLE;
    if ((rc = sp_split_contour(m->splitter, e, w, v->frame->height, pc, &n, &status, err)))
        return rc;
    /* A cluster cut by the border is taken only when split with confidence; its outline is no
     * ellipse anyway, so nothing else is said of it (it is an edge object, out of the statistics). */
    if (whole->edge && (status != SP_SPLIT_DONE || n > max))
        return SP_OK;
    /* Not one ellipse either: the outline leaves the fitted ellipse by more than edge noise explains. */
    int not_ellipse = whole->fit && m->last_rms > 0.3 + 0.01 * sqrt(m->last_ab);
    if (status == SP_SPLIT_FAILED || (status == SP_SPLIT_DONE && n > max) ||
        (status == SP_SPLIT_SINGLE &&
         (not_ellipse || (whole->d_area_px >= 20.0 && whole->solidity < o->split_solidity)))) {
        whole->cluster = 1;
        return SP_OK;
    }
    if (status != SP_SPLIT_DONE)
        return SP_OK;
    if ((rc = reserve_scratch(m, 64, err)))
        return rc;
    for (int i = 0; i < n; i++)
        if (!piece_on_edge(v, e, pc, n, i, o->edge_level, m->scratch)) {
            whole->cluster = !whole->edge;
            return SP_OK;
        }
    for (int i = 0; i < n; i++) {
        const sp_ellipse *el = &pc[i].el;
        sp_bubble *b = &pieces[i];
        *b = *whole;
        b->x = el->cx;
        b->y = el->cy;
        b->area_px = M_PI * el->a * el->b;
        b->major_px = 2.0 * el->a;
        b->minor_px = 2.0 * el->b;
        b->tilt_deg = tilt_of(el);
        b->d_area_px = 2.0 * sqrt(el->a * el->b);
        b->d_vol_px = cbrt(b->major_px * b->major_px * b->minor_px);
        b->aspect = el->b / el->a;
        b->split = label;
        b->fit = 1;
        b->cluster = 0;
        b->sharpness = pc[i].sharpness;
        b->in_focus = pc[i].sharpness >= o->min_sharpness;
        b->u_d_px = diam_uncertainty(b->d_vol_px, pc[i].rms_px, pc[i].npts, pc[i].span, pc[i].sharpness, 1);
        double hx, hy;
        double ct = cos(el->theta), st = sin(el->theta);
        hx = sqrt(el->a * el->a * ct * ct + el->b * el->b * st * st);
        hy = sqrt(el->a * el->a * st * st + el->b * el->b * ct * ct);
        /* Of a cluster cut by the border, only the pieces that reach it are cut (pixel edges at
         * -0.5 and size - 0.5). */
        b->edge = whole->edge && (el->cx - hx < 0.5 || el->cy - hy < 0.5 || el->cx + hx > w - 1.5 ||
                                  el->cy + hy > v->frame->height - 1.5);
        b->x0 = (int)floor(el->cx - hx + 0.5);
        b->y0 = (int)floor(el->cy - hy + 0.5);
        b->x1 = (int)floor(el->cx + hx + 0.5);
        b->y1 = (int)floor(el->cy + hy + 0.5);
        /* Within the cluster's own box. */
        b->x0 = b->x0 < whole->x0 ? whole->x0 : b->x0;
        b->y0 = b->y0 < whole->y0 ? whole->y0 : b->y0;
        b->x1 = b->x1 > whole->x1 ? whole->x1 : b->x1;
        b->y1 = b->y1 > whole->y1 ? whole->y1 : b->y1;
    }
    *np = n;
    return SP_OK;
}

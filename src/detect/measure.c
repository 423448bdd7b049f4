/* Measurement of one labelled component: moment ellipse, sub-pixel edge ellipse, diameters, shape.
 *
 * Size follows the edge, not the threshold: bubbles from fit_min_px up get a direct least-squares
 * ellipse (Halir & Flusser 1998) through the sub-pixel outline at the documented edge level (see
 * edges.h); smaller ones keep the moment ellipse of the filled pixels, rescaled to the sub-pixel
 * area from partial coverage, since too few outline points remain there to pin five parameters. */
#include "detect/measure.h"
#include "detect/edges.h"
#include "detect/hull.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

struct sp_measurer {
    sp_edges edges;
    int32_t *pts; /* hull input and work space */
    size_t pts_cap;
};

void sp_measure_opts_default(sp_measure_opts *o)
{
    o->min_diam_px = 3.0;
    o->max_diam_px = 0.0;
    o->fit_min_px = 8.0;
    o->edge_level = 0.5;
}

sp_measurer *sp_measurer_new(void)
{
    return calloc(1, sizeof(sp_measurer));
}

void sp_measurer_free(sp_measurer *m)
{
    if (!m)
        return;
    sp_edges_release(&m->edges);
    free(m->pts);
    free(m);
}

/* Solidity: filled area over the area of the convex hull of the filled pixels' corner points. The
 * row extremes' corners span the same hull as all corners, so 4 points per row suffice. */
static int solidity(sp_measurer *m, const int32_t *labels, int w, int label, const sp_component *c,
                    double *out, sp_error *err)
{
    int rows = c->y1 - c->y0 + 1;
    size_t need = (size_t)rows * 4 * 2 * 3; /* points + monotone-chain work (2n + 2) */
    if (need > m->pts_cap) {
        int32_t *p = realloc(m->pts, need * sizeof *p);
        if (!p)
            return sp_error_set(err, SP_ERR_INTERNAL, "measure: out of memory for the hull of %d rows", rows);
        m->pts = p;
        m->pts_cap = need;
    }
    int n = 0;
    for (int y = c->y0; y <= c->y1; y++) {
        const int32_t *row = labels + (size_t)y * w;
        int xl = -1, xr = -1;
        for (int x = c->x0; x <= c->x1; x++)
            if (row[x] == label) {
                if (xl < 0)
                    xl = x;
                xr = x;
            }
        if (xl < 0)
            continue;
        /* Pixel (x, y) covers the corner-grid square [x, x+1] × [y, y+1]. */
        int32_t q[8] = {xl, y, xl, y + 1, xr + 1, y, xr + 1, y + 1};
        memcpy(m->pts + 2 * n, q, sizeof q);
        n += 4;
    }
    int64_t a2 = sp_hull_area2(m->pts, n, m->pts + 2 * n);
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
    int rc = sp_edges_exterior(e, labels, w, h, label, c, err);
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
    rc = solidity(m, labels, w, label, c, &sol, err);
    if (rc)
        return rc;

    memset(out, 0, sizeof *out);
    out->x = c->cx;
    out->y = c->cy;
    out->area_px = (double)c->area;
    out->major_px = 2.0 * el.a;
    out->minor_px = 2.0 * el.b;
    /* Image angles run from +x towards +y (down); the contract counts counter-clockwise with y up. */
    double tilt = -el.theta * 180.0 / M_PI;
    if (tilt <= -90.0)
        tilt += 180.0;
    if (tilt > 90.0)
        tilt -= 180.0;
    out->tilt_deg = tilt;
    out->d_area_px = sqrt(4.0 * area / M_PI);
    out->d_vol_px = cbrt(out->major_px * out->major_px * out->minor_px);
    out->aspect = out->minor_px / out->major_px;
    out->solidity = sol;
    double ct = 1.0 - (double)e->n_min;
    out->contrast = ct < 0 ? 0 : ct > 1 ? 1 : ct;
    out->edge = c->border != 0;
    out->split = 0;
    out->fit = fitted;
    out->x0 = c->x0;
    out->y0 = c->y0;
    out->x1 = c->x1;
    out->y1 = c->y1;
    *keep = 1;
    return SP_OK;
}

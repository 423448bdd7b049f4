/* Sub-pixel outline of one labelled component; the method is described in edges.h. */
#include "detect/edges.h"

#include "detect/select.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

static const int dir4[4][2] = {{1, 0}, {-1, 0}, {0, 1}, {0, -1}};

/* Grow a buffer to hold `need` elements of `size` bytes (contents kept, amortised growth). */
static int reserve(void **p, size_t *cap, size_t need, size_t size, sp_error *err)
{
    if (need <= *cap)
        return SP_OK;
    if (need > SIZE_MAX / size / 2)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: workspace size overflow");
    size_t n = need + need / 2;
    void *q = realloc(*p, n * size);
    if (!q)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: out of memory for %zu workspace entries", n);
    *p = q;
    *cap = n;
    return SP_OK;
}

void sp_edges_release(sp_edges *e)
{
    if (!e)
        return;
    free(e->ext);
    free(e->stack);
    free(e->opair);
    free(e->pair_ok);
    free(e->pair_t);
    free(e->pair_w);
    free(e->vals);
    free(e->xy);
    free(e->wid);
    free(e->pdir);
    free(e->cpt);
    memset(e, 0, sizeof *e);
}

static inline int lab_at(const int32_t *labels, int w, int h, int x, int y)
{
    if (x < 0 || y < 0 || x >= w || y >= h)
        return -1;
    return labels[(size_t)y * (size_t)w + (size_t)x];
}

int sp_edges_exterior(sp_edges *e, const int32_t *labels, int w, int h, int label, const sp_component *c,
                      int holes_filled, sp_error *err)
{
    if (c->x0 < 0 || c->y0 < 0 || c->x1 >= w || c->y1 >= h || c->x0 > c->x1 || c->y0 > c->y1)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: component %d bounding box outside the frame",
                            label);
    e->wx0 = c->x0 - 1;
    e->wy0 = c->y0 - 1;
    e->ww = c->x1 - c->x0 + 3;
    e->wh = c->y1 - c->y0 + 3;
    size_t nw = (size_t)e->ww * (size_t)e->wh;
    if (nw > UINT32_MAX >> 2)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: component %d window too large", label);
    int rc = reserve((void **)&e->ext, &e->ext_cap, nw, 1, err);
    if (!rc)
        rc = reserve((void **)&e->stack, &e->stack_cap, nw, sizeof(int32_t), err);
    if (rc)
        return rc;
    /* With holes filled, a cell the component encloses would be a hole of the mask (background) or
     * another component reached only through one (labels are 8-connected): neither exists, so all
     * cells outside the component are exterior. */
    const uint8_t other = holes_filled ? 2 : 1;
    for (int y = 0; y < e->wh; y++) {
        uint8_t *row = e->ext + (size_t)y * e->ww;
        int yy = e->wy0 + y;
        if (yy < 0 || yy >= h) {
            memset(row, other, (size_t)e->ww);
            continue;
        }
        const int32_t *lr = labels + (size_t)yy * (size_t)w;
        for (int x = 0; x < e->ww; x++) {
            int xx = e->wx0 + x;
            row[x] = xx >= 0 && xx < w && lr[xx] == label ? 0 : other;
        }
    }
    /* 4-connected flood of non-component cells from the window frame: the dual of the 8-connected
     * component, so a diagonal gap in the outline does not leak into an enclosed region. */
    size_t sp = 0;
    for (int y = 0; y < e->wh && !holes_filled; y++)
        for (int x = 0; x < e->ww; x++)
            if (y == 0 || x == 0 || y == e->wh - 1 || x == e->ww - 1) {
                size_t i = (size_t)y * e->ww + x;
                if (e->ext[i] == 1) {
                    e->ext[i] = 2;
                    e->stack[sp++] = (int32_t)i;
                }
            }
    while (sp) {
        int32_t i = e->stack[--sp];
        int x = i % e->ww, y = i / e->ww;
        const int nb[4][2] = {{1, 0}, {-1, 0}, {0, 1}, {0, -1}};
        for (int k = 0; k < 4; k++) {
            int xx = x + nb[k][0], yy = y + nb[k][1];
            if (xx < 0 || yy < 0 || xx >= e->ww || yy >= e->wh)
                continue;
            size_t j = (size_t)yy * e->ww + xx;
            if (e->ext[j] == 1) {
                e->ext[j] = 2;
                e->stack[sp++] = (int32_t)j;
            }
        }
    }
    /* The outline pairs, listed once for the stages that walk them: a component pixel and its
     * 4-neighbour in the exterior and inside the frame (the window's padding holds every neighbour). */
    e->nopair = 0;
    for (int wy = 1; wy < e->wh - 1; wy++)
        for (int wx = 1; wx < e->ww - 1; wx++) {
            size_t i = (size_t)wy * e->ww + wx;
            if (e->ext[i] != 0)
                continue;
            int x = e->wx0 + wx, y = e->wy0 + wy;
            for (int d = 0; d < 4; d++) {
                int xx = x + dir4[d][0], yy = y + dir4[d][1];
                if (xx < 0 || yy < 0 || xx >= w || yy >= h ||
                    e->ext[(size_t)(wy + dir4[d][1]) * e->ww + (size_t)(wx + dir4[d][0])] != 2)
                    continue;
                if ((rc = reserve((void **)&e->opair, &e->opair_cap, e->nopair + 1, sizeof(uint32_t), err)))
                    return rc;
                e->opair[e->nopair++] = (uint32_t)(i << 2 | (size_t)d);
            }
        }
    return SP_OK;
}

/* Pixel (x, y) and direction (dx, dy) of outline pair k. */
static inline void opair_at(const sp_edges *e, size_t k, int *x, int *y, int *dx, int *dy)
{
    uint32_t p = e->opair[k];
    size_t i = p >> 2;
    int d = (int)(p & 3);
    *x = e->wx0 + (int)(i % (size_t)e->ww);
    *y = e->wy0 + (int)(i / (size_t)e->ww);
    *dx = dir4[d][0];
    *dy = dir4[d][1];
}

static inline int ext_at(const sp_edges *e, int x, int y)
{
    int wx = x - e->wx0, wy = y - e->wy0;
    if (wx < 0 || wy < 0 || wx >= e->ww || wy >= e->wh)
        return 2;
    return e->ext[(size_t)wy * e->ww + wx];
}

#define QBINS 1024 /* transmission bins over [0, 2) for the quantile's first pass */

/* q-quantile (0..1): the element of rank round(q·(n−1)), exact. Large arrays go through a histogram
 * of the transmissions first (one branch-free pass), then a selection among the few values of the
 * bin that holds the rank: quickselect's branches on thousands of values cost several times more. */
static float quantile(float *v, size_t n, double q)
{
    size_t k = (size_t)(q * (double)(n - 1) + 0.5);
    if (k >= n)
        k = n - 1;
    if (n < 256)
        return sp_select_float(v, n, k);
    uint32_t hist[QBINS];
    memset(hist, 0, sizeof hist);
    for (size_t i = 0; i < n; i++) {
        float f = v[i] * (QBINS / 2);
        int b = !(f >= 0.f) ? 0 : f >= (float)(QBINS - 1) ? QBINS - 1 : (int)f;
        hist[b]++;
    }
    size_t below = 0;
    int bin = 0;
    while (below + hist[bin] <= k)
        below += hist[bin++];
    /* Move the bin's values to the front (order among them does not matter to the selection). */
    size_t m = 0;
    for (size_t i = 0; i < n; i++) {
        float f = v[i] * (QBINS / 2);
        int b = !(f >= 0.f) ? 0 : f >= (float)(QBINS - 1) ? QBINS - 1 : (int)f;
        if (b == bin) {
            float t = v[m];
            v[m++] = v[i];
            v[i] = t;
        }
    }
    return sp_select_float(v, m, k - below);
}

int sp_edges_levels(sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                    const sp_component *c, sp_error *err)
{
    int w = v->frame->width, h = v->frame->height;
    int rc = reserve((void **)&e->vals, &e->vals_cap, (size_t)c->area, sizeof(float), err);
    if (rc)
        return rc;

    size_t nv = 0;
    float nmin = 1e30f;
    for (int y = c->y0; y <= c->y1; y++)
        for (int x = c->x0; x <= c->x1; x++)
            if (e->ext[(size_t)(y - e->wy0) * e->ww + (size_t)(x - e->wx0)] == 0 && nv < e->vals_cap) {
                float t = sp_view_norm(v, x, y);
                e->vals[nv++] = t;
                if (t < nmin)
                    nmin = t;
            }
    if (nv == 0)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: component %d has no pixels", label);
    e->n_min = nmin;
    e->n_dark = quantile(e->vals, nv, 0.2);

    nv = 0;
    if ((rc = reserve((void **)&e->vals, &e->vals_cap, 8 * e->nopair, sizeof(float), err)))
        return rc;
    for (size_t q = 0; q < e->nopair; q++) {
        int x, y, dx, dy;
        opair_at(e, q, &x, &y, &dx, &dy);
        for (int k = 3; k <= 10; k++) {
            int xx = x + k * dx, yy = y + k * dy;
            if (lab_at(labels, w, h, xx, yy) != 0)
                break; /* left the frame or met another bubble */
            e->vals[nv++] = sp_view_norm(v, xx, yy);
        }
    }
    /* No visible surroundings: the background model's own light level. */
    e->n_light = nv ? quantile(e->vals, nv, 0.5) : 1.0f;
    return SP_OK;
}

/* Profile s[k + 3] = n(p + k·d), k = −3..4. Position of the upward crossing of `level` nearest to
 * the p–q step (segments 0, −1, 1, −2, 2, −3, 3), linear between samples; NaN if none. */
static double crossing(const double s[8], double level)
{
    static const int order[7] = {0, -1, 1, -2, 2, -3, 3};
    for (int o = 0; o < 7; o++) {
        int k = order[o];
        double s0 = s[k + 3], s1 = s[k + 4];
        if (s0 < level && s1 >= level) /* also rejects NaN */
            return k + (level - s0) / (s1 - s0);
    }
    return NAN;
}

/* The profile at position t (in samples, k = −3..4), linearly interpolated; NaN outside. */
static double profile_at(const double s[8], double t)
{
    if (!(t >= -3.0 && t <= 4.0))
        return NAN;
    int k = (int)floor(t);
    if (k >= 4)
        return s[7];
    double f = t - k;
    return s[k + 3] + f * (s[k + 4] - s[k + 3]);
}

/* Profile s[k + 3] = n(p + k·d), k = −3..4, across the outline at component pixel (x, y) towards its
 * exterior neighbour (x + dx, y + dy); NaN marks samples off the frame. */
static void profile(const sp_frame_view *v, int x, int y, int dx, int dy, double s[8])
{
    int w = v->frame->width, h = v->frame->height;
    for (int k = -3; k <= 4; k++) {
        int xx = x + k * dx, yy = y + k * dy;
        s[k + 3] = (xx < 0 || yy < 0 || xx >= w || yy >= h) ? NAN : (double)sp_view_norm(v, xx, yy);
    }
}

/* Nearest upward crossing of `level` at or beyond position t0 (outward) or before it (inward). */
static double crossing_near(const double s[8], double level, double t0)
{
    double best = NAN, bd = 1e30;
    for (int k = -3; k < 4; k++) {
        double s0 = s[k + 3], s1 = s[k + 4];
        if (s0 < level && s1 >= level) {
            double t = k + (level - s0) / (s1 - s0);
            if (fabs(t - t0) < bd) {
                bd = fabs(t - t0);
                best = t;
            }
        }
    }
    return best;
}

/* One outline pair: the crossing t (samples along the pair direction from the component pixel),
 * the inner level of its local step (NaN if unread) and the width between the 25 % and 75 % crossings
 * of that step (NaN if either falls off the profile). Returns 0 when no crossing was found. */
static int pair_point(const sp_frame_view *v, int x, int y, int dx, int dy, double glevel, double light,
                      double frac, double *t_out, double *nin_out, double *w_out)
{
    double s[8];
    profile(v, x, y, dx, dy, s);
    double t = crossing(s, glevel);
    *nin_out = NAN;
    *w_out = NAN;
    if (isnan(t))
        return 0;
    double nin = profile_at(s, t - SP_EDGE_INSET_PX);
    if (isfinite(nin) && nin < light) {
        double t2 = crossing(s, nin + frac * (light - nin));
        if (!isnan(t2))
            t = t2;
        *nin_out = nin;
        /* Sharpness: the width of the central half of the same local step. */
        double step = light - nin;
        double t25 = crossing_near(s, nin + 0.25 * step, t), t75 = crossing_near(s, nin + 0.75 * step, t);
        if (!isnan(t25) && !isnan(t75) && t75 >= t25)
            *w_out = t75 - t25;
    }
    *t_out = t;
    return 1;
}

int sp_edges_points(sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                    const sp_component *c, double frac, sp_error *err)
{
    (void)labels; /* the outline pairs were listed by sp_edges_exterior */
    (void)label;
    (void)c;
    const double light = e->n_light, step = light - e->n_dark;
    const double glevel = e->n_dark + frac * step;
    int rc;
    e->n = 0;

    /* The crossing of edge_level of the local step, from the transmission SP_EDGE_INSET_PX inside
     * the crossing of the component-wide level to the light. */
    size_t nin_n = 0;
    if (e->nopair > e->pair_cap) {
        size_t c1 = e->pair_cap, c2 = e->pair_cap, c3 = e->pair_cap;
        if ((rc = reserve((void **)&e->pair_ok, &c1, e->nopair, 1, err)) ||
            (rc = reserve((void **)&e->pair_t, &c2, e->nopair, sizeof(double), err)) ||
            (rc = reserve((void **)&e->pair_w, &c3, e->nopair, sizeof(float), err)))
            return rc;
        e->pair_cap = c1 < c2 ? (c1 < c3 ? c1 : c3) : (c2 < c3 ? c2 : c3);
    }
    e->cached_level = glevel;
    e->cached_light = light;
    for (size_t q = 0; q < e->nopair; q++) {
        int x, y, dx, dy;
        opair_at(e, q, &x, &y, &dx, &dy);
        double t;
        double nin;
        double wd;
        e->pair_ok[q] = (int8_t)pair_point(v, x, y, dx, dy, glevel, light, frac, &t, &nin, &wd);
        e->pair_t[q] = t;
        e->pair_w[q] = (float)wd;
        if (!e->pair_ok[q])
            continue;
        if (isfinite(nin)) {
            if ((rc = reserve((void **)&e->vals, &e->vals_cap, nin_n + 1, sizeof(float), err)))
                return rc;
            e->vals[nin_n++] = (float)nin;
        }
        size_t need = (size_t)e->n + 1;
        if ((rc = reserve((void **)&e->xy, &e->xy_cap, 2 * need, sizeof(double), err)))
            return rc;
        if (need > e->aux_cap) {
            size_t cap = e->aux_cap;
            size_t cap2 = e->aux_cap;
            if ((rc = reserve((void **)&e->wid, &cap, need, sizeof(float), err)) ||
                (rc = reserve((void **)&e->pdir, &cap2, 2 * need, 1, err)))
                return rc;
            e->aux_cap = cap < cap2 / 2 ? cap : cap2 / 2;
        }
        e->xy[2 * e->n] = x + t * dx;
        e->xy[2 * e->n + 1] = y + t * dy;
        e->wid[e->n] = (float)wd;
        e->pdir[2 * e->n] = (int8_t)dx;
        e->pdir[2 * e->n + 1] = (int8_t)dy;
        e->n++;
    }
    /* Median inner level of the local steps, for the partial-coverage area. */
    e->n_step_in = nin_n ? quantile(e->vals, nin_n, 0.5) : e->n_dark;
    return SP_OK;
}

/* Index of outline pair (x, y) → (x + dx, y + dy) in the sorted pair list, or -1. */
static long find_pair(const sp_edges *e, int x, int y, int dx, int dy)
{
    int wx = x - e->wx0, wy = y - e->wy0;
    if (wx < 0 || wy < 0 || wx >= e->ww || wy >= e->wh)
        return -1;
    int d = dx == 1 ? 0 : dx == -1 ? 1 : dy == 1 ? 2 : 3; /* dir4's order */
    uint32_t key = (uint32_t)(((size_t)wy * (size_t)e->ww + (size_t)wx) << 2 | (size_t)d);
    size_t a = 0, b = e->nopair;
    while (a < b) {
        size_t m = a + (b - a) / 2;
        if (e->opair[m] < key)
            a = m + 1;
        else
            b = m;
    }
    return a < e->nopair && e->opair[a] == key ? (long)a : -1;
}

/* Inside for the trace: any window cell not reached from outside (component or enclosed). */
static inline int trace_in(const sp_edges *e, int x, int y)
{
    return ext_at(e, x, y) != 2;
}

int sp_edges_trace(sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                   const sp_component *c, double frac, sp_error *err)
{
    /* Directions clockwise on screen (y down): E, S, W, N. */
    static const int D[4][2] = {{1, 0}, {0, 1}, {-1, 0}, {0, -1}};
    int w = v->frame->width, h = v->frame->height;
    const double light = e->n_light, glevel = e->n_dark + frac * (light - e->n_dark);
    e->nc = 0;
    /* Start: the first component pixel in raster order; its north side faces the exterior. */
    int sx = -1, sy = c->y0;
    for (int x = c->x0; x <= c->x1; x++)
        if (labels[(size_t)sy * w + x] == label) {
            sx = x;
            break;
        }
    if (sx < 0)
        return sp_error_set(err, SP_ERR_INTERNAL, "measure: component %d has no pixel on its top row", label);
    const int cached = e->pair_cap >= e->nopair && e->cached_level == glevel && e->cached_light == light;
    size_t maxc = 4 * (size_t)c->area + 4 * (size_t)(e->ww + e->wh) + 8;
    int x = sx, y = sy, d = 3, rc;
    for (size_t it = 0; it < maxc; it++) {
        if ((rc = reserve((void **)&e->cpt, &e->c_cap, (size_t)e->nc + 1, sizeof(sp_contour_pt), err)))
            return rc;
        int dx = D[d][0], dy = D[d][1];
        double t = 0, nin, wd = NAN;
        int ok = lab_at(labels, w, h, x + dx, y + dy) >= 0;
        if (ok) {
            /* The same pair as in sp_edges_points: its result when cached, else computed. */
            long q = cached ? find_pair(e, x, y, dx, dy) : -1;
            if (q >= 0) {
                ok = e->pair_ok[q];
                t = e->pair_t[q];
                wd = e->pair_w[q];
            } else {
                ok = pair_point(v, x, y, dx, dy, glevel, light, frac, &t, &nin, &wd);
            }
            ok = ok && fabs(t) <= 2.5;
        }
        sp_contour_pt *q = &e->cpt[e->nc++];
        q->x = ok ? x + t * dx : x + 0.5 * dx;
        q->y = ok ? y + t * dy : y + 0.5 * dy;
        q->wid = ok ? (float)wd : NAN;
        q->dx = (int8_t)dx;
        q->dy = (int8_t)dy;
        q->ok = (uint8_t)ok;
        /* Walk along this crack in direction d+1 (exterior on the left); the diagonal cell first so
         * the object is 8-connected, as labelled. */
        int m = (d + 1) & 3;
        int ax = x + D[m][0] + dx, ay = y + D[m][1] + dy, bx = x + D[m][0], by = y + D[m][1];
        if (trace_in(e, ax, ay)) {
            x = ax;
            y = ay;
            d = (d + 3) & 3;
        } else if (trace_in(e, bx, by)) {
            x = bx;
            y = by;
        } else {
            d = m;
        }
        if (x == sx && y == sy && d == 3)
            return SP_OK;
    }
    return sp_error_set(err, SP_ERR_INTERNAL, "measure: contour of component %d does not close", label);
}

double sp_edges_area(const sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                     const sp_component *c)
{
    int w = v->frame->width, h = v->frame->height;
    double step = (double)e->n_light - (double)e->n_step_in;
    if (!(step > 1e-3))
        return (double)c->area;
    double area = 0;
    /* Walk the padded window: the exterior band lies at most 1 px outside the bounding box. */
    for (int wy = 0; wy < e->wh; wy++)
        for (int wx = 0; wx < e->ww; wx++) {
            int x = e->wx0 + wx, y = e->wy0 + wy;
            int state = e->ext[(size_t)wy * e->ww + wx];
            if (state == 1) {
                area += 1.0; /* enclosed: part of the bubble's projection */
                continue;
            }
            int lab = lab_at(labels, w, h, x, y);
            if (lab < 0)
                continue;
            /* Is the pixel on the band: next to a pixel of the other side? */
            int band = 0;
            for (int ddy = -1; ddy <= 1 && !band; ddy++)
                for (int ddx = -1; ddx <= 1 && !band; ddx++) {
                    if (!ddx && !ddy)
                        continue;
                    int s2 = ext_at(e, x + ddx, y + ddy);
                    band = state == 0 ? s2 == 2 : s2 == 0;
                }
            if (state == 0 && !band) {
                area += 1.0;
                continue;
            }
            if (!band || (state == 2 && lab != 0))
                continue; /* far exterior, or another bubble's pixel */
            double cov = ((double)e->n_light - (double)sp_view_norm(v, x, y)) / step;
            /* Loose clamp only: clamping at 0 and 1 would turn the noise of the band into a bias. */
            if (cov < -0.25)
                cov = -0.25;
            if (cov > 1.25)
                cov = 1.25;
            area += cov;
        }
    (void)label;
    return area;
}

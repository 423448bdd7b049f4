/* Cluster splitting by concave points and per-arc ellipse fits; the method is described in split.h. */
#include "detect/split.h"
#include "detect/focus.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

#define MAX_ARCS (2 * SP_SPLIT_MAX)
#define SPAN_BINS 36

struct sp_splitter {
    double *depth;
    int *cand;
    double *xy; /* gathered arc points */
    float *wid;
    int8_t *dir;
    float *scratch;
    size_t cap; /* entries of every array above (xy and dir hold two per entry) */
};

sp_splitter *sp_splitter_new(void)
{
    return calloc(1, sizeof(sp_splitter));
}

void sp_splitter_free(sp_splitter *s)
{
    if (!s)
        return;
    free(s->depth);
    free(s->cand);
    free(s->xy);
    free(s->wid);
    free(s->dir);
    free(s->scratch);
    free(s);
}

static int reserve_all(sp_splitter *s, size_t n, sp_error *err)
{
    if (n <= s->cap)
        return SP_OK;
    size_t c = n + n / 2;
    double *d = realloc(s->depth, c * sizeof *d);
    if (d)
        s->depth = d;
    int *k = d ? realloc(s->cand, c * sizeof *k) : NULL;
    if (k)
        s->cand = k;
    double *xy = k ? realloc(s->xy, 2 * c * sizeof *xy) : NULL;
    if (xy)
        s->xy = xy;
    float *w = xy ? realloc(s->wid, c * sizeof *w) : NULL;
    if (w)
        s->wid = w;
    int8_t *dr = w ? realloc(s->dir, 2 * c) : NULL;
    if (dr)
        s->dir = dr;
    float *sc = dr ? realloc(s->scratch, c * sizeof *sc) : NULL;
    if (!sc)
        return sp_error_set(err, SP_ERR_INTERNAL, "split: out of memory for a contour of %zu points", n);
    s->scratch = sc;
    s->cap = c;
    return SP_OK;
}

typedef struct arc {
    int i0, i1; /* unrolled contour indices [i0, i1) */
} arc;

typedef struct group {
    uint32_t mask; /* arcs it holds */
    int ok;        /* ellipse fitted */
    sp_split_piece p;
} group;

/* Gather the sub-pixel points of the arcs in mask into s->xy / wid / dir. */
static int gather(sp_splitter *s, const sp_edges *e, const arc *arcs, int na, uint32_t mask)
{
    int m = 0, n = e->nc;
    for (int a = 0; a < na; a++) {
        if (!(mask & (1u << a)))
            continue;
        for (int k = arcs[a].i0; k < arcs[a].i1; k++) {
            const sp_contour_pt *q = &e->cpt[k % n];
            if (!q->ok)
                continue;
            s->xy[2 * m] = q->x;
            s->xy[2 * m + 1] = q->y;
            s->wid[m] = q->wid;
            s->dir[2 * m] = q->dx;
            s->dir[2 * m + 1] = q->dy;
            m++;
        }
    }
    return m;
}

/* Residual tolerance of one piece: sub-pixel edge noise plus a little shape freedom for large bubbles. */
static double tolerance(const sp_ellipse *el)
{
    return 0.4 + 0.02 * sqrt(el->a * el->b);
}

/* The same for accepting a piece, plus an allowance for defocus: an edge crossing's noise grows with
 * the width of the step (the same image noise over a gentler gradient), and sharpness (focus.h) is
 * about 1 / that width. Zero up to a 2 px wide step, so in-focus pieces are held as before; arcs are
 * still merged under the plain tolerance, so two bubbles' arcs do not pass for one blurred ellipse. */
static double accept_tolerance(const sp_split_piece *p)
{
    double blur = p->sharpness > 0 && isfinite(p->sharpness) ? 0.05 * fmax(0, 1 / p->sharpness - 2) : 0;
    return tolerance(&p->el) + blur;
}

/* Fit an ellipse to the arcs of a group; fills g->p and g->ok. */
static void fit_group(sp_splitter *s, const sp_edges *e, const arc *arcs, int na, group *g)
{
    int m = gather(s, e, arcs, na, g->mask);
    g->ok = 0;
    if (m < 6 || sp_ellipse_fit(s->xy, m, &g->p.el) || !isfinite(g->p.el.a) || !isfinite(g->p.el.b))
        return;
    double ss = 0;
    int bins[SPAN_BINS] = {0};
    sp_ellipse_frame f;
    sp_ellipse_frame_init(&f, &g->p.el);
    const double c = f.c, sn = f.s;
    for (int i = 0; i < m; i++) {
        double d = sp_ellipse_frame_distance(&f, s->xy[2 * i], s->xy[2 * i + 1]);
        ss += d * d;
        double px = s->xy[2 * i] - g->p.el.cx, py = s->xy[2 * i + 1] - g->p.el.cy;
        double u = (px * c + py * sn) / g->p.el.a, v = (-px * sn + py * c) / g->p.el.b;
        int b = (int)floor((atan2(v, u) + M_PI) / (2 * M_PI) * SPAN_BINS);
        bins[b < 0 ? 0 : b >= SPAN_BINS ? SPAN_BINS - 1 : b] = 1;
    }
    int occ = 0;
    for (int b = 0; b < SPAN_BINS; b++)
        occ += bins[b];
    g->p.rms_px = sqrt(ss / m);
    g->p.npts = m;
    g->p.span = (double)occ / SPAN_BINS;
    g->p.sharpness = sp_focus_sharpness(s->xy, s->wid, s->dir, m, &g->p.el, s->scratch);
    g->ok = 1;
}

/* Is the pixel centre (x, y) outside the fw×fh frame? */
static int off_frame(double x, double y, int fw, int fh)
{
    return x < 0 || y < 0 || x > fw - 1 || y > fh - 1;
}

/* Share of the silhouette (window cells not in the exterior) and the union of the pieces that
 * overlap: intersection over union, on pixel centres. Only the frame counts: a piece cut by the
 * border goes on beyond it, where nothing was seen. */
static double union_iou(const sp_edges *e, const group *g, int ng, int fw, int fh)
{
    long inter = 0, uni = 0;
    sp_ellipse_frame f[MAX_ARCS];
    for (int i = 0; i < ng; i++)
        sp_ellipse_frame_init(&f[i], &g[i].p.el);
    for (int wy = 0; wy < e->wh; wy++)
        for (int wx = 0; wx < e->ww; wx++) {
            if (off_frame(e->wx0 + wx, e->wy0 + wy, fw, fh))
                continue;
            int sil = e->ext[(size_t)wy * e->ww + wx] != 2;
            int in = 0;
            for (int i = 0; i < ng && !in; i++)
                in = sp_ellipse_frame_inside(&f[i], e->wx0 + wx, e->wy0 + wy);
            inter += sil && in;
            uni += sil || in;
        }
    return uni ? (double)inter / (double)uni : 0;
}

/* Share of the pixel centres inside el (counted as pi·a·b, less those off the frame) that lie in the
 * silhouette. */
static double inside_fraction(const sp_edges *e, const sp_ellipse *el, int fw, int fh)
{
    long in = 0, off = 0;
    sp_ellipse_frame f;
    sp_ellipse_frame_init(&f, el);
    for (int wy = 0; wy < e->wh; wy++)
        for (int wx = 0; wx < e->ww; wx++)
            in += e->ext[(size_t)wy * e->ww + wx] != 2 && !off_frame(e->wx0 + wx, e->wy0 + wy, fw, fh) &&
                  sp_ellipse_frame_inside(&f, e->wx0 + wx, e->wy0 + wy);
    double ct = f.c, st = f.s;
    double hx = sqrt(el->a * el->a * ct * ct + el->b * el->b * st * st);
    double hy = sqrt(el->a * el->a * st * st + el->b * el->b * ct * ct);
    if (off_frame(el->cx - hx, el->cy - hy, fw, fh) || off_frame(el->cx + hx, el->cy + hy, fw, fh)) {
        /* Bounded: the centre lies in the window and the union check held the piece to the
         * silhouette's size. */
        int x0 = (int)floor(el->cx - hx), x1 = (int)ceil(el->cx + hx);
        int y0 = (int)floor(el->cy - hy), y1 = (int)ceil(el->cy + hy);
        for (int y = y0; y <= y1; y++)
            for (int x = x0; x <= x1; x++)
                off += off_frame(x, y, fw, fh) && sp_ellipse_frame_inside(&f, x, y);
    }
    double vis = M_PI * el->a * el->b - (double)off;
    return vis > 0 ? (double)in / vis : 0;
}

int sp_split_contour(sp_splitter *s, const sp_edges *e, int fw, int fh, sp_split_piece *pieces, int *np,
                     int *status, sp_error *err)
{
    *np = 0;
    *status = SP_SPLIT_SINGLE;
    const int n = e->nc;
    if (n < 24)
        return SP_OK; /* too small to hold two bubbles the fits could pin down */
    int rc = reserve_all(s, (size_t)n, err);
    if (rc)
        return rc;
    const sp_contour_pt *P = e->cpt;

    /* Orientation, so that a positive depth means the point lies on the interior side of its chord. */
    double area2 = 0;
    for (int i = 0; i < n; i++) {
        const sp_contour_pt *p = &P[i], *q = &P[(i + 1) % n];
        area2 += p->x * q->y - q->x * p->y;
    }
    const double sgn = area2 > 0 ? 1.0 : -1.0;
    int k = n / 16;
    k = k < 3 ? 3 : k > 40 ? 40 : k;
    /* Only a point on the interior side of its chord can be concave: the others get depth 0, which
     * no test below tells from their own depth (a candidate is at least 0.7 deep, above both), and
     * they need no chord length. */
    double dmax = 0;
    for (int i = 0; i < n; i++) {
        const sp_contour_pt *a = &P[(i - k + n) % n], *b = &P[(i + k) % n], *p = &P[i];
        double ux = b->x - a->x, uy = b->y - a->y, qx = p->x - a->x, qy = p->y - a->y;
        double cr = sgn * (ux * qy - uy * qx);
        double L = cr > 0 ? sp_hypot(ux, uy) : 0;
        s->depth[i] = L > 1e-9 ? cr / L : 0;
        dmax = s->depth[i] > dmax ? s->depth[i] : dmax;
    }
    if (!(dmax >= 0.7))
        return SP_OK; /* no concave point: the depth floor below is at least 0.7 */
    double len = 0;
    for (int i = 0; i < n; i++) {
        const sp_contour_pt *p = &P[i], *q = &P[(i + 1) % n];
        len += sp_hypot(q->x - p->x, q->y - p->y);
    }
    const double dmin = fmax(0.7, 0.2 * k * len / n);
    int nc = 0;
    for (int i = 0; i < n; i++) {
        if (s->depth[i] < dmin)
            continue;
        int peak = 1;
        for (int j = -k; j <= k && peak; j++) {
            if (!j)
                continue;
            double dj = s->depth[(i + j + n) % n];
            peak = j < 0 ? s->depth[i] > dj : s->depth[i] >= dj;
        }
        if (peak)
            s->cand[nc++] = i;
    }
    if (nc == 0)
        return SP_OK;
    *status = SP_SPLIT_FAILED;
    if (nc < 2 || nc > MAX_ARCS)
        return SP_OK;

    /* Arcs between consecutive concave points, trimmed where the two outlines blur together. */
    arc arcs[MAX_ARCS];
    group g[MAX_ARCS];
    int gap = k / 2 > 2 ? k / 2 : 2;
    for (int j = 0; j < nc; j++) {
        int i0 = s->cand[j], i1 = j + 1 < nc ? s->cand[j + 1] : s->cand[0] + n;
        arcs[j].i0 = i0 + gap;
        arcs[j].i1 = i1 - gap > i0 + gap ? i1 - gap : i0 + gap;
        g[j].mask = 1u << j;
        fit_group(s, e, arcs, nc, &g[j]);
    }
    int ng = nc;
    /* Merge the pair of groups one ellipse fits best, while it fits within the tolerance. */
    for (;;) {
        int bi = -1, bj = -1;
        double best = INFINITY;
        group gm;
        for (int i = 0; i < ng; i++)
            for (int j = i + 1; j < ng; j++) {
                group t;
                memset(&t, 0, sizeof t);
                t.mask = g[i].mask | g[j].mask;
                fit_group(s, e, arcs, nc, &t);
                if (t.ok && t.p.rms_px <= tolerance(&t.p.el) && t.p.rms_px < best) {
                    best = t.p.rms_px;
                    bi = i;
                    bj = j;
                    gm = t;
                }
            }
        if (bi < 0)
            break;
        g[bi] = gm;
        g[bj] = g[ng - 1];
        ng--;
    }
    /* Confidence: every piece fits its own arcs closely over enough of its outline, looks like a bubble,
     * stays inside the silhouette's window, and together they reproduce the silhouette. */
    for (int i = 0; i < ng; i++) {
        const sp_split_piece *p = &g[i].p;
        /* Below 8 px across (the edge-fit size of measure.h) an arc no longer pins a piece's size. */
        if (!g[i].ok || p->rms_px > accept_tolerance(p) || p->el.a * p->el.b < 16.0 ||
            p->el.b < 0.25 * p->el.a || p->span < 0.35)
            return SP_OK;
        /* A small piece seen over little of its outline is not pinned down: its ellipse can swell into
         * the neighbour that hides it. */
        if (sqrt(p->el.a * p->el.b) < 10.0 && p->span < 0.5)
            return SP_OK;
        if (p->el.cx < e->wx0 || p->el.cy < e->wy0 || p->el.cx > e->wx0 + e->ww - 1 ||
            p->el.cy > e->wy0 + e->wh - 1)
            return SP_OK;
        for (int j = 0; j < i; j++) /* two fits of one bubble */
            if (hypot(p->el.cx - g[j].p.el.cx, p->el.cy - g[j].p.el.cy) < 0.3 * fmin(p->el.b, g[j].p.el.b))
                return SP_OK;
    }
    if (ng > SP_SPLIT_MAX)
        return SP_OK;
    if (ng == 1) {
        /* One ellipse fits the whole outline: the concavities were noise on a single bubble. */
        *status = g[0].p.span >= 0.9 ? SP_SPLIT_SINGLE : SP_SPLIT_FAILED;
        return SP_OK;
    }
    if (union_iou(e, g, ng, fw, fh) < 0.85)
        return SP_OK;
    for (int i = 0; i < ng; i++) /* a piece must lie in the silhouette, not stick out of it */
        if (inside_fraction(e, &g[i].p.el, fw, fh) < 0.9)
            return SP_OK;
    /* Deterministic order: by centre, top to bottom then left to right. */
    for (int i = 1; i < ng; i++)
        for (int j = i; j > 0 && (g[j].p.el.cy < g[j - 1].p.el.cy ||
                                  (g[j].p.el.cy == g[j - 1].p.el.cy && g[j].p.el.cx < g[j - 1].p.el.cx));
             j--) {
            group t = g[j];
            g[j] = g[j - 1];
            g[j - 1] = t;
        }
    for (int i = 0; i < ng; i++)
        pieces[i] = g[i].p;
    *np = ng;
    *status = SP_SPLIT_DONE;
    return SP_OK;
}

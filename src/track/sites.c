/* Nucleation sites by density clustering of track births: DBSCAN (Ester, Kriegel, Sander & Xu
 * 1996, KDD-96) with a per-pair radius scaled to the bubbles' first diameters, neighbours found
 * through a uniform grid hash. Core points are joined by union-find, which makes the clusters of
 * core points independent of any visiting order; a border point joins the cluster of its nearest
 * core neighbour (ties: the first in (x, y, t) order), so the whole result is a function of the
 * set of births, not of their order. */
#include "track/sites.h"

#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct cand {
    double x, y, yw, t, d0, g, eps;
    int64_t track;
    size_t in; /* index in the caller's array */
    int64_t cx, cy;
    size_t label; /* union-find parent, then cluster label (sorted index of its root) */
    int core;
} cand;

void sp_sites_opts_default(sp_sites_opts *o)
{
    memset(o, 0, sizeof *o);
    o->eps_diam = 2.0;
    o->eps_min_mm = 0.0;
    o->eps_mm = 0.0;
    o->y_weight = 0.5;
    o->d_cap = 4.0;
    o->min_births = 3;
    o->max_spread = 0.5;
}

void sp_sites_free(sp_sites *s)
{
    if (!s)
        return;
    free(s->site);
    free(s->track_site);
    memset(s, 0, sizeof *s);
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y ? 1 : 0;
}

/* Median of the finite values among v[0..n) (reorders v); NaN if there are none. */
static double median_finite(double *v, size_t n)
{
    size_t m = 0;
    for (size_t i = 0; i < n; i++)
        if (isfinite(v[i]))
            v[m++] = v[i];
    if (m == 0)
        return NAN;
    qsort(v, m, sizeof *v, cmp_double);
    return m % 2 ? v[m / 2] : 0.5 * (v[m / 2 - 1] + v[m / 2]);
}

static int cmp_cand(const void *a, const void *b)
{
    const cand *p = a, *q = b;
    if (p->x != q->x)
        return p->x < q->x ? -1 : 1;
    if (p->y != q->y)
        return p->y < q->y ? -1 : 1;
    if (p->t != q->t)
        return p->t < q->t ? -1 : 1;
    if (p->d0 != q->d0)
        return p->d0 < q->d0 ? -1 : 1;
    if (p->track != q->track)
        return p->track < q->track ? -1 : 1;
    return p->in < q->in ? -1 : p->in > q->in;
}

/* Grid order: by cell, then by (x, y, t) order (the candidates' index after the first sort). */
typedef struct cell_ref {
    int64_t cx, cy;
    size_t i;
} cell_ref;

static int cmp_cell(const void *a, const void *b)
{
    const cell_ref *p = a, *q = b;
    if (p->cx != q->cx)
        return p->cx < q->cx ? -1 : 1;
    if (p->cy != q->cy)
        return p->cy < q->cy ? -1 : 1;
    return p->i < q->i ? -1 : p->i > q->i;
}

/* First entry of the grid at or after cell (cx, cy). */
static size_t cell_lower(const cell_ref *g, size_t n, int64_t cx, int64_t cy)
{
    size_t lo = 0, hi = n;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (g[mid].cx < cx || (g[mid].cx == cx && g[mid].cy < cy))
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo;
}

static int64_t cell_of(double v, double cell)
{
    double c = floor(v / cell);
    /* Far-off values share the outermost cells: slower, never wrong (distances are checked). */
    if (c > 1e15)
        c = 1e15;
    if (c < -1e15)
        c = -1e15;
    return (int64_t)c;
}

static int neighbours(const cand *a, const cand *b)
{
    double dx = a->x - b->x, dy = a->yw - b->yw, e = fmin(a->eps, b->eps);
    return dx * dx + dy * dy <= e * e;
}

static size_t uf_find(cand *c, size_t i)
{
    while (c[i].label != i) {
        c[i].label = c[c[i].label].label; /* path halving */
        i = c[i].label;
    }
    return i;
}

/* Union by smaller index keeps every root the first member in (x, y, t) order. */
static void uf_union(cand *c, size_t i, size_t j)
{
    size_t a = uf_find(c, i), b = uf_find(c, j);
    if (a == b)
        return;
    if (a < b)
        c[b].label = a;
    else
        c[a].label = b;
}

typedef struct member {
    size_t label, i;
} member;

static int cmp_member(const void *a, const void *b)
{
    const member *p = a, *q = b;
    if (p->label != q->label)
        return p->label < q->label ? -1 : 1;
    return p->i < q->i ? -1 : p->i > q->i;
}

static int cmp_site(const void *a, const void *b)
{
    const sp_site *p = a, *q = b;
    if (p->x_mm != q->x_mm)
        return p->x_mm < q->x_mm ? -1 : 1;
    if (p->y_mm != q->y_mm)
        return p->y_mm < q->y_mm ? -1 : 1;
    if (p->t_first_s != q->t_first_s)
        return p->t_first_s < q->t_first_s ? -1 : 1;
    return 0;
}

/* Statistics of one site from its members c[m[0..k)].i. `buf` holds at least 2k doubles. */
static void site_stats(const cand *c, const member *m, size_t k, double *buf, sp_site *s)
{
    memset(s, 0, sizeof *s);
    s->n = (int64_t)k;
    for (size_t j = 0; j < k; j++)
        buf[j] = c[m[j].i].x;
    s->x_mm = median_finite(buf, k);
    for (size_t j = 0; j < k; j++)
        buf[j] = c[m[j].i].y;
    s->y_mm = median_finite(buf, k);
    for (size_t j = 0; j < k; j++) {
        const cand *p = &c[m[j].i];
        buf[j] = hypot(p->x - s->x_mm, p->y - s->y_mm);
    }
    s->spread_mm = median_finite(buf, k);
    for (size_t j = 0; j < k; j++)
        buf[j] = c[m[j].i].d0 > 0 ? c[m[j].i].d0 : NAN;
    s->d_detach_mm = median_finite(buf, k);
    for (size_t j = 0; j < k; j++)
        buf[j] = c[m[j].i].g;
    s->growth_mm_s = median_finite(buf, k);
    /* Emission rate from the span of births: (n - 1) intervals fit between the first and last. */
    for (size_t j = 0; j < k; j++)
        buf[j] = c[m[j].i].t;
    qsort(buf, k, sizeof *buf, cmp_double);
    s->t_first_s = buf[0];
    s->t_last_s = buf[k - 1];
    double span = s->t_last_s - s->t_first_s;
    /* Emission periods in the span: one per interval, except that an interval longer than 1.5
     * median intervals counts as round(interval / median) periods — births the detector missed
     * (a bubble too small or hidden at detachment), which would otherwise lower the rate. */
    double periods = (double)(k - 1);
    if (k >= 4) {
        double *iv = buf + k; /* buf holds 2k doubles */
        for (size_t j = 1; j < k; j++)
            iv[j - 1] = buf[j] - buf[j - 1];
        double med = median_finite(iv, k - 1);
        if (med > 0) {
            periods = 0;
            for (size_t j = 1; j < k; j++) {
                double r = (buf[j] - buf[j - 1]) / med;
                periods += r > 1.5 ? floor(r + 0.5) : 1.0;
            }
        }
    }
    s->rate_hz = k >= 2 && span > 0 ? periods / span : 0.0;
    s->interval_cv = NAN;
    if (k >= 3 && span > 0) {
        double mean = span / (double)(k - 1), ss = 0;
        for (size_t j = 1; j < k; j++) {
            double dv = buf[j] - buf[j - 1] - mean;
            ss += dv * dv;
        }
        s->interval_cv = sqrt(ss / (double)(k - 2)) / mean;
    }
}

int sp_sites_find(const sp_birth *births, size_t n, const sp_sites_opts *opts, sp_sites *out, sp_error *err)
{
    int rc = SP_OK;
    sp_sites_opts o;
    cand *c = NULL;
    cell_ref *grid = NULL;
    member *mem = NULL;
    double *buf = NULL;
    int *rootid = NULL; /* cluster root (a candidate index) -> site id, 0 for dropped clusters */
    size_t m = 0, nmem = 0;

    if (out)
        memset(out, 0, sizeof *out);
    if (opts)
        o = *opts;
    else
        sp_sites_opts_default(&o);
    if (!out || (n > 0 && !births))
        return sp_error_set(err, SP_ERR_INTERNAL, "sites: null argument");
    if (!(isfinite(o.eps_diam) && o.eps_diam >= 0) || !(isfinite(o.eps_min_mm) && o.eps_min_mm >= 0) ||
        !(isfinite(o.eps_mm) && o.eps_mm >= 0) || !(isfinite(o.y_weight) && o.y_weight > 0) ||
        !(isfinite(o.d_cap) && o.d_cap > 0))
        return sp_error_set(err, SP_ERR_INPUT,
                            "sites: radius options must be finite and non-negative "
                            "(y_weight and d_cap positive)");
    if (o.min_births < 2)
        return sp_error_set(err, SP_ERR_INPUT, "sites: min_births is %d, at least 2 are needed for a site",
                            o.min_births);
    if (n > (size_t)INT_MAX || n > SIZE_MAX / (sizeof(cand) + sizeof(cell_ref) + sizeof(member) + 16))
        return sp_error_set(err, SP_ERR_INTERNAL, "sites: %zu births is too many", n);

    out->track_site = calloc(n ? n : 1, sizeof *out->track_site);
    out->ntracks = n;
    c = malloc((n ? n : 1) * sizeof *c);
    if (!out->track_site || !c) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "sites: out of memory for %zu births", n);
        goto fail;
    }
    for (size_t i = 0; i < n; i++) {
        const sp_birth *b = &births[i];
        if (!b->born_inside || !isfinite(b->x0_mm) || !isfinite(b->y0_mm) || !isfinite(b->t0_s))
            continue;
        cand *p = &c[m++];
        memset(p, 0, sizeof *p);
        p->x = b->x0_mm;
        p->y = b->y0_mm;
        p->yw = b->y0_mm * o.y_weight;
        p->t = b->t0_s;
        p->d0 = isfinite(b->d0_mm) && b->d0_mm > 0 ? b->d0_mm : 0.0;
        p->g = isfinite(b->growth_mm_s) ? b->growth_mm_s : NAN;
        p->track = b->track;
        p->in = i;
    }
    if (m == 0)
        goto done;
    qsort(c, m, sizeof *c, cmp_cand);

    /* Radius per birth: eps_diam first diameters (capped against outliers), floored at eps_min. */
    buf = malloc(2 * m * sizeof *buf);
    grid = malloc(m * sizeof *grid);
    mem = malloc(m * sizeof *mem);
    rootid = calloc(m, sizeof *rootid);
    if (!buf || !grid || !mem || !rootid) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "sites: out of memory for %zu births", m);
        goto fail;
    }
    for (size_t i = 0; i < m; i++)
        buf[i] = c[i].d0 > 0 ? c[i].d0 : NAN;
    double dmed = median_finite(buf, m);
    double cell = 0;
    for (size_t i = 0; i < m; i++) {
        double e;
        if (o.eps_mm > 0) {
            e = o.eps_mm;
        } else {
            double d = c[i].d0 > 0 ? c[i].d0 : dmed;
            if (isfinite(dmed) && d > o.d_cap * dmed)
                d = o.d_cap * dmed;
            e = isfinite(d) ? o.eps_diam * d : 0.0;
            if (e < o.eps_min_mm)
                e = o.eps_min_mm;
        }
        c[i].eps = e;
        if (e > cell)
            cell = e;
    }
    if (!(cell > 0))
        cell = 1.0; /* radius 0: only coincident births are neighbours */

    for (size_t i = 0; i < m; i++) {
        c[i].cx = cell_of(c[i].x, cell);
        c[i].cy = cell_of(c[i].yw, cell);
        c[i].label = i;
        grid[i].cx = c[i].cx;
        grid[i].cy = c[i].cy;
        grid[i].i = i;
    }
    qsort(grid, m, sizeof *grid, cmp_cell);

    /* Core points: at least min_births births (itself included) within the radius. The radius of
     * a pair is the smaller of the two (at most the cell), so every neighbour lies in the 3×3
     * block of cells. */
    for (size_t i = 0; i < m; i++) {
        int64_t cnt = 0;
        for (int64_t dx = -1; dx <= 1; dx++)
            for (int64_t dy = -1; dy <= 1; dy++) {
                size_t k = cell_lower(grid, m, c[i].cx + dx, c[i].cy + dy);
                for (; k < m && grid[k].cx == c[i].cx + dx && grid[k].cy == c[i].cy + dy; k++)
                    cnt += neighbours(&c[i], &c[grid[k].i]);
            }
        c[i].core = cnt >= o.min_births;
    }
    for (size_t i = 0; i < m; i++) {
        if (!c[i].core)
            continue;
        for (int64_t dx = -1; dx <= 1; dx++)
            for (int64_t dy = -1; dy <= 1; dy++) {
                size_t k = cell_lower(grid, m, c[i].cx + dx, c[i].cy + dy);
                for (; k < m && grid[k].cx == c[i].cx + dx && grid[k].cy == c[i].cy + dy; k++) {
                    size_t j = grid[k].i;
                    if (j > i && c[j].core && neighbours(&c[i], &c[j]))
                        uf_union(c, i, j);
                }
            }
    }
    /* Members: core points under their root; border points under the root of the nearest core
     * neighbour; the rest are noise (births that belong to no site). */
    for (size_t i = 0; i < m; i++) {
        if (c[i].core) {
            mem[nmem].label = uf_find(c, i);
            mem[nmem++].i = i;
            continue;
        }
        double best = INFINITY;
        size_t bj = SIZE_MAX;
        for (int64_t dx = -1; dx <= 1; dx++)
            for (int64_t dy = -1; dy <= 1; dy++) {
                size_t k = cell_lower(grid, m, c[i].cx + dx, c[i].cy + dy);
                for (; k < m && grid[k].cx == c[i].cx + dx && grid[k].cy == c[i].cy + dy; k++) {
                    size_t j = grid[k].i;
                    if (!c[j].core || !neighbours(&c[i], &c[j]))
                        continue;
                    double ddx = c[i].x - c[j].x, ddy = c[i].yw - c[j].yw, d2 = ddx * ddx + ddy * ddy;
                    if (d2 < best || (d2 == best && j < bj)) {
                        best = d2;
                        bj = j;
                    }
                }
            }
        if (bj != SIZE_MAX) {
            mem[nmem].label = uf_find(c, bj);
            mem[nmem++].i = i;
        }
    }
    qsort(mem, nmem, sizeof *mem, cmp_member);

    /* One site per cluster that kept at least min_births members (a core point's border
     * neighbours may have gone to a nearer core of another cluster). */
    size_t ns = 0;
    for (size_t a = 0; a < nmem;) {
        size_t b = a;
        while (b < nmem && mem[b].label == mem[a].label)
            b++;
        if (b - a >= (size_t)o.min_births)
            ns++;
        a = b;
    }
    if (ns == 0)
        goto done;
    out->site = calloc(ns, sizeof *out->site);
    if (!out->site) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "sites: out of memory for %zu sites", ns);
        goto fail;
    }
    ns = 0;
    for (size_t a = 0; a < nmem;) {
        size_t b = a;
        while (b < nmem && mem[b].label == mem[a].label)
            b++;
        if (b - a >= (size_t)o.min_births) {
            site_stats(c, mem + a, b - a, buf, &out->site[ns]);
            out->site[ns++].id = (int)mem[a].label; /* the cluster's root until numbered */
        }
        a = b;
    }
    /* A site is a fixed point: births scattered over more than half a detachment diameter around
     * it are fragments of tracks broken in mid-field, not a nucleation site. */
    size_t kept = 0;
    for (size_t k = 0; k < ns; k++) {
        const sp_site *st = &out->site[k];
        if (o.max_spread > 0 && isfinite(st->d_detach_mm) && st->spread_mm > o.max_spread * st->d_detach_mm)
            continue;
        out->site[kept++] = *st;
    }
    ns = kept;
    qsort(out->site, ns, sizeof *out->site, cmp_site);
    /* Number the sites in sorted order; rootid maps a cluster root to its site id. */
    for (size_t k = 0; k < ns; k++) {
        rootid[out->site[k].id] = (int)(k + 1);
        out->site[k].id = (int)(k + 1);
    }
    for (size_t j = 0; j < nmem; j++)
        out->track_site[c[mem[j].i].in] = rootid[mem[j].label];
    out->nsites = ns;
    goto done;

fail:
    sp_sites_free(out);
done:
    free(c);
    free(grid);
    free(mem);
    free(buf);
    free(rootid);
    return rc;
}

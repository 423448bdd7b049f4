/* Linker: detections of each frame, in frame order, to tracks.
 *
 * Per frame: every active track's constant-velocity Kalman filter (Kalman 1960) predicts its
 * position; detections inside a gate around the prediction (radius from the bubble's size, speed
 * and time unseen) are found through a uniform grid; each candidate pair costs its normalised
 * squared innovation plus weighted size and aspect changes; and the assignment that minimises the
 * total cost over the frame is solved exactly (Jonker & Volgenant 1987, sparse shortest augmenting
 * paths). Each track also owns a private "missed" column priced cost_max, so a pair is linked only
 * when that beats leaving both unlinked. Unlinked detections start tracks; unlinked tracks coast on
 * the prediction for up to max_gap frames. Only active tracks are held; ended ones are queued for
 * the caller. See docs/methods-track.md. */
#include "track/linker.h"
#include "track/assign.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

#define MAX_DETS 10000000 /* detections accepted in one frame */
#define MAX_COORD 1e7     /* |x|, |y| bound: far beyond any frame (SP_MAX_DIM), keeps grid maths sane */

typedef struct active {
    int64_t id;
    sp_kalman_cv k;
    double d, aspect; /* last measured clear of the border (the first measured until then) */
    int edge;         /* the last detection touched the border */
    int64_t last_frame;
    double last_t;
    int missed_run, missed_total;
    int nclean; /* detections clear of the border and of merges */
    int hidden; /* the current run of misses is spent inside a merged or cut detection */
    sp_track_point *pts;
    int n, cap;
} active;

struct sp_linker {
    sp_linker_opts o;
    int64_t next_id;
    int have_frame;
    int64_t last_frame;
    double last_t;

    active *act;
    int nact, capact;

    sp_track **ended; /* queue: [ehead, en) waiting */
    size_t ehead, en, ecap;

    /* Per-frame scratch, grown as needed and reused. */
    sp_assigner *as;
    int *start, *col, *r2c, *cellstart, *cellidx, *taken;
    double *cost, *gate;
    size_t cap_col, cap_cost, cap_start, cap_r2c, cap_gate, cap_cellidx, cap_taken, cap_cells;
};

void sp_linker_opts_default(sp_linker_opts *o)
{
    o->fps_hint = 0;
    o->max_gap = 3;
    o->gate_px_min = 3;
    o->gate_diam_frac = 1.0;
    o->gate_speed_frac = 0.5;
    o->birth_speed_px = 10;
    o->meas_sigma_px = 0.5;
    o->accel_sigma_px = 0.5;
    o->max_gap_hidden = 50;
    o->w_size = 10;
    o->w_aspect = 5;
    o->cost_max = 30;
    o->cost_hidden = 5;
    o->max_points = 100000;
}

void sp_track_free(sp_track *t)
{
    if (t) {
        free(t->pts);
        free(t);
    }
}

void sp_kalman_cv_predict(sp_kalman_cv *k, double dt, double q)
{
    /* x' = F x, P' = F P Fᵀ + Q with F = [[1, dt], [0, 1]]. */
    k->x += dt * k->vx;
    k->y += dt * k->vy;
    double p00 = k->p00 + 2 * dt * k->p01 + dt * dt * k->p11;
    double p01 = k->p01 + dt * k->p11;
    double dt2 = dt * dt;
    k->p00 = p00 + q * dt2 * dt2 / 4;
    k->p01 = p01 + q * dt2 * dt / 2;
    k->p11 = k->p11 + q * dt2;
}

void sp_kalman_cv_update(sp_kalman_cv *k, double zx, double zy, double r)
{
    /* H = [1, 0]: S = p00 + r, K = [p00, p01] / S, P' = (I − K H) P. */
    double s = k->p00 + r;
    double k0 = k->p00 / s, k1 = k->p01 / s;
    double ex = zx - k->x, ey = zy - k->y;
    k->x += k0 * ex;
    k->y += k0 * ey;
    k->vx += k1 * ex;
    k->vy += k1 * ey;
    double p00 = k->p00 - k0 * k->p00;
    double p01 = k->p01 - k0 * k->p01;
    double p11 = k->p11 - k1 * k->p01;
    k->p00 = p00;
    k->p01 = p01;
    k->p11 = p11;
}

static int bad_opt(double v, double lo, double hi)
{
    return !(v >= lo && v <= hi);
}

int sp_linker_new(sp_linker **out, const sp_linker_opts *o, sp_error *err)
{
    *out = NULL;
    sp_linker_opts d;
    sp_linker_opts_default(&d);
    if (!o)
        o = &d;
    if (bad_opt(o->fps_hint, 0, 1e9) || o->max_gap < 0 || o->max_gap > 1000000 ||
        bad_opt(o->gate_px_min, 0, 1e6) || bad_opt(o->gate_diam_frac, 0, 1e3) ||
        bad_opt(o->gate_speed_frac, 0, 1e3) || bad_opt(o->birth_speed_px, 0, 1e6) ||
        bad_opt(o->meas_sigma_px, 1e-6, 1e6) || bad_opt(o->accel_sigma_px, 0, 1e6) ||
        bad_opt(o->w_size, 0, 1e9) || bad_opt(o->w_aspect, 0, 1e9) || bad_opt(o->cost_max, 1e-9, 1e12) ||
        bad_opt(o->cost_hidden, 0, 1e12) || o->max_points < 1 || o->max_points > 100000000)
        return sp_error_set(err, SP_ERR_INPUT, "linker: an option is out of range");
    sp_linker *lk = calloc(1, sizeof *lk);
    if (!lk || !(lk->as = sp_assigner_new())) {
        free(lk);
        return sp_error_set(err, SP_ERR_INTERNAL, "linker: out of memory");
    }
    lk->o = *o;
    lk->next_id = 1;
    *out = lk;
    return SP_OK;
}

void sp_linker_free(sp_linker *lk)
{
    if (!lk)
        return;
    for (int i = 0; i < lk->nact; i++)
        free(lk->act[i].pts);
    free(lk->act);
    for (size_t i = lk->ehead; i < lk->en; i++)
        sp_track_free(lk->ended[i]);
    free(lk->ended);
    sp_assigner_free(lk->as);
    free(lk->start);
    free(lk->col);
    free(lk->r2c);
    free(lk->cellstart);
    free(lk->cellidx);
    free(lk->taken);
    free(lk->cost);
    free(lk->gate);
    free(lk);
}

int sp_linker_active(const sp_linker *lk)
{
    return lk->nact;
}

static int ensure(void **p, size_t *cap, size_t need, size_t size)
{
    if (need <= *cap)
        return 0;
    size_t c = *cap ? *cap : 64;
    while (c < need)
        c *= 2;
    void *q = realloc(*p, c * size);
    if (!q)
        return -1;
    *p = q;
    *cap = c;
    return 0;
}

/* Move active track i to the ended queue. */
static int end_track(sp_linker *lk, active *a)
{
    sp_track *t = malloc(sizeof *t);
    if (!t)
        return -1;
    if (lk->en == lk->ecap) {
        if (lk->ehead > 0) {
            memmove(lk->ended, lk->ended + lk->ehead, sizeof *lk->ended * (lk->en - lk->ehead));
            lk->en -= lk->ehead;
            lk->ehead = 0;
        }
        if (lk->en == lk->ecap) {
            size_t cap = lk->ecap ? 2 * lk->ecap : 64;
            sp_track **q = realloc(lk->ended, sizeof *q * cap);
            if (!q) {
                free(t);
                return -1;
            }
            lk->ended = q;
            lk->ecap = cap;
        }
    }
    t->id = a->id;
    t->n = a->n;
    t->missed = a->missed_total - a->missed_run; /* trailing misses are not gaps inside the track */
    t->pts = a->pts;
    a->pts = NULL;
    lk->ended[lk->en++] = t;
    return 0;
}

static int append_point(active *a, int64_t frame, double t_s, const sp_link_det *d)
{
    if (a->n == a->cap) {
        int cap = a->cap ? 2 * a->cap : 16;
        sp_track_point *q = realloc(a->pts, sizeof *q * (size_t)cap);
        if (!q)
            return -1;
        a->pts = q;
        a->cap = cap;
    }
    sp_track_point *p = &a->pts[a->n++];
    p->frame = frame;
    p->t_s = t_s;
    p->x = d->x;
    p->y = d->y;
    p->d_px = d->d_px;
    p->aspect = d->aspect;
    p->tilt_deg = d->tilt_deg;
    p->area_px = d->area_px;
    p->edge = d->edge;
    /* A bubble cut by the border shows only part of itself: keep the size and shape it had.
     * Until it is first seen whole, the largest part seen is the best guess of its size. */
    if (!d->edge || a->n == 1 || (a->nclean == 0 && d->d_px > a->d)) {
        a->d = d->d_px;
        a->aspect = d->aspect;
    }
    a->nclean += !d->edge;
    a->edge = d->edge;
    a->last_frame = frame;
    a->last_t = t_s;
    a->missed_run = 0;
    a->hidden = 0;
    return 0;
}

static int grow_pairs(sp_linker *lk, size_t need)
{
    return ensure((void **)&lk->col, &lk->cap_col, need, sizeof(int)) ||
           ensure((void **)&lk->cost, &lk->cap_cost, need, sizeof(double));
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Semi-major axis of a detection's ellipse, from its area and aspect (area = π a b, b = aspect a). */
static double semi_major(const sp_link_det *q)
{
    double asp = q->aspect > 0.05 && q->aspect <= 1 ? q->aspect : 1;
    return sqrt(fmax(q->area_px, 0) / (M_PI * asp));
}

/* Squared offset (px, py) from detection q's centre in units of its ellipse grown by `grow` px
 * on both axes: <= 1 inside. A merged outline is elongated, and a bubble hidden at one end of it
 * lies far beyond its equal-area disc but inside its ellipse. */
static double in_grown_ellipse(const sp_link_det *q, double px, double py, double grow)
{
    double a = semi_major(q), asp = q->aspect > 0.05 && q->aspect <= 1 ? q->aspect : 1;
    double b = a * asp;
    double t = q->tilt_deg * M_PI / 180, c = cos(t), sn = sin(t);
    double dx = px - q->x, dy = py - q->y;
    /* Tilt is counter-clockwise from +x with y up; rows run down, so flip y. */
    double u = dx * c - dy * sn, v = dx * sn + dy * c;
    double ga = a + grow, gb = b + grow;
    return u * u / (ga * ga) + v * v / (gb * gb);
}

/* The frame's detections binned on a uniform grid (see sp_linker_push). */
typedef struct grid {
    double minx, maxx, miny, maxy, cell;
    long gw, gh;
    const int *cellstart, *cellidx;
} grid;

/* The detection that may hide a track predicted at (px, py) with diameter dt: one holding more
 * than one bubble (flagged, or much larger than this one) or cut by the border, whose ellipse grown
 * by the track's radius holds the prediction (a small bubble behind a large one sits off the merged
 * centroid by up to the large one's semi-major axis). Nearest in ellipse units wins; -1: none.
 * Looked up through the grid within `reach` (the largest semi-major axis plus the radius). */
static int find_cover(const grid *g, const sp_link_det *d, double maxrad, double px, double py, double dt)
{
    int hj = -1;
    double he2 = 0, reach = maxrad + 0.5 * dt;
    if (!(px + reach >= g->minx && px - reach <= g->maxx && py + reach >= g->miny && py - reach <= g->maxy))
        return -1;
    long cx0 = (long)fmax(0, floor((px - reach - g->minx) / g->cell));
    long cx1 = (long)fmin((double)g->gw - 1, floor((px + reach - g->minx) / g->cell));
    long cy0 = (long)fmax(0, floor((py - reach - g->miny) / g->cell));
    long cy1 = (long)fmin((double)g->gh - 1, floor((py + reach - g->miny) / g->cell));
    for (long cy = cy0; cy <= cy1; cy++)
        for (long cx = cx0; cx <= cx1; cx++) {
            long c = cy * g->gw + cx;
            for (int k = g->cellstart[c]; k < g->cellstart[c + 1]; k++) {
                int jj = g->cellidx[k];
                if (!d[jj].edge && !(d[jj].d_px > 1.3 * dt))
                    continue;
                double e2 = in_grown_ellipse(&d[jj], px, py, 0.5 * dt);
                if (e2 <= 1 && (hj < 0 || e2 < he2)) {
                    hj = jj;
                    he2 = e2;
                }
            }
        }
    return hj;
}

/* Frames elapsed between two pushes, as the options define them. */
static double frames_between(const sp_linker *lk, int64_t f0, double t0, int64_t f1, double t1)
{
    if (lk->o.fps_hint > 0)
        return (t1 - t0) * lk->o.fps_hint;
    return (double)(f1 - f0);
}

int sp_linker_push(sp_linker *lk, int64_t frame, double t_s, const sp_link_det *d, int n, int64_t *ids,
                   sp_error *err)
{
    const sp_linker_opts *o = &lk->o;
    if (n < 0 || n > MAX_DETS || (n > 0 && (!d || !ids)))
        return sp_error_set(err, SP_ERR_INPUT, "linker: frame %lld: bad detection count %d", (long long)frame,
                            n);
    if (!isfinite(t_s))
        return sp_error_set(err, SP_ERR_INPUT, "linker: frame %lld: time is not finite", (long long)frame);
    if (lk->have_frame && frame <= lk->last_frame)
        return sp_error_set(err, SP_ERR_INPUT,
                            "linker: frame %lld comes after frame %lld (frames must increase)",
                            (long long)frame, (long long)lk->last_frame);
    double dt = lk->have_frame ? frames_between(lk, lk->last_frame, lk->last_t, frame, t_s) : 1;
    if (!(dt > 0) || !isfinite(dt))
        return sp_error_set(err, SP_ERR_INPUT, "linker: frame %lld: time %.9g does not advance past %.9g",
                            (long long)frame, t_s, lk->last_t);
    for (int j = 0; j < n; j++) {
        const sp_link_det *q = &d[j];
        if (!(fabs(q->x) <= MAX_COORD) || !(fabs(q->y) <= MAX_COORD) ||
            !(q->d_px >= 0 && q->d_px <= MAX_COORD) || !isfinite(q->aspect) || !isfinite(q->tilt_deg) ||
            !isfinite(q->area_px))
            return sp_error_set(err, SP_ERR_INPUT, "linker: frame %lld: detection %d has a bad value",
                                (long long)frame, j);
    }

    const double r_meas = o->meas_sigma_px * o->meas_sigma_px;
    const double q_acc = o->accel_sigma_px * o->accel_sigma_px;
    const int R = lk->nact;

    if (ensure((void **)&lk->gate, &lk->cap_gate, (size_t)R + 1, sizeof(double)) ||
        ensure((void **)&lk->start, &lk->cap_start, (size_t)R + 1, sizeof(int)) ||
        ensure((void **)&lk->r2c, &lk->cap_r2c, (size_t)R + 1, sizeof(int)) ||
        ensure((void **)&lk->cellidx, &lk->cap_cellidx, (size_t)n + 1, sizeof(int)) ||
        ensure((void **)&lk->taken, &lk->cap_taken, (size_t)n + 1, sizeof(int)))
        goto oom;

    /* Predict every active track to this frame and size its gate. */
    for (int i = 0; i < R; i++) {
        active *a = &lk->act[i];
        sp_kalman_cv_predict(&a->k, dt, q_acc);
        double unseen = frames_between(lk, a->last_frame, a->last_t, frame, t_s);
        double speed = hypot(a->k.vx, a->k.vy);
        double g = o->gate_px_min;
        if (o->gate_diam_frac * a->d > g)
            g = o->gate_diam_frac * a->d;
        if (o->gate_speed_frac * speed * unseen > g)
            g = o->gate_speed_frac * speed * unseen;
        /* Seen once: no velocity yet. A part entering through the border also grows, which
         * moves its centroid by up to its own size on top of the bubble's motion. */
        if (a->n == 1 && o->birth_speed_px * unseen + (a->edge ? a->d : 0) > g)
            g = o->birth_speed_px * unseen + (a->edge ? a->d : 0);
        lk->gate[i] = g;
    }

    /* Uniform grid over the detections; the cell is the median gate, enlarged until the grid
     * holds at most about 4 cells per detection, so building and querying it cost O(n log n). */
    double minx = 0, maxx = 0, miny = 0, maxy = 0, cell = 1, maxrad = 0;
    long gw = 1, gh = 1;
    if (R > 0 && n > 0) {
        minx = maxx = d[0].x;
        miny = maxy = d[0].y;
        for (int j = 0; j < n; j++)
            maxrad = fmax(maxrad, semi_major(&d[j]));
        for (int j = 1; j < n; j++) {
            minx = fmin(minx, d[j].x);
            maxx = fmax(maxx, d[j].x);
            miny = fmin(miny, d[j].y);
            maxy = fmax(maxy, d[j].y);
        }
        double *tmp = malloc(sizeof *tmp * (size_t)R);
        if (!tmp)
            goto oom;
        memcpy(tmp, lk->gate, sizeof *tmp * (size_t)R);
        qsort(tmp, (size_t)R, sizeof *tmp, cmp_double);
        cell = fmax(tmp[R / 2], 1.0);
        free(tmp);
        const double maxcells = 4.0 * n + 64;
        for (;;) {
            double w = floor((maxx - minx) / cell) + 1, h = floor((maxy - miny) / cell) + 1;
            if (w * h <= maxcells) {
                gw = (long)w;
                gh = (long)h;
                break;
            }
            cell *= sqrt(w * h / maxcells) * 1.01;
        }
        size_t ncell = (size_t)gw * (size_t)gh;
        if (ensure((void **)&lk->cellstart, &lk->cap_cells, ncell + 1, sizeof(int)))
            goto oom;
        memset(lk->cellstart, 0, sizeof(int) * (ncell + 1));
        for (int j = 0; j < n; j++) {
            long cx = (long)((d[j].x - minx) / cell), cy = (long)((d[j].y - miny) / cell);
            if (cx >= gw)
                cx = gw - 1;
            if (cy >= gh)
                cy = gh - 1;
            lk->taken[j] = (int)(cy * gw + cx); /* temporarily: the detection's cell */
            lk->cellstart[lk->taken[j] + 1]++;
        }
        for (size_t c = 0; c < ncell; c++)
            lk->cellstart[c + 1] += lk->cellstart[c];
        /* Stable counting sort: within a cell, detections stay in index order. */
        for (int j = 0; j < n; j++)
            lk->cellidx[lk->cellstart[lk->taken[j]]++] = j;
        for (size_t c = ncell; c > 0; c--)
            lk->cellstart[c] = lk->cellstart[c - 1];
        lk->cellstart[0] = 0;
    }

    const grid gr = {minx, maxx, miny, maxy, cell, gw, gh, lk->cellstart, lk->cellidx};

    /* Candidate pairs, row by row (rows = tracks in id order, columns = detections, then one
     * private "missed" column per track). */
    size_t np = 0;
    for (int i = 0; i < R; i++) {
        active *a = &lk->act[i];
        lk->start[i] = (int)np;
        /* A hidden track still inside a merge: see the missed column below. */
        int cover = a->hidden && n > 0 ? find_cover(&gr, d, maxrad, a->k.x, a->k.y, a->d) : -1;
        double cover_cost = o->cost_max;
        if (n > 0) {
            double g = lk->gate[i], px = a->k.x, py = a->k.y;
            if (px + g >= minx && px - g <= maxx && py + g >= miny && py - g <= maxy) {
                long cx0 = (long)fmax(0, floor((px - g - minx) / cell));
                long cx1 = (long)fmin((double)gw - 1, floor((px + g - minx) / cell));
                long cy0 = (long)fmax(0, floor((py - g - miny) / cell));
                long cy1 = (long)fmin((double)gh - 1, floor((py + g - miny) / cell));
                double s = a->k.p00 + r_meas; /* innovation variance per axis */
                for (long cy = cy0; cy <= cy1; cy++)
                    for (long cx = cx0; cx <= cx1; cx++) {
                        long c = cy * gw + cx;
                        for (int k = lk->cellstart[c]; k < lk->cellstart[c + 1]; k++) {
                            int j = lk->cellidx[k];
                            double dx = d[j].x - px, dy = d[j].y - py;
                            double e2 = dx * dx + dy * dy;
                            if (e2 > g * g)
                                continue;
                            /* Entering or leaving the view or a merge: the visible part's
                             * centroid is off the bubble's by up to a radius. */
                            double cst;
                            if (d[j].edge || a->edge) {
                                double slack = 0.25 * fmax(a->d, d[j].d_px);
                                cst = e2 / (s + slack * slack);
                            } else
                                cst = e2 / s;
                            /* A whole outline is compared with the bubble's size and shape once
                             * the track has seen it whole; a cut or merged one says little. */
                            if (!d[j].edge && a->nclean > 0) {
                                double dm = fmax(a->d, d[j].d_px);
                                double rs = dm > 0 ? (d[j].d_px - a->d) / dm : 0;
                                double da = d[j].aspect - a->aspect;
                                cst += o->w_size * rs * rs + o->w_aspect * da * da;
                            }
                            if (j == cover)
                                cover_cost = cst;
                            if (a->hidden && d[j].edge)
                                cst += o->cost_hidden;
                            if (!(cst < o->cost_max))
                                continue;
                            if (grow_pairs(lk, np + 2))
                                goto oom;
                            lk->col[np] = j;
                            lk->cost[np++] = cst;
                        }
                    }
            }
        }
        if (np + 1 > (size_t)0x7fffffff)
            return sp_error_set(err, SP_ERR_INTERNAL, "linker: frame %lld: too many candidate pairs",
                                (long long)frame);
        if (grow_pairs(lk, np + 2))
            goto oom;
        /* Hidden in a merge, a track may stay hidden (its missed column) or take a merged or
         * cut detection for the same price: what it would cost to take the merge, plus
         * cost_hidden. So it never pushes the merge's holder onto a stranger's piece to free the
         * merge (a missed column at cost_max would), nor trades the merge back and forth with the
         * holder, and it still takes up a whole outline that parts from the merge near it. */
        lk->col[np] = n + i;
        lk->cost[np++] = fmin(o->cost_max, cover_cost + o->cost_hidden);
    }
    lk->start[R] = (int)np;

    if (R > 0) {
        sp_assign_sparse m = {R, n + R, lk->start, lk->col, lk->cost};
        /* Always feasible (every row has its missed column), so a failure is internal. */
        if (sp_assign_sparse_solve(lk->as, &m, lk->r2c, NULL, NULL))
            return sp_error_set(err, SP_ERR_INTERNAL, "linker: frame %lld: assignment failed",
                                (long long)frame);
    }

    /* Apply: linked tracks take their detection; the others coast. */
    for (int j = 0; j < n; j++)
        lk->taken[j] = 0;
    for (int i = 0; i < R; i++) {
        active *a = &lk->act[i];
        int j = lk->r2c[i];
        if (j < n) {
            if (d[j].edge != a->edge && a->n > 1) {
                /* The outline starts or stops being cut or merged: the centroid jumps by the
                 * offset between the visible part and the bubble, which is not motion. Take
                 * the position, keep the velocity but doubt it (the cut part's centroid moves at
                 * another speed than the bubble). */
                double slack = 0.25 * fmax(a->d, d[j].d_px);
                a->k.x = d[j].x;
                a->k.y = d[j].y;
                a->k.p00 = r_meas;
                a->k.p01 = 0;
                a->k.p11 = fmax(a->k.p11, slack * slack);
            } else
                sp_kalman_cv_update(&a->k, d[j].x, d[j].y, r_meas);
            if (append_point(a, frame, t_s, &d[j]))
                goto oom;
            ids[j] = a->id;
            lk->taken[j] = 1;
        } else {
            a->missed_run++;
            a->missed_total++;
            /* Hidden, not gone: the prediction lies inside a detection that holds more than one
             * bubble (flagged, or much larger than this one) or is cut by the border (two bubbles merged in
             * projection, one passing behind another). Such a track may coast longer and take up its bubble
             * when they part. */
            a->hidden = 0;
            int hj = n > 0 ? find_cover(&gr, d, maxrad, a->k.x, a->k.y, a->d) : -1;
            if (hj >= 0) {
                /* Share the merged detection: the hidden bubble moves with it, somewhere inside
                 * it, so its centroid is a loose measurement of the bubble (variance of half the
                 * merged radius, squared). Keeps the coasting track with its bubble through
                 * zigzags instead of drifting on a straight line. No point is recorded. */
                double rr = sqrt(d[hj].area_px / M_PI);
                a->hidden = 1;
                sp_kalman_cv_update(&a->k, d[hj].x, d[hj].y, r_meas + rr * rr);
            }
        }
    }

    /* End tracks past the gap or at the length cap, keeping the rest in id order. */
    int w = 0;
    for (int i = 0; i < R; i++) {
        active *a = &lk->act[i];
        int gap = a->hidden ? o->max_gap_hidden : o->max_gap;
        if (a->missed_run > gap || a->n >= o->max_points) {
            if (end_track(lk, a))
                goto oom;
            continue;
        }
        if (w != i)
            lk->act[w] = *a;
        w++;
    }
    lk->nact = w;

    /* Births, in detection order. */
    for (int j = 0; j < n; j++) {
        if (lk->taken[j])
            continue;
        if (lk->nact == lk->capact) {
            int cap = lk->capact ? 2 * lk->capact : 64;
            active *q = realloc(lk->act, sizeof *q * (size_t)cap);
            if (!q)
                goto oom;
            lk->act = q;
            lk->capact = cap;
        }
        active *a = &lk->act[lk->nact];
        memset(a, 0, sizeof *a);
        a->id = lk->next_id;
        /* Unknown velocity at birth: zero mean, spread half the largest step expected. */
        double g = fmax(o->birth_speed_px, fmax(o->gate_px_min, o->gate_diam_frac * d[j].d_px));
        a->k = (sp_kalman_cv){d[j].x, d[j].y, 0, 0, r_meas, 0, g * g / 4};
        if (append_point(a, frame, t_s, &d[j])) {
            free(a->pts);
            goto oom;
        }
        lk->nact++;
        lk->next_id++;
        ids[j] = a->id;
        if (a->n >= o->max_points) { /* max_points == 1: a track per detection */
            if (end_track(lk, a))
                goto oom;
            lk->nact--;
        }
    }

    lk->have_frame = 1;
    lk->last_frame = frame;
    lk->last_t = t_s;
    return SP_OK;
oom:
    return sp_error_set(err, SP_ERR_INTERNAL, "linker: frame %lld: out of memory", (long long)frame);
}

int sp_linker_pop_ended(sp_linker *lk, sp_track **out)
{
    *out = NULL;
    if (lk->ehead == lk->en) {
        lk->ehead = lk->en = 0;
        return 0;
    }
    *out = lk->ended[lk->ehead++];
    return 1;
}

int sp_linker_finish(sp_linker *lk)
{
    int w = 0;
    for (int i = 0; i < lk->nact; i++) {
        if (end_track(lk, &lk->act[i])) {
            lk->act[w++] = lk->act[i]; /* keep what could not be queued */
            continue;
        }
    }
    lk->nact = w;
    return w ? SP_ERR_INTERNAL : 0;
}

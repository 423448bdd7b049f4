#include "calib/lattice.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* ---------------------------------------------------------------- neighbour search */

typedef struct nbr {
    const sp_dot *d;
    int n;
    int *ord; /* dot indices sorted by x */
} nbr;

typedef struct xkey {
    double x;
    int k;
} xkey;

static int cmp_xkey(const void *a, const void *b)
{
    const xkey *p = a, *q = b;
    if (p->x != q->x)
        return (p->x > q->x) - (p->x < q->x);
    return (p->k > q->k) - (p->k < q->k);
}

static int nbr_init(nbr *s, const sp_dot *d, int n)
{
    s->d = d;
    s->n = n;
    s->ord = malloc(sizeof *s->ord * (size_t)n);
    xkey *t = malloc(sizeof *t * (size_t)n);
    if (!s->ord || !t) {
        free(t);
        return -1;
    }
    for (int k = 0; k < n; k++)
        t[k].x = d[k].x, t[k].k = k;
    qsort(t, (size_t)n, sizeof *t, cmp_xkey);
    for (int k = 0; k < n; k++)
        s->ord[k] = t[k].k;
    free(t);
    return 0;
}

/* First position in ord with x >= x0. */
static int nbr_lower(const nbr *s, double x0)
{
    int lo = 0, hi = s->n;
    while (lo < hi) {
        int mid = (lo + hi) / 2;
        if (s->d[s->ord[mid]].x < x0)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo;
}

/* Nearest dot to (x, y) other than `skip`; returns its index (or -1) and the distance in *dist. */
static int nbr_nearest(const nbr *s, double x, double y, int skip, double *dist)
{
    int best = -1;
    double bd2 = INFINITY;
    int p = nbr_lower(s, x);
    for (int k = p; k < s->n; k++) {
        const sp_dot *q = &s->d[s->ord[k]];
        double dx = q->x - x;
        if (dx * dx >= bd2)
            break;
        double d2 = dx * dx + (q->y - y) * (q->y - y);
        if (s->ord[k] != skip && d2 < bd2) {
            bd2 = d2;
            best = s->ord[k];
        }
    }
    for (int k = p - 1; k >= 0; k--) {
        const sp_dot *q = &s->d[s->ord[k]];
        double dx = q->x - x;
        if (dx * dx >= bd2)
            break;
        double d2 = dx * dx + (q->y - y) * (q->y - y);
        if (s->ord[k] != skip && d2 < bd2) {
            bd2 = d2;
            best = s->ord[k];
        }
    }
    *dist = sqrt(bd2);
    return best;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* ---------------------------------------------------------------- indexing */

int sp_lattice_index(sp_dot *dots, int n, int min_dots, int *n_indexed, const char *what, sp_error *err)
{
    int rc = SP_OK;
    nbr s = {0};
    double *nn = NULL, *lv = NULL;
    int *queue = NULL;
    *n_indexed = 0;
    if (min_dots < 9)
        min_dots = 9;
    if (n < min_dots)
        return sp_error_set(err, SP_ERR_INPUT, "%s: too few dots (%d found, at least %d needed)", what, n,
                            min_dots);
    nn = malloc(sizeof *nn * (size_t)n);
    lv = malloc(sizeof *lv * 4 * (size_t)n);
    queue = malloc(sizeof *queue * (size_t)n);
    if (!nn || !lv || !queue || nbr_init(&s, dots, n)) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", what);
        goto fail;
    }
    for (int k = 0; k < n; k++) {
        nbr_nearest(&s, dots[k].x, dots[k].y, k, &nn[k]);
        dots[k].indexed = 0;
    }
    qsort(nn, (size_t)n, sizeof *nn, cmp_double);
    double d0 = nn[n / 2];
    if (!(d0 > 0)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: dots coincide; not a grid", what);
        goto fail;
    }

    /* Lattice orientation modulo 90°: the mean of exp(4iθ) over nearest-neighbour vectors, whose
     * magnitude (0..1) also says how square the neighbourhoods are. */
    double c4 = 0, s4 = 0;
    int nv = 0;
    for (int k = 0; k < n; k++) {
        int p = nbr_lower(&s, dots[k].x - 1.25 * d0);
        for (int m = p; m < n && dots[s.ord[m]].x <= dots[k].x + 1.25 * d0; m++) {
            int q = s.ord[m];
            double dx = dots[q].x - dots[k].x, dy = dots[q].y - dots[k].y;
            if (q == k || dx * dx + dy * dy > 1.5625 * d0 * d0)
                continue;
            double th = atan2(-dy, dx);
            c4 += cos(4 * th);
            s4 += sin(4 * th);
            nv++;
        }
    }
    if (nv == 0 || hypot(c4, s4) < 0.5 * nv) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: the blobs do not form a square grid", what);
        goto fail;
    }
    double phi = atan2(s4, c4) / 4;                                       /* (-45°, 45°] */
    double e1[2] = {cos(phi), -sin(phi)}, e2[2] = {-sin(phi), -cos(phi)}; /* pixels, y down */
    double u[2] = {0}, v[2] = {0};
    int nu = 0, nvv = 0;
    double cosmax = cos(20 * M_PI / 180);
    for (int k = 0; k < n; k++) {
        int p = nbr_lower(&s, dots[k].x - 1.25 * d0);
        for (int m = p; m < n && dots[s.ord[m]].x <= dots[k].x + 1.25 * d0; m++) {
            int q = s.ord[m];
            double dx = dots[q].x - dots[k].x, dy = dots[q].y - dots[k].y, len = hypot(dx, dy);
            if (q == k || len > 1.25 * d0)
                continue;
            double a = (dx * e1[0] + dy * e1[1]) / len, b = (dx * e2[0] + dy * e2[1]) / len;
            if (fabs(a) > cosmax) {
                u[0] += a > 0 ? dx : -dx;
                u[1] += a > 0 ? dy : -dy;
                nu++;
            } else if (fabs(b) > cosmax) {
                v[0] += b > 0 ? dx : -dx;
                v[1] += b > 0 ? dy : -dy;
                nvv++;
            }
        }
    }
    if (nu == 0 || nvv == 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: the blobs do not form a square grid", what);
        goto fail;
    }
    u[0] /= nu, u[1] /= nu, v[0] /= nvv, v[1] /= nvv;

    /* Seed: the dot nearest the mean position. */
    double mx = 0, my = 0;
    for (int k = 0; k < n; k++)
        mx += dots[k].x, my += dots[k].y;
    mx /= n, my /= n;
    double dd;
    int seed = nbr_nearest(&s, mx, my, -1, &dd);
    /* Grow along the lattice; each dot carries the local lattice vectors measured on the way in, so
     * mild perspective and distortion are followed. */
    int head = 0, tail = 0, conflicts = 0;
    dots[seed].i = dots[seed].j = 0;
    dots[seed].indexed = 1;
    memcpy(&lv[4 * seed], u, sizeof u);
    memcpy(&lv[4 * seed + 2], v, sizeof v);
    queue[tail++] = seed;
    while (head < tail) {
        int k = queue[head++];
        for (int dir = 0; dir < 4; dir++) {
            const double *st = &lv[4 * k + (dir < 2 ? 0 : 2)];
            double sg = dir % 2 ? -1.0 : 1.0;
            double px = dots[k].x + sg * st[0], py = dots[k].y + sg * st[1];
            int q = nbr_nearest(&s, px, py, k, &dd);
            if (q < 0 || dd > 0.3 * hypot(st[0], st[1]))
                continue;
            int qi = dots[k].i + (dir < 2 ? (int)sg : 0), qj = dots[k].j + (dir < 2 ? 0 : (int)sg);
            if (dots[q].indexed) {
                if (dots[q].i != qi || dots[q].j != qj)
                    conflicts++;
                continue;
            }
            dots[q].i = qi;
            dots[q].j = qj;
            dots[q].indexed = 1;
            memcpy(&lv[4 * q], &lv[4 * k], 4 * sizeof *lv);
            double *meas = &lv[4 * q + (dir < 2 ? 0 : 2)];
            meas[0] = sg * (dots[q].x - dots[k].x);
            meas[1] = sg * (dots[q].y - dots[k].y);
            queue[tail++] = q;
        }
    }
    int ni = tail, i0 = 0, i1 = 0, j0 = 0, j1 = 0;
    for (int k = 0; k < n; k++)
        if (dots[k].indexed) {
            i0 = dots[k].i < i0 ? dots[k].i : i0;
            i1 = dots[k].i > i1 ? dots[k].i : i1;
            j0 = dots[k].j < j0 ? dots[k].j : j0;
            j1 = dots[k].j > j1 ? dots[k].j : j1;
        }
    if (conflicts > 2 + ni / 20) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: the dots do not form a consistent grid (%d contradictions)",
                          what, conflicts);
        goto fail;
    }
    if (ni < min_dots || i1 - i0 < 2 || j1 - j0 < 2) {
        rc = sp_error_set(err, SP_ERR_INPUT,
                          "%s: too few dots on one regular grid (%d of %d, spanning %dx%d; need %d over 3x3)",
                          what, ni, n, i1 - i0 + 1, j1 - j0 + 1, min_dots);
        goto fail;
    }
    /* Indices from 0 so the grid origin is the lower-left dot found. */
    for (int k = 0; k < n; k++)
        if (dots[k].indexed)
            dots[k].i -= i0, dots[k].j -= j0;
    *n_indexed = ni;
fail:
    if (rc)
        for (int k = 0; k < n; k++)
            dots[k].indexed = 0;
    free(s.ord);
    free(nn);
    free(lv);
    free(queue);
    return rc;
}

/* ---------------------------------------------------------------- radial distortion */

void sp_radial_apply(const sp_radial *d, double xu, double yu, double *xd, double *yd)
{
    if (d->terms <= 0) {
        *xd = xu, *yd = yu;
        return;
    }
    double dx = xu - d->cx, dy = yu - d->cy, r2 = (dx * dx + dy * dy) / (d->norm_px * d->norm_px);
    double f = 1 + d->k1 * r2 + d->k2 * r2 * r2;
    *xd = d->cx + dx * f;
    *yd = d->cy + dy * f;
}

int sp_radial_invert(const sp_radial *d, double xd, double yd, double *xu, double *yu)
{
    if (d->terms <= 0) {
        *xu = xd, *yu = yd;
        return 0;
    }
    double dx = xd - d->cx, dy = yd - d->cy, rd = hypot(dx, dy) / d->norm_px;
    if (rd == 0) {
        *xu = xd, *yu = yd;
        return 0;
    }
    /* Solve ru·(1 + k1 ru² + k2 ru⁴) = rd for ru near rd. */
    double ru = rd;
    for (int it = 0; it < 50; it++) {
        double r2 = ru * ru, g = ru * (1 + d->k1 * r2 + d->k2 * r2 * r2) - rd;
        double dg = 1 + 3 * d->k1 * r2 + 5 * d->k2 * r2 * r2;
        if (!(fabs(dg) > 1e-12))
            return -1;
        double step = g / dg;
        ru -= step;
        if (fabs(step) < 1e-15)
            break;
    }
    if (!(ru > 0) || !isfinite(ru))
        return -1;
    *xu = d->cx + dx * ru / rd;
    *yu = d->cy + dy * ru / rd;
    return 0;
}

/* ---------------------------------------------------------------- small dense algebra */

/* Solve a·x = b (m×m, row-major; a and b overwritten) by Gaussian elimination with partial
 * pivoting. Returns 0, or -1 when singular. */
static int gauss_solve(double *a, double *b, int m)
{
    for (int c = 0; c < m; c++) {
        int p = c;
        for (int r = c + 1; r < m; r++)
            if (fabs(a[r * m + c]) > fabs(a[p * m + c]))
                p = r;
        if (!(fabs(a[p * m + c]) > 1e-300))
            return -1;
        if (p != c) {
            for (int k = 0; k < m; k++) {
                double t = a[c * m + k];
                a[c * m + k] = a[p * m + k];
                a[p * m + k] = t;
            }
            double t = b[c];
            b[c] = b[p];
            b[p] = t;
        }
        for (int r = c + 1; r < m; r++) {
            double f = a[r * m + c] / a[c * m + c];
            for (int k = c; k < m; k++)
                a[r * m + k] -= f * a[c * m + k];
            b[r] -= f * b[c];
        }
    }
    for (int r = m - 1; r >= 0; r--) {
        double s = b[r];
        for (int k = r + 1; k < m; k++)
            s -= a[r * m + k] * b[k];
        b[r] = s / a[r * m + r];
    }
    return 0;
}

/* Eigenvector of the smallest eigenvalue of a symmetric 9×9 matrix (cyclic Jacobi rotations). */
static void smallest_eigvec9(double a[81], double vec[9])
{
    double v[81] = {0};
    for (int k = 0; k < 9; k++)
        v[k * 9 + k] = 1;
    for (int sweep = 0; sweep < 60; sweep++) {
        double off = 0;
        for (int p = 0; p < 9; p++)
            for (int q = p + 1; q < 9; q++)
                off += a[p * 9 + q] * a[p * 9 + q];
        if (off < 1e-30)
            break;
        for (int p = 0; p < 9; p++)
            for (int q = p + 1; q < 9; q++) {
                if (fabs(a[p * 9 + q]) < 1e-300)
                    continue;
                double th = 0.5 * (a[q * 9 + q] - a[p * 9 + p]) / a[p * 9 + q];
                double t = (th >= 0 ? 1 : -1) / (fabs(th) + sqrt(th * th + 1));
                double c = 1 / sqrt(t * t + 1), s = t * c;
                for (int k = 0; k < 9; k++) {
                    double akp = a[k * 9 + p], akq = a[k * 9 + q];
                    a[k * 9 + p] = c * akp - s * akq;
                    a[k * 9 + q] = s * akp + c * akq;
                }
                for (int k = 0; k < 9; k++) {
                    double apk = a[p * 9 + k], aqk = a[q * 9 + k];
                    a[p * 9 + k] = c * apk - s * aqk;
                    a[q * 9 + k] = s * apk + c * aqk;
                }
                for (int k = 0; k < 9; k++) {
                    double vkp = v[k * 9 + p], vkq = v[k * 9 + q];
                    v[k * 9 + p] = c * vkp - s * vkq;
                    v[k * 9 + q] = s * vkp + c * vkq;
                }
            }
    }
    int best = 0;
    for (int k = 1; k < 9; k++)
        if (a[k * 9 + k] < a[best * 9 + best])
            best = k;
    for (int k = 0; k < 9; k++)
        vec[k] = v[k * 9 + best];
}

static void mat3_mul(const double a[9], const double b[9], double c[9])
{
    for (int r = 0; r < 3; r++)
        for (int k = 0; k < 3; k++)
            c[r * 3 + k] = a[r * 3] * b[k] + a[r * 3 + 1] * b[3 + k] + a[r * 3 + 2] * b[6 + k];
}

static int mat3_inv(const double a[9], double b[9])
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

/* ---------------------------------------------------------------- the fit */

/* The model: normalised grid point -> Hn -> normalised image point -> pixels -> radial distortion.
 * Parameters p[0..7] are Hn with Hn[8] = 1, p[8], p[9] the radial coefficients. Working in
 * Hartley's normalised coordinates keeps the normal equations well conditioned. */
typedef struct model {
    double tg[3], ti[3]; /* normalisations: (x − t[0])·t[2], (y − t[1])·t[2] */
    sp_radial rad;
    int np;
} model;

static void model_H(const model *m, const double *p, double H[9])
{
    double Hn[9], Tg[9] = {m->tg[2], 0, -m->tg[2] * m->tg[0], 0, m->tg[2], -m->tg[2] * m->tg[1], 0, 0, 1};
    double Tiinv[9] = {1 / m->ti[2], 0, m->ti[0], 0, 1 / m->ti[2], m->ti[1], 0, 0, 1}, t[9];
    memcpy(Hn, p, 8 * sizeof *p);
    Hn[8] = 1;
    mat3_mul(Hn, Tg, t);
    mat3_mul(Tiinv, t, H);
    for (int k = 0; k < 9; k++)
        H[k] /= H[8] != 0 ? H[8] : 1;
}

static void model_eval(const model *m, const double *p, double X, double Y, double *x, double *y)
{
    double xn = (X - m->tg[0]) * m->tg[2], yn = (Y - m->tg[1]) * m->tg[2];
    double wz = p[6] * xn + p[7] * yn + 1;
    double u = (p[0] * xn + p[1] * yn + p[2]) / wz, v = (p[3] * xn + p[4] * yn + p[5]) / wz;
    sp_radial r = m->rad;
    r.k1 = m->np > 8 ? p[8] : 0;
    r.k2 = m->np > 9 ? p[9] : 0;
    r.terms = m->np - 8;
    sp_radial_apply(&r, u / m->ti[2] + m->ti[0], v / m->ti[2] + m->ti[1], x, y);
}

static double model_rss(const model *m, const double *p, const double *g, const double *o, int n)
{
    double s = 0;
    for (int k = 0; k < n; k++) {
        double x, y;
        model_eval(m, p, g[2 * k], g[2 * k + 1], &x, &y);
        s += (o[2 * k] - x) * (o[2 * k] - x) + (o[2 * k + 1] - y) * (o[2 * k + 1] - y);
    }
    return s;
}

/* Levenberg–Marquardt on the geometric (pixel) reprojection error. On return cov holds
 * (JᵀJ)⁻¹ (np×np) at the minimum. Returns the residual sum of squares, or -1 on failure. */
static double model_fit(const model *m, double *p, const double *g, const double *o, int n, double *cov,
                        double *jac)
{
    int np = m->np;
    double lambda = 1e-3, rss = model_rss(m, p, g, o, n);
    double A[100], b[10], At[100], bt[10], pt[10];
    for (int it = 0; it < 200; it++) {
        /* Jacobian by central differences (the model is smooth; steps are relative). */
        for (int c = 0; c < np; c++) {
            double h = 1e-6 * fmax(1e-3, fabs(p[c]));
            double keep = p[c];
            for (int k = 0; k < n; k++) {
                double x1, y1, x2, y2;
                p[c] = keep + h;
                model_eval(m, p, g[2 * k], g[2 * k + 1], &x1, &y1);
                p[c] = keep - h;
                model_eval(m, p, g[2 * k], g[2 * k + 1], &x2, &y2);
                jac[(size_t)(2 * k) * np + c] = (x1 - x2) / (2 * h);
                jac[(size_t)(2 * k + 1) * np + c] = (y1 - y2) / (2 * h);
            }
            p[c] = keep;
        }
        memset(A, 0, sizeof A);
        memset(b, 0, sizeof b);
        for (int k = 0; k < n; k++) {
            double x, y;
            model_eval(m, p, g[2 * k], g[2 * k + 1], &x, &y);
            double r[2] = {o[2 * k] - x, o[2 * k + 1] - y};
            for (int e = 0; e < 2; e++) {
                const double *J = &jac[(size_t)(2 * k + e) * np];
                for (int a = 0; a < np; a++) {
                    b[a] += J[a] * r[e];
                    for (int c = 0; c < np; c++)
                        A[a * np + c] += J[a] * J[c];
                }
            }
        }
        int improved = 0;
        for (int tries = 0; tries < 20 && !improved; tries++) {
            memcpy(At, A, sizeof A);
            memcpy(bt, b, sizeof b);
            for (int a = 0; a < np; a++)
                At[a * np + a] += lambda * A[a * np + a];
            if (gauss_solve(At, bt, np)) {
                lambda *= 10;
                continue;
            }
            for (int a = 0; a < np; a++)
                pt[a] = p[a] + bt[a];
            double r2 = model_rss(m, pt, g, o, n);
            if (r2 <= rss) {
                double gain = rss - r2;
                memcpy(p, pt, np * sizeof *p);
                rss = r2;
                lambda = fmax(lambda * 0.1, 1e-12);
                improved = 1;
                if (gain <= 1e-14 * (rss + 1e-300) || gain < 1e-24)
                    it = 1000; /* converged */
            } else {
                lambda *= 10;
            }
        }
        if (!improved)
            break;
    }
    /* Covariance factor at the minimum (no damping). */
    for (int c = 0; c < np; c++) {
        double e[10] = {0};
        memcpy(At, A, sizeof A);
        e[c] = 1;
        if (gauss_solve(At, e, np))
            return -1;
        for (int a = 0; a < np; a++)
            cov[a * np + c] = e[a];
    }
    return rss;
}

/* Scale and rotation at the image centre from a homography (distortion leaves the centre's
 * neighbourhood unscaled: its derivative there is the identity). */
static int local_scale(const double H[9], double x, double y, double *mmpp, double *rot_deg, double *sx,
                       double *sy)
{
    double Hi[9];
    if (mat3_inv(H, Hi))
        return -1;
    double wz = Hi[6] * x + Hi[7] * y + Hi[8];
    double X = (Hi[0] * x + Hi[1] * y + Hi[2]) / wz, Y = (Hi[3] * x + Hi[4] * y + Hi[5]) / wz;
    double w2 = H[6] * X + H[7] * Y + H[8];
    double J[4] = {(H[0] - x * H[6]) / w2, (H[1] - x * H[7]) / w2, (H[3] - y * H[6]) / w2,
                   (H[4] - y * H[7]) / w2};
    double det = fabs(J[0] * J[3] - J[1] * J[2]);
    if (!(det > 0))
        return -1;
    *mmpp = 1 / sqrt(det);
    if (rot_deg)
        *rot_deg = atan2(-J[2], J[0]) * 180 / M_PI;
    if (sx)
        *sx = 1 / hypot(J[0], J[2]);
    if (sy)
        *sy = 1 / hypot(J[1], J[3]);
    return 0;
}

static int derived(const model *m, const double *p, double cx, double cy, double *mmpp, double *rot)
{
    double H[9];
    model_H(m, p, H);
    return local_scale(H, cx, cy, mmpp, rot, NULL, NULL);
}

/* 0.1% point of F(1, nu), within 3% above the tabulated value for nu >= 10 (10.83 as nu -> inf;
 * 16.59 at 15, 13.29 at 30, 11.50 at 100): conservative, so a term is added only on clear
 * evidence. */
static double f_crit_001(int nu)
{
    return 10.83 + 85.0 / (nu > 1 ? nu : 1);
}

void sp_grid_fit_project(const sp_grid_fit *f, double X, double Y, double *x, double *y)
{
    const double *H = f->H;
    double wz = H[6] * X + H[7] * Y + H[8];
    sp_radial_apply(&f->radial, (H[0] * X + H[1] * Y + H[2]) / wz, (H[3] * X + H[4] * Y + H[5]) / wz, x, y);
}

int sp_grid_fit_run(const sp_dot *dots, int n, double pitch_mm, int w, int h, int max_terms, sp_grid_fit *out,
                    const char *what, sp_error *err)
{
    int rc = SP_OK, N = 0;
    double *g = NULL, *o = NULL, *jac = NULL, *rdiam = NULL;
    memset(out, 0, sizeof *out);
    if (!(pitch_mm > 0) || !isfinite(pitch_mm))
        return sp_error_set(err, SP_ERR_INPUT, "%s: bad pitch %g mm", what, pitch_mm);
    for (int k = 0; k < n; k++)
        N += dots[k].indexed;
    if (N < 6)
        return sp_error_set(err, SP_ERR_INPUT, "%s: too few indexed dots (%d) for a homography", what, N);
    g = malloc(sizeof *g * 2 * (size_t)N);
    o = malloc(sizeof *o * 2 * (size_t)N);
    jac = malloc(sizeof *jac * 2 * (size_t)N * 10);
    rdiam = malloc(sizeof *rdiam * (size_t)N);
    if (!g || !o || !jac || !rdiam) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", what);
        goto fail;
    }
    model m = {0};
    double cgx = 0, cgy = 0, cix = 0, ciy = 0;
    for (int k = 0, q = 0; k < n; k++)
        if (dots[k].indexed) {
            g[2 * q] = dots[k].i * pitch_mm;
            g[2 * q + 1] = dots[k].j * pitch_mm;
            o[2 * q] = dots[k].x;
            o[2 * q + 1] = dots[k].y;
            rdiam[q] = dots[k].diam_px;
            cgx += g[2 * q], cgy += g[2 * q + 1], cix += o[2 * q], ciy += o[2 * q + 1];
            q++;
        }
    cgx /= N, cgy /= N, cix /= N, ciy /= N;
    double sg = 0, si = 0;
    for (int k = 0; k < N; k++) {
        sg += hypot(g[2 * k] - cgx, g[2 * k + 1] - cgy);
        si += hypot(o[2 * k] - cix, o[2 * k + 1] - ciy);
    }
    /* Hartley (1997) normalisation: centroid at the origin, mean distance sqrt(2). */
    m.tg[0] = cgx, m.tg[1] = cgy, m.tg[2] = sqrt(2.0) * N / sg;
    m.ti[0] = cix, m.ti[1] = ciy, m.ti[2] = sqrt(2.0) * N / si;
    m.rad.cx = 0.5 * (w - 1);
    m.rad.cy = 0.5 * (h - 1);
    m.rad.norm_px = 0.5 * hypot(w - 1, h - 1);

    /* DLT (Hartley & Zisserman 2003, alg. 4.2): the null vector of Σ AᵢᵀAᵢ. */
    double M[81] = {0}, hv[9];
    for (int k = 0; k < N; k++) {
        double X = (g[2 * k] - m.tg[0]) * m.tg[2], Y = (g[2 * k + 1] - m.tg[1]) * m.tg[2];
        double x = (o[2 * k] - m.ti[0]) * m.ti[2], y = (o[2 * k + 1] - m.ti[1]) * m.ti[2];
        double r1[9] = {-X, -Y, -1, 0, 0, 0, x * X, x * Y, x}, r2[9] = {0, 0, 0, -X, -Y, -1, y * X, y * Y, y};
        for (int a = 0; a < 9; a++)
            for (int c = 0; c < 9; c++)
                M[a * 9 + c] += r1[a] * r1[c] + r2[a] * r2[c];
    }
    smallest_eigvec9(M, hv);
    if (!(fabs(hv[8]) > 1e-9)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: the dot positions do not determine a homography", what);
        goto fail;
    }
    double p0[10] = {0}, p[10], best[10], cov[100], bestcov[100], bestrss = 0;
    for (int k = 0; k < 8; k++)
        p0[k] = hv[k] / hv[8];

    int lim = max_terms < 0 ? 2 : max_terms > 2 ? 2 : max_terms;
    int nu = 2 * N - 8, bestnp = 8;
    /* Two passes: the second refits after removing each dot's perspective bias (below). */
    for (int pass = 0; pass < 2; pass++) {
        memcpy(p, p0, sizeof p);
        m.np = 8;
        double rss = model_fit(&m, p, g, o, N, cov, jac);
        if (rss < 0) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: the homography fit is singular", what);
            goto fail;
        }
        bestnp = 8;
        nu = 2 * N - 8;
        memcpy(best, p, sizeof p);
        memcpy(bestcov, cov, sizeof cov);
        bestrss = rss;
        for (int t = 1; t <= lim; t++) {
            if (2 * N - 8 - t < 2)
                break;
            m.np = 8 + t;
            p[7 + t] = 0;
            double r2 = model_fit(&m, p, g, o, N, cov, jac);
            if (r2 < 0)
                break;
            double F = r2 > 0 ? (bestrss - r2) / (r2 / (2 * N - 8 - t)) : INFINITY;
            out->f_stat[t - 1] = F;
            int accept;
            if (max_terms >= 0) {
                accept = 1; /* the caller asked for this many terms */
            } else {
                /* Keep a term only if it is significant (F-test, 0.1%) and moves the image corner
                 * by at least 0.05 px: below that it changes no measurement. */
                accept = F > f_crit_001(2 * N - 8 - t) && fabs(p[7 + t]) * m.rad.norm_px >= 0.05;
            }
            if (!accept)
                break;
            bestnp = m.np;
            memcpy(best, p, sizeof p);
            memcpy(bestcov, cov, sizeof cov);
            bestrss = r2;
            nu = 2 * N - bestnp;
        }
        m.np = bestnp;
        memcpy(p, best, sizeof p);
        if (pass == 1)
            break;
        /* The centroid of a projected disc is not the projection of its centre (Heikkilä 2000,
         * IEEE TPAMI 22:1066): perspective and distortion pull it towards the side seen larger,
         * by about r²·(gradient of the scale). Predict each dot's shift from the first fit (the
         * area centroid of its mapped outline, 64 vertices, radius from its blob size) and take
         * it off the observations. */
        double Hs[9];
        model_H(&m, p, Hs);
        sp_grid_fit tmpf;
        memset(&tmpf, 0, sizeof tmpf);
        memcpy(tmpf.H, Hs, sizeof Hs);
        tmpf.radial = m.rad;
        tmpf.radial.terms = bestnp - 8;
        tmpf.radial.k1 = bestnp > 8 ? p[8] : 0;
        tmpf.radial.k2 = bestnp > 9 ? p[9] : 0;
        double s0;
        if (local_scale(Hs, m.rad.cx, m.rad.cy, &s0, NULL, NULL, NULL))
            break;
        /* All dots share one physical size: the median blob diameter at the centre's scale. */
        qsort(rdiam, (size_t)N, sizeof *rdiam, cmp_double);
        double rmm = 0.5 * rdiam[N / 2] * s0;
        for (int k = 0; k < N; k++) {
            double r = rmm, ax = 0, ay = 0, aa = 0, px0, py0, cx0, cy0;
            sp_grid_fit_project(&tmpf, g[2 * k], g[2 * k + 1], &cx0, &cy0);
            sp_grid_fit_project(&tmpf, g[2 * k] + r, g[2 * k + 1], &px0, &py0);
            double qx = px0, qy = py0;
            for (int v = 1; v <= 64; v++) {
                double a = 2 * M_PI * v / 64, x1, y1;
                sp_grid_fit_project(&tmpf, g[2 * k] + r * cos(a), g[2 * k + 1] + r * sin(a), &x1, &y1);
                /* Shoelace centroid, relative to the projected centre for precision. */
                double xa = qx - cx0, ya = qy - cy0, xb = x1 - cx0, yb = y1 - cy0, cr = xa * yb - xb * ya;
                aa += cr;
                ax += (xa + xb) * cr;
                ay += (ya + yb) * cr;
                qx = x1, qy = y1;
            }
            if (fabs(aa) > 0) {
                o[2 * k] -= ax / (3 * aa);
                o[2 * k + 1] -= ay / (3 * aa);
            }
        }
    }

    model_H(&m, p, out->H);
    out->radial = m.rad;
    out->radial.terms = bestnp - 8;
    out->radial.k1 = bestnp > 8 ? p[8] : 0;
    out->radial.k2 = bestnp > 9 ? p[9] : 0;
    out->n = N;
    double maxr = 0;
    for (int k = 0; k < N; k++) {
        double x, y;
        sp_grid_fit_project(out, g[2 * k], g[2 * k + 1], &x, &y);
        double r = hypot(o[2 * k] - x, o[2 * k + 1] - y);
        maxr = r > maxr ? r : maxr;
    }
    out->rms_px = sqrt(bestrss / N);
    out->max_px = maxr;
    double cx = m.rad.cx, cy = m.rad.cy;
    if (local_scale(out->H, cx, cy, &out->mm_per_px, &out->rotation_deg, &out->scale_x, &out->scale_y)) {
        rc =
            sp_error_set(err, SP_ERR_INPUT, "%s: the fitted mapping is degenerate at the image centre", what);
        goto fail;
    }
    double lo = INFINITY, hi = 0;
    for (int c = 0; c < 4; c++) {
        double s;
        if (local_scale(out->H, c % 2 ? w - 1 : 0, c / 2 ? h - 1 : 0, &s, NULL, NULL, NULL) == 0) {
            lo = s < lo ? s : lo;
            hi = s > hi ? s : hi;
        }
    }
    out->scale_variation = hi >= lo ? (hi - lo) / out->mm_per_px : 0;

    /* Uncertainty: residual variance s² = RSS/(2N − np) times (JᵀJ)⁻¹ gives the parameter
     * covariance; first-order propagation to the centre scale and rotation with gradients by
     * central differences. */
    double s2 = nu > 0 ? bestrss / nu : 0, gs[10], gr[10];
    for (int c = 0; c < bestnp; c++) {
        double hstep = 1e-6 * fmax(1e-3, fabs(p[c])), q[10], s1, s2v, r1, r2v;
        memcpy(q, p, sizeof q);
        q[c] = p[c] + hstep;
        int bad = derived(&m, q, cx, cy, &s1, &r1);
        q[c] = p[c] - hstep;
        bad |= derived(&m, q, cx, cy, &s2v, &r2v);
        gs[c] = bad ? 0 : (s1 - s2v) / (2 * hstep);
        gr[c] = bad ? 0 : (r1 - r2v) / (2 * hstep);
    }
    double vs = 0, vr = 0;
    for (int a = 0; a < bestnp; a++)
        for (int c = 0; c < bestnp; c++) {
            vs += gs[a] * bestcov[a * bestnp + c] * gs[c];
            vr += gr[a] * bestcov[a * bestnp + c] * gr[c];
        }
    /* The covariance treats the dots' errors as independent, so it shrinks as 1/sqrt(N); centre
     * errors that are correlated over the target (threshold and blur effects that vary with the
     * light, residual perspective bias) do not. Add in quadrature the scale and rotation error
     * that a pattern of the full residual RMS, correlated over the grid, would cause: rms/R with
     * R the RMS distance of the dots from their centroid (px). */
    double R2 = 0;
    for (int k = 0; k < N; k++)
        R2 += (o[2 * k] - cix) * (o[2 * k] - cix) + (o[2 * k + 1] - ciy) * (o[2 * k + 1] - ciy);
    double corr = R2 > 0 ? out->rms_px / sqrt(R2 / N) : 0;
    out->mm_per_px_u = sqrt(fmax(0, s2 * vs) + pow(corr * out->mm_per_px, 2));
    out->rotation_u_deg = sqrt(fmax(0, s2 * vr) + pow(corr * 180 / M_PI, 2));
fail:
    free(g);
    free(o);
    free(jac);
    free(rdiam);
    return rc;
}

/* Per-track kinematics by least squares on the track's series; lateral oscillation by the
 * Lomb–Scargle periodogram (Lomb 1976, Scargle 1982), which handles the uneven sampling that gaps
 * in a track leave. See docs/methods-track.md. */
#include "track/kinematics.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define OSC_MIN_N 8          /* fewest detections for an oscillation estimate */
#define OSC_MIN_CYCLES 1.5   /* the track must span this many cycles of a candidate frequency */
#define OSC_OVERSAMPLE 5     /* grid points per 1/T, T = track duration */
#define OSC_BUDGET 20000000. /* samples × grid frequencies per track: bounds the work on long tracks */

/* Straight line y = a + b t by least squares; *se = standard error of b (NaN for n < 3). */
static void linfit(const double *t, const double *y, int n, double *slope, double *se, double *icept)
{
    *slope = *se = NAN;
    if (icept)
        *icept = NAN;
    if (n < 2)
        return;
    double mt = 0, my = 0;
    for (int i = 0; i < n; i++) {
        mt += t[i];
        my += y[i];
    }
    mt /= n;
    my /= n;
    double sxx = 0, sxy = 0;
    for (int i = 0; i < n; i++) {
        sxx += (t[i] - mt) * (t[i] - mt);
        sxy += (t[i] - mt) * (y[i] - my);
    }
    if (!(sxx > 0))
        return;
    double b = sxy / sxx, a = my - b * mt;
    *slope = b;
    if (icept)
        *icept = a;
    if (n >= 3) {
        double ssr = 0;
        for (int i = 0; i < n; i++) {
            double r = y[i] - a - b * t[i];
            ssr += r * r;
        }
        *se = sqrt(ssr / (n - 2) / sxx);
    }
}

/* Second derivative of the least-squares parabola through (t, y); t centred and scaled first so
 * the 3×3 normal equations stay well conditioned. */
static double quadfit_acc(const double *t, const double *y, int n)
{
    if (n < 3)
        return NAN;
    double mt = 0;
    for (int i = 0; i < n; i++)
        mt += t[i];
    mt /= n;
    double sc = 0;
    for (int i = 0; i < n; i++)
        sc = fmax(sc, fabs(t[i] - mt));
    if (!(sc > 0))
        return NAN;
    double A[3][4] = {{0}};
    for (int i = 0; i < n; i++) {
        double u = (t[i] - mt) / sc, p[3] = {1, u, u * u};
        for (int r = 0; r < 3; r++) {
            for (int c = 0; c < 3; c++)
                A[r][c] += p[r] * p[c];
            A[r][3] += p[r] * y[i];
        }
    }
    /* Gaussian elimination with partial pivoting. */
    for (int c = 0; c < 3; c++) {
        int piv = c;
        for (int r = c + 1; r < 3; r++)
            if (fabs(A[r][c]) > fabs(A[piv][c]))
                piv = r;
        if (!(fabs(A[piv][c]) > 1e-300))
            return NAN;
        if (piv != c)
            for (int k = 0; k < 4; k++) {
                double tmp = A[c][k];
                A[c][k] = A[piv][k];
                A[piv][k] = tmp;
            }
        for (int r = c + 1; r < 3; r++) {
            double f = A[r][c] / A[c][c];
            for (int k = c; k < 4; k++)
                A[r][k] -= f * A[c][k];
        }
    }
    /* Only the u² coefficient is needed: the last unknown. It is singular when fewer than three
     * distinct times are present. */
    double c2 = A[2][3] / A[2][2];
    if (!(fabs(A[2][2]) > 1e-12 * (fabs(A[0][0]) + 1)))
        return NAN;
    return 2 * c2 / (sc * sc);
}

double sp_lombscargle(const double *t, const double *y, int n, double w, double *a, double *b)
{
    /* Same arithmetic as the classic algorithm (Lomb 1976; Scargle 1982; Townsend 2010 form). */
    double xc = 0, xs = 0, cc = 0, ss = 0, cs = 0;
    for (int j = 0; j < n; j++) {
        double c = cos(w * t[j]), s = sin(w * t[j]);
        xc += y[j] * c;
        xs += y[j] * s;
        cc += c * c;
        ss += s * s;
        cs += c * s;
    }
    double tau = atan2(2 * cs, cc - ss) / (2 * w);
    double ct = cos(w * tau), st = sin(w * tau);
    double ct2 = ct * ct, st2 = st * st, cst = 2 * ct * st;
    double dc = ct2 * cc + cst * cs + st2 * ss, ds = ct2 * ss - cst * cs + st2 * cc;
    double nc = ct * xc + st * xs, ns = ct * xs - st * xc;
    double ac = dc > 0 ? nc / dc : 0, as = ds > 0 ? ns / ds : 0;
    if (a)
        *a = ac;
    if (b)
        *b = as;
    return 0.5 * ((dc > 0 ? nc * nc / dc : 0) + (ds > 0 ? ns * ns / ds : 0));
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static double median(double *v, int n)
{
    if (n < 1)
        return NAN;
    qsort(v, (size_t)n, sizeof *v, cmp_double);
    return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

/* Lateral oscillation of r(t) (already detrended), times from the track's start. */
static void oscillation(const double *t, const double *r, int n, double *scratch, sp_kinematics *k)
{
    k->osc_amp_mm = 0;
    k->osc_freq_hz = k->osc_power = NAN;
    if (n < OSC_MIN_N)
        return;
    double T = t[n - 1] - t[0];
    for (int i = 0; i + 1 < n; i++)
        scratch[i] = t[i + 1] - t[i];
    double step = median(scratch, n - 1);
    if (!(T > 0) || !(step > 0))
        return;
    double flo = OSC_MIN_CYCLES / T, fhi = 0.5 / step, df = 1 / (OSC_OVERSAMPLE * T);
    if (!(fhi > flo))
        return;
    double ngrid = floor((fhi - flo) / df) + 1;
    double cap = fmax(64, floor(OSC_BUDGET / n));
    if (ngrid > cap) { /* long track: keep the resolution, drop the highest frequencies */
        ngrid = cap;
        fhi = flo + (cap - 1) * df;
    }
    double ss = 0;
    for (int i = 0; i < n; i++)
        ss += r[i] * r[i];
    if (!(ss > 0))
        return;
    long best = 0;
    double pbest = -1;
    for (long g = 0; g < (long)ngrid; g++) {
        double p = sp_lombscargle(t, r, n, 2 * M_PI * (flo + g * df), NULL, NULL);
        if (p > pbest) {
            pbest = p;
            best = g;
        }
    }
    /* Golden-section search for the peak between the neighbouring grid points. */
    double lo = fmax(flo, flo + (best - 1) * df), hi = fmin(fhi, flo + (best + 1) * df);
    const double gr = 0.5 * (sqrt(5.0) - 1);
    double x1 = hi - gr * (hi - lo), x2 = lo + gr * (hi - lo);
    double p1 = sp_lombscargle(t, r, n, 2 * M_PI * x1, NULL, NULL);
    double p2 = sp_lombscargle(t, r, n, 2 * M_PI * x2, NULL, NULL);
    for (int it = 0; it < 60 && hi - lo > 1e-12 * fhi; it++) {
        if (p1 >= p2) {
            hi = x2;
            x2 = x1;
            p2 = p1;
            x1 = hi - gr * (hi - lo);
            p1 = sp_lombscargle(t, r, n, 2 * M_PI * x1, NULL, NULL);
        } else {
            lo = x1;
            x1 = x2;
            p1 = p2;
            x2 = lo + gr * (hi - lo);
            p2 = sp_lombscargle(t, r, n, 2 * M_PI * x2, NULL, NULL);
        }
    }
    double f = p1 >= p2 ? x1 : x2, pf = fmax(p1, p2);
    if (pbest > pf) { /* the search cannot lose the grid peak */
        f = flo + best * df;
        pf = pbest;
    }
    double a, b;
    sp_lombscargle(t, r, n, 2 * M_PI * f, &a, &b);
    k->osc_freq_hz = f;
    k->osc_amp_mm = sqrt(a * a + b * b);
    k->osc_power = 2 * pf / ss; /* explained share of the detrended sum of squares */
}

int sp_kinematics_compute(const sp_track *tr, double mm_per_px, int height, sp_kinematics *k, sp_error *err)
{
    int rc = SP_ERR_INTERNAL;
    double *buf = NULL;
    memset(k, 0, sizeof *k);
    if (!tr || tr->n < 1 || !tr->pts)
        return sp_error_set(err, SP_ERR_INPUT, "kinematics: empty track");
    if (!(mm_per_px >= 0 && mm_per_px < 1e6) || height < 1 || height > SP_MAX_DIM)
        return sp_error_set(err, SP_ERR_INPUT, "kinematics: track %lld: bad scale %g or frame height %d",
                            (long long)tr->id, mm_per_px, height);
    const int n = tr->n;
    const sp_track_point *p = tr->pts;
    for (int i = 0; i < n; i++)
        if (!isfinite(p[i].t_s) || !isfinite(p[i].x) || !isfinite(p[i].y) || !isfinite(p[i].d_px) ||
            (i > 0 && !(p[i].t_s > p[i - 1].t_s)))
            return sp_error_set(err, SP_ERR_INPUT,
                                "kinematics: track %lld: bad value or time order at row %d",
                                (long long)tr->id, i);
    const double s = mm_per_px > 0 ? mm_per_px : 1;
    buf = malloc(sizeof *buf * 7 * (size_t)n);
    if (!buf) {
        sp_error_set(err, SP_ERR_INTERNAL, "kinematics: track %lld: out of memory", (long long)tr->id);
        goto fail;
    }
    double *t = buf, *x = buf + n, *y = buf + 2 * n, *tc = buf + 3 * n, *dc = buf + 4 * n, *w1 = buf + 5 * n,
           *w2 = buf + 6 * n;
    int nc = 0;
    double sa = 0, s2c = 0, s2s = 0;
    for (int i = 0; i < n; i++) {
        t[i] = p[i].t_s - p[0].t_s; /* from the track's start: keeps the sums well scaled */
        x[i] = p[i].x * s;
        y[i] = (height - 1 - p[i].y) * s;
        if (!p[i].edge) {
            tc[nc] = t[i];
            dc[nc++] = p[i].d_px * s;
        }
        sa += p[i].aspect;
        double th = p[i].tilt_deg * (M_PI / 180);
        s2c += cos(2 * th);
        s2s += sin(2 * th);
    }
    k->id = tr->id;
    k->n = n;
    k->n_clean = nc;
    k->frame_first = p[0].frame;
    k->frame_last = p[n - 1].frame;
    k->t_first_s = p[0].t_s;
    k->t_last_s = p[n - 1].t_s;
    k->x_birth_mm = x[0];
    k->y_birth_mm = y[0];
    k->d_first_mm = p[0].d_px * s;

    double ix;
    linfit(t, x, n, &k->vx_mm_s, &k->vx_se_mm_s, &ix);
    linfit(t, y, n, &k->vy_mm_s, &k->vy_se_mm_s, NULL);
    k->speed_mm_s = hypot(k->vx_mm_s, k->vy_mm_s);
    k->ax_mm_s2 = quadfit_acc(t, x, n);
    k->ay_mm_s2 = quadfit_acc(t, y, n);

    linfit(tc, dc, nc, &k->growth_mm_s, &k->growth_se_mm_s, NULL);
    memcpy(w1, dc, sizeof *w1 * (size_t)nc);
    k->d_vol_mm = median(w1, nc);

    k->aspect_mean = sa / n;
    k->tilt_mean_deg = 0.5 * atan2(s2s, s2c) * (180 / M_PI);
    if (k->tilt_mean_deg <= -90)
        k->tilt_mean_deg += 180;

    /* Oscillation of x about its least-squares line. */
    if (n >= 2 && isfinite(k->vx_mm_s)) {
        for (int i = 0; i < n; i++)
            w1[i] = x[i] - ix - k->vx_mm_s * t[i];
        oscillation(t, w1, n, w2, k);
    } else {
        k->osc_amp_mm = 0;
        k->osc_freq_hz = k->osc_power = NAN;
    }
    rc = SP_OK;
fail:
    free(buf);
    return rc;
}

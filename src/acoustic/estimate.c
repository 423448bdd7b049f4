#include "acoustic/estimate.h"

#include <complex.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* In-place iterative radix-2 FFT, forward (e^-i), n a power of two. */
static void fft(double complex *a, int n)
{
    for (int i = 1, j = 0; i < n; i++) {
        int bit = n >> 1;
        for (; j & bit; bit >>= 1)
            j ^= bit;
        j ^= bit;
        if (i < j) {
            double complex t = a[i];
            a[i] = a[j];
            a[j] = t;
        }
    }
    for (int len = 2; len <= n; len <<= 1) {
        double ang = -2.0 * M_PI / len;
        for (int i = 0; i < n; i += len) {
            for (int k = 0; k < len / 2; k++) {
                /* Twiddles computed directly rather than by recurrence: exact to rounding at any size. */
                double complex w = cexp(I * ang * k);
                double complex u = a[i + k], v = a[i + k + len / 2] * w;
                a[i + k] = u + v;
                a[i + k + len / 2] = u - v;
            }
        }
    }
}

int sp_peak_interp(const float *x, int n, int nfft, double fs, double fmin, double fmax, int method,
                   double *f_hz, sp_error *err)
{
    *f_hz = 0;
    if (n < 3 || nfft < n || nfft > (1 << 20) || (nfft & (nfft - 1)) || !(fs > 0))
        return sp_error_set(err, SP_ERR_INPUT, "peak interpolation: bad segment (n %d, nfft %d)", n, nfft);
    double complex *X = malloc(sizeof *X * (size_t)nfft);
    if (!X)
        return sp_error_set(err, SP_ERR_INTERNAL, "peak interpolation: out of memory (%d bins)", nfft);
    for (int i = 0; i < nfft; i++)
        X[i] = i < n ? x[i] : 0.0;
    fft(X, nfft);
    int kmin = (int)ceil(fmin * nfft / fs), kmax = (int)floor(fmax * nfft / fs);
    if (kmin < 1)
        kmin = 1;
    if (kmax > nfft / 2 - 1)
        kmax = nfft / 2 - 1;
    int k = kmin;
    double best = -1;
    for (int i = kmin; i <= kmax; i++) {
        double p = creal(X[i]) * creal(X[i]) + cimag(X[i]) * cimag(X[i]);
        if (p > best) {
            best = p;
            k = i;
        }
    }
    if (kmax < kmin || best <= 0) {
        free(X);
        return sp_error_set(err, SP_ERR_INPUT, "peak interpolation: no spectral peak in %.1f..%.1f Hz", fmin,
                            fmax);
    }
    double complex xm = X[k - 1], x0 = X[k], xp = X[k + 1];
    double d = 0;
    if (method == SP_PEAK_PARABOLIC) {
        double a = cabs(xm), b = cabs(x0), c = cabs(xp);
        double den = a - 2 * b + c;
        d = den != 0 ? 0.5 * (a - c) / den : 0;
    } else if (method == SP_PEAK_QUINN) {
        double a1 = creal(xm / x0), a2 = creal(xp / x0);
        double d1 = a1 / (1 - a1), d2 = -a2 / (1 - a2);
        d = (d1 > 0 && d2 > 0) ? d2 : d1;
    } else {
        double complex den = 2 * x0 - xm - xp;
        d = cabs(den) > 0 ? creal((xm - xp) / den) : 0;
    }
    if (!(fabs(d) <= 1)) /* a degenerate neighbourhood: keep the bin centre */
        d = 0;
    *f_hz = (k + d) * fs / nfft;
    free(X);
    return SP_OK;
}

/* Solve the n x n system A p = b (n <= 4) by Gaussian elimination with partial pivoting. */
static int solve(double A[4][4], double b[4], double p[4], int n)
{
    for (int c = 0; c < n; c++) {
        int piv = c;
        for (int r = c + 1; r < n; r++)
            if (fabs(A[r][c]) > fabs(A[piv][c]))
                piv = r;
        if (!(fabs(A[piv][c]) > 1e-300))
            return -1;
        if (piv != c) {
            for (int j = 0; j < n; j++) {
                double t = A[c][j];
                A[c][j] = A[piv][j];
                A[piv][j] = t;
            }
            double t = b[c];
            b[c] = b[piv];
            b[piv] = t;
        }
        for (int r = c + 1; r < n; r++) {
            double f = A[r][c] / A[c][c];
            for (int j = c; j < n; j++)
                A[r][j] -= f * A[c][j];
            b[r] -= f * b[c];
        }
    }
    for (int r = n - 1; r >= 0; r--) {
        double s = b[r];
        for (int j = r + 1; j < n; j++)
            s -= A[r][j] * p[j];
        p[r] = s / A[r][r];
    }
    return 0;
}

/* Model e^(-beta t) (a cos wt + b sin wt): linear in (a, b), nonlinear in (beta, w). */
static double ssr_of(const double *x, int n, double fs, const double p[4])
{
    double s = 0;
    for (int i = 0; i < n; i++) {
        double t = i / fs, e = exp(-p[2] * t);
        double r = x[i] - e * (p[0] * cos(p[3] * t) + p[1] * sin(p[3] * t));
        s += r * r;
    }
    return s;
}

/* Best (a, b) for fixed (beta, w): the 2x2 linear least-squares problem. */
static double linear_ab(const double *x, int n, double fs, double p[4])
{
    double cc = 0, cs = 0, ss = 0, xc = 0, xs = 0;
    for (int i = 0; i < n; i++) {
        double t = i / fs, e = exp(-p[2] * t);
        double c = e * cos(p[3] * t), s = e * sin(p[3] * t);
        cc += c * c;
        cs += c * s;
        ss += s * s;
        xc += x[i] * c;
        xs += x[i] * s;
    }
    double det = cc * ss - cs * cs;
    if (!(fabs(det) > 0))
        return INFINITY;
    p[0] = (xc * ss - xs * cs) / det;
    p[1] = (xs * cc - xc * cs) / det;
    return ssr_of(x, n, fs, p);
}

int sp_ring_fit(const float *xf, int n, double fs, double fmin, double fmax, sp_ring *out, sp_error *err)
{
    memset(out, 0, sizeof *out);
    if (n < 16 || n > SP_FIT_MAX_SAMPLES || !(fs > 0))
        return sp_error_set(err, SP_ERR_INPUT, "damped-sinusoid fit: segment of %d samples outside 16..%d", n,
                            SP_FIT_MAX_SAMPLES);
    int rc = SP_OK;
    double *x = malloc(sizeof *x * (size_t)n);
    if (!x)
        return sp_error_set(err, SP_ERR_INTERNAL, "damped-sinusoid fit: out of memory (%d samples)", n);
    double energy = 0;
    for (int i = 0; i < n; i++) {
        x[i] = xf[i];
        energy += x[i] * x[i];
    }
    /* Start: Jacobsen's interpolated peak on a 4x zero-padded DFT (the padding narrows the bin so the
     * start lies well inside the fit's basin even for short, strongly damped segments). */
    int nfft = 1;
    while (nfft < 4 * n)
        nfft <<= 1;
    double f0;
    if ((rc = sp_peak_interp(xf, n, nfft, fs, fmin, fmax, SP_PEAK_JACOBSEN, &f0, err)) != SP_OK)
        goto done;
    out->f_start_hz = f0;

    /* Decay start: the best of a ladder of decay times by the linear (a, b) solution. */
    double T = n / fs, p[4] = {0, 0, 0, 2 * M_PI * f0}, best = INFINITY;
    double bp[4] = {0, 0, 1.0 / T, p[3]};
    for (int k = -2; k <= 8; k++) {
        double q[4] = {0, 0, 1.0 / (T * pow(2.0, -k)), p[3]};
        double s = linear_ab(x, n, fs, q);
        if (s < best) {
            best = s;
            memcpy(bp, q, sizeof bp);
        }
    }
    memcpy(p, bp, sizeof p);

    /* Levenberg-Marquardt (Marquardt 1963 diagonal scaling) on (a, b, beta, w). */
    double ssr = best, lambda = 1e-3;
    int it;
    for (it = 0; it < 200; it++) {
        double JJ[4][4] = {{0}}, Jr[4] = {0};
        for (int i = 0; i < n; i++) {
            double t = i / fs, e = exp(-p[2] * t), c = cos(p[3] * t), s = sin(p[3] * t);
            double m = e * (p[0] * c + p[1] * s);
            double j[4] = {e * c, e * s, -t * m, e * t * (-p[0] * s + p[1] * c)};
            double r = x[i] - m;
            for (int u = 0; u < 4; u++) {
                Jr[u] += j[u] * r;
                for (int v = u; v < 4; v++)
                    JJ[u][v] += j[u] * j[v];
            }
        }
        for (int u = 0; u < 4; u++)
            for (int v = 0; v < u; v++)
                JJ[u][v] = JJ[v][u];
        int accepted = 0;
        while (lambda < 1e12) {
            double A[4][4], b[4], d[4], q[4];
            memcpy(A, JJ, sizeof A);
            memcpy(b, Jr, sizeof b);
            for (int u = 0; u < 4; u++)
                A[u][u] += lambda * (JJ[u][u] > 0 ? JJ[u][u] : 1e-30);
            if (solve(A, b, d, 4) != 0) {
                lambda *= 10;
                continue;
            }
            for (int u = 0; u < 4; u++)
                q[u] = p[u] + d[u];
            double s = ssr_of(x, n, fs, q);
            if (s < ssr) {
                double rel = (ssr - s) / (ssr > 0 ? ssr : 1);
                memcpy(p, q, sizeof p);
                ssr = s;
                lambda = lambda > 1e-9 ? lambda / 10 : lambda;
                accepted = 1 + (rel < 1e-12 && fabs(d[3]) < 1e-9 * fabs(p[3]));
                break;
            }
            lambda *= 10;
        }
        if (accepted != 1)
            break; /* converged (2) or no further decrease possible (0) */
    }
    out->iters = it;
    if (p[3] < 0) { /* cos(-wt + phi) = cos(wt - phi): keep the frequency positive */
        p[3] = -p[3];
        p[1] = -p[1];
    }
    out->f_hz = p[3] / (2 * M_PI);
    out->beta_s = p[2];
    out->amp = hypot(p[0], p[1]);
    out->phase_rad = atan2(-p[1], p[0]);
    out->resid_var = ssr / (n - 4);
    out->r2 = energy > 0 ? 1 - ssr / energy : 0;
    out->snr_db = out->resid_var > 0 ? 10 * log10(out->amp * out->amp / (2 * out->resid_var)) : INFINITY;
done:
    free(x);
    return rc;
}

double sp_ring_crb_f(double amp, double beta_s, double f_hz, double phase_rad, int n, double fs,
                     double noise_var)
{
    /* Fisher matrix for (A, beta, f, phi) of A e^(-beta t) cos(2 pi f t + phi) in white Gaussian noise;
     * the bound is the (f, f) element of its inverse. */
    double F[4][4] = {{0}};
    for (int i = 0; i < n; i++) {
        double t = i / fs, e = exp(-beta_s * t), arg = 2 * M_PI * f_hz * t + phase_rad;
        double c = cos(arg), s = sin(arg);
        double j[4] = {e * c, -t * amp * e * c, -2 * M_PI * t * amp * e * s, -amp * e * s};
        for (int u = 0; u < 4; u++)
            for (int v = 0; v < 4; v++)
                F[u][v] += j[u] * j[v] / noise_var;
    }
    /* Column 2 of F^-1: solve F y = e_2. */
    double b[4] = {0, 0, 1, 0}, y[4];
    if (solve(F, b, y, 4) != 0 || !(y[2] > 0))
        return INFINITY;
    return sqrt(y[2]);
}

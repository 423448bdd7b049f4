/* Natural frequency and decay of a damped oscillation x(t) = A e^(-beta t) cos(2 pi f t + phi) + noise:
 * an interpolated spectral peak gives the start (Jacobsen & Kootsookos 2007; Quinn 1994 and the
 * parabola on |X| are kept for comparison), a Levenberg-Marquardt nonlinear least-squares fit of the
 * four parameters refines it (the maximum-likelihood estimate under white Gaussian noise). */
#ifndef SP_ACOUSTIC_ESTIMATE_H
#define SP_ACOUSTIC_ESTIMATE_H

#include "spume.h"

enum {
    SP_PEAK_PARABOLIC = 0, /* parabola through |X| at the peak bin and its neighbours */
    SP_PEAK_QUINN = 1,     /* Quinn (1994), IEEE TSP 42:1264: first estimator, from Re(X[k+-1]/X[k]) */
    SP_PEAK_JACOBSEN = 2   /* Jacobsen & Kootsookos (2007): Re[(X[k-1]-X[k+1])/(2X[k]-X[k-1]-X[k+1])] */
};

#define SP_FIT_MAX_SAMPLES (1 << 18) /* longest segment sp_ring_fit accepts */

/* Frequency (Hz) of the strongest DFT bin of x[0..n-1] (rectangular window, zero-padded to nfft, a
 * power of two >= n, at most 2^20) within [fmin, fmax], refined by the chosen interpolator. Returns 0
 * (and fills err) on a bad argument or when out of memory. */
int sp_peak_interp(const float *x, int n, int nfft, double fs, double fmin, double fmax, int method,
                   double *f_hz, sp_error *err);

typedef struct sp_ring {
    double f_hz;       /* natural (damped) frequency of the oscillation */
    double beta_s;     /* amplitude decay rate, 1/s (decay time 1/beta) */
    double amp;        /* amplitude A at the first sample */
    double phase_rad;  /* phase phi at the first sample */
    double resid_var;  /* residual variance, SSR / (n - 4) */
    double r2;         /* fraction of the segment's energy the model explains */
    double snr_db;     /* 10 log10(A^2 / (2 resid_var)) */
    double f_start_hz; /* the spectral-peak start value */
    int iters;         /* Levenberg-Marquardt iterations used */
} sp_ring;

/* Fit the damped oscillation to x[0..n-1] sampled at fs, the frequency searched within [fmin, fmax].
 * Time 0 is the first sample. Deterministic. Returns SP_ERR_INPUT for a segment too short (< 16) or
 * too long, SP_ERR_INTERNAL when out of memory; a fit that does not converge still returns its best
 * point (callers judge r2 and beta). */
int sp_ring_fit(const float *x, int n, double fs, double fmin, double fmax, sp_ring *out, sp_error *err);

/* Cramer-Rao bound: standard deviation (Hz) of an unbiased frequency estimate for the damped model
 * with parameters (A, beta, f, phi), n samples at fs, white noise of variance noise_var; from the
 * 4x4 Fisher matrix. */
double sp_ring_crb_f(double amp, double beta_s, double f_hz, double phase_rad, int n, double fs,
                     double noise_var);

#endif

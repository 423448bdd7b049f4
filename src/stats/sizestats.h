/* Size statistics over a set of bubble diameters (one per track): ISO 9276-2 moment-ratio means,
 * number- and volume-weighted percentiles, histograms and percentile-bootstrap confidence
 * intervals. Diameters are in any unit (results come back in the same unit); every diameter must
 * be positive and finite, else SP_ERR_INPUT. Formulas and rules: docs/methods-physics.md. */
#ifndef SP_STATS_SIZESTATS_H
#define SP_STATS_SIZESTATS_H

#include "spume.h"

#include <stddef.h>
#include <stdint.h>

/* ISO 9276-2 moment-ratio mean D[p,q] = (Σd^p / Σd^q)^(1/(p−q)); for p == q the limit
 * exp(Σd^p ln d / Σd^p). d10 = D[1,0], d32 = D[3,2] (Sauter), d43 = D[4,3]. */
int sp_size_moment_mean(const double *d, size_t n, double p, double q, double *out, sp_error *err);

/* Percentile interpolation rules (Hyndman & Fan 1996 numbering for equal weights). */
typedef enum sp_pct_rule {
    SP_PCT_LINEAR = 0,       /* type 7, numpy's default 'linear': h = (N−1)·f; equal weights only */
    SP_PCT_HAZEN = 1,        /* type 5 ('hazen'); weighted: the i-th sorted value sits at
                                (C_i − w_i/2)/W (C_i cumulative weight including it, W the total),
                                linear between, clamped to the extremes */
    SP_PCT_INVERTED_CDF = 2, /* type 1: the smallest value whose cumulative weight C_i ≥ f·W */
} sp_pct_rule;

/* Percentile pct in [0, 100] of x with weights w (NULL: equal weights). Weights must be finite
 * and ≥ 0 with a positive total. Ties are ordered by weight, so the result does not depend on the
 * input order. */
int sp_weighted_percentile(const double *x, const double *w, size_t n, double pct, sp_pct_rule rule,
                           double *out, sp_error *err);

/* Percentile of the distribution of d weighted by d^weight_power: 0 = by number, 2 = by projected
 * area, 3 = by volume (dv50 = sp_size_percentile(d, n, 3, 50, SP_PCT_HAZEN, ...)). */
int sp_size_percentile(const double *d, size_t n, int weight_power, double pct, sp_pct_rule rule, double *out,
                       sp_error *err);

typedef struct sp_size_summary {
    size_t n;
    double d10, d30, d32, d43; /* moment-ratio means */
    double d50;                /* number median, SP_PCT_LINEAR */
    double dv10, dv50, dv90;   /* volume-weighted percentiles, SP_PCT_HAZEN */
} sp_size_summary;

int sp_size_summarise(const double *d, size_t n, sp_size_summary *out, sp_error *err);

/* Specific interfacial area a = 6 ε / d32 (1/m for d32 in m), ε the gas volume fraction in [0, 1).
 * NAN when the arguments are out of range. */
double sp_interfacial_area(double holdup, double d32_m);

/* ---------------------------------------------------------------- histograms */

/* nbins + 1 edges from lo to hi, equal in width (log_spaced 0) or in ratio (1; needs lo > 0). */
int sp_hist_edges(double lo, double hi, int nbins, int log_spaced, double *edges, sp_error *err);

/* Sum of d^weight_power over the values in each bin [e_i, e_{i+1}) (the last bin also holds its
 * upper edge, as numpy.histogram does). out has nedges − 1 slots; *outside (may be NULL) receives
 * the weight of values outside [e_0, e_last]. Edges must be finite and strictly increasing. */
int sp_size_hist(const double *d, size_t n, const double *edges, int nedges, int weight_power, double *out,
                 double *outside, sp_error *err);

/* ---------------------------------------------------------------- bootstrap */

typedef struct sp_boot_opts {
    int replicates; /* B, default 1000, 10 .. 1000000 */
    double conf;    /* confidence level, default 0.95, in (0, 1) */
    uint64_t seed;  /* default 1 */
    int threads;    /* 0 = OpenMP default; results are identical at any count */
} sp_boot_opts;

void sp_boot_opts_default(sp_boot_opts *o);

typedef struct sp_ci {
    double est, lo, hi; /* estimate on the sample, percentile-bootstrap interval */
} sp_ci;

typedef struct sp_size_boot {
    sp_ci d10, d32, d43, dv50;
} sp_size_boot;

/* Percentile bootstrap (Efron 1979): B resamples of the n diameters with replacement, the statistic
 * on each, and the (1−conf)/2 and (1+conf)/2 percentiles (SP_PCT_LINEAR) of the B values.
 * Resample b draws its indices from a counter-based generator: key_b = mix(seed ^ mix(b)), the k-th
 * draw u_k = mix(key_b + k·0xd1b54a32d192ed03) with mix the splitmix64 finaliser (Steele, Lea &
 * Flood 2014); an index is u mod n after rejecting u < (2^64 − n) mod n. reps (may be NULL)
 * receives the replicate values, 4·B doubles: d10[0..B), d32[..], d43[..], dv50[..]. */
int sp_size_bootstrap(const double *d, size_t n, const sp_boot_opts *o, sp_size_boot *out, double *reps,
                      sp_error *err);

#endif

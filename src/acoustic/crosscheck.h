/* The acoustic cross-check: a measured run (tracks.csv, bubbles.csv, summary.json of `measure`) and
 * the sound recorded beside it. Pings are aligned with the optical detachment events (tracks born in
 * view) to find the offset between the two clocks, paired one-to-one, and the two sizes compared
 * (Bland & Altman 1986). */
#ifndef SP_ACOUSTIC_CROSSCHECK_H
#define SP_ACOUSTIC_CROSSCHECK_H

#include "acoustic/listen.h"
#include "spume.h"

typedef struct sp_crosscheck_settings {
    sp_listen_settings listen; /* ping detection, when the pings are (re)computed */
    double max_lag_s;          /* clock offsets searched in [-max_lag_s, max_lag_s] (default 10) */
    double tol_s;              /* pairing tolerance, 0 = 1.5 frame periods + 2 ms (default 0) */
    int min_n;                 /* tracks with fewer detections are not counted as births (default 3) */
    int relisten;              /* 1: run the ping detection even when DIR/pings.csv was made from
                                  the same audio with the same settings (default 0) */
} sp_crosscheck_settings;

void sp_crosscheck_settings_default(sp_crosscheck_settings *s);

typedef struct sp_crosscheck_report {
    int64_t pings, births, pairs;
    int reused_pings;            /* 1 when DIR/pings.csv was reused */
    double tol_s;                /* tolerance used */
    double offset_s;             /* t_audio = t_video + offset_s */
    double offset_se_s;          /* standard error of that offset (median of the pairs' differences) */
    double peak, peak2;          /* event coincidences at the best offset and at the best one apart */
    double confidence;           /* 1 - peak2 / peak: 0 ambiguous, 1 a single clear peak */
    double matched_frac;         /* pairs / min(pings, births) */
    int64_t n_diff;              /* pairs with both sizes */
    double mean_diff_mm;         /* mean of d_acoustic - d_optical */
    double sd_diff_mm;           /* its standard deviation */
    double loa_lo_mm, loa_hi_mm; /* mean -+ 1.96 sd (Bland & Altman 1986) */
    double mean_rel, loa_rel_lo, loa_rel_hi; /* the same on (d_a - d_o) / mean(d_a, d_o) */
    double median_abs_rel;                   /* median |d_a - d_o| / d_o */
} sp_crosscheck_report;

/* Read dir/tracks.csv, dir/bubbles.csv and dir/summary.json, detect pings in audio (or reuse
 * dir/pings.csv), align, pair, write dir/pairs.csv and add a "crosscheck" object to
 * dir/summary.json (both under temporary names, renamed when complete). rep may be NULL. */
int sp_crosscheck(const char *dir, const char *audio, const sp_crosscheck_settings *s,
                  sp_crosscheck_report *rep, sp_error *err);

/* ---- the steps, for tests */

typedef struct sp_xc_align {
    double offset_s;    /* coarse offset: median difference in the best window */
    double peak, peak2; /* coincidences in the best window, and in the best window at least 4 tol away */
} sp_xc_align;

/* Cross-correlation of two event trains (times sorted ascending) with a box of width 2 tol: the lag
 * window holding the most differences a_i - v_j within [-max_lag, max_lag]. SP_ERR_INPUT when there
 * is no difference in range or more than 5e7 of them. */
int sp_xc_align_run(const double *a, int na, const double *v, int nv, double max_lag, double tol,
                    sp_xc_align *out, sp_error *err);

/* One-to-one pairing minimising the sum of squared residuals a_i - v_j - offset, pairs farther than
 * tol forbidden (an unpaired event costs as much as a pair at tol), by the sparse assignment solver.
 * a sorted ascending. v_to_a[j] = i or -1. Returns the number of pairs, or -1 on error. */
int sp_xc_pair(const double *a, int na, const double *v, int nv, double offset, double tol, int *v_to_a,
               sp_error *err);

#endif

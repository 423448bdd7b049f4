/* Size statistics: REFERENCES.md worked values (ISO 9276-2 moment ratios, interfacial area), hand
 * cases of the percentile rules, histograms, and the bootstrap's determinism across thread counts,
 * its response to sample size and its coverage on a known log-normal population. */
#include "stats/sizestats.h"

#include "check.h"

#include <stdlib.h>
#include <string.h>

static void test_moments(void)
{
    /* REFERENCES.md (ISO 9276-2): d = {1, 2, 3} mm → D[3,2] 2.57143, D[4,3] 2.72222, D[3,0] 2.2894. */
    const double d[3] = {1, 2, 3};
    double v;
    sp_error err;
    CHECK(sp_size_moment_mean(d, 3, 3, 2, &v, &err) == SP_OK, "D32");
    CHECK_NEAR(v, 2.57143, 5e-6, "D[3,2]");
    sp_size_moment_mean(d, 3, 4, 3, &v, &err);
    CHECK_NEAR(v, 2.72222, 5e-6, "D[4,3]");
    sp_size_moment_mean(d, 3, 3, 0, &v, &err);
    CHECK_NEAR(v, 2.2894, 5e-5, "D[3,0]");
    sp_size_moment_mean(d, 3, 1, 0, &v, &err);
    CHECK_NEAR(v, 2.0, 1e-15, "D[1,0]");
    /* D[p,p] = exp(Σd^p ln d / Σd^p): p = 0 is the geometric mean 6^(1/3). */
    sp_size_moment_mean(d, 3, 0, 0, &v, &err);
    CHECK_NEAR(v, cbrt(6.0), 1e-14, "D[0,0] geometric mean");
    sp_size_moment_mean(d, 3, 3, 3, &v, &err);
    CHECK_NEAR(v, exp((8 * log(2.0) + 27 * log(3.0)) / 36), 1e-14, "D[3,3]");
    /* D[p,p] is the limit of D[p+e,p]. */
    double a, b;
    sp_size_moment_mean(d, 3, 3 + 1e-6, 3, &a, &err);
    sp_size_moment_mean(d, 3, 3, 3, &b, &err);
    CHECK_NEAR(a, b, 1e-6, "D[p,p] limit");
    /* Scale: D[p,q] of (k·d) is k·D[p,q]; metres give the same as millimetres. */
    const double dm[3] = {1e-3, 2e-3, 3e-3};
    sp_size_moment_mean(dm, 3, 3, 2, &v, &err);
    CHECK_NEAR(v * 1e3, 2.571428571428571, 1e-13, "D32 in metres");

    /* REFERENCES.md: a = 6ε/d32, ε 0.02, d32 2.57143 mm → 46.67 1/m. */
    CHECK_NEAR(sp_interfacial_area(0.02, 2.57143e-3), 46.67, 0.005, "interfacial area");
    CHECK(isnan(sp_interfacial_area(1.2, 1e-3)) && isnan(sp_interfacial_area(0.1, 0)), "area bad args");

    sp_size_summary s;
    CHECK(sp_size_summarise(d, 3, &s, &err) == SP_OK && s.n == 3, "summary");
    CHECK_NEAR(s.d32, 2.57143, 5e-6, "summary d32");
    CHECK_NEAR(s.d50, 2.0, 0, "number median");
    /* Volume weights 1, 8, 27 (total 36): Hazen positions 0.5/36, 5/36, 22.5/36. f = 0.5 = 18/36
     * lies between 5 and 22.5: 2 + (18 − 5)/(22.5 − 5) = 2.742857. */
    CHECK_NEAR(s.dv50, 2 + 13.0 / 17.5, 1e-14, "dv50 by hand");

    /* Bad input. */
    const double bad[3] = {1, -2, 3}, nanv[2] = {1, NAN};
    CHECK(sp_size_moment_mean(bad, 3, 3, 2, &v, &err) == SP_ERR_INPUT && strstr(err.msg, "#1"),
          "negative: %s", err.msg);
    CHECK(sp_size_moment_mean(nanv, 2, 3, 2, &v, &err) == SP_ERR_INPUT, "NaN");
    CHECK(sp_size_moment_mean(d, 0, 3, 2, &v, &err) == SP_ERR_INPUT, "empty");
    CHECK(sp_size_moment_mean(NULL, 3, 3, 2, &v, &err) == SP_ERR_INPUT, "NULL");
    CHECK(sp_size_moment_mean(d, 3, NAN, 2, &v, &err) == SP_ERR_INPUT, "NaN order");
    CHECK(sp_size_summarise(d, 0, &s, &err) == SP_ERR_INPUT, "empty summary");
}

static void test_percentiles(void)
{
    sp_error err;
    double v;
    const double x[4] = {4, 1, 3, 2}; /* sorted 1 2 3 4 */
    /* Type 7: h = 3f. f = 0.5 → 2.5; f = 0.1 → 1.3. */
    sp_weighted_percentile(x, NULL, 4, 50, SP_PCT_LINEAR, &v, &err);
    CHECK_NEAR(v, 2.5, 1e-15, "linear median");
    sp_weighted_percentile(x, NULL, 4, 10, SP_PCT_LINEAR, &v, &err);
    CHECK_NEAR(v, 1.3, 1e-15, "linear p10");
    sp_weighted_percentile(x, NULL, 4, 100, SP_PCT_LINEAR, &v, &err);
    CHECK_NEAR(v, 4, 0, "linear max");
    sp_weighted_percentile(x, NULL, 4, 0, SP_PCT_LINEAR, &v, &err);
    CHECK_NEAR(v, 1, 0, "linear min");
    /* Type 5: positions 0.125, 0.375, 0.625, 0.875. f = 0.5 → 2.5; f = 0.1 → 1 (clamped); 0.2 → 1.3. */
    sp_weighted_percentile(x, NULL, 4, 50, SP_PCT_HAZEN, &v, &err);
    CHECK_NEAR(v, 2.5, 1e-15, "hazen median");
    sp_weighted_percentile(x, NULL, 4, 10, SP_PCT_HAZEN, &v, &err);
    CHECK_NEAR(v, 1, 0, "hazen clamp");
    sp_weighted_percentile(x, NULL, 4, 20, SP_PCT_HAZEN, &v, &err);
    CHECK_NEAR(v, 1.3, 1e-14, "hazen p20");
    /* Type 1: smallest x with i/4 ≥ f. f = 0.5 → 2; 0.51 → 3. */
    sp_weighted_percentile(x, NULL, 4, 50, SP_PCT_INVERTED_CDF, &v, &err);
    CHECK_NEAR(v, 2, 0, "inverted cdf median");
    sp_weighted_percentile(x, NULL, 4, 51, SP_PCT_INVERTED_CDF, &v, &err);
    CHECK_NEAR(v, 3, 0, "inverted cdf 51");
    /* Integer weights equal repetition for the inverted CDF: {1×3, 2×1} → f 0.75 → 1, 0.76 → 2. */
    const double xw[2] = {2, 1}, w[2] = {1, 3};
    sp_weighted_percentile(xw, w, 2, 75, SP_PCT_INVERTED_CDF, &v, &err);
    CHECK_NEAR(v, 1, 0, "weighted inverted cdf 75");
    sp_weighted_percentile(xw, w, 2, 76, SP_PCT_INVERTED_CDF, &v, &err);
    CHECK_NEAR(v, 2, 0, "weighted inverted cdf 76");
    /* A zero weight removes the value. */
    const double xz[3] = {1, 5, 2}, wz[3] = {1, 0, 1};
    sp_weighted_percentile(xz, wz, 3, 100, SP_PCT_HAZEN, &v, &err);
    CHECK_NEAR(v, 2, 0, "zero weight ignored");
    /* The result does not depend on the input order, ties included. */
    const double t1[5] = {1, 2, 2, 3, 2}, w1[5] = {1, 5, 1, 2, 3};
    const double t2[5] = {2, 3, 2, 1, 2}, w2[5] = {3, 2, 1, 1, 5};
    double v1, v2;
    for (int p = 0; p <= 100; p += 7) {
        sp_weighted_percentile(t1, w1, 5, p, SP_PCT_HAZEN, &v1, &err);
        sp_weighted_percentile(t2, w2, 5, p, SP_PCT_HAZEN, &v2, &err);
        CHECK(v1 == v2, "order independence at %d: %g vs %g", p, v1, v2);
    }
    /* Bad arguments. */
    CHECK(sp_weighted_percentile(x, NULL, 4, 101, SP_PCT_LINEAR, &v, &err) == SP_ERR_INPUT, "pct > 100");
    CHECK(sp_weighted_percentile(x, NULL, 4, NAN, SP_PCT_LINEAR, &v, &err) == SP_ERR_INPUT, "pct NaN");
    CHECK(sp_weighted_percentile(xw, w, 2, 50, SP_PCT_LINEAR, &v, &err) == SP_ERR_INPUT, "linear weighted");
    const double wneg[2] = {1, -1}, wzero[2] = {0, 0};
    CHECK(sp_weighted_percentile(xw, wneg, 2, 50, SP_PCT_HAZEN, &v, &err) == SP_ERR_INPUT, "negative weight");
    CHECK(sp_weighted_percentile(xw, wzero, 2, 50, SP_PCT_HAZEN, &v, &err) == SP_ERR_INPUT, "zero total");
    CHECK(sp_weighted_percentile(x, NULL, 4, 50, (sp_pct_rule)7, &v, &err) == SP_ERR_INPUT, "unknown rule");
    CHECK(sp_size_percentile(x, 4, 5, 50, SP_PCT_HAZEN, &v, &err) == SP_ERR_INPUT, "weight power");
}

static void test_hist(void)
{
    sp_error err;
    double e[6], h[5], out;
    CHECK(sp_hist_edges(0, 5, 5, 0, e, &err) == SP_OK, "linear edges");
    for (int i = 0; i <= 5; i++)
        CHECK_NEAR(e[i], i, 1e-15, "linear edge");
    const double d[7] = {0.5, 1.0, 1.5, 4.99, 5.0, 5.01, 0.0001};
    CHECK(sp_size_hist(d, 7, e, 6, 0, h, &out, &err) == SP_OK, "hist");
    /* [0,1): 0.5, 0.0001; [1,2): 1.0, 1.5; [4,5]: 4.99, 5.0 (top edge inclusive); outside: 5.01. */
    CHECK(h[0] == 2 && h[1] == 2 && h[2] == 0 && h[3] == 0 && h[4] == 2 && out == 1,
          "counts %g %g %g %g %g / %g", h[0], h[1], h[2], h[3], h[4], out);
    CHECK(sp_size_hist(d, 7, e, 6, 3, h, &out, &err) == SP_OK, "volume hist");
    CHECK_NEAR(h[1], 1 + 3.375, 1e-12, "volume bin");
    CHECK_NEAR(out, 5.01 * 5.01 * 5.01, 1e-12, "volume outside");
    CHECK(sp_hist_edges(0.1, 10, 4, 1, e, &err) == SP_OK, "log edges");
    CHECK_NEAR(e[1], 0.1 * pow(100, 0.25), 1e-15, "log edge");
    CHECK(e[0] == 0.1 && e[4] == 10, "exact ends");
    CHECK(sp_hist_edges(0, 10, 4, 1, e, &err) == SP_ERR_INPUT, "log from 0");
    CHECK(sp_hist_edges(1, 1, 4, 0, e, &err) == SP_ERR_INPUT, "empty range");
    CHECK(sp_hist_edges(0, 1, 0, 0, e, &err) == SP_ERR_INPUT, "no bins");
    const double bad[3] = {0, 2, 1};
    CHECK(sp_size_hist(d, 7, bad, 3, 0, h, &out, &err) == SP_ERR_INPUT && strstr(err.msg, "#2"),
          "unsorted edges");
    CHECK(sp_size_hist(d, 7, e, 1, 0, h, &out, &err) == SP_ERR_INPUT, "one edge");
}

/* Invented log-normal population: median 1.5 mm, σ_g = exp(0.35). */
static void lognormal(double *d, size_t n, unsigned seed)
{
    srand(seed);
    for (size_t i = 0; i < n; i += 2) {
        double u1 = (rand() + 1.0) / (RAND_MAX + 2.0), u2 = (rand() + 1.0) / (RAND_MAX + 2.0);
        double r = sqrt(-2 * log(u1)), z0 = r * cos(6.283185307179586 * u2),
               z1 = r * sin(6.283185307179586 * u2);
        d[i] = 1.5 * exp(0.35 * z0);
        if (i + 1 < n)
            d[i + 1] = 1.5 * exp(0.35 * z1);
    }
}

static void test_bootstrap(void)
{
    sp_error err;
    sp_boot_opts o;
    sp_boot_opts_default(&o);
    CHECK(o.replicates == 1000 && o.conf == 0.95, "defaults");
    size_t n = 300;
    double *d = malloc(n * sizeof *d), *r1 = malloc(4000 * sizeof *r1), *r2 = malloc(4000 * sizeof *r2);
    if (!d || !r1 || !r2)
        return;
    lognormal(d, n, 7);
    sp_size_boot b1, b2;
    o.threads = 1;
    CHECK(sp_size_bootstrap(d, n, &o, &b1, r1, &err) == SP_OK, "boot 1 thread");
    o.threads = 2;
    CHECK(sp_size_bootstrap(d, n, &o, &b2, r2, &err) == SP_OK, "boot 2 threads");
    CHECK(memcmp(r1, r2, 4000 * sizeof *r1) == 0 && memcmp(&b1, &b2, sizeof b1) == 0, "thread independence");
    o.threads = 7;
    CHECK(sp_size_bootstrap(d, n, &o, &b2, r2, &err) == SP_OK && memcmp(&b1, &b2, sizeof b1) == 0,
          "7 threads");
    /* The input order does not matter: the sample is sorted before resampling. */
    for (size_t i = 0; i < n / 2; i++) {
        double t = d[i];
        d[i] = d[n - 1 - i], d[n - 1 - i] = t;
    }
    CHECK(sp_size_bootstrap(d, n, &o, &b2, NULL, &err) == SP_OK && memcmp(&b1, &b2, sizeof b1) == 0,
          "order independence");
    sp_ci *c[4] = {&b1.d10, &b1.d32, &b1.d43, &b1.dv50};
    for (int k = 0; k < 4; k++)
        CHECK(c[k]->lo < c[k]->est && c[k]->est < c[k]->hi, "stat %d: %g in [%g, %g]", k, c[k]->est, c[k]->lo,
              c[k]->hi);
    double v;
    sp_size_moment_mean(d, n, 3, 2, &v, &err);
    CHECK_NEAR(b1.d32.est, v, 1e-12, "estimate is the sample d32");
    /* Another seed: different replicates, similar interval. */
    o.seed = 99;
    sp_size_bootstrap(d, n, &o, &b2, r2, &err);
    CHECK(memcmp(r1, r2, 4000 * sizeof *r1) != 0, "seed changes the replicates");
    CHECK(fabs((b2.d32.hi - b2.d32.lo) / (b1.d32.hi - b1.d32.lo) - 1) < 0.2,
          "interval width stable across seeds");
    /* Standard error ~ 1/sqrt(n): 4× the sample, about half the width. Sample mean d10 for a
     * log-normal: the normal-theory width 2·1.96·sd/sqrt(n) is close to the bootstrap's. */
    double sd = 0, mean = b1.d10.est;
    o.seed = 1;
    sp_size_bootstrap(d, n, &o, &b1, NULL, &err);
    for (size_t i = 0; i < n; i++)
        sd += (d[i] - mean) * (d[i] - mean);
    sd = sqrt(sd / (n - 1));
    double wn = 2 * 1.959964 * sd / sqrt((double)n);
    CHECK(fabs((b1.d10.hi - b1.d10.lo) / wn - 1) < 0.15, "d10 width %g vs normal theory %g",
          b1.d10.hi - b1.d10.lo, wn);

    /* Coverage on the population: d32 of a log-normal with median m and s = ln σ_g is
     * m·exp(2.5 s²) (Hatch–Choate). 200 samples of 150; the 90% interval should hold the truth in
     * about 90% of them (percentile bootstrap is a little liberal at this size). */
    double truth = 1.5 * exp(2.5 * 0.35 * 0.35);
    int hit = 0, trials = 200;
    double *s = malloc(150 * sizeof *s);
    o.replicates = 400;
    o.conf = 0.90;
    o.threads = 0;
    for (int t = 0; t < trials && s; t++) {
        lognormal(s, 150, 1000 + t);
        o.seed = t;
        if (sp_size_bootstrap(s, 150, &o, &b1, NULL, &err) == SP_OK && b1.d32.lo <= truth &&
            truth <= b1.d32.hi)
            hit++;
    }
    printf("d32 90%% interval coverage: %d/%d\n", hit, trials);
    CHECK(hit >= 160 && hit <= 195, "coverage %d/%d of the 90%% interval", hit, trials);
    free(s);

    /* Bad options. */
    sp_boot_opts_default(&o);
    o.replicates = 5;
    CHECK(sp_size_bootstrap(d, n, &o, &b1, NULL, &err) == SP_ERR_INPUT, "too few replicates");
    sp_boot_opts_default(&o);
    o.conf = 1;
    CHECK(sp_size_bootstrap(d, n, &o, &b1, NULL, &err) == SP_ERR_INPUT, "conf 1");
    CHECK(sp_size_bootstrap(d, 0, NULL, &b1, NULL, &err) == SP_ERR_INPUT, "empty");
    /* One value: a degenerate but valid interval. */
    CHECK(sp_size_bootstrap(d, 1, NULL, &b1, NULL, &err) == SP_OK && b1.d32.lo == d[0] && b1.d32.hi == d[0],
          "single value");
    free(d);
    free(r1);
    free(r2);
}

int main(void)
{
    test_moments();
    test_percentiles();
    test_hist();
    test_bootstrap();
    return check_report();
}

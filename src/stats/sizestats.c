/* Size statistics: moment-ratio means (ISO 9276-2), weighted percentiles, histograms and the
 * percentile bootstrap (Efron 1979). */
#include "stats/sizestats.h"

#include <math.h>
#include <omp.h>
#include <stdlib.h>
#include <string.h>

#define MAX_VALUES ((size_t)1 << 40) /* far beyond any recording; keeps index arithmetic safe */

static int check_values(const double *d, size_t n, const char *what, sp_error *err)
{
    if (!d || n == 0)
        return sp_error_set(err, SP_ERR_INPUT, "size statistics: no %s", what);
    if (n > MAX_VALUES)
        return sp_error_set(err, SP_ERR_INPUT, "size statistics: %zu %s is too many", n, what);
    for (size_t i = 0; i < n; i++)
        if (!(d[i] > 0.0 && isfinite(d[i])))
            return sp_error_set(err, SP_ERR_INPUT,
                                "size statistics: %s #%zu is %g (must be positive and finite)", what, i,
                                d[i]);
    return SP_OK;
}

/* Power with the small integer cases exact and fast: the bootstrap calls it 4·n·B times. */
static double powk(double x, double p)
{
    if (p == 0.0)
        return 1.0;
    if (p == 1.0)
        return x;
    if (p == 2.0)
        return x * x;
    if (p == 3.0)
        return x * x * x;
    if (p == 4.0)
        return (x * x) * (x * x);
    return pow(x, p);
}

/* D[p,q] over x with multiplicities c (NULL: 1 each). */
static double moment_mean(const double *x, const uint32_t *c, size_t n, double p, double q)
{
    double sp = 0.0, sq = 0.0;
    if (p == q) {
        for (size_t i = 0; i < n; i++) {
            double m = c ? c[i] : 1.0, xp = powk(x[i], p);
            sp += m * xp * log(x[i]);
            sq += m * xp;
        }
        return exp(sp / sq);
    }
    for (size_t i = 0; i < n; i++) {
        double m = c ? c[i] : 1.0;
        sp += m * powk(x[i], p);
        sq += m * powk(x[i], q);
    }
    return pow(sp / sq, 1.0 / (p - q));
}

int sp_size_moment_mean(const double *d, size_t n, double p, double q, double *out, sp_error *err)
{
    int rc = check_values(d, n, "diameters", err);
    if (rc)
        return rc;
    if (!isfinite(p) || !isfinite(q) || fabs(p) > 16 || fabs(q) > 16)
        return sp_error_set(err, SP_ERR_INPUT, "size statistics: moment orders p = %g, q = %g out of range",
                            p, q);
    *out = moment_mean(d, NULL, n, p, q);
    return SP_OK;
}

/* ---------------------------------------------------------------- percentiles */

typedef struct pair {
    double x, w;
} pair;

static int pair_cmp(const void *a, const void *b)
{
    const pair *p = a, *q = b;
    if (p->x != q->x)
        return p->x < q->x ? -1 : 1;
    if (p->w != q->w)
        return p->w < q->w ? -1 : 1;
    return 0;
}

/* Percentile over sorted x with per-element weight w and multiplicity c (c NULL: 1): element i
 * stands for c_i copies of x_i, each of weight w_i. f in [0, 1]. Elements with c_i = 0 are absent;
 * the bootstrap uses this to evaluate a resample without sorting it. */
static double pct_sorted(const double *x, const double *w, const uint32_t *c, size_t n, double f,
                         sp_pct_rule rule)
{
    double total = 0.0, count = 0.0;
    for (size_t i = 0; i < n; i++) {
        double m = c ? c[i] : 1.0;
        total += m * (w ? w[i] : 1.0);
        count += m;
    }
    if (rule == SP_PCT_LINEAR) {
        /* Order statistics h and h+1 (0-based) of the expanded list. */
        double h = (count - 1.0) * f, fl = floor(h), g = h - fl;
        double lo = NAN, hi = NAN, seen = 0.0;
        for (size_t i = 0; i < n && isnan(hi); i++) {
            double m = c ? c[i] : 1.0;
            if (m == 0.0)
                continue;
            if (isnan(lo) && fl < seen + m)
                lo = x[i];
            if (!isnan(lo) && fl + 1.0 < seen + m)
                hi = x[i];
            seen += m;
        }
        if (isnan(hi))
            hi = lo; /* f = 1: no upper neighbour, g = 0 */
        return g == 0.0 ? lo : lo + g * (hi - lo);
    }
    if (rule == SP_PCT_INVERTED_CDF) {
        double target = f * total, cum = 0.0, last = NAN;
        for (size_t i = 0; i < n; i++) {
            double m = c ? c[i] : 1.0, wi = m * (w ? w[i] : 1.0);
            if (m == 0.0 || wi == 0.0)
                continue;
            cum += wi;
            last = x[i];
            if (cum >= target)
                return x[i];
        }
        return last; /* rounding left cum just below target at f = 1 */
    }
    /* Hazen, weighted: element i covers the plateau [(C_{i−1} + w_i/2)/W, (C_i − w_i/2)/W] (all its
     * copies share x_i); between plateaus of consecutive present elements, linear. */
    double target = f * total, cum = 0.0, prev_x = NAN, prev_end = NAN;
    for (size_t i = 0; i < n; i++) {
        double m = c ? c[i] : 1.0, wi = w ? w[i] : 1.0;
        if (m == 0.0 || wi == 0.0)
            continue;
        double start = cum + 0.5 * wi, end = cum + m * wi - 0.5 * wi;
        if (target < start) {
            if (isnan(prev_x))
                return x[i]; /* below the first position: clamp */
            return prev_x + (x[i] - prev_x) * (target - prev_end) / (start - prev_end);
        }
        if (target <= end)
            return x[i];
        cum += m * wi;
        prev_x = x[i];
        prev_end = end;
    }
    return prev_x; /* above the last position: clamp */
}

static int pct_args(double pct, sp_pct_rule rule, int weighted, sp_error *err)
{
    if (!(pct >= 0.0 && pct <= 100.0))
        return sp_error_set(err, SP_ERR_INPUT, "size statistics: percentile %g is outside [0, 100]", pct);
    if (rule != SP_PCT_LINEAR && rule != SP_PCT_HAZEN && rule != SP_PCT_INVERTED_CDF)
        return sp_error_set(err, SP_ERR_INPUT, "size statistics: unknown percentile rule %d", (int)rule);
    if (weighted && rule == SP_PCT_LINEAR)
        return sp_error_set(err, SP_ERR_INPUT,
                            "size statistics: the linear percentile rule is defined for equal weights only");
    return SP_OK;
}

static int weighted_pct(const double *x, const double *w, size_t n, double pct, sp_pct_rule rule, double *out,
                        sp_error *err)
{
    pair *p = malloc(n * sizeof *p);
    double *xs = malloc(n * sizeof *xs), *ws = malloc(n * sizeof *ws);
    int rc = SP_OK;
    if (!p || !xs || !ws) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "size statistics: out of memory for %zu values", n);
        goto fail;
    }
    for (size_t i = 0; i < n; i++)
        p[i].x = x[i], p[i].w = w ? w[i] : 1.0;
    qsort(p, n, sizeof *p, pair_cmp);
    for (size_t i = 0; i < n; i++)
        xs[i] = p[i].x, ws[i] = p[i].w;
    *out = pct_sorted(xs, ws, NULL, n, pct / 100.0, rule);
fail:
    free(p);
    free(xs);
    free(ws);
    return rc;
}

int sp_weighted_percentile(const double *x, const double *w, size_t n, double pct, sp_pct_rule rule,
                           double *out, sp_error *err)
{
    if (!x || n == 0)
        return sp_error_set(err, SP_ERR_INPUT, "size statistics: no values");
    if (n > MAX_VALUES)
        return sp_error_set(err, SP_ERR_INPUT, "size statistics: %zu values is too many", n);
    int rc = pct_args(pct, rule, w != NULL, err);
    if (rc)
        return rc;
    double total = 0.0;
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(x[i]))
            return sp_error_set(err, SP_ERR_INPUT, "size statistics: value #%zu is %g", i, x[i]);
        if (w && !(w[i] >= 0.0 && isfinite(w[i])))
            return sp_error_set(err, SP_ERR_INPUT, "size statistics: weight #%zu is %g", i, w[i]);
        total += w ? w[i] : 1.0;
    }
    if (!(total > 0.0 && isfinite(total)))
        return sp_error_set(err, SP_ERR_INPUT, "size statistics: the weights sum to %g", total);
    return weighted_pct(x, w, n, pct, rule, out, err);
}

int sp_size_percentile(const double *d, size_t n, int weight_power, double pct, sp_pct_rule rule, double *out,
                       sp_error *err)
{
    int rc = check_values(d, n, "diameters", err);
    if (rc)
        return rc;
    if (weight_power < 0 || weight_power > 4)
        return sp_error_set(err, SP_ERR_INPUT, "size statistics: weight power %d is outside 0..4",
                            weight_power);
    if ((rc = pct_args(pct, rule, weight_power != 0, err)))
        return rc;
    if (weight_power == 0)
        return weighted_pct(d, NULL, n, pct, rule, out, err);
    double *w = malloc(n * sizeof *w);
    if (!w)
        return sp_error_set(err, SP_ERR_INTERNAL, "size statistics: out of memory for %zu values", n);
    for (size_t i = 0; i < n; i++)
        w[i] = powk(d[i], weight_power);
    rc = weighted_pct(d, w, n, pct, rule, out, err);
    free(w);
    return rc;
}

int sp_size_summarise(const double *d, size_t n, sp_size_summary *out, sp_error *err)
{
    int rc = check_values(d, n, "diameters", err);
    if (rc)
        return rc;
    memset(out, 0, sizeof *out);
    out->n = n;
    out->d10 = moment_mean(d, NULL, n, 1, 0);
    out->d30 = moment_mean(d, NULL, n, 3, 0);
    out->d32 = moment_mean(d, NULL, n, 3, 2);
    out->d43 = moment_mean(d, NULL, n, 4, 3);
    if ((rc = sp_size_percentile(d, n, 0, 50, SP_PCT_LINEAR, &out->d50, err)) ||
        (rc = sp_size_percentile(d, n, 3, 10, SP_PCT_HAZEN, &out->dv10, err)) ||
        (rc = sp_size_percentile(d, n, 3, 50, SP_PCT_HAZEN, &out->dv50, err)) ||
        (rc = sp_size_percentile(d, n, 3, 90, SP_PCT_HAZEN, &out->dv90, err)))
        return rc;
    return SP_OK;
}

double sp_interfacial_area(double holdup, double d32_m)
{
    if (!(holdup >= 0.0 && holdup < 1.0) || !(d32_m > 0.0 && isfinite(d32_m)))
        return NAN;
    return 6.0 * holdup / d32_m;
}

/* ---------------------------------------------------------------- histograms */

int sp_hist_edges(double lo, double hi, int nbins, int log_spaced, double *edges, sp_error *err)
{
    if (nbins < 1 || nbins > 1000000)
        return sp_error_set(err, SP_ERR_INPUT, "histogram: %d bins is outside 1..1000000", nbins);
    if (!(isfinite(lo) && isfinite(hi) && lo < hi))
        return sp_error_set(err, SP_ERR_INPUT, "histogram: range [%g, %g] is empty or not finite", lo, hi);
    if (log_spaced && !(lo > 0.0))
        return sp_error_set(err, SP_ERR_INPUT,
                            "histogram: log-spaced bins need a positive lower edge, not %g", lo);
    for (int i = 0; i <= nbins; i++) {
        double t = (double)i / nbins;
        edges[i] = log_spaced ? lo * pow(hi / lo, t) : lo + (hi - lo) * t;
    }
    edges[0] = lo; /* exact ends whatever the rounding */
    edges[nbins] = hi;
    for (int i = 0; i < nbins; i++)
        if (!(edges[i] < edges[i + 1]))
            return sp_error_set(err, SP_ERR_INPUT,
                                "histogram: %d bins over [%g, %g] are too narrow to tell apart", nbins, lo,
                                hi);
    return SP_OK;
}

int sp_size_hist(const double *d, size_t n, const double *edges, int nedges, int weight_power, double *out,
                 double *outside, sp_error *err)
{
    int rc = check_values(d, n, "diameters", err);
    if (rc)
        return rc;
    if (!edges || nedges < 2 || nedges > 1000001)
        return sp_error_set(err, SP_ERR_INPUT, "histogram: %d edges is outside 2..1000001", nedges);
    if (weight_power < 0 || weight_power > 4)
        return sp_error_set(err, SP_ERR_INPUT, "histogram: weight power %d is outside 0..4", weight_power);
    for (int i = 0; i < nedges; i++)
        if (!isfinite(edges[i]) || (i > 0 && !(edges[i - 1] < edges[i])))
            return sp_error_set(err, SP_ERR_INPUT, "histogram: edge #%d (%g) is not finite or not increasing",
                                i, edges[i]);
    int nb = nedges - 1;
    double out_w = 0.0;
    for (int i = 0; i < nb; i++)
        out[i] = 0.0;
    for (size_t i = 0; i < n; i++) {
        double x = d[i], wt = powk(x, weight_power);
        if (x < edges[0] || x > edges[nb]) {
            out_w += wt;
            continue;
        }
        /* Last edge <= x, by bisection; the top edge belongs to the last bin. */
        int lo = 0, hi = nb;
        while (hi - lo > 1) {
            int mid = lo + (hi - lo) / 2;
            if (edges[mid] <= x)
                lo = mid;
            else
                hi = mid;
        }
        out[lo] += wt;
    }
    if (outside)
        *outside = out_w;
    return SP_OK;
}

/* ---------------------------------------------------------------- bootstrap */

void sp_boot_opts_default(sp_boot_opts *o)
{
    o->replicates = 1000;
    o->conf = 0.95;
    o->seed = 1;
    o->threads = 0;
}

/* splitmix64 finaliser (Steele, Lea & Flood 2014). */
static uint64_t mix(uint64_t z)
{
    z += 0x9e3779b97f4a7c15ULL;
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

/* One resample as multiplicities over the sorted sample; the statistics then need no sorting. */
static void replicate(const double *xs, const double *ws, size_t n, uint64_t seed, int64_t b, uint32_t *cnt,
                      double *st)
{
    uint64_t key = mix(seed ^ mix((uint64_t)b)), k = 0;
    uint64_t nn = n, reject = (0 - nn) % nn; /* (2^64 − n) mod n: keeps u mod n unbiased */
    memset(cnt, 0, n * sizeof *cnt);
    for (size_t i = 0; i < n; i++) {
        uint64_t u;
        do
            u = mix(key + (k++) * 0xd1b54a32d192ed03ULL);
        while (u < reject);
        cnt[u % nn]++;
    }
    st[0] = moment_mean(xs, cnt, n, 1, 0);
    st[1] = moment_mean(xs, cnt, n, 3, 2);
    st[2] = moment_mean(xs, cnt, n, 4, 3);
    st[3] = pct_sorted(xs, ws, cnt, n, 0.5, SP_PCT_HAZEN);
}

static int dbl_cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

int sp_size_bootstrap(const double *d, size_t n, const sp_boot_opts *o, sp_size_boot *out, double *reps,
                      sp_error *err)
{
    sp_boot_opts def;
    if (!o) {
        sp_boot_opts_default(&def);
        o = &def;
    }
    int rc = check_values(d, n, "diameters", err);
    if (rc)
        return rc;
    if (n > UINT32_MAX)
        return sp_error_set(err, SP_ERR_INPUT, "bootstrap: %zu diameters is too many", n);
    if (o->replicates < 10 || o->replicates > 1000000)
        return sp_error_set(err, SP_ERR_INPUT, "bootstrap: %d replicates is outside 10..1000000",
                            o->replicates);
    if (!(o->conf > 0.0 && o->conf < 1.0))
        return sp_error_set(err, SP_ERR_INPUT, "bootstrap: confidence %g is outside (0, 1)", o->conf);
    if (o->threads < 0)
        return sp_error_set(err, SP_ERR_INPUT, "bootstrap: %d threads", o->threads);

    int B = o->replicates;
    pair *p = malloc(n * sizeof *p);
    double *xs = malloc(n * sizeof *xs), *ws = malloc(n * sizeof *ws);
    double *st = malloc((size_t)B * 4 * sizeof *st), *col = malloc((size_t)B * sizeof *col);
    int failed = 0;
    if (!p || !xs || !ws || !st || !col) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "bootstrap: out of memory for %zu values, %d replicates", n,
                          B);
        goto fail;
    }
    for (size_t i = 0; i < n; i++)
        p[i].x = d[i], p[i].w = d[i] * d[i] * d[i];
    qsort(p, n, sizeof *p, pair_cmp);
    for (size_t i = 0; i < n; i++)
        xs[i] = p[i].x, ws[i] = p[i].w;

    /* Each replicate depends only on (seed, b) and writes its own slot: any thread count gives the
     * same numbers. */
    int nt = o->threads > 0 ? o->threads : omp_get_max_threads();
    if (nt > B)
        nt = B;
#pragma omp parallel num_threads(nt) reduction(| : failed)
    {
        uint32_t *cnt = malloc(n * sizeof *cnt);
        if (!cnt)
            failed = 1;
#pragma omp for schedule(static)
        for (int b = 0; b < B; b++) {
            double s[4];
            if (!cnt)
                continue;
            replicate(xs, ws, n, o->seed, b, cnt, s);
            for (int k = 0; k < 4; k++)
                st[(size_t)k * B + b] = s[k];
        }
        free(cnt);
    }
    if (failed) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "bootstrap: out of memory for the resample counts");
        goto fail;
    }
    if (reps)
        memcpy(reps, st, (size_t)B * 4 * sizeof *st);

    sp_ci *ci[4] = {&out->d10, &out->d32, &out->d43, &out->dv50};
    double alpha = 1.0 - o->conf;
    ci[0]->est = moment_mean(xs, NULL, n, 1, 0);
    ci[1]->est = moment_mean(xs, NULL, n, 3, 2);
    ci[2]->est = moment_mean(xs, NULL, n, 4, 3);
    ci[3]->est = pct_sorted(xs, ws, NULL, n, 0.5, SP_PCT_HAZEN);
    for (int k = 0; k < 4; k++) {
        memcpy(col, st + (size_t)k * B, (size_t)B * sizeof *col);
        qsort(col, (size_t)B, sizeof *col, dbl_cmp);
        ci[k]->lo = pct_sorted(col, NULL, NULL, (size_t)B, alpha / 2, SP_PCT_LINEAR);
        ci[k]->hi = pct_sorted(col, NULL, NULL, (size_t)B, 1.0 - alpha / 2, SP_PCT_LINEAR);
    }
    rc = SP_OK;
fail:
    free(p);
    free(xs);
    free(ws);
    free(st);
    free(col);
    return rc;
}

/* Nucleation sites from synthetic birth lists: several sites with jittered birth points, different
 * emission rates, detachment sizes and growth rates, plus noise births and tracks that enter from
 * the border. Checks recovery of every site's statistics against the generating values, the
 * per-track assignment, independence from input order, option errors, and a large list. */
#include "check.h"
#include "track/sites.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

/* splitmix64 (Steele, Lea & Flood 2014) as a small seeded generator for the test data. */
static uint64_t rs = 12345;
static double unit(void)
{
    uint64_t z = (rs += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    z ^= z >> 31;
    return ((double)(z >> 11) + 0.5) / 9007199254740992.0;
}
static double normal(void)
{
    return sqrt(-2.0 * log(unit())) * cos(6.283185307179586 * unit());
}

typedef struct gen_site {
    double x, y, rate_hz, cv, d0, growth;
} gen_site;

/* Births over [0, T): site k emits with intervals (1 + cv·N(0,1))/rate, the birth point jittered
 * by a tenth of the detachment diameter sideways and upward by up to half a diameter (a first
 * detection a little after detachment). truth[i] = generating site (1-based) or 0. */
static size_t make_births(const gen_site *gs, int ns, double T, int noise, int entering, sp_birth *b,
                          int *truth, double *t_first, double *t_last, int64_t *count)
{
    size_t n = 0;
    for (int k = 0; k < ns; k++) {
        double t = unit() / gs[k].rate_hz;
        count[k] = 0;
        while (t < T) {
            sp_birth *p = &b[n];
            memset(p, 0, sizeof *p);
            p->track = 1000 * (k + 1) + count[k];
            double d0 = gs[k].d0 * (1.0 + 0.05 * normal());
            p->x0_mm = gs[k].x + 0.1 * gs[k].d0 * normal();
            p->y0_mm = gs[k].y + 0.5 * gs[k].d0 * unit();
            p->t0_s = t;
            p->d0_mm = d0;
            p->growth_mm_s = gs[k].growth * (1.0 + 0.05 * normal());
            p->born_inside = 1;
            truth[n++] = k + 1;
            if (count[k] == 0)
                t_first[k] = t;
            t_last[k] = t;
            count[k]++;
            t += fmax(0.2, 1.0 + gs[k].cv * normal()) / gs[k].rate_hz;
        }
    }
    for (int i = 0; i < noise; i++) { /* births anywhere: splits, re-found bubbles */
        sp_birth *p = &b[n];
        memset(p, 0, sizeof *p);
        p->track = 900000 + i;
        p->x0_mm = 6.0 * unit();
        p->y0_mm = 8.0 * unit();
        p->t0_s = T * unit();
        p->d0_mm = 0.05 + 0.2 * unit();
        p->growth_mm_s = 0.4;
        p->born_inside = 1;
        truth[n++] = 0;
    }
    for (int i = 0; i < entering; i++) { /* entered from the border, some right on a site */
        sp_birth *p = &b[n];
        memset(p, 0, sizeof *p);
        p->track = 800000 + i;
        p->x0_mm = i % 2 ? gs[i % ns].x : 6.0 * unit();
        p->y0_mm = i % 2 ? gs[i % ns].y : 0.0;
        p->t0_s = T * unit();
        p->d0_mm = 0.1;
        p->born_inside = 0;
        truth[n++] = 0;
    }
    return n;
}

/* Which found site lies nearest to generating site k. */
static int nearest_site(const sp_sites *r, double x, double y)
{
    int best = 0;
    double bd = INFINITY;
    for (size_t j = 0; j < r->nsites; j++) {
        double d = hypot(r->site[j].x_mm - x, r->site[j].y_mm - y);
        if (d < bd) {
            bd = d;
            best = r->site[j].id;
        }
    }
    return best;
}

static void test_recovery(void)
{
    /* Six sites 2-25 Hz (REFERENCES.md plausibility range for carbonated drinks), detachment
     * 0.04-0.2 mm, growth of the diameter 0.2-0.6 mm/s, two of them only 0.5 mm apart. */
    const gen_site gs[] = {
        {1.0, 1.0, 2.5, 0.08, 0.05, 0.30},  {2.2, 1.5, 5.0, 0.05, 0.08, 0.40},
        {2.7, 1.5, 9.0, 0.10, 0.12, 0.50},  {4.0, 3.0, 14.0, 0.06, 0.20, 0.25},
        {5.0, 0.8, 20.0, 0.05, 0.04, 0.60}, {3.3, 5.0, 25.0, 0.04, 0.10, 0.35},
    };
    const int ns = 6;
    const double T = 4.0;
    static sp_birth b[2000];
    static int truth[2000];
    double tf[6], tl[6];
    int64_t cnt[6];
    size_t n = make_births(gs, ns, T, 15, 30, b, truth, tf, tl, cnt);
    sp_sites r;
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_sites_find(b, n, NULL, &r, &err);
    CHECK(rc == SP_OK, "sites_find: %s", err.msg);
    CHECK(r.nsites == (size_t)ns, "found %zu sites, generated %d", r.nsites, ns);
    CHECK(r.ntracks == n, "track_site has %zu entries for %zu births", r.ntracks, n);
    int map[6];
    for (int k = 0; k < ns; k++) {
        map[k] = nearest_site(&r, gs[k].x, gs[k].y);
        CHECK(map[k] >= 1, "site %d not found", k + 1);
        if (map[k] < 1)
            continue;
        const sp_site *s = &r.site[map[k] - 1];
        CHECK(s->id == map[k], "site ids are their 1-based positions");
        /* Median birth point: sideways jitter 0.1 d0, upward offset uniform in [0, d0/2]. */
        CHECK_NEAR(s->x_mm, gs[k].x, 0.06 * gs[k].d0 + 1e-3, "site x");
        CHECK_NEAR(s->y_mm, gs[k].y + 0.25 * gs[k].d0, 0.1 * gs[k].d0, "site y");
        /* Noise births may fall within a site's radius and join it: allow one or two. */
        CHECK(s->n >= cnt[k] && s->n <= cnt[k] + 2, "site %d: n %lld, generated %lld", k + 1, (long long)s->n,
              (long long)cnt[k]);
        double rate_gen = (double)(cnt[k] - 1) / (tl[k] - tf[k]);
        CHECK_NEAR(s->rate_hz, rate_gen, 0.03 * rate_gen, "rate_hz");
        /* Rate also near the generating parameter, within the jitter of the intervals. */
        CHECK_NEAR(s->rate_hz, gs[k].rate_hz, 0.15 * gs[k].rate_hz, "rate_hz against the nominal rate");
        CHECK(s->interval_cv < 3.0 * gs[k].cv + 0.05, "site %d: cv %g, generated %g", k + 1, s->interval_cv,
              gs[k].cv);
        CHECK_NEAR(s->d_detach_mm, gs[k].d0, 0.05 * gs[k].d0, "d_detach_mm");
        CHECK_NEAR(s->growth_mm_s, gs[k].growth, 0.05 * gs[k].growth, "growth_mm_s");
        CHECK(s->spread_mm < 0.5 * gs[k].d0, "site %d: spread %g mm", k + 1, s->spread_mm);
    }
    for (size_t j = 1; j < r.nsites; j++)
        CHECK(r.site[j - 1].x_mm <= r.site[j].x_mm, "sites ordered by x");
    /* Assignment: every generated birth at its site; entering tracks never; noise mostly none. */
    size_t wrong = 0, noise_in = 0;
    for (size_t i = 0; i < n; i++) {
        if (truth[i] > 0)
            wrong += r.track_site[i] != map[truth[i] - 1];
        else if (!b[i].born_inside)
            CHECK(r.track_site[i] == 0, "entering track %lld assigned to site %d", (long long)b[i].track,
                  r.track_site[i]);
        else
            noise_in += r.track_site[i] != 0;
    }
    CHECK(wrong == 0, "%zu site births assigned to the wrong site", wrong);
    CHECK(noise_in <= 2, "%zu of 15 noise births joined a site", noise_in);

    /* Input order does not matter: reverse and shuffle, compare site tables and assignments. */
    static sp_birth b2[2000];
    static size_t perm[2000];
    for (size_t i = 0; i < n; i++)
        perm[i] = i;
    for (size_t i = n - 1; i > 0; i--) {
        size_t j = (size_t)(unit() * (double)(i + 1));
        size_t t = perm[i];
        perm[i] = perm[j];
        perm[j] = t;
    }
    for (size_t i = 0; i < n; i++)
        b2[i] = b[perm[i]];
    sp_sites r2;
    rc = sp_sites_find(b2, n, NULL, &r2, &err);
    CHECK(rc == SP_OK && r2.nsites == r.nsites, "shuffled: %zu sites", r2.nsites);
    if (rc == SP_OK && r2.nsites == r.nsites) {
        int same = 1;
        for (size_t j = 0; j < r.nsites; j++) {
            const sp_site *p = &r.site[j], *q = &r2.site[j];
            same &= p->id == q->id && p->n == q->n && p->x_mm == q->x_mm && p->y_mm == q->y_mm &&
                    p->rate_hz == q->rate_hz && p->d_detach_mm == q->d_detach_mm &&
                    p->growth_mm_s == q->growth_mm_s && p->t_first_s == q->t_first_s;
        }
        CHECK(same, "shuffled input gives a different site table");
        size_t diff = 0;
        for (size_t i = 0; i < n; i++)
            diff += r2.track_site[i] != r.track_site[perm[i]];
        CHECK(diff == 0, "shuffled input: %zu assignments differ", diff);
    }
    sp_sites_free(&r2);
    sp_sites_free(&r);
}

/* A perfectly periodic train: rate exactly f, CV 0; a fourth birth far away is noise. */
static void test_exact(void)
{
    sp_birth b[12];
    memset(b, 0, sizeof b);
    for (int i = 0; i < 11; i++) {
        b[i].track = i + 1;
        b[i].x0_mm = 2.0;
        b[i].y0_mm = 3.0 + 0.001 * (i % 3);
        b[i].t0_s = 0.25 + i / 8.0;
        b[i].d0_mm = 0.1 + 0.01 * i;
        b[i].growth_mm_s = 0.5 + 0.01 * i;
        b[i].born_inside = 1;
    }
    b[11] = b[0];
    b[11].track = 99;
    b[11].x0_mm = 4.0;
    sp_sites r;
    sp_error err;
    int rc = sp_sites_find(b, 12, NULL, &r, &err);
    CHECK(rc == SP_OK && r.nsites == 1, "exact train: %zu sites", r.nsites);
    if (r.nsites == 1) {
        CHECK_NEAR(r.site[0].rate_hz, 8.0, 1e-12, "rate of an 8 Hz train");
        CHECK_NEAR(r.site[0].interval_cv, 0.0, 1e-12, "cv of a periodic train");
        CHECK_NEAR(r.site[0].d_detach_mm, 0.15, 1e-12, "median of 0.10..0.20");
        CHECK_NEAR(r.site[0].growth_mm_s, 0.55, 1e-12, "median growth");
        CHECK_NEAR(r.site[0].y_mm, 3.001, 1e-12, "median y");
        CHECK(r.site[0].n == 11, "n %lld", (long long)r.site[0].n);
        CHECK_NEAR(r.site[0].t_first_s, 0.25, 1e-12, "t_first");
        CHECK_NEAR(r.site[0].t_last_s, 1.5, 1e-12, "t_last");
    }
    CHECK(r.track_site[11] == 0 && r.track_site[0] == 1, "assignment %d %d", r.track_site[0],
          r.track_site[11]);
    sp_sites_free(&r);

    /* Two births only: below min_births (3), no site; with min_births 2, one site at 8 Hz. */
    rc = sp_sites_find(b, 2, NULL, &r, &err);
    CHECK(rc == SP_OK && r.nsites == 0, "two births make %zu sites", r.nsites);
    sp_sites_free(&r);
    sp_sites_opts o;
    sp_sites_opts_default(&o);
    o.min_births = 2;
    rc = sp_sites_find(b, 2, &o, &r, &err);
    CHECK(rc == SP_OK && r.nsites == 1 && fabs(r.site[0].rate_hz - 8.0) < 1e-12, "min_births 2");
    if (r.nsites == 1)
        CHECK(isnan(r.site[0].interval_cv), "cv of a single interval is NaN");
    sp_sites_free(&r);
}

/* Radius: two trains 0.3 mm apart with 0.1 mm bubbles are two sites at 2 diameters, one with a
 * fixed 0.5 mm radius; births with unknown size use the median size. */
static void test_radius(void)
{
    sp_birth b[20];
    memset(b, 0, sizeof b);
    for (int i = 0; i < 20; i++) {
        b[i].track = i + 1;
        b[i].x0_mm = i < 10 ? 1.0 : 1.3;
        b[i].y0_mm = 1.0;
        b[i].t0_s = 0.1 * i;
        b[i].d0_mm = i == 3 ? NAN : 0.1;
        b[i].growth_mm_s = NAN;
        b[i].born_inside = 1;
    }
    sp_sites r;
    sp_error err;
    int rc = sp_sites_find(b, 20, NULL, &r, &err);
    CHECK(rc == SP_OK && r.nsites == 2, "0.3 mm apart at 0.2 mm radius: %zu sites", r.nsites);
    if (r.nsites == 2) {
        CHECK(r.site[0].x_mm == 1.0 && r.site[1].x_mm == 1.3, "ordered by x");
        CHECK(isnan(r.site[0].growth_mm_s), "growth unknown -> NaN");
        CHECK(r.track_site[3] == 1, "a birth of unknown size still joins its site");
    }
    sp_sites_free(&r);
    sp_sites_opts o;
    sp_sites_opts_default(&o);
    o.eps_mm = 0.5;
    o.max_spread = 0; /* these merges are the point here, not a fixed site */
    rc = sp_sites_find(b, 20, &o, &r, &err);
    CHECK(rc == SP_OK && r.nsites == 1 && r.site[0].n == 20, "fixed 0.5 mm radius merges them");
    sp_sites_free(&r);
    /* Vertical distances count half: trains 0.3 mm apart vertically merge at 0.2 mm radius. */
    for (int i = 10; i < 20; i++) {
        b[i].x0_mm = 1.0;
        b[i].y0_mm = 1.3;
    }
    sp_sites_opts merge;
    sp_sites_opts_default(&merge);
    merge.max_spread = 0;
    rc = sp_sites_find(b, 20, &merge, &r, &err);
    CHECK(rc == SP_OK && r.nsites == 1, "0.3 mm apart vertically, weight 0.5: %zu sites", r.nsites);
    sp_sites_free(&r);
    o.eps_mm = 0;
    o.y_weight = 1.0;
    o.max_spread = 0.5;
    rc = sp_sites_find(b, 20, &o, &r, &err);
    CHECK(rc == SP_OK && r.nsites == 2, "vertical weight 1: %zu sites", r.nsites);
    sp_sites_free(&r);
}

static void test_errors(void)
{
    sp_birth b[3];
    memset(b, 0, sizeof b);
    sp_sites r;
    sp_error err;
    sp_sites_opts o;
    sp_sites_opts_default(&o);
    o.min_births = 1;
    sp_error_clear(&err);
    CHECK(sp_sites_find(b, 3, &o, &r, &err) == SP_ERR_INPUT && strstr(err.msg, "min_births"),
          "min_births 1: %s", err.msg);
    CHECK(r.site == NULL && r.track_site == NULL, "nothing allocated on error");
    sp_sites_opts_default(&o);
    o.eps_diam = -1;
    CHECK(sp_sites_find(b, 3, &o, &r, &err) == SP_ERR_INPUT && strchr(err.msg, '\n') == NULL,
          "negative radius");
    sp_sites_opts_default(&o);
    o.y_weight = NAN;
    CHECK(sp_sites_find(b, 3, &o, &r, &err) == SP_ERR_INPUT, "NaN y_weight");
    /* Empty input, all entering, non-finite points: no sites, no failure. */
    CHECK(sp_sites_find(NULL, 0, NULL, &r, &err) == SP_OK && r.nsites == 0, "empty input");
    sp_sites_free(&r);
    for (int i = 0; i < 3; i++) {
        b[i].x0_mm = 1;
        b[i].y0_mm = 1;
        b[i].t0_s = i;
        b[i].d0_mm = 0.1;
    }
    CHECK(sp_sites_find(b, 3, NULL, &r, &err) == SP_OK && r.nsites == 0, "entering tracks are not births");
    sp_sites_free(&r);
    for (int i = 0; i < 3; i++)
        b[i].born_inside = 1;
    b[1].x0_mm = NAN;
    CHECK(sp_sites_find(b, 3, NULL, &r, &err) == SP_OK && r.nsites == 0 && r.track_site[1] == 0,
          "a non-finite birth point is skipped");
    sp_sites_free(&r);
}

/* 200 sites × 500 births and 200 noise births: every site found with its births (the grid hash
 * keeps this fast); the noise is sparse but may form a few three-birth clusters by chance. */
static void test_large(void)
{
    enum { NS = 200, PER = 500, NOISE = 200 };
    size_t n = (size_t)NS * PER + NOISE;
    sp_birth *b = calloc(n, sizeof *b);
    if (!b) {
        CHECK(0, "out of memory");
        return;
    }
    size_t k = 0;
    for (int s = 0; s < NS; s++)
        for (int e = 0; e < PER; e++, k++) {
            b[k].track = (int64_t)k + 1;
            b[k].x0_mm = 1.0 * (s % 20) + 0.01 * normal();
            b[k].y0_mm = 1.0 * (s / 20) + 0.01 * normal();
            b[k].t0_s = e / 10.0;
            b[k].d0_mm = 0.1;
            b[k].growth_mm_s = 0.4;
            b[k].born_inside = 1;
        }
    for (int e = 0; e < NOISE; e++, k++) {
        b[k].track = (int64_t)k + 1;
        b[k].x0_mm = 20.0 * unit() - 0.5;
        b[k].y0_mm = 10.0 * unit() - 0.5;
        b[k].t0_s = 50.0 * unit();
        b[k].d0_mm = 0.1;
        b[k].born_inside = 1;
    }
    sp_sites r;
    sp_error err;
    int rc = sp_sites_find(b, n, NULL, &r, &err);
    CHECK(rc == SP_OK && r.nsites >= NS && r.nsites <= NS + 5, "large: %zu sites for %d", r.nsites, NS);
    int missing = 0;
    for (int s = 0; s < NS && rc == SP_OK; s++) {
        int id = nearest_site(&r, 1.0 * (s % 20), 1.0 * (s / 20));
        const sp_site *p = id ? &r.site[id - 1] : NULL;
        missing += !p || hypot(p->x_mm - s % 20, p->y_mm - s / 20) > 0.01 || p->n < PER || p->n > PER + 3 ||
                   fabs(p->rate_hz - 10.0) > 0.2;
    }
    CHECK(missing == 0, "large: %d sites not recovered", missing);
    sp_sites_free(&r);
    free(b);
}

int main(void)
{
    test_recovery();
    test_exact();
    test_radius();
    test_errors();
    test_large();
    return check_report();
}

/* Probe for the reference tests of the size statistics. Values come on stdin, one per line, as
 * "x" or "x w"; results go to stdout with 17 significant digits.
 *
 *   probe_stats_size pct RULE P...      RULE linear|hazen|icdf; weights used when given; one line per P
 *   probe_stats_size vpct RULE P...     percentiles of x weighted by x³
 *   probe_stats_size mean P Q           D[P,Q]
 *   probe_stats_size summary            n d10 d30 d32 d43 d50 dv10 dv50 dv90
 *   probe_stats_size hist POWER E0 E1 ...   one line per bin, then "outside W"
 *   probe_stats_size boot B SEED CONF THREADS
 *       "est lo hi" for d10, d32, d43, dv50, then the 4·B replicate values, one per line
 */
#include "stats/sizestats.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int read_values(double **x, double **w, size_t *n)
{
    size_t cap = 1024, k = 0;
    int weighted = -1;
    char line[256];
    *x = malloc(cap * sizeof **x);
    *w = malloc(cap * sizeof **w);
    if (!*x || !*w)
        return -1;
    while (fgets(line, sizeof line, stdin)) {
        double a, b;
        int got = sscanf(line, "%lf %lf", &a, &b);
        if (got < 1)
            continue;
        if (weighted < 0)
            weighted = got == 2;
        if (k == cap) {
            cap *= 2;
            double *nx = realloc(*x, cap * sizeof **x), *nw = realloc(*w, cap * sizeof **w);
            if (!nx || !nw)
                return -1;
            *x = nx, *w = nw;
        }
        (*x)[k] = a;
        (*w)[k] = got == 2 ? b : 1.0;
        k++;
    }
    *n = k;
    if (weighted != 1) {
        free(*w);
        *w = NULL;
    }
    return 0;
}

static int rule_of(const char *s)
{
    return !strcmp(s, "linear") ? SP_PCT_LINEAR : !strcmp(s, "hazen") ? SP_PCT_HAZEN : SP_PCT_INVERTED_CDF;
}

int main(int argc, char **argv)
{
    double *x = NULL, *w = NULL;
    size_t n = 0;
    sp_error err;
    int rc = 0;
    if (argc < 2 || read_values(&x, &w, &n)) {
        fprintf(stderr, "usage: see the comment at the top of stats_size.c\n");
        return 2;
    }
    if ((!strcmp(argv[1], "pct") || !strcmp(argv[1], "vpct")) && argc >= 3) {
        for (int i = 3; i < argc && !rc; i++) {
            double v;
            if (!strcmp(argv[1], "pct"))
                rc = sp_weighted_percentile(x, w, n, atof(argv[i]), (sp_pct_rule)rule_of(argv[2]), &v, &err);
            else
                rc = sp_size_percentile(x, n, 3, atof(argv[i]), (sp_pct_rule)rule_of(argv[2]), &v, &err);
            if (!rc)
                printf("%.17g\n", v);
        }
    } else if (!strcmp(argv[1], "mean") && argc == 4) {
        double v;
        if (!(rc = sp_size_moment_mean(x, n, atof(argv[2]), atof(argv[3]), &v, &err)))
            printf("%.17g\n", v);
    } else if (!strcmp(argv[1], "summary")) {
        sp_size_summary s;
        if (!(rc = sp_size_summarise(x, n, &s, &err)))
            printf("%zu %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g\n", s.n, s.d10, s.d30, s.d32, s.d43,
                   s.d50, s.dv10, s.dv50, s.dv90);
    } else if (!strcmp(argv[1], "hist") && argc >= 5) {
        int ne = argc - 3;
        double *e = malloc((size_t)ne * sizeof *e), *h = malloc((size_t)ne * sizeof *h), out;
        for (int i = 0; e && i < ne; i++)
            e[i] = atof(argv[3 + i]);
        if (!e || !h)
            rc = 1;
        else if (!(rc = sp_size_hist(x, n, e, ne, atoi(argv[2]), h, &out, &err))) {
            for (int i = 0; i < ne - 1; i++)
                printf("%.17g\n", h[i]);
            printf("outside %.17g\n", out);
        }
        free(e);
        free(h);
    } else if (!strcmp(argv[1], "boot") && argc == 6) {
        sp_boot_opts o;
        sp_size_boot b;
        sp_boot_opts_default(&o);
        o.replicates = atoi(argv[2]);
        o.seed = strtoull(argv[3], NULL, 10);
        o.conf = atof(argv[4]);
        o.threads = atoi(argv[5]);
        double *reps = malloc((size_t)(o.replicates > 0 ? o.replicates : 1) * 4 * sizeof *reps);
        if (!reps)
            rc = 1;
        else if (!(rc = sp_size_bootstrap(x, n, &o, &b, reps, &err))) {
            sp_ci *c[4] = {&b.d10, &b.d32, &b.d43, &b.dv50};
            for (int k = 0; k < 4; k++)
                printf("%.17g %.17g %.17g\n", c[k]->est, c[k]->lo, c[k]->hi);
            for (int i = 0; i < 4 * o.replicates; i++)
                printf("%.17g\n", reps[i]);
        }
        free(reps);
    } else {
        fprintf(stderr, "usage: see the comment at the top of stats_size.c\n");
        rc = 2;
    }
    if (rc)
        fprintf(stderr, "%s\n", err.msg);
    free(x);
    free(w);
    return rc;
}

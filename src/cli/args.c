/* Shared argument parsing and terminal progress for the spume commands. */
#include "cli/args.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

int usage_error(const char *cmd, const char *fmt, const char *arg)
{
    fprintf(stderr, "spume %s: ", cmd);
    fprintf(stderr, fmt, arg);
    fprintf(stderr, " (see 'spume help %s')\n", cmd);
    return 2;
}

int parse_double(const char *cmd, const char *opt, const char *s, double *v)
{
    char *end;
    errno = 0;
    double d = strtod(s, &end);
    if (errno || end == s || *end || !isfinite(d)) {
        fprintf(stderr, "spume %s: %s: '%s' is not a number\n", cmd, opt, s);
        return 2;
    }
    *v = d;
    return 0;
}

int parse_int(const char *cmd, const char *opt, const char *s, long long lo, long long hi, long long *v)
{
    char *end;
    errno = 0;
    long long d = strtoll(s, &end, 10);
    if (errno || end == s || *end || d < lo || d > hi) {
        fprintf(stderr, "spume %s: %s: '%s' is not a whole number in %lld..%lld\n", cmd, opt, s, lo, hi);
        return 2;
    }
    *v = d;
    return 0;
}

double wall(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + ts.tv_nsec * 1e-9;
}

void on_progress(void *ud, const sp_progress *p)
{
    progress_state *ps = ud;
    if (!ps->show)
        return;
    double t = wall();
    if (t - ps->last < 0.25 && !(p->total > 0 && p->done >= p->total))
        return;
    ps->last = t;
    double rate = p->elapsed_s > 0 ? p->done / p->elapsed_s : 0;
    if (p->total > 0) {
        double left = rate > 0 ? (p->total - p->done) / rate : 0;
        fprintf(stderr, "\r%-10s %lld/%lld frames  %.0f frames/s  %.0f s left   ", p->phase,
                (long long)p->done, (long long)p->total, rate, left);
    } else {
        fprintf(stderr, "\r%-10s %lld frames  %.0f frames/s   ", p->phase, (long long)p->done, rate);
    }
    fflush(stderr);
}

void end_progress(progress_state *ps)
{
    if (ps->show && ps->last > 0)
        fprintf(stderr, "\r%-70s\r", "");
}

int args_positional(const char *cmd, const char *a, const char **positional)
{
    if (a[0] == '-' && a[1])
        return usage_error(cmd, "unknown option '%s'", a);
    if (positional && !*positional) {
        *positional = a;
        return 0;
    }
    return usage_error(cmd, "unexpected argument '%s'", a);
}

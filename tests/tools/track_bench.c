/* Benchmark (not a test): linking cost per frame with 10 .. 10,000 bubbles in view.
 *
 * Bubbles at a fixed density (one per 40 × 40 px) rise at 3-8 px/frame with a random lateral
 * walk, jitter and 2 % missed detections; those leaving the top re-enter at the bottom as new
 * bubbles. The time of sp_linker_push (including popping and freeing ended tracks) is averaged over
 * the frames after a warm-up, and divided by n·log2(n) to show how the cost grows. Invented data;
 * timings depend on the machine. Usage: probe_track_bench [max_n] */
#include "track/linker.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

static unsigned long long st = 0x2545F4914F6CDD1DULL;
static double urand(void)
{
    st ^= st >> 12;
    st ^= st << 25;
    st ^= st >> 27;
    return (double)((st * 2685821657736338717ULL) >> 11) / 9007199254740992.0;
}
static double nrand(void)
{
    return sqrt(-2 * log(urand() + 1e-300)) * cos(2 * M_PI * urand());
}

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

typedef struct {
    double x, y, vx, vy, d;
} bub;

int main(int argc, char **argv)
{
    int maxn = argc > 1 ? atoi(argv[1]) : 10000;
    printf("%8s %8s %12s %14s %16s %10s\n", "bubbles", "frames", "us/frame", "us/detection", "ns/(n log2 n)",
           "active");
    for (int n = 10; n <= maxn; n *= 10) {
        const double side = 40 * sqrt((double)n);
        const int warm = 20, frames = warm + (n >= 10000 ? 200 : n >= 1000 ? 500 : 2000);
        bub *b = malloc(sizeof *b * (size_t)n);
        sp_link_det *d = malloc(sizeof *d * (size_t)n);
        int64_t *ids = malloc(sizeof *ids * (size_t)n);
        sp_linker *lk;
        sp_error err;
        if (!b || !d || !ids || sp_linker_new(&lk, NULL, &err))
            return 1;
        for (int i = 0; i < n; i++)
            b[i] = (bub){urand() * side, urand() * side, nrand(), -3 - 5 * urand(), 4 + 10 * urand()};
        double t_link = 0;
        long dets = 0;
        for (int f = 0; f < frames; f++) {
            int m = 0;
            for (int i = 0; i < n; i++) {
                bub *q = &b[i];
                q->vx += 0.2 * nrand();
                q->x += q->vx + 0.2 * nrand();
                q->y += q->vy + 0.2 * nrand();
                if (q->y < 0)
                    *q = (bub){urand() * side, side, nrand(), -3 - 5 * urand(), 4 + 10 * urand()};
                if (urand() < 0.02)
                    continue;
                d[m++] = (sp_link_det){q->x, q->y, q->d * (1 + 0.03 * nrand()), 0.8, 0, q->d * q->d, 0};
            }
            double t0 = now();
            if (sp_linker_push(lk, f, f / 1000.0, d, m, ids, &err)) {
                fprintf(stderr, "%s\n", err.msg);
                return 1;
            }
            sp_track *t;
            while (sp_linker_pop_ended(lk, &t))
                sp_track_free(t);
            double t1 = now();
            if (f >= warm) {
                t_link += t1 - t0;
                dets += m;
            }
        }
        int nf = frames - warm;
        double us = 1e6 * t_link / nf;
        printf("%8d %8d %12.1f %14.3f %16.2f %10d\n", n, nf, us, 1e6 * t_link / dets,
               1e3 * us / (n * log2(n)), sp_linker_active(lk));
        sp_linker_finish(lk);
        sp_track *t;
        while (sp_linker_pop_ended(lk, &t))
            sp_track_free(t);
        sp_linker_free(lk);
        free(b);
        free(d);
        free(ids);
    }
    return 0;
}

/* Assignment solver: published example, brute force on small matrices, shapes, bad input. */
#include "check.h"
#include "track/assign.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static unsigned long long rng_state = 88172645463325252ULL;
static double urand(void)
{
    /* xorshift64*: invented test data, reproducible. */
    rng_state ^= rng_state >> 12;
    rng_state ^= rng_state << 25;
    rng_state ^= rng_state >> 27;
    return (double)((rng_state * 2685821657736338717ULL) >> 11) / 9007199254740992.0;
}

/* Smallest total over all ways to give each of the min(nr, nc) smaller-side items a distinct
 * partner, by exhaustive search; INFINITY if none. */
static double brute(const double *c, int nr, int nc, int r, unsigned used, double acc)
{
    if (nr <= nc) {
        if (r == nr)
            return acc;
        double best = INFINITY;
        for (int j = 0; j < nc; j++)
            if (!(used & (1u << j)) && c[r * nc + j] < INFINITY) {
                double v = brute(c, nr, nc, r + 1, used | (1u << j), acc + c[r * nc + j]);
                if (v < best)
                    best = v;
            }
        return best;
    }
    /* More rows than columns: walk columns instead. */
    if (r == nc)
        return acc;
    double best = INFINITY;
    for (int i = 0; i < nr; i++)
        if (!(used & (1u << i)) && c[i * nc + r] < INFINITY) {
            double v = brute(c, nr, nc, r + 1, used | (1u << i), acc + c[i * nc + r]);
            if (v < best)
                best = v;
        }
    return best;
}

int main(void)
{
    sp_error err;
    /* REFERENCES.md: Kuhn 1955 / Munkres 1957 / Jonker & Volgenant 1987 example. */
    {
        const double c[9] = {4, 1, 3, 2, 0, 5, 3, 2, 2};
        int col[3];
        double tot;
        CHECK(sp_assign_dense(c, 3, 3, col, &tot, &err) == 0, "%s", err.msg);
        CHECK(col[0] == 1 && col[1] == 0 && col[2] == 2, "columns %d %d %d", col[0], col[1], col[2]);
        CHECK_NEAR(tot, 5, 0, "published total");
    }
    /* Random shapes up to 7 × 7, integer and real costs, some forbidden entries. */
    int cases = 0, mism = 0, infeas_ok = 0;
    for (int it = 0; it < 3000; it++) {
        int nr = 1 + (int)(urand() * 7), nc = 1 + (int)(urand() * 7);
        double c[49];
        double pforb = it % 3 == 0 ? 0.3 : 0;
        for (int k = 0; k < nr * nc; k++) {
            c[k] = it % 2 ? floor(urand() * 5) : urand() * 100 - 50;
            if (urand() < pforb)
                c[k] = INFINITY;
        }
        double want = brute(c, nr, nc, 0, 0, 0);
        int col[7];
        double tot;
        int rc = sp_assign_dense(c, nr, nc, col, &tot, &err);
        if (want == INFINITY) {
            infeas_ok += rc == SP_ERR_INPUT && strstr(err.msg, "assignment") != NULL;
            CHECK(rc == SP_ERR_INPUT, "case %d: infeasible problem not reported", it);
            continue;
        }
        cases++;
        if (rc != 0 || fabs(tot - want) > 1e-9 * (1 + fabs(want))) {
            mism++;
            continue;
        }
        /* The reported columns must be distinct, allowed, and add up to the total. */
        double s = 0;
        unsigned used = 0;
        int nass = 0, ok = 1;
        for (int i = 0; i < nr; i++) {
            if (col[i] < 0)
                continue;
            ok &= col[i] < nc && !(used & (1u << col[i])) && c[i * nc + col[i]] < INFINITY;
            used |= 1u << col[i];
            s += c[i * nc + col[i]];
            nass++;
        }
        ok &= nass == (nr < nc ? nr : nc) && fabs(s - tot) <= 1e-9 * (1 + fabs(s));
        mism += !ok;
    }
    CHECK(mism == 0, "%d of %d random problems not optimal or inconsistent", mism, cases);
    CHECK(cases > 2000, "only %d feasible cases", cases);
    printf("random: %d feasible cases optimal, %d infeasible reported\n", cases, infeas_ok);

    /* Sparse: two independent blocks (the gating graph's components) solve to the sum of optima. */
    {
        /* rows 0,1 -> cols 0,1 ; rows 2,3 -> cols 2,3,4 */
        int start[5] = {0, 2, 4, 7, 9};
        int col[9] = {0, 1, 0, 1, 2, 3, 4, 3, 4};
        double cost[9] = {1, 2, 2, 10, 5, 1, 3, 1, 7};
        sp_assign_sparse m = {4, 5, start, col, cost};
        sp_assigner *a = sp_assigner_new();
        int r2c[4];
        double tot;
        CHECK(a && sp_assign_sparse_solve(a, &m, r2c, &tot, &err) == 0, "%s", err.msg);
        /* block 1: min(1+10, 2+2) = 4 ; block 2: min over {5+1, 5+7, 1+?..} rows2:{2:5,3:1,4:3}
           row3:{3:1,4:7}
           -> (2->2,3->3)=6, (2->4,3->3)=4, (2->3,3->4)=8, (2->2,3->4)=12: 4. Total 8. */
        CHECK_NEAR(tot, 8, 1e-12, "two blocks");
        CHECK(r2c[0] == 1 && r2c[1] == 0 && r2c[2] == 4 && r2c[3] == 3, "%d %d %d %d", r2c[0], r2c[1], r2c[2],
              r2c[3]);
        /* Reuse of the workspace on a bigger problem, then malformed input. */
        int bad_col[9] = {0, 1, 0, 1, 2, 3, 9, 3, 4};
        sp_assign_sparse mb = {4, 5, start, bad_col, cost};
        CHECK(sp_assign_sparse_solve(a, &mb, r2c, &tot, &err) == SP_ERR_INPUT, "bad column accepted");
        sp_assign_sparse mr = {5, 4, start, col, cost};
        CHECK(sp_assign_sparse_solve(a, &mr, r2c, &tot, &err) == SP_ERR_INPUT, "rows > cols accepted");
        sp_assigner_free(a);
    }
    /* NaN and -inf are bad input; empty shapes are fine. */
    {
        double c[4] = {1, NAN, 2, 3};
        int col[2];
        CHECK(sp_assign_dense(c, 2, 2, col, NULL, &err) == SP_ERR_INPUT, "NaN accepted");
        c[1] = -INFINITY;
        CHECK(sp_assign_dense(c, 2, 2, col, NULL, &err) == SP_ERR_INPUT, "-inf accepted");
        double tot = 7;
        CHECK(sp_assign_dense(c, 2, 0, col, &tot, &err) == 0 && col[0] == -1 && col[1] == -1 && tot == 0,
              "empty columns");
    }
    /* A large banded problem (each row sees 3 columns) stays exact: cost i-th row to col i is 0. */
    {
        enum { N = 200000 };
        int *start = malloc(sizeof(int) * (N + 1)), *col = malloc(sizeof(int) * 3 * N),
            *r2c = malloc(sizeof(int) * N);
        double *cost = malloc(sizeof(double) * 3 * N);
        int k = 0;
        for (int i = 0; i < N; i++) {
            start[i] = k;
            for (int dj = -1; dj <= 1; dj++) {
                int j = i + dj;
                if (j < 0 || j >= N)
                    continue;
                col[k] = j;
                cost[k++] = dj == 0 ? 0 : 1;
            }
        }
        start[N] = k;
        sp_assign_sparse m = {N, N, start, col, cost};
        sp_assigner *a = sp_assigner_new();
        double tot = -1;
        CHECK(sp_assign_sparse_solve(a, &m, r2c, &tot, &err) == 0 && tot == 0, "banded total %g", tot);
        sp_assigner_free(a);
        free(start);
        free(col);
        free(r2c);
        free(cost);
    }
    return check_report();
}

/* Linear assignment by shortest augmenting paths (Jonker & Volgenant 1987), sparse form.
 *
 * Rows are added one at a time. For each new row a Dijkstra search over reduced costs
 * c(i,j) - u(i) - v(j) >= 0 finds the cheapest alternating path to a free column; the dual
 * potentials are then updated so every reduced cost stays non-negative, and the path is flipped.
 * The dense textbook version scans all columns per step; here the candidates come from a binary
 * heap fed only by listed pairs, so work stays inside the row's connected component of the gating
 * graph and grows with the number of pairs touched, not with rows × cols. */
#include "track/assign.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct hnode {
    double d;
    int busy; /* 0 for a free column, so that among equal distances a free column ends the search */
    int j;
} hnode;

struct sp_assigner {
    int rcap, ccap;
    double *u, *v, *spc;
    int *row4col, *path, *srlist, *sclist, *touched;
    unsigned char *sr, *sc;
    hnode *heap;
    size_t hn, hcap;
};

sp_assigner *sp_assigner_new(void)
{
    return calloc(1, sizeof(sp_assigner));
}

void sp_assigner_free(sp_assigner *a)
{
    if (!a)
        return;
    free(a->u);
    free(a->v);
    free(a->spc);
    free(a->row4col);
    free(a->path);
    free(a->srlist);
    free(a->sclist);
    free(a->touched);
    free(a->sr);
    free(a->sc);
    free(a->heap);
    free(a);
}

static int grow(void **p, size_t n, size_t size)
{
    void *q = realloc(*p, (n ? n : 1) * size);
    if (!q)
        return -1;
    *p = q;
    return 0;
}

static int reserve(sp_assigner *a, int rows, int cols)
{
    if (rows > a->rcap) {
        if (grow((void **)&a->u, (size_t)rows, sizeof(double)) ||
            grow((void **)&a->srlist, (size_t)rows, sizeof(int)) || grow((void **)&a->sr, (size_t)rows, 1))
            return -1;
        a->rcap = rows;
    }
    if (cols > a->ccap) {
        if (grow((void **)&a->v, (size_t)cols, sizeof(double)) ||
            grow((void **)&a->spc, (size_t)cols, sizeof(double)) ||
            grow((void **)&a->row4col, (size_t)cols, sizeof(int)) ||
            grow((void **)&a->path, (size_t)cols, sizeof(int)) ||
            grow((void **)&a->sclist, (size_t)cols, sizeof(int)) ||
            grow((void **)&a->touched, (size_t)cols, sizeof(int)) || grow((void **)&a->sc, (size_t)cols, 1))
            return -1;
        a->ccap = cols;
    }
    return 0;
}

/* Strict order on heap nodes: distance, then free before taken, then column index. */
static int before(const hnode *x, const hnode *y)
{
    if (x->d != y->d)
        return x->d < y->d;
    if (x->busy != y->busy)
        return x->busy < y->busy;
    return x->j < y->j;
}

static int heap_push(sp_assigner *a, hnode n)
{
    if (a->hn == a->hcap) {
        size_t cap = a->hcap ? 2 * a->hcap : 64;
        if (grow((void **)&a->heap, cap, sizeof(hnode)))
            return -1;
        a->hcap = cap;
    }
    size_t i = a->hn++;
    while (i > 0) {
        size_t p = (i - 1) / 2;
        if (!before(&n, &a->heap[p]))
            break;
        a->heap[i] = a->heap[p];
        i = p;
    }
    a->heap[i] = n;
    return 0;
}

static hnode heap_pop(sp_assigner *a)
{
    hnode top = a->heap[0];
    hnode last = a->heap[--a->hn];
    size_t i = 0, n = a->hn;
    for (;;) {
        size_t c = 2 * i + 1;
        if (c >= n)
            break;
        if (c + 1 < n && before(&a->heap[c + 1], &a->heap[c]))
            c++;
        if (!before(&a->heap[c], &last))
            break;
        a->heap[i] = a->heap[c];
        i = c;
    }
    if (n)
        a->heap[i] = last;
    return top;
}

int sp_assign_sparse_solve(sp_assigner *a, const sp_assign_sparse *m, int *row_to_col, double *total,
                           sp_error *err)
{
    const int R = m->rows, C = m->cols;
    if (R < 0 || C < 0 || R > C || !m->start || (m->start[R] > 0 && (!m->col || !m->cost)))
        return sp_error_set(err, SP_ERR_INPUT, "assignment: malformed problem (%d rows, %d columns)", R, C);
    if (m->start[0] != 0)
        return sp_error_set(err, SP_ERR_INPUT, "assignment: row index does not start at 0");
    for (int i = 0; i < R; i++) {
        if (m->start[i + 1] < m->start[i])
            return sp_error_set(err, SP_ERR_INPUT, "assignment: row %d has a negative length", i);
        for (int k = m->start[i]; k < m->start[i + 1]; k++)
            if (m->col[k] < 0 || m->col[k] >= C || !isfinite(m->cost[k]))
                return sp_error_set(err, SP_ERR_INPUT, "assignment: row %d has a bad entry", i);
    }
    if (reserve(a, R, C))
        return sp_error_set(err, SP_ERR_INTERNAL, "assignment: out of memory (%d x %d)", R, C);

    for (int i = 0; i < R; i++) {
        a->u[i] = 0;
        a->sr[i] = 0;
        row_to_col[i] = -1;
    }
    for (int j = 0; j < C; j++) {
        a->v[j] = 0;
        a->spc[j] = INFINITY;
        a->row4col[j] = -1;
        a->sc[j] = 0;
    }

    for (int cur = 0; cur < R; cur++) {
        double minval = 0;
        int i = cur, sink = -1, nsr = 0, nsc = 0, nt = 0;
        a->hn = 0;
        while (sink < 0) {
            a->sr[i] = 1;
            a->srlist[nsr++] = i;
            for (int k = m->start[i]; k < m->start[i + 1]; k++) {
                int j = m->col[k];
                if (a->sc[j])
                    continue;
                double r = minval + m->cost[k] - a->u[i] - a->v[j];
                if (r < a->spc[j]) {
                    if (a->spc[j] == INFINITY)
                        a->touched[nt++] = j;
                    a->spc[j] = r;
                    a->path[j] = i;
                    hnode hn = {r, a->row4col[j] >= 0, j};
                    if (heap_push(a, hn))
                        return sp_error_set(err, SP_ERR_INTERNAL, "assignment: out of memory");
                }
            }
            /* Lazy deletion: skip entries superseded by a shorter path or already scanned. */
            int j = -1;
            while (a->hn) {
                hnode t = heap_pop(a);
                if (!a->sc[t.j] && t.d == a->spc[t.j]) {
                    j = t.j;
                    break;
                }
            }
            if (j < 0) {
                for (int k = 0; k < nt; k++)
                    a->spc[a->touched[k]] = INFINITY;
                for (int k = 0; k < nsc; k++)
                    a->sc[a->sclist[k]] = 0;
                for (int k = 0; k < nsr; k++)
                    a->sr[a->srlist[k]] = 0;
                return sp_error_set(err, SP_ERR_INPUT, "assignment: no complete assignment exists (row %d)",
                                    cur);
            }
            minval = a->spc[j];
            a->sc[j] = 1;
            a->sclist[nsc++] = j;
            if (a->row4col[j] < 0)
                sink = j;
            else
                i = a->row4col[j];
        }
        /* Dual update keeps reduced costs non-negative (Jonker & Volgenant 1987, augmentation). */
        a->u[cur] += minval;
        for (int k = 0; k < nsr; k++) {
            int r = a->srlist[k];
            if (r != cur)
                a->u[r] += minval - a->spc[row_to_col[r]];
            a->sr[r] = 0;
        }
        for (int k = 0; k < nsc; k++) {
            int c = a->sclist[k];
            a->v[c] -= minval - a->spc[c];
            a->sc[c] = 0;
        }
        for (int k = 0; k < nt; k++)
            a->spc[a->touched[k]] = INFINITY;
        /* Flip the alternating path from the sink back to the new row. */
        for (int j = sink;;) {
            int r = a->path[j];
            a->row4col[j] = r;
            int prev = row_to_col[r];
            row_to_col[r] = j;
            j = prev;
            if (r == cur)
                break;
        }
    }
    if (total) {
        /* Sum in row order from the listed costs (not the duals) so the total is exact to rounding. */
        double s = 0;
        for (int i = 0; i < R; i++)
            for (int k = m->start[i]; k < m->start[i + 1]; k++)
                if (m->col[k] == row_to_col[i]) {
                    s += m->cost[k];
                    break;
                }
        *total = s;
    }
    return SP_OK;
}

int sp_assign_dense(const double *cost, int nr, int nc, int *row_to_col, double *total, sp_error *err)
{
    int rc = SP_ERR_INTERNAL;
    int *start = NULL, *col = NULL, *sol = NULL;
    double *cv = NULL;
    sp_assigner *a = NULL;
    if (nr < 0 || nc < 0 || (long long)nr * nc > 100000000LL)
        return sp_error_set(err, SP_ERR_INPUT, "assignment: matrix of %d x %d is out of range", nr, nc);
    if (total)
        *total = 0;
    if (nr == 0 || nc == 0) {
        for (int i = 0; i < nr; i++)
            row_to_col[i] = -1;
        return SP_OK;
    }
    const int tr = nr > nc; /* solve the transpose so that rows <= columns */
    const int R = tr ? nc : nr, C = tr ? nr : nc;
    size_t nnz = (size_t)nr * (size_t)nc;
    start = malloc(sizeof *start * (size_t)(R + 1));
    col = malloc(sizeof *col * nnz);
    cv = malloc(sizeof *cv * nnz);
    sol = malloc(sizeof *sol * (size_t)R);
    a = sp_assigner_new();
    if (!start || !col || !cv || !sol || !a) {
        sp_error_set(err, SP_ERR_INTERNAL, "assignment: out of memory (%d x %d)", nr, nc);
        goto fail;
    }
    size_t k = 0;
    for (int i = 0; i < R; i++) {
        start[i] = (int)k;
        for (int j = 0; j < C; j++) {
            double c = tr ? cost[(size_t)j * nc + i] : cost[(size_t)i * nc + j];
            if (c == INFINITY)
                continue;
            if (!isfinite(c)) {
                rc = sp_error_set(err, SP_ERR_INPUT, "assignment: cost (%d, %d) is not a number or -inf",
                                  tr ? j : i, tr ? i : j);
                goto fail;
            }
            col[k] = j;
            cv[k++] = c;
        }
    }
    start[R] = (int)k;
    sp_assign_sparse m = {R, C, start, col, cv};
    rc = sp_assign_sparse_solve(a, &m, sol, total, err);
    if (rc)
        goto fail;
    if (tr) {
        for (int i = 0; i < nr; i++)
            row_to_col[i] = -1;
        for (int r = 0; r < R; r++)
            row_to_col[sol[r]] = r;
    } else {
        memcpy(row_to_col, sol, sizeof *sol * (size_t)R);
    }
    rc = SP_OK;
fail:
    free(start);
    free(col);
    free(cv);
    free(sol);
    sp_assigner_free(a);
    return rc;
}

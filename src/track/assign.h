/* Linear assignment: minimum-cost matching of every row to a distinct column. */
#ifndef SP_TRACK_ASSIGN_H
#define SP_TRACK_ASSIGN_H

#include "spume.h"

/* A sparse cost matrix in compressed-row form: row i may take column col[k] at cost cost[k] for
 * k in [start[i], start[i+1]); pairs not listed are forbidden. Borrowed, never freed here. */
typedef struct sp_assign_sparse {
    int rows, cols;
    const int *start;   /* rows + 1 entries */
    const int *col;     /* start[rows] entries, each in [0, cols) */
    const double *cost; /* finite */
} sp_assign_sparse;

typedef struct sp_assigner sp_assigner; /* reusable workspace; grows to the largest problem seen */

sp_assigner *sp_assigner_new(void);
void sp_assigner_free(sp_assigner *a);

/* Jonker & Volgenant (1987) shortest augmenting paths with dual potentials, each path found by a
 * heap-driven Dijkstra search over the listed pairs only, so a search never leaves the connected
 * component of the gating graph its row sits in. Assigns every row (rows <= cols needed) to a
 * distinct column minimising the total cost; writes row_to_col[rows] and *total (may be NULL).
 * Ties are broken by the lowest column index, so the result is deterministic.
 * Returns SP_ERR_INPUT when no complete assignment exists or the matrix is malformed. */
int sp_assign_sparse_solve(sp_assigner *a, const sp_assign_sparse *m, int *row_to_col, double *total,
                           sp_error *err);

/* Dense rectangular wrapper (row-major nr × nc, entries that are +INFINITY are forbidden). Any
 * shape: when nr > nc the transposed problem is solved, and rows left out get -1. Gives the same
 * optimum as scipy.optimize.linear_sum_assignment. */
int sp_assign_dense(const double *cost, int nr, int nc, int *row_to_col, double *total, sp_error *err);

#endif

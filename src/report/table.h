/* Reading the numeric CSV tables that measure, crosscheck and synth write (bubbles.csv, tracks.csv,
 * frames.csv, sites.csv, pairs.csv, truth_*.csv): a header row of names, then rows of numbers.
 * Only the columns asked for are kept, as doubles; an empty or non-numeric field reads as NAN. */
#ifndef SP_REPORT_TABLE_H
#define SP_REPORT_TABLE_H

#include "spume.h"

#define SP_TABLE_MAX_ROWS 50000000  /* refuse larger tables rather than exhaust memory */
#define SP_TABLE_MAX_LINE (1 << 16) /* longest accepted line, bytes */
#define SP_TABLE_MAX_COLS 16

typedef struct sp_table {
    int ncols;                      /* columns requested */
    int found[SP_TABLE_MAX_COLS];   /* 1 where the header has that column */
    double *col[SP_TABLE_MAX_COLS]; /* nrows values each (owned; NULL for a missing column) */
    size_t nrows;
} sp_table;

/* Read dir/name keeping the columns named in names[0..ncols-1] (ncols <= SP_TABLE_MAX_COLS).
 * A missing file gives SP_OK with *present = 0 (present may be NULL, then a missing file is an
 * error). Free with sp_table_free. */
int sp_table_read(const char *dir, const char *name, const char *const *names, int ncols, sp_table *t,
                  int *present, sp_error *err);
void sp_table_free(sp_table *t);

#endif

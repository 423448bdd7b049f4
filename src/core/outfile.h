/* Output files written under a temporary name in the final directory and renamed into place only
 * when complete, so a failed or interrupted run never leaves a partial file under a final name. */
#ifndef SP_CORE_OUTFILE_H
#define SP_CORE_OUTFILE_H

#include "spume.h"

#include <stdio.h>

typedef struct sp_outfile {
    char final[4096];
    char tmp[4096];
    FILE *f; /* open while writing; owned */
} sp_outfile;

/* Open dir/name's temporary sibling for writing. */
int sp_outfile_open(sp_outfile *o, const char *dir, const char *name, sp_error *err);
/* Flush, close and check for write errors (a full disk shows here), then rename into place. */
int sp_outfile_commit(sp_outfile *o, sp_error *err);
/* Close (if open) and remove the temporary file. Safe to call twice or after commit. */
void sp_outfile_abort(sp_outfile *o);

#endif

/* Shared argument parsing and terminal progress for the spume commands. */
#ifndef SP_CLI_ARGS_H
#define SP_CLI_ARGS_H

#include "spume.h"

/* Print "spume CMD: <message> (see 'spume help CMD')" on stderr; returns 2. */
int usage_error(const char *cmd, const char *fmt, const char *arg);
/* Strict number parsing: the whole string, finite; prints the error and returns 2 on failure. */
int parse_double(const char *cmd, const char *opt, const char *s, double *v);
int parse_int(const char *cmd, const char *opt, const char *s, long long lo, long long hi, long long *v);

/* Progress line on stderr, redrawn at most 4 times a second; shown only when show is set (the
 * caller sets it when stderr is a terminal and --quiet is absent). */
typedef struct progress_state {
    int show;
    double last;
} progress_state;
double wall(void);
void on_progress(void *ud, const sp_progress *p);
void end_progress(progress_state *ps);

#endif

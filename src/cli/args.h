/* Shared argument parsing and terminal progress for the spume commands. */
#ifndef SP_CLI_ARGS_H
#define SP_CLI_ARGS_H

#include "spume.h"

/* Print "spume CMD: <message> (see 'spume help CMD')" on stderr; returns 2. */
int usage_error(const char *cmd, const char *fmt, const char *arg);
/* The end of every command's option loop: a, which none of the command's own options took, is an
 * unknown option, or the command's positional argument (stored in *positional the first time; a
 * second one, or any when positional is NULL, is unexpected). Returns 0 when taken, else the
 * usage_error status. */
int args_positional(const char *cmd, const char *a, const char **positional);
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

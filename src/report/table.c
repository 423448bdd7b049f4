/* A strict, bounded CSV reader for the project's own numeric tables. The files may have been
 * edited or truncated by hand, so every line length, column count and row count is capped. */
#include "report/table.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void sp_table_free(sp_table *t)
{
    if (!t)
        return;
    for (int i = 0; i < SP_TABLE_MAX_COLS; i++)
        free(t->col[i]);
    memset(t, 0, sizeof *t);
}

/* Strip the trailing newline (and a CR); returns 0 when the line did not fit in the buffer. */
static int chomp(char *line)
{
    size_t n = strlen(line);
    if (n == 0 || line[n - 1] != '\n')
        return 0;
    line[--n] = 0;
    if (n && line[n - 1] == '\r')
        line[n - 1] = 0;
    return 1;
}

static double parse_field(const char *s, const char *e)
{
    char buf[64];
    size_t n = (size_t)(e - s);
    if (n == 0 || n >= sizeof buf)
        return NAN;
    memcpy(buf, s, n);
    buf[n] = 0;
    char *end = NULL;
    double v = strtod(buf, &end);
    if (end == buf || *end)
        return NAN;
    return v;
}

int sp_table_read(const char *dir, const char *name, const char *const *names, int ncols, sp_table *t,
                  int *present, sp_error *err)
{
    int rc = SP_OK;
    char path[4096];
    char *line = NULL;
    FILE *f = NULL;
    int map[256]; /* file column -> requested column, or -1 */
    size_t cap = 0;

    memset(t, 0, sizeof *t);
    if (present)
        *present = 0;
    if (ncols < 1 || ncols > SP_TABLE_MAX_COLS)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: bad column request", name);
    t->ncols = ncols;
    if (snprintf(path, sizeof path, "%s/%s", dir, name) >= (int)sizeof path)
        return sp_error_set(err, SP_ERR_INPUT, "%s/%s: path too long", dir, name);
    f = fopen(path, "rb");
    if (!f) {
        if (errno == ENOENT && present)
            return SP_OK;
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot open: %s", path, strerror(errno));
    }
    line = malloc(SP_TABLE_MAX_LINE);
    if (!line) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto fail;
    }
    if (!fgets(line, SP_TABLE_MAX_LINE, f) || !chomp(line)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: missing or overlong header row", path);
        goto fail;
    }
    int nfile = 0;
    for (char *p = line;; nfile++) {
        char *c = strchr(p, ',');
        if (c)
            *c = 0;
        if (nfile >= (int)(sizeof map / sizeof map[0])) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: more than %d columns", path, nfile);
            goto fail;
        }
        map[nfile] = -1;
        for (int k = 0; k < ncols; k++)
            if (!t->found[k] && strcmp(p, names[k]) == 0) {
                map[nfile] = k;
                t->found[k] = 1;
            }
        if (!c) {
            nfile++;
            break;
        }
        p = c + 1;
    }
    while (fgets(line, SP_TABLE_MAX_LINE, f)) {
        if (!chomp(line) && !feof(f)) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: line %zu longer than %d bytes", path, t->nrows + 2,
                              SP_TABLE_MAX_LINE);
            goto fail;
        }
        if (!line[0])
            continue;
        if (t->nrows >= SP_TABLE_MAX_ROWS) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: more than %d rows", path, SP_TABLE_MAX_ROWS);
            goto fail;
        }
        if (t->nrows == cap) {
            size_t ncap = cap ? cap * 2 : 1024;
            for (int k = 0; k < ncols; k++) {
                if (!t->found[k])
                    continue;
                double *nc = realloc(t->col[k], ncap * sizeof(double));
                if (!nc) {
                    rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
                    goto fail;
                }
                t->col[k] = nc;
            }
            cap = ncap;
        }
        for (int k = 0; k < ncols; k++)
            if (t->found[k])
                t->col[k][t->nrows] = NAN;
        const char *p = line;
        for (int i = 0; i < nfile; i++) {
            const char *e = strchr(p, ',');
            if (!e)
                e = p + strlen(p);
            if (map[i] >= 0)
                t->col[map[i]][t->nrows] = parse_field(p, e);
            if (!*e)
                break;
            p = e + 1;
        }
        t->nrows++;
    }
    if (ferror(f)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: read error", path);
        goto fail;
    }
    fclose(f);
    free(line);
    if (present)
        *present = 1;
    return SP_OK;

fail:
    if (f)
        fclose(f);
    free(line);
    sp_table_free(t);
    return rc ? rc : SP_ERR_INTERNAL;
}

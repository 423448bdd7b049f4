#include "core/jsonw.h"

#include <inttypes.h>
#include <math.h>

void sp_jsonw_init(sp_jsonw *j, FILE *f)
{
    j->f = f;
    j->depth = 0;
    j->after_key = 0;
    j->first[0] = 1;
}

/* Separator and indentation before a value or key at the current depth. */
static void sep(sp_jsonw *j)
{
    if (j->depth == 0)
        return;
    if (!j->first[j->depth])
        fputc(',', j->f);
    j->first[j->depth] = 0;
    fputc('\n', j->f);
    for (int i = 0; i < j->depth; i++)
        fputs("  ", j->f);
}

static void pre_value(sp_jsonw *j)
{
    if (j->after_key)
        j->after_key = 0;
    else
        sep(j);
}

static void raw_str(FILE *f, const char *s)
{
    fputc('"', f);
    for (const unsigned char *p = (const unsigned char *)s; *p; p++) {
        switch (*p) {
        case '"':
            fputs("\\\"", f);
            break;
        case '\\':
            fputs("\\\\", f);
            break;
        case '\n':
            fputs("\\n", f);
            break;
        case '\r':
            fputs("\\r", f);
            break;
        case '\t':
            fputs("\\t", f);
            break;
        default:
            if (*p < 0x20)
                fprintf(f, "\\u%04x", *p);
            else
                fputc(*p, f);
        }
    }
    fputc('"', f);
}

void sp_jsonw_key(sp_jsonw *j, const char *key)
{
    sep(j);
    raw_str(j->f, key);
    fputs(": ", j->f);
    j->after_key = 1;
}

static void open_(sp_jsonw *j, char c)
{
    pre_value(j);
    fputc(c, j->f);
    if (j->depth + 1 < SP_JSONW_DEPTH)
        j->depth++;
    j->first[j->depth] = 1;
}

static void close_(sp_jsonw *j, char c)
{
    int empty = j->first[j->depth];
    if (j->depth > 0)
        j->depth--;
    if (!empty) {
        fputc('\n', j->f);
        for (int i = 0; i < j->depth; i++)
            fputs("  ", j->f);
    }
    fputc(c, j->f);
    if (j->depth == 0)
        fputc('\n', j->f);
}

void sp_jsonw_obj(sp_jsonw *j)
{
    open_(j, '{');
}
void sp_jsonw_obj_end(sp_jsonw *j)
{
    close_(j, '}');
}
void sp_jsonw_arr(sp_jsonw *j)
{
    open_(j, '[');
}
void sp_jsonw_arr_end(sp_jsonw *j)
{
    close_(j, ']');
}

void sp_jsonw_str(sp_jsonw *j, const char *s)
{
    pre_value(j);
    if (s)
        raw_str(j->f, s);
    else
        fputs("null", j->f);
}

void sp_jsonw_num(sp_jsonw *j, double v)
{
    pre_value(j);
    if (isfinite(v))
        fprintf(j->f, "%.10g", v);
    else
        fputs("null", j->f);
}

void sp_jsonw_int(sp_jsonw *j, int64_t v)
{
    pre_value(j);
    fprintf(j->f, "%" PRId64, v);
}

void sp_jsonw_bool(sp_jsonw *j, int v)
{
    pre_value(j);
    fputs(v ? "true" : "false", j->f);
}

void sp_jsonw_null(sp_jsonw *j)
{
    pre_value(j);
    fputs("null", j->f);
}

void sp_jsonw_kstr(sp_jsonw *j, const char *k, const char *s)
{
    sp_jsonw_key(j, k);
    sp_jsonw_str(j, s);
}
void sp_jsonw_knum(sp_jsonw *j, const char *k, double v)
{
    sp_jsonw_key(j, k);
    sp_jsonw_num(j, v);
}
void sp_jsonw_kint(sp_jsonw *j, const char *k, int64_t v)
{
    sp_jsonw_key(j, k);
    sp_jsonw_int(j, v);
}
void sp_jsonw_kbool(sp_jsonw *j, const char *k, int v)
{
    sp_jsonw_key(j, k);
    sp_jsonw_bool(j, v);
}

/* A small streaming JSON writer: objects, arrays, strings (escaped), numbers. Output is
 * deterministic (fixed number formats) so summaries compare byte for byte across runs. */
#ifndef SP_CORE_JSONW_H
#define SP_CORE_JSONW_H

#include <stdint.h>
#include <stdio.h>

#define SP_JSONW_DEPTH 16

typedef struct sp_jsonw {
    FILE *f; /* not owned */
    int depth;
    int after_key; /* a key was written and its value is due */
    int first[SP_JSONW_DEPTH];
} sp_jsonw;

void sp_jsonw_init(sp_jsonw *j, FILE *f);
void sp_jsonw_key(sp_jsonw *j, const char *key); /* inside an object, before a value */
void sp_jsonw_obj(sp_jsonw *j);
void sp_jsonw_obj_end(sp_jsonw *j);
void sp_jsonw_arr(sp_jsonw *j);
void sp_jsonw_arr_end(sp_jsonw *j);
void sp_jsonw_str(sp_jsonw *j, const char *s);
void sp_jsonw_num(sp_jsonw *j, double v); /* non-finite values are written as null */
void sp_jsonw_int(sp_jsonw *j, int64_t v);
void sp_jsonw_bool(sp_jsonw *j, int v);
void sp_jsonw_null(sp_jsonw *j);
/* Convenience: key + value. */
void sp_jsonw_kstr(sp_jsonw *j, const char *k, const char *s);
void sp_jsonw_knum(sp_jsonw *j, const char *k, double v);
void sp_jsonw_kint(sp_jsonw *j, const char *k, int64_t v);
void sp_jsonw_kbool(sp_jsonw *j, const char *k, int v);

#endif

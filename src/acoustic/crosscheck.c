/* The acoustic cross-check (docs/methods-crosscheck.md). Tables are read by column name, every
 * line and count bounded; the optical events are the births of tracks seen from their first frame
 * away from the border. */
#include "acoustic/crosscheck.h"
#include "core/outfile.h"
#include "io/audio.h"
#include "track/assign.h"

#include <jansson.h>
#include <libavutil/mem.h>
#include <libavutil/sha.h>

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#define LINE_MAX_BYTES 65536
#define MAX_COLS 256
#define MAX_EVENTS 5000000   /* pings or tracks accepted from one table */
#define MAX_DIFFS 50000000LL /* lag differences examined in the alignment */
#define PATHMAX 4096

void sp_crosscheck_settings_default(sp_crosscheck_settings *s)
{
    memset(s, 0, sizeof *s);
    sp_listen_settings_default(&s->listen);
    s->max_lag_s = 10.0;
    s->tol_s = 0.0;
    s->min_n = 3;
    s->relisten = 0;
}

/* ---------------------------------------------------------------- tables */

typedef struct table {
    FILE *f;
    char path[PATHMAX];
    char *line;
    char *col[MAX_COLS];
    int ncol;
    int64_t lineno;
} table;

static int split(table *t)
{
    t->ncol = 0;
    char *p = t->line;
    size_t n = strlen(p);
    while (n && (p[n - 1] == '\n' || p[n - 1] == '\r'))
        p[--n] = '\0';
    for (;;) {
        if (t->ncol == MAX_COLS)
            return -1;
        t->col[t->ncol++] = p;
        char *c = strchr(p, ',');
        if (!c)
            break;
        *c = '\0';
        p = c + 1;
    }
    return 0;
}

/* Next line split into columns; *got = 0 at the end. */
static int table_next(table *t, int *got, sp_error *err)
{
    *got = 0;
    for (;;) {
        if (!fgets(t->line, LINE_MAX_BYTES, t->f)) {
            if (ferror(t->f))
                return sp_error_set(err, SP_ERR_INPUT, "%s: read error: %s", t->path, strerror(errno));
            return SP_OK;
        }
        t->lineno++;
        size_t n = strlen(t->line);
        if (n == LINE_MAX_BYTES - 1 && t->line[n - 1] != '\n')
            return sp_error_set(err, SP_ERR_INPUT, "%s: line %lld is longer than %d bytes", t->path,
                                (long long)t->lineno, LINE_MAX_BYTES - 1);
        if (t->line[0] == '\n' || (t->line[0] == '\r' && t->line[1] == '\n'))
            continue;
        if (split(t))
            return sp_error_set(err, SP_ERR_INPUT, "%s: line %lld has more than %d columns", t->path,
                                (long long)t->lineno, MAX_COLS);
        *got = 1;
        return SP_OK;
    }
}

static void table_close(table *t)
{
    if (t->f)
        fclose(t->f);
    free(t->line);
    memset(t, 0, sizeof *t);
}

/* Open dir/name and read its header. */
static int table_open(table *t, const char *dir, const char *name, sp_error *err)
{
    memset(t, 0, sizeof *t);
    int n = snprintf(t->path, sizeof t->path, "%s/%s", dir, name);
    if (n < 0 || n >= (int)sizeof t->path)
        return sp_error_set(err, SP_ERR_INPUT, "%s: path too long", dir);
    if (!(t->line = malloc(LINE_MAX_BYTES)))
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", t->path);
    if (!(t->f = fopen(t->path, "r")))
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot open: %s", t->path, strerror(errno));
    int got, rc = table_next(t, &got, err);
    if (rc)
        return rc;
    if (!got)
        return sp_error_set(err, SP_ERR_INPUT, "%s: empty file (no header row)", t->path);
    return SP_OK;
}

/* Index of a header column, -1 when absent. Call right after table_open. */
static int col_of(const table *t, const char *name)
{
    for (int i = 0; i < t->ncol; i++)
        if (strcmp(t->col[i], name) == 0)
            return i;
    return -1;
}

static int need_col(const table *t, const char *name, int *idx, sp_error *err)
{
    *idx = col_of(t, name);
    if (*idx < 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: no column '%s'", t->path, name);
    return SP_OK;
}

/* A number from column i; an empty field is NaN, anything else unparsable an error. */
static int num(const table *t, int i, double *v, sp_error *err)
{
    if (i < 0 || i >= t->ncol) {
        if (i >= 0 && i >= t->ncol)
            return sp_error_set(err, SP_ERR_INPUT, "%s: line %lld has %d columns, fewer than the header",
                                t->path, (long long)t->lineno, t->ncol);
        *v = NAN;
        return SP_OK;
    }
    const char *s = t->col[i];
    if (!*s) {
        *v = NAN;
        return SP_OK;
    }
    char *end;
    errno = 0;
    double d = strtod(s, &end);
    if (end == s || *end || errno == ERANGE)
        return sp_error_set(err, SP_ERR_INPUT, "%s: line %lld: '%s' is not a number", t->path,
                            (long long)t->lineno, s);
    *v = d;
    return SP_OK;
}

/* ---------------------------------------------------------------- events */

typedef struct ping_row {
    double t_s, f_hz, snr_db, r_mm;
} ping_row;

typedef struct birth {
    int64_t track, frame_first, n;
    double t_first_s, d_vol_mm, d_first_mm;
    double t_event_s; /* estimated detachment time on the video clock */
    int edge;         /* first detection touches the border (-1: not seen in bubbles.csv) */
} birth;

static int cmp_ping(const void *a, const void *b)
{
    const ping_row *x = a, *y = b;
    return x->t_s < y->t_s ? -1 : x->t_s > y->t_s;
}

static int cmp_birth_track(const void *a, const void *b)
{
    const birth *x = a, *y = b;
    return x->track < y->track ? -1 : x->track > y->track;
}

static int cmp_birth_time(const void *a, const void *b)
{
    const birth *x = a, *y = b;
    if (x->t_event_s != y->t_event_s)
        return x->t_event_s < y->t_event_s ? -1 : 1;
    return x->track < y->track ? -1 : x->track > y->track;
}

static int cmp_dbl(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

static double median_sorted(const double *x, size_t n)
{
    return n == 0 ? NAN : n % 2 ? x[n / 2] : 0.5 * (x[n / 2 - 1] + x[n / 2]);
}

static int read_pings(const char *dir, ping_row **out, int *nout, sp_error *err)
{
    table t;
    ping_row *p = NULL;
    int n = 0, cap = 0, rc, ct, cf, cs, cr, got;
    if ((rc = table_open(&t, dir, "pings.csv", err)) || (rc = need_col(&t, "t_s", &ct, err)) ||
        (rc = need_col(&t, "f_hz", &cf, err)) || (rc = need_col(&t, "r_mm", &cr, err)))
        goto fail;
    cs = col_of(&t, "snr_db");
    int cst = col_of(&t, "status");
    while (!(rc = table_next(&t, &got, err)) && got) {
        if (cst >= 0 && cst < t.ncol && strcmp(t.col[cst], "ok") != 0)
            continue; /* a table written with the rejected candidates */
        ping_row r;
        if ((rc = num(&t, ct, &r.t_s, err)) || (rc = num(&t, cf, &r.f_hz, err)) ||
            (rc = num(&t, cr, &r.r_mm, err)) || (rc = num(&t, cs, &r.snr_db, err)))
            goto fail;
        if (!isfinite(r.t_s) || !(r.r_mm > 0)) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: line %lld: no time or radius", t.path,
                              (long long)t.lineno);
            goto fail;
        }
        if (n == MAX_EVENTS) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: more than %d pings", t.path, MAX_EVENTS);
            goto fail;
        }
        if (n == cap) {
            int nc = cap ? 2 * cap : 256;
            ping_row *q = realloc(p, (size_t)nc * sizeof *q);
            if (!q) {
                rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", t.path);
                goto fail;
            }
            p = q;
            cap = nc;
        }
        p[n++] = r;
    }
    if (rc)
        goto fail;
    qsort(p, (size_t)n, sizeof *p, cmp_ping);
    *out = p;
    *nout = n;
    table_close(&t);
    return SP_OK;
fail:
    free(p);
    table_close(&t);
    return rc;
}

/* tracks.csv: every track; then bubbles.csv: the edge flag of each track's first detection and the
 * first frame of the run. */
static int read_tracks(const char *dir, birth **out, int *nout, int64_t *frame0, sp_error *err)
{
    table t;
    birth *b = NULL;
    int n = 0, cap = 0, rc, got;
    int c_tr, c_ff, c_n, c_t, c_dv, c_d1;
    *frame0 = INT64_MAX;
    if ((rc = table_open(&t, dir, "tracks.csv", err)) || (rc = need_col(&t, "track", &c_tr, err)) ||
        (rc = need_col(&t, "frame_first", &c_ff, err)) || (rc = need_col(&t, "n", &c_n, err)) ||
        (rc = need_col(&t, "t_first_s", &c_t, err)) || (rc = need_col(&t, "d_vol_mm", &c_dv, err)))
        goto fail;
    c_d1 = col_of(&t, "d_first_mm");
    while (!(rc = table_next(&t, &got, err)) && got) {
        double tr, ff, nn;
        birth r;
        if ((rc = num(&t, c_tr, &tr, err)) || (rc = num(&t, c_ff, &ff, err)) ||
            (rc = num(&t, c_n, &nn, err)) || (rc = num(&t, c_t, &r.t_first_s, err)) ||
            (rc = num(&t, c_dv, &r.d_vol_mm, err)) || (rc = num(&t, c_d1, &r.d_first_mm, err)))
            goto fail;
        if (!(tr >= 1 && tr < 1e15 && tr == floor(tr)) || !(ff >= 0 && ff < 1e15) ||
            !(nn >= 0 && nn < 1e15) || !isfinite(r.t_first_s)) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: line %lld: bad track id, frame, count or time", t.path,
                              (long long)t.lineno);
            goto fail;
        }
        r.track = (int64_t)tr;
        r.frame_first = (int64_t)ff;
        r.n = (int64_t)nn;
        r.edge = -1;
        r.t_event_s = r.t_first_s;
        if (n == MAX_EVENTS) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: more than %d tracks", t.path, MAX_EVENTS);
            goto fail;
        }
        if (n == cap) {
            int nc = cap ? 2 * cap : 256;
            birth *q = realloc(b, (size_t)nc * sizeof *q);
            if (!q) {
                rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", t.path);
                goto fail;
            }
            b = q;
            cap = nc;
        }
        b[n++] = r;
    }
    if (rc)
        goto fail;
    table_close(&t);
    qsort(b, (size_t)n, sizeof *b, cmp_birth_track);
    for (int i = 1; i < n; i++)
        if (b[i].track == b[i - 1].track) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s/tracks.csv: track %lld listed twice", dir,
                              (long long)b[i].track);
            goto fail;
        }

    int c_f, c_k, c_e;
    if ((rc = table_open(&t, dir, "bubbles.csv", err)) || (rc = need_col(&t, "frame", &c_f, err)) ||
        (rc = need_col(&t, "track", &c_k, err)) || (rc = need_col(&t, "edge", &c_e, err)))
        goto fail;
    while (!(rc = table_next(&t, &got, err)) && got) {
        double fr, tk, ed;
        if ((rc = num(&t, c_f, &fr, err)) || (rc = num(&t, c_k, &tk, err)) || (rc = num(&t, c_e, &ed, err)))
            goto fail;
        if (!(fr >= 0 && fr < 1e15)) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: line %lld: bad frame number", t.path,
                              (long long)t.lineno);
            goto fail;
        }
        if ((int64_t)fr < *frame0)
            *frame0 = (int64_t)fr;
        if (!(tk >= 1 && tk < 1e15))
            continue;
        birth key = {.track = (int64_t)tk};
        birth *hit = bsearch(&key, b, (size_t)n, sizeof *b, cmp_birth_track);
        if (hit && hit->frame_first == (int64_t)fr)
            hit->edge = (hit->edge == 1 || ed != 0) ? 1 : 0; /* any piece on the border counts */
    }
    if (rc)
        goto fail;
    table_close(&t);
    *out = b;
    *nout = n;
    return SP_OK;
fail:
    free(b);
    table_close(&t);
    return rc;
}

/* ---------------------------------------------------------------- alignment and pairing */

int sp_xc_align_run(const double *a, int na, const double *v, int nv, double max_lag, double tol,
                    sp_xc_align *out, sp_error *err)
{
    memset(out, 0, sizeof *out);
    if (na < 1 || nv < 1 || !(tol > 0) || !(max_lag > 0))
        return sp_error_set(err, SP_ERR_INPUT, "nothing to align (%d pings, %d births)", na, nv);
    /* Count the differences in range first (both trains sorted: a window over v per ping). */
    long long nd = 0;
    int lo = 0;
    for (int i = 0; i < na; i++) {
        while (lo < nv && a[i] - v[lo] > max_lag)
            lo++;
        for (int j = lo; j < nv && a[i] - v[j] >= -max_lag; j++)
            nd++;
        if (nd > MAX_DIFFS)
            return sp_error_set(err, SP_ERR_INPUT,
                                "%d pings x %d births give more than %lld lags to examine; narrow "
                                "the lag range",
                                na, nv, MAX_DIFFS);
    }
    if (nd == 0)
        return sp_error_set(err, SP_ERR_INPUT,
                            "no ping lies within %g s of a birth: the clocks differ by more "
                            "than the lag range",
                            max_lag);
    double *d = malloc((size_t)nd * sizeof *d);
    if (!d)
        return sp_error_set(err, SP_ERR_INTERNAL, "crosscheck: out of memory for %lld lags", nd);
    long long k = 0;
    lo = 0;
    for (int i = 0; i < na; i++) {
        while (lo < nv && a[i] - v[lo] > max_lag)
            lo++;
        for (int j = lo; j < nv && a[i] - v[j] >= -max_lag; j++)
            d[k++] = a[i] - v[j];
    }
    qsort(d, (size_t)nd, sizeof *d, cmp_dbl);
    /* Box-kernel cross-correlation: the window [d_i, d_i + 2 tol] holding the most differences; its
     * count is the number of coincidences at that lag. First (lowest lag) window wins a tie. */
    long long best = 0, bi = 0, hi = 0;
    for (long long i = 0; i < nd; i++) {
        if (hi < i)
            hi = i;
        while (hi + 1 < nd && d[hi + 1] <= d[i] + 2.0 * tol)
            hi++;
        if (hi - i + 1 > best) {
            best = hi - i + 1;
            bi = i;
        }
    }
    double centre = d[bi] + tol;
    out->offset_s = median_sorted(d + bi, (size_t)best);
    /* The runner-up: the best window whose centre lies at least 4 tol from the winner's. */
    long long second = 0;
    hi = 0;
    for (long long i = 0; i < nd; i++) {
        if (hi < i)
            hi = i;
        while (hi + 1 < nd && d[hi + 1] <= d[i] + 2.0 * tol)
            hi++;
        if (fabs(d[i] + tol - centre) >= 4.0 * tol && hi - i + 1 > second)
            second = hi - i + 1;
    }
    out->peak = (double)best;
    out->peak2 = (double)second;
    free(d);
    return SP_OK;
}

int sp_xc_pair(const double *a, int na, const double *v, int nv, double offset, double tol, int *v_to_a,
               sp_error *err)
{
    int rc = -1;
    int *start = malloc(((size_t)nv + 1) * sizeof *start);
    int cap = 4 * nv + 16, nnz = 0;
    int *col = malloc((size_t)cap * sizeof *col), *r2c = malloc(((size_t)nv + 1) * sizeof *r2c);
    double *cost = malloc((size_t)cap * sizeof *cost);
    sp_assigner *as = sp_assigner_new();
    if (!start || !col || !cost || !r2c || !as) {
        sp_error_set(err, SP_ERR_INTERNAL, "crosscheck: out of memory pairing %d births", nv);
        goto done;
    }
    for (int j = 0; j < nv; j++) {
        start[j] = nnz;
        double t = v[j] + offset;
        int l = 0, h = na; /* first ping at or after t - tol */
        while (l < h) {
            int m = l + (h - l) / 2;
            if (a[m] < t - tol)
                l = m + 1;
            else
                h = m;
        }
        for (int i = l; i <= na; i++) {
            int is_dummy = i == na;
            if (!is_dummy && a[i] > t + tol)
                i = na, is_dummy = 1;
            if (nnz == cap) {
                int nc = 2 * cap;
                int *c2 = realloc(col, (size_t)nc * sizeof *c2);
                if (c2)
                    col = c2;
                double *k2 = c2 ? realloc(cost, (size_t)nc * sizeof *k2) : NULL;
                if (!c2 || !k2) {
                    sp_error_set(err, SP_ERR_INTERNAL, "crosscheck: out of memory pairing %d births", nv);
                    goto done;
                }
                cost = k2;
                cap = nc;
            }
            /* Each birth has its own "unpaired" column costing as much as a pair right at tol. */
            double r = is_dummy ? 1.0 : (a[i] - t) / tol;
            col[nnz] = is_dummy ? na + j : i;
            cost[nnz++] = is_dummy ? 1.0 : r * r;
            if (is_dummy)
                break;
        }
    }
    start[nv] = nnz;
    sp_assign_sparse m = {nv, na + nv, start, col, cost};
    if (sp_assign_sparse_solve(as, &m, r2c, NULL, err))
        goto done;
    rc = 0;
    for (int j = 0; j < nv; j++) {
        v_to_a[j] = r2c[j] < na ? r2c[j] : -1;
        rc += v_to_a[j] >= 0;
    }
done:
    free(start);
    free(col);
    free(cost);
    free(r2c);
    sp_assigner_free(as);
    return rc;
}

/* ---------------------------------------------------------------- identity of the audio */

static int sha_first_mib(const char *path, char hex[65], int64_t *bytes)
{
    struct stat st;
    FILE *f = NULL;
    struct AVSHA *sha = NULL;
    unsigned char *buf = NULL;
    int ok = 0;
    hex[0] = '\0';
    if (stat(path, &st) == 0 && S_ISREG(st.st_mode) && (f = fopen(path, "rb")) && (sha = av_sha_alloc()) &&
        (buf = malloc(1 << 16)) && av_sha_init(sha, 256) == 0) {
        size_t left = 1 << 20, n;
        while (left > 0 && (n = fread(buf, 1, left < (1 << 16) ? left : (1 << 16), f)) > 0) {
            av_sha_update(sha, buf, n);
            left -= n;
        }
        if (!ferror(f)) {
            uint8_t dig[32];
            av_sha_final(sha, dig);
            for (int i = 0; i < 32; i++)
                snprintf(hex + 2 * i, 3, "%02x", dig[i]);
            *bytes = (int64_t)st.st_size;
            ok = 1;
        }
    }
    if (f)
        fclose(f);
    av_free(sha);
    free(buf);
    return ok;
}

static int same_num(json_t *o, const char *k, double v)
{
    json_t *x = json_object_get(o, k);
    return json_is_number(x) && fabs(json_number_value(x) - v) <= 1e-9 * fmax(1.0, fabs(v));
}

/* DIR/pings.csv can stand when DIR/listen.json names the same audio (size and hash of its first MiB)
 * analysed with the same channel, radii and liquid. */
static int pings_reusable(const char *dir, const char *audio, const sp_listen_settings *s)
{
    char p[PATHMAX], q[PATHMAX], hex[65];
    int64_t bytes = -1;
    if (snprintf(p, sizeof p, "%s/listen.json", dir) >= (int)sizeof p ||
        snprintf(q, sizeof q, "%s/pings.csv", dir) >= (int)sizeof q || access(q, R_OK) != 0 ||
        !sha_first_mib(audio, hex, &bytes))
        return 0;
    json_t *root = json_load_file(p, 0, NULL);
    if (!root)
        return 0;
    json_t *in = json_object_get(root, "input"), *st = json_object_get(root, "settings");
    static const char *models[] = {"minnaert", "devin", "thermal"};
    const sp_bubble_medium *m = &s->medium;
    int ok = json_is_object(in) && json_is_object(st) &&
             json_is_string(json_object_get(in, "sha256_first_mib")) &&
             strcmp(json_string_value(json_object_get(in, "sha256_first_mib")), hex) == 0 &&
             same_num(in, "bytes", (double)bytes) && same_num(st, "channel", s->channel) &&
             same_num(st, "r_min_mm", s->r_min_mm) && same_num(st, "r_max_mm", s->r_max_mm) &&
             same_num(st, "depth_m", m->depth_m) && same_num(st, "rho_kg_m3", m->rho_kg_m3) &&
             same_num(st, "sigma_n_m", m->sigma_n_m) && same_num(st, "p_atm_pa", m->p_atm_pa) &&
             same_num(st, "p_vapour_pa", m->p_vapour_pa) && same_num(st, "gamma", m->gamma) &&
             m->model >= 0 && m->model <= 2 && json_is_string(json_object_get(st, "model")) &&
             strcmp(json_string_value(json_object_get(st, "model")), models[m->model]) == 0;
    json_decref(root);
    return ok;
}

/* ---------------------------------------------------------------- the job */

static json_t *jnum(double v)
{
    return isfinite(v) ? json_real(v) : json_null();
}

static int set(json_t *o, const char *k, json_t *v)
{
    return v ? json_object_set_new(o, k, v) : -1;
}

int sp_crosscheck(const char *dir, const char *audio, const sp_crosscheck_settings *s,
                  sp_crosscheck_report *rep_out, sp_error *err)
{
    int rc = SP_OK;
    ping_row *pg = NULL;
    birth *all = NULL, *bv = NULL;
    double *ta = NULL, *tv = NULL, *dd = NULL;
    int *v2a = NULL;
    int np = 0, nt = 0, nb = 0;
    json_t *root = NULL, *xc = NULL;
    sp_outfile pairs = {0}, js = {0};
    sp_crosscheck_report rep;
    memset(&rep, 0, sizeof rep);
    char sp[PATHMAX];
    if (snprintf(sp, sizeof sp, "%s/summary.json", dir) >= (int)sizeof sp)
        return sp_error_set(err, SP_ERR_INPUT, "%s: path too long", dir);
    if (!(s->max_lag_s > 0) || !(s->tol_s >= 0) || s->min_n < 1)
        return sp_error_set(err, SP_ERR_INPUT, "crosscheck: bad lag range %g s, tolerance %g s or minimum %d",
                            s->max_lag_s, s->tol_s, s->min_n);

    /* The run's own record first: a directory that is not a measured run fails before the audio
     * is analysed. */
    json_error_t je;
    root = json_load_file(sp, 0, &je);
    if (!root) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: %s", sp,
                          access(sp, F_OK) != 0 ? "missing (not the output of spume measure?)" : je.text);
        goto fail;
    }
    if (!json_is_object(root)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: not a JSON object", sp);
        goto fail;
    }
    json_t *jf = json_object_get(root, "fps");
    double fps = json_is_number(jf) ? json_number_value(jf) : 0.0;
    int64_t frame0;
    if ((rc = read_tracks(dir, &all, &nt, &frame0, err)))
        goto fail;

    /* Births: seen from a frame after the first, away from the border, long enough to be a bubble.
     * The pinch-off happened between the previous frame and the first one showing it: half a
     * frame earlier on average. */
    if (!(bv = malloc((size_t)(nt ? nt : 1) * sizeof *bv))) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "crosscheck: out of memory");
        goto fail;
    }
    for (int i = 0; i < nt; i++) {
        birth *b = &all[i];
        if (b->frame_first <= frame0 || b->edge != 0 || b->n < s->min_n)
            continue;
        b->t_event_s = b->t_first_s - (fps > 0 ? 0.5 / fps : 0.0);
        bv[nb++] = *b;
    }
    qsort(bv, (size_t)nb, sizeof *bv, cmp_birth_time);
    rep.births = nb;
    if (nb == 0) {
        rc = sp_error_set(
            err, SP_ERR_INPUT,
            "%s/tracks.csv: no track is born inside the picture (of %d tracks, none starts after "
            "the first frame away from the border with %d detections or more)",
            dir, nt, s->min_n);
        goto fail;
    }

    /* Pings. The sample rate is checked here too, to say in Nyquist's terms what a rate too low
     * means for the sizes sought. */
    {
        sp_audio *au = NULL;
        if ((rc = sp_audio_open(&au, audio, s->listen.channel, err)))
            goto fail;
        double fs = sp_audio_get_info(au)->sample_rate;
        sp_audio_close(au);
        double f_top = sp_minnaert_freq(&s->listen.medium, s->listen.r_min_mm * 1e-3);
        if (f_top > 0 && f_top > s->listen.nyquist_frac * fs) {
            rc = sp_error_set(
                err, SP_ERR_INPUT,
                "%s: sample rate %.0f Hz too low (Nyquist limit %.0f Hz): a %g mm bubble rings at %.0f Hz, "
                "more than %.0f%% of the rate; record at %.0f Hz or more, or raise --rmin",
                audio, fs, 0.5 * fs, s->listen.r_min_mm, f_top, 100 * s->listen.nyquist_frac,
                ceil(f_top / s->listen.nyquist_frac));
            goto fail;
        }
    }
    rep.reused_pings = !s->relisten && pings_reusable(dir, audio, &s->listen);
    if (!rep.reused_pings && (rc = sp_listen(audio, dir, &s->listen, NULL, err)))
        goto fail;
    if ((rc = read_pings(dir, &pg, &np, err)))
        goto fail;
    rep.pings = np;
    if (np == 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: no bubble ping found in the recording", audio);
        goto fail;
    }

    rep.tol_s = s->tol_s > 0 ? s->tol_s : (fps > 0 ? 1.5 / fps : 0.01) + 0.002;
    ta = malloc((size_t)np * sizeof *ta);
    tv = malloc((size_t)nb * sizeof *tv);
    dd = malloc((size_t)(np > nb ? np : nb) * 3 * sizeof *dd);
    v2a = malloc((size_t)nb * sizeof *v2a);
    if (!ta || !tv || !dd || !v2a) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "crosscheck: out of memory");
        goto fail;
    }
    for (int i = 0; i < np; i++)
        ta[i] = pg[i].t_s;
    for (int j = 0; j < nb; j++)
        tv[j] = bv[j].t_event_s;
    sp_xc_align al;
    if ((rc = sp_xc_align_run(ta, np, tv, nb, s->max_lag_s, rep.tol_s, &al, err))) {
        char why[sizeof err->msg];
        snprintf(why, sizeof why, "%s", err ? err->msg : "");
        sp_error_set(err, rc, "%s against %s/tracks.csv: %s", audio, dir, why);
        goto fail;
    }
    rep.peak = al.peak;
    rep.peak2 = al.peak2;
    rep.confidence = 1.0 - al.peak2 / al.peak;
    if (al.peak < 3) {
        rc =
            sp_error_set(err, SP_ERR_INPUT,
                         "%s: cannot align the pings with the births in %s/tracks.csv: at most %.0f coincide "
                         "at any offset within %g s",
                         audio, dir, al.peak, s->max_lag_s);
        goto fail;
    }
    /* Refine: pair at the coarse offset, take the median difference, pair again. */
    double off = al.offset_s;
    int npair = 0;
    for (int pass = 0; pass < 2; pass++) {
        if ((npair = sp_xc_pair(ta, np, tv, nb, off, rep.tol_s, v2a, err)) < 0) {
            rc = err && err->code ? err->code : SP_ERR_INTERNAL;
            goto fail;
        }
        int k = 0;
        for (int j = 0; j < nb; j++)
            if (v2a[j] >= 0)
                dd[k++] = ta[v2a[j]] - tv[j];
        qsort(dd, (size_t)k, sizeof *dd, cmp_dbl);
        if (k > 0)
            off = median_sorted(dd, (size_t)k);
        if (pass == 1 && k > 1) {
            double m = 0, ss = 0;
            for (int i = 0; i < k; i++)
                m += dd[i];
            m /= k;
            for (int i = 0; i < k; i++)
                ss += (dd[i] - m) * (dd[i] - m);
            rep.offset_se_s = 1.2533 * sqrt(ss / (k - 1)) / sqrt((double)k); /* SE of a median */
        }
    }
    rep.offset_s = off;
    rep.pairs = npair;
    rep.matched_frac = (double)npair / (np < nb ? np : nb);

    /* pairs.csv and the agreement. */
    if ((rc = sp_outfile_open(&pairs, dir, "pairs.csv", err)))
        goto fail;
    fprintf(pairs.f,
            "track,t_video_s,t_audio_s,d_optical_mm,d_acoustic_mm,dt_ms,f_hz,snr_db,d_first_mm,diff_mm,"
            "rel_diff\n");
    double *df = dd, *rl = dd + (np > nb ? np : nb), *ar = rl + (np > nb ? np : nb);
    int nd = 0;
    for (int j = 0; j < nb; j++) {
        if (v2a[j] < 0)
            continue;
        const ping_row *p = &pg[v2a[j]];
        const birth *b = &bv[j];
        double da = 2.0 * p->r_mm, dop = isfinite(b->d_vol_mm) ? b->d_vol_mm : b->d_first_mm;
        double diff = da - dop, rel = diff / (0.5 * (da + dop));
        fprintf(pairs.f, "%lld,%.6f,%.6f,", (long long)b->track, b->t_first_s, p->t_s);
        if (isfinite(dop))
            fprintf(pairs.f, "%.5f", dop);
        fprintf(pairs.f, ",%.5f,%.3f,%.3f,", da, 1e3 * (p->t_s - b->t_event_s - off), p->f_hz);
        if (isfinite(p->snr_db))
            fprintf(pairs.f, "%.2f", p->snr_db);
        fputc(',', pairs.f);
        if (isfinite(b->d_first_mm))
            fprintf(pairs.f, "%.5f", b->d_first_mm);
        if (isfinite(dop) && dop > 0) {
            fprintf(pairs.f, ",%.5f,%.5f\n", diff, rel);
            df[nd] = diff;
            rl[nd] = rel;
            ar[nd++] = fabs(diff) / dop;
        } else {
            fputs(",,\n", pairs.f);
        }
    }
    rep.n_diff = nd;
    rep.mean_diff_mm = rep.sd_diff_mm = rep.loa_lo_mm = rep.loa_hi_mm = NAN;
    rep.mean_rel = rep.loa_rel_lo = rep.loa_rel_hi = rep.median_abs_rel = NAN;
    if (nd >= 1) {
        /* Bland & Altman (1986): bias = mean difference, limits of agreement bias -+ 1.96 SD; also on
         * the difference relative to the pair's mean, since the error grows with size. */
        double m = 0, mr = 0, ss = 0, ssr = 0;
        for (int i = 0; i < nd; i++) {
            m += df[i];
            mr += rl[i];
        }
        m /= nd;
        mr /= nd;
        for (int i = 0; i < nd; i++) {
            ss += (df[i] - m) * (df[i] - m);
            ssr += (rl[i] - mr) * (rl[i] - mr);
        }
        double sd = nd > 1 ? sqrt(ss / (nd - 1)) : NAN, sdr = nd > 1 ? sqrt(ssr / (nd - 1)) : NAN;
        rep.mean_diff_mm = m;
        rep.sd_diff_mm = sd;
        rep.loa_lo_mm = m - 1.96 * sd;
        rep.loa_hi_mm = m + 1.96 * sd;
        rep.mean_rel = mr;
        rep.loa_rel_lo = mr - 1.96 * sdr;
        rep.loa_rel_hi = mr + 1.96 * sdr;
        qsort(ar, (size_t)nd, sizeof *ar, cmp_dbl);
        rep.median_abs_rel = median_sorted(ar, (size_t)nd);
    }

    /* summary.json: read-modify-write under a temporary name. */
    char hex[65];
    int64_t bytes = -1;
    int have_id = sha_first_mib(audio, hex, &bytes);
    xc = json_object();
    json_t *ja = json_object();
    int bad = !xc || !ja || set(ja, "path", json_string(audio)) ||
              (have_id &&
               (set(ja, "bytes", json_integer(bytes)) || set(ja, "sha256_first_mib", json_string(hex)))) ||
              set(xc, "audio", ja);
    if (!bad)
        ja = NULL;
    bad = bad || set(xc, "pings_reused", json_boolean(rep.reused_pings)) ||
          set(xc, "pings", json_integer(rep.pings)) || set(xc, "births", json_integer(rep.births)) ||
          set(xc, "tracks", json_integer(nt)) || set(xc, "min_detections", json_integer(s->min_n)) ||
          set(xc, "max_lag_s", jnum(s->max_lag_s)) || set(xc, "tolerance_s", jnum(rep.tol_s)) ||
          set(xc, "offset_s", jnum(rep.offset_s)) || set(xc, "offset_se_s", jnum(rep.offset_se_s)) ||
          set(xc, "offset_rule", json_string("t_audio_s = t_video_s + offset_s")) ||
          set(xc, "peak_coincidences", jnum(rep.peak)) ||
          set(xc, "second_peak_coincidences", jnum(rep.peak2)) ||
          set(xc, "confidence", jnum(rep.confidence)) || set(xc, "pairs", json_integer(rep.pairs)) ||
          set(xc, "matched_fraction", jnum(rep.matched_frac)) ||
          set(xc, "mean_diff_mm", jnum(rep.mean_diff_mm)) || set(xc, "sd_diff_mm", jnum(rep.sd_diff_mm)) ||
          set(xc, "loa_lower_mm", jnum(rep.loa_lo_mm)) || set(xc, "loa_upper_mm", jnum(rep.loa_hi_mm)) ||
          set(xc, "mean_rel_diff", jnum(rep.mean_rel)) || set(xc, "loa_rel_lower", jnum(rep.loa_rel_lo)) ||
          set(xc, "loa_rel_upper", jnum(rep.loa_rel_hi)) ||
          set(xc, "median_abs_rel_diff", jnum(rep.median_abs_rel)) ||
          set(xc, "difference", json_string("d_acoustic_mm - d_optical_mm; relative to the pair's mean")) ||
          set(root, "crosscheck", xc);
    if (bad) {
        json_decref(ja);
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory building the cross-check record", sp);
        goto fail;
    }
    xc = NULL;
    if ((rc = sp_outfile_open(&js, dir, "summary.json", err)))
        goto fail;
    if (json_dumpf(root, js.f, JSON_INDENT(2) | JSON_PRESERVE_ORDER | JSON_REAL_PRECISION(10)) != 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: write failed", sp);
        goto fail;
    }
    fputc('\n', js.f);
    if ((rc = sp_outfile_commit(&pairs, err)) || (rc = sp_outfile_commit(&js, err)))
        goto fail;
    if (rep_out)
        *rep_out = rep;
    rc = SP_OK;
fail:
    sp_outfile_abort(&pairs);
    sp_outfile_abort(&js);
    json_decref(xc);
    json_decref(root);
    free(pg);
    free(all);
    free(bv);
    free(ta);
    free(tv);
    free(dd);
    free(v2a);
    return rc;
}

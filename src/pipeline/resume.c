/* Checkpoint and resume of the measure job: see resume.h for the scheme, docs/methods-resume.md
 * for the reasoning. */
#include "pipeline/resume.h"

#include "pipeline/identity.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "core/outfile.h"

#define CK_MAGIC "SPUMECKP"
#define CK_VERSION 1u
#define CK_ORDER 0x01020304u /* native byte order only: another order reads as damaged */
#define CK_MAX_TEXT (1u << 20)
#define CK_MAX_TOTALS 4096u
#define CK_MAX_BG 4096
#define SPILL_MAX_N (1 << 24) /* detections in one frame, far above any real frame */

struct sp_resume {
    char dir[4096];
    char ckpath[4200], linkspath[4200], spilltmp[4200];
    char *settings; /* "key=value\n" lines of everything that changes results */
    char *ident;    /* the input's fingerprint, same form; first-frame line added when known */
    uint64_t first_hash;
    int have_first;
    int track;
    sp_source_opts sel; /* the run's own selection */

    int active; /* resuming: the fields below hold the checkpoint */
    int64_t pos, next_frame;
    int64_t spill_bytes;
    uint64_t spill_hash;
    long long bubbles_bytes, frames_bytes;
    uint64_t bubbles_hash, frames_hash;
    unsigned char *totals;
    uint32_t totals_size;
    sp_resume_bg bg; /* owned until taken */

    FILE *spill; /* linker inputs of this run, appended frame by frame */
    int spill_is_tmp;
    int replayed; /* resumed with tracking: the spill is to be reopened for appending */
    int64_t spill_len;
    uint64_t spill_h;
};

/* FNV-1a, 64 bit (Fowler, Noll, Vo): a checksum against damage, not against tampering. */
#define FNV_OFFSET 0xcbf29ce484222325ULL
static uint64_t fnv(uint64_t h, const void *p, size_t n)
{
    const unsigned char *c = p;
    for (size_t i = 0; i < n; i++) {
        h ^= c[i];
        h *= 0x100000001b3ULL;
    }
    return h;
}

/* ---- growing text of key=value lines */

typedef struct tbuf {
    char *p;
    size_t n, cap;
    int oom;
} tbuf;

static void tb_add(tbuf *t, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void tb_add(tbuf *t, const char *fmt, ...)
{
    if (t->oom)
        return;
    for (;;) {
        va_list ap;
        va_start(ap, fmt);
        int k = vsnprintf(t->p ? t->p + t->n : NULL, t->p ? t->cap - t->n : 0, fmt, ap);
        va_end(ap);
        if (k < 0) {
            t->oom = 1;
            return;
        }
        if (t->p && t->n + (size_t)k < t->cap) {
            t->n += (size_t)k;
            return;
        }
        size_t nc = t->cap ? 2 * t->cap : 1024;
        while (nc <= t->n + (size_t)k)
            nc *= 2;
        char *q = nc <= CK_MAX_TEXT ? realloc(t->p, nc) : NULL;
        if (!q) {
            free(t->p);
            t->p = NULL;
            t->oom = 1;
            return;
        }
        t->p = q;
        t->cap = nc;
    }
}

static void tb_file(tbuf *t, const char *key, const char *path)
{
    char hex[65];
    long long size = 0;
    tb_add(t, "%s=%s\n", key, path ? path : "");
    if (path && sp_identity_hash(path, hex, &size) == 0)
        tb_add(t, "%s_content=%lld:%s\n", key, size, hex);
}

/* Everything that changes the tables or summary.json. Threads, progress, the report and the overlay
 * video do not; the liquid enters by its resolved properties, so a preset file edited in between
 * is caught too. */
static char *settings_text(const sp_measure_settings *s, const sp_liquid *liq)
{
    tbuf t = {0};
    tb_add(&t, "tool_version=%s\n", SP_VERSION);
    tb_add(&t, "fps=%.17g\nstart=%lld\ncount=%lld\nstep=%lld\n", s->source.fps, (long long)s->source.start,
           (long long)s->source.count, (long long)s->source.step);
    tb_add(&t, "roi=%d,%d,%d,%d\n", s->source.roi.x, s->source.roi.y, s->source.roi.w, s->source.roi.h);
    tb_add(&t, "scale=%.17g\n", s->mm_per_px);
    tb_file(&t, "calib", s->calib_file);
    tb_file(&t, "background", s->bg_image);
    tb_add(&t, "bg_frames=%d\nbg_percentile=%.17g\nbg_segments=%d\n", s->bg_frames, s->bg_percentile,
           s->bg_segments);
    tb_add(&t, "threshold=%.17g\notsu=%d\nflicker=%d\nfill=%d\n", s->threshold, s->otsu, s->flicker, s->fill);
    tb_add(&t, "min_diam_px=%.17g\nmax_diam_px=%.17g\nfit_min_px=%.17g\nedge_level=%.17g\n", s->min_diam_px,
           s->max_diam_px, s->fit_min_px, s->edge_level);
    tb_add(&t, "min_sharpness=%.17g\nsplit=%d\nstill_guard=%d\nstill_level=%.17g\nkeep_defocused=%d\n",
           s->min_sharpness, s->split, s->still_guard, s->still_level, s->keep_defocused);
    tb_add(&t, "track=%d\nmax_gap=%d\n", s->track, s->max_gap);
    tb_add(&t, "liquid=%s\ntemp=%.17g\n", s->liquid ? s->liquid : "", s->temp_c);
    for (int i = 0; i < s->nliquid_set; i++)
        tb_add(&t, "liquid_set=%s\n", s->liquid_set[i]);
    tb_add(&t, "depth_m=%.17g\nillum_depth_mm=%.17g\n", s->depth_m, s->illum_depth_mm);
    if (liq)
        tb_add(&t, "liquid_properties=%s %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g\n",
               liq->name, liq->temp_c, liq->rho_kg_m3, liq->mu_pa_s, liq->sigma_n_m, liq->rho_gas_kg_m3,
               liq->p_atm_pa, liq->g_m_s2, liq->vapour_pa, liq->depth_m, liq->gas_molar_kg_mol);
    tb_add(&t, "boot=%d\nbins=%d\nbins_log=%d\nbin_range=%.17g,%.17g\n", s->boot, s->bins, s->bins_log,
           s->bin_lo_mm, s->bin_hi_mm);
    if (t.oom) {
        free(t.p);
        return NULL;
    }
    return t.p;
}

/* The input by content, not by name or date: size and SHA-256 of the first MiB (a file), the
 * decoded geometry and frame count, and later a hash of the first analysed frame's pixels. A copied
 * or moved recording stays resumable; a different or re-encoded one does not. */
static char *ident_text(const char *input, const sp_source_info *info)
{
    tbuf t = {0};
    char hex[65];
    long long size = 0;
    tb_add(&t, "kind=%s\nformat=%s\n", info->kind, info->format);
    if (sp_identity_hash(input, hex, &size) == 0)
        tb_add(&t, "file=%lld bytes, sha256 of the first MiB %s\n", size, hex);
    tb_add(&t, "size=%dx%d\nsamples=%d bytes, %d bits\nframes_total=%lld\nfps=%.17g\n", info->full_width,
           info->full_height, info->bytes, info->bits, (long long)info->frames_total, info->fps);
    if (t.oom) {
        free(t.p);
        return NULL;
    }
    return t.p;
}

static uint64_t image_hash(const sp_image *im)
{
    int hdr[3] = {im->width, im->height, im->bytes};
    uint64_t h = fnv(FNV_OFFSET, hdr, sizeof hdr);
    for (int y = 0; y < im->height; y++)
        h = fnv(h, sp_row8(im, y), (size_t)im->width * (size_t)im->bytes);
    return h;
}

/* First line where two key=value texts differ: writes "key: was A, now B" into msg. */
static int text_diff(const char *was, const char *now, char *msg, size_t size)
{
    while (*was || *now) {
        const char *ea = strchr(was, '\n'), *eb = strchr(now, '\n');
        size_t la = ea ? (size_t)(ea - was) : strlen(was), lb = eb ? (size_t)(eb - now) : strlen(now);
        if (la != lb || memcmp(was, now, la) != 0) {
            const char *ka = memchr(was, '=', la);
            int kl = ka ? (int)(ka - was) : (int)la;
            const char *va = ka ? ka + 1 : "", *vb = memchr(now, '=', lb);
            int lva = ka ? (int)(la - (size_t)kl - 1) : 0;
            int lvb = vb ? (int)(lb - (size_t)(vb - now) - 1) : (int)lb;
            snprintf(msg, size, "%.*s was '%.*s', now '%.*s'", kl, was, lva > 200 ? 200 : lva, va,
                     lvb > 200 ? 200 : lvb, vb ? vb + 1 : now);
            /* The saved text is untrusted: no control character (a terminal escape, a carriage
             * return) reaches the one-line message. */
            for (char *c = msg; *c; c++)
                if ((unsigned char)*c < 0x20 || *c == 0x7f)
                    *c = '?';
            return 1;
        }
        was += la + (ea != NULL);
        now += lb + (eb != NULL);
    }
    return 0;
}

/* ---- checkpoint file */

typedef struct ckio {
    FILE *f;
    uint64_t h;
    int bad;
    long long size; /* of the file being read: no block may claim more */
} ckio;

static void put(ckio *c, const void *p, size_t n)
{
    c->h = fnv(c->h, p, n);
    if (n && fwrite(p, 1, n, c->f) != n)
        c->bad = 1;
}

static int get(ckio *c, void *p, size_t n)
{
    if (n && fread(p, 1, n, c->f) != n) {
        c->bad = 1;
        return -1;
    }
    c->h = fnv(c->h, p, n);
    return 0;
}

static void put_text(ckio *c, const char *s)
{
    uint32_t n = (uint32_t)strlen(s);
    put(c, &n, sizeof n);
    put(c, s, n);
}

static char *get_text(ckio *c)
{
    uint32_t n;
    if (get(c, &n, sizeof n) || n > CK_MAX_TEXT || (long long)n > c->size)
        return NULL;
    char *s = malloc((size_t)n + 1);
    if (!s)
        return NULL;
    if (get(c, s, n) || memchr(s, '\0', n)) {
        free(s);
        return NULL;
    }
    s[n] = '\0';
    return s;
}

static void bg_release(sp_resume_bg *b)
{
    for (int i = 0; b->img && i < b->n; i++)
        free(b->img[i]);
    free(b->img);
    free(b->centre);
    memset(b, 0, sizeof *b);
}

static long long file_size(const char *path)
{
    struct stat st;
    if (stat(path, &st) != 0 || !S_ISREG(st.st_mode))
        return -1;
    return (long long)st.st_size;
}

/* Is DIR/summary.json a finished run? Looks for "complete": true in its first few KiB. */
static int summary_complete(const char *dir)
{
    char path[4200], buf[4096];
    snprintf(path, sizeof path, "%s/summary.json", dir);
    FILE *f = fopen(path, "rb");
    if (!f)
        return 0;
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    fclose(f);
    buf[n] = '\0';
    const char *k = strstr(buf, "\"complete\"");
    if (!k)
        return 0;
    k += strlen("\"complete\"");
    while (*k == ' ' || *k == ':')
        k++;
    return strncmp(k, "true", 4) == 0;
}

/* Damage message: one line naming the file. */
static int damaged(sp_error *err, const char *path, const char *what)
{
    return sp_error_set(err, SP_ERR_INPUT, "%s: damaged checkpoint (%s); rerun without --resume", path, what);
}

static int load_checkpoint(sp_resume *r, const sp_source_info *info, sp_error *err)
{
    const char *path = r->ckpath;
    int rc = SP_OK;
    char *settings = NULL, *ident = NULL;
    ckio c = {fopen(path, "rb"), FNV_OFFSET, 0, 0};
    if (!c.f) {
        if (errno != ENOENT)
            return sp_error_set(err, SP_ERR_INPUT, "%s: cannot read: %s", path, strerror(errno));
        if (summary_complete(r->dir))
            return sp_error_set(err, SP_ERR_INPUT, "%s: the run there is complete already; nothing to resume",
                                r->dir);
        return sp_error_set(err, SP_ERR_INPUT, "%s: no interrupted run to resume (no %s)", r->dir,
                            SP_RESUME_CHECKPOINT);
    }
    struct stat st;
    if (fstat(fileno(c.f), &st) != 0 || !S_ISREG(st.st_mode)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: not a regular file", path);
        goto done;
    }
    const long long fsize = (long long)st.st_size;
    c.size = fsize;
    char magic[8];
    uint32_t ver, order, bsize;
    if (get(&c, magic, 8) || memcmp(magic, CK_MAGIC, 8)) {
        rc = damaged(err, path, "not a spume checkpoint");
        goto done;
    }
    if (get(&c, &ver, 4) || get(&c, &order, 4) || get(&c, &bsize, 4)) {
        rc = damaged(err, path, "truncated");
        goto done;
    }
    if (order != CK_ORDER || ver != CK_VERSION || bsize != sizeof(sp_bubble)) {
        rc = sp_error_set(
            err, SP_ERR_INPUT,
            "%s: checkpoint written by another build of spume (format %u); rerun without --resume", path,
            (unsigned)ver);
        goto done;
    }
    if (!(settings = get_text(&c)) || !(ident = get_text(&c))) {
        rc = damaged(err, path, c.bad ? "truncated" : "bad text block");
        goto done;
    }
    int64_t v[6];
    if (get(&c, v, sizeof v) || get(&c, &r->spill_hash, 8) || get(&c, &r->bubbles_hash, 8) ||
        get(&c, &r->frames_hash, 8) || get(&c, &r->totals_size, 4)) {
        rc = damaged(err, path, "truncated");
        goto done;
    }
    r->pos = v[0];
    r->next_frame = v[1];
    r->spill_bytes = v[2];
    r->bubbles_bytes = v[3];
    r->frames_bytes = v[4];
    int64_t step = r->sel.step > 0 ? r->sel.step : 1;
    if (r->pos < 1 || r->pos > INT64_MAX / 4 / step || r->next_frame != r->sel.start + r->pos * step ||
        r->spill_bytes < 0 || r->bubbles_bytes < 0 || r->frames_bytes < 0 || v[5] != 0 ||
        r->totals_size == 0 || r->totals_size > CK_MAX_TOTALS) {
        rc = damaged(err, path, "inconsistent counts");
        goto done;
    }
    if (!(r->totals = malloc(r->totals_size))) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto done;
    }
    int32_t g[5];
    sp_resume_bg *b = &r->bg;
    if (get(&c, r->totals, r->totals_size) || get(&c, g, sizeof g) || get(&c, b->mode, sizeof b->mode)) {
        rc = damaged(err, path, "truncated");
        goto done;
    }
    if (g[0] < 1 || g[0] > CK_MAX_BG || g[1] < 1 || g[2] < 1 || g[1] > SP_MAX_DIM || g[2] > SP_MAX_DIM ||
        (long long)g[1] * g[2] > SP_MAX_PIXELS || g[3] < 0 || g[4] < 0 ||
        !memchr(b->mode, '\0', sizeof b->mode)) {
        rc = damaged(err, path, "bad background block");
        goto done;
    }
    size_t npx = (size_t)g[1] * (size_t)g[2];
    /* Allocate only what the file can actually hold, so a damaged header cannot ask for gigabytes. */
    if ((double)g[0] * ((double)sizeof(double) + sizeof(float) * (double)npx) > (double)fsize) {
        rc = damaged(err, path, "truncated");
        goto done;
    }
    b->width = g[1];
    b->height = g[2];
    b->samples = g[3];
    b->still_filled = g[4];
    b->img = calloc((size_t)g[0], sizeof *b->img);
    b->centre = calloc((size_t)g[0], sizeof *b->centre);
    if (!b->img || !b->centre) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto done;
    }
    b->n = g[0];
    if (get(&c, b->centre, sizeof *b->centre * (size_t)b->n)) {
        rc = damaged(err, path, "truncated");
        goto done;
    }
    for (int k = 0; k < b->n; k++) {
        if (!(b->img[k] = malloc(sizeof(float) * npx))) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory for the background", path);
            goto done;
        }
        if (get(&c, b->img[k], sizeof(float) * npx)) {
            rc = damaged(err, path, "truncated");
            goto done;
        }
    }
    uint64_t want = c.h, got;
    unsigned char extra;
    if (fread(&got, 1, 8, c.f) != 8 || got != want || fread(&extra, 1, 1, c.f) != 0) {
        rc = damaged(err, path, "checksum mismatch");
        goto done;
    }

    /* The checkpoint is sound; now does it belong to this run? */
    char why[600];
    if (text_diff(settings, r->settings, why, sizeof why)) {
        rc = sp_error_set(err, SP_ERR_INPUT,
                          "%s: options differ from the interrupted run's (%s); resume with the same options",
                          path, why);
        goto done;
    }
    if (text_diff(ident, r->ident, why, sizeof why)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: the input is not the interrupted run's (%s)", path, why);
        goto done;
    }
    if (b->width != info->width || b->height != info->height) {
        rc = sp_error_set(err, SP_ERR_INPUT,
                          "%s: the input is not the interrupted run's (frames %dx%d, was %dx%d)", path,
                          info->width, info->height, b->width, b->height);
        goto done;
    }
done:
    fclose(c.f);
    free(settings);
    free(ident);
    return rc;
}

/* Hash of the first selected frame, read with a one-frame selection of the run's own. */
static int first_frame_hash(const char *input, const sp_source_opts *sel, uint64_t *h, sp_error *err)
{
    sp_source_opts o = *sel;
    o.count = 1;
    sp_source *src = NULL;
    sp_image img = {0};
    int64_t idx;
    double t;
    int got = 0, rc;
    if ((rc = sp_source_open(&src, input, &o, err)))
        return rc;
    if (!(rc = sp_source_next(src, &img, &idx, &t, &got, err)) && !got)
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: the selection holds no frames", input);
    if (!rc)
        *h = image_hash(&img);
    sp_image_free(&img);
    sp_source_close(src);
    return rc;
}

static int add_first_line(sp_resume *r)
{
    tbuf t = {r->ident, strlen(r->ident), strlen(r->ident) + 1, 0};
    tb_add(&t, "first_frame_fnv64=%016llx\n", (unsigned long long)r->first_hash);
    r->ident = t.p;
    return t.oom ? -1 : 0;
}

int sp_resume_check(const char *outdir, sp_error *err)
{
    struct stat st;
    char path[4200];
    if (!outdir || stat(outdir, &st) != 0 || !S_ISDIR(st.st_mode))
        return sp_error_set(err, SP_ERR_INPUT, "%s: no such directory; nothing to resume",
                            outdir ? outdir : "");
    snprintf(path, sizeof path, "%s/%s", outdir, SP_RESUME_CHECKPOINT);
    if (file_size(path) >= 0)
        return SP_OK;
    if (summary_complete(outdir))
        return sp_error_set(err, SP_ERR_INPUT, "%s: the run there is complete already; nothing to resume",
                            outdir);
    return sp_error_set(err, SP_ERR_INPUT, "%s: no interrupted run to resume (no %s)", outdir,
                        SP_RESUME_CHECKPOINT);
}

int sp_resume_begin(sp_resume **out, const char *input, const char *outdir, const sp_measure_settings *s,
                    const sp_liquid *liq, const sp_source_info *info, sp_error *err)
{
    *out = NULL;
    sp_resume *r = calloc(1, sizeof *r);
    int rc = SP_OK;
    if (!r)
        return sp_error_set(err, SP_ERR_INTERNAL, "resume: out of memory");
    r->track = s->track;
    r->sel = s->source;
    int n0 = snprintf(r->dir, sizeof r->dir, "%s", outdir);
    int n1 = snprintf(r->ckpath, sizeof r->ckpath, "%s/%s", outdir, SP_RESUME_CHECKPOINT);
    int n2 = snprintf(r->linkspath, sizeof r->linkspath, "%s/%s", outdir, SP_RESUME_LINKS);
    int n3 = snprintf(r->spilltmp, sizeof r->spilltmp, "%s/.%s.%ld.partial", outdir, SP_RESUME_LINKS,
                      (long)getpid());
    if (n0 < 0 || (size_t)n0 >= sizeof r->dir || n1 < 0 || (size_t)n1 >= sizeof r->ckpath || n2 < 0 ||
        (size_t)n2 >= sizeof r->linkspath || n3 < 0 || (size_t)n3 >= sizeof r->spilltmp) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: output path too long", outdir);
        goto fail;
    }
    if (!(r->settings = settings_text(s, liq)) || !(r->ident = ident_text(input, info))) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "resume: out of memory");
        goto fail;
    }
    r->spill_h = FNV_OFFSET;
    if (s->resume) {
        if ((rc = first_frame_hash(input, &s->source, &r->first_hash, err)))
            goto fail;
        r->have_first = 1;
        if (add_first_line(r)) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "resume: out of memory");
            goto fail;
        }
        if ((rc = load_checkpoint(r, info, err)))
            goto fail;
        long long nb = file_size(r->linkspath);
        char tb[4200], tf[4200];
        snprintf(tb, sizeof tb, "%s/bubbles.csv", outdir);
        snprintf(tf, sizeof tf, "%s/frames.csv", outdir);
        if (file_size(tb) != r->bubbles_bytes || file_size(tf) != r->frames_bytes) {
            rc = sp_error_set(err, SP_ERR_INPUT,
                              "%s: bubbles.csv or frames.csv changed since the interrupt (size differs from "
                              "the checkpoint's); rerun without --resume",
                              r->ckpath);
            goto fail;
        }
        if (s->track && nb < r->spill_bytes) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: %s; rerun without --resume", r->linkspath,
                              nb < 0 ? "missing" : "shorter than the checkpoint says (damaged)");
            goto fail;
        }
        r->active = 1;
    }
    *out = r;
    return SP_OK;
fail:
    sp_resume_free(r);
    return rc;
}

void sp_resume_free(sp_resume *r)
{
    if (!r)
        return;
    if (r->spill)
        fclose(r->spill);
    if (r->spill_is_tmp)
        unlink(r->spilltmp);
    bg_release(&r->bg);
    free(r->totals);
    free(r->settings);
    free(r->ident);
    free(r);
}

int sp_resume_active(const sp_resume *r)
{
    return r && r->active;
}

void sp_resume_source_opts(const sp_resume *r, sp_source_opts *o)
{
    *o = r->sel;
    if (!r->active)
        return;
    /* Starting at the next frame with the same step picks the same indices; times come from the
     * recording's own clock (or index / fps), so they match too. Frames before it are decoded and
     * dropped by the source (no seek). */
    o->start = r->next_frame;
    if (r->sel.count > 0)
        o->count = r->sel.count - r->pos > 0 ? r->sel.count - r->pos : 1;
}

int sp_resume_exhausted(const sp_resume *r)
{
    return r && r->active && r->sel.count > 0 && r->pos >= r->sel.count;
}

int64_t sp_resume_pos(const sp_resume *r)
{
    return r && r->active ? r->pos : 0;
}

int sp_resume_totals(const sp_resume *r, void *dst, size_t size, sp_error *err)
{
    if (!r || !r->active)
        return SP_OK;
    if (size != r->totals_size)
        return sp_error_set(err, SP_ERR_INPUT, "%s: checkpoint written by another build of spume", r->ckpath);
    memcpy(dst, r->totals, size);
    return SP_OK;
}

int sp_resume_take_bg(sp_resume *r, sp_resume_bg *bg)
{
    if (!r || !r->active || !r->bg.n)
        return 0;
    *bg = r->bg;
    memset(&r->bg, 0, sizeof r->bg);
    return 1;
}

int sp_resume_copy_table(sp_resume *r, const char *name, FILE *dst, sp_error *err)
{
    char path[4200];
    snprintf(path, sizeof path, "%s/%s", r->dir, name);
    int is_b = !strcmp(name, "bubbles.csv");
    long long want = is_b ? r->bubbles_bytes : r->frames_bytes;
    uint64_t h = FNV_OFFSET;
    FILE *f = fopen(path, "rb");
    if (!f)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot read: %s", path, strerror(errno));
    char *buf = malloc(1 << 16);
    long long total = 0;
    size_t n;
    int rc = SP_OK;
    if (!buf) {
        fclose(f);
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
    }
    while ((n = fread(buf, 1, 1 << 16, f)) > 0) {
        total += (long long)n;
        if (total > want || fwrite(buf, 1, n, dst) != n)
            break;
        h = fnv(h, buf, n);
    }
    if (ferror(f) || total != want || h != (is_b ? r->bubbles_hash : r->frames_hash))
        rc = sp_error_set(err, SP_ERR_INPUT,
                          "%s: changed since the interrupt (its size or checksum is not the checkpoint's); "
                          "rerun without --resume",
                          path);
    else if (ferror(dst))
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: write failed while copying %s", r->dir, name);
    free(buf);
    fclose(f);
    return rc;
}

/* FNV-1a of a whole file (the tables just committed; read back from the page cache). */
static int hash_file(const char *path, uint64_t *h)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return -1;
    unsigned char *buf = malloc(1 << 16);
    size_t n;
    *h = FNV_OFFSET;
    while (buf && (n = fread(buf, 1, 1 << 16, f)) > 0)
        *h = fnv(*h, buf, n);
    int bad = !buf || ferror(f);
    free(buf);
    fclose(f);
    return bad ? -1 : 0;
}

/* One spill record: frame, time, count, then the sp_bubble structs exactly as the linker got them. */
typedef struct spill_head {
    int64_t frame;
    double t_s;
    int32_t n, zero;
} spill_head;

/* Read the spill's valid part; with tr NULL only its checksum is checked, else every frame is fed
 * to tr (checked first, so a damaged spill never reaches the linker). */
static int spill_pass(sp_resume *r, FILE *f, sp_trackrun *tr, sp_error *err)
{
    const char *path = r->linkspath;
    int64_t left = r->spill_bytes, frames = 0, last = INT64_MIN;
    uint64_t h = FNV_OFFSET;
    sp_bubble *b = NULL;
    int64_t *ids = NULL;
    int cap = 0, rc = SP_OK;
    while (left > 0) {
        spill_head hd;
        if ((int64_t)sizeof hd > left || fread(&hd, sizeof hd, 1, f) != 1) {
            rc = damaged(err, path, "truncated record");
            goto done;
        }
        left -= (int64_t)sizeof hd;
        h = fnv(h, &hd, sizeof hd);
        if (hd.n < 0 || hd.n > SPILL_MAX_N || hd.zero != 0 || hd.frame <= last || hd.frame >= r->next_frame ||
            !isfinite(hd.t_s) || (int64_t)hd.n * (int64_t)sizeof *b > left) {
            rc = damaged(err, path, "bad record");
            goto done;
        }
        if (hd.n > cap) {
            sp_bubble *nb = realloc(b, sizeof *b * (size_t)hd.n);
            int64_t *ni = nb ? realloc(ids, sizeof *ids * (size_t)hd.n) : NULL;
            if (nb)
                b = nb;
            if (ni)
                ids = ni;
            if (!nb || !ni) {
                rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
                goto done;
            }
            cap = hd.n;
        }
        if (hd.n && fread(b, sizeof *b, (size_t)hd.n, f) != (size_t)hd.n) {
            rc = damaged(err, path, "truncated record");
            goto done;
        }
        left -= (int64_t)hd.n * (int64_t)sizeof *b;
        h = fnv(h, b, sizeof *b * (size_t)hd.n);
        last = hd.frame;
        frames++;
        if (tr && (rc = sp_trackrun_frame(tr, hd.frame, hd.t_s, b, hd.n, ids, err))) {
            /* The linker's own checks (finite, plausible values) can refuse a record whose checksum
             * agrees (written on purpose, not damaged): the message must still name the spill. */
            if (rc == SP_ERR_INPUT) {
                char why[512];
                snprintf(why, sizeof why, "%.500s", err->msg);
                rc = damaged(err, path, why);
            }
            goto done;
        }
    }
    if (h != r->spill_hash || frames != r->pos)
        rc = damaged(err, path, "checksum mismatch");
done:
    free(b);
    free(ids);
    return rc;
}

int sp_resume_replay(sp_resume *r, sp_trackrun *tr, sp_error *err)
{
    if (!r || !r->active || !tr)
        return SP_OK;
    FILE *f = fopen(r->linkspath, "rb");
    if (!f)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot read: %s", r->linkspath, strerror(errno));
    setvbuf(f, NULL, _IOFBF, 1 << 20);
    int rc = spill_pass(r, f, NULL, err);
    if (!rc && fseek(f, 0, SEEK_SET) != 0)
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot read: %s", r->linkspath, strerror(errno));
    if (!rc)
        rc = spill_pass(r, f, tr, err);
    fclose(f);
    if (rc)
        return rc;
    r->replayed = 1; /* the spill is reopened for appending with the first new frame */
    r->spill_len = r->spill_bytes;
    r->spill_h = r->spill_hash;
    return SP_OK;
}

void sp_resume_first_frame(sp_resume *r, const sp_image *img)
{
    if (!r || r->have_first)
        return;
    r->first_hash = image_hash(img);
    r->have_first = !add_first_line(r);
}

int sp_resume_spill(sp_resume *r, int64_t frame, double t_s, const sp_bubble *b, int n, sp_error *err)
{
    if (!r)
        return SP_OK;
    if (!r->spill && !r->active) {
        /* Opened with the first analysed frame, so it exists only once detection is under way. */
        if (!(r->spill = fopen(r->spilltmp, "wb")))
            return sp_error_set(err, SP_ERR_INPUT, "%s: cannot create %s: %s", r->dir, r->spilltmp,
                                strerror(errno));
        r->spill_is_tmp = 1;
        setvbuf(r->spill, NULL, _IOFBF, 1 << 20);
    } else if (!r->spill && r->replayed) {
        /* Resumed: anything past the checkpoint's length came from a run that ended without one. */
        if (truncate(r->linkspath, (off_t)r->spill_bytes) != 0 || !(r->spill = fopen(r->linkspath, "ab")))
            return sp_error_set(err, SP_ERR_INPUT, "%s: cannot append: %s", r->linkspath, strerror(errno));
        setvbuf(r->spill, NULL, _IOFBF, 1 << 20);
        r->replayed = 0;
    }
    if (!r->spill)
        return SP_OK;
    spill_head hd = {frame, t_s, n, 0};
    r->spill_h = fnv(r->spill_h, &hd, sizeof hd);
    r->spill_h = fnv(r->spill_h, b, sizeof *b * (size_t)n);
    if (fwrite(&hd, sizeof hd, 1, r->spill) != 1 ||
        (n && fwrite(b, sizeof *b, (size_t)n, r->spill) != (size_t)n))
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot write the resume data: %s", r->dir,
                            strerror(errno));
    r->spill_len += (int64_t)sizeof hd + (int64_t)n * (int64_t)sizeof *b;
    return SP_OK;
}

void sp_resume_invalidate(sp_resume *r)
{
    if (r)
        unlink(r->ckpath);
}

int sp_resume_save(sp_resume *r, const sp_resume_bg *bg, int64_t pos, int64_t next_frame, const void *totals,
                   size_t totals_size, sp_error *err)
{
    char tb[4200], tf[4200];
    snprintf(tb, sizeof tb, "%s/bubbles.csv", r->dir);
    snprintf(tf, sizeof tf, "%s/frames.csv", r->dir);
    long long bsz = file_size(tb), fsz = file_size(tf);
    uint64_t bh, fh;
    if (bsz < 0 || fsz < 0 || hash_file(tb, &bh) || hash_file(tf, &fh))
        return sp_error_set(err, SP_ERR_INPUT, "%s: tables missing after the interrupt", r->dir);
    if (!r->have_first)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: no frame analysed before the interrupt", r->dir);
    if (r->spill) {
        int bad = fflush(r->spill) != 0 || ferror(r->spill);
        int e = errno;
        bad |= fclose(r->spill) != 0;
        r->spill = NULL;
        if (bad)
            return sp_error_set(err, SP_ERR_INPUT, "%s: cannot write the resume data: %s", r->dir,
                                strerror(e));
        if (r->spill_is_tmp) {
            if (rename(r->spilltmp, r->linkspath) != 0)
                return sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", r->linkspath,
                                    strerror(errno));
            r->spill_is_tmp = 0;
        }
    }
    sp_outfile o;
    int rc = sp_outfile_open(&o, r->dir, SP_RESUME_CHECKPOINT, err);
    if (rc)
        return rc;
    ckio c = {o.f, FNV_OFFSET, 0, 0};
    uint32_t ver = CK_VERSION, order = CK_ORDER, bsize = sizeof(sp_bubble), tsize = (uint32_t)totals_size;
    put(&c, CK_MAGIC, 8);
    put(&c, &ver, 4);
    put(&c, &order, 4);
    put(&c, &bsize, 4);
    put_text(&c, r->settings);
    put_text(&c, r->ident);
    int64_t v[6] = {pos, next_frame, r->spill_len, bsz, fsz, 0};
    put(&c, v, sizeof v);
    put(&c, &r->spill_h, 8);
    put(&c, &bh, 8);
    put(&c, &fh, 8);
    put(&c, &tsize, 4);
    put(&c, totals, totals_size);
    int32_t g[5] = {bg->n, bg->width, bg->height, bg->samples, bg->still_filled};
    char mode[32] = {0};
    snprintf(mode, sizeof mode, "%s", bg->mode);
    put(&c, g, sizeof g);
    put(&c, mode, sizeof mode);
    put(&c, bg->centre, sizeof *bg->centre * (size_t)bg->n);
    for (int k = 0; k < bg->n; k++)
        put(&c, bg->img[k], sizeof(float) * (size_t)bg->width * (size_t)bg->height);
    uint64_t h = c.h;
    put(&c, &h, 8);
    if (c.bad) {
        sp_outfile_abort(&o);
        return sp_error_set(err, SP_ERR_INPUT, "%s: write failed", r->ckpath);
    }
    return sp_outfile_commit(&o, err);
}

void sp_resume_done(sp_resume *r)
{
    if (!r)
        return;
    unlink(r->ckpath);
    unlink(r->linkspath);
    if (r->spill) {
        fclose(r->spill);
        r->spill = NULL;
    }
    if (r->spill_is_tmp) {
        unlink(r->spilltmp);
        r->spill_is_tmp = 0;
    }
}

/* Frame sources: one front for videos and still-frame sequences, with frame selection
 * (start / count / step), the region of interest and timing applied here, alike for every back end.
 *
 * Dispatch on the path:
 *   - a directory              -> its image files as numbered stills, in natural order of the names;
 *   - no such file, but the path holds one printf conversion (%d, %05d) -> numbered stills by
 *     pattern, from the first existing number among 0..9 while files exist;
 *   - a file whose first bytes are a PNG, JPEG, TIFF, BMP or PNM signature -> a one-frame still
 *     sequence (judged by content, not by the name). A single frame has t = 0 whatever the rate,
 *     so --fps is not demanded for it;
 *   - any other file           -> a video through libavformat.
 * Memory: the back end holds one full frame; the delivered (cropped) frame is the caller's. */
#include "io/ffimage.h"
#include "io/source_internal.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

struct sp_source {
    sp_source_info info;
    sp_source_opts opts;
    char *path;
    sp_video *video;
    sp_stills *stills;
    sp_image full;      /* the last decoded frame at full size */
    int64_t next_index; /* index in the recording of the next frame the back end gives */
    int64_t delivered;
    int failed;
};

void sp_source_opts_default(sp_source_opts *o)
{
    memset(o, 0, sizeof *o);
    o->step = 1;
}

static int sniff_still(const char *path)
{
    uint8_t head[16];
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return 0;
    size_t n = fread(head, 1, sizeof head, fp);
    fclose(fp);
    if (n >= 8 && memcmp(head, "\x89PNG\r\n\x1a\n", 8) == 0)
        return 1;
    if (n >= 3 && head[0] == 0xFF && head[1] == 0xD8 && head[2] == 0xFF)
        return 1;
    return sp_ffimage_sniff(head, n) != NULL;
}

static int64_t selected(int64_t total, const sp_source_opts *o)
{
    if (total < 0)
        return -1;
    if (o->start >= total)
        return 0;
    int64_t n = (total - o->start + o->step - 1) / o->step;
    return (o->count > 0 && o->count < n) ? o->count : n;
}

int sp_source_open(sp_source **out, const char *path, const sp_source_opts *opts, sp_error *err)
{
    int rc = SP_OK;
    *out = NULL;
    sp_source_opts o;
    if (opts)
        o = *opts;
    else
        sp_source_opts_default(&o);
    if (!path || !*path)
        return sp_error_set(err, SP_ERR_INPUT, "input: no path given");
    if (!(o.fps >= 0) || !isfinite(o.fps))
        return sp_error_set(err, SP_ERR_INPUT, "%s: frame rate %g is not a positive number", path, o.fps);
    if (o.start < 0 || o.count < 0 || o.step < 1)
        return sp_error_set(
            err, SP_ERR_INPUT,
            "%s: bad frame selection (start %lld, count %lld, step %lld): start and count must "
            "be >= 0, step >= 1",
            path, (long long)o.start, (long long)o.count, (long long)o.step);
    sp_ffmpeg_quiet();

    sp_source *s = calloc(1, sizeof *s);
    if (!s || !(s->path = strdup(path))) {
        free(s);
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
    }
    s->opts = o;

    struct stat sb;
    int kind = -1; /* stills kind, or -1 for video */
    if (stat(path, &sb) == 0) {
        if (S_ISDIR(sb.st_mode)) {
            kind = SP_STILLS_DIR;
        } else if (!S_ISREG(sb.st_mode)) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: not a regular file or directory", path);
            goto fail;
        } else if (sb.st_size == 0) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: empty file", path);
            goto fail;
        } else if (sniff_still(path)) {
            kind = SP_STILLS_SINGLE;
        }
    } else {
        int pat = sp_stills_is_pattern(path);
        if (pat == 1) {
            kind = SP_STILLS_PATTERN;
        } else if (pat < 0) {
            rc =
                sp_error_set(err, SP_ERR_INPUT,
                             "%s: no such file, and not a frame pattern (one %%d or %%0Nd conversion)", path);
            goto fail;
        } else {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot open (%s)", path, strerror(errno));
            goto fail;
        }
    }

    if (kind == SP_STILLS_DIR || kind == SP_STILLS_PATTERN) {
        if (!(o.fps > 0)) {
            rc = sp_error_set(err, SP_ERR_INPUT,
                              "%s: still frames carry no timing; give the frame rate with --fps", path);
            goto fail;
        }
    }
    if (kind >= 0)
        rc = sp_stills_open(&s->stills, path, kind, &s->info, err);
    else
        rc = sp_video_open(&s->video, path, o.sparse, o.known_total, &s->info, err);
    if (rc)
        goto fail;

    sp_source_info *in = &s->info;
    if (o.fps > 0)
        in->fps = o.fps;
    if (o.roi.w != 0 && o.roi.h != 0) {
        const sp_roi *r = &o.roi;
        if (r->x < 0 || r->y < 0 || r->w < 0 || r->h < 0 || (long long)r->x + r->w > in->full_width ||
            (long long)r->y + r->h > in->full_height) {
            rc = sp_error_set(err, SP_ERR_INPUT,
                              "%s: region of interest %d,%d,%d,%d lies outside the %dx%d frame", path, r->x,
                              r->y, r->w, r->h, in->full_width, in->full_height);
            goto fail;
        }
        in->width = r->w;
        in->height = r->h;
    } else {
        s->opts.roi = (sp_roi){0, 0, in->full_width, in->full_height};
        in->width = in->full_width;
        in->height = in->full_height;
    }
    in->frames_selected = selected(in->frames_total, &o);
    *out = s;
    return SP_OK;
fail:
    sp_source_close(s);
    return rc;
}

const sp_source_info *sp_source_get_info(const sp_source *s)
{
    return &s->info;
}

/* Copy the region of interest of src into dst. */
static int crop(const sp_image *src, const sp_roi *r, sp_image *dst, sp_error *err)
{
    int rc = sp_image_alloc(dst, r->w, r->h, src->bytes, err);
    if (rc)
        return rc;
    dst->bits = src->bits;
    size_t rowbytes = (size_t)r->w * (size_t)src->bytes;
    for (int y = 0; y < r->h; y++)
        memcpy((uint8_t *)dst->data + (ptrdiff_t)y * dst->stride,
               (const uint8_t *)src->data + (ptrdiff_t)(r->y + y) * src->stride +
                   (ptrdiff_t)r->x * src->bytes,
               rowbytes);
    return SP_OK;
}

/* The next selected frame: delivered into img (deliver = 1) or passed over without its pixels and,
 * where the format allows, without decoding it (deliver = 0). Frames outside the selection are
 * always passed over. */
static int advance(sp_source *s, int deliver, sp_image *img, int64_t *index, double *t_s, int *got,
                   sp_error *err)
{
    *got = 0;
    if (s->failed)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: source read again after an error", s->path);
    const sp_source_opts *o = &s->opts;
    for (;;) {
        if (o->count > 0 && s->delivered >= o->count)
            return SP_OK;
        int64_t idx = s->next_index;
        int want = idx >= o->start && (idx - o->start) % o->step == 0;
        int read = want && deliver;
        double t = 0;
        int g = 0, rc;
        if (s->video)
            rc = read ? sp_video_next(s->video, 1, &s->full, &t, &g, err) : sp_video_skip(s->video, &g, err);
        else
            rc = sp_stills_next(s->stills, read, &s->full, &g, err);
        if (rc) {
            s->failed = 1;
            return rc;
        }
        if (!g)
            return SP_OK;
        s->next_index++;
        if (!want)
            continue;
        if (read) {
            /* The rate override (and every still sequence) times frames as index / fps. */
            if (o->fps > 0)
                t = (double)idx / o->fps;
            if (o->roi.x == 0 && o->roi.y == 0 && o->roi.w == s->full.width && o->roi.h == s->full.height) {
                /* Whole frame: hand the buffer over instead of copying it (the back end reuses or
                 * reallocates whatever it gets back). */
                sp_image tmp = *img;
                *img = s->full;
                s->full = tmp;
            } else if ((rc = crop(&s->full, &o->roi, img, err))) {
                s->failed = 1;
                return rc;
            }
            *t_s = t;
        }
        s->delivered++;
        *index = idx;
        *got = 1;
        return SP_OK;
    }
}

int sp_source_next(sp_source *s, sp_image *img, int64_t *index, double *t_s, int *got, sp_error *err)
{
    return advance(s, 1, img, index, t_s, got, err);
}

int sp_source_skip(sp_source *s, int64_t *index, int *got, sp_error *err)
{
    double t;
    return advance(s, 0, NULL, index, &t, got, err);
}

int sp_source_seek(sp_source *s, int64_t pos, int *done, sp_error *err)
{
    *done = 0;
    const sp_source_opts *o = &s->opts;
    if (s->failed || !s->video || !o->sparse || o->step != 1 || pos <= s->delivered ||
        (o->count > 0 && pos >= o->count))
        return SP_OK;
    int64_t k = o->start + pos;
    int rc = sp_video_seek(s->video, k, done, err);
    if (rc || *done < 0) {
        s->failed = 1;
        return rc;
    }
    if (*done > 0) {
        s->next_index = k;
        s->delivered = pos;
    }
    return SP_OK;
}

typedef struct sample_ctx {
    sp_source *s;
    sp_source_sample_fn fn;
    void *ud;
    sp_image img;
} sample_ctx;

static int sample_one(void *ud, const sp_image *full, int64_t index, int target, sp_error *err)
{
    sample_ctx *c = ud;
    const sp_source *s = c->s;
    if (full->width != s->info.full_width || full->height != s->info.full_height ||
        full->bytes != s->info.bytes)
        return sp_error_set(err, SP_ERR_INPUT,
                            "%s: keyframe %lld is %dx%d at %d bits, the video %dx%d at %d bits", s->path,
                            (long long)index, full->width, full->height, 8 * full->bytes, s->info.full_width,
                            s->info.full_height, 8 * s->info.bytes);
    int rc = crop(full, &s->opts.roi, &c->img, err);
    return rc ? rc : c->fn(c->ud, &c->img, index - s->opts.start, target, err);
}

int sp_source_sample(sp_source *s, const int64_t *pos, int n, int min_keys, sp_source_sample_fn fn, void *ud,
                     int *done, sp_error *err)
{
    *done = 0;
    if (!s->video || s->opts.step != 1 || s->info.frames_selected <= 0 || n < 1 || n > 1000000)
        return SP_OK;
    int64_t *target = malloc((size_t)n * sizeof *target);
    if (!target)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", s->path);
    for (int j = 0; j < n; j++)
        target[j] = s->opts.start + pos[j];
    sample_ctx c = {s, fn, ud, {0}};
    int rc = sp_video_sample_keys(s->path, target, n, s->opts.start, s->opts.start + s->info.frames_selected,
                                  min_keys, sample_one, &c, done, err);
    free(target);
    sp_image_free(&c.img);
    return rc;
}

void sp_source_close(sp_source *s)
{
    if (!s)
        return;
    sp_video_close(s->video);
    sp_stills_close(s->stills);
    sp_image_free(&s->full);
    free(s->path);
    free(s);
}

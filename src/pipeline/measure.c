/* The measure job: stream frames, estimate the background, detect bubbles frame by frame in
 * parallel, and write the tables in frame order. Memory is bounded by the ring of frames in
 * flight and the background samples, never by the length of the recording. */
#include "spume.h"

#include "calib/calfile.h"
#include "core/jsonw.h"
#include "core/outfile.h"
#include "detect/background.h"
#include "detect/detect.h"
#include "pipeline/identity.h"
#include "pipeline/resume.h"
#include "pipeline/tracking.h"
#include "report/report.h"

#include <errno.h>
#include <math.h>
#include <omp.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

#define MAX_BATCH 64
#define BG_MEMORY_CAP (1024LL * 1024 * 1024) /* bytes of background samples held at once */

void sp_measure_settings_default(sp_measure_settings *s)
{
    memset(s, 0, sizeof *s);
    sp_source_opts_default(&s->source);
    s->bg_frames = 40;
    s->bg_percentile = 50;
    s->bg_segments = 1;
    sp_detect_opts d;
    sp_detect_opts_default(&d);
    s->threshold = d.threshold;
    s->otsu = d.otsu;
    s->flicker = d.flicker;
    s->fill = d.fill;
    s->min_diam_px = d.measure.min_diam_px;
    s->max_diam_px = d.measure.max_diam_px;
    s->fit_min_px = d.measure.fit_min_px;
    s->edge_level = d.measure.edge_level;
    s->min_sharpness = d.measure.min_sharpness;
    s->split = d.measure.split;
    s->still_guard = 1;
    s->still_level = 0.5;
    s->track = 1;
    s->max_gap = 3;
    s->liquid = "water";
    s->temp_c = 20;
    s->boot = 1000;
    s->bins = 20;
    s->report = 1;
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + ts.tv_nsec * 1e-9;
}

typedef struct bgset {
    int n;          /* estimates */
    float **img;    /* n frame-sized float images */
    double *centre; /* selection position (0-based delivered frame count) each estimate stands for */
    char mode[32];
    int samples;      /* frames sampled per estimate */
    int still_filled; /* dark still objects refilled from the surrounding light (all estimates) */
} bgset;

static void bgset_free(bgset *b)
{
    for (int i = 0; i < b->n; i++)
        free(b->img ? b->img[i] : NULL);
    free(b->img);
    free(b->centre);
    memset(b, 0, sizeof *b);
}

static int bgset_alloc(bgset *b, int n, int w, int h, sp_error *err)
{
    b->img = calloc((size_t)n, sizeof *b->img);
    b->centre = calloc((size_t)n, sizeof *b->centre);
    if (!b->img || !b->centre)
        return sp_error_set(err, SP_ERR_INTERNAL, "background: out of memory");
    b->n = n;
    for (int i = 0; i < n; i++)
        if (!(b->img[i] = malloc(sizeof(float) * (size_t)w * (size_t)h)))
            return sp_error_set(err, SP_ERR_INTERNAL, "background: out of memory for %dx%d", w, h);
    return SP_OK;
}

/* Background from an image of the empty field, cropped like the recording. */
static int bg_from_file(const sp_measure_settings *s, int w, int h, bgset *b, sp_error *err)
{
    sp_source_opts o;
    sp_source_opts_default(&o);
    o.fps = 1;
    o.count = 1;
    o.roi = s->source.roi;
    sp_source *src = NULL;
    sp_image img = {0};
    int got = 0, rc;
    int64_t idx;
    double t;
    if ((rc = sp_source_open(&src, s->bg_image, &o, err)))
        return rc;
    if ((rc = sp_source_next(src, &img, &idx, &t, &got, err)))
        goto done;
    if (!got) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: no image in the background file", s->bg_image);
        goto done;
    }
    if (img.width != w || img.height != h) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: background is %dx%d but the frames are %dx%d", s->bg_image,
                          img.width, img.height, w, h);
        goto done;
    }
    if ((rc = bgset_alloc(b, 1, w, h, err)))
        goto done;
    rc = sp_bg_from_image(&img, b->img[0], err);
    snprintf(b->mode, sizeof b->mode, "image");
    b->samples = 1;
done:
    sp_image_free(&img);
    sp_source_close(src);
    return rc;
}

#define KEY_MIN_SAMPLES 16 /* background samples per segment from keyframes, at least */
#define SEEK_MIN_GAP 4     /* frames ahead of the next sample from which seeking beats reading */

typedef struct key_ctx {
    sp_bg_builder **bld;
    int per;
} key_ctx;

static int key_add(void *ud, const sp_image *img, int64_t pos, int target, sp_error *err)
{
    (void)pos;
    key_ctx *c = ud;
    return sp_bg_builder_add(c->bld[target / c->per], img, err);
}

/* Per-pixel percentile over frames sampled evenly across the selection, in bg_segments
 * consecutive parts of the run (one estimate each, later interpolated in time). One sequential
 * read of the recording; only the sampled frames are kept. */
static int bg_from_recording(const char *input, const sp_measure_settings *s, const sp_source_info *info,
                             bgset *b, sp_error *err)
{
    const int w = info->width, h = info->height, bytes = info->bytes;
    int64_t sel = info->frames_selected;
    int nseg = s->bg_segments < 1 ? 1 : s->bg_segments;
    int per = s->bg_frames < 1 ? 1 : s->bg_frames;
    if (per > SP_BG_MAX_SAMPLES)
        per = SP_BG_MAX_SAMPLES;
    if (sel < 0)
        nseg = 1; /* length unknown: sample the first frames only */
    if (sel > 0 && nseg > sel)
        nseg = (int)sel;
    long long frame_bytes = (long long)w * h * bytes;
    while (per > 1 && frame_bytes * per * nseg > BG_MEMORY_CAP)
        per--;
    if (sel > 0 && per > sel / nseg)
        per = (int)(sel / nseg) > 0 ? (int)(sel / nseg) : 1;

    int rc;
    int64_t *tpos = NULL; /* sample positions, ascending */
    sp_bg_builder **bld = calloc((size_t)nseg, sizeof *bld);
    sp_source *src = NULL;
    sp_image img = {0};
    if (!bld)
        return sp_error_set(err, SP_ERR_INTERNAL, "background: out of memory");
    for (int k = 0; k < nseg; k++)
        if ((rc = sp_bg_builder_new(&bld[k], w, h, bytes, per, err)))
            goto done;
    sp_source_opts so = s->source;
    so.sparse = 1;                       /* most frames are passed over */
    so.known_total = info->frames_total; /* counted once already, when the run opened it */
    if ((rc = sp_source_open(&src, input, &so, err)))
        goto done;

    /* A video with keyframes between dependent frames: decode the keyframes nearest the sample
     * positions and nothing else. Fewer keyframes than samples still make a sound median down to
     * KEY_MIN_SAMPLES per segment (a few per cent of bubble cover per pixel); below that, or when
     * keyframes bunch so that a segment gets fewer than half of those, every frame is read. */
    int keyed = 0;
    if (sel > 0) {
        tpos = malloc(sizeof *tpos * (size_t)nseg * (size_t)per);
        if (!tpos) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "background: out of memory");
            goto done;
        }
        for (int k = 0; k < nseg; k++) {
            int64_t a = k * sel / nseg, len = (k + 1) * sel / nseg - a;
            for (int j = 0; j < per; j++)
                tpos[k * per + j] = a + (2 * (int64_t)j + 1) * len / (2 * per);
        }
        key_ctx kc = {bld, per};
        int need = per < KEY_MIN_SAMPLES ? per : KEY_MIN_SAMPLES;
        rc = sp_source_sample(src, tpos, nseg * per, nseg * need, key_add, &kc, &keyed, err);
        if (rc)
            goto done;
        for (int k = 0; keyed && k < nseg; k++)
            if (2 * sp_bg_builder_count(bld[k]) < need)
                keyed = 0;
        if (!keyed)
            for (int k = 0; k < nseg; k++)
                sp_bg_builder_reset(bld[k]);
    }

    double t0 = now_s();
    int64_t pos = 0;
    int got = !keyed, seekable = 1;
    int ti = 0, ntp = sel > 0 ? nseg * per : 0;
    while (got) {
        int64_t idx;
        double t;
        int seg, take = 0;
        if (sel > 0) {
            /* Segment k covers positions [k·sel/nseg, (k+1)·sel/nseg); sample j of it sits at the
             * middle of the j-th of `per` equal parts. */
            seg = (int)(pos * nseg / sel);
            if (seg >= nseg)
                break;
            int64_t a = seg * sel / nseg, len = (seg + 1) * sel / nseg - a;
            int64_t j = (pos - a) * per / len;
            int64_t want = a + (2 * j + 1) * len / (2 * per);
            take = pos == want && sp_bg_builder_count(bld[seg]) < per;
        } else {
            seg = 0;
            if (pos >= per)
                break;
            take = 1;
        }
        if (s->stop && *s->stop) {
            rc = sp_error_set(err, SP_ERR_INPUT,
                              "%s: interrupted while estimating the background; nothing written", input);
            goto done;
        }
        /* Far from the next sample: seek there where the recording allows it (rawvideo with an
         * index). Should a seek go wrong part-way, start again reading in order. */
        while (!take && seekable && ti < ntp && tpos[ti] < pos)
            ti++;
        if (!take && seekable && ti < ntp && tpos[ti] - pos >= SEEK_MIN_GAP) {
            int moved = 0;
            sp_error e2;
            if (sp_source_seek(src, tpos[ti], &moved, &e2) || moved < 0) {
                sp_source_close(src);
                src = NULL;
                if ((rc = sp_source_open(&src, input, &so, err)))
                    goto done;
                for (int k = 0; k < nseg; k++)
                    sp_bg_builder_reset(bld[k]);
                seekable = 0;
                pos = 0;
                ti = 0;
                continue;
            }
            if (moved > 0) {
                pos = tpos[ti];
                continue;
            }
        }
        if ((rc = take ? sp_source_next(src, &img, &idx, &t, &got, err)
                       : sp_source_skip(src, &idx, &got, err)))
            goto done;
        if (!got)
            break;
        if (take && (rc = sp_bg_builder_add(bld[seg], &img, err)))
            goto done;
        pos++;
        if (s->progress && (pos & 15) == 0) {
            sp_progress p = {"background", pos, sel, now_s() - t0};
            s->progress(s->progress_ud, &p);
        }
    }
    if ((rc = bgset_alloc(b, nseg, w, h, err)))
        goto done;
    int64_t seen = pos;
    for (int k = 0; k < nseg; k++) {
        if (sp_bg_builder_count(bld[k]) == 0) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: no frames to estimate the background from", input);
            goto done;
        }
        if ((rc = sp_bg_builder_finish(bld[k], s->bg_percentile, b->img[k], s->threads, err)))
            goto done;
        int filled = 0;
        if (s->still_guard && (rc = sp_bg_guard_still(b->img[k], w, h, s->still_level, 0.02, &filled, err)))
            goto done;
        b->still_filled += filled;
        int64_t n = sel > 0 ? sel : seen;
        b->centre[k] = ((double)k + 0.5) * (double)n / nseg - 0.5;
    }
    snprintf(b->mode, sizeof b->mode, keyed ? "recording keyframes" : "recording");
    b->samples = per;
    for (int k = 0; k < nseg; k++) /* keyframes may give fewer */
        if (sp_bg_builder_count(bld[k]) < b->samples)
            b->samples = sp_bg_builder_count(bld[k]);
done:
    free(tpos);
    for (int k = 0; k < nseg; k++)
        sp_bg_builder_free(bld[k]);
    free(bld);
    sp_image_free(&img);
    sp_source_close(src);
    return rc;
}

/* The background a frame at selection position pos is measured against: linear interpolation
 * between the two nearest estimates (into buf), or the single estimate. */
static const float *bg_for(const bgset *b, int64_t pos, float *buf, size_t npx)
{
    if (b->n == 1 || pos <= b->centre[0])
        return b->img[0];
    if (pos >= b->centre[b->n - 1])
        return b->img[b->n - 1];
    int k = 0;
    while (k + 1 < b->n && b->centre[k + 1] < pos)
        k++;
    float f = (float)((pos - b->centre[k]) / (b->centre[k + 1] - b->centre[k]));
    const float *a = b->img[k], *c = b->img[k + 1];
    for (size_t i = 0; i < npx; i++)
        buf[i] = a[i] + f * (c[i] - a[i]);
    return buf;
}

typedef struct slot {
    sp_image img;
    int64_t index;
    double t;
    sp_bubble *bub;
    int64_t *ids;
    int n, cap;
    double gain, level, gas_px;
    int rc;
    sp_error err;
} slot;

typedef struct totals {
    int64_t frames, detections, used;
    double s1, s2, s3, s4; /* sums of d, d², d³, d⁴ (mm) over non-edge detections */
    double holdup_sum;
    double volume_sum; /* summed over frames: gas volume fraction of the illuminated volume */
    double t_first, t_last;
    int64_t last_index;
    double su2; /* sum of squared per-bubble diameter uncertainties (mm²), non-edge bubbles */
    int64_t n_u;
    int stopped; /* the run was stopped before the end of the selection */
} totals;

/* Totals read back from a checkpoint: counts that agree with the frames done and sums that are
 * finite and not negative, so carrying on cannot overflow them or print nonsense. */
static int totals_plausible(const totals *t, int64_t frames_done)
{
    const int64_t cap = (int64_t)1 << 52; /* far above any real count, far below overflow */
    int ok = t->frames == frames_done && t->frames >= 0 && t->detections >= 0 && t->detections < cap &&
             t->used >= 0 && t->used <= t->detections && t->n_u >= 0 && t->n_u <= t->detections &&
             t->last_index >= 0 && t->last_index < cap;
    const double sums[] = {t->s1, t->s2, t->s3, t->s4, t->holdup_sum, t->su2};
    for (size_t i = 0; ok && i < sizeof sums / sizeof sums[0]; i++)
        ok = isfinite(sums[i]) && sums[i] >= 0 && sums[i] < 1e300;
    /* The volume sum is NaN when no illuminated depth was given. */
    ok = ok && (isnan(t->volume_sum) || (isfinite(t->volume_sum) && t->volume_sum >= 0));
    return ok && isfinite(t->t_first) && isfinite(t->t_last) && t->t_first <= t->t_last;
}

static void write_bubble_rows(FILE *f, const slot *sl, const sp_measure_settings *s,
                              const sp_source_info *info, double rel_u_scale, totals *tot)
{
    const double sc = s->mm_per_px > 0 ? s->mm_per_px : 1.0;
    const int ox = s->source.roi.w > 0 ? s->source.roi.x : 0;
    const int oy = s->source.roi.h > 0 ? s->source.roi.y : 0;
    for (int i = 0; i < sl->n; i++) {
        const sp_bubble *b = &sl->bub[i];
        double x = b->x + ox, y = b->y + oy;
        fprintf(
            f,
            "%lld,%.6f,%lld,%.3f,%.3f,%.6g,%.6g,%.0f,%.6g,%.6g,%.2f,%.6g,%.6g,%.4f,%d,%d,%.3f,%.3f,%.4f,%."
            "3f,%d,%d,%.4f,%d,%.4f,%.4g\n",
            (long long)sl->index, sl->t, (long long)sl->ids[i], x, y, x * sc,
            (info->full_height - 1 - y) * sc, b->area_px, b->major_px * sc, b->minor_px * sc, b->tilt_deg,
            b->d_area_px * sc, b->d_vol_px * sc, b->aspect, b->edge, b->split, b->major_px, b->minor_px,
            b->solidity, b->contrast, b->fit, b->cluster, b->sharpness, b->in_focus, b->u_d_px,
            /* The scale's relative uncertainty is common to every bubble: added in quadrature. */
            sqrt(b->u_d_px * sc * b->u_d_px * sc +
                 (b->d_vol_px * sc * rel_u_scale) * (b->d_vol_px * sc * rel_u_scale)));
        if (!b->edge && !b->cluster) {
            tot->su2 += b->u_d_px * sc * b->u_d_px * sc;
            tot->n_u++;
            double d = b->d_vol_px * sc;
            tot->used++;
            tot->s1 += d;
            tot->s2 += d * d;
            tot->s3 += d * d * d;
            tot->s4 += d * d * d * d;
        }
    }
}

/* Radial distortion recorded by the calibration: move each bubble to undistorted pixels and scale
 * its sizes by the local magnification of the correction, before tracking and writing, so every
 * table holds the corrected geometry. */
static void undistort_bubbles(slot *sl, const sp_calib_result *cal, int ox, int oy)
{
    for (int i = 0; i < sl->n; i++) {
        sp_bubble *b = &sl->bub[i];
        double x = b->x + ox, y = b->y + oy, ux, uy, ax, ay, bx, by, cx, cy, dx, dy;
        if (sp_calib_undistort(cal, x, y, &ux, &uy) || sp_calib_undistort(cal, x - 1, y, &ax, &ay) ||
            sp_calib_undistort(cal, x + 1, y, &bx, &by) || sp_calib_undistort(cal, x, y - 1, &cx, &cy) ||
            sp_calib_undistort(cal, x, y + 1, &dx, &dy))
            continue; /* outside the model's range: left as measured */
        double m = 0.25 * (hypot(bx - ax, by - ay) + hypot(dx - cx, dy - cy));
        b->x = ux - ox;
        b->y = uy - oy;
        b->major_px *= m;
        b->minor_px *= m;
        b->d_area_px *= m;
        b->d_vol_px *= m;
        b->area_px *= m * m;
        b->u_d_px *= m;
    }
}

static const char BUBBLE_HEADER[] =
    "frame,t_s,track,x_px,y_px,x_mm,y_mm,area_px,major_mm,minor_mm,tilt_deg,"
    "d_area_mm,d_vol_mm,aspect,edge,split,major_px,minor_px,solidity,contrast,"
    "fit,cluster,sharpness_px_inv,in_focus,u_d_px,u_d_mm\n";

/* The background in and out of a checkpoint (resume.c keeps the same fields). */
static void bg_from_resume(bgset *b, const sp_resume_bg *r)
{
    b->n = r->n;
    b->img = r->img;
    b->centre = r->centre;
    snprintf(b->mode, sizeof b->mode, "%s", r->mode);
    b->samples = r->samples;
    b->still_filled = r->still_filled;
}

static sp_resume_bg bg_to_resume(const bgset *b, int w, int h)
{
    sp_resume_bg r = {b->n, w, h, b->img, b->centre, "", b->samples, b->still_filled};
    snprintf(r.mode, sizeof r.mode, "%s", b->mode);
    return r;
}

static int write_summary(FILE *f, const char *input, const sp_measure_settings *s, const sp_source_info *info,
                         const bgset *bg, const totals *tot, double fps, const sp_trackrun *tr,
                         const sp_liquid *liq, const sp_calib_result *cal, sp_error *err)
{
    sp_jsonw j;
    sp_jsonw_init(&j, f);
    sp_jsonw_obj(&j);
    sp_jsonw_kstr(&j, "tool", "spume");
    sp_jsonw_kstr(&j, "version", SP_VERSION);
    sp_jsonw_kstr(&j, "command", "measure");
    sp_jsonw_kbool(&j, "complete", !tot->stopped);
    if (tot->stopped)
        sp_jsonw_kint(&j, "next_frame", tot->last_index + (s->source.step > 0 ? s->source.step : 1));
    sp_jsonw_kint(&j, "frames", tot->frames);
    sp_jsonw_knum(&j, "fps", fps);
    sp_jsonw_key(&j, "mm_per_px");
    if (s->mm_per_px > 0)
        sp_jsonw_num(&j, s->mm_per_px);
    else
        sp_jsonw_null(&j);
    sp_jsonw_kbool(&j, "calibrated", s->mm_per_px > 0);
    sp_jsonw_key(&j, "calibration");
    sp_jsonw_obj(&j);
    if (cal) {
        sp_jsonw_kstr(&j, "source", "file");
        sp_jsonw_kstr(&j, "file", s->calib_file);
        sp_jsonw_kstr(&j, "method", cal->method);
        sp_jsonw_knum(&j, "mm_per_px_uncertainty", cal->mm_per_px_uncertainty);
        sp_jsonw_knum(&j, "rotation_deg", cal->rotation_deg);
        sp_jsonw_kstr(&j, "image", cal->image);
        sp_jsonw_kint(&j, "radial_terms", cal->radial.terms);
        sp_jsonw_kbool(&j, "distortion_corrected", cal->radial.terms > 0);
    } else {
        sp_jsonw_kstr(&j, "source", s->mm_per_px > 0 ? "scale given" : "none");
    }
    sp_jsonw_obj_end(&j);
    sp_jsonw_kint(&j, "tracks", tr ? (int64_t)sp_trackrun_count(tr) : 0);
    sp_jsonw_kint(&j, "detections", tot->detections);
    sp_jsonw_knum(&j, "holdup", tot->frames ? tot->holdup_sum / tot->frames : NAN);
    /* Means over tracks (one diameter per track), then the statistics and sites blocks. */
    double hv =
        s->illum_depth_mm > 0 && s->mm_per_px > 0 && tot->frames ? tot->volume_sum / tot->frames : NAN;
    if (tr) {
        sp_stats_opts so = {s->boot,      s->bins,      s->bins_log,
                            s->bin_lo_mm, s->bin_hi_mm, tot->frames > 1 ? tot->t_last - tot->t_first : 0,
                            s->threads};
        int rc = sp_trackrun_write_summary(tr, &j, &so, hv, err);
        if (rc)
            return rc;
    } else {
        const char *track_keys[] = {"d10_mm", "d32_mm", "d43_mm"};
        for (int i = 0; i < 3; i++) {
            sp_jsonw_key(&j, track_keys[i]);
            sp_jsonw_null(&j);
        }
    }
    sp_jsonw_kint(&j, "detections_in_stats", tot->used);
    /* ISO 9276-2 moment-ratio means D[1,0], D[3,2], D[4,3] over non-edge detections. */
    sp_jsonw_knum(&j, "detections_d10_mm", tot->used ? tot->s1 / tot->used : NAN);
    sp_jsonw_knum(&j, "detections_d32_mm", tot->s2 > 0 ? tot->s3 / tot->s2 : NAN);
    sp_jsonw_knum(&j, "detections_d43_mm", tot->s3 > 0 ? tot->s4 / tot->s3 : NAN);
    sp_jsonw_knum(&j, "t_first_s", tot->t_first);
    sp_jsonw_knum(&j, "t_last_s", tot->t_last);

    sp_jsonw_key(&j, "input");
    sp_identity_write(&j, input, info);

    sp_jsonw_key(&j, "region");
    sp_jsonw_obj(&j);
    sp_jsonw_kint(&j, "x", s->source.roi.w > 0 ? s->source.roi.x : 0);
    sp_jsonw_kint(&j, "y", s->source.roi.h > 0 ? s->source.roi.y : 0);
    sp_jsonw_kint(&j, "width", info->width);
    sp_jsonw_kint(&j, "height", info->height);
    sp_jsonw_obj_end(&j);

    /* The per-bubble uncertainty carried into the statistics: the scale's share is common to every
     * bubble, so it moves every mean by the same fraction and does not average out; the per-bubble
     * parts (quantisation, blur, fit) are independent and shrink as 1/sqrt(n) in a mean. */
    sp_jsonw_key(&j, "uncertainty");
    sp_jsonw_obj(&j);
    sp_jsonw_knum(&j, "scale_relative",
                  cal && cal->mm_per_px > 0 ? cal->mm_per_px_uncertainty / cal->mm_per_px : NAN);
    sp_jsonw_knum(&j, "bubble_rms_u_d_mm", tot->n_u > 0 ? sqrt(tot->su2 / tot->n_u) : NAN);
    sp_jsonw_kint(&j, "bubbles", tot->n_u);
    sp_jsonw_kstr(&j, "basis",
                  "u of a mean diameter = sqrt((scale_relative * d)^2 + bubble_rms_u_d_mm^2 / n)");
    sp_jsonw_obj_end(&j);

    if (liq) {
        sp_jsonw_key(&j, "liquid");
        sp_jsonw_obj(&j);
        sp_jsonw_kstr(&j, "name", liq->name);
        sp_jsonw_knum(&j, "temp_c", liq->temp_c);
        sp_jsonw_knum(&j, "rho_kg_m3", liq->rho_kg_m3);
        sp_jsonw_knum(&j, "mu_pa_s", liq->mu_pa_s);
        sp_jsonw_knum(&j, "sigma_n_m", liq->sigma_n_m);
        sp_jsonw_knum(&j, "rho_gas_kg_m3", liq->rho_gas_kg_m3);
        sp_jsonw_knum(&j, "g_m_s2", liq->g_m_s2);
        sp_jsonw_knum(&j, "p_atm_pa", liq->p_atm_pa);
        sp_jsonw_knum(&j, "depth_m", liq->depth_m);
        sp_jsonw_obj_end(&j);
    }

    sp_jsonw_key(&j, "settings");
    sp_jsonw_obj(&j);
    sp_jsonw_knum(&j, "fps_override", s->source.fps);
    sp_jsonw_kint(&j, "start", s->source.start);
    sp_jsonw_kint(&j, "count", s->source.count);
    sp_jsonw_kint(&j, "step", s->source.step);
    sp_jsonw_kstr(&j, "background", bg->mode);
    sp_jsonw_kstr(&j, "background_image", s->bg_image);
    sp_jsonw_kint(&j, "background_frames", bg->samples);
    sp_jsonw_knum(&j, "background_percentile", s->bg_percentile);
    sp_jsonw_kint(&j, "background_segments", bg->n);
    sp_jsonw_kbool(&j, "still_guard", s->still_guard);
    sp_jsonw_knum(&j, "still_level", s->still_level);
    sp_jsonw_kint(&j, "still_objects_refilled", bg->still_filled);
    sp_jsonw_knum(&j, "min_sharpness_px_inv", s->min_sharpness);
    sp_jsonw_kbool(&j, "split", s->split);
    sp_jsonw_kbool(&j, "keep_defocused", s->keep_defocused);
    sp_jsonw_kstr(&j, "threshold_mode", s->otsu ? "otsu" : "fixed");
    sp_jsonw_knum(&j, "threshold", s->threshold);
    sp_jsonw_kbool(&j, "flicker_compensation", s->flicker);
    sp_jsonw_kbool(&j, "fill_holes", s->fill);
    sp_jsonw_knum(&j, "min_diam_px", s->min_diam_px);
    sp_jsonw_knum(&j, "max_diam_px", s->max_diam_px);
    sp_jsonw_knum(&j, "fit_min_px", s->fit_min_px);
    sp_jsonw_knum(&j, "edge_level", s->edge_level);
    sp_jsonw_kbool(&j, "track", s->track);
    sp_jsonw_kint(&j, "max_gap", s->max_gap);
    sp_jsonw_kstr(&j, "liquid", s->liquid);
    sp_jsonw_knum(&j, "temp_c", s->temp_c);
    sp_jsonw_key(&j, "liquid_set");
    sp_jsonw_arr(&j);
    for (int i = 0; i < s->nliquid_set; i++)
        sp_jsonw_str(&j, s->liquid_set[i]);
    sp_jsonw_arr_end(&j);
    sp_jsonw_knum(&j, "depth_m", s->depth_m);
    sp_jsonw_knum(&j, "illuminated_depth_mm", s->illum_depth_mm);
    sp_jsonw_kint(&j, "bootstrap_replicates", s->boot);
    sp_jsonw_kint(&j, "bins", s->bins);
    sp_jsonw_kbool(&j, "bins_log", s->bins_log);
    sp_jsonw_knum(&j, "bin_lo_mm", s->bin_lo_mm);
    sp_jsonw_knum(&j, "bin_hi_mm", s->bin_hi_mm);
    sp_jsonw_obj_end(&j);
    sp_jsonw_obj_end(&j);
    return SP_OK;
}

/* The liquid: a preset (or JSON file) at the temperature, the depth, then key=value overrides. */
static int load_liquid(const sp_measure_settings *s, sp_liquid *liq, sp_error *err)
{
    char dir[4200];
    const char *cd = NULL;
    if (s->calib_dir) {
        snprintf(dir, sizeof dir, "%s/liquids", s->calib_dir);
        cd = dir;
    }
    int rc = sp_liquid_preset_in(cd, s->liquid ? s->liquid : "water", s->temp_c, liq, err);
    if (!rc && s->depth_m > 0)
        rc = sp_liquid_set(liq, "depth_m", s->depth_m, err);
    for (int i = 0; !rc && i < s->nliquid_set; i++)
        rc = sp_liquid_assign(liq, s->liquid_set[i], err);
    return rc;
}

#define KEEP_MAX 16 /* frames kept for the report's thumbnails */

static int keep_copy(sp_image *dst, const sp_image *src, sp_error *err)
{
    int rc = sp_image_alloc(dst, src->width, src->height, src->bytes, err);
    if (rc)
        return rc;
    dst->bits = src->bits;
    size_t row = (size_t)src->width * (size_t)src->bytes;
    for (int y = 0; y < src->height; y++)
        memcpy((char *)dst->data + (ptrdiff_t)y * dst->stride,
               (const char *)src->data + (ptrdiff_t)y * src->stride, row);
    return SP_OK;
}

static int slot_store(slot *sl, const sp_detect_result *r)
{
    if (r->n > sl->cap) {
        sp_bubble *nb = realloc(sl->bub, sizeof *nb * (size_t)r->n);
        if (!nb)
            return -1;
        sl->bub = nb;
        int64_t *ni = realloc(sl->ids, sizeof *ni * (size_t)r->n);
        if (!ni)
            return -1;
        sl->ids = ni;
        sl->cap = r->n;
    }
    if (r->n)
        memcpy(sl->bub, r->bubbles, sizeof *sl->bub * (size_t)r->n);
    sl->n = r->n;
    sl->gain = r->gain;
    sl->level = r->level;
    sl->gas_px = r->gas_px;
    return 0;
}

/* Progress of the detection pass after `done` frames of the selection. */
static void detect_progress(const sp_measure_settings *s, const sp_source_info *info, const sp_resume *rs,
                            int64_t done, double t0)
{
    if (!s->progress)
        return;
    /* A resumed run's source holds only the frames left: count those done before too. */
    int64_t total = info->frames_selected > 0 ? info->frames_selected + sp_resume_pos(rs) : -1;
    sp_progress p = {"detect", done, total, now_s() - t0};
    s->progress(s->progress_ud, &p);
}

/* Frames stream through a ring of slots: a decoder thread fills them in order, worker threads measure
 * any filled one, and the caller consumes them strictly in frame order (tables, tracks) and hands
 * each slot back to the decoder. Every wait blocks on a condition variable, so an idle worker leaves
 * its core to the decoder (and to the decoder's own frame or slice threads) instead of spinning. */
typedef struct flow {
    pthread_mutex_t mu;
    pthread_cond_t filled;   /* a slot was decoded, or decoding ended: workers wait on it */
    pthread_cond_t measured; /* a slot was measured: the consumer waits on it */
    pthread_cond_t freed;    /* a slot was consumed: the decoder waits on it */
    slot *slots;
    int nslots;
    int8_t *done;     /* per slot: measured */
    int64_t decoded;  /* frames decoded so far (slot = sequence % nslots) */
    int64_t taken;    /* frames handed to workers */
    int64_t consumed; /* frames consumed in order */
    int end;          /* the decoder has delivered its last frame */
    int quit;         /* the consumer stopped: every thread leaves */
    int rc;           /* the decoder's error, after its last good frame */
    sp_error err;
    sp_source *src;
    /* measuring */
    sp_detector **det;
    float **bgbuf;
    const float **planned; /* per worker: the background its detector has planned */
    const bgset *bg;
    const sp_detect_opts *dopt;
    int64_t pos0; /* selection position of sequence 0 */
    size_t npx;
} flow;

typedef struct worker {
    flow *f;
    int id;
} worker;

static void *decode_loop(void *arg)
{
    flow *f = arg;
    pthread_mutex_lock(&f->mu);
    for (;;) {
        while (!f->quit && f->decoded - f->consumed >= f->nslots)
            pthread_cond_wait(&f->freed, &f->mu);
        if (f->quit)
            break;
        slot *sl = &f->slots[f->decoded % f->nslots];
        pthread_mutex_unlock(&f->mu);
        int got = 0;
        sp_error e;
        sp_error_clear(&e);
        int rc = sp_source_next(f->src, &sl->img, &sl->index, &sl->t, &got, &e);
        pthread_mutex_lock(&f->mu);
        if (rc || !got) {
            f->rc = rc;
            f->err = e;
            f->end = 1;
            pthread_cond_broadcast(&f->filled);
            pthread_cond_broadcast(&f->measured);
            break;
        }
        f->done[f->decoded % f->nslots] = 0;
        f->decoded++;
        pthread_cond_signal(&f->filled);
    }
    pthread_mutex_unlock(&f->mu);
    return NULL;
}

static void measure_slot(flow *f, int id, int64_t seq)
{
    slot *sl = &f->slots[seq % f->nslots];
    const float *b = bg_for(f->bg, f->pos0 + seq, f->bgbuf[id], f->npx);
    sp_detect_result r;
    sp_error_clear(&sl->err);
    /* A background that stays (not the per-frame interpolation buffer) is planned once per worker. */
    if (b != f->bgbuf[id] && b != f->planned[id]) {
        if ((sl->rc = sp_detector_set_background(f->det[id], b, sl->img.width, sl->img.height, &sl->err)))
            return;
        f->planned[id] = b;
    }
    sl->rc = sp_detect_run(f->det[id], &sl->img, b, f->dopt, 1, &r, &sl->err);
    if (!sl->rc && slot_store(sl, &r))
        sl->rc = sp_error_set(&sl->err, SP_ERR_INTERNAL, "measure: out of memory");
}

/* Measuring yields to decoding. When both compete for the cores, the decoder of a compressed file
 * must stay ahead: with the ring empty, its threads' waits on one another leave cores idle that
 * measuring could have used (docs/methods-speed.md). On Linux a thread's nice value is its own, so
 * each worker runs WORKER_NICE above the thread that started it. A hint only: left as it was if the
 * system refuses. */
#define WORKER_NICE 5
static void yield_to_decoding(void)
{
#ifdef __linux__
    errno = 0;
    int n = getpriority(PRIO_PROCESS, 0);
    if (n == -1 && errno)
        return;
    (void)setpriority(PRIO_PROCESS, 0, n + WORKER_NICE);
#endif
}

static void *work_loop(void *arg)
{
    worker *wk = arg;
    flow *f = wk->f;
    yield_to_decoding();
    pthread_mutex_lock(&f->mu);
    for (;;) {
        while (!f->quit && f->taken == f->decoded && !f->end)
            pthread_cond_wait(&f->filled, &f->mu);
        if (f->quit || f->taken == f->decoded)
            break;
        int64_t seq = f->taken++;
        pthread_mutex_unlock(&f->mu);
        measure_slot(f, wk->id, seq);
        pthread_mutex_lock(&f->mu);
        f->done[seq % f->nslots] = 1;
        if (seq == f->consumed)
            pthread_cond_signal(&f->measured);
    }
    pthread_mutex_unlock(&f->mu);
    return NULL;
}

/* The next frame in order, measured; NULL at the end of the source or on its error (f->rc). */
static slot *flow_next(flow *f)
{
    pthread_mutex_lock(&f->mu);
    while (!(f->consumed < f->decoded && f->done[f->consumed % f->nslots]) &&
           !(f->end && f->consumed == f->decoded))
        pthread_cond_wait(&f->measured, &f->mu);
    slot *sl = f->consumed < f->decoded ? &f->slots[f->consumed % f->nslots] : NULL;
    pthread_mutex_unlock(&f->mu);
    return sl;
}

/* The consumed slot goes back to the decoder. */
static void flow_release(flow *f)
{
    pthread_mutex_lock(&f->mu);
    f->consumed++;
    pthread_cond_signal(&f->freed);
    pthread_mutex_unlock(&f->mu);
}

static void flow_quit(flow *f)
{
    pthread_mutex_lock(&f->mu);
    f->quit = 1;
    pthread_cond_broadcast(&f->filled);
    pthread_cond_broadcast(&f->freed);
    pthread_cond_broadcast(&f->measured);
    pthread_mutex_unlock(&f->mu);
}

/* Stop the threads and wait for them (the decoder finishes the frame in hand). */
static void flow_stop(flow *f, pthread_t *dec, pthread_t *work, int nwork)
{
    flow_quit(f);
    if (dec)
        pthread_join(*dec, NULL);
    for (int i = 0; i < nwork; i++)
        pthread_join(work[i], NULL);
}

int sp_measure(const char *input, const char *outdir, const sp_measure_settings *settings,
               sp_measure_report *rep, sp_error *err)
{
    /* A calibration file supplies the scale; everything below reads it from the settings copy. */
    sp_measure_settings scopy = *settings;
    const sp_measure_settings *s = &scopy;
    sp_calib_result cal;
    int have_cal = 0;
    if (settings->calib_file) {
        int crc = sp_calfile_read(settings->calib_file, &cal, err);
        if (crc)
            return crc;
        scopy.mm_per_px = cal.mm_per_px;
        have_cal = 1;
    }
    int rc;
    sp_source *src = NULL;
    bgset bg = {0};
    sp_outfile ob = {0}, of = {0}, os = {0}, ot = {0}, oz = {0};
    sp_trackrun *tr = NULL;
    sp_resume *rs = NULL;
    slot *slots = NULL;
    sp_detector **det = NULL;
    float **bgbuf = NULL;
    totals tot = {0};
    flow fl;
    memset(&fl, 0, sizeof fl);
    int flow_ready = 0, nstarted = 0, decoding = 0;
    pthread_t dec_th, *work_th = NULL;
    worker *wk = NULL;
    int8_t *sdone = NULL;
    const float **planned = NULL;
    sp_image keep_img[KEEP_MAX] = {{0}};
    int64_t keep_pos[KEEP_MAX], keep_idx[KEEP_MAX];
    int nkeep = 0;
    const int nthreads = s->threads > 0 ? s->threads : omp_get_max_threads();
    /* Progress (and a stop) every `batch` frames; twice that many slots in the ring. */
    int batch = nthreads * 4 > MAX_BATCH ? MAX_BATCH : nthreads * 4;
    const int nslots = 2 * batch;

    sp_liquid liq;
    if ((rc = load_liquid(s, &liq, err)))
        return rc;
    if (s->resume && (rc = sp_resume_check(outdir, err)))
        return rc;
    if ((rc = sp_outdir_prepare(outdir, err)))
        return rc;
    if ((rc = sp_source_open(&src, input, &s->source, err)))
        return rc;
    const sp_source_info *info = sp_source_get_info(src);
    if ((rc = sp_resume_begin(&rs, input, outdir, s, &liq, info, err)))
        goto done;
    if (sp_resume_active(rs)) {
        /* --resume: the checkpoint holds the totals so far; decoding goes on at the next frame. */
        sp_source_opts ro;
        sp_resume_source_opts(rs, &ro);
        sp_source_close(src);
        src = NULL;
        if ((rc = sp_source_open(&src, input, &ro, err)) ||
            (rc = sp_resume_totals(rs, &tot, sizeof tot, err)))
            goto done;
        info = sp_source_get_info(src);
        tot.stopped = 0;
        if (!totals_plausible(&tot, sp_resume_pos(rs))) {
            rc = sp_error_set(
                err, SP_ERR_INPUT,
                "%s/resume.checkpoint: its running totals do not fit the %lld frames it says were "
                "done (damaged?)",
                outdir, (long long)sp_resume_pos(rs));
            goto done;
        }
    }
    const int w = info->width, h = info->height;
    if (have_cal && cal.radial.terms > 0 &&
        (cal.width != info->full_width || cal.height != info->full_height)) {
        rc = sp_error_set(err, SP_ERR_INPUT,
                          "%s: the calibration's distortion was measured on %dx%d images but %s is %dx%d",
                          s->calib_file, cal.width, cal.height, input, info->full_width, info->full_height);
        goto done;
    }
    const size_t npx = (size_t)w * (size_t)h;

    sp_resume_bg rbg;
    if (sp_resume_take_bg(rs, &rbg))
        bg_from_resume(&bg, &rbg);
    else if (s->bg_image)
        rc = bg_from_file(s, w, h, &bg, err);
    else
        rc = bg_from_recording(input, s, info, &bg, err);
    if (rc)
        goto done;

    sp_detect_opts dopt;
    sp_detect_opts_default(&dopt);
    dopt.threshold = s->threshold;
    dopt.otsu = s->otsu;
    dopt.flicker = s->flicker;
    dopt.fill = s->fill;
    dopt.measure.min_diam_px = s->min_diam_px;
    dopt.measure.max_diam_px = s->max_diam_px;
    dopt.measure.fit_min_px = s->fit_min_px;
    dopt.measure.edge_level = s->edge_level;
    dopt.measure.min_sharpness = s->min_sharpness;
    dopt.measure.split = s->split;

    slots = calloc((size_t)nslots, sizeof *slots);
    sdone = calloc((size_t)nslots, 1);
    det = calloc((size_t)nthreads, sizeof *det);
    bgbuf = calloc((size_t)nthreads, sizeof *bgbuf);
    work_th = calloc((size_t)nthreads, sizeof *work_th);
    wk = calloc((size_t)nthreads, sizeof *wk);
    planned = calloc((size_t)nthreads, sizeof *planned);
    if (!slots || !sdone || !det || !bgbuf || !work_th || !wk || !planned) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "measure: out of memory");
        goto done;
    }
    for (int i = 0; i < nthreads; i++) {
        det[i] = sp_detector_new();
        bgbuf[i] = bg.n > 1 ? malloc(sizeof(float) * npx) : NULL;
        if (!det[i] || (bg.n > 1 && !bgbuf[i])) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "measure: out of memory");
            goto done;
        }
    }

    if (s->track) {
        sp_trackrun_opts to = {s->mm_per_px,
                               info->full_height,
                               s->source.roi.w > 0 ? s->source.roi.x : 0,
                               s->source.roi.h > 0 ? s->source.roi.y : 0,
                               w,
                               h,
                               s->source.fps > 0 ? s->source.fps : info->fps,
                               s->max_gap,
                               s->source.start,
                               &liq,
                               s->keep_defocused};
        if ((rc = sp_trackrun_new(&tr, &to, err)))
            goto done;
    }
    if ((rc = sp_resume_replay(rs, tr, err)))
        goto done;
    if ((rc = sp_outfile_open(&ob, outdir, "bubbles.csv", err)) ||
        (rc = sp_outfile_open(&of, outdir, "frames.csv", err)))
        goto done;
    if (sp_resume_active(rs)) {
        if ((rc = sp_resume_copy_table(rs, "bubbles.csv", ob.f, err)) ||
            (rc = sp_resume_copy_table(rs, "frames.csv", of.f, err)))
            goto done;
    } else {
        fputs(BUBBLE_HEADER, ob.f);
        fputs("frame,t_s,bubbles,gain,level,gas_fraction,gas_volume_mm3\n", of.f);
    }
    const double sc = s->mm_per_px > 0 ? s->mm_per_px : 1.0;
    const double region_mm3 = s->illum_depth_mm > 0 ? (double)npx * sc * sc * s->illum_depth_mm : NAN;

    /* The frames the report will draw by default, kept as they pass so that the recording need not
     * be read again (the report reads it when the selection's length was not known in advance). */
    if (s->report && !s->overlay_video && info->frames_selected > 0) {
        sp_report_opts ro;
        sp_report_opts_default(&ro);
        nkeep = ro.thumbnails < KEEP_MAX ? ro.thumbnails : KEEP_MAX;
        for (int q = 0; q < nkeep; q++) {
            keep_pos[q] = (int64_t)sp_report_thumb_row((size_t)info->frames_selected, nkeep, q);
            keep_idx[q] = -1;
        }
    }

    double t0 = now_s();
    int64_t pos = sp_resume_pos(rs);
    fl.slots = slots;
    fl.nslots = nslots;
    fl.done = sdone;
    fl.src = src;
    fl.det = det;
    fl.bgbuf = bgbuf;
    fl.planned = planned;
    fl.bg = &bg;
    fl.dopt = &dopt;
    fl.pos0 = pos;
    fl.npx = npx;
    if (pthread_mutex_init(&fl.mu, NULL) || pthread_cond_init(&fl.filled, NULL) ||
        pthread_cond_init(&fl.measured, NULL) || pthread_cond_init(&fl.freed, NULL)) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "measure: cannot set up the frame queue");
        goto done;
    }
    flow_ready = 1;
    if (sp_resume_exhausted(rs)) {
        fl.end = 1; /* every frame of the selection was measured before the stop */
    } else {
        if (pthread_create(&dec_th, NULL, decode_loop, &fl)) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "measure: cannot start the decoding thread");
            goto done;
        }
        decoding = 1;
        for (int i = 0; i < nthreads; i++) {
            wk[i].f = &fl;
            wk[i].id = i;
            if (pthread_create(&work_th[nstarted], NULL, work_loop, &wk[i]))
                break;
            nstarted++;
        }
        if (nstarted == 0) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "measure: cannot start a worker thread");
            goto done;
        }
    }
    for (;;) {
        /* A stop lands between frames: everything consumed so far is written, nothing after it. */
        if (s->stop && *s->stop) {
            tot.stopped = 1;
            break;
        }
        slot *sl = flow_next(&fl);
        if (!sl) {
            if (fl.rc) {
                rc = fl.rc;
                *err = fl.err;
                goto done;
            }
            if ((pos - sp_resume_pos(rs)) % batch != 0) /* the last, short step */
                detect_progress(s, info, rs, pos, t0);
            break;
        }
        if (pos == 0)
            sp_resume_first_frame(rs, &sl->img);
        if (sl->rc) {
            rc = sp_error_set(err, sl->rc, "%s: frame %lld: %s", input, (long long)sl->index, sl->err.msg);
            goto done;
        }
        if (have_cal && cal.radial.terms > 0)
            undistort_bubbles(sl, &cal, s->source.roi.w > 0 ? s->source.roi.x : 0,
                              s->source.roi.h > 0 ? s->source.roi.y : 0);
        if (tr) {
            if ((rc = sp_resume_spill(rs, sl->index, sl->t, sl->bub, sl->n, err)) ||
                (rc = sp_trackrun_frame(tr, sl->index, sl->t, sl->bub, sl->n, sl->ids, err)))
                goto done;
        } else {
            for (int i = 0; i < sl->n; i++)
                sl->ids[i] = 0;
        }
        double vol = 0; /* oblate spheroids, mm³ (px³ uncalibrated) */
        for (int i = 0; i < sl->n; i++) {
            double dv = sl->bub[i].d_vol_px * sc;
            vol += M_PI / 6.0 * dv * dv * dv;
        }
        for (int q = 0; q < nkeep; q++)
            if (keep_pos[q] == pos && (rc = keep_copy(&keep_img[q], &sl->img, err)) == SP_OK)
                keep_idx[q] = sl->index;
        if (rc)
            goto done;
        tot.volume_sum += vol / region_mm3;
        tot.last_index = sl->index;
        if (tot.frames == 0)
            tot.t_first = sl->t;
        tot.t_last = sl->t;
        tot.frames++;
        tot.detections += sl->n;
        double frac = sl->gas_px / (double)npx;
        tot.holdup_sum += frac;
        write_bubble_rows(ob.f, sl, s, info,
                          have_cal && cal.mm_per_px > 0 ? cal.mm_per_px_uncertainty / cal.mm_per_px : 0,
                          &tot);
        fprintf(of.f, "%lld,%.6f,%d,%.5f,%.4f,%.6f,%.6g\n", (long long)sl->index, sl->t, sl->n, sl->gain,
                sl->level, frac, vol);
        pos++;
        flow_release(&fl);
        if ((pos - sp_resume_pos(rs)) % batch == 0)
            detect_progress(s, info, rs, pos, t0);
    }
    flow_stop(&fl, decoding ? &dec_th : NULL, work_th, nstarted);
    decoding = nstarted = 0;
    if (tot.frames == 0) {
        rc = tot.stopped
                 ? sp_error_set(err, SP_ERR_INPUT,
                                "%s: interrupted before any frame was analysed; nothing written", input)
                 : sp_error_set(err, SP_ERR_INPUT, "%s: the selection holds no frames", input);
        goto done;
    }

    double fps = info->fps;
    if (!(fps > 0) && tot.frames > 1 && tot.t_last > tot.t_first)
        fps =
            (tot.frames - 1) / (tot.t_last - tot.t_first) * (double)(s->source.step > 0 ? s->source.step : 1);
    if (tr) {
        if ((rc = sp_trackrun_finish(tr, err)))
            goto done;
        if ((rc = sp_outfile_open(&ot, outdir, "tracks.csv", err)) ||
            (rc = sp_outfile_open(&oz, outdir, "sites.csv", err)))
            goto done;
        sp_trackrun_write_tracks(tr, ot.f);
        sp_trackrun_write_sites(tr, oz.f);
    }
    if ((rc = sp_outfile_open(&os, outdir, "summary.json", err)))
        goto done;
    if ((rc = write_summary(os.f, input, s, info, &bg, &tot, fps, tr, &liq, have_cal ? &cal : NULL, err)))
        goto done;
    if (tot.stopped)
        sp_resume_invalidate(rs); /* the old checkpoint would not match the new tables */
    if ((rc = sp_outfile_commit(&ob, err)) || (rc = sp_outfile_commit(&of, err)) ||
        (tr && ((rc = sp_outfile_commit(&ot, err)) || (rc = sp_outfile_commit(&oz, err)))) ||
        (rc = sp_outfile_commit(&os, err)))
        goto done;
    if (tot.stopped) {
        sp_resume_bg sb = bg_to_resume(&bg, w, h);
        if ((rc = sp_resume_save(rs, &sb, pos, tot.last_index + (s->source.step > 0 ? s->source.step : 1),
                                 &tot, sizeof tot, err)))
            goto done;
    } else {
        sp_resume_done(rs);
    }
    if (s->report && !tot.stopped) {
        /* The evidence: plots, tables and overlay thumbnails of what was measured. */
        sp_report_opts ro;
        sp_report_opts_default(&ro);
        ro.input = input;
        ro.video = s->overlay_video;
        const sp_image *given[KEEP_MAX];
        int ng = 0;
        for (int q = 0; q < nkeep; q++)
            if (keep_idx[q] >= 0) {
                given[ng] = &keep_img[q];
                keep_idx[ng] = keep_idx[q];
                ng++;
            }
        ro.given_frames = given;
        ro.given_index = keep_idx;
        ro.ngiven = ng;
        if ((rc = sp_report_build(outdir, &ro, err)))
            goto done;
    }
    if (rep) {
        rep->frames = tot.frames;
        rep->detections = tot.detections;
        rep->tracks = tr ? (int64_t)sp_trackrun_count(tr) : 0;
        rep->complete = !tot.stopped;
        rep->next_frame = tot.last_index + (s->source.step > 0 ? s->source.step : 1);
        rep->sites = 0;
        rep->d32_mm = NAN;
        rep->fps = fps;
        rep->holdup = tot.holdup_sum / tot.frames;
        rep->width = w;
        rep->height = h;
    }
done:
    sp_outfile_abort(&ob);
    sp_outfile_abort(&of);
    sp_outfile_abort(&os);
    sp_outfile_abort(&ot);
    sp_outfile_abort(&oz);
    sp_trackrun_free(tr);
    if (flow_ready) {
        flow_stop(&fl, decoding ? &dec_th : NULL, work_th, nstarted); /* an error path leaves them running */
        pthread_mutex_destroy(&fl.mu);
        pthread_cond_destroy(&fl.filled);
        pthread_cond_destroy(&fl.measured);
        pthread_cond_destroy(&fl.freed);
    }
    free(work_th);
    free(wk);
    free(sdone);
    free(planned);
    sp_resume_free(rs);
    if (slots)
        for (int k = 0; k < nslots; k++) {
            sp_image_free(&slots[k].img);
            free(slots[k].bub);
            free(slots[k].ids);
        }
    free(slots);
    for (int i = 0; det && i < nthreads; i++) {
        sp_detector_free(det[i]);
        free(bgbuf[i]);
    }
    free(det);
    free(bgbuf);
    bgset_free(&bg);
    for (int q = 0; q < KEEP_MAX; q++)
        sp_image_free(&keep_img[q]);
    sp_source_close(src);
    return rc;
}

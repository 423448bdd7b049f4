/* Per-frame detection chain. Each stage lives in its own file; this one only sequences them and
 * owns their workspaces. */
#include "detect/detect.h"

#include "detect/fill.h"
#include "detect/label.h"
#include "detect/normalise.h"
#include "detect/split.h"
#include "detect/threshold.h"

#include <stdlib.h>
#include <string.h>

struct sp_detector {
    int w, h;
    uint8_t *mask;
    uint8_t *rows; /* per mask row: may hold a non-zero byte (see sp_norm_mask_planned) */
    int32_t *labels;
    sp_labeler *lb;
    sp_filler *fl;
    sp_measurer *ms;
    sp_bubble *bubbles;
    int cap;
    sp_norm_plan plan;    /* for frames measured against plan_bg */
    const float *plan_bg; /* NULL: no plan */
};

void sp_detect_opts_default(sp_detect_opts *o)
{
    o->threshold = 0.7;
    o->otsu = 0;
    o->flicker = 1;
    o->fill = 1;
    sp_measure_opts_default(&o->measure);
}

sp_detector *sp_detector_new(void)
{
    sp_detector *d = calloc(1, sizeof *d);
    if (!d)
        return NULL;
    d->lb = sp_labeler_new();
    if (d->lb)
        sp_labeler_set_sparse(d->lb, 1);
    d->fl = sp_filler_new();
    d->ms = sp_measurer_new();
    if (!d->lb || !d->fl || !d->ms) {
        sp_detector_free(d);
        return NULL;
    }
    return d;
}

void sp_detector_free(sp_detector *d)
{
    if (!d)
        return;
    free(d->mask);
    free(d->rows);
    free(d->labels);
    free(d->bubbles);
    sp_norm_plan_free(&d->plan);
    sp_labeler_free(d->lb);
    sp_filler_free(d->fl);
    sp_measurer_free(d->ms);
    free(d);
}

static int ensure_size(sp_detector *d, int w, int h, sp_error *err)
{
    if (d->w == w && d->h == h)
        return SP_OK;
    free(d->mask);
    free(d->rows);
    free(d->labels);
    size_t n = (size_t)w * (size_t)h;
    d->mask = malloc(n);
    d->rows = malloc((size_t)h);
    d->labels = malloc(n * sizeof *d->labels);
    if (d->rows)
        memset(d->rows, 1, (size_t)h); /* the new mask's content is unknown */
    if (!d->mask || !d->rows || !d->labels) {
        d->w = d->h = 0;
        return sp_error_set(err, SP_ERR_INTERNAL, "detect: out of memory for a %dx%d frame", w, h);
    }
    d->w = w;
    d->h = h;
    return SP_OK;
}

int sp_detector_set_background(sp_detector *d, const float *bg, int w, int h, sp_error *err)
{
    d->plan_bg = NULL;
    int rc = sp_norm_plan_build(&d->plan, bg, w, h, err);
    if (!rc)
        d->plan_bg = bg;
    return rc;
}

int sp_detect_run(sp_detector *d, const sp_image *frame, const float *bg, const sp_detect_opts *o,
                  int nthreads, sp_detect_result *res, sp_error *err)
{
    const int w = frame->width, h = frame->height;
    int rc = ensure_size(d, w, h, err);
    if (rc)
        return rc;
    sp_frame_view v = {frame, bg, 1.f};
    const int planned = bg == d->plan_bg && d->plan.w == w && d->plan.h == h;
    if (planned)
        sp_norm_plan_scan(&d->plan, frame, o->flicker ? &v.gain : NULL);
    else if (o->flicker)
        v.gain = sp_norm_gain(frame, bg);

    float level = (float)o->threshold;
    if (o->otsu) {
        uint64_t hist[SP_OTSU_BINS];
        sp_norm_hist(&v, SP_OTSU_RANGE, hist, SP_OTSU_BINS);
        int t = sp_otsu_hist(hist, SP_OTSU_BINS);
        /* Class 0 holds bins 0..t: the level is the upper edge of bin t. */
        level = t < 0 ? (float)o->threshold : (float)(t + 1) * SP_OTSU_RANGE / SP_OTSU_BINS;
    }
    if (planned)
        sp_norm_mask_planned(&d->plan, &v, level, d->mask, d->rows);
    else {
        sp_norm_mask(&v, level, d->mask);
        memset(d->rows, 1, (size_t)h);
    }
    if (o->fill && (rc = sp_fill_holes_rows(d->fl, d->mask, w, h, d->rows, err)))
        return rc;

    const sp_component *comps = NULL;
    int nc = 0;
    if ((rc = sp_label_run_rows(d->lb, d->mask, w, w, h, d->rows, d->labels, &comps, &nc, nthreads, err)))
        return rc;
    if (nc > d->cap) {
        sp_bubble *nb = realloc(d->bubbles, sizeof *nb * (size_t)nc);
        if (!nb)
            return sp_error_set(err, SP_ERR_INTERNAL, "detect: out of memory for %d bubbles", nc);
        d->bubbles = nb;
        d->cap = nc;
    }
    sp_measure_opts mo = o->measure;
    mo.holes_filled = o->fill;
    int n = 0;
    double gas = 0;
    for (int i = 0; i < nc; i++) {
        int keep = 0;
        /* Room for this component's pieces, should it be a cluster. */
        if (n + SP_SPLIT_MAX > d->cap) {
            int cap = d->cap + (d->cap >> 1) + SP_SPLIT_MAX;
            sp_bubble *nb = realloc(d->bubbles, sizeof *nb * (size_t)cap);
            if (!nb)
                return sp_error_set(err, SP_ERR_INTERNAL, "detect: out of memory for %d bubbles", cap);
            d->bubbles = nb;
            d->cap = cap;
        }
        sp_bubble *b = &d->bubbles[n];
        rc = sp_measure_component(d->ms, &v, d->labels, i + 1, &comps[i], &mo, b, &keep, err);
        if (rc)
            return rc;
        if (!keep)
            continue;
        /* The gas area is the cluster's silhouette, counted once whether or not it is split. */
        gas += b->area_px;
        sp_bubble whole = *b;
        int np = 0;
        rc = sp_measure_split(d->ms, &v, d->labels, i + 1, &comps[i], &mo, &whole, b, SP_SPLIT_MAX, &np, err);
        if (rc)
            return rc;
        if (np == 0) {
            *b = whole;
            n++;
        } else {
            n += np;
        }
    }
    res->bubbles = d->bubbles;
    res->n = n;
    res->gain = v.gain;
    res->level = level;
    res->gas_px = gas;
    return SP_OK;
}

#include "report/overlay.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Okabe & Ito (2008) colour-blind-safe palette, so states stay apart for every reader. */
const sp_rgb sp_overlay_state_rgb[4] = {
    {0, 200, 130},  /* isolated: bluish green */
    {240, 160, 0},  /* split: orange */
    {86, 180, 233}, /* out of focus: sky blue */
    {230, 60, 0},   /* edge: vermilion */
};
const sp_rgb sp_overlay_trail_rgb = {240, 228, 66}; /* yellow */

enum { C_FRAME, C_TRACK, C_X, C_Y, C_MAJOR, C_MINOR, C_TILT, C_EDGE, C_SPLIT, C_CONTRAST, C_FOCUS, C_N };
static const char *const cols[C_N] = {"frame",    "track", "x_px",  "y_px",     "major_px", "minor_px",
                                      "tilt_deg", "edge",  "split", "contrast", "in_focus"};

void sp_overlay_opts_default(sp_overlay_opts *o)
{
    o->trail = 20;
    o->focus_contrast = 0.3;
    o->label_scale = 0;
}

void sp_overlay_free(sp_overlay_data *d)
{
    sp_table_free(&d->t);
    free(d->order);
    free(d->prev);
    memset(d, 0, sizeof *d);
}

typedef struct frame_row {
    double frame;
    size_t row;
} frame_row;

static int by_frame(const void *a, const void *b)
{
    const frame_row *p = a, *q = b;
    if (p->frame != q->frame)
        return p->frame < q->frame ? -1 : 1;
    return p->row < q->row ? -1 : p->row > q->row;
}

static int sorted_by_frame(const double *f, size_t n)
{
    for (size_t i = 1; i < n; i++)
        if (!(f[i] >= f[i - 1]))
            return 0;
    return 1;
}

int sp_overlay_load(const char *dir, sp_overlay_data *d, sp_error *err)
{
    int rc;
    memset(d, 0, sizeof *d);
    rc = sp_table_read(dir, "bubbles.csv", cols, C_N, &d->t, NULL, err);
    if (rc)
        return rc;
    for (int k = C_FRAME; k <= C_MINOR; k++)
        if (!d->t.found[k] && k != C_TRACK) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s/bubbles.csv: no column '%s'", dir, cols[k]);
            goto fail;
        }
    d->has_focus = d->t.found[C_FOCUS];
    size_t n = d->t.nrows;
    d->order = malloc((n ? n : 1) * sizeof *d->order);
    d->prev = malloc((n ? n : 1) * sizeof *d->prev);
    if (!d->order || !d->prev) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s/bubbles.csv: out of memory", dir);
        goto fail;
    }
    for (size_t i = 0; i < n; i++) {
        d->order[i] = i;
        d->prev[i] = (size_t)-1;
        if (!isfinite(d->t.col[C_FRAME][i]))
            d->t.col[C_FRAME][i] = -1; /* unreadable frame numbers sort first and are never drawn */
    }
    /* measure writes rows in frame order; sort only a table that was edited out of order. */
    if (!sorted_by_frame(d->t.col[C_FRAME], n)) {
        frame_row *fr = malloc(n * sizeof *fr);
        if (!fr) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "%s/bubbles.csv: out of memory", dir);
            goto fail;
        }
        for (size_t i = 0; i < n; i++)
            fr[i] = (frame_row){d->t.col[C_FRAME][i], i};
        qsort(fr, n, sizeof *fr, by_frame);
        for (size_t i = 0; i < n; i++)
            d->order[i] = fr[i].row;
        free(fr);
    }
    if (d->t.found[C_TRACK] && n) {
        /* Link each row to the previous row of its track. Ids beyond the row count cannot come from
         * the linker (ids are dense from 1) and get no trail. */
        size_t cap = n + 1;
        size_t *last = malloc(cap * sizeof *last);
        if (!last) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "%s/bubbles.csv: out of memory", dir);
            goto fail;
        }
        for (size_t i = 0; i < cap; i++)
            last[i] = (size_t)-1;
        for (size_t k = 0; k < n; k++) {
            size_t i = d->order[k];
            double tr = d->t.col[C_TRACK][i];
            if (!(tr >= 1 && tr < (double)cap))
                continue;
            size_t id = (size_t)tr;
            d->prev[i] = last[id];
            last[id] = i;
        }
        free(last);
    }
    return SP_OK;

fail:
    sp_overlay_free(d);
    return rc;
}

void sp_overlay_frames(const sp_overlay_data *d, int64_t *first, int64_t *last, size_t *nframes)
{
    *first = *last = -1;
    *nframes = 0;
    double prev = -2;
    for (size_t k = 0; k < d->t.nrows; k++) {
        double f = d->t.col[C_FRAME][d->order[k]];
        if (f < 0 || f > 1e15)
            continue;
        if (*first < 0)
            *first = (int64_t)f;
        *last = (int64_t)f;
        if (f != prev)
            (*nframes)++;
        prev = f;
    }
}

static double col(const sp_overlay_data *d, int c, size_t i)
{
    return d->t.found[c] ? d->t.col[c][i] : NAN;
}

int sp_overlay_state(const sp_overlay_data *d, size_t i, const sp_overlay_opts *o)
{
    if (col(d, C_EDGE, i) > 0)
        return SP_STATE_EDGE;
    if (col(d, C_SPLIT, i) > 0)
        return SP_STATE_SPLIT;
    if (d->has_focus) {
        if (col(d, C_FOCUS, i) == 0)
            return SP_STATE_DEFOCUS;
    } else if (col(d, C_CONTRAST, i) < o->focus_contrast) {
        return SP_STATE_DEFOCUS;
    }
    return SP_STATE_ISOLATED;
}

/* First index in order[] whose frame is >= f (binary search). */
static size_t lower(const sp_overlay_data *d, double f)
{
    size_t lo = 0, hi = d->t.nrows;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (d->t.col[C_FRAME][d->order[mid]] < f)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo;
}

static void corners(sp_canvas *c, double cx, double cy, double hx, double hy, sp_rgb col)
{
    double len = fmin(6, fmax(2, 0.4 * fmin(hx, hy)));
    for (int sx = -1; sx <= 1; sx += 2)
        for (int sy = -1; sy <= 1; sy += 2) {
            double x = cx + sx * hx, y = cy + sy * hy;
            sp_canvas_line(c, x, y, x - sx * len, y, col);
            sp_canvas_line(c, x, y, x, y - sy * len, col);
        }
}

size_t sp_overlay_draw(const sp_overlay_data *d, int64_t frame, sp_canvas *c, const sp_overlay_opts *o)
{
    const sp_rgb white = {255, 255, 255}, black = {0, 0, 0};
    int scale = o->label_scale > 0 ? o->label_scale : (c->w >= 1000 ? 3 : 2);
    size_t k0 = lower(d, (double)frame), k1 = lower(d, (double)frame + 0.5), drawn = 0;
    const double *F = d->t.col[C_FRAME], *X = d->t.col[C_X], *Y = d->t.col[C_Y];
    /* Trails first, so outlines and ids stay on top. */
    for (size_t k = k0; k < k1; k++) {
        size_t i = d->order[k];
        for (size_t j = d->prev[i], cur = i; j != (size_t)-1 && F[j] >= (double)frame - o->trail;
             cur = j, j = d->prev[j])
            sp_canvas_line(c, X[cur], Y[cur], X[j], Y[j], sp_overlay_trail_rgb);
    }
    for (size_t k = k0; k < k1; k++) {
        size_t i = d->order[k];
        int st = sp_overlay_state(d, i, o);
        sp_rgb colr = sp_overlay_state_rgb[st];
        double maj = d->t.col[C_MAJOR][i], min = d->t.col[C_MINOR][i], tilt = col(d, C_TILT, i);
        sp_canvas_ellipse(c, X[i], Y[i], maj, min, tilt, st == SP_STATE_DEFOCUS || st == SP_STATE_EDGE, colr);
        double h = 0.5 * maj + 2;
        if (st == SP_STATE_EDGE)
            corners(c, X[i], Y[i], h, h, colr);
        if (st == SP_STATE_SPLIT) {
            sp_canvas_line(c, X[i] - 3, Y[i], X[i] + 3, Y[i], colr);
            sp_canvas_line(c, X[i], Y[i] - 3, X[i], Y[i] + 3, colr);
        }
        double tr = col(d, C_TRACK, i);
        if (tr >= 1 && tr < 1e9 && isfinite(X[i]) && isfinite(Y[i]) && isfinite(h) && h < 4.0 * SP_MAX_DIM) {
            char s[16];
            snprintf(s, sizeof s, "%d", (int)tr);
            int tx = (int)lround(X[i] + 0.7 * h), ty = (int)lround(Y[i] - 0.7 * h) - 5 * scale;
            if (tx + sp_canvas_text_width(s, scale) >= c->w)
                tx = (int)lround(X[i] - 0.7 * h) - sp_canvas_text_width(s, scale);
            if (ty < 1)
                ty = (int)lround(Y[i] + 0.7 * h);
            sp_canvas_text(c, tx, ty, s, scale, white, black);
        }
        drawn++;
    }
    return drawn;
}

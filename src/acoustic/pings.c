#include "acoustic/pings.h"
#include "acoustic/estimate.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define FLOOR_ABS 1e-12 /* absolute floor (-120 dB re full scale): digital silence is not a floor */

typedef struct biquad {
    double b0, b1, b2, a1, a2, z1, z2;
} biquad;

/* Second-order Butterworth sections (bilinear transform, Q = 1/sqrt 2; Bristow-Johnson's cookbook). */
static void biquad_set(biquad *q, int highpass, double f, double fs)
{
    double w = 2 * M_PI * f / fs, c = cos(w), al = sin(w) / (2 * M_SQRT1_2), a0 = 1 + al;
    memset(q, 0, sizeof *q);
    if (highpass) {
        q->b0 = (1 + c) / 2 / a0;
        q->b1 = -(1 + c) / a0;
    } else {
        q->b0 = (1 - c) / 2 / a0;
        q->b1 = (1 - c) / a0;
    }
    q->b2 = q->b0;
    q->a1 = -2 * c / a0;
    q->a2 = (1 - al) / a0;
}

static double biquad_run(biquad *q, double x)
{
    double y = q->b0 * x + q->z1; /* transposed direct form II */
    q->z1 = q->b1 * x - q->a1 * y + q->z2;
    q->z2 = q->b2 * x - q->a2 * y;
    return y;
}

struct sp_pings {
    sp_ping_opts o;
    double fs;
    char *what;
    sp_ping_fn fn;
    void *ud;
    biquad band[4], dc; /* band: 2 high-pass + 2 low-pass sections; dc: the fit signal's high-pass */
    int nband;
    float *ring_fit, *ring_band; /* last ring_len samples */
    int64_t ring_len;
    int64_t pos;  /* absolute index of the next sample */
    int hop;      /* samples per hop */
    int in_hop;   /* samples accumulated in the current hop */
    double acc;   /* band energy of the current hop */
    int64_t hops; /* hops completed */
    double *win, *sorted;
    int win_len, win_n, win_head;
    /* the ping being followed */
    int active, decaying, overlap_prev;
    int64_t onset;
    double peak_e, min_e, floor_at_onset;
    float *seg;
};

void sp_ping_opts_default(sp_ping_opts *o)
{
    o->f_lo_hz = 0;
    o->f_hi_hz = 0;
    o->hop_s = 0.0005;
    o->floor_s = 1.0;
    o->floor_pct = 50;
    o->snr_min_db = 10;
    o->end_db = 3;
    o->rise_db = 6;
    o->max_s = 0.1;
    o->q_min = 5;
    o->r2_min = 0.5;
    o->warmup_s = 0.02;
}

const char *sp_ping_status_name(int s)
{
    static const char *names[] = {"ok", "click", "overlap", "band", "fit"};
    return s >= 0 && s <= 4 ? names[s] : "unknown";
}

int sp_pings_new(sp_pings **out, double fs, const sp_ping_opts *o, sp_ping_fn fn, void *ud, const char *what,
                 sp_error *err)
{
    *out = NULL;
    if (!(fs > 0) || !(o->f_lo_hz > 0) || !(o->f_hi_hz > o->f_lo_hz) || !(o->f_lo_hz < 0.5 * fs) ||
        !(o->hop_s > 0) || !(o->floor_s >= o->hop_s) || !(o->max_s > 0) || !(o->floor_pct >= 0) ||
        !(o->floor_pct <= 100) || o->floor_s > 60 || o->max_s > 10)
        return sp_error_set(err, SP_ERR_INPUT, "%s: bad ping-detector settings (band %g..%g Hz at %g Hz)",
                            what, o->f_lo_hz, o->f_hi_hz, fs);
    sp_pings *d = calloc(1, sizeof *d);
    if (!d)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", what);
    d->o = *o;
    d->fs = fs;
    d->fn = fn;
    d->ud = ud;
    d->hop = (int)lround(o->hop_s * fs);
    if (d->hop < 1)
        d->hop = 1;
    d->win_len = (int)lround(o->floor_s / o->hop_s);
    d->ring_len = (int64_t)ceil(o->max_s * fs) + 4 * d->hop + 64;
    if (d->ring_len > SP_FIT_MAX_SAMPLES)
        d->ring_len = SP_FIT_MAX_SAMPLES;
    d->what = strdup(what);
    d->ring_fit = malloc(sizeof(float) * (size_t)d->ring_len);
    d->ring_band = malloc(sizeof(float) * (size_t)d->ring_len);
    d->seg = malloc(sizeof(float) * (size_t)d->ring_len);
    d->win = malloc(sizeof(double) * (size_t)d->win_len);
    d->sorted = malloc(sizeof(double) * (size_t)d->win_len);
    if (!d->what || !d->ring_fit || !d->ring_band || !d->seg || !d->win || !d->sorted) {
        sp_pings_free(d);
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory for the ping detector", what);
    }
    biquad_set(&d->band[0], 1, o->f_lo_hz, fs);
    biquad_set(&d->band[1], 1, o->f_lo_hz, fs);
    d->nband = 2;
    if (o->f_hi_hz < 0.45 * fs) {
        biquad_set(&d->band[2], 0, o->f_hi_hz, fs);
        biquad_set(&d->band[3], 0, o->f_hi_hz, fs);
        d->nband = 4;
    }
    biquad_set(&d->dc, 1, 0.5 * o->f_lo_hz, fs);
    *out = d;
    return SP_OK;
}

void sp_pings_free(sp_pings *d)
{
    if (!d)
        return;
    free(d->what);
    free(d->ring_fit);
    free(d->ring_band);
    free(d->seg);
    free(d->win);
    free(d->sorted);
    free(d);
}

/* Running percentile: a circular window of hop energies beside a sorted copy (insert / delete by
 * binary search; the window is a few thousand values). */
static void floor_push(sp_pings *d, double e)
{
    if (d->win_n == d->win_len) {
        double old = d->win[d->win_head];
        int lo = 0, hi = d->win_n - 1;
        while (lo < hi) {
            int mid = (lo + hi) / 2;
            if (d->sorted[mid] < old)
                lo = mid + 1;
            else
                hi = mid;
        }
        memmove(d->sorted + lo, d->sorted + lo + 1, sizeof(double) * (size_t)(d->win_n - lo - 1));
        d->win_n--;
    }
    d->win[d->win_head] = e;
    d->win_head = (d->win_head + 1) % d->win_len;
    int lo = 0, hi = d->win_n;
    while (lo < hi) {
        int mid = (lo + hi) / 2;
        if (d->sorted[mid] < e)
            lo = mid + 1;
        else
            hi = mid;
    }
    memmove(d->sorted + lo + 1, d->sorted + lo, sizeof(double) * (size_t)(d->win_n - lo));
    d->sorted[lo] = e;
    d->win_n++;
}

static double floor_get(const sp_pings *d)
{
    if (d->win_n == 0)
        return FLOOR_ABS;
    double v = d->sorted[(int)(d->o.floor_pct / 100.0 * (d->win_n - 1) + 0.5)];
    return v > FLOOR_ABS ? v : FLOOR_ABS;
}

/* Analyse the followed ping over [onset, end) and report it. */
static int emit(sp_pings *d, int64_t end, int overlapped, sp_error *err)
{
    sp_ping p;
    memset(&p, 0, sizeof p);
    p.onset = d->onset;
    p.t_s = d->onset / d->fs;
    p.detect_db = 10 * log10(d->peak_e / d->floor_at_onset);
    int64_t n = end - d->onset;
    if (n > d->ring_len)
        n = d->ring_len;
    p.n = n;
    d->active = 0;
    if (overlapped) {
        p.status = SP_PING_OVERLAP;
    } else if (n < 16) {
        p.status = SP_PING_CLICK;
    } else {
        for (int64_t i = 0; i < n; i++)
            d->seg[i] = d->ring_fit[(d->onset + i) % d->ring_len];
        sp_ring r;
        int rc = sp_ring_fit(d->seg, (int)n, d->fs, d->o.f_lo_hz, d->o.f_hi_hz, &r, err);
        if (rc == SP_ERR_INTERNAL)
            return rc;
        if (rc) {
            p.status = SP_PING_FIT;
        } else {
            p.f_hz = r.f_hz;
            p.beta_s = r.beta_s;
            p.amp = r.amp;
            p.phase_rad = r.phase_rad;
            p.snr_db = r.snr_db;
            p.r2 = r.r2;
            p.q = r.beta_s > 0 ? M_PI * r.f_hz / r.beta_s : INFINITY;
            p.f_crb_hz = sp_ring_crb_f(r.amp, r.beta_s, r.f_hz, r.phase_rad, (int)n, d->fs, r.resid_var);
            if (!(r.beta_s > 0) || !(r.r2 >= d->o.r2_min))
                p.status = r.beta_s > 0 && p.q < d->o.q_min ? SP_PING_CLICK : SP_PING_FIT;
            else if (p.q < d->o.q_min)
                p.status = SP_PING_CLICK;
            else if (r.f_hz < d->o.f_lo_hz || r.f_hz > d->o.f_hi_hz)
                p.status = SP_PING_BAND;
            else
                p.status = SP_PING_OK;
        }
    }
    return d->fn ? d->fn(d->ud, &p, err) : SP_OK;
}

/* Onset within the last two hops: the first sample whose band power passes the threshold. */
static int64_t refine_onset(const sp_pings *d, int64_t hop_end, double thr)
{
    int64_t from = hop_end - 2 * d->hop;
    if (from < 0)
        from = 0;
    for (int64_t i = from; i < hop_end; i++) {
        double v = d->ring_band[i % d->ring_len];
        if (v * v > thr)
            return i;
    }
    return hop_end - d->hop;
}

static int hop_done(sp_pings *d, double e, sp_error *err)
{
    int rc = SP_OK;
    double fl = floor_get(d);
    double thr = fl * pow(10, d->o.snr_min_db / 10);
    int warm = d->hops * d->o.hop_s >= d->o.warmup_s;
    if (d->active) {
        int64_t len = d->pos - d->onset;
        if (!d->decaying && e > d->peak_e)
            d->peak_e = e;
        if (!d->decaying && e < 0.5 * d->peak_e) {
            d->decaying = 1;
            d->min_e = e;
        }
        if (d->decaying && e < d->min_e)
            d->min_e = e;
        if (d->decaying && e > thr && e > d->min_e * pow(10, d->o.rise_db / 10)) {
            /* A second onset in the decay: report the first as overlapped, follow the second and
             * reject it too (its start sits on the first's tail). */
            if ((rc = emit(d, d->pos, 1, err)))
                return rc;
            d->active = 1;
            d->decaying = 0;
            d->overlap_prev = 1;
            d->onset = refine_onset(d, d->pos, thr);
            d->peak_e = e;
            d->floor_at_onset = fl;
        } else if (e < d->floor_at_onset * pow(10, d->o.end_db / 10) ||
                   len + d->hop > d->ring_len - 4 * d->hop - 64) {
            if ((rc = emit(d, d->pos, d->overlap_prev, err)))
                return rc;
        }
    } else if (warm && e > thr) {
        d->active = 1;
        d->decaying = 0;
        d->overlap_prev = 0;
        d->onset = refine_onset(d, d->pos, thr);
        d->peak_e = e;
        d->floor_at_onset = fl;
    }
    floor_push(d, e);
    d->hops++;
    return rc;
}

int sp_pings_feed(sp_pings *d, const float *x, int n, sp_error *err)
{
    for (int i = 0; i < n; i++) {
        double v = x[i], b = v;
        for (int k = 0; k < d->nband; k++)
            b = biquad_run(&d->band[k], b);
        double f = biquad_run(&d->dc, v);
        int64_t at = d->pos % d->ring_len;
        d->ring_fit[at] = (float)f;
        d->ring_band[at] = (float)b;
        d->pos++;
        d->acc += b * b;
        if (++d->in_hop == d->hop) {
            int rc = hop_done(d, d->acc / d->hop, err);
            d->acc = 0;
            d->in_hop = 0;
            if (rc)
                return rc;
        }
    }
    return SP_OK;
}

int sp_pings_finish(sp_pings *d, sp_error *err)
{
    if (d->active)
        return emit(d, d->pos, d->overlap_prev, err);
    return SP_OK;
}

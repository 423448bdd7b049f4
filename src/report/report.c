/* report.html: one self-contained page a scientist can read offline and archive with the data.
 * Every plot is drawn here as SVG (report/plot.c); overlay thumbnails are embedded PNGs. */
#include "report/report.h"
#include "core/outfile.h"
#include "io/videowriter.h"
#include "physics/correlations.h"
#include "report/overlay.h"
#include "report/plot.h"
#include "report/sbuf.h"
#include "stats/sizestats.h"

#include <errno.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#define MAX_SUMMARY_BYTES (16 << 20)
#define MAX_POINTS 4000    /* markers per plot series: beyond, every k-th point (deterministic) */
#define MAX_TABLE_ROWS 200 /* rows shown per table in the page (all rows stay in the CSV) */
#define MAX_FRAMES_ASKED 1000

static const char *const site_colors[] = {"#0072b2", "#d55e00", "#009e73", "#cc79a7",
                                          "#e69f00", "#56b4e9", "#000000", "#999999"};

size_t sp_report_thumb_row(size_t nrows, int k, int i)
{
    if (k <= 1 || nrows <= 1)
        return 0;
    return (size_t)((double)(nrows - 1) * i / (k - 1) + 0.5);
}

void sp_report_opts_default(sp_report_opts *o)
{
    memset(o, 0, sizeof *o);
    o->thumbnails = 4;
    o->trail = 20;
    o->focus_contrast = 0.3;
}

/* ---------------------------------------------------------------- inputs */

typedef struct rdata {
    const char *dir;
    json_t *sum;
    sp_table frames, tracks, sites, pairs, bub;
    int has_frames, has_tracks, has_sites, has_pairs;
    sp_liquid liquid;
    char liquid_note[256];
} rdata;

enum { F_FRAME, F_T, F_GAS, F_N };
static const char *const fcols[F_N] = {"frame", "t_s", "gas_fraction"};
enum { T_TRACK, T_D, T_VY, T_ASPECT, T_EO, T_SITE, T_TFIRST, T_N, T_SPEED, T_FOCUS, T_NN };
static const char *const tcols[T_NN] = {"track", "d_vol_mm",  "vy_mm_s", "aspect_mean", "eo",
                                        "site",  "t_first_s", "n",       "speed_mm_s",  "in_focus_frac"};
enum { S_SITE, S_X, S_Y, S_N, S_RATE, S_DDET, S_GROWTH, S_NN };
static const char *const scols[S_NN] = {"site", "x_mm", "y_mm", "n", "rate_hz", "d_detach_mm", "growth_mm_s"};
enum { P_TRACK, P_TV, P_TA, P_DO, P_DA, P_NN };
static const char *const pcols[P_NN] = {"track", "t_video_s", "t_audio_s", "d_optical_mm", "d_acoustic_mm"};
enum { B_FRAME, B_T, B_TRACK, B_D, B_EDGE, B_NN };
static const char *const bcols[B_NN] = {"frame", "t_s", "track", "d_vol_mm", "edge"};

static double jnum(const json_t *o, const char *k)
{
    const json_t *v = o ? json_object_get(o, k) : NULL;
    return json_is_number(v) ? json_number_value(v) : NAN;
}

static const char *jstr(const json_t *o, const char *k)
{
    const json_t *v = o ? json_object_get(o, k) : NULL;
    return json_is_string(v) ? json_string_value(v) : NULL;
}

static int load_summary(rdata *r, sp_error *err)
{
    char path[4200];
    struct stat st;
    snprintf(path, sizeof path, "%s/summary.json", r->dir);
    if (stat(path, &st) != 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot open: %s", path, strerror(errno));
    if (st.st_size > MAX_SUMMARY_BYTES)
        return sp_error_set(err, SP_ERR_INPUT, "%s: larger than %d bytes", path, MAX_SUMMARY_BYTES);
    json_error_t je;
    r->sum = json_load_file(path, JSON_REJECT_DUPLICATES, &je);
    if (!r->sum)
        return sp_error_set(err, SP_ERR_INPUT, "%s: line %d: %s", path, je.line, je.text);
    if (!json_is_object(r->sum))
        return sp_error_set(err, SP_ERR_INPUT, "%s: not a JSON object", path);
    return SP_OK;
}

/* Liquid for the correlations: summary.json "liquid" (fields named as in sp_liquid) over the water
 * model at its temperature, or water at 20 °C when the run recorded none. */
static void load_liquid(rdata *r)
{
    sp_error e;
    const json_t *lq = json_object_get(r->sum, "liquid");
    double tc = jnum(lq, "temp_c");
    if (!(tc >= 0 && tc <= 100))
        tc = 20;
    sp_liquid_water(tc, &r->liquid, &e);
    if (!json_is_object(lq)) {
        snprintf(r->liquid_note, sizeof r->liquid_note, "water at 20 °C (the run recorded no liquid)");
        return;
    }
    const char *name = jstr(lq, "name");
    if (name)
        snprintf(r->liquid.name, sizeof r->liquid.name, "%s", name);
    static const char *const keys[] = {"rho_kg_m3", "mu_pa_s", "sigma_n_m",        "p_atm_pa",
                                       "g_m_s2",    "depth_m", "gas_molar_kg_mol", "rho_gas_kg_m3"};
    for (size_t i = 0; i < sizeof keys / sizeof keys[0]; i++) {
        double v = jnum(lq, keys[i]);
        if (isfinite(v))
            sp_liquid_set(&r->liquid, keys[i], v, &e); /* a refused value keeps the model's */
    }
    snprintf(r->liquid_note, sizeof r->liquid_note, "%s at %.1f °C (from summary.json)",
             r->liquid.name[0] ? r->liquid.name : "liquid", r->liquid.temp_c);
}

static void rdata_free(rdata *r)
{
    json_decref(r->sum);
    sp_table_free(&r->frames);
    sp_table_free(&r->tracks);
    sp_table_free(&r->sites);
    sp_table_free(&r->pairs);
    sp_table_free(&r->bub);
}

/* ---------------------------------------------------------------- helpers */

static void minmax(const double *v, size_t n, double *lo, double *hi)
{
    *lo = INFINITY;
    *hi = -INFINITY;
    for (size_t i = 0; i < n; i++)
        if (isfinite(v[i])) {
            if (v[i] < *lo)
                *lo = v[i];
            if (v[i] > *hi)
                *hi = v[i];
        }
}

static void minmax_pos(const double *v, size_t n, double *lo, double *hi)
{
    *lo = INFINITY;
    *hi = -INFINITY;
    for (size_t i = 0; i < n; i++)
        if (isfinite(v[i]) && v[i] > 0) {
            if (v[i] < *lo)
                *lo = v[i];
            if (v[i] > *hi)
                *hi = v[i];
        }
}

static void fig_open(sp_sbuf *h, const char *kind)
{
    sp_sbuf_printf(h, "<figure class=\"fig\" data-kind=\"%s\">\n", kind);
}

static void fig_close(sp_sbuf *h, const char *caption)
{
    sp_sbuf_puts(h, "<figcaption>");
    sp_sbuf_esc(h, caption);
    sp_sbuf_puts(h, "</figcaption></figure>\n");
}

static void absent(sp_sbuf *h, const char *what)
{
    sp_sbuf_puts(h, "<p class=\"absent\">");
    sp_sbuf_esc(h, what);
    sp_sbuf_puts(h, "</p>\n");
}

/* ---------------------------------------------------------------- plots */

typedef struct sizes {
    double *d;
    size_t n;
    int per_track;
} sizes;

/* One diameter per track (tracks.csv) when tracks exist, else every non-edge detection. */
static int collect_sizes(rdata *r, sizes *s, sp_error *err)
{
    const sp_table *t = r->has_tracks && r->tracks.nrows && r->tracks.found[T_D] ? &r->tracks : &r->bub;
    int col = t == &r->tracks ? T_D : B_D;
    s->per_track = t == &r->tracks;
    s->n = 0;
    s->d = malloc((t->nrows ? t->nrows : 1) * sizeof(double));
    if (!s->d)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", r->dir);
    if (!t->found[col])
        return SP_OK;
    /* The same tracks as summary.json's statistics: those mostly out of focus are left out unless
     * the run kept them. */
    const json_t *set = r->sum ? json_object_get(r->sum, "settings") : NULL;
    int keep_defocused = set && json_is_true(json_object_get(set, "keep_defocused"));
    for (size_t i = 0; i < t->nrows; i++) {
        double d = t->col[col][i];
        if (!s->per_track && r->bub.found[B_EDGE] && r->bub.col[B_EDGE][i] > 0)
            continue;
        if (s->per_track && !keep_defocused && t->found[T_FOCUS] && t->col[T_FOCUS][i] < 0.5)
            continue;
        if (isfinite(d) && d > 0)
            s->d[s->n++] = d;
    }
    return SP_OK;
}

static void plot_hist(sp_sbuf *h, int *id, const sizes *s, int power, sp_report_result *res)
{
    const char *title = power ? "Volume-weighted size distribution" : "Number-weighted size distribution";
    fig_open(h, power ? "hist-volume" : "hist-number");
    double lo, hi;
    minmax(s->d, s->n, &lo, &hi);
    sp_plot p = {.b = h, .id = (*id)++};
    sp_axis_fit(&p.x, lo > 0 ? 0 : lo, hi, 8, 0);
    enum { NB = 30 };
    double edges[NB + 1], v[NB] = {0}, outside = 0, tot = 0, vmax = 0;
    sp_error e;
    sp_hist_edges(p.x.lo, p.x.hi, NB, 0, edges, &e);
    sp_size_hist(s->d, s->n, edges, NB + 1, power ? 3 : 0, v, &outside, &e);
    for (int i = 0; i < NB; i++)
        tot += v[i];
    for (int i = 0; i < NB; i++) {
        v[i] = tot > 0 ? 100 * v[i] / tot : 0;
        vmax = fmax(vmax, v[i]);
    }
    sp_axis_fit(&p.y, 0, vmax * 1.05, 6, 0);
    sp_plot_begin(&p, title, "diameter d_vol (mm)",
                  power ? "volume fraction per bin (%)" : "count per bin (%)");
    sp_plot_bars(&p, edges, v, NB, power ? "#e69f00" : "#56b4e9");
    double dm[3];
    const char *nm[3] = {"d10", "d32", "d43"}, *cl[3] = {"#000000", "#0072b2", "#d55e00"};
    int pq[3][2] = {{1, 0}, {3, 2}, {4, 3}};
    for (int k = 0; k < 3; k++) {
        char lab[64];
        if (sp_size_moment_mean(s->d, s->n, pq[k][0], pq[k][1], &dm[k], &e))
            dm[k] = NAN;
        snprintf(lab, sizeof lab, "%s = %.3g mm", nm[k], dm[k]);
        sp_plot_vline(&p, dm[k], cl[k], k ? "6 3" : "", lab);
    }
    if (res) {
        res->d10_mm = dm[0];
        res->d32_mm = dm[1];
        res->d43_mm = dm[2];
    }
    sp_plot_end(&p);
    char cap[256];
    snprintf(cap, sizeof cap,
             "%zu diameters (%s), 30 equal bins; moment-ratio means D[1,0], D[3,2], D[4,3] "
             "(ISO 9276-2) marked.",
             s->n,
             s->per_track ? "one per track in focus, as in summary.json" : "one per non-edge detection");
    fig_close(h, cap);
    if (res)
        res->plots++;
}

static void plot_rise(sp_sbuf *h, int *id, rdata *r, sp_report_result *res)
{
    fig_open(h, "rise");
    const sp_table *t = &r->tracks;
    size_t n = t->nrows;
    double dlo, dhi, ulo, uhi;
    minmax_pos(t->col[T_D], n, &dlo, &dhi);
    minmax(t->col[T_VY], n, &ulo, &uhi);
    enum { NC = 120 };
    double cd[NC], cu[4][NC];
    sp_plot p = {.b = h, .id = (*id)++, .w = 620};
    sp_axis_fit(&p.x, isfinite(dlo) ? 0.8 * dlo : dlo, isfinite(dhi) ? 1.25 * dhi : dhi, 8, 1);
    double cmax = -INFINITY;
    for (int i = 0; i < NC; i++) {
        cd[i] = p.x.lo * pow(p.x.hi / p.x.lo, (double)i / (NC - 1));
        double dm = cd[i] * 1e-3;
        cu[0][i] = 1e3 * sp_rise_mendelson(&r->liquid, dm);
        cu[1][i] = 1e3 * sp_rise_tomiyama(&r->liquid, dm, SP_CONTAM_PURE, NULL);
        cu[2][i] = 1e3 * sp_rise_tomiyama(&r->liquid, dm, SP_CONTAM_SLIGHT, NULL);
        cu[3][i] = 1e3 * sp_rise_tomiyama(&r->liquid, dm, SP_CONTAM_FULL, NULL);
        if (cd[i] >= dlo && cd[i] <= dhi)
            for (int k = 0; k < 4; k++)
                if (isfinite(cu[k][i]))
                    cmax = fmax(cmax, cu[k][i]);
    }
    double top = fmax(isfinite(uhi) ? uhi : 0, isfinite(cmax) ? cmax : 0);
    sp_axis_fit(&p.y, fmin(0, isfinite(ulo) ? ulo : 0), top * 1.05, 6, 0);
    sp_plot_begin(&p, "Rise velocity against diameter", "diameter d_vol (mm)", "rise velocity vy (mm/s)");
    const char *cc[4] = {"#000000", "#0072b2", "#009e73", "#d55e00"};
    const char *dd[4] = {"", "8 3", "4 3", "2 3"};
    const char *nn[4] = {"Mendelson 1967", "Tomiyama 1998, pure", "Tomiyama 1998, slightly",
                         "Tomiyama 1998, full"};
    for (int k = 0; k < 4; k++)
        sp_plot_line(&p, cd, cu[k], NC, cc[k], dd[k], 1.8);
    sp_plot_points(&p, t->col[T_D], t->col[T_VY], n, "#cc79a7", 0, 2.8, MAX_POINTS);
    for (int k = 0; k < 4; k++)
        sp_plot_legend(&p, nn[k], cc[k], dd[k], 0);
    sp_plot_legend(&p, "tracks (measured)", "#cc79a7", "", 1);
    sp_plot_end(&p);
    char cap[512];
    snprintf(cap, sizeof cap,
             "One point per track (tracks.csv: d_vol_mm, vy_mm_s). Terminal velocities for %s.",
             r->liquid_note);
    fig_close(h, cap);
    res->plots++;
}

static void plot_aspect(sp_sbuf *h, int *id, rdata *r, sp_report_result *res)
{
    fig_open(h, "aspect");
    const sp_table *t = &r->tracks;
    size_t n = t->nrows;
    double *eo = malloc((n ? n : 1) * sizeof(double));
    if (!eo) {
        absent(h, "out of memory");
        sp_sbuf_puts(h, "</figure>\n");
        return;
    }
    for (size_t i = 0; i < n; i++) {
        double v = t->found[T_EO] ? t->col[T_EO][i] : NAN;
        eo[i] = isfinite(v) ? v : sp_group_eo(&r->liquid, t->col[T_D][i] * 1e-3);
    }
    double lo, hi;
    minmax_pos(eo, n, &lo, &hi);
    sp_plot p = {.b = h, .id = (*id)++};
    sp_axis_fit(&p.x, lo, hi, 8, 1);
    sp_axis_fit(&p.y, 0, 1, 6, 0);
    enum { NC = 100 };
    double ce[NC], ca[NC];
    for (int i = 0; i < NC; i++) {
        ce[i] = p.x.lo * pow(p.x.hi / p.x.lo, (double)i / (NC - 1));
        ca[i] = ce[i] < 40 ? sp_aspect_wellek(ce[i]) : NAN; /* stated range Eo < 40 */
    }
    sp_plot_begin(&p, "Aspect ratio against Eötvös number", "Eötvös number Eo", "aspect ratio minor/major");
    sp_plot_line(&p, ce, ca, NC, "#0072b2", "", 1.8);
    sp_plot_points(&p, eo, t->col[T_ASPECT], n, "#cc79a7", 0, 2.8, MAX_POINTS);
    sp_plot_legend(&p, "Wellek et al. 1966", "#0072b2", "", 0);
    sp_plot_legend(&p, "tracks (mean aspect)", "#cc79a7", "", 1);
    sp_plot_end(&p);
    fig_close(h,
              "One point per track (tracks.csv: aspect_mean; Eo from tracks.csv or from d_vol_mm and the "
              "liquid). Wellek, Agrawal & Skelland (1966): E = 1/(1 + 0.163 Eo^0.757), drawn for Eo < 40.");
    free(eo);
    res->plots++;
}

static void plot_holdup(sp_sbuf *h, int *id, rdata *r, sp_report_result *res)
{
    fig_open(h, "holdup");
    size_t n = r->frames.nrows;
    double *pc = malloc((n ? n : 1) * sizeof(double));
    if (!pc) {
        absent(h, "out of memory");
        sp_sbuf_puts(h, "</figure>\n");
        return;
    }
    for (size_t i = 0; i < n; i++)
        pc[i] = 100 * r->frames.col[F_GAS][i];
    double tlo, thi, glo, ghi;
    minmax(r->frames.col[F_T], n, &tlo, &thi);
    minmax(pc, n, &glo, &ghi);
    sp_plot p = {.b = h, .id = (*id)++, .w = 620};
    sp_axis_fit(&p.x, tlo, thi, 8, 0);
    sp_axis_fit(&p.y, 0, isfinite(ghi) ? ghi * 1.05 : ghi, 6, 0);
    sp_plot_begin(&p, "Projected gas fraction against time", "time t (s)", "projected gas fraction (%)");
    sp_plot_line(&p, r->frames.col[F_T], pc, n, "#0072b2", "", 1.4);
    double mean = jnum(r->sum, "holdup");
    char lab[64];
    snprintf(lab, sizeof lab, "mean %.3g %%", 100 * mean);
    sp_plot_hline(&p, 100 * mean, "#d55e00", "6 3", lab);
    sp_plot_end(&p);
    fig_close(
        h, "frames.csv gas_fraction: filled bubble area over the region's area, per frame; the dashed line "
           "is summary.json holdup.");
    free(pc);
    res->plots++;
}

/* Emission timeline: one marker per track born at a site, at its birth time. */
static void plot_sites(sp_sbuf *h, int *id, rdata *r, sp_report_result *res)
{
    const sp_table *t = &r->tracks;
    size_t n = t->nrows;
    double smax = 0;
    for (size_t i = 0; i < n; i++)
        if (t->col[T_SITE][i] > smax)
            smax = t->col[T_SITE][i];
    for (size_t i = 0; i < r->sites.nrows; i++)
        if (r->sites.col[S_SITE][i] > smax)
            smax = r->sites.col[S_SITE][i];
    double tlo, thi;
    minmax(r->frames.col[F_T], r->frames.nrows, &tlo, &thi);
    if (!isfinite(tlo))
        minmax(t->col[T_TFIRST], n, &tlo, &thi);

    fig_open(h, "site-timeline");
    sp_plot p = {.b = h, .id = (*id)++, .w = 620};
    sp_axis_fit(&p.x, tlo, thi, 8, 0);
    sp_axis_fit(&p.y, 0.5, smax + 0.5, smax > 10 ? 8 : (int)smax + 1, 0);
    sp_plot_begin(&p, "Emission timeline per nucleation site", "birth time t_first (s)", "site");
    int nsite = smax < 1000 ? (int)smax : 1000;
    double *x = malloc((n ? n : 1) * sizeof(double)), *y = malloc((n ? n : 1) * sizeof(double));
    if (x && y) {
        for (int s = 1; s <= nsite; s++) {
            size_t m = 0;
            for (size_t i = 0; i < n; i++)
                if (t->col[T_SITE][i] == s) {
                    x[m] = t->col[T_TFIRST][i];
                    y[m++] = s;
                }
            const char *c = site_colors[(s - 1) % 8];
            sp_plot_points(&p, x, y, m, c, 3, 3.5, MAX_POINTS);
        }
    }
    sp_plot_end(&p);
    fig_close(h, "One diamond per track born at a site (tracks.csv site, t_first_s); regular spacing is a "
                 "steady emission rate.");
    res->plots++;

    /* Growth: the diameter of each site's bubbles against their age since birth. */
    fig_open(h, "site-growth");
    const sp_table *b = &r->bub;
    size_t nb = b->nrows;
    double *age = malloc((nb ? nb : 1) * sizeof(double)), *dd = malloc((nb ? nb : 1) * sizeof(double));
    /* track id -> (site, t_first) by direct index; ids are dense from 1 */
    size_t cap = n + 1;
    double *tsite = calloc(cap, sizeof(double)), *tfirst = calloc(cap, sizeof(double));
    if (!age || !dd || !tsite || !tfirst || !x) {
        absent(h, "out of memory");
        sp_sbuf_puts(h, "</figure>\n");
        goto done;
    }
    for (size_t i = 0; i < n; i++) {
        double tr = t->col[T_TRACK][i];
        if (tr >= 1 && tr < (double)cap) {
            tsite[(size_t)tr] = t->col[T_SITE][i];
            tfirst[(size_t)tr] = t->col[T_TFIRST][i];
        }
    }
    double alo = INFINITY, ahi = -INFINITY, dlo = INFINITY, dhi = -INFINITY;
    for (size_t i = 0; i < nb; i++) {
        double tr = b->col[B_TRACK][i];
        age[i] = dd[i] = NAN;
        if (!(tr >= 1 && tr < (double)cap) || !(tsite[(size_t)tr] >= 1) || b->col[B_EDGE][i] > 0)
            continue;
        age[i] = b->col[B_T][i] - tfirst[(size_t)tr];
        dd[i] = b->col[B_D][i];
        if (isfinite(age[i]) && isfinite(dd[i])) {
            alo = fmin(alo, age[i]);
            ahi = fmax(ahi, age[i]);
            dlo = fmin(dlo, dd[i]);
            dhi = fmax(dhi, dd[i]);
        }
    }
    sp_plot q = {.b = h, .id = (*id)++, .w = 620};
    sp_axis_fit(&q.x, fmin(0, alo), ahi, 8, 0);
    sp_axis_fit(&q.y, fmin(0, dlo), dhi, 6, 0);
    sp_plot_begin(&q, "Growth of the bubbles of each site", "age since birth (s)", "diameter d_vol (mm)");
    /* One series per site, coloured (sites beyond the eighth in grey). */
    double *ax = malloc((nb ? nb : 1) * sizeof(double)), *ay = malloc((nb ? nb : 1) * sizeof(double));
    if (ax && ay)
        for (int s = 1; s <= nsite; s++) {
            size_t m = 0;
            for (size_t i = 0; i < nb; i++) {
                double tr = b->col[B_TRACK][i];
                if (isfinite(age[i]) && tsite[(size_t)tr] == s) {
                    ax[m] = age[i];
                    ay[m++] = dd[i];
                }
            }
            sp_plot_points(&q, ax, ay, m, s <= 8 ? site_colors[s - 1] : "#999999", 0, 2, MAX_POINTS / 4);
        }
    free(ax);
    free(ay);
    for (int s = 1; s <= nsite && s <= 8; s++) {
        char nm[32];
        snprintf(nm, sizeof nm, "site %d", s);
        sp_plot_legend(&q, nm, site_colors[s - 1], "", 1);
    }
    sp_plot_end(&q);
    fig_close(h,
              "Each detection of a track born at a site (bubbles.csv d_vol_mm, edge rows left out) against "
              "its time since the track's birth; the slope is the growth rate of sites.csv.");
    res->plots++;
done:
    free(x);
    free(y);
    free(age);
    free(dd);
    free(tsite);
    free(tfirst);
}

static void plot_pairs(sp_sbuf *h, int *id, rdata *r, sp_report_result *res)
{
    const sp_table *t = &r->pairs;
    size_t n = t->nrows;
    const double *o = t->col[P_DO], *a = t->col[P_DA];
    double lo, hi, lo2, hi2;
    minmax(o, n, &lo, &hi);
    minmax(a, n, &lo2, &hi2);
    fig_open(h, "acoustic-optical");
    sp_plot p = {.b = h, .id = (*id)++, .w = 420, .h = 380};
    sp_axis_fit(&p.x, fmin(0, fmin(lo, lo2)), fmax(hi, hi2), 6, 0);
    p.y = p.x;
    sp_plot_begin(&p, "Acoustic against optical diameter", "optical d (mm)", "acoustic d (mm)");
    double diag[2] = {p.x.lo, p.x.hi};
    sp_plot_line(&p, diag, diag, 2, "#999999", "6 3", 1.2);
    sp_plot_points(&p, o, a, n, "#0072b2", 0, 3, MAX_POINTS);
    sp_plot_legend(&p, "equality", "#999999", "6 3", 0);
    sp_plot_end(&p);
    fig_close(h, "pairs.csv: one point per optical track matched to an acoustic ping.");
    res->plots++;

    /* Bland & Altman (1986): difference against mean, with the mean bias and 95 % limits of agreement. */
    fig_open(h, "bland-altman");
    double *m = malloc((n ? n : 1) * sizeof(double)), *d = malloc((n ? n : 1) * sizeof(double));
    if (!m || !d) {
        free(m);
        free(d);
        absent(h, "out of memory");
        sp_sbuf_puts(h, "</figure>\n");
        return;
    }
    double s1 = 0, s2 = 0;
    size_t k = 0;
    for (size_t i = 0; i < n; i++) {
        m[i] = 0.5 * (o[i] + a[i]);
        d[i] = a[i] - o[i];
        if (isfinite(d[i]) && isfinite(m[i])) {
            s1 += d[i];
            k++;
        }
    }
    double bias = k ? s1 / k : NAN;
    for (size_t i = 0; i < n; i++)
        if (isfinite(d[i]) && isfinite(m[i]))
            s2 += (d[i] - bias) * (d[i] - bias);
    double sd = k > 1 ? sqrt(s2 / (k - 1)) : NAN;
    double mlo, mhi, dlo, dhi;
    minmax(m, n, &mlo, &mhi);
    minmax(d, n, &dlo, &dhi);
    if (isfinite(sd)) {
        dlo = fmin(dlo, bias - 1.96 * sd);
        dhi = fmax(dhi, bias + 1.96 * sd);
    }
    sp_plot q = {.b = h, .id = (*id)++, .w = 520, .h = 380};
    sp_axis_fit(&q.x, mlo, mhi, 6, 0);
    sp_axis_fit(&q.y, fmin(dlo, 0), fmax(dhi, 0), 6, 0);
    sp_plot_begin(&q, "Bland-Altman: acoustic minus optical", "mean of the two diameters (mm)",
                  "acoustic - optical (mm)");
    char lab[64];
    snprintf(lab, sizeof lab, "bias %.3g mm", bias);
    sp_plot_hline(&q, bias, "#d55e00", "", lab);
    snprintf(lab, sizeof lab, "+1.96 SD %.3g", bias + 1.96 * sd);
    sp_plot_hline(&q, bias + 1.96 * sd, "#d55e00", "6 3", lab);
    snprintf(lab, sizeof lab, "-1.96 SD %.3g", bias - 1.96 * sd);
    sp_plot_hline(&q, bias - 1.96 * sd, "#d55e00", "6 3", lab);
    sp_plot_points(&q, m, d, n, "#0072b2", 0, 3, MAX_POINTS);
    sp_plot_end(&q);
    fig_close(h, "Bland & Altman (1986): mean difference (bias) and limits of agreement bias ± 1.96 SD.");
    free(m);
    free(d);
    res->plots++;
}

/* The overlay legend, drawn in SVG with the same colours and glyphs as the frames. */
static void legend_svg(sp_sbuf *h)
{
    static const char *const names[4] = {"isolated", "split piece of a cluster",
                                         "out of focus (weak contrast)", "cut by the frame or region edge"};
    sp_sbuf_puts(h, "<svg class=\"legend\" xmlns=\"http://www.w3.org/2000/svg\" width=\"560\" height=\"74\" "
                    "role=\"img\" aria-label=\"overlay legend\">\n");
    for (int s = 0; s < 4; s++) {
        const sp_rgb c = sp_overlay_state_rgb[s];
        double x = 14 + (s % 2) * 280, y = 18 + (s / 2) * 28;
        sp_sbuf_printf(
            h,
            "<ellipse cx=\"%.0f\" cy=\"%.0f\" rx=\"11\" ry=\"8\" fill=\"#777\" stroke=\"rgb(%d,%d,%d)\" "
            "stroke-width=\"2\"%s/>",
            x, y, c.r, c.g, c.b, s >= 2 ? " stroke-dasharray=\"4 3\"" : "");
        if (s == 1)
            sp_sbuf_printf(
                h, "<path d=\"M%.0f %.0fh6M%.0f %.0fv6\" stroke=\"rgb(%d,%d,%d)\" stroke-width=\"1.5\"/>",
                x - 3, y, x, y - 3, c.r, c.g, c.b);
        if (s == 3)
            sp_sbuf_printf(
                h,
                "<path d=\"M%.0f %.0fv-4h4M%.0f %.0fv-4h-4M%.0f %.0fv4h4M%.0f %.0fv4h-4\" fill=\"none\" "
                "stroke=\"rgb(%d,%d,%d)\" stroke-width=\"1.5\"/>",
                x - 14, y - 7, x + 14, y - 7, x - 14, y + 7, x + 14, y + 7, c.r, c.g, c.b);
        sp_sbuf_printf(h, "<text x=\"%.0f\" y=\"%.0f\" font-size=\"12\">%s</text>\n", x + 22, y + 4,
                       names[s]);
    }
    const sp_rgb t = sp_overlay_trail_rgb;
    sp_sbuf_printf(h,
                   "<path d=\"M4 66l10 -4l10 2\" fill=\"none\" stroke=\"rgb(%d,%d,%d)\" stroke-width=\"2\"/>"
                   "<text x=\"36\" y=\"70\" font-size=\"12\">trail of the track (recent frames); "
                   "white digits: track id</text>\n</svg>\n",
                   t.r, t.g, t.b);
}

/* ---------------------------------------------------------------- tables */

static void kv_row(sp_sbuf *h, const char *k, const char *v)
{
    sp_sbuf_puts(h, "<tr><th>");
    sp_sbuf_esc(h, k);
    sp_sbuf_puts(h, "</th><td>");
    sp_sbuf_esc(h, v);
    sp_sbuf_puts(h, "</td></tr>\n");
}

static void kv_num(sp_sbuf *h, const char *k, double v, const char *unit)
{
    char s[96];
    if (isfinite(v))
        snprintf(s, sizeof s, "%.6g%s%s", v, unit[0] ? " " : "", unit);
    else
        snprintf(s, sizeof s, "—");
    kv_row(h, k, s);
}

/* Flatten a JSON object into key/value rows ("a.b" for nested keys). */
static void json_rows(sp_sbuf *h, const json_t *o, const char *prefix, int depth)
{
    const char *k;
    json_t *v;
    json_object_foreach((json_t *)o, k, v)
    {
        char key[256], s[512];
        snprintf(key, sizeof key, "%s%s%s", prefix, prefix[0] ? "." : "", k);
        if (json_is_object(v) && depth < 4) {
            json_rows(h, v, key, depth + 1);
            continue;
        }
        if (json_is_string(v))
            snprintf(s, sizeof s, "%s", json_string_value(v));
        else if (json_is_integer(v))
            snprintf(s, sizeof s, "%lld", (long long)json_integer_value(v));
        else if (json_is_real(v))
            snprintf(s, sizeof s, "%.10g", json_real_value(v));
        else if (json_is_true(v) || json_is_false(v))
            snprintf(s, sizeof s, "%s", json_is_true(v) ? "true" : "false");
        else if (json_is_null(v))
            snprintf(s, sizeof s, "null");
        else {
            char *d = json_dumps(v, JSON_COMPACT);
            snprintf(s, sizeof s, "%s", d ? d : "?");
            free(d);
        }
        kv_row(h, key, s);
    }
}

static void json_table(sp_sbuf *h, const char *title, const json_t *o, sp_report_result *res)
{
    if (!json_is_object(o) || json_object_size(o) == 0)
        return;
    sp_sbuf_puts(h, "<h3>");
    sp_sbuf_esc(h, title);
    sp_sbuf_puts(h, "</h3>\n<table class=\"kv\">\n");
    json_rows(h, o, "", 0);
    sp_sbuf_puts(h, "</table>\n");
    res->tables++;
}

static void csv_table(sp_sbuf *h, const char *caption, const sp_table *t, const char *const *names,
                      const int *digits, sp_report_result *res)
{
    sp_sbuf_puts(h, "<table class=\"data\">\n<caption>");
    sp_sbuf_esc(h, caption);
    sp_sbuf_puts(h, "</caption>\n<tr>");
    for (int k = 0; k < t->ncols; k++)
        if (t->found[k])
            sp_sbuf_printf(h, "<th>%s</th>", names[k]);
    sp_sbuf_puts(h, "</tr>\n");
    for (size_t i = 0; i < t->nrows && i < MAX_TABLE_ROWS; i++) {
        sp_sbuf_puts(h, "<tr>");
        for (int k = 0; k < t->ncols; k++)
            if (t->found[k]) {
                double v = t->col[k][i];
                if (isfinite(v))
                    sp_sbuf_printf(h, "<td>%.*f</td>", digits[k], v);
                else
                    sp_sbuf_puts(h, "<td></td>");
            }
        sp_sbuf_puts(h, "</tr>\n");
    }
    sp_sbuf_puts(h, "</table>\n");
    if (t->nrows > MAX_TABLE_ROWS)
        sp_sbuf_printf(h, "<p class=\"note\">First %d of %zu rows; the CSV file holds all.</p>\n",
                       MAX_TABLE_ROWS, t->nrows);
    res->tables++;
}

/* ---------------------------------------------------------------- overlays */

static int file_exists(const char *p)
{
    struct stat st;
    return stat(p, &st) == 0;
}

/* The recording: as given, else relative to DIR, else to DIR's parent. */
static int resolve_input(const char *dir, const char *given, char *out, size_t n)
{
    if (!given || !given[0])
        return 0;
    if (file_exists(given)) {
        snprintf(out, n, "%s", given);
        return 1;
    }
    if (given[0] == '/')
        return 0;
    snprintf(out, n, "%s/%s", dir, given);
    if (file_exists(out))
        return 1;
    snprintf(out, n, "%s/../%s", dir, given);
    return file_exists(out);
}

static int cmp_i64(const void *a, const void *b)
{
    int64_t x = *(const int64_t *)a, y = *(const int64_t *)b;
    return x < y ? -1 : x > y;
}

typedef struct thumbs {
    int64_t frame[MAX_FRAMES_ASKED];
    char *uri[MAX_FRAMES_ASKED]; /* base64 PNG (owned) */
    int n;
} thumbs;

/* An encoded overlay: written to its file under overlays/ and kept as a data URI for the page. */
static int keep_thumb(const char *path, const unsigned char *png, size_t np, int64_t idx, thumbs *th,
                      sp_error *err)
{
    sp_sbuf b64 = {0};
    sp_sbuf_base64(&b64, png, np);
    int rc = sp_png_bytes_write(png, np, path, err);
    if (!rc && b64.failed)
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
    if (rc) {
        sp_sbuf_free(&b64);
        return rc;
    }
    th->frame[th->n] = idx;
    th->uri[th->n++] = b64.s;
    return SP_OK;
}

/* Encode one drawn frame once, then keep it. */
static int emit_thumb(const char *dir, const sp_canvas *cv, int64_t idx, thumbs *th, sp_error *err)
{
    char path[4200];
    unsigned char *png = NULL;
    size_t np = 0;
    snprintf(path, sizeof path, "%s/overlays/frame_%05lld.png", dir, (long long)idx);
    int rc = sp_canvas_png(cv, &png, &np, path, err);
    if (rc)
        return rc;
    rc = keep_thumb(path, png, np, idx, th, err);
    free(png);
    return rc;
}

typedef struct drawn {
    char path[4200];
    unsigned char *png;
    size_t n;
    int rc;
    sp_error err;
} drawn;

/* The frame the caller already holds for index idx, or NULL. */
static const sp_image *given_frame(const sp_report_opts *o, int64_t idx)
{
    for (int i = 0; i < o->ngiven; i++)
        if (o->given_index[i] == idx && o->given_frames[i])
            return o->given_frames[i];
    return NULL;
}

static int make_overlays(rdata *r, const sp_report_opts *o, thumbs *th, sp_report_result *res, sp_error *err)
{
    int rc = SP_OK;
    sp_overlay_data od;
    sp_source *src = NULL;
    sp_video_writer *vw = NULL;
    sp_image img = {0};
    sp_canvas cv = {0};
    char input[4096], path[4200], vtmp[4200];
    int explicit = (o->frames && o->nframes > 0) || o->video;
    int64_t want[MAX_FRAMES_ASKED];
    int nwant = 0;
    vtmp[0] = 0;

    rc = sp_overlay_load(r->dir, &od, err);
    if (rc)
        return rc;
    sp_overlay_opts oo;
    sp_overlay_opts_default(&oo);
    if (o->trail >= 0)
        oo.trail = o->trail;
    if (o->focus_contrast > 0)
        oo.focus_contrast = o->focus_contrast;

    const json_t *in = json_object_get(r->sum, "input");
    const char *given = o->input ? o->input : jstr(in, "path");
    if (!resolve_input(r->dir, given, input, sizeof input)) {
        if (explicit) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: recording not found (use --input to name it)",
                              given ? given : "summary.json input.path");
            goto done;
        }
        snprintf(res->overlay_note, sizeof res->overlay_note, "No overlays: the recording %s was not found.",
                 given ? given : "(none named)");
        goto done;
    }

    /* Frames to draw. */
    if (o->frames && o->nframes > 0) {
        for (int i = 0; i < o->nframes && nwant < MAX_FRAMES_ASKED; i++)
            if (o->frames[i] >= 0)
                want[nwant++] = o->frames[i];
    } else if (r->has_frames && r->frames.found[F_FRAME] && r->frames.nrows > 0) {
        /* Evenly over the frames analysed (frames.csv rows), empty ones included: a frame without
         * bubbles is evidence too. */
        int k = o->thumbnails > 0 ? o->thumbnails : 0;
        if (k > MAX_FRAMES_ASKED)
            k = MAX_FRAMES_ASKED;
        size_t nr = r->frames.nrows;
        for (int i = 0; i < k; i++) {
            size_t row = sp_report_thumb_row(nr, k, i);
            double fv = r->frames.col[F_FRAME][row];
            if (!(fv >= 0 && fv < 1e15))
                continue;
            int64_t f = (int64_t)fv;
            if (!nwant || f != want[nwant - 1])
                want[nwant++] = f;
        }
    } else {
        int64_t f0, f1;
        size_t nf;
        sp_overlay_frames(&od, &f0, &f1, &nf);
        int k = o->thumbnails > 0 ? o->thumbnails : 0;
        if (k > MAX_FRAMES_ASKED)
            k = MAX_FRAMES_ASKED;
        for (int i = 0; i < k && f0 >= 0; i++) {
            int64_t f = k == 1 ? f0 : f0 + (int64_t)((double)(f1 - f0) * i / (k - 1) + 0.5);
            if (!nwant || f != want[nwant - 1])
                want[nwant++] = f;
        }
    }
    qsort(want, (size_t)nwant, sizeof want[0], cmp_i64);

    /* Frames the caller kept in memory spare a second read of the recording. */
    int covered = !o->video && nwant > 0;
    for (int i = 0; covered && i < nwant; i++)
        covered = given_frame(o, want[i]) != NULL;
    if (covered) {
        snprintf(path, sizeof path, "%s/overlays", r->dir);
        if ((rc = sp_outdir_prepare(path, err)))
            goto done;
        /* Drawn and encoded in parallel (deflate dominates), written in order. */
        drawn *dr = calloc((size_t)nwant, sizeof *dr);
        if (!dr) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", r->dir);
            goto done;
        }
#pragma omp parallel for schedule(dynamic, 1)
        for (int i = 0; i < nwant; i++) {
            drawn *q = &dr[i];
            snprintf(q->path, sizeof q->path, "%s/overlays/frame_%05lld.png", r->dir, (long long)want[i]);
            sp_canvas c = {0};
            q->rc = sp_canvas_from_image(&c, given_frame(o, want[i]), &q->err);
            if (!q->rc) {
                sp_overlay_draw(&od, want[i], &c, &oo);
                q->rc = sp_canvas_png(&c, &q->png, &q->n, q->path, &q->err);
            }
            sp_canvas_free(&c);
        }
        for (int i = 0; i < nwant && !rc; i++) {
            if ((rc = dr[i].rc))
                *err = dr[i].err;
            else
                rc = keep_thumb(dr[i].path, dr[i].png, dr[i].n, want[i], th, err);
        }
        for (int i = 0; i < nwant; i++)
            free(dr[i].png);
        free(dr);
        if (!rc)
            res->overlays = th->n;
        goto done;
    }

    sp_source_opts so;
    sp_source_opts_default(&so);
    const char *kind = jstr(in, "kind");
    double fps = jnum(r->sum, "fps");
    if ((kind && strcmp(kind, "stills") == 0) ||
        jnum(json_object_get(r->sum, "settings"), "fps_override") > 0)
        so.fps = fps > 0 ? fps : 1;
    rc = sp_source_open(&src, input, &so, err);
    if (rc) {
        if (explicit)
            goto done;
        snprintf(res->overlay_note, sizeof res->overlay_note, "No overlays: %s", err->msg);
        sp_error_clear(err);
        rc = SP_OK;
        goto done;
    }
    const sp_source_info *info = sp_source_get_info(src);
    if (nwant) {
        snprintf(path, sizeof path, "%s/overlays", r->dir);
        rc = sp_outdir_prepare(path, err);
        if (rc)
            goto done;
    }
    if (o->video) {
        sp_video_writer_opts vo = {o->video_codec, info->fps > 0 ? info->fps : (fps > 0 ? fps : 25), 0};
        snprintf(res->video_path, sizeof res->video_path, "%s/overlay.mkv", r->dir);
        snprintf(vtmp, sizeof vtmp, "%s/.overlay.tmp.mkv", r->dir);
        rc = sp_video_writer_open(&vw, vtmp, info->width, info->height, 3, &vo, err);
        if (rc)
            goto done;
    }
    int wi = 0;
    for (;;) {
        if (!vw && wi >= nwant)
            break;
        int64_t idx;
        double t;
        int got;
        rc = sp_source_next(src, &img, &idx, &t, &got, err);
        if (rc)
            goto done;
        if (!got)
            break;
        while (wi < nwant && want[wi] < idx)
            wi++; /* asked for a frame the recording does not have */
        int thumb = wi < nwant && want[wi] == idx;
        if (!vw && !thumb)
            continue;
        rc = sp_canvas_from_image(&cv, &img, err);
        if (rc)
            goto done;
        sp_overlay_draw(&od, idx, &cv, &oo);
        if (thumb) {
            if ((rc = emit_thumb(r->dir, &cv, idx, th, err)))
                goto done;
            wi++;
        }
        if (vw) {
            rc = sp_video_writer_put_rgb(vw, cv.rgb, (ptrdiff_t)cv.w * 3, err);
            if (rc)
                goto done;
        }
    }
    if (vw) {
        sp_video_writer *v = vw;
        vw = NULL;
        rc = sp_video_writer_close(v, err);
        if (rc)
            goto done;
        if (rename(vtmp, res->video_path) != 0) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", res->video_path,
                              strerror(errno));
            goto done;
        }
        vtmp[0] = 0;
        res->video = 1;
    }
    res->overlays = th->n;

done:
    if (vw) {
        sp_error e2;
        sp_video_writer_close(vw, &e2);
    }
    if (vtmp[0])
        remove(vtmp);
    if (rc)
        res->video_path[0] = 0;
    sp_source_close(src);
    sp_image_free(&img);
    sp_canvas_free(&cv);
    sp_overlay_free(&od);
    return rc;
}

/* ---------------------------------------------------------------- page */

static const char *css =
    "body{font-family:system-ui,-apple-system,'Segoe UI',Helvetica,Arial,sans-serif;margin:0 auto;"
    "max-width:1280px;padding:0 20px 40px;color:#222;line-height:1.4}"
    "h1{margin-top:18px}h2{border-bottom:2px solid #0072b2;padding-bottom:3px;margin-top:30px}"
    "table{border-collapse:collapse;margin:8px 0 16px;font-size:13px}"
    "th,td{border:1px solid #ccc;padding:3px 8px;text-align:left}td{font-variant-numeric:tabular-nums}"
    "table.data td{text-align:right}caption{text-align:left;font-weight:bold;padding:4px 0}"
    "table.kv th{background:#f4f6f8;font-weight:normal;font-family:monospace}"
    ".figs{display:flex;flex-wrap:wrap;gap:16px}figure.fig{margin:0;border:1px solid #ddd;padding:6px;"
    "background:#fff}figcaption{font-size:12px;color:#444;max-width:520px}"
    ".thumbs{display:flex;flex-wrap:wrap;gap:12px}.thumb{margin:0;max-width:600px}"
    ".thumb img{max-width:100%;border:1px solid #999;image-rendering:auto}"
    ".absent{color:#777;font-style:italic}.note{color:#555;font-size:12px}"
    ".safety{background:#fff6e0;border-left:5px solid #e69f00;padding:8px 14px}"
    ".cols{display:flex;flex-wrap:wrap;gap:24px;align-items:flex-start}";

static void safety(sp_sbuf *h)
{
    sp_sbuf_puts(
        h,
        "<h2 id=\"safety\">Safety</h2>\n<div class=\"safety\">\n<p>These notes cover hazards common to "
        "shadowgraph bubble experiments. They are reminders, not a risk assessment: follow your "
        "institution's rules and your laboratory's own safety practice, which take precedence.</p>\n<ul>\n"
        "<li><b>Backlight lamps and LED panels:</b> high-power LED and arc sources are bright enough to "
        "injure the eye and get hot; do not look into them, shield them, and keep them away from liquid "
        "splashes and flammable material. Mains-powered lights near water need protection against "
        "electric shock (residual-current devices, sealed fittings).</li>\n"
        "<li><b>Lasers</b> (for illumination or sheet lighting): use only under your laboratory's laser "
        "rules, with the eyewear, enclosures and interlocks the laser's class requires.</li>\n"
        "<li><b>Pressurised and carbonated liquids:</b> bottles and vessels of carbonated drinks or "
        "gas-saturated liquids are under pressure and can burst or eject closures; open, vent and heat them "
        "only as local rules allow, with eye protection. Gas supplies need regulators and rated "
        "tubing.</li>\n"
        "<li><b>Glassware and columns:</b> glass under pressure, vacuum or thermal shock can break; inspect "
        "it for cracks, support tall columns against tipping, and clean up spills to avoid slips.</li>\n"
        "<li><b>Chemicals and gases:</b> surfactants, salts, glycerol solutions and gases other than air "
        "(CO2, nitrogen) have their own data sheets; ventilate for gas release.</li>\n"
        "</ul>\n</div>\n");
}

static int write_page(rdata *r, const sizes *sz, thumbs *th, sp_report_result *res, sp_error *err)
{
    sp_sbuf h = {0};
    int id = 1, rc;
    const json_t *sum = r->sum, *in = json_object_get(sum, "input");
    sp_sbuf_puts(
        &h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>spume report: ");
    const char *ip = jstr(in, "path");
    sp_sbuf_esc(&h, ip ? ip : r->dir);
    sp_sbuf_printf(&h, "</title>\n<style>%s</style>\n</head>\n<body>\n<h1>Bubble measurement report</h1>\n",
                   css);
    sp_sbuf_puts(&h, "<p class=\"note\">Made by spume " SP_VERSION " from the files in <code>");
    sp_sbuf_esc(&h, r->dir);
    sp_sbuf_puts(
        &h, "</code>. Everything on this page is in this one file; nothing is loaded from elsewhere.</p>\n");

    /* Counts. */
    sp_sbuf_puts(&h,
                 "<h2 id=\"summary\">Summary</h2>\n<div class=\"cols\">\n<table class=\"kv\" id=\"counts\">\n"
                 "<caption>Counts and means</caption>\n");
    kv_num(&h, "frames", res->frames, "");
    kv_num(&h, "detections", res->detections, "");
    kv_num(&h, "tracks", res->tracks, "");
    kv_num(&h, "nucleation sites", res->sites, "");
    if (r->has_pairs)
        kv_num(&h, "acoustic pairs", res->pairs, "");
    kv_num(&h, "frame rate", res->fps, "frames/s");
    kv_num(&h, "time span", jnum(sum, "t_last_s") - jnum(sum, "t_first_s"), "s");
    kv_num(&h, "holdup (mean projected gas fraction)", res->holdup, "");
    const char *basis = res->size_basis_tracks ? " (per track)" : " (per detection)";
    char k1[64];
    snprintf(k1, sizeof k1, "d10%s", basis);
    kv_num(&h, k1, res->d10_mm, "mm");
    snprintf(k1, sizeof k1, "d32 Sauter%s", basis);
    kv_num(&h, k1, res->d32_mm, "mm");
    snprintf(k1, sizeof k1, "d43%s", basis);
    kv_num(&h, k1, res->d43_mm, "mm");
    sp_sbuf_puts(&h, "</table>\n");
    res->tables++;
    sp_sbuf_puts(&h, "<table class=\"kv\" id=\"calibration\">\n<caption>Calibration and liquid</caption>\n");
    const json_t *cal = json_object_get(sum, "calibrated");
    kv_num(&h, "scale", res->mm_per_px, "mm/px");
    kv_row(&h, "calibrated", json_is_false(cal) ? "no: millimetre columns hold pixels" : "yes");
    const json_t *calo = json_object_get(sum, "calibration");
    if (json_is_object(calo))
        json_rows(&h, calo, "calibration", 1);
    kv_row(&h, "liquid for the correlations", r->liquid_note);
    kv_num(&h, "liquid density", r->liquid.rho_kg_m3, "kg/m³");
    kv_num(&h, "liquid viscosity", r->liquid.mu_pa_s, "Pa·s");
    kv_num(&h, "surface tension", r->liquid.sigma_n_m, "N/m");
    sp_sbuf_puts(&h, "</table>\n</div>\n");
    res->tables++;

    /* Overlays. */
    sp_sbuf_puts(&h, "<h2 id=\"overlays\">Detections drawn on the frames</h2>\n");
    legend_svg(&h);
    if (th->n) {
        sp_sbuf_puts(&h, "<div class=\"thumbs\">\n");
        for (int i = 0; i < th->n; i++) {
            sp_sbuf_printf(&h,
                           "<figure class=\"thumb\"><img alt=\"frame %lld with detections\" "
                           "src=\"data:image/png;base64,",
                           (long long)th->frame[i]);
            sp_sbuf_puts(&h, th->uri[i]);
            sp_sbuf_printf(&h,
                           "\"><figcaption>frame %lld (overlays/frame_%05lld.png)</figcaption></figure>\n",
                           (long long)th->frame[i], (long long)th->frame[i]);
        }
        sp_sbuf_puts(&h, "</div>\n");
    } else {
        absent(&h, res->overlay_note[0] ? res->overlay_note : "No overlays were drawn.");
    }
    if (res->video)
        sp_sbuf_puts(
            &h, "<p class=\"note\">Every frame annotated: <code>overlay.mkv</code> (lossless FFV1) beside "
                "this file.</p>\n");

    /* Plots. */
    sp_sbuf_puts(&h, "<h2 id=\"sizes\">Size distribution</h2>\n<div class=\"figs\">\n");
    if (sz->n) {
        plot_hist(&h, &id, sz, 0, NULL);
        plot_hist(&h, &id, sz, 3, NULL);
        res->plots += 2;
    } else {
        absent(&h, "No diameters to plot.");
    }
    sp_sbuf_puts(&h, "</div>\n<h2 id=\"dynamics\">Rise and shape</h2>\n<div class=\"figs\">\n");
    if (r->has_tracks && r->tracks.nrows && r->tracks.found[T_D] && r->tracks.found[T_VY]) {
        plot_rise(&h, &id, r, res);
        if (r->tracks.found[T_ASPECT])
            plot_aspect(&h, &id, r, res);
    } else {
        absent(&h, "No tracks.csv (or no tracks in it): rise velocity and shape plots need tracks.");
    }
    sp_sbuf_puts(&h, "</div>\n<h2 id=\"holdup\">Gas holdup</h2>\n<div class=\"figs\">\n");
    if (r->has_frames && r->frames.nrows && r->frames.found[F_T] && r->frames.found[F_GAS])
        plot_holdup(&h, &id, r, res);
    else
        absent(&h, "No frames.csv with t_s and gas_fraction.");
    sp_sbuf_puts(&h, "</div>\n<h2 id=\"sites\">Nucleation sites</h2>\n<div class=\"figs\">\n");
    int have_sites = r->has_sites && r->sites.nrows && r->has_tracks && r->tracks.found[T_SITE] &&
                     r->tracks.found[T_TFIRST] && r->tracks.found[T_TRACK] && r->bub.found[B_TRACK] &&
                     r->bub.found[B_T] && r->bub.found[B_D];
    if (have_sites)
        plot_sites(&h, &id, r, res);
    else
        absent(&h, "No sites.csv (or no sites in it).");
    sp_sbuf_puts(&h, "</div>\n");
    if (have_sites) {
        static const int dg[S_NN] = {0, 3, 3, 0, 3, 3, 3};
        csv_table(&h, "sites.csv", &r->sites, scols, dg, res);
    }
    sp_sbuf_puts(&h, "<h2 id=\"acoustic\">Acoustic cross-check</h2>\n<div class=\"figs\">\n");
    if (r->has_pairs && r->pairs.nrows && r->pairs.found[P_DO] && r->pairs.found[P_DA])
        plot_pairs(&h, &id, r, res);
    else
        absent(&h, "No pairs.csv: run spume crosscheck DIR --audio AUDIO to compare with a hydrophone.");
    sp_sbuf_puts(&h, "</div>\n");

    if (r->has_tracks && r->tracks.nrows) {
        sp_sbuf_puts(&h, "<h2 id=\"tracks\">Tracks</h2>\n");
        static const int dg[T_NN] = {0, 3, 1, 3, 3, 0, 4, 0, 1};
        csv_table(&h, "tracks.csv (selected columns)", &r->tracks, tcols, dg, res);
    }

    sp_sbuf_puts(&h, "<h2 id=\"run\">Input and settings</h2>\n<div class=\"cols\">\n");
    json_table(&h, "Input (summary.json input)", in, res);
    json_table(&h, "Settings (summary.json settings)", json_object_get(sum, "settings"), res);
    json_table(&h, "Region (summary.json region)", json_object_get(sum, "region"), res);
    sp_sbuf_puts(&h, "</div>\n");
    safety(&h);
    sp_sbuf_puts(&h, "</body>\n</html>\n");

    if (h.failed) {
        sp_sbuf_free(&h);
        return sp_error_set(err, SP_ERR_INTERNAL, "%s/report.html: out of memory", r->dir);
    }
    sp_outfile of;
    rc = sp_outfile_open(&of, r->dir, "report.html", err);
    if (!rc) {
        if (fwrite(h.s, 1, h.len, of.f) != h.len) {
            sp_outfile_abort(&of);
            rc = sp_error_set(err, SP_ERR_INPUT, "%s/report.html: write failed", r->dir);
        } else {
            rc = sp_outfile_commit(&of, err);
        }
    }
    if (!rc)
        snprintf(res->html, sizeof res->html, "%s", of.final);
    sp_sbuf_free(&h);
    return rc;
}

int sp_report_build(const char *dir, const sp_report_opts *opts, sp_error *err)
{
    int rc;
    rdata r;
    sizes sz = {0};
    sp_report_result local, *res = opts && opts->result ? opts->result : &local;
    sp_report_opts o;
    thumbs *th = calloc(1, sizeof *th);
    if (opts)
        o = *opts;
    else
        sp_report_opts_default(&o);
    memset(res, 0, sizeof *res);
    memset(&r, 0, sizeof r);
    r.dir = dir;
    if (!th)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", dir);

    rc = load_summary(&r, err);
    if (rc)
        goto done;
    load_liquid(&r);
    rc = sp_table_read(dir, "bubbles.csv", bcols, B_NN, &r.bub, NULL, err);
    if (rc)
        goto done;
    if ((rc = sp_table_read(dir, "frames.csv", fcols, F_N, &r.frames, &r.has_frames, err)) ||
        (rc = sp_table_read(dir, "tracks.csv", tcols, T_NN, &r.tracks, &r.has_tracks, err)) ||
        (rc = sp_table_read(dir, "sites.csv", scols, S_NN, &r.sites, &r.has_sites, err)) ||
        (rc = sp_table_read(dir, "pairs.csv", pcols, P_NN, &r.pairs, &r.has_pairs, err)))
        goto done;

    res->frames = (int64_t)jnum(r.sum, "frames");
    res->detections = (int64_t)r.bub.nrows;
    res->tracks = r.has_tracks ? (int64_t)r.tracks.nrows : 0;
    res->sites = r.has_sites ? (int64_t)r.sites.nrows : 0;
    res->pairs = r.has_pairs ? (int64_t)r.pairs.nrows : 0;
    res->fps = jnum(r.sum, "fps");
    res->mm_per_px = jnum(r.sum, "mm_per_px");
    res->holdup = jnum(r.sum, "holdup");
    rc = collect_sizes(&r, &sz, err);
    if (rc)
        goto done;
    res->size_basis_tracks = sz.per_track;
    res->d10_mm = res->d32_mm = res->d43_mm = NAN;
    if (sz.n) {
        sp_error e;
        sp_size_moment_mean(sz.d, sz.n, 1, 0, &res->d10_mm, &e);
        sp_size_moment_mean(sz.d, sz.n, 3, 2, &res->d32_mm, &e);
        sp_size_moment_mean(sz.d, sz.n, 4, 3, &res->d43_mm, &e);
    }
    rc = make_overlays(&r, &o, th, res, err);
    if (rc)
        goto done;
    rc = write_page(&r, &sz, th, res, err);

done:
    for (int i = 0; i < th->n; i++)
        free(th->uri[i]);
    free(th);
    free(sz.d);
    rdata_free(&r);
    return rc;
}

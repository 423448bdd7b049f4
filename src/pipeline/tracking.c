/* Tracking at run level: linker → kinematics → correlations, then sites and size statistics. */
#include "pipeline/tracking.h"

#include "physics/correlations.h"
#include "stats/sizestats.h"
#include "track/kinematics.h"
#include "track/linker.h"
#include "track/sites.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

/* What is kept of an ended track: its kinematics, whether its first sighting was a birth, and the
 * correlations for its diameter. */
typedef struct trackrec {
    sp_kinematics k;
    int born_inside;
    int first_edge;
    double d_last_mm; /* diameter at the last clean detection (gas it carries out of view) */
    sp_rise_predictions pred;
    int site;
    double in_focus_frac; /* share of its detections in focus */
} trackrec;

struct sp_trackrun {
    sp_trackrun_opts o;
    sp_liquid liquid;
    int has_liquid;
    sp_linker *lk;
    sp_link_det *dets;
    int dets_cap;
    trackrec *rec;
    size_t n, cap;
    sp_sites sites;
    int have_sites;
    /* Per track id: detections and how many were in focus, until the track ends. */
    int32_t *nfocus, *ndet;
    size_t idcap;
};

void sp_trackrun_free(sp_trackrun *tr)
{
    if (!tr)
        return;
    sp_linker_free(tr->lk);
    free(tr->dets);
    free(tr->rec);
    free(tr->nfocus);
    free(tr->ndet);
    if (tr->have_sites)
        sp_sites_free(&tr->sites);
    free(tr);
}

int sp_trackrun_new(sp_trackrun **out, const sp_trackrun_opts *o, sp_error *err)
{
    *out = NULL;
    sp_trackrun *tr = calloc(1, sizeof *tr);
    if (!tr)
        return sp_error_set(err, SP_ERR_INTERNAL, "tracking: out of memory");
    tr->o = *o;
    if (o->liquid) {
        tr->liquid = *o->liquid;
        tr->has_liquid = 1;
    }
    sp_linker_opts lo;
    sp_linker_opts_default(&lo);
    lo.fps_hint = o->fps > 0 ? o->fps : 0;
    if (o->max_gap >= 0)
        lo.max_gap = o->max_gap;
    int rc = sp_linker_new(&tr->lk, &lo, err);
    if (rc) {
        free(tr);
        return rc;
    }
    *out = tr;
    return SP_OK;
}

static void unknown_predictions(sp_rise_predictions *p)
{
    memset(p, 0, sizeof *p);
    p->mendelson_m_s = p->tomiyama_pure_m_s = p->tomiyama_slight_m_s = p->tomiyama_full_m_s = NAN;
    p->davies_taylor_m_s = p->stokes_m_s = p->hadamard_m_s = NAN;
    p->aspect_wellek = p->aspect_aoyama = NAN;
    p->groups.re = p->groups.eo = p->groups.we = p->groups.mo = NAN;
}

static int drain(sp_trackrun *tr, sp_error *err)
{
    sp_track *t;
    while (sp_linker_pop_ended(tr->lk, &t) == 1) {
        if (tr->n == tr->cap) {
            size_t nc = tr->cap ? 2 * tr->cap : 256;
            trackrec *r = realloc(tr->rec, nc * sizeof *r);
            if (!r) {
                sp_track_free(t);
                return sp_error_set(err, SP_ERR_INTERNAL, "tracking: out of memory for %zu tracks", nc);
            }
            tr->rec = r;
            tr->cap = nc;
        }
        trackrec *r = &tr->rec[tr->n];
        memset(r, 0, sizeof *r);
        int rc = sp_kinematics_compute(t, tr->o.mm_per_px, tr->o.full_height, &r->k, err);
        if (rc) {
            sp_track_free(t);
            return rc;
        }
        /* The linker works in region coordinates; tables use the frame's. */
        double s = tr->o.mm_per_px > 0 ? tr->o.mm_per_px : 1.0;
        r->k.x_birth_mm += tr->o.roi_x * s;
        r->k.y_birth_mm -= tr->o.roi_y * s;
        r->first_edge = t->pts[0].edge;
        r->in_focus_frac = (size_t)t->id < tr->idcap && tr->ndet[t->id] > 0
                               ? (double)tr->nfocus[t->id] / tr->ndet[t->id]
                               : 1.0;
        /* A birth: first seen away from the border, and not already in view when the run began. */
        r->born_inside = !t->pts[0].edge && t->pts[0].frame > tr->o.first_frame;
        r->d_last_mm = NAN;
        for (int i = t->n - 1; i >= 0; i--)
            if (!t->pts[i].edge) {
                r->d_last_mm = t->pts[i].d_px * s;
                break;
            }
        if (tr->has_liquid && tr->o.mm_per_px > 0 && isfinite(r->k.d_vol_mm))
            sp_rise_predict(&tr->liquid, r->k.d_vol_mm * 1e-3,
                            isfinite(r->k.speed_mm_s) ? r->k.speed_mm_s * 1e-3 : 0, &r->pred);
        else
            unknown_predictions(&r->pred); /* no scale, no physics */
        tr->n++;
        sp_track_free(t);
    }
    return SP_OK;
}

int sp_trackrun_frame(sp_trackrun *tr, int64_t frame, double t_s, const sp_bubble *b, int n, int64_t *ids,
                      sp_error *err)
{
    if (n > tr->dets_cap) {
        sp_link_det *d = realloc(tr->dets, sizeof *d * (size_t)n);
        if (!d)
            return sp_error_set(err, SP_ERR_INTERNAL, "tracking: out of memory");
        tr->dets = d;
        tr->dets_cap = n;
    }
    /* An unsplit cluster is no bubble's true outline: link it like one cut by the border. */
    for (int i = 0; i < n; i++)
        tr->dets[i] = (sp_link_det){b[i].x,
                                    b[i].y,
                                    b[i].d_vol_px,
                                    b[i].aspect,
                                    b[i].tilt_deg,
                                    b[i].area_px,
                                    b[i].edge || b[i].cluster};
    int rc = sp_linker_push(tr->lk, frame, t_s, tr->dets, n, ids, err);
    if (rc)
        return rc;
    for (int i = 0; i < n; i++) {
        size_t id = (size_t)ids[i];
        if (id >= tr->idcap) {
            size_t nc = tr->idcap ? tr->idcap : 1024;
            while (nc <= id)
                nc *= 2;
            int32_t *a = realloc(tr->nfocus, nc * sizeof *a);
            if (!a)
                return sp_error_set(err, SP_ERR_INTERNAL, "tracking: out of memory");
            tr->nfocus = a;
            int32_t *c = realloc(tr->ndet, nc * sizeof *c);
            if (!c)
                return sp_error_set(err, SP_ERR_INTERNAL, "tracking: out of memory");
            tr->ndet = c;
            memset(tr->nfocus + tr->idcap, 0, (nc - tr->idcap) * sizeof *a);
            memset(tr->ndet + tr->idcap, 0, (nc - tr->idcap) * sizeof *c);
            tr->idcap = nc;
        }
        tr->ndet[id]++;
        tr->nfocus[id] += b[i].in_focus != 0;
    }
    return drain(tr, err);
}

static int by_id(const void *a, const void *b)
{
    int64_t x = ((const trackrec *)a)->k.id, y = ((const trackrec *)b)->k.id;
    return (x > y) - (x < y);
}

int sp_trackrun_finish(sp_trackrun *tr, sp_error *err)
{
    int rc = sp_linker_finish(tr->lk);
    if (rc)
        return sp_error_set(err, rc, "tracking: out of memory ending the tracks");
    if ((rc = drain(tr, err)))
        return rc;
    if (tr->n == 0)
        return SP_OK;
    qsort(tr->rec, tr->n, sizeof *tr->rec, by_id);

    /* Nucleation sites from the births. */
    sp_birth *bi = malloc(sizeof *bi * tr->n);
    if (!bi)
        return sp_error_set(err, SP_ERR_INTERNAL, "tracking: out of memory");
    for (size_t i = 0; i < tr->n; i++) {
        const sp_kinematics *k = &tr->rec[i].k;
        bi[i] = (sp_birth){k->id,         k->x_birth_mm,  k->y_birth_mm,         k->t_first_s,
                           k->d_first_mm, k->growth_mm_s, tr->rec[i].born_inside};
    }
    sp_sites_opts so;
    sp_sites_opts_default(&so);
    rc = sp_sites_find(bi, tr->n, &so, &tr->sites, err);
    free(bi);
    if (rc)
        return rc;
    tr->have_sites = 1;
    for (size_t i = 0; i < tr->n; i++)
        tr->rec[i].site = tr->sites.track_site[i];
    return SP_OK;
}

size_t sp_trackrun_count(const sp_trackrun *tr)
{
    return tr->n;
}

/* A number, or an empty field when unknown. */
static void num(FILE *f, const char *fmt, double v)
{
    fputc(',', f);
    if (isfinite(v))
        fprintf(f, fmt, v);
}

void sp_trackrun_write_tracks(const sp_trackrun *tr, FILE *f)
{
    fputs(
        "track,frame_first,frame_last,n,d_vol_mm,growth_mm_s,vx_mm_s,vy_mm_s,speed_mm_s,site,"
        "t_first_s,t_last_s,x_first_mm,y_first_mm,d_first_mm,n_clean,vx_se_mm_s,vy_se_mm_s,ax_mm_s2,ay_mm_s2,"
        "growth_se_mm_s,osc_amp_mm,osc_hz,aspect_mean,tilt_mean_deg,re,eo,we,u_mendelson_mm_s,"
        "u_tomiyama_pure_mm_s,u_tomiyama_slight_mm_s,u_tomiyama_full_mm_s,aspect_wellek,aspect_aoyama,"
        "in_focus_frac\n",
        f);
    for (size_t i = 0; i < tr->n; i++) {
        const trackrec *r = &tr->rec[i];
        const sp_kinematics *k = &r->k;
        const sp_rise_predictions *p = &r->pred;
        fprintf(f, "%lld,%lld,%lld,%d", (long long)k->id, (long long)k->frame_first, (long long)k->frame_last,
                k->n);
        num(f, "%.6g", k->d_vol_mm);
        num(f, "%.6g", k->growth_mm_s);
        num(f, "%.6g", k->vx_mm_s);
        num(f, "%.6g", k->vy_mm_s);
        num(f, "%.6g", k->speed_mm_s);
        fprintf(f, ",%d", r->site);
        num(f, "%.6f", k->t_first_s);
        num(f, "%.6f", k->t_last_s);
        num(f, "%.6g", k->x_birth_mm);
        num(f, "%.6g", k->y_birth_mm);
        num(f, "%.6g", k->d_first_mm);
        fprintf(f, ",%d", k->n_clean);
        num(f, "%.4g", k->vx_se_mm_s);
        num(f, "%.4g", k->vy_se_mm_s);
        num(f, "%.6g", k->ax_mm_s2);
        num(f, "%.6g", k->ay_mm_s2);
        num(f, "%.4g", k->growth_se_mm_s);
        num(f, "%.4g", k->osc_amp_mm);
        num(f, "%.4g", k->osc_freq_hz);
        num(f, "%.4f", k->aspect_mean);
        num(f, "%.2f", k->tilt_mean_deg);
        num(f, "%.5g", p->groups.re);
        num(f, "%.5g", p->groups.eo);
        num(f, "%.5g", p->groups.we);
        num(f, "%.6g", p->mendelson_m_s * 1e3);
        num(f, "%.6g", p->tomiyama_pure_m_s * 1e3);
        num(f, "%.6g", p->tomiyama_slight_m_s * 1e3);
        num(f, "%.6g", p->tomiyama_full_m_s * 1e3);
        num(f, "%.4f", p->aspect_wellek);
        num(f, "%.4f", p->aspect_aoyama);
        num(f, "%.3f", r->in_focus_frac);
        fputc('\n', f);
    }
}

void sp_trackrun_write_sites(const sp_trackrun *tr, FILE *f)
{
    fputs("site,x_mm,y_mm,n,rate_hz,d_detach_mm,growth_mm_s,interval_cv,t_first_s,t_last_s,spread_mm\n", f);
    if (!tr->have_sites)
        return;
    for (size_t i = 0; i < tr->sites.nsites; i++) {
        const sp_site *s = &tr->sites.site[i];
        fprintf(f, "%d", s->id);
        num(f, "%.6g", s->x_mm);
        num(f, "%.6g", s->y_mm);
        fprintf(f, ",%lld", (long long)s->n);
        num(f, "%.6g", s->rate_hz);
        num(f, "%.6g", s->d_detach_mm);
        num(f, "%.6g", s->growth_mm_s);
        num(f, "%.4f", s->interval_cv);
        num(f, "%.6f", s->t_first_s);
        num(f, "%.6f", s->t_last_s);
        num(f, "%.4g", s->spread_mm);
        fputc('\n', f);
    }
}

static void ci(sp_jsonw *j, const char *key, const sp_ci *c)
{
    sp_jsonw_key(j, key);
    sp_jsonw_obj(j);
    sp_jsonw_knum(j, "estimate", c->est);
    sp_jsonw_knum(j, "low", c->lo);
    sp_jsonw_knum(j, "high", c->hi);
    sp_jsonw_obj_end(j);
}

int sp_trackrun_write_summary(const sp_trackrun *tr, sp_jsonw *j, const sp_stats_opts *o,
                              double holdup_volume, sp_error *err)
{
    /* One diameter per track: its median d_vol over rows clear of the border. */
    double *d = malloc(sizeof *d * (tr->n ? tr->n : 1));
    if (!d)
        return sp_error_set(err, SP_ERR_INTERNAL, "statistics: out of memory");
    size_t nd = 0;
    size_t defocused = 0;
    for (size_t i = 0; i < tr->n; i++) {
        if (!(isfinite(tr->rec[i].k.d_vol_mm) && tr->rec[i].k.d_vol_mm > 0))
            continue;
        if (tr->rec[i].in_focus_frac < 0.5 && !tr->o.keep_defocused) {
            defocused++;
            continue;
        }
        d[nd++] = tr->rec[i].k.d_vol_mm;
    }
    sp_size_summary sum;
    int have = nd > 0 && sp_size_summarise(d, nd, &sum, NULL) == SP_OK;
    sp_jsonw_knum(j, "d10_mm", have ? sum.d10 : NAN);
    sp_jsonw_knum(j, "d32_mm", have ? sum.d32 : NAN);
    sp_jsonw_knum(j, "d43_mm", have ? sum.d43 : NAN);

    sp_jsonw_key(j, "statistics");
    sp_jsonw_obj(j);
    sp_jsonw_kstr(j, "basis",
                  "one diameter per track: median d_vol over its detections clear of the border and "
                  "of unsplit clusters; tracks mostly out of focus left out unless kept");
    sp_jsonw_kint(j, "tracks_used", (int64_t)nd);
    sp_jsonw_kint(j, "tracks_out_of_focus_left_out", (int64_t)defocused);
    if (have) {
        sp_jsonw_knum(j, "d30_mm", sum.d30);
        sp_jsonw_knum(j, "d50_mm", sum.d50);
        sp_jsonw_knum(j, "dv10_mm", sum.dv10);
        sp_jsonw_knum(j, "dv50_mm", sum.dv50);
        sp_jsonw_knum(j, "dv90_mm", sum.dv90);
        if (isfinite(holdup_volume)) {
            sp_jsonw_knum(j, "holdup_volume", holdup_volume);
            sp_jsonw_knum(j, "interfacial_area_per_m", sp_interfacial_area(holdup_volume, sum.d32 * 1e-3));
        }
        if (o->boot > 0 && nd >= 2) {
            sp_boot_opts bo;
            sp_boot_opts_default(&bo);
            bo.replicates = o->boot;
            bo.threads = o->threads;
            sp_size_boot bs;
            if (sp_size_bootstrap(d, nd, &bo, &bs, NULL, NULL) == SP_OK) {
                sp_jsonw_key(j, "bootstrap");
                sp_jsonw_obj(j);
                sp_jsonw_kint(j, "replicates", bo.replicates);
                sp_jsonw_knum(j, "confidence", bo.conf);
                ci(j, "d10_mm", &bs.d10);
                ci(j, "d32_mm", &bs.d32);
                ci(j, "d43_mm", &bs.d43);
                ci(j, "dv50_mm", &bs.dv50);
                sp_jsonw_obj_end(j);
            }
        }
        /* Histograms, number and volume weighted, over chosen or data-driven edges. */
        int nb = o->bins > 0 ? o->bins : 20;
        double lo = o->bin_lo_mm, hi = o->bin_hi_mm;
        if (!(hi > lo)) {
            lo = d[0];
            hi = d[0];
            for (size_t i = 1; i < nd; i++) {
                lo = d[i] < lo ? d[i] : lo;
                hi = d[i] > hi ? d[i] : hi;
            }
            if (!(hi > lo))
                hi = lo * 1.01 + 1e-9;
        }
        if (o->bins_log && lo <= 0)
            lo = hi * 1e-3;
        double *edges = malloc(sizeof *edges * (size_t)(nb + 1));
        double *h0 = malloc(sizeof *h0 * (size_t)nb), *h3 = malloc(sizeof *h3 * (size_t)nb);
        if (edges && h0 && h3 && sp_hist_edges(lo, hi, nb, o->bins_log, edges, NULL) == SP_OK &&
            sp_size_hist(d, nd, edges, nb + 1, 0, h0, NULL, NULL) == SP_OK &&
            sp_size_hist(d, nd, edges, nb + 1, 3, h3, NULL, NULL) == SP_OK) {
            double t3 = 0;
            for (int i = 0; i < nb; i++)
                t3 += h3[i];
            sp_jsonw_key(j, "histogram");
            sp_jsonw_obj(j);
            sp_jsonw_kbool(j, "log_bins", o->bins_log);
            sp_jsonw_key(j, "edges_mm");
            sp_jsonw_arr(j);
            for (int i = 0; i <= nb; i++)
                sp_jsonw_num(j, edges[i]);
            sp_jsonw_arr_end(j);
            sp_jsonw_key(j, "count");
            sp_jsonw_arr(j);
            for (int i = 0; i < nb; i++)
                sp_jsonw_num(j, h0[i]);
            sp_jsonw_arr_end(j);
            sp_jsonw_key(j, "volume_fraction");
            sp_jsonw_arr(j);
            for (int i = 0; i < nb; i++)
                sp_jsonw_num(j, t3 > 0 ? h3[i] / t3 : NAN);
            sp_jsonw_arr_end(j);
            sp_jsonw_obj_end(j);
        }
        free(edges);
        free(h0);
        free(h3);
    }
    sp_jsonw_obj_end(j);

    /* Nucleation sites and the beverage-QC figures built on them. */
    sp_jsonw_key(j, "sites");
    sp_jsonw_obj(j);
    size_t ns = tr->have_sites ? tr->sites.nsites : 0;
    double rate = 0, flux = 0;
    int64_t born = 0;
    for (size_t i = 0; i < ns; i++)
        rate += tr->sites.site[i].rate_hz;
    for (size_t i = 0; i < tr->n; i++)
        if (tr->rec[i].site > 0) {
            born++;
            double dl = tr->rec[i].d_last_mm;
            if (isfinite(dl))
                flux += M_PI / 6.0 * dl * dl * dl;
        }
    sp_jsonw_kint(j, "active_sites", (int64_t)ns);
    sp_jsonw_kint(j, "tracks_from_sites", born);
    sp_jsonw_knum(j, "bubbles_per_s", rate);
    sp_jsonw_knum(j, "gas_volume_flux_mm3_s", o->duration_s > 0 ? flux / o->duration_s : NAN);
    sp_jsonw_kstr(j, "gas_volume_flux_basis",
                  "volume of each site-born bubble at its last detection clear of the border, over the run");
    sp_jsonw_obj_end(j);
    free(d);
    return SP_OK;
}

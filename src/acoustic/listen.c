#include "acoustic/listen.h"
#include "core/jsonw.h"
#include "core/outfile.h"
#include "io/audio.h"

#include <libavutil/mem.h>
#include <libavutil/sha.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>

#define BLOCK 8192 /* samples read per call */

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + ts.tv_nsec * 1e-9;
}

void sp_listen_settings_default(sp_listen_settings *s)
{
    memset(s, 0, sizeof *s);
    s->channel = 0;
    s->r_min_mm = 0.2;
    s->r_max_mm = 5.0;
    s->nyquist_frac = 0.4;
    s->temp_c = 20;
    sp_bubble_medium_default(&s->medium);
    sp_ping_opts_default(&s->ping);
    snprintf(s->liquid, sizeof s->liquid, "water");
    snprintf(s->liquid_file, sizeof s->liquid_file, "built-in");
    snprintf(s->gas, sizeof s->gas, "air");
}

/* Gas properties near 20 C and 1 atm (common handbook values, from memory): ratio of specific heats,
 * thermal conductivity with a power-law temperature factor (T / 293.15 K)^k_exp, isobaric specific
 * heat. Air gives D = k / (rho c_p) = 2.12e-5 m^2/s at 20 C, the value REFERENCES.md uses. */
static const struct gas {
    const char *name;
    double molar_kg_mol, gamma, k_w_mk, k_exp, cp_j_kgk;
} gases[] = {
    {"air", SP_M_AIR, 1.400, 0.0257, 0.8, 1005.0},
    {"co2", SP_M_CO2, 1.289, 0.0162, 1.4, 843.0},
};

int sp_listen_use_liquid(sp_listen_settings *s, const sp_liquid *l, const char *what, sp_error *err)
{
    const struct gas *g = NULL;
    for (size_t i = 0; i < sizeof gases / sizeof gases[0]; i++)
        if (fabs(l->gas_molar_kg_mol / gases[i].molar_kg_mol - 1) < 0.01)
            g = &gases[i];
    if (!g)
        return sp_error_set(err, SP_ERR_INPUT,
                            "%s: bubble gas of molar mass %g kg/mol has no acoustic properties here "
                            "(air or CO2 only)",
                            what, l->gas_molar_kg_mol);
    /* The gas density at depth sets the thermal diffusivity: a deeper bubble is denser, so heat
     * diffuses less far per cycle and the oscillation is closer to adiabatic (Prosperetti 1977). */
    double rho_g = l->rho_gas_kg_m3 > 0 ? l->rho_gas_kg_m3 : sp_liquid_gas_density(l);
    double tk = l->temp_c + 273.15;
    if (!(rho_g > 0) || !(tk > 0))
        return sp_error_set(err, SP_ERR_INPUT, "%s: no gas density for temperature %g C", what, l->temp_c);
    sp_bubble_medium *m = &s->medium;
    m->rho_kg_m3 = l->rho_kg_m3;
    m->sigma_n_m = l->sigma_n_m;
    m->p_atm_pa = l->p_atm_pa;
    m->p_vapour_pa = l->vapour_pa;
    m->depth_m = l->depth_m;
    m->g_m_s2 = l->g_m_s2;
    m->gamma = g->gamma;
    m->d_gas_m2_s = g->k_w_mk * pow(tk / 293.15, g->k_exp) / (rho_g * g->cp_j_kgk);
    s->temp_c = l->temp_c;
    snprintf(s->liquid, sizeof s->liquid, "%s", l->name);
    snprintf(s->gas, sizeof s->gas, "%s", g->name);
    return SP_OK;
}

typedef struct job {
    const sp_listen_settings *s;
    sp_listen_report *rep;
    FILE *csv;
} job;

static int on_ping(void *ud, const sp_ping *p, sp_error *err)
{
    (void)err;
    job *j = ud;
    sp_ping q = *p;
    double kappa = 0, r = q.f_hz > 0 ? sp_minnaert_radius(&j->s->medium, q.f_hz, &kappa) : 0;
    /* The band is wider than the radii asked (filter skirts); accept only radii in the range. */
    if (q.status == SP_PING_OK && (r * 1e3 < j->s->r_min_mm || r * 1e3 > j->s->r_max_mm))
        q.status = SP_PING_BAND;
    p = &q;
    j->rep->candidates++;
    if (p->status != SP_PING_OK)
        j->rep->rejected[p->status]++;
    else
        j->rep->pings++;
    if (p->status != SP_PING_OK && !j->s->write_rejected)
        return SP_OK;
    fprintf(j->csv, "%.6f,%.3f,%.6g,%.2f,%.5f,%.6g,%.2f,%.4f,%.4f,%.4g", p->t_s, p->f_hz,
            p->beta_s > 0 ? 1.0 / p->beta_s : 0.0, p->snr_db, r * 1e3, p->amp, isfinite(p->q) ? p->q : 0.0,
            p->r2, kappa, isfinite(p->f_crb_hz) ? p->f_crb_hz : 0.0);
    if (j->s->write_rejected)
        fprintf(j->csv, ",%s", sp_ping_status_name(p->status));
    fputc('\n', j->csv);
    return SP_OK;
}

/* SHA-256 of the first MiB, so listen.json identifies its input. */
static void write_identity(sp_jsonw *jw, const char *path, const sp_audio_info *in,
                           const sp_listen_report *rep)
{
    sp_jsonw_obj(jw);
    sp_jsonw_kstr(jw, "path", path);
    struct stat st;
    FILE *f = NULL;
    struct AVSHA *sha = NULL;
    unsigned char *buf = NULL;
    if (stat(path, &st) == 0 && S_ISREG(st.st_mode) && (f = fopen(path, "rb")) && (sha = av_sha_alloc()) &&
        (buf = malloc(1 << 16)) && av_sha_init(sha, 256) == 0) {
        size_t left = 1 << 20, n;
        while (left > 0 && (n = fread(buf, 1, left < (1 << 16) ? left : (1 << 16), f)) > 0) {
            av_sha_update(sha, buf, n);
            left -= n;
        }
        if (!ferror(f)) {
            uint8_t dig[32];
            char hex[65];
            av_sha_final(sha, dig);
            for (int i = 0; i < 32; i++)
                snprintf(hex + 2 * i, 3, "%02x", dig[i]);
            sp_jsonw_kint(jw, "bytes", (int64_t)st.st_size);
            sp_jsonw_kstr(jw, "sha256_first_mib", hex);
        }
    }
    if (f)
        fclose(f);
    av_free(sha);
    free(buf);
    sp_jsonw_kstr(jw, "container", in->container);
    sp_jsonw_kstr(jw, "codec", in->codec);
    sp_jsonw_kint(jw, "sample_rate", in->sample_rate);
    sp_jsonw_kint(jw, "channels", in->channels);
    sp_jsonw_kint(jw, "bits", in->bits);
    sp_jsonw_kint(jw, "samples", rep->samples);
    sp_jsonw_knum(jw, "duration_s", rep->duration_s);
    sp_jsonw_obj_end(jw);
}

static void write_settings(sp_jsonw *jw, const sp_listen_settings *s)
{
    const sp_bubble_medium *m = &s->medium;
    const sp_ping_opts *o = &s->ping;
    static const char *models[] = {"minnaert", "devin", "thermal"};
    sp_jsonw_obj(jw);
    sp_jsonw_kint(jw, "channel", s->channel);
    sp_jsonw_knum(jw, "r_min_mm", s->r_min_mm);
    sp_jsonw_knum(jw, "r_max_mm", s->r_max_mm);
    sp_jsonw_knum(jw, "nyquist_frac", s->nyquist_frac);
    sp_jsonw_knum(jw, "temp_c", s->temp_c);
    sp_jsonw_kstr(jw, "liquid", s->liquid);
    sp_jsonw_kstr(jw, "liquid_file", s->liquid_file);
    sp_jsonw_kstr(jw, "gas", s->gas);
    sp_jsonw_knum(jw, "depth_m", m->depth_m);
    sp_jsonw_kstr(jw, "model", m->model >= 0 && m->model <= 2 ? models[m->model] : "unknown");
    sp_jsonw_knum(jw, "rho_kg_m3", m->rho_kg_m3);
    sp_jsonw_knum(jw, "sigma_n_m", m->sigma_n_m);
    sp_jsonw_knum(jw, "p_atm_pa", m->p_atm_pa);
    sp_jsonw_knum(jw, "p_vapour_pa", m->p_vapour_pa);
    sp_jsonw_knum(jw, "g_m_s2", m->g_m_s2);
    sp_jsonw_knum(jw, "gamma", m->gamma);
    sp_jsonw_knum(jw, "d_gas_m2_s", m->d_gas_m2_s);
    sp_jsonw_knum(jw, "hop_s", o->hop_s);
    sp_jsonw_knum(jw, "floor_s", o->floor_s);
    sp_jsonw_knum(jw, "floor_pct", o->floor_pct);
    sp_jsonw_knum(jw, "snr_min_db", o->snr_min_db);
    sp_jsonw_knum(jw, "end_db", o->end_db);
    sp_jsonw_knum(jw, "rise_db", o->rise_db);
    sp_jsonw_knum(jw, "max_s", o->max_s);
    sp_jsonw_knum(jw, "q_min", o->q_min);
    sp_jsonw_knum(jw, "r2_min", o->r2_min);
    sp_jsonw_knum(jw, "warmup_s", o->warmup_s);
    sp_jsonw_kbool(jw, "write_rejected", s->write_rejected);
    sp_jsonw_obj_end(jw);
}

int sp_listen(const char *audio, const char *outdir, const sp_listen_settings *s, sp_listen_report *rep_out,
              sp_error *err)
{
    sp_listen_report rep;
    memset(&rep, 0, sizeof rep);
    sp_audio *a = NULL;
    sp_pings *det = NULL;
    sp_outfile csv = {0}, js = {0};
    float *buf = NULL;
    int rc;
    if (!(s->r_min_mm > 0) || !(s->r_max_mm > s->r_min_mm) || !(s->nyquist_frac > 0) ||
        !(s->nyquist_frac <= 0.5)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: bad radius range %g..%g mm or Nyquist fraction %g", audio,
                          s->r_min_mm, s->r_max_mm, s->nyquist_frac);
        goto fail;
    }
    if ((rc = sp_audio_open(&a, audio, s->channel, err)))
        goto fail;
    const sp_audio_info *in = sp_audio_get_info(a);
    rep.sample_rate = in->sample_rate;
    rep.channels = in->channels;
    double fs = in->sample_rate;
    double f_top = sp_minnaert_freq(&s->medium, s->r_min_mm * 1e-3);
    double f_bot = sp_minnaert_freq(&s->medium, s->r_max_mm * 1e-3);
    if (!(f_top > 0) || !(f_bot > 0)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: no natural frequency for radii %g..%g mm in this liquid",
                          audio, s->r_min_mm, s->r_max_mm);
        goto fail;
    }
    if (f_top > s->nyquist_frac * fs) {
        rc = sp_error_set(
            err, SP_ERR_INPUT,
            "%s: sample rate %d Hz too low for radius %g mm (it rings at %.0f Hz; needs a rate of at "
            "least %.0f Hz)",
            audio, in->sample_rate, s->r_min_mm, f_top, ceil(f_top / s->nyquist_frac));
        goto fail;
    }
    sp_ping_opts po = s->ping;
    po.f_lo_hz = 0.8 * f_bot;
    po.f_hi_hz = fmin(1.2 * f_top, 0.45 * fs);
    rep.f_lo_hz = po.f_lo_hz;
    rep.f_hi_hz = po.f_hi_hz;
    if ((rc = sp_outdir_prepare(outdir, err)) || (rc = sp_outfile_open(&csv, outdir, "pings.csv", err)))
        goto fail;
    fprintf(csv.f, "t_s,f_hz,decay_s,snr_db,r_mm,amplitude,q,r2,kappa_eff,f_crb_hz%s\n",
            s->write_rejected ? ",status" : "");
    job j = {s, &rep, csv.f};
    if ((rc = sp_pings_new(&det, fs, &po, on_ping, &j, audio, err)))
        goto fail;
    if (!(buf = malloc(sizeof(float) * BLOCK))) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", audio);
        goto fail;
    }
    double t0 = now_s();
    int64_t done = 0;
    for (;;) {
        int got = 0;
        if ((rc = sp_audio_read(a, buf, BLOCK, &got, err)))
            goto fail;
        if (got == 0)
            break;
        if ((rc = sp_pings_feed(det, buf, got, err)))
            goto fail;
        done += got;
        if (s->progress) {
            sp_progress p = {"listen", (int64_t)(1e3 * done / fs),
                             in->samples_total > 0 ? (int64_t)(1e3 * in->samples_total / fs) : -1,
                             now_s() - t0};
            s->progress(s->progress_ud, &p);
        }
    }
    if ((rc = sp_pings_finish(det, err)))
        goto fail;
    rep.samples = sp_audio_position(a);
    rep.duration_s = rep.samples / fs;

    if ((rc = sp_outfile_open(&js, outdir, "listen.json", err)))
        goto fail;
    sp_jsonw jw;
    sp_jsonw_init(&jw, js.f);
    sp_jsonw_obj(&jw);
    sp_jsonw_kstr(&jw, "tool", "spume listen");
    sp_jsonw_kstr(&jw, "version", SP_VERSION);
    sp_jsonw_key(&jw, "input");
    write_identity(&jw, audio, in, &rep);
    sp_jsonw_key(&jw, "settings");
    write_settings(&jw, s);
    sp_jsonw_knum(&jw, "f_lo_hz", rep.f_lo_hz);
    sp_jsonw_knum(&jw, "f_hi_hz", rep.f_hi_hz);
    sp_jsonw_kint(&jw, "candidates", rep.candidates);
    sp_jsonw_kint(&jw, "pings", rep.pings);
    sp_jsonw_key(&jw, "rejected");
    sp_jsonw_obj(&jw);
    for (int k = 1; k <= 4; k++)
        sp_jsonw_kint(&jw, sp_ping_status_name(k), rep.rejected[k]);
    sp_jsonw_obj_end(&jw);
    sp_jsonw_obj_end(&jw);
    fputc('\n', js.f);
    if ((rc = sp_outfile_commit(&csv, err)) || (rc = sp_outfile_commit(&js, err)))
        goto fail;
    if (rep_out)
        *rep_out = rep;
    rc = SP_OK;
fail:
    sp_outfile_abort(&csv);
    sp_outfile_abort(&js);
    free(buf);
    sp_pings_free(det);
    sp_audio_close(a);
    return rc;
}

/* Truth sanity of the tracking scenes: the `nucleation` truth (sites, births, growth, rise) agrees
 * with the generating parameters and with the published Stokes speed; the `column` scene is dense,
 * zigzags and overlaps as it promises; both are deterministic at 1 and 2 threads. */
#include "check.h"
#include "synth/scenes.h"
#include "synth/synth.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* ---------------------------------------------------------------- a small CSV reader */

typedef struct table {
    int ncol;
    char names[32][32];
    size_t nrow;
    double *v; /* nrow × ncol */
} table;

static int read_table(const char *path, table *t)
{
    memset(t, 0, sizeof *t);
    FILE *f = fopen(path, "r");
    if (!f)
        return -1;
    char line[4096];
    if (!fgets(line, sizeof line, f)) {
        fclose(f);
        return -1;
    }
    for (char *tok = strtok(line, ",\r\n"); tok && t->ncol < 32; tok = strtok(NULL, ",\r\n"))
        snprintf(t->names[t->ncol++], 32, "%s", tok);
    size_t cap = 0;
    while (fgets(line, sizeof line, f)) {
        if (t->nrow == cap) {
            cap = cap ? 2 * cap : 1024;
            double *nv = realloc(t->v, cap * t->ncol * sizeof *nv);
            if (!nv) {
                fclose(f);
                return -1;
            }
            t->v = nv;
        }
        char *p = line;
        for (int c = 0; c < t->ncol; c++) {
            t->v[t->nrow * t->ncol + c] = strtod(p, &p);
            if (*p == ',')
                p++;
        }
        t->nrow++;
    }
    fclose(f);
    return 0;
}

static int col(const table *t, const char *name)
{
    for (int c = 0; c < t->ncol; c++)
        if (!strcmp(t->names[c], name))
            return c;
    fprintf(stderr, "no column %s\n", name);
    return -1;
}

static double at(const table *t, size_t r, int c)
{
    return c < 0 ? NAN : t->v[r * t->ncol + c];
}

static int same_file(const char *a, const char *b)
{
    FILE *fa = fopen(a, "rb"), *fb = fopen(b, "rb");
    int same = fa && fb;
    while (same) {
        int ca = fgetc(fa), cb = fgetc(fb);
        if (ca != cb)
            same = 0;
        if (ca == EOF || cb == EOF)
            break;
    }
    if (fa)
        fclose(fa);
    if (fb)
        fclose(fb);
    return same;
}

/* ---------------------------------------------------------------- rise law */

/* Stokes: U = Δρ g d²/(18 μ); REFERENCES.md: d 0.1 mm → 5.42 mm/s. The rigid-sphere law with the
 * Schiller–Naumann factor must give back exactly that Stokes speed once the factor is undone, tend
 * to it for tiny bubbles, and grow with size. */
static void test_rise_law(void)
{
    const double rho = 998.21, mu = 1.0016e-3;
    double u = synth_rise_small_mm_s(0.1);
    double re = rho * u * 1e-3 * 0.1e-3 / mu;
    CHECK_NEAR(u * (1.0 + 0.15 * pow(re, 0.687)), 5.42, 0.01,
               "Stokes speed of a 0.1 mm bubble (REFERENCES.md)");
    double us = (998.21 - 1.2) * 9.80665 * 1e-10 / (18.0 * mu) * 1e3; /* d = 0.01 mm */
    CHECK_NEAR(synth_rise_small_mm_s(0.01) / us, 1.0, 0.01, "tiny bubble: Stokes limit");
    double prev = 0;
    int mono = 1;
    for (double d = 0.02; d <= 0.6; d += 0.02) {
        double v = synth_rise_small_mm_s(d);
        mono &= v > prev;
        prev = v;
    }
    CHECK(mono, "rise speed increases with size");
    CHECK(synth_rise_small_mm_s(0.0) == 0.0, "zero size, zero speed");
}

/* ---------------------------------------------------------------- nucleation */

static void test_nucleation_scene(void)
{
    sp_synth_opts o;
    sp_synth_opts_default(&o);
    synth_scene sc, sc2;
    sp_error err;
    int rc = synth_scene_build("nucleation", &o, &sc, &err);
    CHECK(rc == SP_OK, "build nucleation: %s", err.msg);
    if (rc)
        return;
    CHECK(sc.nsites == 6, "%zu sites", sc.nsites);
    double s = sc.mm_per_px;
    for (size_t k = 0; k < sc.nsites; k++) {
        const synth_site *p = &sc.sites[k];
        /* REFERENCES.md plausibility ranges: rates below 1 to ~30 Hz, detachment at tens of µm,
         * dR/dt 0.1-0.3 mm/s (the diameter grows at twice that). */
        CHECK(p->rate_hz >= 2 && p->rate_hz <= 25, "site rate %g", p->rate_hz);
        CHECK(p->d_detach_mm >= 0.04 && p->d_detach_mm <= 0.2 && p->d_detach_mm / s >= 4.0, "detach %g mm",
              p->d_detach_mm);
        CHECK(p->growth_mm_s >= 0.2 && p->growth_mm_s <= 0.6, "growth %g mm/s", p->growth_mm_s);
        size_t born = 0;
        double t0 = INFINITY, t1 = -INFINITY;
        for (size_t i = 0; i < sc.ntracks; i++) {
            const synth_track *tr = &sc.tracks[i];
            if (tr->site != (int)k + 1)
                continue;
            born++;
            t0 = fmin(t0, tr->t0);
            t1 = fmax(t1, tr->t0);
            /* Seen first in the frame right after its detachment, at the site. */
            CHECK(tr->born && tr->source == tr->site && tr->f_first == (int64_t)ceil(tr->t0 * sc.fps),
                  "track %d: born %d source %d", tr->id, tr->born, tr->source);
            synth_state st;
            synth_track_state(tr, tr->f_first / sc.fps, &st);
            double dt = tr->f_first / sc.fps - tr->t0;
            CHECK(fabs(st.x - p->x_px) < 0.2 * tr->d_vol_px + 1.0 && st.y <= p->y_px + 1e-9 &&
                      p->y_px - st.y <= dt * 1.1 * -st.vy + 1e-9,
                  "track %d first seen at (%.2f, %.2f), site at (%.2f, %.2f)", tr->id, st.x, st.y, p->x_px,
                  p->y_px);
            CHECK(fabs(tr->growth_px_s * s / p->growth_mm_s - 1.0) < 0.25, "track growth near the site's");
        }
        CHECK(born >= 5, "site %zu emits %zu bubbles in the run", k + 1, born);
        if (born >= 2)
            CHECK_NEAR((born - 1) / (t1 - t0), p->rate_hz, 0.12 * p->rate_hz, "births' rate vs nominal");
    }
    /* The rise: y is the integral of the speed of the growing bubble (finite difference of the
     * state against its velocity), and the bubble speeds up as it grows. */
    int checked = 0;
    for (size_t i = 0; i < sc.ntracks && checked < 20; i++) {
        const synth_track *tr = &sc.tracks[i];
        if (!tr->born)
            continue;
        double t = tr->t0 + 0.3, h = 1e-4;
        synth_state a, b, m;
        synth_track_state(tr, t - h, &a);
        synth_track_state(tr, t + h, &b);
        synth_track_state(tr, t, &m);
        double fd = (b.y - a.y) / (2 * h);
        CHECK(fabs(fd - m.vy) < 1e-4 * fabs(m.vy), "track %d: dy/dt %.6g vs vy %.6g", tr->id, fd, m.vy);
        double d = tr->d_vol_px + tr->growth_px_s * 0.3;
        CHECK_NEAR(-m.vy * s, synth_rise_small_mm_s(d * s), 1e-9, "speed of the grown bubble");
        CHECK_NEAR(cbrt(m.major * m.major * m.minor), d, 1e-9, "diameter grows linearly");
        checked++;
    }
    CHECK(checked == 20, "only %d born tracks", checked);
    /* Deterministic: the same scene again. */
    rc = synth_scene_build("nucleation", &o, &sc2, &err);
    CHECK(rc == SP_OK && sc2.ntracks == sc.ntracks &&
              !memcmp(sc.tracks, sc2.tracks, sc.ntracks * sizeof *sc.tracks) &&
              !memcmp(sc.sites, sc2.sites, sc.nsites * sizeof *sc.sites),
          "nucleation scene differs between two builds");
    synth_scene_free(&sc2);
    synth_scene_free(&sc);
}

/* Files: truth_sites.csv from the rows agrees with the generating parameters, the tracks' growth
 * (least squares over their rows) with each track's own, and 1 and 2 threads give the same files. */
static void test_nucleation_files(const char *tmp)
{
    char d1[512], d2[512], p[600], q[600];
    snprintf(d1, sizeof d1, "%s/nuc1", tmp);
    snprintf(d2, sizeof d2, "%s/nuc2", tmp);
    sp_synth_opts o;
    sp_synth_opts_default(&o);
    o.png = 0;
    o.video = 0;
    o.threads = 2;
    sp_error err;
    int rc = sp_synth_run("nucleation", d1, &o, &err);
    CHECK(rc == SP_OK, "nucleation run: %s", err.msg);
    if (rc)
        return;
    table ts, tt;
    snprintf(p, sizeof p, "%s/truth_sites.csv", d1);
    CHECK(read_table(p, &ts) == 0 && ts.nrow == 6, "truth_sites.csv: %zu rows", ts.nrow);
    int c_rate = col(&ts, "rate_hz"), c_nom = col(&ts, "rate_nominal_hz"), c_n = col(&ts, "n");
    int c_dd = col(&ts, "d_detach_mm"), c_ddn = col(&ts, "d_detach_nominal_mm");
    int c_g = col(&ts, "growth_mm_s"), c_gn = col(&ts, "growth_nominal_mm_s");
    CHECK(col(&ts, "site") == 0 && col(&ts, "x_mm") >= 0 && col(&ts, "y_mm") >= 0, "truth_sites columns");
    for (size_t r = 0; r < ts.nrow; r++) {
        double n = at(&ts, r, c_n), nom = at(&ts, r, c_nom);
        /* (n-1) intervals of CV <= 0.1: the mean interval is within ~3 standard errors */
        CHECK_NEAR(at(&ts, r, c_rate), nom, 3.0 * 0.1 / sqrt(n - 1) * nom + 1e-9, "site rate vs nominal");
        CHECK_NEAR(at(&ts, r, c_dd), at(&ts, r, c_ddn), 0.05 * at(&ts, r, c_ddn),
                   "d_detach vs nominal (4 % spread)");
        CHECK_NEAR(at(&ts, r, c_g), at(&ts, r, c_gn), 0.06 * at(&ts, r, c_gn),
                   "growth vs nominal (5 % spread)");
    }
    snprintf(p, sizeof p, "%s/truth_tracks.csv", d1);
    CHECK(read_table(p, &tt) == 0 && tt.nrow > 100, "truth_tracks.csv: %zu rows", tt.nrow);
    synth_scene sc;
    rc = synth_scene_build("nucleation", &o, &sc, &err);
    int c_tr = col(&tt, "track"), c_tg = col(&tt, "growth_mm_s"), c_tn = col(&tt, "n"),
        c_site = col(&tt, "site");
    int c_born = col(&tt, "born"), c_d1 = col(&tt, "d_first_mm"), c_y1 = col(&tt, "y_first_mm");
    size_t nborn = 0, per_site[7] = {0};
    for (size_t r = 0; rc == SP_OK && r < tt.nrow; r++) {
        int id = (int)at(&tt, r, c_tr);
        const synth_track *tr = id >= 1 && (size_t)id <= sc.ntracks ? &sc.tracks[id - 1] : NULL;
        CHECK(tr && tr->id == id, "track id %d", id);
        if (!tr)
            continue;
        if (at(&tt, r, c_tn) >= 3)
            CHECK_NEAR(at(&tt, r, c_tg), tr->growth_px_s * sc.mm_per_px,
                       2e-5 + 1e-4 * tr->growth_px_s * sc.mm_per_px,
                       "track growth from its rows vs generating rate");
        int site = (int)at(&tt, r, c_site);
        if (at(&tt, r, c_born) == 1) {
            nborn++;
            CHECK(site >= 1 && site <= 6, "born track %d has site %d", id, site);
            if (site >= 1 && site <= 6) {
                per_site[site]++;
                /* born where its site is, at its detachment size: risen at most one frame's
                 * travel at the speed it has when first seen */
                double up = at(&tt, r, c_y1) - at(&ts, (size_t)site - 1, col(&ts, "y_mm"));
                double reach = synth_rise_small_mm_s(at(&tt, r, c_d1)) / sc.fps + 2e-5;
                CHECK(up >= -2e-5 && up <= reach, "track %d born %.4f mm above its site (one frame: %.4f)",
                      id, up, reach);
                CHECK(fabs(at(&tt, r, c_d1) - tr->d_vol_px * sc.mm_per_px) < 0.01, "d_first of track %d", id);
            }
        } else {
            CHECK(site == 0, "track %d not born in view has site %d", id, site);
        }
    }
    for (int k = 1; k <= 6 && ts.nrow == 6; k++)
        CHECK(per_site[k] == (size_t)at(&ts, (size_t)k - 1, c_n),
              "site %d: %zu born tracks, truth_sites n %g", k, per_site[k], at(&ts, (size_t)k - 1, c_n));
    CHECK(nborn >= 100, "%zu born tracks", nborn);
    if (rc == SP_OK)
        synth_scene_free(&sc);
    free(ts.v);
    free(tt.v);

    /* One thread, 60 frames, against two threads: byte-identical truth. */
    o.frames = 60;
    o.threads = 1;
    rc = sp_synth_run("nucleation", d1, &o, &err);
    o.threads = 2;
    rc |= sp_synth_run("nucleation", d2, &o, &err);
    CHECK(rc == SP_OK, "60-frame runs");
    const char *files[] = {"truth_bubbles.csv", "truth_tracks.csv", "truth_sites.csv"};
    for (int i = 0; i < 3; i++) {
        snprintf(p, sizeof p, "%s/%s", d1, files[i]);
        snprintf(q, sizeof q, "%s/%s", d2, files[i]);
        CHECK(same_file(p, q), "%s differs between 1 and 2 threads", files[i]);
    }
}

/* ---------------------------------------------------------------- column */

static void test_column(const char *tmp)
{
    sp_synth_opts o;
    sp_synth_opts_default(&o);
    synth_scene sc;
    sp_error err;
    int rc = synth_scene_build("column", &o, &sc, &err);
    CHECK(rc == SP_OK, "build column: %s", err.msg);
    if (rc)
        return;
    size_t zig = 0;
    double dmin = 1e9, dmax = 0;
    for (size_t i = 0; i < sc.ntracks; i++) {
        const synth_track *tr = &sc.tracks[i];
        double d = tr->d_vol_px * sc.mm_per_px;
        dmin = fmin(dmin, d);
        dmax = fmax(dmax, d);
        zig += tr->wob_amp * sc.mm_per_px >= 0.4 * d && tr->wob_hz >= 5 && tr->wob_hz <= 10;
        CHECK(tr->site == 0 && tr->source >= 1 && !tr->born, "column track %d: site %d", tr->id, tr->site);
    }
    CHECK(dmin >= 1.0 && dmax <= 6.0 && dmax - dmin > 2.5, "column diameters %.2f-%.2f mm", dmin, dmax);
    CHECK(zig >= sc.ntracks / 2, "%zu of %zu tracks zigzag", zig, sc.ntracks);
    synth_scene_free(&sc);

    char d1[512], p[600];
    snprintf(d1, sizeof d1, "%s/col", tmp);
    o.png = 0;
    o.video = 0;
    o.frames = 60;
    rc = sp_synth_run("column", d1, &o, &err);
    CHECK(rc == SP_OK, "column run: %s", err.msg);
    table tb, tt;
    snprintf(p, sizeof p, "%s/truth_bubbles.csv", d1);
    CHECK(read_table(p, &tb) == 0, "truth_bubbles.csv");
    snprintf(p, sizeof p, "%s/truth_tracks.csv", d1);
    CHECK(read_table(p, &tt) == 0, "truth_tracks.csv");
    size_t ov = 0;
    int c_ov = col(&tb, "overlap");
    for (size_t r = 0; r < tb.nrow; r++)
        ov += at(&tb, r, c_ov) == 1;
    /* Dense: > 15 bubbles per frame on average and real overlaps in projection. */
    CHECK(tb.nrow > 15 * 60, "column: %zu rows in 60 frames", tb.nrow);
    CHECK(ov > tb.nrow / 20, "column: %zu of %zu rows overlap", ov, tb.nrow);
    int c_vy = col(&tt, "vy_mm_s"), c_n = col(&tt, "n"), c_amp = col(&tt, "osc_amp_mm");
    for (size_t r = 0; r < tt.nrow; r++)
        if (at(&tt, r, c_n) >= 20) /* long enough for the zigzag to average out of the slope */
            CHECK(at(&tt, r, c_vy) > 150 && at(&tt, r, c_vy) < 350 && at(&tt, r, c_amp) >= 0,
                  "column track rises at %g mm/s", at(&tt, r, c_vy));
    /* No sites in this scene: no truth_sites.csv. */
    snprintf(p, sizeof p, "%s/truth_sites.csv", d1);
    CHECK(access(p, F_OK) != 0, "column wrote truth_sites.csv");
    free(tb.v);
    free(tt.v);
}

static void test_names(void)
{
    int have_col = 0, have_nuc = 0;
    for (const char *const *n = sp_synth_scenarios(); *n; n++) {
        have_col |= !strcmp(*n, "column");
        have_nuc |= !strcmp(*n, "nucleation");
        CHECK(sp_synth_describe(*n) != NULL, "%s has no description", *n);
    }
    CHECK(have_col && have_nuc, "scenario list lacks column or nucleation");
    synth_scene sc;
    sp_error err;
    sp_synth_opts o;
    sp_synth_opts_default(&o);
    CHECK(synth_scene_build("nucleations", &o, &sc, &err) == SP_ERR_INPUT && strstr(err.msg, "nucleation"),
          "unknown name: %s", err.msg);
}

int main(void)
{
    char tmp[] = "/tmp/test_synth_scenes_XXXXXX";
    if (!mkdtemp(tmp)) {
        perror("mkdtemp");
        return 1;
    }
    test_rise_law();
    test_names();
    test_nucleation_scene();
    test_nucleation_files(tmp);
    test_column(tmp);
    char cmd[600];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", tmp);
    if (system(cmd) != 0)
        fprintf(stderr, "could not remove %s\n", tmp);
    return check_report();
}

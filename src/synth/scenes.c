/* Scenarios: where the bubbles are, how they move and look. Every random choice is a pure
 * function of (seed, stream, index), so a scene does not depend on the order it is built in. */
#include "synth/scenes.h"
#include "synth/rng.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define MAX_TRACKS 2000000

static const char *const scenario_names[] = {"sizing", "plume", "column", "nucleation", "nozzle", NULL};

static const char desc_sizing[] = "isolated still bubbles, diameters log-uniform 4-160 px, some out of focus "
                                  "or cut by the frame edge, for checking sizing";
static const char desc_plume[] = "rising plume of 1-5 mm bubbles from three nozzles below the frame, "
                                 "0.2-0.3 m/s with lateral wobble, for checking tracking";

static const char desc_column[] = "dense bubble column of 1-6 mm bubbles from a sparger of ten needles below "
                                  "the frame, zigzag paths and overlaps in projection, for tracking tests";
static const char desc_nucleation[] =
    "glass wall seen through a carbonated liquid: six nucleation sites emitting "
    "trains at 3-25 Hz of 0.045-0.2 mm bubbles that grow and speed up as "
    "they rise, for site and growth tests";

static const char desc_nozzle[] =
    "two nozzles in view release 1-4 mm bubbles at irregular intervals, with a paired hydrophone "
    "recording (audio.wav: one ping per detachment, clicks, noise, a hidden clock offset), for the "
    "acoustic cross-check";

const char *const *sp_synth_scenarios(void)
{
    return scenario_names;
}

const char *sp_synth_describe(const char *scenario)
{
    if (!scenario)
        return NULL;
    if (strcmp(scenario, "sizing") == 0)
        return desc_sizing;
    if (strcmp(scenario, "plume") == 0)
        return desc_plume;
    if (strcmp(scenario, "column") == 0)
        return desc_column;
    if (strcmp(scenario, "nucleation") == 0)
        return desc_nucleation;
    if (strcmp(scenario, "nozzle") == 0)
        return desc_nozzle;
    return NULL;
}

double synth_rise_small_mm_s(double d_mm)
{
    const double rho = 998.21, mu = 1.0016e-3, g = 9.80665, drho = 998.21 - 1.2; /* REFERENCES.md */
    double d = d_mm * 1e-3;
    if (!(d > 0))
        return 0.0;
    double us = drho * g * d * d / (18.0 * mu); /* Stokes */
    /* U·(1 + 0.15·(ρUd/μ)^0.687) = U_Stokes: increasing and convex in U, so Newton from U_Stokes
     * descends monotonically onto the root. */
    double a = 0.15 * pow(rho * d / mu, 0.687), u = us;
    for (int i = 0; i < 30; i++) {
        double f = u + a * pow(u, 1.687) - us, df = 1.0 + 1.687 * a * pow(u, 0.687);
        double nu = u - f / df;
        if (!(nu > 0))
            nu = 0.5 * u;
        if (fabs(nu - u) <= 1e-14 * us) {
            u = nu;
            break;
        }
        u = nu;
    }
    return u * 1e3;
}

/* Rise speed in px/s of a track's bubble of diameter d_px under its rise law. */
static double rise_px_s(const synth_track *tr, double d_px)
{
    return synth_rise_small_mm_s(d_px * tr->mm_per_px) / tr->mm_per_px;
}

/* Height risen (px) between t0 and t0 + dt by a growing bubble: Simpson's rule over 64 panels of
 * the speed of the linearly growing diameter (smooth, so far below a pixel's error). */
static double risen_px(const synth_track *tr, double dt)
{
    enum { NP = 64 };
    if (!(dt > 0))
        return 0.0;
    double h = dt / NP, sum = 0;
    for (int i = 0; i <= NP; i++) {
        double w = (i == 0 || i == NP) ? 1.0 : (i % 2 ? 4.0 : 2.0);
        sum += w * rise_px_s(tr, tr->d_vol_px + tr->growth_px_s * h * i);
    }
    return sum * h / 3.0;
}

void synth_track_state(const synth_track *tr, double t, synth_state *st)
{
    double dt = t - tr->t0;
    double ph = 2.0 * PI * tr->wob_hz * dt + tr->wob_ph;
    st->x = tr->x0 + tr->vx * dt + tr->wob_amp * sin(ph);
    st->vx = tr->vx + tr->wob_amp * 2.0 * PI * tr->wob_hz * cos(ph);
    double d = tr->d_vol_px + tr->growth_px_s * dt;
    if (d < 0.05 * tr->d_vol_px)
        d = 0.05 * tr->d_vol_px; /* before its birth a growing bubble is never drawn; keep d > 0 */
    if (tr->rise_law == 1) {
        st->y = tr->y0 - risen_px(tr, dt);
        st->vy = dt > 0 ? -rise_px_s(tr, d) : -rise_px_s(tr, tr->d_vol_px);
    } else {
        st->y = tr->y0 + tr->vy * dt;
        st->vy = tr->vy;
    }
    /* Zigzagging bubbles turn their broad face to the motion: the major axis leans against the
     * lateral velocity, and the shape flattens twice per cycle. */
    double e = tr->aspect + tr->aspect_amp * sin(2.0 * ph);
    if (e > 1.0)
        e = 1.0;
    st->major = d * pow(e, -1.0 / 3.0); /* keeps major²·minor = d_vol³ */
    st->minor = st->major * e;
    double tilt = tr->tilt0 - tr->tilt_amp * cos(ph);
    while (tilt > 90.0)
        tilt -= 180.0;
    while (tilt <= -90.0)
        tilt += 180.0;
    st->tilt_deg = tilt;
}

void synth_track_look(const synth_scene *sc, const synth_track *tr, const synth_state *st, sp_bubble_look *lk)
{
    memset(lk, 0, sizeof *lk);
    lk->x_px = st->x;
    lk->y_px = st->y;
    lk->a_px = 0.5 * st->major;
    lk->b_px = 0.5 * st->minor;
    lk->tilt_deg = st->tilt_deg;
    lk->band = tr->band;
    lk->shoulder = tr->shoulder;
    double r = 0.5 * sqrt(st->major * st->minor);
    lk->shoulder_px = fmax(0.8, 0.05 * r);
    lk->spot = tr->spot;
    lk->spot_frac = tr->spot_frac;
    lk->spot_u = tr->spot_u;
    lk->spot_v = tr->spot_v;
    double az = fabs(tr->z_mm);
    /* Small bubbles image with weak contrast (diffraction and finite resolution fill them in);
     * far from focus the shadow also fades as the aperture sees around it. Model values. */
    double c_size = 0.55 + 0.45 * (1.0 - exp(-2.0 * r / 12.0));
    double zc = 4.0 * sc->dof_mm;
    double c_z = 1.0 / (1.0 + (az / zc) * (az / zc));
    lk->contrast = c_size * c_z;
    lk->blur_px = sc->blur_px_per_mm * az;
    lk->motion_dx = st->vx * sc->exposure_s;
    lk->motion_dy = st->vy * sc->exposure_s;
}

int synth_state_visible(const synth_scene *sc, const synth_state *st)
{
    double hx, hy;
    sp_ellipse_extent(0.5 * st->major, 0.5 * st->minor, st->tilt_deg, &hx, &hy);
    return st->x + hx > 0.0 && st->x - hx < sc->width - 1.0 && st->y + hy > 0.0 &&
           st->y - hy < sc->height - 1.0;
}

/* Looks drawn per bubble: a dark band, a grey shoulder, a bright spot slightly off centre. */
static void random_look(synth_track *tr, uint64_t key)
{
    tr->band = rng_range(key, 20, 0.03, 0.12);
    tr->shoulder = rng_range(key, 21, 0.28, 0.48);
    tr->spot = rng_range(key, 22, 0.55, 0.92);
    tr->spot_frac = rng_range(key, 23, 0.2, 0.45);
    tr->spot_u = rng_range(key, 24, -0.18, 0.18);
    tr->spot_v = rng_range(key, 25, -0.12, 0.25);
}

static int cmp_first(const void *a, const void *b)
{
    const synth_track *x = a, *y = b;
    if (x->f_first != y->f_first)
        return x->f_first < y->f_first ? -1 : 1;
    if (x->x0 != y->x0)
        return x->x0 < y->x0 ? -1 : 1;
    return 0;
}

/* sizing: still bubbles placed by random sequential addition, largest first, with a gap so no
 * two silhouettes (blur included) touch. */
static int build_sizing(synth_scene *sc, uint64_t seed, sp_error *err)
{
    int w = sc->width, h = sc->height;
    /* Keep the count near 160 on the default frame and scale with area on others. */
    double scale = (double)w * h / (1280.0 * 1024.0);
    int n = (int)lround(160.0 * scale);
    if (n < 4)
        n = 4;
    if (n > 20000)
        n = 20000;
    double dmax = fmin(160.0, 0.5 * fmin(w, h));
    double dmin = fmin(4.0, dmax);
    synth_track *t = calloc((size_t)n, sizeof *t);
    double *dv = malloc((size_t)n * sizeof *dv);
    if (!t || !dv) {
        free(t);
        free(dv);
        return sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for %d bubbles", n);
    }
    /* Diameters log-uniform; sorted descending so the big ones find room first. */
    uint64_t kd = rng_key(seed, RNG_LAYOUT, 0, 0);
    for (int i = 0; i < n; i++)
        dv[i] = dmin * pow(dmax / dmin, (i + 0.5) / n + (rng_unit(kd, (uint64_t)i) - 0.5) / n);
    for (int i = 1; i < n; i++) /* insertion sort, descending */
        for (int j = i; j > 0 && dv[j] > dv[j - 1]; j--) {
            double tmp = dv[j];
            dv[j] = dv[j - 1];
            dv[j - 1] = tmp;
        }
    int placed = 0;
    double *cr = malloc((size_t)n * sizeof *cr); /* clearance radius of each placed bubble */
    if (!cr) {
        free(t);
        free(dv);
        return sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for %d bubbles", n);
    }
    for (int i = 0; i < n; i++) {
        uint64_t k = rng_key(seed, RNG_BUBBLE, (uint64_t)i, 0);
        synth_track *tr = &t[placed];
        memset(tr, 0, sizeof *tr);
        tr->d_vol_px = dv[i];
        tr->aspect = rng_range(k, 1, 0.5, 1.0);
        tr->tilt0 = 90.0 - 180.0 * rng_unit(k, 2); /* (-90, 90] */
        /* Most in focus (|z| <= dof/2), a quarter up to 6 depths of field away. */
        double az = rng_unit(k, 3) < 0.75 ? rng_range(k, 4, 0.0, 0.5 * sc->dof_mm)
                                          : rng_range(k, 4, 0.55 * sc->dof_mm, 3.0 * sc->dof_mm);
        tr->z_mm = rng_unit(k, 5) < 0.5 ? -az : az;
        random_look(tr, k);
        double major = dv[i] * pow(tr->aspect, -1.0 / 3.0);
        double clear = 0.5 * major + sc->blur_px_per_mm * az + 3.0;
        int ok = 0;
        for (int attempt = 0; attempt < 4000 && !ok; attempt++) {
            /* Centres may sit a little outside the picture so some bubbles are cut by the edge. */
            double m = 0.3 * 0.5 * major;
            double x = rng_range(k, 100 + 2 * (uint64_t)attempt, -m, w - 1 + m);
            double y = rng_range(k, 101 + 2 * (uint64_t)attempt, -m, h - 1 + m);
            ok = 1;
            for (int j = 0; j < placed && ok; j++) {
                double dx = x - t[j].x0, dy = y - t[j].y0;
                if (dx * dx + dy * dy < (clear + cr[j]) * (clear + cr[j]))
                    ok = 0;
            }
            if (ok) {
                tr->x0 = x;
                tr->y0 = y;
            }
        }
        if (!ok)
            continue; /* no room left for this size: the scene is simply one bubble shorter */
        cr[placed] = clear;
        tr->f_first = 0;
        tr->f_last = sc->frames - 1;
        tr->site = 0;
        placed++;
    }
    free(cr);
    free(dv);
    /* Ids in placement order: track 1 is the largest bubble. */
    sc->tracks = t;
    sc->ntracks = (size_t)placed;
    for (size_t i = 0; i < sc->ntracks; i++)
        sc->tracks[i].id = (int)i + 1;
    sc->max_life = sc->frames;
    return SP_OK;
}

/* Rise speed of an air bubble in water, Mendelson (1967) wave analogy, held to the 0.2-0.3 m/s
 * band the scenario promises (the formula leaves its range below ~1.5 mm). */
static double rise_speed_m_s(double d_mm)
{
    const double sigma = 0.07274, rho = 998.21, g = 9.80665; /* water 20 C, REFERENCES.md */
    double d = d_mm * 1e-3;
    double u = sqrt(2.0 * sigma / (rho * d) + g * d / 2.0);
    return fmin(0.3, fmax(0.2, u));
}

/* Aspect ratio from Wellek, Agrawal & Skelland (1966): E = 1/(1 + 0.163 Eo^0.757). */
static double wellek_aspect(double d_mm)
{
    const double sigma = 0.07274, drho = 998.21 - 1.2, g = 9.80665;
    double d = d_mm * 1e-3;
    double eo = drho * g * d * d / sigma;
    return 1.0 / (1.0 + 0.163 * pow(eo, 0.757));
}

/* plume: three nozzles just below the picture emit trains of bubbles that rise through it. */
static int build_plume(synth_scene *sc, uint64_t seed, sp_error *err)
{
    const int nn = 3;
    const double d_mean[3] = {1.6, 2.8, 4.2}; /* mm */
    const double rate_hz[3] = {36.0, 24.0, 14.0};
    const double z_noz[3] = {-0.8, 0.4, 2.6}; /* mm from the focal plane; the third is blurred */
    double s = sc->mm_per_px, fps = sc->fps;
    int w = sc->width, h = sc->height;
    double t_end = (double)(sc->frames - 1) / fps;
    /* The slowest bubble needs this long to cross the picture; start emitting that early so the
     * plume is established at frame 0. */
    double cross_s = (h + 6.0 / s) * s * 1e-3 / 0.2;
    double t_start = -cross_s;
    size_t cap = 0, n = 0;
    synth_track *t = NULL;
    for (int k = 0; k < nn; k++) {
        uint64_t kn = rng_key(seed, RNG_EMIT, (uint64_t)k, 0);
        double xn = w * (0.3 + 0.21 * k) + rng_range(kn, 0, -0.02, 0.02) * w;
        double te = t_start + rng_unit(kn, 1) / rate_hz[k];
        for (uint64_t e = 0; te <= t_end; e++) {
            if (n >= MAX_TRACKS) {
                free(t);
                return sp_error_set(err, SP_ERR_INPUT, "synth: plume: too many bubbles for %lld frames",
                                    (long long)sc->frames);
            }
            if (n == cap) {
                size_t nc = cap ? 2 * cap : 256;
                synth_track *nt = realloc(t, nc * sizeof *nt);
                if (!nt) {
                    free(t);
                    return sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for the plume");
                }
                t = nt;
                cap = nc;
            }
            uint64_t kb = rng_key(seed, RNG_BUBBLE, (uint64_t)k, e);
            synth_track *tr = &t[n];
            memset(tr, 0, sizeof *tr);
            double d_mm = d_mean[k] * (1.0 + 0.12 * rng_normal(kb, 0));
            d_mm = fmin(5.0, fmax(1.0, d_mm));
            double u = rise_speed_m_s(d_mm) * (1.0 + 0.04 * rng_normal(kb, 1)); /* m/s */
            u = fmin(0.3, fmax(0.2, u));
            tr->site = k + 1;
            tr->d_vol_px = d_mm / s;
            tr->aspect = wellek_aspect(d_mm);
            tr->aspect_amp = 0.03 + 0.02 * rng_unit(kb, 2);
            tr->t0 = te;
            tr->x0 = xn + rng_normal(kb, 3) * 0.3 / s;
            tr->y0 = h - 1.0 + 0.5 * tr->d_vol_px / tr->aspect + 4.0; /* just below the picture */
            tr->vy = -u * 1e3 / s;                                    /* px/s, y down */
            tr->vx = rng_normal(kb, 4) * 12.0 / s;                    /* the plume spreads: drift ~12 mm/s */
            tr->wob_amp = (0.15 + 0.2 * d_mm) * rng_range(kb, 5, 0.6, 1.2) / s;
            tr->wob_hz = rng_range(kb, 6, 6.0, 11.0);
            tr->wob_ph = rng_range(kb, 7, 0.0, 2.0 * PI);
            tr->tilt0 = 6.0 * rng_normal(kb, 8);
            tr->tilt_amp = d_mm > 2.0 ? rng_range(kb, 9, 10.0, 25.0) : rng_range(kb, 9, 0.0, 8.0);
            tr->z_mm = z_noz[k] + 0.5 * rng_normal(kb, 10);
            random_look(tr, kb);
            /* Frames in which it shows: from entering at the bottom to leaving at the top. */
            int64_t f0 = (int64_t)ceil(te * fps);
            if (f0 < 0)
                f0 = 0;
            tr->f_first = -1;
            tr->f_last = -2;
            for (int64_t f = f0; f < sc->frames; f++) {
                synth_state st;
                synth_track_state(tr, (double)f / fps, &st);
                if (synth_state_visible(sc, &st)) {
                    if (tr->f_first < 0)
                        tr->f_first = f;
                    tr->f_last = f;
                } else if (tr->f_first >= 0 || st.y < 0.0) {
                    break; /* gone out of the top */
                }
            }
            if (tr->f_first >= 0)
                n++;
            te += (1.0 + 0.5 * (rng_unit(kb, 11) - 0.5)) / rate_hz[k];
        }
    }
    qsort(t, n, sizeof *t, cmp_first);
    sc->max_life = 1;
    for (size_t i = 0; i < n; i++) {
        t[i].id = (int)i + 1;
        int64_t life = t[i].f_last - t[i].f_first + 1;
        if (life > sc->max_life)
            sc->max_life = life;
    }
    sc->tracks = t;
    sc->ntracks = n;
    return SP_OK;
}

/* Room for one more track in a growing array; NULL with *rc set on failure. */
static synth_track *push_track(synth_track **t, size_t *n, size_t *cap, const char *scene, int64_t frames,
                               int *rc, sp_error *err)
{
    if (*n >= MAX_TRACKS) {
        *rc = sp_error_set(err, SP_ERR_INPUT, "synth: %s: too many bubbles for %lld frames", scene,
                           (long long)frames);
        return NULL;
    }
    if (*n == *cap) {
        size_t nc = *cap ? 2 * *cap : 256;
        synth_track *nt = realloc(*t, nc * sizeof *nt);
        if (!nt) {
            *rc = sp_error_set(err, SP_ERR_INTERNAL, "synth: %s: out of memory for %zu bubbles", scene, nc);
            return NULL;
        }
        *t = nt;
        *cap = nc;
    }
    synth_track *tr = &(*t)[(*n)++];
    memset(tr, 0, sizeof *tr);
    return tr;
}

/* Frames in which the track shows, from frame f0 on, until it leaves through the top. Returns 0
 * when it never shows. */
static int track_extent(const synth_scene *sc, synth_track *tr, int64_t f0)
{
    if (f0 < 0)
        f0 = 0;
    tr->f_first = -1;
    tr->f_last = -2;
    for (int64_t f = f0; f < sc->frames; f++) {
        synth_state st;
        synth_track_state(tr, (double)f / sc->fps, &st);
        if (synth_state_visible(sc, &st)) {
            if (tr->f_first < 0)
                tr->f_first = f;
            tr->f_last = f;
        } else if (tr->f_first >= 0 || st.y < 0.0) {
            break;
        }
    }
    return tr->f_first >= 0;
}

/* Sort by first frame, number the tracks and hand them to the scene. */
static void finish_tracks(synth_scene *sc, synth_track *t, size_t n)
{
    qsort(t, n, sizeof *t, cmp_first);
    sc->max_life = 1;
    for (size_t i = 0; i < n; i++) {
        t[i].id = (int)i + 1;
        int64_t life = t[i].f_last - t[i].f_first + 1;
        if (life > sc->max_life)
            sc->max_life = life;
    }
    sc->tracks = t;
    sc->ntracks = n;
}

/* column: a sparger of ten needles below the picture feeds a dense column of 1-6 mm bubbles that
 * zigzag (planar lateral oscillation, amplitude and frequency drawn per bubble) at depths spread
 * over ±6 mm, so many overlap in projection and some are out of focus. */
static int build_column(synth_scene *sc, uint64_t seed, sp_error *err)
{
    enum { NN = 10 };
    double s = sc->mm_per_px, fps = sc->fps;
    int w = sc->width, h = sc->height;
    double t_end = (double)(sc->frames - 1) / fps;
    double t_start = -(h * s + 8.0) * 1e-3 / 0.2; /* the slowest bubble crosses the picture by frame 0 */
    size_t cap = 0, n = 0;
    synth_track *t = NULL;
    for (int k = 0; k < NN; k++) {
        uint64_t kn = rng_key(seed, RNG_EMIT, 100 + (uint64_t)k, 0);
        double xn = w * (k + 0.5) / NN + rng_range(kn, 0, -0.03, 0.03) * w;
        double rate = rng_range(kn, 1, 12.0, 24.0);
        double dm = rng_range(kn, 2, 1.5, 5.0); /* needle's mean bubble diameter, mm */
        double zn = rng_range(kn, 3, -6.0, 6.0);
        double te = t_start + rng_unit(kn, 4) / rate;
        for (uint64_t e = 0; te <= t_end; e++) {
            uint64_t kb = rng_key(seed, RNG_BUBBLE, 100 + (uint64_t)k, e);
            int rc = SP_OK;
            synth_track *tr = push_track(&t, &n, &cap, "column", sc->frames, &rc, err);
            if (!tr) {
                free(t);
                return rc;
            }
            double d_mm = fmin(6.0, fmax(1.0, dm * (1.0 + 0.15 * rng_normal(kb, 0))));
            double u = fmin(0.3, fmax(0.2, rise_speed_m_s(d_mm) * (1.0 + 0.05 * rng_normal(kb, 1))));
            tr->source = k + 1;
            tr->d_vol_px = d_mm / s;
            tr->aspect = wellek_aspect(d_mm);
            tr->aspect_amp = 0.02 + 0.03 * rng_unit(kb, 2);
            tr->t0 = te;
            tr->x0 = xn + rng_normal(kb, 3) * 1.0 / s;
            tr->y0 = h - 1.0 + 0.5 * tr->d_vol_px / tr->aspect + 4.0;
            tr->vy = -u * 1e3 / s;
            tr->vx = rng_normal(kb, 4) * 15.0 / s; /* the column spreads and recirculates */
            /* Path instability: bubbles above ~1.5 mm zigzag, with amplitudes of a fraction of to
             * about one diameter at 5-10 Hz; smaller ones rise almost straight. Model values. */
            double amp_d = d_mm > 1.5 ? rng_range(kb, 5, 0.4, 1.0) : rng_range(kb, 5, 0.0, 0.1);
            tr->wob_amp = amp_d * d_mm / s;
            tr->wob_hz = rng_range(kb, 6, 5.0, 10.0);
            tr->wob_ph = rng_range(kb, 7, 0.0, 2.0 * PI);
            tr->tilt0 = 5.0 * rng_normal(kb, 8);
            tr->tilt_amp = d_mm > 2.0 ? rng_range(kb, 9, 10.0, 30.0) : rng_range(kb, 9, 0.0, 8.0);
            tr->z_mm = zn + 1.5 * rng_normal(kb, 10);
            random_look(tr, kb);
            if (!track_extent(sc, tr, (int64_t)ceil(te * fps)))
                n--;
            te += (1.0 + 0.6 * (rng_unit(kb, 11) - 0.5)) / rate;
        }
    }
    finish_tracks(sc, t, n);
    return SP_OK;
}

/* nucleation: bubbles nucleate on a glass wall in the focal plane (on fibres or scratches of the
 * wall, in a carbonated liquid), detach at a site-specific size, then grow linearly in radius as
 * gas diffuses in (dR/dt 0.1-0.3 mm/s; REFERENCES.md "Growth in supersaturated liquids") and
 * rise ever faster (synth_rise_small_mm_s). A bubble is drawn from its detachment on: the growth
 * before detachment happens inside the site's cavity, out of sight. */
static int build_nucleation(synth_scene *sc, uint64_t seed, sp_error *err)
{
    enum { NS = 6 };
    const double rates[NS] = {3.0, 5.0, 8.0, 12.0, 18.0, 25.0};
    double s = sc->mm_per_px, fps = sc->fps;
    int w = sc->width, h = sc->height;
    double t_end = (double)(sc->frames - 1) / fps;
    size_t cap = 0, n = 0;
    synth_track *t = NULL;
    synth_site *site = calloc(NS, sizeof *site);
    if (!site)
        return sp_error_set(err, SP_ERR_INTERNAL, "synth: nucleation: out of memory");
    /* Sites in the lower 45 % of the picture, spread across it, at least ~0.8 mm apart. */
    uint64_t kl = rng_key(seed, RNG_LAYOUT, 7, 0);
    double gap = fmin(0.8 / s, 0.12 * w);
    for (int k = 0; k < NS; k++) {
        synth_site *p = &site[k];
        for (int attempt = 0; attempt < 200; attempt++) {
            p->x_px = rng_range(kl, 2 * (uint64_t)(k * 200 + attempt), 0.08 * w, 0.92 * w);
            p->y_px = rng_range(kl, 2 * (uint64_t)(k * 200 + attempt) + 1, 0.55 * h, 0.92 * h);
            int ok = 1;
            for (int j = 0; j < k; j++)
                ok &= hypot(p->x_px - site[j].x_px, p->y_px - site[j].y_px) >= gap;
            if (ok)
                break;
        }
        uint64_t kn = rng_key(seed, RNG_EMIT, 200 + (uint64_t)k, 0);
        p->rate_hz = rates[k];
        p->interval_cv = rng_range(kn, 0, 0.03, 0.10);
        p->d_detach_mm = 0.045 * pow(0.2 / 0.045, rng_unit(kn, 1)); /* log-uniform 0.045-0.2 mm */
        p->growth_mm_s = 2.0 * rng_range(kn, 2, 0.1, 0.3);          /* diameter: 2·dR/dt */
        double drift = rng_normal(kn, 3) * 0.3;                     /* slow convection, mm/s */
        double z = rng_range(kn, 4, -0.1, 0.1);
        /* Emission began long before the run so the trains fill the picture at frame 0. */
        double te = -2.0 + rng_unit(kn, 5) / p->rate_hz;
        for (uint64_t e = 0; te <= t_end; e++) {
            uint64_t kb = rng_key(seed, RNG_BUBBLE, 200 + (uint64_t)k, e);
            int rc = SP_OK;
            synth_track *tr = push_track(&t, &n, &cap, "nucleation", sc->frames, &rc, err);
            if (!tr) {
                free(t);
                free(site);
                return rc;
            }
            double d0 = p->d_detach_mm * (1.0 + 0.04 * rng_normal(kb, 0));
            tr->source = k + 1;
            tr->d_vol_px = d0 / s;
            tr->growth_px_s = p->growth_mm_s * (1.0 + 0.05 * rng_normal(kb, 1)) / s;
            tr->rise_law = 1;
            tr->mm_per_px = s;
            tr->aspect = 1.0; /* Eo < 0.01: spherical */
            tr->t0 = te;
            tr->x0 = p->x_px + 0.02 * tr->d_vol_px * rng_normal(kb, 2);
            tr->y0 = p->y_px;
            tr->vx = (drift + 0.1 * rng_normal(kb, 3)) / s;
            tr->z_mm = z;
            random_look(tr, kb);
            int64_t fb = (int64_t)ceil(te * fps);
            if (track_extent(sc, tr, fb)) {
                tr->born = tr->f_first == fb;
                tr->site = tr->born ? k + 1 : 0;
            } else {
                n--;
            }
            double step = 1.0 + p->interval_cv * rng_normal(kb, 4);
            te += fmax(0.3, step) / p->rate_hz;
        }
    }
    finish_tracks(sc, t, n);
    sc->sites = site;
    sc->nsites = NS;
    return SP_OK;
}

/* nozzle: two needles whose tips sit just inside the bottom of the picture release bubbles one at a
 * time, at irregular intervals (a minimum gap, so their pings never overlap, plus an exponential
 * wait), the small-bore needle 1-2 mm bubbles, the wide one 2-4 mm. A bubble is drawn from its
 * pinch-off on (the growth on the tip is not drawn, nor the needles); each pinch-off is also a ping
 * in the paired recording, whose clock runs ahead of the video's by a hidden offset. */
static int build_nozzle(synth_scene *sc, uint64_t seed, sp_error *err)
{
    enum { NN = 2 };
    const double d_lo[NN] = {1.0, 2.0}, d_hi[NN] = {2.0, 4.0}; /* mm, log-uniform */
    const double z_noz[NN] = {-0.4, 0.6};
    const double gap_min_s = 0.035, gap_mean_s = 0.025; /* interval = gap_min + Exp(gap_mean) */
    double s = sc->mm_per_px, fps = sc->fps;
    int w = sc->width, h = sc->height;
    double t_end = (double)(sc->frames - 1) / fps;
    uint64_t ka = rng_key(seed, RNG_EMIT, 300, 0);
    sc->audio_rate = 48000;
    sc->audio_offset_s = rng_range(ka, 0, 0.1, 0.5);
    sc->audio_len_s = sc->audio_offset_s + t_end + 0.3;
    sc->noise_rms = 0.002;
    sc->depth_m = 0.15;
    if (sc->audio_len_s * sc->audio_rate > 5e8)
        return sp_error_set(err, SP_ERR_INPUT, "synth: nozzle: %lld frames make a recording too long",
                            (long long)sc->frames);
    synth_site *site = calloc(NN, sizeof *site);
    if (!site)
        return sp_error_set(err, SP_ERR_INTERNAL, "synth: nozzle: out of memory");
    double tip_y = h - 1.0 - 6.0;
    for (int k = 0; k < NN; k++) {
        site[k].x_px = w * (k + 1.0) / (NN + 1.0);
        site[k].rate_hz = 1.0 / (NN * (gap_min_s + gap_mean_s));
        site[k].d_detach_mm = sqrt(d_lo[k] * d_hi[k]);
    }
    /* Emission starts early enough that bubbles fill the picture at frame 0 and the recording
     * starts in the middle of the train; it goes on past the last frame while the audio runs. */
    double t_start = -fmax((h * s + 6.0) * 1e-3 / 0.2, sc->audio_offset_s);
    double t_stop = sc->audio_len_s - sc->audio_offset_s - 0.1;
    size_t cap = 0, n = 0, pcap = 0, np = 0;
    synth_track *t = NULL;
    synth_ping *pg = NULL;
    double te = t_start + gap_mean_s * rng_unit(ka, 1);
    for (uint64_t e = 0; te <= t_stop; e++) {
        uint64_t kb = rng_key(seed, RNG_BUBBLE, 300, e);
        int k = rng_unit(kb, 0) < 0.5 ? 0 : 1;
        double d_mm = d_lo[k] * pow(d_hi[k] / d_lo[k], rng_unit(kb, 1));
        if (np == pcap) {
            size_t nc = pcap ? 2 * pcap : 64;
            synth_ping *nq = realloc(pg, nc * sizeof *nq);
            if (!nq) {
                free(t);
                free(pg);
                free(site);
                return sp_error_set(err, SP_ERR_INTERNAL, "synth: nozzle: out of memory for %zu pings", nc);
            }
            pg = nq;
            pcap = nc;
        }
        synth_ping *p = &pg[np++];
        p->t_video_s = te;
        p->r_mm = 0.5 * d_mm;
        p->snr_db = rng_range(kb, 2, 20.0, 35.0);
        p->nozzle = k + 1;
        p->track = 0;
        if (te <= t_end) {
            int rc = SP_OK;
            synth_track *tr = push_track(&t, &n, &cap, "nozzle", sc->frames, &rc, err);
            if (!tr) {
                free(t);
                free(pg);
                free(site);
                return rc;
            }
            double u = fmin(0.3, fmax(0.2, rise_speed_m_s(d_mm) * (1.0 + 0.04 * rng_normal(kb, 3))));
            tr->source = k + 1;
            tr->d_vol_px = d_mm / s;
            tr->aspect = wellek_aspect(d_mm);
            tr->aspect_amp = 0.02 + 0.02 * rng_unit(kb, 4);
            tr->t0 = te;
            tr->x0 = site[k].x_px;
            tr->y0 = tip_y - 0.5 * tr->d_vol_px / tr->aspect;
            tr->vy = -u * 1e3 / s;
            tr->vx = rng_normal(kb, 5) * 10.0 / s;
            /* The wobble starts at zero displacement: the bubble leaves the tip on its axis. */
            tr->wob_amp = (0.1 + 0.15 * d_mm) * rng_range(kb, 6, 0.6, 1.2) / s;
            tr->wob_hz = rng_range(kb, 7, 6.0, 11.0);
            tr->wob_ph = rng_unit(kb, 8) < 0.5 ? 0.0 : PI;
            tr->tilt0 = 5.0 * rng_normal(kb, 9);
            tr->tilt_amp = d_mm > 2.0 ? rng_range(kb, 10, 8.0, 20.0) : rng_range(kb, 10, 0.0, 6.0);
            tr->z_mm = z_noz[k] + 0.3 * rng_normal(kb, 11);
            random_look(tr, kb);
            tr->ping = np;
            int64_t fb = (int64_t)ceil(te * fps);
            if (track_extent(sc, tr, fb)) {
                tr->born = tr->f_first == fb;
                tr->site = tr->born ? k + 1 : 0;
            } else {
                n--;
            }
        }
        te += gap_min_s - gap_mean_s * log(rng_unit(kb, 12));
    }
    for (int k = 0; k < NN; k++)
        site[k].y_px = tip_y - 0.5 * site[k].d_detach_mm / s / wellek_aspect(site[k].d_detach_mm);
    finish_tracks(sc, t, n);
    for (size_t i = 0; i < n; i++)
        if (t[i].ping)
            pg[t[i].ping - 1].track = t[i].id;
    sc->sites = site;
    sc->nsites = NN;
    sc->pings = pg;
    sc->npings = np;
    return SP_OK;
}

int synth_scene_build(const char *name, const sp_synth_opts *o, synth_scene *sc, sp_error *err)
{
    memset(sc, 0, sizeof *sc);
    if (!name || !sp_synth_describe(name))
        return sp_error_set(err, SP_ERR_INPUT,
                            "synth: unknown scenario '%s' (try sizing, plume, column, nucleation or nozzle)",
                            name ? name : "");
    enum {
        SIZING,
        PLUME,
        COLUMN,
        NUCLEATION,
        NOZZLE
    } kind = strcmp(name, "sizing") == 0       ? SIZING
             : strcmp(name, "plume") == 0      ? PLUME
             : strcmp(name, "column") == 0     ? COLUMN
             : strcmp(name, "nucleation") == 0 ? NUCLEATION
                                               : NOZZLE;
    const char *const *names = sp_synth_scenarios();
    sc->name = names[kind];
    sc->description = sp_synth_describe(name);
    if (kind == SIZING) {
        sc->width = 1280;
        sc->height = 1024;
        sc->frames = 20;
        sc->fps = 60.0; /* so 100 Hz mains flicker changes from frame to frame */
        sc->mm_per_px = 0.02;
        sc->exposure_s = 1e-4;
        sc->dof_mm = 1.0;
        sc->blur_px_per_mm = 2.0; /* blur disc of 1 px at the edge of the depth of field */
    } else if (kind == PLUME) {
        sc->width = 640;
        sc->height = 800;
        sc->frames = 300;
        sc->fps = 500.0;
        sc->mm_per_px = 0.05;
        sc->exposure_s = 1.0 / 3000.0;
        sc->dof_mm = 3.0;
        sc->blur_px_per_mm = 1.0 / 1.5;
    } else if (kind == COLUMN) {
        sc->width = 640;
        sc->height = 800; /* 32 × 40 mm */
        sc->frames = 200;
        sc->fps = 500.0; /* 0.2-0.3 m/s: 8-12 px per frame, well under a bubble's size */
        sc->mm_per_px = 0.05;
        sc->exposure_s = 1.0 / 5000.0;
        sc->dof_mm = 3.0;
        sc->blur_px_per_mm = 1.0 / 1.5;
    } else if (kind == NOZZLE) {
        sc->width = 400;
        sc->height = 560; /* 20 x 28 mm: 1 mm is 20 px */
        sc->frames = 800;
        sc->fps = 400.0; /* 2 s; 0.2-0.3 m/s is 10-15 px per frame */
        sc->mm_per_px = 0.05;
        sc->exposure_s = 1.0 / 8000.0;
        sc->dof_mm = 4.0;
        sc->blur_px_per_mm = 1.0 / 1.5;
    } else {
        sc->width = 512;
        sc->height = 640; /* 5.12 × 6.4 mm: a macro view of the wall */
        sc->frames = 300;
        sc->fps = 150.0; /* 2 s: the 3 Hz site emits 6 bubbles; the fastest move ~15 px per frame */
        sc->mm_per_px = 0.01;
        sc->exposure_s = 1.0 / 5000.0;
        sc->dof_mm = 0.3; /* macro optics: shallow; the sites lie on the wall, in focus */
        sc->blur_px_per_mm = 10.0;
    }
    if (o->width > 0)
        sc->width = o->width;
    if (o->height > 0)
        sc->height = o->height;
    if (o->frames > 0)
        sc->frames = o->frames;
    if (o->width < 0 || o->height < 0 || o->frames < 0)
        return sp_error_set(err, SP_ERR_INPUT, "synth: negative frame size or count");
    if (sc->width < 16 || sc->height < 16)
        return sp_error_set(err, SP_ERR_INPUT, "synth: frame size %dx%d is too small (at least 16x16)",
                            sc->width, sc->height);
    int rc = sp_check_dims(sc->width, sc->height, "synth", err);
    if (rc)
        return rc;
    if (sc->frames > 1000000)
        return sp_error_set(err, SP_ERR_INPUT, "synth: %lld frames is more than the 1000000 allowed",
                            (long long)sc->frames);
    switch (kind) {
    case SIZING:
        return build_sizing(sc, o->seed, err);
    case PLUME:
        return build_plume(sc, o->seed, err);
    case COLUMN:
        return build_column(sc, o->seed, err);
    case NOZZLE:
        return build_nozzle(sc, o->seed, err);
    default:
        return build_nucleation(sc, o->seed, err);
    }
}

void synth_scene_free(synth_scene *sc)
{
    if (!sc)
        return;
    free(sc->tracks);
    free(sc->sites);
    free(sc->pings);
    memset(sc, 0, sizeof *sc);
}

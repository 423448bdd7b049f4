/* Scenarios of the synthesiser: the bubbles' trajectories and looks, and the optics of the set-up.
 * Internal to the synth layer. */
#ifndef SP_SYNTH_SCENES_H
#define SP_SYNTH_SCENES_H

#include "synth/render.h"
#include "synth/synth.h"

/* One bubble over its life. Positions in pixels (y down), time in seconds:
 *   x(t) = x0 + vx·(t − t0) + wob_amp·sin(2π·wob_hz·(t − t0) + wob_ph),  y(t) = y0 + vy·(t − t0).
 * Its volume-equivalent diameter is d_vol_px + growth_px_s·(t − t0) (constant when growth is 0);
 * with rise_law 1 the rise speed follows that diameter (synth_rise_small_mm_s) and y is its
 * integral. The aspect ratio breathes slightly with the wobble. */
typedef struct synth_track {
    int id;                  /* truth track id, ≥ 1, in order of first appearance */
    int site;                /* site it was born at in view (≥ 1), the plume's nozzle, or 0 */
    int source;              /* site or nozzle it came from, even when born before the run, or 0 */
    int born;                /* 1: seen from its birth (detachment) inside the picture */
    double growth_px_s;      /* rate of change of the volume-equivalent diameter (0 = constant) */
    int rise_law;            /* 0: vy constant; 1: vy = −(small-bubble rise speed of the diameter) */
    double mm_per_px;        /* scale, for rise_law 1 */
    int64_t f_first, f_last; /* frames in which any of it is in the picture */
    double t0, x0, y0, vx, vy, wob_amp, wob_hz, wob_ph;
    double d_vol_px, aspect, aspect_amp, tilt0, tilt_amp;
    double z_mm; /* distance from the focal plane */
    double band, shoulder, spot, spot_frac, spot_u, spot_v;
    size_t ping; /* 1 + index of its detachment ping in the scene's list, or 0 */
} synth_track;

/* A bubble in one frame, in pixels. */
typedef struct synth_state {
    double x, y, major, minor, tilt_deg, vx, vy; /* full axes; velocity px/s, y down */
} synth_state;

/* A nucleation site: a fixed point that emits a train of bubbles (generating parameters). */
typedef struct synth_site {
    double x_px, y_px;  /* bubble centre at detachment */
    double rate_hz;     /* nominal emission rate */
    double interval_cv; /* jitter of the intervals (std / mean) */
    double d_detach_mm; /* mean diameter at detachment */
    double growth_mm_s; /* mean growth rate of the diameter after detachment (2·dR/dt) */
} synth_site;

/* The sound of one detachment (scenes with audio). */
typedef struct synth_ping {
    double t_video_s; /* detachment (pinch-off) time on the video clock */
    double r_mm;      /* volume-equivalent radius of the detached bubble */
    double snr_db;    /* A^2 / (2 noise variance), full band */
    int nozzle;       /* 1-based */
    int track;        /* truth track id, or 0 when the bubble is never in the picture */
} synth_ping;

typedef struct synth_scene {
    const char *name, *description;
    int width, height;
    int64_t frames;
    double fps, mm_per_px;
    double exposure_s;     /* shutter time: motion blur is velocity × exposure */
    double dof_mm;         /* depth of field: |z| <= dof/2 is in focus */
    double blur_px_per_mm; /* defocus disc radius per mm of |z| */
    synth_track *tracks;   /* sorted by f_first; owned */
    size_t ntracks;
    int64_t max_life;  /* longest f_last - f_first + 1, for finding the live tracks */
    synth_site *sites; /* nucleation sites in view (truth_sites.csv), owned; NULL if none */
    size_t nsites;
    /* Paired audio (nozzle scene): pings sorted by time, owned; NULL when the scene is silent. */
    synth_ping *pings;
    size_t npings;
    int audio_rate;        /* samples per second */
    double audio_offset_s; /* audio clock = video clock + this (the audio started earlier) */
    double audio_len_s;    /* length of the recording */
    double noise_rms;      /* white background noise, full scale */
    double depth_m;        /* depth of the nozzle below the free surface */
} synth_scene;

/* Terminal rise speed (mm/s) of a small bubble of diameter d_mm in water at 20 °C that behaves as
 * a rigid sphere (surfactant-laden surface): Stokes drag with the Schiller & Naumann (1933)
 * correction C_D = 24/Re·(1 + 0.15 Re^0.687), solved by Newton's method. */
double synth_rise_small_mm_s(double d_mm);

int synth_scene_build(const char *name, const sp_synth_opts *o, synth_scene *sc, sp_error *err);
void synth_scene_free(synth_scene *sc);
void synth_track_state(const synth_track *tr, double t, synth_state *st);
/* How the track looks at that state (contrast, defocus, motion smear from the scene's optics). */
void synth_track_look(const synth_scene *sc, const synth_track *tr, const synth_state *st,
                      sp_bubble_look *lk);
/* Whether any of the bubble is in the picture (its box reaches past a border pixel's centre). */
int synth_state_visible(const synth_scene *sc, const synth_state *st);

#endif

/* The listen job: audio in, DIR/pings.csv and DIR/listen.json out. */
#ifndef SP_ACOUSTIC_LISTEN_H
#define SP_ACOUSTIC_LISTEN_H

#include "acoustic/minnaert.h"
#include "acoustic/pings.h"
#include "physics/liquid.h"
#include "spume.h"

typedef struct sp_listen_settings {
    int channel;             /* channel analysed, from 0; -1 = mean of all channels (default 0) */
    double r_min_mm;         /* smallest radius sought (default 0.2): sets the band's top and the
                                sample-rate check */
    double r_max_mm;         /* largest radius sought (default 5): sets the band's bottom */
    double nyquist_frac;     /* the smallest radius's frequency must be below this fraction of the
                                sample rate (default 0.4) */
    double temp_c;           /* liquid temperature, recorded (default 20); the liquid numbers below
                                are what the physics uses */
    sp_bubble_medium medium; /* liquid, gas, depth, model (sp_bubble_medium_default) */
    sp_ping_opts ping;       /* detector (sp_ping_opts_default; band set from the radii) */
    int write_rejected;      /* 1: pings.csv also lists rejected candidates (status column) (default 0) */
    char liquid[64];         /* name of the liquid the medium came from, recorded (default "water") */
    char liquid_file[1024];  /* preset file it was read from, recorded (default "built-in") */
    char gas[8];             /* gas in the bubbles, recorded: "air" (default) or "co2" */
    sp_progress_fn progress; /* may be NULL: phase "listen", done/total in milliseconds of audio
                                (total -1 if the container does not say), from the calling thread */
    void *progress_ud;
} sp_listen_settings;

void sp_listen_settings_default(sp_listen_settings *s);

/* Fill the medium of s from a liquid (sp_liquid_preset / sp_liquid_water): density, surface tension,
 * vapour pressure, pressure above the surface, gravity and depth, and the gas in the bubbles (air or
 * CO2, from the molar mass) with its ratio of specific heats and its thermal diffusivity
 * D = k / (rho_gas c_p) at the liquid's temperature and the pressure at depth. Records temp_c, liquid
 * and gas. A gas other than air or CO2: SP_ERR_INPUT naming `what`. The model is left as it was. */
int sp_listen_use_liquid(sp_listen_settings *s, const sp_liquid *l, const char *what, sp_error *err);

typedef struct sp_listen_report {
    int sample_rate, channels;
    int64_t samples;
    double duration_s;
    double f_lo_hz, f_hi_hz; /* analysis band */
    int64_t candidates, pings;
    int64_t rejected[5]; /* by SP_PING_* status (index 0 unused) */
} sp_listen_report;

/* Analyse AUDIO, write outdir/pings.csv (t_s, f_hz, decay_s, snr_db, r_mm, amplitude, q, r2,
 * kappa_eff, f_crb_hz[, status]) and outdir/listen.json, each under a temporary name renamed when
 * complete. A sample rate too low for r_min_mm is SP_ERR_INPUT naming the file, the rate and the
 * radius. rep may be NULL. */
int sp_listen(const char *audio, const char *outdir, const sp_listen_settings *s, sp_listen_report *rep,
              sp_error *err);

#endif

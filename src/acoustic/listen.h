/* The listen job: audio in, DIR/pings.csv and DIR/listen.json out. */
#ifndef SP_ACOUSTIC_LISTEN_H
#define SP_ACOUSTIC_LISTEN_H

#include "acoustic/minnaert.h"
#include "acoustic/pings.h"
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
} sp_listen_settings;

void sp_listen_settings_default(sp_listen_settings *s);

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

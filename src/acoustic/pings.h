/* Ping detection in a stream of samples: onsets on a band-limited energy envelope above an adaptive
 * noise floor (running percentile), each ping then fitted (estimate.h) and judged: clicks, overlaps,
 * out-of-band and failed fits are rejected with a reason. Memory is bounded by max_s of signal plus the
 * floor window of hop energies, whatever the recording length. */
#ifndef SP_ACOUSTIC_PINGS_H
#define SP_ACOUSTIC_PINGS_H

#include "spume.h"

#include <stdint.h>

typedef struct sp_ping_opts {
    double f_lo_hz, f_hi_hz; /* analysis band: 4th-order Butterworth-type band-pass (no default: the
                                caller derives it from the radii asked) */
    double hop_s;            /* envelope hop: mean square of the band signal per hop (default 0.5 ms) */
    double floor_s;          /* length of the running noise-floor window (default 1 s) */
    double floor_pct;        /* percentile of the hop energies taken as the floor (default 50) */
    double snr_min_db;       /* onset: hop energy this far above the floor (default 10 dB) */
    double end_db;           /* a ping ends when its envelope falls to floor + end_db (default 3 dB) */
    double rise_db;          /* in a decay, a rise this far above the lowest hop since the peak is a
                                second onset: both pings are rejected as overlapping (default 6 dB) */
    double max_s;            /* longest segment analysed per ping (default 0.1 s) */
    double q_min;            /* ringing: quality factor pi f / beta at least this (default 5; the total
                                damping of air bubbles in water, delta = 1/Q, stays below 0.1 from
                                0.1 mm up, so real pings have Q > 10 while clicks ring for a sample
                                or two at the band edge) */
    double r2_min;           /* the damped sinusoid must explain this fraction of the energy (0.5) */
    double warmup_s;         /* no onsets before the floor has this much history (default 0.02 s) */
} sp_ping_opts;

void sp_ping_opts_default(sp_ping_opts *o);

enum {
    SP_PING_OK = 0,      /* accepted */
    SP_PING_CLICK = 1,   /* too short or without ringing (q < q_min): a click or knock */
    SP_PING_OVERLAP = 2, /* a second onset inside the decay */
    SP_PING_BAND = 3,    /* fitted frequency outside the band */
    SP_PING_FIT = 4      /* the damped sinusoid does not describe the event (r2 < r2_min, beta <= 0) */
};

typedef struct sp_ping {
    int64_t onset; /* sample index of the onset */
    double t_s;    /* onset time, s from the first sample */
    int64_t n;     /* samples analysed */
    double f_hz, beta_s, amp, phase_rad, snr_db, r2, q;
    double f_crb_hz;  /* Cramer-Rao standard deviation of f for this ping's parameters and noise */
    double detect_db; /* peak hop energy above the floor */
    int status;       /* SP_PING_* */
} sp_ping;

/* Called once per candidate, in onset order, accepted or not. A non-zero return stops the detector
 * and is passed on (fill err). */
typedef int (*sp_ping_fn)(void *ud, const sp_ping *p, sp_error *err);

typedef struct sp_pings sp_pings;

/* `what` names the input in errors (copied). *out owned by the caller, freed with sp_pings_free. */
int sp_pings_new(sp_pings **out, double fs, const sp_ping_opts *o, sp_ping_fn fn, void *ud, const char *what,
                 sp_error *err);
int sp_pings_feed(sp_pings *d, const float *x, int n, sp_error *err);
/* End of the stream: a ping still ringing is analysed with what there is. */
int sp_pings_finish(sp_pings *d, sp_error *err);
void sp_pings_free(sp_pings *d);

const char *sp_ping_status_name(int status);

#endif

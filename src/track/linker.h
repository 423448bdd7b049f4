/* Frame-to-frame linking of detections into tracks. */
#ifndef SP_TRACK_LINKER_H
#define SP_TRACK_LINKER_H

#include "spume.h"

/* One detection handed to the linker (pixels, y down, as in sp_bubble). */
typedef struct sp_link_det {
    double x, y;     /* centroid */
    double d_px;     /* volume-equivalent diameter (sp_bubble.d_vol_px) */
    double aspect;   /* minor / major, (0, 1] */
    double tilt_deg; /* major axis from +x, counter-clockwise, (-90, 90] */
    double area_px;  /* filled area */
    int edge;        /* outline not the bubble's own: cut by the frame or region border, or an
                        unsplit cluster of overlapping bubbles */
} sp_link_det;

typedef struct sp_linker_opts {
    double fps_hint;        /* > 0: time steps are (t_s difference) × fps_hint frames, so skipped or
                               unevenly timed frames get their true step; 0: steps come from frame
                               numbers (default 0) */
    int max_gap;            /* frames in a row a track may miss and still be continued (default 3) */
    int max_gap_hidden;     /* the same while its prediction lies inside a detection flagged edge (cut
                               by the border, or merged with another bubble) (default 50) */
    double gate_px_min;     /* smallest gate radius around the prediction, px (default 3) */
    double gate_diam_frac;  /* gate radius at least this × the track's diameter (default 1.0) */
    double gate_speed_frac; /* and at least this × predicted speed × frames since last seen (0.5) */
    double birth_speed_px;  /* largest step per frame expected of a bubble seen only once (no
                               velocity yet): its gate is at least this × frames since seen, and
                               its velocity prior has half this as spread, px/frame (default 10) */
    double meas_sigma_px;   /* Kalman measurement noise, std of a centroid, px (default 0.5) */
    double accel_sigma_px;  /* Kalman process noise, std of the acceleration, px/frame² (default 0.5) */
    double w_size;          /* cost weight on (relative change of diameter)² (default 10) */
    double w_aspect;        /* cost weight on (change of aspect)² (default 5) */
    double cost_max;        /* pairs dearer than this are not linked; also the price of leaving a
                               track without a detection in a frame (default 30) */
    double cost_hidden;     /* a track hidden in a merged or cut detection pays this on top of taking
                               a flagged detection, and on top of taking the merge for staying hidden
                               instead (default 5) */
    int max_points;         /* a track holding this many detections is ended and the next detection
                               starts a new one, so memory never grows with the run (default 100000) */
} sp_linker_opts;

void sp_linker_opts_default(sp_linker_opts *o);

/* One detection of a track, in the order linked. */
typedef struct sp_track_point {
    int64_t frame;
    double t_s;
    double x, y, d_px, aspect, tilt_deg, area_px;
    int edge;
} sp_track_point;

/* A finished track: owned by the caller once handed out, released with sp_track_free. */
typedef struct sp_track {
    int64_t id; /* >= 1, in order of birth */
    int n;      /* detections */
    int missed; /* frames coasted without a detection inside the track (gap-closed frames) */
    sp_track_point *pts;
} sp_track;

void sp_track_free(sp_track *t);

typedef struct sp_linker sp_linker;

/* *out is owned by the caller, released with sp_linker_free. o = NULL: defaults. */
int sp_linker_new(sp_linker **out, const sp_linker_opts *o, sp_error *err);
void sp_linker_free(sp_linker *lk);

/* Link the n detections of frame `frame` (time t_s). Frames must come in increasing order.
 * Each detection gets a track id (>= 1) in ids[i]; new ids are given in order of birth, and within
 * a frame in detection order, so the result depends only on the input. Tracks that miss more than
 * max_gap frames are ended and wait in a queue for sp_linker_pop_ended. Bad input (SP_ERR_INPUT:
 * frames out of order, time not advancing, non-finite values) is rejected before any state
 * changes, so the linker stays usable; after SP_ERR_INTERNAL (out of memory) it may only be freed. */
int sp_linker_push(sp_linker *lk, int64_t frame, double t_s, const sp_link_det *d, int n, int64_t *ids,
                   sp_error *err);

/* Hand out the next ended track (oldest ending first, then by id): returns 1 and sets *out, or 0
 * when none is waiting. The caller frees *out with sp_track_free. */
int sp_linker_pop_ended(sp_linker *lk, sp_track **out);

/* End every active track (they join the queue for sp_linker_pop_ended, by id). Returns 0, or
 * SP_ERR_INTERNAL when out of memory (tracks that could not be queued stay active). */
int sp_linker_finish(sp_linker *lk);

/* Tracks currently held (active, not yet ended). */
int sp_linker_active(const sp_linker *lk);

/* Constant-velocity Kalman filter (Kalman 1960) for a point in the plane. Both axes share one
 * model, so one 2×2 covariance [[p00, p01], [p01, p11]] (position, velocity) serves both. */
typedef struct sp_kalman_cv {
    double x, y, vx, vy;
    double p00, p01, p11;
} sp_kalman_cv;

/* State transition over dt frames with white-acceleration process noise of spectral level q
 * (Q = q·[[dt⁴/4, dt³/2], [dt³/2, dt²]]; q = accel_sigma²). */
void sp_kalman_cv_predict(sp_kalman_cv *k, double dt, double q);
/* Measurement update with a position (zx, zy) of variance r per axis. */
void sp_kalman_cv_update(sp_kalman_cv *k, double zx, double zy, double r);

#endif

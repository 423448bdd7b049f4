/* Nucleation sites: fixed points that emit trains of bubbles, found by clustering the birth
 * points of tracks (DBSCAN, Ester, Kriegel, Sander & Xu 1996, with a radius scaled to the bubbles'
 * first diameters). See docs/methods-sites.md.
 *
 * Input is one record per track; output is one record per site and, for every input record, the
 * id of the site it was born at (0 = none). The result does not depend on the order of the input
 * records. Units are whatever the caller uses consistently (millimetres and seconds in the
 * pipeline; pixels when uncalibrated). */
#ifndef SP_TRACK_SITES_H
#define SP_TRACK_SITES_H

#include "spume.h"

typedef struct sp_birth {
    int64_t track;       /* track id, carried through for the caller's bookkeeping */
    double x0_mm, y0_mm; /* birth point: centroid at the first detection (y upward) */
    double t0_s;         /* time of the first detection */
    double d0_mm;        /* first diameter (d_vol); <= 0 or non-finite: unknown */
    double growth_mm_s;  /* the track's growth rate of d_vol (non-finite: unknown) */
    int born_inside;     /* 1: first seen away from the frame border (a birth); 0: entered from outside,
                            or already in view in the first analysed frame (not seen being born) */
} sp_birth;

typedef struct sp_site {
    int id;            /* >= 1, ordered by x_mm, then y_mm, then t_first_s */
    double x_mm, y_mm; /* median of the member births */
    int64_t n;         /* births (tracks) at the site */
    double t_first_s, t_last_s;
    double rate_hz;     /* (n - 1) / (t_last - t_first); 0 if the span is 0 */
    double interval_cv; /* sample std / mean of the intervals between births; NaN if n < 3 */
    double d_detach_mm; /* median first diameter of the member births (NaN if none known) */
    double growth_mm_s; /* median growth rate of the member tracks (NaN if none known) */
    double spread_mm;   /* median distance of the member births from (x_mm, y_mm) */
} sp_site;

typedef struct sp_sites_opts {
    double eps_diam;   /* neighbourhood radius in first diameters; a pair uses the smaller of the two
                          radii, so a large late-found bubble cannot reach far (2.0) */
    double eps_min_mm; /* floor on the radius, e.g. the localisation error of a small bubble (0) */
    double eps_mm;     /* > 0: a fixed radius instead of the size-scaled one (0) */
    double y_weight;   /* vertical distances count this much: births of one site string out
                          upward when the first frames are missed (0.5) */
    double d_cap;      /* first diameters are capped at d_cap × the median first diameter when
                          scaling the radius, so one large late-found bubble cannot join far-apart
                          sites (4.0) */
    int min_births;    /* DBSCAN MinPts, the point itself included: births within the radius that
                          make a core point; also the least births a site may have (3) */
    double max_spread;  /* a cluster whose births scatter (median distance from its centre) more than
                           this × its detachment diameter is not a site but track fragments; 0 = no
                           limit (default 0.5) */
} sp_sites_opts;

void sp_sites_opts_default(sp_sites_opts *o);

typedef struct sp_sites {
    sp_site *site; /* nsites entries, owned */
    size_t nsites;
    int *track_site; /* one per input record, in input order: site id or 0; owned */
    size_t ntracks;
} sp_sites;

/* Cluster the births. On success *out holds the result (free with sp_sites_free); on failure it
 * is left empty. Births with non-finite position or time, or born_inside == 0, are never members.
 * Returns SP_OK, SP_ERR_INPUT (bad options) or SP_ERR_INTERNAL (out of memory). */
int sp_sites_find(const sp_birth *births, size_t n, const sp_sites_opts *o, sp_sites *out, sp_error *err);
void sp_sites_free(sp_sites *s);

#endif

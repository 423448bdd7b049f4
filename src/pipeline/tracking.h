/* The run-level part of tracking: feeds the linker frame by frame, computes each ended track's
 * kinematics and correlations, and at the end finds nucleation sites and size statistics, and
 * writes tracks.csv and sites.csv. Memory grows with the number of tracks (one small record each),
 * never with the number of frames. */
#ifndef SP_PIPELINE_TRACKING_H
#define SP_PIPELINE_TRACKING_H

#include "spume.h"
#include "core/jsonw.h"
#include "detect/measure.h"
#include "physics/liquid.h"

typedef struct sp_trackrun sp_trackrun;

typedef struct sp_trackrun_opts {
    double mm_per_px;    /* 0 = pixels */
    int full_height;     /* frame height for y upward */
    int roi_x, roi_y;    /* offset of the analysed region in the frame */
    int width, height;   /* analysed region, px */
    double fps;          /* for the linker's time steps (0: from frame numbers) */
    int max_gap;         /* frames a track may miss */
    int64_t first_frame; /* index of the first analysed frame: tracks already in view there are not births */
    const sp_liquid *liquid;
    int keep_defocused; /* 1: tracks mostly out of focus still count in the size statistics */
} sp_trackrun_opts;

int sp_trackrun_new(sp_trackrun **out, const sp_trackrun_opts *o, sp_error *err);
void sp_trackrun_free(sp_trackrun *tr);
/* Link one frame's bubbles (coordinates of the analysed region); ids[i] receives each track id. */
int sp_trackrun_frame(sp_trackrun *tr, int64_t frame, double t_s, const sp_bubble *b, int n, int64_t *ids,
                      sp_error *err);
/* End all tracks, find sites. */
int sp_trackrun_finish(sp_trackrun *tr, sp_error *err);
size_t sp_trackrun_count(const sp_trackrun *tr);
/* Tables (after finish). */
void sp_trackrun_write_tracks(const sp_trackrun *tr, FILE *f);
void sp_trackrun_write_sites(const sp_trackrun *tr, FILE *f);

typedef struct sp_stats_opts {
    int boot;                    /* bootstrap replicates (0 = no intervals) */
    int bins;                    /* histogram bins */
    int bins_log;                /* log-spaced bins */
    double bin_lo_mm, bin_hi_mm; /* 0, 0 = from the data */
    double duration_s;           /* span of the analysed frames */
    int threads;
} sp_stats_opts;

/* Write the "tracks"-based keys of summary.json: d10_mm, d32_mm, d43_mm at the top level (already
 * inside the open object), then "statistics" and "sites" objects. holdup_volume: mean gas volume
 * fraction (NAN when the illuminated depth is unknown). */
int sp_trackrun_write_summary(const sp_trackrun *tr, sp_jsonw *j, const sp_stats_opts *o,
                              double holdup_volume, sp_error *err);

#endif

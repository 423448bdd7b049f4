/* Synthetic shadowgraph scenes with exact truth, for testing and demonstrating the pipeline.
 *
 * sp_synth_run renders a named scenario into DIR: frames/frame_%05d.png, video.mkv (FFV1),
 * truth_bubbles.csv, truth_tracks.csv and scene.json (see docs and CONTRACT.md "Truth files").
 * Output is byte-identical for the same options at any thread count. */
#ifndef SP_SYNTH_SYNTH_H
#define SP_SYNTH_SYNTH_H

#include "spume.h"

typedef struct sp_synth_opts {
    int bytes;         /* 1 = 8-bit frames (default), 2 = 16-bit */
    int bits;          /* significant bits for 16-bit output, e.g. 12 for a 12-bit camera (default 16) */
    uint64_t seed;     /* default fixed (1), so runs are reproducible */
    int frames;        /* 0 = the scenario's default */
    int width, height; /* 0 = the scenario's default */
    int png;           /* write DIR/frames/frame_%05d.png (default 1) */
    int video;         /* write DIR/video.mkv, FFV1 (default 1) */
    int threads;       /* 0 = OpenMP default */
    void (*progress)(void *ud, int64_t done, int64_t total); /* may be NULL; called in order */
    void *progress_ud;
} sp_synth_opts;

void sp_synth_opts_default(sp_synth_opts *o);

/* Render `scenario` into `outdir` (created if missing). Returns SP_OK, SP_ERR_INPUT (unknown
 * scenario, bad option, unwritable directory) or SP_ERR_INTERNAL, with *err filled. */
int sp_synth_run(const char *scenario, const char *outdir, const sp_synth_opts *o, sp_error *err);

/* NULL-terminated list of scenario names (static storage), for --help. */
const char *const *sp_synth_scenarios(void);

/* One-line description of a scenario, or NULL if the name is unknown. */
const char *sp_synth_describe(const char *scenario);

#endif

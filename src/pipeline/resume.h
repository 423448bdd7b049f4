/* Carrying an interrupted measure run on (`spume measure --resume`).
 *
 * During every run with tracking, the exact detections handed to the linker are appended to a spill
 * file (a hidden temporary name in DIR). When the run is interrupted, after the tables are committed,
 * the spill is renamed to DIR/resume.links and a checkpoint DIR/resume.checkpoint is written
 * atomically: the settings and input fingerprint, the background estimate, the running totals, the
 * next frame, and the valid length and checksum of the spill and of the two per-frame tables. A
 * resumed run validates all of it, replays the spill into a fresh linker (so the linker sees exactly
 * the detections it would have seen), copies bubbles.csv and frames.csv into its own temporary
 * tables and goes on decoding from the next frame. A finished run removes both files.
 * Both files are untrusted input on resume: magic, version, bounded sizes, checksums. */
#ifndef SP_PIPELINE_RESUME_H
#define SP_PIPELINE_RESUME_H

#include "spume.h"
#include "detect/measure.h"
#include "physics/liquid.h"
#include "pipeline/tracking.h"

#include <stdio.h>

#define SP_RESUME_CHECKPOINT "resume.checkpoint"
#define SP_RESUME_LINKS "resume.links"

/* The background estimate as measure.c keeps it (n images of width × height, each standing for
 * selection position centre[k]). */
typedef struct sp_resume_bg {
    int n, width, height;
    float **img;
    double *centre;
    char mode[32];
    int samples, still_filled;
} sp_resume_bg;

typedef struct sp_resume sp_resume;

/* --resume, before anything else: is there an interrupted run in outdir? Refuses (SP_ERR_INPUT)
 * when outdir is missing, holds a complete run, or holds no checkpoint. */
int sp_resume_check(const char *outdir, sp_error *err);

/* Start the checkpoint bookkeeping of a run into outdir. info describes the source opened with the
 * run's own selection. With s->resume set this loads and checks DIR's checkpoint (settings, input,
 * tables, background; the spill is checked while replaying) and refuses with SP_ERR_INPUT naming
 * the file and the problem; DIR is left untouched by a refusal. Without it, the spill file is
 * opened (when tracking). *out is owned by the caller, released with sp_resume_free. */
int sp_resume_begin(sp_resume **out, const char *input, const char *outdir, const sp_measure_settings *s,
                    const sp_liquid *liq, const sp_source_info *info, sp_error *err);
void sp_resume_free(sp_resume *r);

/* 1 when this run goes on from a checkpoint. */
int sp_resume_active(const sp_resume *r);
/* Source options to decode the rest of the selection (the same frames, indices and times as the
 * interrupted run would have gone on with). */
void sp_resume_source_opts(const sp_resume *r, sp_source_opts *o);
/* Resuming and nothing is left to decode (the interrupt came after the last frame). */
int sp_resume_exhausted(const sp_resume *r);
/* Frames delivered before the interrupt (0 for a fresh run). */
int64_t sp_resume_pos(const sp_resume *r);
/* Copy the saved running totals (exactly size bytes) into dst; no-op on a fresh run. */
int sp_resume_totals(const sp_resume *r, void *dst, size_t size, sp_error *err);
/* Hand the saved background to the caller (who then owns its images); returns 0 on a fresh run. */
int sp_resume_take_bg(sp_resume *r, sp_resume_bg *bg);
/* Copy DIR/name (bubbles.csv or frames.csv, header included) into dst, checking its size and
 * checksum against the checkpoint's. */
int sp_resume_copy_table(sp_resume *r, const char *name, FILE *dst, sp_error *err);
/* Feed the saved linker inputs to tr, after checking the whole spill; with the first new frame the
 * spill is cut to its valid length and appended to. No-op on a fresh run. */
int sp_resume_replay(sp_resume *r, sp_trackrun *tr, sp_error *err);

/* Fresh run: note the first analysed frame (input fingerprint). */
void sp_resume_first_frame(sp_resume *r, const sp_image *img);
/* Append one frame's linker inputs to the spill. */
int sp_resume_spill(sp_resume *r, int64_t frame, double t_s, const sp_bubble *b, int n, sp_error *err);

/* Before committing the tables of an interrupted run: remove the checkpoint they would outdate. */
void sp_resume_invalidate(sp_resume *r);
/* After committing them: keep the spill under its final name and write the checkpoint. */
int sp_resume_save(sp_resume *r, const sp_resume_bg *bg, int64_t pos, int64_t next_frame, const void *totals,
                   size_t totals_size, sp_error *err);
/* A finished run: the checkpoint and the spill are removed. */
void sp_resume_done(sp_resume *r);

#endif

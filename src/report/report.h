/* The report of a measure output folder: overlay PNGs of chosen frames, an optional annotated video
 * of every frame, SVG plots and one self-contained DIR/report.html (inline SVG and CSS, thumbnails as
 * data: URIs; nothing is fetched from a network). Reads only files: bubbles.csv, frames.csv and
 * summary.json (required), tracks.csv, sites.csv, pairs.csv (each used when present), and the
 * recording named in summary.json "input"."path" for the overlays. */
#ifndef SP_REPORT_REPORT_H
#define SP_REPORT_REPORT_H

#include "spume.h"

typedef struct sp_report_result {
    int64_t frames, detections, tracks, sites, pairs;
    double fps, mm_per_px, holdup;
    double d10_mm, d32_mm, d43_mm; /* over tracks (or detections when there are no tracks) */
    int size_basis_tracks;         /* 1: sizes above are one per track; 0: per detection */
    int plots, tables, overlays;   /* items in the report */
    int video;                     /* 1: the annotated video was written */
    char overlay_note[1200];       /* why there are no overlays, if there are none */
    char html[4096];               /* path of report.html */
    char video_path[4096];         /* path of the annotated video, if written */
} sp_report_result;

typedef struct sp_report_opts {
    const char *input;     /* the recording; NULL = summary.json input.path (resolved as given, then
                              relative to DIR and DIR's parent) */
    const int64_t *frames; /* frames to draw as overlay PNGs; NULL = `thumbnails` evenly spread */
    int nframes;
    int thumbnails;           /* default 4 */
    int video;                /* 1: write DIR/overlay.mkv, every frame annotated (default 0) */
    const char *video_codec;  /* libavcodec encoder, default "ffv1" (lossless) */
    int trail;                /* frames of trail behind each bubble (default 20) */
    double focus_contrast;    /* contrast below which a bubble is drawn out of focus (default 0.3) */
    sp_report_result *result; /* filled when non-NULL */
    /* Frames already in memory (measure keeps the ones it expects to be drawn): used instead of
     * reading the recording again when they hold every frame to draw and no video is asked. */
    const sp_image *const *given_frames;
    const int64_t *given_index;
    int ngiven;
} sp_report_opts;

void sp_report_opts_default(sp_report_opts *o);

/* Row (0-based, of nrows analysed frames) of thumbnail i of k drawn by default: the rows are spread
 * evenly from the first to the last. */
size_t sp_report_thumb_row(size_t nrows, int k, int i);

/* Build the report of DIR. The recording missing or unreadable is not an error unless overlays were
 * asked for explicitly (frames or video): the report then says why it has no thumbnails. Overlay
 * PNGs go to DIR/overlays/frame_NNNNN.png, the report to DIR/report.html (temporary names renamed
 * when complete). */
int sp_report_build(const char *dir, const sp_report_opts *o, sp_error *err);

#endif

/* spume — public interface of the library.
 *
 * Ownership: every *_open / *_alloc has a matching *_close / *_free. Structs returned by value or
 * filled through a pointer are owned by the caller unless a comment says otherwise. Functions that
 * can fail return 0 (SP_OK) or a non-zero status and fill the caller's sp_error with a message that
 * names the file and the problem. The library never prints and never exits.
 *
 * Global state: none. Thread counts come in through option structs (0 = OpenMP's default).
 */
#ifndef SPUME_H
#define SPUME_H

#include <stddef.h>
#include <stdint.h>

#define SP_VERSION "0.1.0"

/* Hard caps on frame geometry, checked on every header value before any allocation. */
#define SP_MAX_DIM 16384                   /* widest or tallest frame accepted, pixels */
#define SP_MAX_PIXELS (64LL * 1024 * 1024) /* largest frame accepted, pixels (64 Mpx) */

/* ---------------------------------------------------------------- errors */

enum {
    SP_OK = 0,
    SP_ERR_INTERNAL = 1, /* a bug or resource failure (out of memory): exit status 1 */
    SP_ERR_INPUT = 2     /* bad usage or bad input: exit status 2 */
};

typedef struct sp_error {
    int code;       /* SP_OK, SP_ERR_INTERNAL or SP_ERR_INPUT */
    char msg[1024]; /* one line, no trailing newline; names the file and the problem */
} sp_error;

/* Fill *err (may be NULL) with code and a printf-style message; returns code. */
int sp_error_set(sp_error *err, int code, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;
void sp_error_clear(sp_error *err);

/* ---------------------------------------------------------------- images */

/* A grey image at native depth: 1 byte (8-bit) or 2 bytes (16-bit, host order) per sample. */
typedef struct sp_image {
    int width, height;
    int bytes;        /* 1 or 2 */
    int bits;         /* significant bits: 8 for 8-bit; 9..16 for 16-bit storage (10/12-bit cameras) */
    ptrdiff_t stride; /* bytes per row */
    void *data;       /* owned by the image; freed by sp_image_free */
} sp_image;

/* Allocate (or reuse when the geometry already matches) a w×h image; checks the caps. */
int sp_image_alloc(sp_image *im, int w, int h, int bytes, sp_error *err);
void sp_image_free(sp_image *im);
/* Check w×h against SP_MAX_DIM and SP_MAX_PIXELS; names `what` (a file) in the error. */
int sp_check_dims(long long w, long long h, const char *what, sp_error *err);

static inline const uint8_t *sp_row8(const sp_image *im, int y)
{
    return (const uint8_t *)im->data + (ptrdiff_t)y * im->stride;
}
static inline const uint16_t *sp_row16(const sp_image *im, int y)
{
    return (const uint16_t *)((const uint8_t *)im->data + (ptrdiff_t)y * im->stride);
}

/* ---------------------------------------------------------------- frame sources */

typedef struct sp_roi {
    int x, y, w, h; /* w == 0 or h == 0: the whole frame */
} sp_roi;

typedef struct sp_source_opts {
    double fps;          /* > 0 overrides the container's rate; required for still frames */
    int64_t start;       /* first frame index to deliver (default 0) */
    int64_t count;       /* at most this many frames, 0 = all (default 0) */
    int64_t step;        /* deliver every step-th frame (default 1) */
    sp_roi roi;          /* crop applied to every delivered frame (default: whole frame) */
    int sparse;          /* most frames will be passed over with sp_source_skip: a video whose codec codes
                            every frame on its own is then decoded without frame threads, so that a frame
                            passed over is not decoded at all (default 0) */
    int64_t known_total; /* > 0: the recording's frame count, known from an earlier open of the same
                            file, so a container that does not announce it is not counted again
                            (default 0) */
} sp_source_opts;

void sp_source_opts_default(sp_source_opts *o);

typedef struct sp_source_info {
    int width, height;           /* delivered size (after the ROI) */
    int full_width, full_height; /* size of the recording */
    int bytes, bits;             /* delivered sample size and significant bits */
    double fps;                  /* frame rate used for timing (override, container, or 0 if VFR) */
    int64_t frames_total;        /* frames in the recording, -1 if it cannot be known cheaply */
    int64_t frames_selected;     /* frames the selection will deliver, -1 if unknown */
    char kind[16];               /* "video" or "stills" */
    char format[64];             /* codec or image format name */
} sp_source_info;

typedef struct sp_source sp_source;

/* Open a video file, a directory of numbered still frames, or a printf pattern. *out is owned by
 * the caller and released with sp_source_close. */
int sp_source_open(sp_source **out, const char *path, const sp_source_opts *opts, sp_error *err);
const sp_source_info *sp_source_get_info(const sp_source *s);
/* Decode the next selected frame into *img (allocated or reused; caller frees with
 * sp_image_free). *got = 0 at the end of the selection. *index is the frame number in the
 * recording (0 = first decoded frame), *t_s its time in seconds from the first decoded frame. */
int sp_source_next(sp_source *s, sp_image *img, int64_t *index, double *t_s, int *got, sp_error *err);
/* Pass over the next selected frame as sp_source_next would deliver it (same *index, *got), without
 * producing its pixels and, where the format allows, without decoding it. */
int sp_source_skip(sp_source *s, int64_t *index, int *got, sp_error *err);
/* Make the selection's frame at position pos (0-based, ahead of the next one) the next one read, by
 * seeking where the recording allows it cheaply and safely (a sparse source, a selection without a
 * step, a codec whose every frame stands alone and an index at one constant step). *done: 1 moved;
 * 0 not possible, nothing changed; -1 the position is lost part-way: close the source and open it
 * again. */
int sp_source_seek(sp_source *s, int64_t pos, int *done, sp_error *err);
/* Receives each frame read by sp_source_sample: the image (cropped to the region of interest, valid
 * during the call), its position in the selection (0-based) and the target it stands for. */
typedef int (*sp_source_sample_fn)(void *ud, const sp_image *img, int64_t pos, int target, sp_error *err);
/* Read frames near n target positions of the selection (ascending, 0-based) from a video whose
 * codec codes some frames on their own (keyframes) between others that depend on them: the nearest
 * keyframe to each target, each decoded on its own, nothing else decoded. *done = 0 without an error
 * when that does not apply (still frames, codecs whose every frame stands alone, a selection with
 * a step, fewer than min_keys keyframes in the selection, no timestamps): read in order instead. */
int sp_source_sample(sp_source *s, const int64_t *pos, int n, int min_keys, sp_source_sample_fn fn, void *ud,
                     int *done, sp_error *err);
void sp_source_close(sp_source *s);

/* ---------------------------------------------------------------- the measure job */

typedef struct sp_progress {
    const char *phase;   /* "background" or "detect" */
    int64_t done, total; /* frames; total -1 if unknown */
    double elapsed_s;    /* since the phase began */
} sp_progress;

typedef void (*sp_progress_fn)(void *ud, const sp_progress *p);

typedef struct sp_measure_settings {
    sp_source_opts source;  /* frame rate override, selection, region of interest */
    double mm_per_px;       /* scale; 0 = uncalibrated (millimetre columns then hold pixels) */
    const char *calib_file; /* a calibration file from `spume calibrate`: its scale replaces mm_per_px */

    /* Background (the light without bubbles). */
    const char *bg_image; /* an image of the empty field; NULL = estimate from the recording */
    int bg_frames;        /* frames sampled per estimate (default 40, at most 255) */
    double bg_percentile; /* per-pixel percentile of the samples (default 50 = median) */
    int bg_segments;      /* estimates spread along the run and interpolated in time, to follow
                             slow drift of the light (default 1) */

    /* Detection. */
    double threshold;   /* transmission below which a pixel is bubble (default 0.7) */
    int otsu;           /* 1: Otsu's threshold per frame instead (default 0) */
    int flicker;        /* 1: compensate each frame's overall light level (default 1) */
    int fill;           /* 1: fill the refraction spot (default 1) */
    double min_diam_px; /* size gates on the area-equivalent diameter (defaults 3, 0 = none) */
    double max_diam_px;
    double fit_min_px;    /* sub-pixel edge fit from this diameter up (default 8) */
    double edge_level;    /* edge where transmission crosses this fraction of the local step (0.5) */
    double min_sharpness; /* in-focus band: outline sharpness at least this, 1/px (default 0.47) */
    int split;            /* 1: split clusters of overlapping bubbles (default 1) */
    int still_guard;      /* 1: keep still bubbles out of an estimated background (default 1) */
    double still_level;   /* the guard's darkness level (default 0.5) */
    int keep_defocused;   /* 1: out-of-focus tracks count in the size statistics (default 0) */

    /* Tracking, the liquid, statistics. */
    int track;                     /* 1: link bubbles into tracks (default 1) */
    int max_gap;                   /* frames in a row a track may miss (default 3) */
    const char *liquid;            /* liquid preset name or JSON file (default "water") */
    double temp_c;                 /* liquid temperature, °C (default 20) */
    const char *const *liquid_set; /* "key=value" overrides of the liquid's properties */
    int nliquid_set;
    double depth_m;              /* depth of the observed bubbles below the free surface (default 0) */
    double illum_depth_mm;       /* depth of the illuminated volume, for volume holdup and interfacial
                                    area (0 = unknown, default) */
    int boot;                    /* bootstrap replicates for confidence intervals (default 1000, 0 = none) */
    int bins;                    /* size histogram bins (default 20) */
    int bins_log;                /* log-spaced bins (default 0) */
    double bin_lo_mm, bin_hi_mm; /* histogram range (default 0, 0 = from the data) */
    const char *calib_dir;       /* where liquid presets live (calib/; NULL = built-in default) */
    int report;                  /* 1: write report.html with plots and overlay thumbnails (default 1) */
    int overlay_video;           /* 1: also write the annotated video overlay.mkv (default 0) */

    int resume; /* 1: go on with the interrupted run in outdir (same input and options) and finish it;
                   refused when outdir holds no checkpoint of an interrupted run (default 0) */

    int threads;              /* worker threads, 0 = OpenMP default */
    const volatile int *stop; /* may be NULL; when it becomes non-zero the run finishes the frames in
                                 hand and writes valid tables marked incomplete (an interrupt) */
    sp_progress_fn progress;  /* may be NULL; called from the calling thread */
    void *progress_ud;
} sp_measure_settings;

void sp_measure_settings_default(sp_measure_settings *s);

typedef struct sp_measure_report {
    int64_t frames;     /* frames analysed */
    int64_t detections; /* bubble rows written */
    int64_t tracks;     /* tracks written */
    int64_t sites;      /* nucleation sites found */
    double d32_mm;      /* Sauter mean over tracks (NaN if none) */
    int complete;       /* 0 when the run was stopped early (settings.stop) */
    int64_t next_frame; /* the frame an interrupted run would go on from */
    double fps;         /* frame rate used */
    double holdup;      /* mean projected gas fraction of the region */
    int width, height;  /* analysed region */
} sp_measure_report;

/* Run detection and tracking over INPUT and write outdir/bubbles.csv, frames.csv, tracks.csv,
 * sites.csv and summary.json (each under a temporary name, renamed when complete). */
int sp_measure(const char *input, const char *outdir, const sp_measure_settings *s, sp_measure_report *rep,
               sp_error *err);

/* Create dir (and parents) if missing and check that files can be created in it. */
int sp_outdir_prepare(const char *dir, sp_error *err);

#endif

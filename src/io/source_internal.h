/* Frame-source back ends shared inside the io layer: video files through libavformat/libavcodec,
 * numbered still frames through libpng / libjpeg / libavcodec, and the grey conversion rules that
 * all of them share. Nothing here is part of the public API (src/spume.h). */
#ifndef SP_IO_SOURCE_INTERNAL_H
#define SP_IO_SOURCE_INTERNAL_H

#include "spume.h"

#include <stdint.h>

struct AVFrame;

/* Luma of an RGB sample with the integer weights Pillow uses for its RGB -> 'L' conversion
 * (ITU-R BT.601 weights 0.299/0.587/0.114 scaled by 2^16, rounded to nearest: the sum is exactly
 * 65536, so white maps to white). Checked numerically against Pillow 9.4 by
 * tests/ref/test_decode_pillow.py. The same weights serve 16-bit samples (documented choice). */
static inline unsigned sp_luma_rgb(unsigned r, unsigned g, unsigned b)
{
    return (unsigned)(((uint64_t)r * 19595u + (uint64_t)g * 38470u + (uint64_t)b * 7471u + 32768u) >> 16);
}

/* Silence FFmpeg's logger (process-wide; done once). */
void sp_ffmpeg_quiet(void);
/* FFmpeg error code in words, into buf. */
const char *sp_averr(int code, char *buf, size_t size);

/* Grey conversion of decoded FFmpeg frames. Planar or packed YUV / grey formats give their luma
 * component as is (8-bit -> 1 byte; 9..16-bit -> 2 bytes, `bits` = the format's depth, values in the
 * low bits); every other format (RGB, palette, Bayer, 1-bit, float) is converted by swscale to
 * RGB24 or RGB48 and then to luma with sp_luma_rgb, so colour is treated alike in every reader. */
typedef struct sp_frameconv {
    struct SwsContext *sws;
    uint8_t *rgb[4];
    int rgb_linesize[4];
    int rgb_w, rgb_h, rgb_fmt;
} sp_frameconv;

/* Convert f into img (allocated or reused). `what` names the file in errors. */
int sp_frameconv_run(sp_frameconv *c, const struct AVFrame *f, sp_image *img, const char *what,
                     sp_error *err);
/* Sample size (1 or 2) and significant bits the conversion will give for a pixel format. */
void sp_frameconv_depth(int pix_fmt, int *bytes, int *bits);
void sp_frameconv_free(sp_frameconv *c);

/* ---- video back end (video.c). Opening decodes the first frame to learn the real frame format. */
typedef struct sp_video sp_video;
/* Fills info->full_width/full_height/bytes/bits/fps/frames_total/format. */
int sp_video_open(sp_video **out, const char *path, int sparse, int64_t known_total, sp_source_info *info,
                  sp_error *err);
/* Next frame of the recording. want == 0: the frame is decoded (as it must be) but not converted.
 * *t_s: best-effort timestamp relative to the first decoded frame. *got = 0 at the end. */
int sp_video_next(sp_video *v, int want, sp_image *full, double *t_s, int *got, sp_error *err);
/* Pass over the next frame: its packet is dropped undecoded when the video was opened sparse and its
 * codec codes every frame on its own; otherwise as sp_video_next with want == 0. */
int sp_video_skip(sp_video *v, int *got, sp_error *err);
/* Make frame k the next one read, by seeking, when the video was opened sparse, its codec codes every
 * frame on its own and its index lists frames at one constant step. *done: 1 moved; 0 not possible
 * (nothing changed: read on); -1 the seek failed part-way and the position is lost (close the
 * video and read it again from the start). */
int sp_video_seek(sp_video *v, int64_t k, int *done, sp_error *err);
void sp_video_close(sp_video *v);
/* Called with each sampled frame (full size, converted to grey), its position and its target. */
typedef int (*sp_video_key_fn)(void *ud, const sp_image *full, int64_t index, int target, sp_error *err);
/* For each of ntarget positions (ascending), decode the nearest unused keyframe at a position in
 * [lo, hi) on its own, without decoding any other frame. *done = 0 (and SP_OK) when that cannot be
 * done: fewer than min_keys keyframes in [lo, hi), packets without timestamps, an unreadable file;
 * the caller then reads the frames in order. */
int sp_video_sample_keys(const char *path, const int64_t *target, int ntarget, int64_t lo, int64_t hi,
                         int min_keys, sp_video_key_fn fn, void *ud, int *done, sp_error *err);

/* ---- still frames (stills.c). */
enum { SP_STILLS_DIR, SP_STILLS_PATTERN, SP_STILLS_SINGLE };
typedef struct sp_stills sp_stills;
/* Fills info like sp_video_open (fps left 0: stills carry no timing). Reads the first frame to learn
 * the size. */
int sp_stills_open(sp_stills **out, const char *path, int kind, sp_source_info *info, sp_error *err);
/* want == 0: skip the file without reading it. */
int sp_stills_next(sp_stills *s, int want, sp_image *full, int *got, sp_error *err);
void sp_stills_close(sp_stills *s);
/* Read one still image of any supported format (sniffed from its first bytes); format names the
 * decoder used ("png", "jpeg", "tiff", ...), may be NULL. */
int sp_still_read(const char *path, sp_image *img, char *format, size_t format_size, sp_error *err);
/* Does a printf conversion like %d / %05d appear in path? Returns 1 for exactly one valid
 * conversion, 0 for none, -1 for a malformed pattern. */
int sp_stills_is_pattern(const char *path);

#endif

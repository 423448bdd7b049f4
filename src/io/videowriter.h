/* Encoding grey or RGB frames to a video file through libavcodec (FFV1 in Matroska by default). */
#ifndef SP_IO_VIDEOWRITER_H
#define SP_IO_VIDEOWRITER_H

#include "spume.h"

typedef struct sp_video_writer sp_video_writer;

typedef struct sp_video_writer_opts {
    const char *codec; /* libavcodec encoder name: "ffv1" (default), "rawvideo", ... */
    double fps;        /* frame rate; timestamps are frame_index / fps */
    int threads;       /* encoder threads, 0 = default */
} sp_video_writer_opts;

/* Open path for writing frames of w×h at `bytes` per sample (1 = gray, 2 = gray16le, 3 = 8-bit RGB
 * colour, put with sp_video_writer_put_rgb; stored in the first of bgr0, rgb24, bgr24 or gbrp that
 * the encoder takes, all lossless rearrangements of the same bytes). */
int sp_video_writer_open(sp_video_writer **out, const char *path, int w, int h, int bytes,
                         const sp_video_writer_opts *o, sp_error *err);
int sp_video_writer_put(sp_video_writer *vw, const sp_image *img, sp_error *err);
/* Colour frame of a writer opened with bytes = 3: rows of w packed R,G,B bytes, `stride` bytes apart. */
int sp_video_writer_put_rgb(sp_video_writer *vw, const unsigned char *rgb, ptrdiff_t stride, sp_error *err);
/* Flush and finish the file; frees vw. Returns non-zero if the trailer could not be written. */
int sp_video_writer_close(sp_video_writer *vw, sp_error *err);

#endif

/* Audio input through libavformat / libavcodec: WAV (8/16/24/32-bit integer, 32/64-bit float),
 * FLAC, or the audio stream of a video file, delivered as float samples of one channel at the
 * native sample rate, in blocks, with memory bounded by one decoded frame. */
#ifndef SP_IO_AUDIO_H
#define SP_IO_AUDIO_H

#include "spume.h"

#include <stdint.h>

#define SP_AUDIO_MAX_RATE 1536000 /* highest sample rate accepted, Hz */
#define SP_AUDIO_MAX_CHANNELS 64  /* most channels accepted in one stream */

/* Channel choice: an index from 0, or SP_AUDIO_MIX for the mean of all channels. */
#define SP_AUDIO_MIX (-1)

typedef struct sp_audio_info {
    int sample_rate;       /* Hz, native (no resampling) */
    int channels;          /* channels in the stream */
    int channel;           /* channel delivered (or SP_AUDIO_MIX) */
    int bits;              /* significant bits per sample (0 if the codec does not say) */
    int64_t samples_total; /* samples per channel announced by the container, -1 if unknown */
    char codec[64];        /* codec name, e.g. "pcm_s16le", "flac", "aac" */
    char container[64];    /* container name, e.g. "wav", "matroska,webm" */
} sp_audio_info;

typedef struct sp_audio sp_audio;

/* Open the first (best) audio stream of path. *out is owned by the caller, released with
 * sp_audio_close. A file without an audio stream, an unreadable file, a channel index out of range or
 * an absurd header value is SP_ERR_INPUT naming the file. */
int sp_audio_open(sp_audio **out, const char *path, int channel, sp_error *err);
const sp_audio_info *sp_audio_get_info(const sp_audio *a);
/* Read up to max samples of the chosen channel into buf, scaled to [-1, 1) (integer formats divided
 * by 2^(bits-1) of their storage type). *got = 0 only at the end of the stream. Fails with
 * SP_ERR_INPUT when the stream ends short of the length its header announces (truncated file), when a
 * packet cannot be decoded, or, at the end, when every sample was zero (silent recording). */
int sp_audio_read(sp_audio *a, float *buf, int max, int *got, sp_error *err);
/* Samples delivered so far (per channel). */
int64_t sp_audio_position(const sp_audio *a);
void sp_audio_close(sp_audio *a);

#endif

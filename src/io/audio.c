/* Audio input through libavformat / libavcodec. One channel (or the mean of all) is converted by hand
 * from the decoder's sample format to float, at the native rate: no resampling, so frequencies and
 * times stay exact. Memory is one decoded frame plus FFmpeg's own buffers, whatever the length. */
#include "io/audio.h"
#include "io/source_internal.h"

#include <libavcodec/avcodec.h>
#include <libavformat/avformat.h>

#include <stdio.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

struct sp_audio {
    char *path;
    AVFormatContext *fmt;
    AVCodecContext *dec;
    AVPacket *pkt;
    AVFrame *frame;
    int stream;
    int pos;            /* next sample of frame to deliver */
    int have;           /* frame holds samples not yet delivered */
    int flushing, done; /* end of file reached / decoder drained */
    int64_t delivered;  /* samples delivered */
    int64_t wav_expect; /* samples a WAV data chunk announces, -1 when unknown */
    int any_nonzero;    /* a non-zero sample has been seen */
    sp_audio_info info;
};

/* Independent look at a RIFF/WAVE header: the data chunk's announced size against the file size.
 * FFmpeg clamps a too-large data chunk to the file silently; a truncated recording must be an error.
 * Returns the announced sample count, or -1 when it cannot be known (streamed WAV, RF64, odd layout). */
static int64_t wav_announced(const char *path, int block_align, int64_t *avail)
{
    int64_t expect = -1;
    FILE *f = fopen(path, "rb");
    if (!f)
        return -1;
    struct stat st;
    unsigned char h[12];
    if (fstat(fileno(f), &st) != 0 || fread(h, 1, 12, f) != 12 || memcmp(h, "RIFF", 4) ||
        memcmp(h + 8, "WAVE", 4))
        goto done;
    long long off = 12;
    for (int i = 0; i < 64 && off + 8 <= (long long)st.st_size; i++) { /* bounded chunk walk */
        unsigned char c[8];
        if (fseek(f, (long)off, SEEK_SET) != 0 || fread(c, 1, 8, f) != 8)
            goto done;
        uint32_t size = (uint32_t)c[4] | (uint32_t)c[5] << 8 | (uint32_t)c[6] << 16 | (uint32_t)c[7] << 24;
        if (!memcmp(c, "data", 4)) {
            if (size == 0 || size == 0xFFFFFFFFu || block_align <= 0)
                goto done; /* streamed WAV: length unknown by design */
            expect = (int64_t)size / block_align;
            *avail = ((int64_t)st.st_size - (off + 8)) / block_align;
            goto done;
        }
        off += 8 + (long long)size + (size & 1);
    }
done:
    fclose(f);
    return expect;
}

int sp_audio_open(sp_audio **out, const char *path, int channel, sp_error *err)
{
    char eb[128];
    int rc = SP_OK, ret;
    *out = NULL;
    sp_ffmpeg_quiet();
    sp_audio *a = calloc(1, sizeof *a);
    if (!a || !(a->path = strdup(path))) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto fail;
    }
    a->wav_expect = -1;
    if ((ret = avformat_open_input(&a->fmt, path, NULL, NULL)) < 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot open: %s", path, sp_averr(ret, eb, sizeof eb));
        goto fail;
    }
    if ((ret = avformat_find_stream_info(a->fmt, NULL)) < 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot read stream information: %s", path,
                          sp_averr(ret, eb, sizeof eb));
        goto fail;
    }
    const AVCodec *codec = NULL;
    a->stream = av_find_best_stream(a->fmt, AVMEDIA_TYPE_AUDIO, -1, -1, &codec, 0);
    if (a->stream == AVERROR_STREAM_NOT_FOUND) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: no audio stream", path);
        goto fail;
    }
    if (a->stream < 0 || !codec) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: no decoder for the audio stream", path);
        goto fail;
    }
    AVStream *st = a->fmt->streams[a->stream];
    AVCodecParameters *par = st->codecpar;
    int nch = par->ch_layout.nb_channels;
    if (par->sample_rate <= 0 || par->sample_rate > SP_AUDIO_MAX_RATE) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: sample rate %d Hz outside 1..%d", path, par->sample_rate,
                          SP_AUDIO_MAX_RATE);
        goto fail;
    }
    if (nch <= 0 || nch > SP_AUDIO_MAX_CHANNELS) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: %d channels outside 1..%d", path, nch,
                          SP_AUDIO_MAX_CHANNELS);
        goto fail;
    }
    if (channel < SP_AUDIO_MIX || channel >= nch) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: channel %d asked, the audio has %d (0..%d)", path, channel,
                          nch, nch - 1);
        goto fail;
    }
    for (unsigned i = 0; i < a->fmt->nb_streams; i++)
        if ((int)i != a->stream)
            a->fmt->streams[i]->discard = AVDISCARD_ALL;
    if (!(a->dec = avcodec_alloc_context3(codec)) || !(a->pkt = av_packet_alloc()) ||
        !(a->frame = av_frame_alloc())) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto fail;
    }
    if ((ret = avcodec_parameters_to_context(a->dec, par)) < 0 ||
        (ret = avcodec_open2(a->dec, codec, NULL)) < 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot open the %s decoder: %s", path, codec->name,
                          sp_averr(ret, eb, sizeof eb));
        goto fail;
    }
    sp_audio_info *in = &a->info;
    in->sample_rate = par->sample_rate;
    in->channels = nch;
    in->channel = channel;
    in->bits = par->bits_per_raw_sample > 0 ? par->bits_per_raw_sample : par->bits_per_coded_sample;
    in->samples_total = -1;
    if (st->duration > 0 && st->time_base.num > 0)
        in->samples_total = av_rescale_q(st->duration, st->time_base, (AVRational){1, par->sample_rate});
    snprintf(in->codec, sizeof in->codec, "%s", codec->name);
    snprintf(in->container, sizeof in->container, "%s", a->fmt->iformat->name);
    if (!strcmp(a->fmt->iformat->name, "wav") && !strncmp(codec->name, "pcm_", 4)) {
        int64_t avail = 0;
        a->wav_expect = wav_announced(path, par->block_align, &avail);
        if (a->wav_expect >= 0) {
            in->samples_total = a->wav_expect;
            if (avail < a->wav_expect) {
                rc = sp_error_set(err, SP_ERR_INPUT,
                                  "%s: truncated WAV: the header announces %lld samples, the file holds %lld",
                                  path, (long long)a->wav_expect, (long long)avail);
                goto fail;
            }
        }
    }
    *out = a;
    return SP_OK;
fail:
    sp_audio_close(a);
    return rc;
}

const sp_audio_info *sp_audio_get_info(const sp_audio *a)
{
    return &a->info;
}

int64_t sp_audio_position(const sp_audio *a)
{
    return a->delivered;
}

/* Decode the next frame; a->have = 0 at the end of the stream. */
static int decode_next(sp_audio *a, sp_error *err)
{
    char eb[128];
    a->have = 0;
    a->pos = 0;
    while (!a->done) {
        int ret = avcodec_receive_frame(a->dec, a->frame);
        if (ret == 0) {
            if (a->frame->nb_samples <= 0)
                continue;
            if (a->frame->ch_layout.nb_channels != a->info.channels)
                return sp_error_set(err, SP_ERR_INPUT, "%s: channel count changes mid-stream (%d to %d)",
                                    a->path, a->info.channels, a->frame->ch_layout.nb_channels);
            a->have = 1;
            return SP_OK;
        }
        if (ret == AVERROR_EOF) {
            a->done = 1;
            break;
        }
        if (ret != AVERROR(EAGAIN))
            return sp_error_set(err, SP_ERR_INPUT, "%s: audio decoding failed after %lld samples: %s",
                                a->path, (long long)a->delivered, sp_averr(ret, eb, sizeof eb));
        if (a->flushing) {
            a->done = 1;
            break;
        }
        ret = av_read_frame(a->fmt, a->pkt);
        if (ret == AVERROR_EOF) {
            a->flushing = 1;
            avcodec_send_packet(a->dec, NULL);
            continue;
        }
        if (ret < 0)
            return sp_error_set(err, SP_ERR_INPUT, "%s: read error after %lld samples: %s", a->path,
                                (long long)a->delivered, sp_averr(ret, eb, sizeof eb));
        if (a->pkt->stream_index != a->stream) {
            av_packet_unref(a->pkt);
            continue;
        }
        ret = avcodec_send_packet(a->dec, a->pkt);
        av_packet_unref(a->pkt);
        if (ret < 0 && ret != AVERROR(EAGAIN))
            return sp_error_set(err, SP_ERR_INPUT, "%s: corrupt audio packet after %lld samples: %s", a->path,
                                (long long)a->delivered, sp_averr(ret, eb, sizeof eb));
    }
    /* End of stream: a length announced by a WAV header must be met, and silence is not a recording. */
    if (a->wav_expect >= 0 && a->delivered < a->wav_expect)
        return sp_error_set(err, SP_ERR_INPUT,
                            "%s: truncated WAV: the header announces %lld samples, decoded %lld", a->path,
                            (long long)a->wav_expect, (long long)a->delivered);
    if (a->delivered == 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: the audio stream holds no samples", a->path);
    if (!a->any_nonzero)
        return sp_error_set(err, SP_ERR_INPUT, "%s: silent recording: all %lld samples are zero", a->path,
                            (long long)a->delivered);
    return SP_OK;
}

/* Sample i of channel c of the current frame as float in [-1, 1). */
static float sample_at(const AVFrame *f, int c, int i)
{
    enum AVSampleFormat sf = (enum AVSampleFormat)f->format;
    int planar = av_sample_fmt_is_planar(sf);
    int nch = f->ch_layout.nb_channels;
    const uint8_t *base = planar ? f->extended_data[c] : f->extended_data[0];
    size_t k = planar ? (size_t)i : (size_t)i * (size_t)nch + (size_t)c;
    switch (av_get_packed_sample_fmt(sf)) {
    case AV_SAMPLE_FMT_U8:
        return ((int)base[k] - 128) / 128.0f;
    case AV_SAMPLE_FMT_S16:
        return ((const int16_t *)base)[k] / 32768.0f;
    case AV_SAMPLE_FMT_S32:
        return (float)(((const int32_t *)base)[k] / 2147483648.0);
    case AV_SAMPLE_FMT_S64:
        return (float)(((const int64_t *)base)[k] / 9223372036854775808.0);
    case AV_SAMPLE_FMT_FLT:
        return ((const float *)base)[k];
    case AV_SAMPLE_FMT_DBL:
        return (float)((const double *)base)[k];
    default:
        return 0.0f;
    }
}

static int format_known(int format)
{
    switch (av_get_packed_sample_fmt((enum AVSampleFormat)format)) {
    case AV_SAMPLE_FMT_U8:
    case AV_SAMPLE_FMT_S16:
    case AV_SAMPLE_FMT_S32:
    case AV_SAMPLE_FMT_S64:
    case AV_SAMPLE_FMT_FLT:
    case AV_SAMPLE_FMT_DBL:
        return 1;
    default:
        return 0;
    }
}

int sp_audio_read(sp_audio *a, float *buf, int max, int *got, sp_error *err)
{
    *got = 0;
    int n = 0;
    while (n < max) {
        if (!a->have || a->pos >= a->frame->nb_samples) {
            if (a->done)
                break;
            int rc = decode_next(a, err);
            if (rc)
                return rc;
            if (!a->have)
                break;
            if (!format_known(a->frame->format))
                return sp_error_set(err, SP_ERR_INPUT, "%s: unsupported sample format %s", a->path,
                                    av_get_sample_fmt_name((enum AVSampleFormat)a->frame->format));
        }
        const AVFrame *f = a->frame;
        int take = f->nb_samples - a->pos;
        if (take > max - n)
            take = max - n;
        int nch = f->ch_layout.nb_channels;
        for (int i = 0; i < take; i++) {
            float v;
            if (a->info.channel == SP_AUDIO_MIX) {
                double s = 0;
                for (int c = 0; c < nch; c++)
                    s += sample_at(f, c, a->pos + i);
                v = (float)(s / nch);
            } else {
                v = sample_at(f, a->info.channel, a->pos + i);
            }
            /* Float recordings can hold NaN or infinity (a corrupt file, or a double beyond float's
             * range); one such sample would poison every running sum downstream. */
            if (!isfinite(v))
                return sp_error_set(err, SP_ERR_INPUT, "%s: sample %lld is not a finite number (%s)", a->path,
                                    (long long)(a->delivered + i), isnan(v) ? "NaN" : "infinite");
            if (v != 0.0f)
                a->any_nonzero = 1;
            buf[n + i] = v;
        }
        a->pos += take;
        a->delivered += take; /* counted here: the end-of-stream checks in decode_next read it */
        n += take;
    }
    *got = n;
    return SP_OK;
}

void sp_audio_close(sp_audio *a)
{
    if (!a)
        return;
    av_frame_free(&a->frame);
    av_packet_free(&a->pkt);
    avcodec_free_context(&a->dec);
    avformat_close_input(&a->fmt);
    free(a->path);
    free(a);
}

/* Video files through libavformat / libavcodec: the best video stream, decoded with threads, as grey
 * frames at native depth; plus the grey conversion shared with still images decoded by FFmpeg. */
#include "io/source_internal.h"

#include <libavcodec/avcodec.h>
#include <libavformat/avformat.h>
#include <libavutil/cpu.h>
#include <libavutil/imgutils.h>
#include <libavutil/intreadwrite.h>
#include <libavutil/pixdesc.h>
#include <libswscale/swscale.h>

#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

/* Packets the demux-only counting pass reads at most before giving up (frames_total = -1). */
#define COUNT_PACKETS_MAX 100000000LL

static pthread_once_t quiet_once = PTHREAD_ONCE_INIT;

static void quiet_init(void)
{
    av_log_set_level(AV_LOG_QUIET);
}

/* av_log_set_level is process-wide state: the library never prints, so FFmpeg's own messages are
 * switched off once, the first time a source is opened; failures reach the caller as sp_error. */
void sp_ffmpeg_quiet(void)
{
    pthread_once(&quiet_once, quiet_init);
}

const char *sp_averr(int code, char *buf, size_t size)
{
    if (av_strerror(code, buf, size) < 0)
        snprintf(buf, size, "FFmpeg error %d", code);
    return buf;
}

/* ---------------------------------------------------------------- grey conversion */

/* Formats whose first component is luma (or grey) stored as whole bytes or 16-bit words. */
static int luma_direct(const AVPixFmtDescriptor *d)
{
    if (!d || d->nb_components < 1)
        return 0;
    if (d->flags & (AV_PIX_FMT_FLAG_RGB | AV_PIX_FMT_FLAG_PAL | AV_PIX_FMT_FLAG_BITSTREAM |
                    AV_PIX_FMT_FLAG_FLOAT | AV_PIX_FMT_FLAG_HWACCEL | AV_PIX_FMT_FLAG_BAYER))
        return 0;
    if (strncmp(d->name, "xyz", 3) == 0) /* first component is CIE X, not luma */
        return 0;
    const AVComponentDescriptor *c = &d->comp[0];
    int sb = c->depth > 8 ? 2 : 1;
    return c->plane == 0 && c->depth >= 1 && c->depth <= 16 && c->step >= sb && c->shift + c->depth <= 8 * sb;
}

static int rgb_depth(const AVPixFmtDescriptor *d)
{
    int depth = 8;
    for (int i = 0; d && i < d->nb_components; i++)
        if (d->comp[i].depth > depth)
            depth = d->comp[i].depth;
    if (d && (d->flags & AV_PIX_FMT_FLAG_PAL))
        depth = 8;
    return depth;
}

void sp_frameconv_depth(int pix_fmt, int *bytes, int *bits)
{
    const AVPixFmtDescriptor *d = av_pix_fmt_desc_get((enum AVPixelFormat)pix_fmt);
    if (luma_direct(d)) {
        *bits = d->comp[0].depth;
        *bytes = *bits > 8 ? 2 : 1;
    } else {
        *bytes = rgb_depth(d) > 8 ? 2 : 1;
        *bits = *bytes * 8;
    }
}

int sp_frameconv_run(sp_frameconv *c, const AVFrame *f, sp_image *img, const char *what, sp_error *err)
{
    const AVPixFmtDescriptor *d = av_pix_fmt_desc_get((enum AVPixelFormat)f->format);
    if (!d)
        return sp_error_set(err, SP_ERR_INPUT, "%s: decoded frame has no pixel format", what);
    int rc = sp_check_dims(f->width, f->height, what, err);
    if (rc)
        return rc;
    int bytes, bits;
    sp_frameconv_depth(f->format, &bytes, &bits);
    rc = sp_image_alloc(img, f->width, f->height, bytes, err);
    if (rc)
        return rc;
    img->bits = bits;

    if (luma_direct(d)) {
        const AVComponentDescriptor *cd = &d->comp[0];
        int be = (d->flags & AV_PIX_FMT_FLAG_BE) != 0;
        unsigned mask = (1u << cd->depth) - 1u;
        for (int y = 0; y < f->height; y++) {
            const uint8_t *src = f->data[0] + (ptrdiff_t)y * f->linesize[0] + cd->offset;
            uint8_t *dst = (uint8_t *)img->data + (ptrdiff_t)y * img->stride;
            if (bytes == 1) {
                if (cd->step == 1 && cd->shift == 0) {
                    memcpy(dst, src, (size_t)f->width);
                } else {
                    for (int x = 0; x < f->width; x++)
                        dst[x] = (uint8_t)((src[(ptrdiff_t)x * cd->step] >> cd->shift) & mask);
                }
            } else {
                uint16_t *d16 = (uint16_t *)dst;
                for (int x = 0; x < f->width; x++) {
                    const uint8_t *p = src + (ptrdiff_t)x * cd->step;
                    unsigned v = be ? AV_RB16(p) : AV_RL16(p);
                    d16[x] = (uint16_t)((v >> cd->shift) & mask);
                }
            }
        }
        return SP_OK;
    }

    /* Everything else goes through RGB so that colour maps to grey by one documented rule. */
    enum AVPixelFormat dst_fmt = bytes == 2 ? AV_PIX_FMT_RGB48 : AV_PIX_FMT_RGB24;
    if (!c->rgb[0] || c->rgb_w != f->width || c->rgb_h != f->height || c->rgb_fmt != (int)dst_fmt) {
        av_freep(&c->rgb[0]);
        if (av_image_alloc(c->rgb, c->rgb_linesize, f->width, f->height, dst_fmt, 64) < 0)
            return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory for a %dx%d frame", what, f->width,
                                f->height);
        c->rgb_w = f->width;
        c->rgb_h = f->height;
        c->rgb_fmt = dst_fmt;
    }
    c->sws =
        sws_getCachedContext(c->sws, f->width, f->height, (enum AVPixelFormat)f->format, f->width, f->height,
                             dst_fmt, SWS_BILINEAR | SWS_ACCURATE_RND | SWS_FULL_CHR_H_INT, NULL, NULL, NULL);
    if (!c->sws)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot convert pixel format %s to grey", what, d->name);
    if (sws_scale(c->sws, (const uint8_t *const *)f->data, f->linesize, 0, f->height, c->rgb,
                  c->rgb_linesize) != f->height)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: pixel format conversion from %s failed", what,
                            d->name);
    for (int y = 0; y < f->height; y++) {
        const uint8_t *src = c->rgb[0] + (ptrdiff_t)y * c->rgb_linesize[0];
        uint8_t *dst = (uint8_t *)img->data + (ptrdiff_t)y * img->stride;
        if (bytes == 1) {
            for (int x = 0; x < f->width; x++)
                dst[x] = (uint8_t)sp_luma_rgb(src[3 * x], src[3 * x + 1], src[3 * x + 2]);
        } else {
            const uint16_t *s16 = (const uint16_t *)src; /* RGB48 is native-endian */
            uint16_t *d16 = (uint16_t *)dst;
            for (int x = 0; x < f->width; x++)
                d16[x] = (uint16_t)sp_luma_rgb(s16[3 * x], s16[3 * x + 1], s16[3 * x + 2]);
        }
    }
    return SP_OK;
}

void sp_frameconv_free(sp_frameconv *c)
{
    if (!c)
        return;
    sws_freeContext(c->sws);
    av_freep(&c->rgb[0]);
    memset(c, 0, sizeof *c);
}

/* ---------------------------------------------------------------- video reader */

struct sp_video {
    char *path;
    AVFormatContext *fmt;
    AVCodecContext *dec;
    AVPacket *pkt;
    AVFrame *frame;
    sp_frameconv conv;
    int stream;
    AVRational tb;
    double fps_guess;   /* for frames without any timestamp */
    int64_t first_ts;   /* best-effort timestamp of the first decoded frame, or AV_NOPTS_VALUE */
    int64_t decoded;    /* frames decoded so far */
    int64_t expected;   /* frames the container announces, -1 if it does not */
    int64_t by_length;  /* frames implied by the announced duration at a constant rate, -1 if unknown */
    int pending;        /* frame holds a decoded frame not yet delivered */
    int flushing, done; /* end of file reached / decoder drained */
    int skippable;      /* opened sparse, intra-only codec, no frame threads: packets may be dropped */
    int seek_ok;        /* 1 seeking by timestamp is usable, 0 unknown yet, -1 not */
    int64_t seek_dur;   /* timestamp step between frames, from the index */
    AVPacket *stash;    /* the packet a seek landed on, to be read next */
    int stashed;
    int width, height, bytes;
};

/* Decode the next frame into v->frame; *got = 0 at the end of the stream. */
static int decode_one(sp_video *v, int *got, sp_error *err)
{
    char eb[128];
    *got = 0;
    if (v->done)
        return SP_OK;
    for (;;) {
        int ret = avcodec_receive_frame(v->dec, v->frame);
        if (ret == 0) {
            *got = 1;
            return SP_OK;
        }
        if (ret == AVERROR_EOF) {
            v->done = 1;
            /* A container that announces its frame count and ends early was cut short. */
            if (v->expected > 0 && v->decoded < v->expected)
                return sp_error_set(err, SP_ERR_INPUT,
                                    "%s: video ends after %lld of the %lld frames its header announces "
                                    "(truncated file?)",
                                    v->path, (long long)v->decoded, (long long)v->expected);
            /* Containers without a frame count (Matroska) still announce a duration: a file that
             * ends well short of it was cut (slack: rounding of the last frame's duration). */
            if (v->expected <= 0 && v->by_length > 0 && v->decoded + 2 + v->by_length / 100 < v->by_length)
                return sp_error_set(err, SP_ERR_INPUT,
                                    "%s: video ends after %lld frames, its header announces a duration of "
                                    "about %lld frames (truncated file?)",
                                    v->path, (long long)v->decoded, (long long)v->by_length);
            return SP_OK;
        }
        if (ret != AVERROR(EAGAIN))
            return sp_error_set(err, SP_ERR_INPUT, "%s: cannot decode frame %lld (%s)", v->path,
                                (long long)v->decoded, sp_averr(ret, eb, sizeof eb));
        if (v->flushing)
            return sp_error_set(err, SP_ERR_INTERNAL, "%s: decoder stalled while draining", v->path);
        if (v->stashed) {
            av_packet_move_ref(v->pkt, v->stash);
            v->stashed = 0;
            ret = 0;
        } else {
            ret = av_read_frame(v->fmt, v->pkt);
        }
        if (ret == AVERROR_EOF) {
            v->flushing = 1;
            ret = avcodec_send_packet(v->dec, NULL);
            if (ret < 0 && ret != AVERROR_EOF)
                return sp_error_set(err, SP_ERR_INPUT, "%s: cannot flush the decoder (%s)", v->path,
                                    sp_averr(ret, eb, sizeof eb));
            continue;
        }
        if (ret < 0)
            return sp_error_set(err, SP_ERR_INPUT, "%s: cannot read the video after frame %lld (%s)", v->path,
                                (long long)v->decoded, sp_averr(ret, eb, sizeof eb));
        if (v->pkt->stream_index != v->stream) {
            av_packet_unref(v->pkt);
            continue;
        }
        ret = avcodec_send_packet(v->dec, v->pkt);
        av_packet_unref(v->pkt);
        if (ret < 0 && ret != AVERROR(EAGAIN))
            return sp_error_set(err, SP_ERR_INPUT, "%s: cannot decode frame %lld (%s)", v->path,
                                (long long)v->decoded, sp_averr(ret, eb, sizeof eb));
    }
}

/* Count the stream's packets without decoding (one packet is one frame for the video codecs in
 * use); -1 if the file cannot be read to the end or is implausibly long. */
static int64_t count_packets(const char *path, int stream)
{
    AVFormatContext *fmt = NULL;
    AVPacket *pkt = av_packet_alloc();
    int64_t n = 0;
    if (!pkt || avformat_open_input(&fmt, path, NULL, NULL) < 0) {
        n = -1;
        goto done;
    }
    for (;;) {
        int ret = av_read_frame(fmt, pkt);
        if (ret == AVERROR_EOF)
            break;
        if (ret < 0 || n >= COUNT_PACKETS_MAX) {
            n = -1;
            break;
        }
        if (pkt->stream_index == stream)
            n++;
        av_packet_unref(pkt);
    }
done:
    av_packet_free(&pkt);
    avformat_close_input(&fmt);
    return n;
}

/* Timestamps on a frame grid are kept within ±GRID_MAX so that no sum or product below overflows,
 * whatever a damaged index claims. */
#define GRID_MAX (INT64_MAX / 4)

static int grid_sane(int64_t t0, int64_t dur, int64_t n)
{
    return dur > 0 && n > 0 && t0 > -GRID_MAX && t0 < GRID_MAX && dur <= (GRID_MAX - (t0 > 0 ? t0 : 0)) / n;
}

/* Does the stream's index list frames 0..n-1 at one constant step from its first entry? On yes,
 * *t0 is the first timestamp, *dur the step and *n the entries (at least 2). */
static int index_grid(AVStream *st, int64_t *t0, int64_t *dur, int *n)
{
    int ne = avformat_index_get_entries_count(st);
    if (ne < 2)
        return 0;
    const AVIndexEntry *e0 = avformat_index_get_entry(st, 0), *e1 = avformat_index_get_entry(st, 1);
    if (!e0 || !e1 || e1->timestamp <= e0->timestamp ||
        !grid_sane(e0->timestamp, e1->timestamp - e0->timestamp, ne))
        return 0;
    int64_t step = e1->timestamp - e0->timestamp;
    for (int i = 2; i < ne; i++) {
        const AVIndexEntry *e = avformat_index_get_entry(st, i);
        if (!e || e->timestamp != e0->timestamp + (int64_t)i * step)
            return 0;
    }
    *t0 = e0->timestamp;
    *dur = step;
    *n = ne;
    return 1;
}

/* The frame count of a stream whose codec codes every frame on its own and whose index lists frames
 * 0..n-1 at one constant step from the first (rawvideo in NUT): the index's entries, plus the packets
 * after the last entry, read from there to the end on the same grid. Reads only the tail of the file
 * where counting every packet would read all of it. -1 when the index does not qualify. */
static int64_t count_by_index(const char *path, int stream)
{
    AVFormatContext *fmt = NULL;
    AVPacket *pkt = NULL;
    int64_t n = -1;
    if (avformat_open_input(&fmt, path, NULL, NULL) < 0 || avformat_find_stream_info(fmt, NULL) < 0 ||
        stream >= (int)fmt->nb_streams)
        goto done;
    AVStream *st = fmt->streams[stream];
    const AVCodecDescriptor *desc = avcodec_descriptor_get(st->codecpar->codec_id);
    int64_t t0, dur;
    int ne;
    if (!desc || !(desc->props & AV_CODEC_PROP_INTRA_ONLY) || !index_grid(st, &t0, &dur, &ne) ||
        !(pkt = av_packet_alloc()))
        goto done;
    /* The first packet must be frame 0 of the grid. */
    int ret;
    while ((ret = av_read_frame(fmt, pkt)) >= 0 && pkt->stream_index != stream)
        av_packet_unref(pkt);
    if (ret < 0 || pkt->pts != t0)
        goto done;
    av_packet_unref(pkt);
    int64_t last = t0 + (int64_t)(ne - 1) * dur;
    if (av_seek_frame(fmt, stream, last, AVSEEK_FLAG_BACKWARD) < 0)
        goto done;
    int64_t k = -1; /* grid position of the last packet read */
    for (;;) {
        ret = av_read_frame(fmt, pkt);
        if (ret == AVERROR_EOF)
            break;
        if (ret < 0)
            goto done;
        int ours = pkt->stream_index == stream;
        int64_t pts = pkt->pts;
        av_packet_unref(pkt);
        if (!ours)
            continue;
        if (pts == AV_NOPTS_VALUE || pts < t0 || pts > GRID_MAX || (pts - t0) % dur != 0 ||
            (k >= 0 && pts != t0 + (k + 1) * dur) || (k < 0 && pts != last))
            goto done; /* off the grid, a gap, or the seek landed elsewhere */
        k = (pts - t0) / dur;
    }
    if (k >= ne - 1)
        n = k + 1;
done:
    av_packet_free(&pkt);
    avformat_close_input(&fmt);
    return n;
}

static double q2d_or0(AVRational r)
{
    return (r.num > 0 && r.den > 0) ? av_q2d(r) : 0.0;
}

int sp_video_open(sp_video **out, const char *path, int sparse, int64_t known_total, sp_source_info *info,
                  sp_error *err)
{
    char eb[128];
    int rc = SP_OK;
    *out = NULL;
    sp_ffmpeg_quiet();
    sp_video *v = calloc(1, sizeof *v);
    if (!v || !(v->path = strdup(path)))
        goto oom;
    v->first_ts = AV_NOPTS_VALUE;
    v->expected = -1;
    v->by_length = -1;
    int ret = avformat_open_input(&v->fmt, path, NULL, NULL);
    if (ret < 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot open as a video (%s)", path,
                          sp_averr(ret, eb, sizeof eb));
        goto fail;
    }
    ret = avformat_find_stream_info(v->fmt, NULL);
    if (ret < 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot read stream information (%s)", path,
                          sp_averr(ret, eb, sizeof eb));
        goto fail;
    }
    const AVCodec *codec = NULL;
    ret = av_find_best_stream(v->fmt, AVMEDIA_TYPE_VIDEO, -1, -1, &codec, 0);
    if (ret < 0 || !codec) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: no decodable video stream (%s)", path,
                          ret < 0 ? sp_averr(ret, eb, sizeof eb) : "no decoder for its codec");
        goto fail;
    }
    v->stream = ret;
    AVStream *st = v->fmt->streams[v->stream];
    v->tb = st->time_base;
    /* Never trust the header: check the announced size before the decoder allocates anything. */
    if (st->codecpar->width || st->codecpar->height) {
        rc = sp_check_dims(st->codecpar->width, st->codecpar->height, path, err);
        if (rc)
            goto fail;
    }
    v->dec = avcodec_alloc_context3(codec);
    if (!v->dec || !(v->pkt = av_packet_alloc()) || !(v->frame = av_frame_alloc()))
        goto oom;
    ret = avcodec_parameters_to_context(v->dec, st->codecpar);
    if (ret < 0)
        goto oom;
    v->dec->pkt_timebase = st->time_base;
    v->dec->max_pixels = SP_MAX_PIXELS;
    /* Frame or slice threading; frames still come out in order, so results do not depend on it. One
     * decoding thread per core, not libavcodec's automatic one more: the measuring threads want those
     * cores too, and the extra frame thread only adds waiting (docs/methods-speed.md). */
    int cores = av_cpu_count();
    v->dec->thread_count = cores < 1 ? 1 : cores > 16 ? 16 : cores;
    v->dec->thread_type = FF_THREAD_FRAME | FF_THREAD_SLICE;
    /* Sparse reading of a codec whose every frame stands alone: without frame threads each packet
     * gives its frame at once, so a packet not wanted can be dropped without decoding it. */
    const AVCodecDescriptor *desc = avcodec_descriptor_get(st->codecpar->codec_id);
    if (sparse && desc && (desc->props & AV_CODEC_PROP_INTRA_ONLY) && st->codecpar->video_delay == 0) {
        v->dec->thread_type = FF_THREAD_SLICE;
        v->skippable = 1;
    }
    ret = avcodec_open2(v->dec, codec, NULL);
    if (ret < 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot open the %s decoder (%s)", path, codec->name,
                          sp_averr(ret, eb, sizeof eb));
        goto fail;
    }

    double avg = q2d_or0(st->avg_frame_rate), rfr = q2d_or0(st->r_frame_rate);
    v->fps_guess = avg > 0 ? avg : rfr;
    v->expected = st->nb_frames > 0 ? st->nb_frames : -1;
    /* Duration of the stream, or of the file when it holds only this stream; at a constant rate
     * only (average and base rate agree), and only when plausible (below COUNT_PACKETS_MAX). */
    double dur_s = -1;
    if (st->duration > 0 && st->time_base.num > 0 && st->time_base.den > 0)
        dur_s = (double)st->duration * st->time_base.num / st->time_base.den;
    else if (v->fmt->nb_streams == 1 && v->fmt->duration > 0)
        dur_s = (double)v->fmt->duration / AV_TIME_BASE;
    if (dur_s > 0 && avg > 0 && rfr > 0 && fabs(avg - rfr) <= 1e-3 * rfr &&
        dur_s * avg < (double)COUNT_PACKETS_MAX)
        v->by_length = llround(dur_s * avg);

    int got = 0;
    rc = decode_one(v, &got, err);
    if (rc)
        goto fail;
    if (!got) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: the video holds no decodable frame", path);
        goto fail;
    }
    rc = sp_check_dims(v->frame->width, v->frame->height, path, err);
    if (rc)
        goto fail;
    v->pending = 1;
    v->width = v->frame->width;
    v->height = v->frame->height;
    sp_frameconv_depth(v->frame->format, &v->bytes, &info->bits);
    info->full_width = v->width;
    info->full_height = v->height;
    info->bytes = v->bytes;
    /* Constant rate when the average and the container's base rate agree; else variable (0). */
    info->fps = (avg > 0 && rfr > 0 && fabs(avg - rfr) > 1e-3 * rfr) ? 0.0 : v->fps_guess;
    if (v->expected > 0)
        info->frames_total = v->expected;
    else if (known_total > 0)
        info->frames_total = known_total;
    else if ((info->frames_total = count_by_index(path, v->stream)) < 0)
        info->frames_total = count_packets(path, v->stream);
    snprintf(info->kind, sizeof info->kind, "video");
    snprintf(info->format, sizeof info->format, "%s", codec->name);
    *out = v;
    return SP_OK;
oom:
    rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory opening the video", path);
fail:
    sp_video_close(v);
    return rc;
}

int sp_video_next(sp_video *v, int want, sp_image *full, double *t_s, int *got, sp_error *err)
{
    *got = 0;
    if (!v->pending) {
        av_frame_unref(v->frame);
        int g = 0;
        int rc = decode_one(v, &g, err);
        if (rc || !g)
            return rc;
    }
    v->pending = 0;
    AVFrame *f = v->frame;
    int64_t index = v->decoded++;
    if (f->width != v->width || f->height != v->height)
        return sp_error_set(err, SP_ERR_INPUT, "%s: frame %lld is %dx%d but earlier frames are %dx%d",
                            v->path, (long long)index, f->width, f->height, v->width, v->height);
    int bytes, bits;
    sp_frameconv_depth(f->format, &bytes, &bits);
    if (bytes != v->bytes)
        return sp_error_set(err, SP_ERR_INPUT, "%s: frame %lld changes sample depth mid-stream (%s)", v->path,
                            (long long)index, av_get_pix_fmt_name((enum AVPixelFormat)f->format));

    /* Best-effort timestamps relative to the first frame (variable frame rate kept); frames without
     * any timestamp fall back to index / stream rate. */
    int64_t ts = f->best_effort_timestamp;
    if (index == 0)
        v->first_ts = ts;
    if (ts != AV_NOPTS_VALUE && v->first_ts != AV_NOPTS_VALUE)
        *t_s = (double)(ts - v->first_ts) * av_q2d(v->tb);
    else
        *t_s = v->fps_guess > 0 ? (double)index / v->fps_guess : 0.0;

    if (want) {
        int rc = sp_frameconv_run(&v->conv, f, full, v->path, err);
        if (rc)
            return rc;
    }
    *got = 1;
    return SP_OK;
}

int sp_video_skip(sp_video *v, int *got, sp_error *err)
{
    char eb[128];
    double t;
    *got = 0;
    if (!v->skippable || v->pending || v->flushing || v->done)
        return sp_video_next(v, 0, NULL, &t, got, err);
    if (v->stashed) {
        av_packet_unref(v->stash);
        v->stashed = 0;
        v->decoded++;
        *got = 1;
        return SP_OK;
    }
    for (;;) {
        int ret = av_read_frame(v->fmt, v->pkt);
        if (ret == AVERROR_EOF)
            return sp_video_next(v, 0, NULL, &t, got, err); /* drains, checks the announced length */
        if (ret < 0)
            return sp_error_set(err, SP_ERR_INPUT, "%s: cannot read the video after frame %lld (%s)", v->path,
                                (long long)v->decoded, sp_averr(ret, eb, sizeof eb));
        int ours = v->pkt->stream_index == v->stream;
        av_packet_unref(v->pkt);
        if (!ours)
            continue;
        v->decoded++; /* one packet, one frame, for the intra-only codecs this path serves */
        *got = 1;
        return SP_OK;
    }
}

/* Seeking by timestamp is trusted only for a stream whose index lists frames at one constant step
 * starting at the first frame's timestamp (rawvideo in NUT or AVI, for instance). */
static int seek_usable(sp_video *v)
{
    if (v->seek_ok)
        return v->seek_ok > 0;
    v->seek_ok = -1;
    int64_t t0, dur;
    int n;
    if (!v->skippable || v->first_ts == AV_NOPTS_VALUE ||
        !index_grid(v->fmt->streams[v->stream], &t0, &dur, &n) || t0 != v->first_ts)
        return 0;
    if (!v->stash && !(v->stash = av_packet_alloc()))
        return 0;
    v->seek_dur = dur;
    v->seek_ok = 1;
    return 1;
}

int sp_video_seek(sp_video *v, int64_t k, int *done, sp_error *err)
{
    (void)err;
    *done = 0;
    if (v->pending || v->flushing || v->done || v->stashed || k <= v->decoded || !seek_usable(v) ||
        !grid_sane(v->first_ts, v->seek_dur, k + 1))
        return SP_OK;
    int64_t target = v->first_ts + k * v->seek_dur;
    if (av_seek_frame(v->fmt, v->stream, target, AVSEEK_FLAG_BACKWARD) < 0) {
        *done = -1; /* where the demuxer stands is not known any more */
        return SP_OK;
    }
    avcodec_flush_buffers(v->dec);
    for (;;) {
        int ret = av_read_frame(v->fmt, v->pkt);
        if (ret < 0) {
            *done = -1;
            return SP_OK;
        }
        if (v->pkt->stream_index != v->stream) {
            av_packet_unref(v->pkt);
            continue;
        }
        int64_t pts = v->pkt->pts;
        if (pts != AV_NOPTS_VALUE && pts > -GRID_MAX && pts < target && (target - pts) % v->seek_dur == 0) {
            av_packet_unref(v->pkt);
            continue; /* landed before the frame: on the grid, drop */
        }
        if (pts != target) {
            av_packet_unref(v->pkt);
            *done = -1;
            return SP_OK;
        }
        av_packet_move_ref(v->stash, v->pkt);
        v->stashed = 1;
        v->decoded = k;
        *done = 1;
        return SP_OK;
    }
}

void sp_video_close(sp_video *v)
{
    if (!v)
        return;
    av_packet_free(&v->stash);
    sp_frameconv_free(&v->conv);
    av_frame_free(&v->frame);
    av_packet_free(&v->pkt);
    avcodec_free_context(&v->dec);
    avformat_close_input(&v->fmt);
    free(v->path);
    free(v);
}

/* ---------------------------------------------------------------- frames that decode on their own */

/* Packets the keyframe sampler lists at most (8 bytes each); longer runs read every frame. */
#define KEYS_MAX_PACKETS (1LL << 23)

typedef struct keypkt {
    int64_t index;     /* presentation position: rank of the packet's timestamp among all packets */
    int64_t dts_order; /* position in the file's packet order */
} keypkt;

/* Room for element n in *p (capacity *cap elements of size sz), doubling from `first`; -1 when out of
 * memory (the packet list is bounded by KEYS_MAX_PACKETS, so no size overflows). */
static int grow_for(size_t n, void **p, size_t *cap, size_t sz, size_t first)
{
    if (n < *cap)
        return 0;
    size_t nc = *cap ? 2 * *cap : first;
    void *q = realloc(*p, nc * sz);
    if (!q)
        return -1;
    *p = q;
    *cap = nc;
    return 0;
}

static int cmp_i64v(const void *a, const void *b)
{
    int64_t x = *(const int64_t *)a, y = *(const int64_t *)b;
    return x < y ? -1 : x > y;
}

/* Keyframe sampling. One demux-only pass lists the stream's packets: their presentation positions
 * (timestamps ranked; packets without a timestamp give up) and which are keyframes. For each target
 * position, the nearest unused keyframe is chosen; a second demux pass decodes only the chosen
 * packets, each on its own (decoder flushed, packet sent, drained), so the decoder never sees the
 * frames between them. */
int sp_video_sample_keys(const char *path, const int64_t *target, int ntarget, int64_t lo, int64_t hi,
                         int min_keys, sp_video_key_fn fn, void *ud, int *done, sp_error *err)
{
    char eb[128];
    int rc = SP_OK, ret;
    AVFormatContext *fmt = NULL;
    AVCodecContext *dec = NULL;
    AVPacket *pkt = NULL;
    AVFrame *frame = NULL;
    sp_frameconv conv = {0};
    sp_image full = {0};
    int64_t *pts = NULL, *sorted = NULL, *chosen_order = NULL, *chosen_index = NULL;
    keypkt *keys = NULL;
    size_t npts = 0, cap = 0, nkeys = 0, kcap = 0;
    *done = 0;
    sp_ffmpeg_quiet();
    if (ntarget < 1)
        return SP_OK;
    if (avformat_open_input(&fmt, path, NULL, NULL) < 0 || avformat_find_stream_info(fmt, NULL) < 0)
        goto unsupported;
    const AVCodec *codec = NULL;
    int stream = av_find_best_stream(fmt, AVMEDIA_TYPE_VIDEO, -1, -1, &codec, 0);
    if (stream < 0 || !codec)
        goto unsupported;
    /* Codecs whose every frame stands alone are better read in one pass, dropping packets. */
    const AVCodecDescriptor *desc = avcodec_descriptor_get(fmt->streams[stream]->codecpar->codec_id);
    if (desc && (desc->props & AV_CODEC_PROP_INTRA_ONLY))
        goto unsupported;
    if (!(pkt = av_packet_alloc()))
        goto oom;
    /* Pass 1: timestamps and key flags. */
    for (;;) {
        ret = av_read_frame(fmt, pkt);
        if (ret == AVERROR_EOF)
            break;
        if (ret < 0 || (int64_t)npts >= KEYS_MAX_PACKETS)
            goto unsupported;
        if (pkt->stream_index != stream) {
            av_packet_unref(pkt);
            continue;
        }
        int64_t t = pkt->pts;
        int key = (pkt->flags & AV_PKT_FLAG_KEY) != 0;
        av_packet_unref(pkt);
        if (t == AV_NOPTS_VALUE)
            goto unsupported;
        if (grow_for(npts, (void **)&pts, &cap, sizeof *pts, 4096))
            goto oom;
        if (key) {
            if (grow_for(nkeys, (void **)&keys, &kcap, sizeof *keys, 256))
                goto oom;
            keys[nkeys].index = t; /* ranked below */
            keys[nkeys].dts_order = (int64_t)npts;
            nkeys++;
        }
        pts[npts++] = t;
    }
    if (npts == 0 || nkeys == 0)
        goto unsupported;
    sorted = pts; /* the keys keep their own timestamps: rank against the sorted list in place */
    pts = NULL;
    qsort(sorted, npts, sizeof *sorted, cmp_i64v);
    for (size_t i = 1; i < npts; i++)
        if (sorted[i] == sorted[i - 1])
            goto unsupported; /* repeated timestamps: positions would be ambiguous */
    size_t inrange = 0;
    for (size_t k = 0; k < nkeys; k++) {
        int64_t t = keys[k].index;
        size_t a = 0, b = npts; /* rank of t */
        while (a < b) {
            size_t m = a + (b - a) / 2;
            if (sorted[m] < t)
                a = m + 1;
            else
                b = m;
        }
        keys[k].index = (int64_t)a;
        inrange += keys[k].index >= lo && keys[k].index < hi;
    }
    if ((int)inrange < min_keys)
        goto unsupported;

    /* The nearest unused keyframe in [lo, hi) for each target (keys are in file order; positions of
     * keyframes rise with it for the codecs met in practice, but nothing here relies on that). */
    if (!(chosen_order = malloc((size_t)ntarget * sizeof *chosen_order)) ||
        !(chosen_index = malloc((size_t)ntarget * sizeof *chosen_index)))
        goto oom;
    int nchosen = 0;
    for (int j = 0; j < ntarget; j++) {
        int64_t best = -1, bd = INT64_MAX, bo = -1;
        for (size_t k = 0; k < nkeys; k++) {
            int64_t ix = keys[k].index;
            if (ix < lo || ix >= hi)
                continue;
            int64_t d = ix > target[j] ? ix - target[j] : target[j] - ix;
            if (d < bd) {
                int used = 0;
                for (int q = 0; q < nchosen && !used; q++)
                    used = chosen_index[q] == ix;
                if (!used) {
                    bd = d;
                    best = ix;
                    bo = keys[k].dts_order;
                }
            }
        }
        chosen_index[j] = best;
        chosen_order[j] = bo;
        if (best >= 0)
            nchosen++;
        else
            chosen_index[j] = -1;
    }
    (void)nchosen;

    /* Pass 2: decode the chosen packets only. */
    avformat_close_input(&fmt);
    if (avformat_open_input(&fmt, path, NULL, NULL) < 0 || avformat_find_stream_info(fmt, NULL) < 0)
        goto unsupported;
    AVStream *st = fmt->streams[stream];
    if (!(dec = avcodec_alloc_context3(codec)) || !(frame = av_frame_alloc()))
        goto oom;
    if (avcodec_parameters_to_context(dec, st->codecpar) < 0)
        goto oom;
    dec->pkt_timebase = st->time_base;
    dec->max_pixels = SP_MAX_PIXELS;
    dec->thread_count = 0;
    dec->thread_type = FF_THREAD_SLICE;
    if ((ret = avcodec_open2(dec, codec, NULL)) < 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot open the %s decoder (%s)", path, codec->name,
                          sp_averr(ret, eb, sizeof eb));
        goto fail;
    }
    int64_t order = 0;
    for (;;) {
        ret = av_read_frame(fmt, pkt);
        if (ret == AVERROR_EOF)
            break;
        if (ret < 0) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot read the video (%s)", path,
                              sp_averr(ret, eb, sizeof eb));
            goto fail;
        }
        if (pkt->stream_index != stream) {
            av_packet_unref(pkt);
            continue;
        }
        int j = -1;
        for (int q = 0; q < ntarget && j < 0; q++)
            if (chosen_order[q] == order)
                j = q;
        order++;
        if (j < 0) {
            av_packet_unref(pkt);
            continue;
        }
        avcodec_flush_buffers(dec);
        ret = avcodec_send_packet(dec, pkt);
        av_packet_unref(pkt);
        if (ret >= 0)
            ret = avcodec_send_packet(dec, NULL);
        if (ret < 0) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot decode keyframe %lld (%s)", path,
                              (long long)chosen_index[j], sp_averr(ret, eb, sizeof eb));
            goto fail;
        }
        int got = 0;
        while ((ret = avcodec_receive_frame(dec, frame)) == 0) {
            if (!got) {
                if (frame->width != st->codecpar->width || frame->height != st->codecpar->height) {
                    rc = sp_error_set(err, SP_ERR_INPUT, "%s: keyframe %lld is %dx%d, the stream %dx%d", path,
                                      (long long)chosen_index[j], frame->width, frame->height,
                                      st->codecpar->width, st->codecpar->height);
                    goto fail;
                }
                if ((rc = sp_frameconv_run(&conv, frame, &full, path, err)) ||
                    (rc = fn(ud, &full, chosen_index[j], j, err)))
                    goto fail;
                got = 1;
            }
            av_frame_unref(frame);
        }
        if (ret != AVERROR_EOF) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot decode keyframe %lld (%s)", path,
                              (long long)chosen_index[j], sp_averr(ret, eb, sizeof eb));
            goto fail;
        }
        if (!got) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: keyframe %lld gives no picture on its own", path,
                              (long long)chosen_index[j]);
            goto fail;
        }
    }
    *done = 1;
    goto fail;
oom:
    rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory sampling keyframes", path);
    goto fail;
unsupported:
    rc = SP_OK;
    *done = 0;
fail:
    sp_image_free(&full);
    sp_frameconv_free(&conv);
    av_frame_free(&frame);
    av_packet_free(&pkt);
    avcodec_free_context(&dec);
    avformat_close_input(&fmt);
    free(pts);
    free(sorted);
    free(keys);
    free(chosen_order);
    free(chosen_index);
    return rc;
}

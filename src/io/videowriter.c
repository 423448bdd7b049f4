/* Encoding grey (and, for overlays, RGB) frames through libavcodec/libavformat. FFV1 is lossless and keeps
 * 16-bit samples, so a synthesised or exported recording decodes to exactly the frames that were written. */
#include "io/videowriter.h"
#include "io/source_internal.h" /* sp_ffmpeg_quiet */

#include <libavcodec/avcodec.h>
#include <libavformat/avformat.h>
#include <libavutil/imgutils.h>
#include <libavutil/opt.h>
#include <libavutil/rational.h>
#include <stdlib.h>
#include <string.h>

struct sp_video_writer {
    char *path;
    AVFormatContext *oc;
    AVCodecContext *enc;
    AVStream *st;
    AVFrame *frame;
    AVPacket *pkt;
    int w, h, bytes;
    int64_t next_pts;
    int header_written;
};

static int av_fail(sp_error *err, const char *path, const char *what, int averr)
{
    char buf[AV_ERROR_MAX_STRING_SIZE] = {0};
    av_strerror(averr, buf, sizeof buf);
    int code = averr == AVERROR(ENOMEM) ? SP_ERR_INTERNAL : SP_ERR_INPUT;
    return sp_error_set(err, code, "%s: %s: %s", path, what, buf);
}

static void writer_free(sp_video_writer *vw)
{
    if (!vw)
        return;
    av_frame_free(&vw->frame);
    av_packet_free(&vw->pkt);
    avcodec_free_context(&vw->enc);
    if (vw->oc) {
        if (vw->oc->pb)
            avio_closep(&vw->oc->pb);
        avformat_free_context(vw->oc);
    }
    free(vw->path);
    free(vw);
}

/* Move every packet the encoder has ready into the container. */
static int drain(sp_video_writer *vw, sp_error *err)
{
    for (;;) {
        int r = avcodec_receive_packet(vw->enc, vw->pkt);
        if (r == AVERROR(EAGAIN) || r == AVERROR_EOF)
            return SP_OK;
        if (r < 0)
            return av_fail(err, vw->path, "encoding failed", r);
        av_packet_rescale_ts(vw->pkt, vw->enc->time_base, vw->st->time_base);
        vw->pkt->stream_index = vw->st->index;
        r = av_interleaved_write_frame(vw->oc, vw->pkt);
        av_packet_unref(vw->pkt);
        if (r < 0)
            return av_fail(err, vw->path, "cannot write packet", r);
    }
}

/* The first 8-bit RGB layout the encoder accepts; each is a plain rearrangement of R,G,B bytes. */
static enum AVPixelFormat rgb_format(const AVCodec *codec)
{
    static const enum AVPixelFormat pref[] = {AV_PIX_FMT_BGR0, AV_PIX_FMT_RGB24, AV_PIX_FMT_BGR24,
                                              AV_PIX_FMT_GBRP};
    if (!codec->pix_fmts)
        return AV_PIX_FMT_NONE;
    for (size_t i = 0; i < sizeof pref / sizeof pref[0]; i++)
        for (const enum AVPixelFormat *f = codec->pix_fmts; *f != AV_PIX_FMT_NONE; f++)
            if (*f == pref[i])
                return pref[i];
    return AV_PIX_FMT_NONE;
}

int sp_video_writer_open(sp_video_writer **out, const char *path, int w, int h, int bytes,
                         const sp_video_writer_opts *o, sp_error *err)
{
    int rc = SP_OK, r;
    sp_video_writer *vw = NULL;
    *out = NULL;
    if (bytes != 1 && bytes != 2 && bytes != 3)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: unsupported sample size %d", path, bytes);
    rc = sp_check_dims(w, h, path, err);
    if (rc)
        return rc;
    sp_ffmpeg_quiet(); /* the library never prints: FFmpeg's log is switched off */
    double fps = o && o->fps > 0 ? o->fps : 25.0;
    const char *codec_name = o && o->codec && o->codec[0] ? o->codec : "ffv1";

    vw = calloc(1, sizeof *vw);
    if (!vw || !(vw->path = strdup(path))) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto fail;
    }
    vw->w = w;
    vw->h = h;
    vw->bytes = bytes;

    r = avformat_alloc_output_context2(&vw->oc, NULL, NULL, path);
    if (r < 0 || !vw->oc) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: no container format matches this file name", path);
        goto fail;
    }
    const AVCodec *codec = avcodec_find_encoder_by_name(codec_name);
    if (!codec) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: encoder '%s' is not available", path, codec_name);
        goto fail;
    }
    vw->st = avformat_new_stream(vw->oc, NULL);
    vw->enc = avcodec_alloc_context3(codec);
    vw->frame = av_frame_alloc();
    vw->pkt = av_packet_alloc();
    if (!vw->st || !vw->enc || !vw->frame || !vw->pkt) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory setting up the encoder", path);
        goto fail;
    }
    /* Time base 1/fps (as an exact rational when fps is one): pts = frame index. */
    AVRational rate = av_d2q(fps, 1000000);
    vw->enc->width = w;
    vw->enc->height = h;
    vw->enc->pix_fmt = bytes == 1 ? AV_PIX_FMT_GRAY8 : AV_PIX_FMT_GRAY16LE;
    if (bytes == 3) {
        vw->enc->pix_fmt = rgb_format(codec);
        if (vw->enc->pix_fmt == AV_PIX_FMT_NONE) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: encoder '%s' takes no 8-bit RGB format", path,
                              codec_name);
            goto fail;
        }
    }
    vw->enc->time_base = av_inv_q(rate);
    vw->enc->framerate = rate;
    vw->enc->gop_size = 1;
    vw->enc->thread_count = o && o->threads > 0 ? o->threads : 0;
    if (vw->oc->oformat->flags & AVFMT_GLOBALHEADER)
        vw->enc->flags |= AV_CODEC_FLAG_GLOBAL_HEADER;
    /* Bit-exact mode: no random container ids or version strings, so the same frames always
     * make the same file (the synthesiser promises byte-identical output). */
    vw->enc->flags |= AV_CODEC_FLAG_BITEXACT;
    vw->oc->flags |= AVFMT_FLAG_BITEXACT;
    if (strcmp(codec_name, "ffv1") == 0) {
        /* A fixed slice count keeps the bitstream independent of the encoder's thread count. */
        vw->enc->slices = 4;
        /* Golomb–Rice coding: on noisy camera frames it compresses as well as the range coder
         * at about twice the speed. */
        if (bytes == 1 || bytes == 3) /* (above 8 bits FFV1 needs the range coder) */
            av_opt_set(vw->enc->priv_data, "coder", "rice", 0);
        /* Version 3 with slice CRCs: robust, multithreadable, standard in archives. */
        av_opt_set_int(vw->enc->priv_data, "slicecrc", 1, 0);
        vw->enc->level = 3;
    }
    r = avcodec_open2(vw->enc, codec, NULL);
    if (r < 0) {
        rc = av_fail(err, path, "cannot open the encoder", r);
        goto fail;
    }
    r = avcodec_parameters_from_context(vw->st->codecpar, vw->enc);
    if (r < 0) {
        rc = av_fail(err, path, "cannot set stream parameters", r);
        goto fail;
    }
    vw->st->time_base = vw->enc->time_base;
    vw->st->avg_frame_rate = rate;
    vw->st->r_frame_rate = rate;

    if (!(vw->oc->oformat->flags & AVFMT_NOFILE)) {
        r = avio_open(&vw->oc->pb, path, AVIO_FLAG_WRITE);
        if (r < 0) {
            rc = av_fail(err, path, "cannot open for writing", r);
            goto fail;
        }
    }
    r = avformat_write_header(vw->oc, NULL);
    if (r < 0) {
        rc = av_fail(err, path, "cannot write the container header", r);
        goto fail;
    }
    vw->header_written = 1;

    vw->frame->format = vw->enc->pix_fmt;
    vw->frame->width = w;
    vw->frame->height = h;
    r = av_frame_get_buffer(vw->frame, 0);
    if (r < 0) {
        rc = av_fail(err, path, "cannot allocate a frame", r);
        goto fail;
    }
    *out = vw;
    return SP_OK;

fail:
    writer_free(vw);
    return rc ? rc : SP_ERR_INTERNAL;
}

int sp_video_writer_put(sp_video_writer *vw, const sp_image *img, sp_error *err)
{
    if (!img || vw->bytes == 3 || img->width != vw->w || img->height != vw->h || img->bytes != vw->bytes)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: frame does not match the video's size or depth",
                            vw->path);
    int r = av_frame_make_writable(vw->frame);
    if (r < 0)
        return av_fail(err, vw->path, "cannot reuse the frame buffer", r);
    size_t rowbytes = (size_t)vw->w * (size_t)vw->bytes;
    for (int y = 0; y < vw->h; y++) {
        uint8_t *dst = vw->frame->data[0] + (ptrdiff_t)y * vw->frame->linesize[0];
        const uint8_t *src = (const uint8_t *)img->data + (ptrdiff_t)y * img->stride;
        if (vw->bytes == 1) {
            memcpy(dst, src, rowbytes);
        } else {
            /* gray16le: write little-endian explicitly whatever the host order. */
            const uint16_t *s16 = (const uint16_t *)src;
            for (int x = 0; x < vw->w; x++) {
                dst[2 * x] = (uint8_t)(s16[x] & 0xff);
                dst[2 * x + 1] = (uint8_t)(s16[x] >> 8);
            }
        }
    }
    vw->frame->pts = vw->next_pts++;
    r = avcodec_send_frame(vw->enc, vw->frame);
    if (r < 0)
        return av_fail(err, vw->path, "encoding failed", r);
    return drain(vw, err);
}

int sp_video_writer_put_rgb(sp_video_writer *vw, const unsigned char *rgb, ptrdiff_t stride, sp_error *err)
{
    if (!rgb || vw->bytes != 3)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: colour frame for a grey video", vw->path);
    int r = av_frame_make_writable(vw->frame);
    if (r < 0)
        return av_fail(err, vw->path, "cannot reuse the frame buffer", r);
    enum AVPixelFormat fmt = vw->enc->pix_fmt;
    for (int y = 0; y < vw->h; y++) {
        const uint8_t *s = rgb + (ptrdiff_t)y * stride;
        uint8_t *d0 = vw->frame->data[0] + (ptrdiff_t)y * vw->frame->linesize[0];
        if (fmt == AV_PIX_FMT_RGB24) {
            memcpy(d0, s, (size_t)vw->w * 3);
        } else if (fmt == AV_PIX_FMT_BGR24 || fmt == AV_PIX_FMT_BGR0) {
            int px = fmt == AV_PIX_FMT_BGR0 ? 4 : 3;
            for (int x = 0; x < vw->w; x++) {
                d0[px * x] = s[3 * x + 2];
                d0[px * x + 1] = s[3 * x + 1];
                d0[px * x + 2] = s[3 * x];
                if (px == 4)
                    d0[px * x + 3] = 0;
            }
        } else { /* GBRP: planes G, B, R */
            uint8_t *d1 = vw->frame->data[1] + (ptrdiff_t)y * vw->frame->linesize[1];
            uint8_t *d2 = vw->frame->data[2] + (ptrdiff_t)y * vw->frame->linesize[2];
            for (int x = 0; x < vw->w; x++) {
                d0[x] = s[3 * x + 1];
                d1[x] = s[3 * x + 2];
                d2[x] = s[3 * x];
            }
        }
    }
    vw->frame->pts = vw->next_pts++;
    r = avcodec_send_frame(vw->enc, vw->frame);
    if (r < 0)
        return av_fail(err, vw->path, "encoding failed", r);
    return drain(vw, err);
}

int sp_video_writer_close(sp_video_writer *vw, sp_error *err)
{
    int rc = SP_OK;
    if (!vw)
        return SP_OK;
    int r = avcodec_send_frame(vw->enc, NULL);
    if (r < 0 && r != AVERROR_EOF)
        rc = av_fail(err, vw->path, "cannot flush the encoder", r);
    if (!rc)
        rc = drain(vw, err);
    if (vw->header_written) {
        r = av_write_trailer(vw->oc);
        if (r < 0 && !rc)
            rc = av_fail(err, vw->path, "cannot write the container trailer", r);
    }
    if (vw->oc && vw->oc->pb) {
        r = avio_closep(&vw->oc->pb);
        if (r < 0 && !rc)
            rc = av_fail(err, vw->path, "cannot finish writing", r);
    }
    writer_free(vw);
    return rc;
}

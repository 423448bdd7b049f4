/* Single still images through libavcodec: the file is one packet, the decoder is chosen by the
 * file's first bytes (not its name), and header sizes are checked before the decoder allocates. */
#include "io/ffimage.h"
#include "io/source_internal.h"

#include <libavcodec/avcodec.h>

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

/* Largest image file read into memory: a 64 Mpx 16-bit RGBA TIFF stored uncompressed plus room. */
#define MAX_FILE_BYTES (SP_MAX_PIXELS * 8 + (1LL << 24))

static enum AVCodecID sniff_id(const uint8_t *p, size_t n)
{
    if (n >= 4 && ((p[0] == 'I' && p[1] == 'I' && p[2] == 42 && p[3] == 0) ||
                   (p[0] == 'M' && p[1] == 'M' && p[2] == 0 && p[3] == 42)))
        return AV_CODEC_ID_TIFF;
    if (n >= 2 && p[0] == 'B' && p[1] == 'M')
        return AV_CODEC_ID_BMP;
    if (n >= 3 && p[0] == 'P' && (p[2] == ' ' || p[2] == '\n' || p[2] == '\r' || p[2] == '\t')) {
        if (p[1] == '4')
            return AV_CODEC_ID_PBM;
        if (p[1] == '5')
            return AV_CODEC_ID_PGM;
        if (p[1] == '6')
            return AV_CODEC_ID_PPM;
    }
    return AV_CODEC_ID_NONE;
}

const char *sp_ffimage_sniff(const uint8_t *head, size_t n)
{
    enum AVCodecID id = sniff_id(head, n);
    return id == AV_CODEC_ID_NONE ? NULL : avcodec_get_name(id);
}

static unsigned rd16(const uint8_t *p, int le)
{
    return le ? (unsigned)p[0] | (unsigned)p[1] << 8 : (unsigned)p[0] << 8 | p[1];
}

static uint32_t rd32(const uint8_t *p, int le)
{
    return le ? (uint32_t)rd16(p, 1) | (uint32_t)rd16(p + 2, 1) << 16
              : (uint32_t)rd16(p, 0) << 16 | rd16(p + 2, 0);
}

/* Width and height from the first TIFF directory (tags 256 and 257), or 0 when absent/unreadable
 * (the decoder then judges the file). Every offset is checked against the buffer. */
static void tiff_dims(const uint8_t *p, size_t n, long long *w, long long *h)
{
    *w = *h = 0;
    if (n < 8)
        return;
    int le = p[0] == 'I';
    uint32_t ifd = rd32(p + 4, le);
    if (ifd > n || n - ifd < 2)
        return;
    unsigned count = rd16(p + ifd, le);
    if ((size_t)count * 12 > n - ifd - 2)
        return;
    for (unsigned i = 0; i < count; i++) {
        const uint8_t *e = p + ifd + 2 + 12 * (size_t)i;
        unsigned tag = rd16(e, le), type = rd16(e + 2, le);
        long long v = type == 3 ? (long long)rd16(e + 8, le) : type == 4 ? (long long)rd32(e + 8, le) : -1;
        if (tag == 256)
            *w = v;
        else if (tag == 257)
            *h = v;
    }
}

int sp_ffimage_read(const char *path, sp_image *img, sp_error *err)
{
    char eb[128];
    int rc = SP_OK;
    FILE *fp = NULL;
    uint8_t *data = NULL;
    AVCodecContext *dec = NULL;
    AVPacket *pkt = NULL;
    AVFrame *frame = NULL;
    sp_frameconv conv;
    memset(&conv, 0, sizeof conv);
    sp_ffmpeg_quiet();

    fp = fopen(path, "rb");
    struct stat sb;
    if (!fp || fstat(fileno(fp), &sb) != 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot open (%s)", path, strerror(errno));
        goto fail;
    }
    if (sb.st_size == 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: empty file", path);
        goto fail;
    }
    if (!S_ISREG(sb.st_mode) || sb.st_size > MAX_FILE_BYTES) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: not a regular file of at most %lld bytes", path,
                          (long long)MAX_FILE_BYTES);
        goto fail;
    }
    size_t n = (size_t)sb.st_size;
    data = av_malloc(n + AV_INPUT_BUFFER_PADDING_SIZE);
    if (!data) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory for %zu bytes", path, n);
        goto fail;
    }
    memset(data + n, 0, AV_INPUT_BUFFER_PADDING_SIZE);
    if (fread(data, 1, n, fp) != n) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: read error", path);
        goto fail;
    }
    enum AVCodecID id = sniff_id(data, n);
    const AVCodec *codec = id == AV_CODEC_ID_NONE ? NULL : avcodec_find_decoder(id);
    if (!codec) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: not an image format this program reads", path);
        goto fail;
    }
    if (id == AV_CODEC_ID_TIFF) {
        long long w, h;
        tiff_dims(data, n, &w, &h);
        if (w || h) {
            rc = sp_check_dims(w, h, path, err);
            if (rc)
                goto fail;
        }
    } else if (id == AV_CODEC_ID_BMP && n >= 26) {
        long long w = (int32_t)rd32(data + 18, 1), h = (int32_t)rd32(data + 22, 1);
        rc = sp_check_dims(w, h < 0 ? -h : h, path, err);
        if (rc)
            goto fail;
    }

    if (!(dec = avcodec_alloc_context3(codec)) || !(pkt = av_packet_alloc()) || !(frame = av_frame_alloc())) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto fail;
    }
    dec->max_pixels = SP_MAX_PIXELS; /* second guard for formats without a header check above */
    dec->thread_count = 1;
    int ret = avcodec_open2(dec, codec, NULL);
    if (ret < 0) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: cannot open the %s decoder (%s)", path, codec->name,
                          sp_averr(ret, eb, sizeof eb));
        goto fail;
    }
    ret = av_packet_from_data(pkt, data, (int)n);
    if (ret < 0) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: cannot wrap the file (%s)", path,
                          sp_averr(ret, eb, sizeof eb));
        goto fail;
    }
    data = NULL; /* now owned by pkt */
    ret = avcodec_send_packet(dec, pkt);
    if (ret >= 0)
        ret = avcodec_send_packet(dec, NULL);
    if (ret >= 0)
        ret = avcodec_receive_frame(dec, frame);
    if (ret < 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot decode the %s image (%s)", path, codec->name,
                          sp_averr(ret, eb, sizeof eb));
        goto fail;
    }
    rc = sp_frameconv_run(&conv, frame, img, path, err);

fail:
    sp_frameconv_free(&conv);
    av_frame_free(&frame);
    av_packet_free(&pkt);
    avcodec_free_context(&dec);
    av_free(data);
    if (fp)
        fclose(fp);
    return rc;
}

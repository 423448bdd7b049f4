/* JPEG still frames through libjpeg(-turbo), decoded straight to grey. */
#include "io/jpeg.h"

#include <errno.h>
#include <setjmp.h>
#include <stdio.h> /* before jpeglib.h, which uses FILE */

#include <jpeglib.h>
#include <stdlib.h>
#include <string.h>

/* Progressive files may hold many scans; a crafted file with thousands costs time for nothing. */
#define MAX_SCANS 1000

typedef struct jpeg_ctx {
    struct jpeg_error_mgr mgr; /* first member: libjpeg hands back its address */
    struct jpeg_progress_mgr progress;
    jmp_buf jb;
    char msg[JMSG_LENGTH_MAX];
} jpeg_ctx;

/* libjpeg's default handler exits the process; ours keeps the words and unwinds. */
static void on_error(j_common_ptr cinfo)
{
    jpeg_ctx *c = (jpeg_ctx *)cinfo->err;
    c->mgr.format_message(cinfo, c->msg);
    longjmp(c->jb, 1);
}

/* Warnings (level -1) are libjpeg's words for corrupt or truncated data ("Premature end of JPEG
 * file") after which it fills in grey; a measurement must not use such pixels, so they are fatal.
 * Trace messages (level >= 0) are ignored. */
static void on_message(j_common_ptr cinfo, int level)
{
    if (level < 0)
        on_error(cinfo);
}

static void on_progress(j_common_ptr cinfo)
{
    j_decompress_ptr d = (j_decompress_ptr)cinfo;
    if (cinfo->is_decompressor && d->input_scan_number > MAX_SCANS) {
        jpeg_ctx *c = (jpeg_ctx *)cinfo->err;
        snprintf(c->msg, sizeof c->msg, "more than %d scans", MAX_SCANS);
        longjmp(c->jb, 1);
    }
}

int sp_jpeg_read(const char *path, sp_image *img, sp_error *err)
{
    struct jpeg_decompress_struct cinfo;
    jpeg_ctx ctx;
    int rc = SP_OK;
    FILE *volatile fp = NULL;
    volatile int created = 0;
    ctx.msg[0] = '\0';

    fp = fopen(path, "rb");
    if (!fp)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot open (%s)", path, strerror(errno));
    int c0 = fgetc(fp);
    if (c0 == EOF) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: empty file", path);
        goto fail;
    }
    rewind(fp);

    cinfo.err = jpeg_std_error(&ctx.mgr);
    ctx.mgr.error_exit = on_error;
    ctx.mgr.emit_message = on_message;
    if (setjmp(ctx.jb)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: corrupt or truncated JPEG (%s)", path, ctx.msg);
        goto fail;
    }
    jpeg_create_decompress(&cinfo);
    created = 1;
    ctx.progress.progress_monitor = on_progress;
    cinfo.progress = &ctx.progress;
    jpeg_stdio_src(&cinfo, fp);
    jpeg_read_header(&cinfo, TRUE);
    rc = sp_check_dims(cinfo.image_width, cinfo.image_height, path, err);
    if (rc)
        goto fail;
    /* libjpeg converts only grey, YCbCr and RGB to grey output; YCbCr gives its Y channel. */
    if (cinfo.jpeg_color_space != JCS_GRAYSCALE && cinfo.jpeg_color_space != JCS_YCbCr &&
        cinfo.jpeg_color_space != JCS_RGB) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: unsupported JPEG colour space (CMYK/YCCK)", path);
        goto fail;
    }
    cinfo.out_color_space = JCS_GRAYSCALE;
    jpeg_start_decompress(&cinfo);
    if (cinfo.output_components != 1 || cinfo.output_width != cinfo.image_width ||
        cinfo.output_height != cinfo.image_height) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: unexpected JPEG output layout", path);
        goto fail;
    }
    rc = sp_image_alloc(img, (int)cinfo.output_width, (int)cinfo.output_height, 1, err);
    if (rc)
        goto fail;
    img->bits = 8;
    while (cinfo.output_scanline < cinfo.output_height) {
        JSAMPROW row = (JSAMPROW)((uint8_t *)img->data + (ptrdiff_t)cinfo.output_scanline * img->stride);
        if (jpeg_read_scanlines(&cinfo, &row, 1) != 1) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: JPEG decoding stopped at row %u", path,
                              (unsigned)cinfo.output_scanline);
            goto fail;
        }
    }
    jpeg_finish_decompress(&cinfo);

fail:
    if (created)
        jpeg_destroy_decompress(&cinfo);
    if (fp)
        fclose(fp);
    return rc;
}

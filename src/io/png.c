/* PNG still frames through libpng: any colour type and bit depth, to grey at 8 or 16 bits. */
#include "io/png.h"
#include "io/source_internal.h"

#include <png.h>

#include <errno.h>
#include <setjmp.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct png_ctx {
    jmp_buf jb;
    char msg[200];
} png_ctx;

/* libpng reports fatal errors here; we keep its words and unwind to the single exit. */
static void on_error(png_structp png, png_const_charp msg)
{
    png_ctx *c = png_get_error_ptr(png);
    snprintf(c->msg, sizeof c->msg, "%s", msg);
    longjmp(c->jb, 1);
}

static void on_warning(png_structp png, png_const_charp msg)
{
    (void)png;
    (void)msg; /* the library never prints */
}

/* One output row of libpng (after expansion: 1..4 channels of 8 or 16 bits, big-endian) to grey.
 * Grey keeps its value, alpha is dropped, RGB goes through sp_luma_rgb (Pillow's weights). */
static void row_to_grey(const uint8_t *src, int w, int channels, int depth16, uint8_t *dst)
{
    if (!depth16) {
        for (int x = 0; x < w; x++, src += channels)
            dst[x] = channels >= 3 ? (uint8_t)sp_luma_rgb(src[0], src[1], src[2]) : src[0];
    } else {
        uint16_t *d16 = (uint16_t *)dst;
        for (int x = 0; x < w; x++, src += 2 * channels) {
            unsigned r = (unsigned)src[0] << 8 | src[1];
            if (channels >= 3) {
                unsigned g = (unsigned)src[2] << 8 | src[3], b = (unsigned)src[4] << 8 | src[5];
                d16[x] = (uint16_t)sp_luma_rgb(r, g, b);
            } else {
                d16[x] = (uint16_t)r;
            }
        }
    }
}

int sp_png_read(const char *path, sp_image *img, sp_error *err)
{
    png_ctx ctx;
    int rc = SP_OK;
    FILE *volatile fp = NULL;
    png_structp volatile png = NULL;
    png_infop volatile info = NULL;
    uint8_t *volatile buf = NULL;
    ctx.msg[0] = '\0';

    fp = fopen(path, "rb");
    if (!fp)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot open (%s)", path, strerror(errno));
    uint8_t sig[8];
    size_t nsig = fread(sig, 1, sizeof sig, fp);
    if (nsig == 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: empty file", path);
        goto fail;
    }
    if (nsig < 8 || png_sig_cmp(sig, 0, 8) != 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: not a PNG file", path);
        goto fail;
    }
    png = png_create_read_struct(PNG_LIBPNG_VER_STRING, &ctx, on_error, on_warning);
    if (!png || !(info = png_create_info_struct(png))) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto fail;
    }
    if (setjmp(ctx.jb)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: corrupt or truncated PNG (%s)", path, ctx.msg);
        goto fail;
    }
    /* libpng's own limit is left wide so that the size cap below reports in our words. */
    png_set_user_limits(png, 0x7fffffffL, 0x7fffffffL);
    png_init_io(png, fp);
    png_set_sig_bytes(png, 8);
    png_read_info(png, info);

    png_uint_32 w = 0, h = 0;
    int depth = 0, ctype = 0, interlace = 0;
    png_get_IHDR(png, info, &w, &h, &depth, &ctype, &interlace, NULL, NULL);
    rc = sp_check_dims(w, h, path, err);
    if (rc)
        goto fail;

    /* Expand palette and 1/2/4-bit grey to 8 bits (libpng scales 1 -> 255, 2-bit by 85, 4-bit by
     * 17); tRNS is not turned into alpha. */
    if (ctype == PNG_COLOR_TYPE_PALETTE)
        png_set_palette_to_rgb(png);
    if (ctype == PNG_COLOR_TYPE_GRAY && depth < 8)
        png_set_expand_gray_1_2_4_to_8(png);
    int passes = png_set_interlace_handling(png);
    png_read_update_info(png, info);
    int channels = png_get_channels(png, info);
    int depth16 = png_get_bit_depth(png, info) == 16;
    size_t rowbytes = png_get_rowbytes(png, info);
    if (channels < 1 || channels > 4 || rowbytes != (size_t)w * (size_t)channels * (depth16 ? 2 : 1)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: unsupported PNG layout", path);
        goto fail;
    }
    rc = sp_image_alloc(img, (int)w, (int)h, depth16 ? 2 : 1, err);
    if (rc)
        goto fail;
    img->bits = depth16 ? 16 : 8;

    if (passes <= 1) {
        /* Row by row: only one decoded row is held. */
        buf = malloc(rowbytes);
        if (!buf) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
            goto fail;
        }
        for (png_uint_32 y = 0; y < h; y++) {
            png_read_row(png, buf, NULL);
            row_to_grey(buf, (int)w, channels, depth16, (uint8_t *)img->data + (ptrdiff_t)y * img->stride);
        }
    } else {
        /* Adam7 fills every row over seven passes, so the whole decoded image must be held. */
        buf = malloc(rowbytes * h);
        if (!buf) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory for an interlaced %ux%u PNG", path,
                              (unsigned)w, (unsigned)h);
            goto fail;
        }
        for (int p = 0; p < passes; p++)
            for (png_uint_32 y = 0; y < h; y++)
                png_read_row(png, buf + rowbytes * y, NULL);
        for (png_uint_32 y = 0; y < h; y++)
            row_to_grey(buf + rowbytes * y, (int)w, channels, depth16,
                        (uint8_t *)img->data + (ptrdiff_t)y * img->stride);
    }
    png_read_end(png, NULL);

fail:
    free(buf);
    if (png) {
        png_structp p = png;
        png_infop i = info;
        png_destroy_read_struct(&p, i ? &i : NULL, NULL);
    }
    if (fp)
        fclose(fp);
    return rc;
}

/* Writing grey frames as PNG through libpng (8-bit, or 16-bit with an sBIT chunk recording the
 * significant bits of a 10/12-bit camera; samples stay in the low bits as the camera wrote them). */
#include "io/png.h"

#include <png.h>
#include <setjmp.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <errno.h>

typedef struct write_ctx {
    const char *path;
    sp_error *err;
    int reported;
} write_ctx;

static void on_png_error(png_structp png, png_const_charp msg)
{
    write_ctx *c = png_get_error_ptr(png);
    if (c && !c->reported) {
        sp_error_set(c->err, SP_ERR_INPUT, "%s: cannot write PNG: %s", c->path, msg);
        c->reported = 1;
    }
    png_longjmp(png, 1);
}

static void on_png_warning(png_structp png, png_const_charp msg)
{
    (void)png;
    (void)msg; /* the library never prints */
}

int sp_png_write(const char *path, const sp_image *img, sp_error *err)
{
    int rc = SP_OK;
    FILE *f = NULL;
    png_structp png = NULL;
    png_infop info = NULL;
    /* volatile: modified between setjmp and a possible longjmp */
    uint8_t *volatile swapped = NULL;
    write_ctx ctx = {path, err, 0};

    if (!img || !img->data || (img->bytes != 1 && img->bytes != 2))
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: no image or unsupported sample size to write", path);
    rc = sp_check_dims(img->width, img->height, path, err);
    if (rc)
        return rc;

    f = fopen(path, "wb");
    if (!f)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot open for writing: %s", path, strerror(errno));

    png = png_create_write_struct(PNG_LIBPNG_VER_STRING, &ctx, on_png_error, on_png_warning);
    if (!png) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory creating the PNG writer", path);
        goto fail;
    }
    info = png_create_info_struct(png);
    if (!info) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory creating the PNG writer", path);
        goto fail;
    }
    if (setjmp(png_jmpbuf(png))) {
        rc = ctx.reported ? err->code : sp_error_set(err, SP_ERR_INPUT, "%s: cannot write PNG", path);
        goto fail;
    }
    png_init_io(png, f);
    /* Fast deflate and one fixed filter: frames are written by the hundred, and on noisy camera
     * frames the adaptive filter choice and harder deflate gain only a few percent. */
    png_set_compression_level(png, 1);
    png_set_filter(png, PNG_FILTER_TYPE_BASE, PNG_FILTER_SUB);
    int depth = img->bytes * 8;
    png_set_IHDR(png, info, (png_uint_32)img->width, (png_uint_32)img->height, depth, PNG_COLOR_TYPE_GRAY,
                 PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    if (img->bytes == 2 && img->bits >= 1 && img->bits < 16) {
        png_color_8 sig;
        memset(&sig, 0, sizeof sig);
        sig.gray = (png_byte)img->bits;
        png_set_sBIT(png, info, &sig);
    }
    png_write_info(png, info);

    if (img->bytes == 1) {
        for (int y = 0; y < img->height; y++)
            png_write_row(png, (png_const_bytep)sp_row8(img, y));
    } else {
        /* PNG stores 16-bit samples big-endian; convert one row at a time whatever the host. */
        swapped = malloc((size_t)img->width * 2);
        if (!swapped) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory writing PNG", path);
            goto fail;
        }
        for (int y = 0; y < img->height; y++) {
            const uint16_t *row = sp_row16(img, y);
            for (int x = 0; x < img->width; x++) {
                swapped[2 * x] = (uint8_t)(row[x] >> 8);
                swapped[2 * x + 1] = (uint8_t)(row[x] & 0xff);
            }
            png_write_row(png, swapped);
        }
    }
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    free(swapped);
    if (fclose(f) != 0) {
        f = NULL;
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot finish writing: %s", path, strerror(errno));
    }
    return SP_OK;

fail:
    if (png)
        png_destroy_write_struct(&png, info ? &info : NULL);
    free(swapped);
    if (f)
        fclose(f);
    return rc ? rc : SP_ERR_INTERNAL;
}

/* Grey images at native depth, with overflow-checked allocation. */
#include "spume.h"

#include <stdlib.h>
#include <string.h>

int sp_check_dims(long long w, long long h, const char *what, sp_error *err)
{
    if (w <= 0 || h <= 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: frame size %lldx%lld is empty or negative", what, w, h);
    if (w > SP_MAX_DIM || h > SP_MAX_DIM || w * h > SP_MAX_PIXELS)
        return sp_error_set(err, SP_ERR_INPUT,
                            "%s: frame size %lldx%lld exceeds the cap (%d px a side, %lld px in all)", what,
                            w, h, SP_MAX_DIM, (long long)SP_MAX_PIXELS);
    return SP_OK;
}

int sp_image_alloc(sp_image *im, int w, int h, int bytes, sp_error *err)
{
    if (bytes != 1 && bytes != 2)
        return sp_error_set(err, SP_ERR_INTERNAL, "image: unsupported sample size %d", bytes);
    int rc = sp_check_dims(w, h, "image", err);
    if (rc)
        return rc;
    if (im->data && im->width == w && im->height == h && im->bytes == bytes)
        return SP_OK;
    free(im->data);
    memset(im, 0, sizeof *im);
    /* Rows padded to 64 bytes so row starts stay aligned for vector loads. */
    ptrdiff_t stride = ((ptrdiff_t)w * bytes + 63) & ~(ptrdiff_t)63;
    void *p = NULL;
    if (posix_memalign(&p, 64, (size_t)stride * (size_t)h) != 0)
        return sp_error_set(err, SP_ERR_INTERNAL, "image: out of memory for %dx%d", w, h);
    im->width = w;
    im->height = h;
    im->bytes = bytes;
    im->bits = bytes * 8;
    im->stride = stride;
    im->data = p;
    return SP_OK;
}

void sp_image_free(sp_image *im)
{
    if (!im)
        return;
    free(im->data);
    memset(im, 0, sizeof *im);
}

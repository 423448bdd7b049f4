/* JPEG still frames through libjpeg(-turbo). */
#ifndef SP_IO_JPEG_H
#define SP_IO_JPEG_H

#include "spume.h"

/* Read a JPEG (baseline or progressive, grey or YCbCr/RGB colour) as an 8-bit grey image. Colour is
 * decoded with libjpeg's grayscale output, i.e. the luma channel as coded (the same result as
 * Pillow's Image.draft('L', size) decode). Truncated or corrupt data, including what libjpeg only
 * warns about, is an SP_ERR_INPUT error naming the file. */
int sp_jpeg_read(const char *path, sp_image *img, sp_error *err);

#endif

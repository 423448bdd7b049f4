/* PNG still frames through libpng. */
#ifndef SP_IO_PNG_H
#define SP_IO_PNG_H

#include "spume.h"

/* Read a PNG file into a grey image at native depth (8 or 16 bit); colour is converted to luma,
 * palette expanded, alpha dropped. Every header value is checked against the caps. */
int sp_png_read(const char *path, sp_image *img, sp_error *err);

/* Write a grey image (8 or 16 bit) as PNG to path (the caller chooses a temporary name and
 * renames). */
int sp_png_write(const char *path, const sp_image *img, sp_error *err);

#endif

/* Single still images decoded by libavcodec (TIFF, BMP, PNM). */
#ifndef SP_IO_FFIMAGE_H
#define SP_IO_FFIMAGE_H

#include "spume.h"

#include <stddef.h>

/* Does the file start like an image this reader handles? Returns the codec name or NULL. */
const char *sp_ffimage_sniff(const uint8_t *head, size_t n);

/* Read the first image in path (the first page of a multi-page TIFF) as grey at native depth, by
 * the rules of sp_frameconv_run: grey kept as is, colour to luma with Pillow's weights. */
int sp_ffimage_read(const char *path, sp_image *img, sp_error *err);

#endif

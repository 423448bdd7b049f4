/* An 8-bit RGB canvas for overlays: a grey frame promoted to colour, with lines, ellipse outlines,
 * digits in a small bitmap font, and PNG encoding (to memory or to a file) through libpng. */
#ifndef SP_REPORT_CANVAS_H
#define SP_REPORT_CANVAS_H

#include "spume.h"

typedef struct sp_rgb {
    unsigned char r, g, b;
} sp_rgb;

typedef struct sp_canvas {
    int w, h;
    unsigned char *rgb; /* w*h*3 bytes, rows packed (owned) */
} sp_canvas;

/* Allocate (or reuse) a canvas of img's size and fill it with img's grey levels, scaled from its
 * significant bits to 8 bits. */
int sp_canvas_from_image(sp_canvas *c, const sp_image *img, sp_error *err);
void sp_canvas_free(sp_canvas *c);

void sp_canvas_pixel(sp_canvas *c, int x, int y, sp_rgb col);
/* Straight line between pixel centres (rounded), Bresenham 1965. */
void sp_canvas_line(sp_canvas *c, double x0, double y0, double x1, double y1, sp_rgb col);
/* Outline of the ellipse with centre (cx, cy) in pixel coordinates (y down), full axes major and
 * minor, and the major axis at tilt_deg counter-clockwise from +x as seen on screen (y up), i.e.
 * at −tilt in image coordinates. Dashed when dash is set. Every drawn pixel is the rounded position
 * of a point on the curve, so it lies within √2/2 px of the true outline. */
void sp_canvas_ellipse(sp_canvas *c, double cx, double cy, double major, double minor, double tilt_deg,
                       int dash, sp_rgb col);
/* Decimal digits (and '-', '+', '#') at top-left (x, y) in a 3×5 font scaled by `scale`, each
 * glyph ringed by a one-pixel halo of `halo` so it reads on light and dark ground. */
void sp_canvas_text(sp_canvas *c, int x, int y, const char *s, int scale, sp_rgb col, sp_rgb halo);
/* Width in pixels of s drawn at scale. */
int sp_canvas_text_width(const char *s, int scale);

/* Encode as an 8-bit RGB PNG into a malloc'd buffer (*out, *n; caller frees). */
int sp_canvas_png(const sp_canvas *c, unsigned char **out, size_t *n, const char *what, sp_error *err);
/* Write as PNG to path via a temporary name renamed when complete. */
int sp_canvas_png_write(const sp_canvas *c, const char *path, sp_error *err);
/* Write n encoded bytes to path the same way. */
int sp_png_bytes_write(const unsigned char *p, size_t n, const char *path, sp_error *err);

#endif

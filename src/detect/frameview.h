/* What a per-frame stage sees of a frame: the raw samples and the light it was taken against. */
#ifndef SP_DETECT_FRAMEVIEW_H
#define SP_DETECT_FRAMEVIEW_H

#include "spume.h"

typedef struct sp_frame_view {
    const sp_image *frame; /* raw grey frame at native depth */
    const float *bg;       /* background (bright level) per pixel, width*height, row stride width */
    float gain;            /* frame-wide light level relative to bg (flicker), normally near 1 */
} sp_frame_view;

/* Normalised transmission at (x, y): 1 = full light, 0 = black. */
static inline float sp_view_norm(const sp_frame_view *v, int x, int y)
{
    const sp_image *f = v->frame;
    float raw = f->bytes == 1 ? (float)sp_row8(f, y)[x] : (float)sp_row16(f, y)[x];
    float b = v->bg[(size_t)y * (size_t)f->width + (size_t)x] * v->gain;
    return b > 0.f ? raw / b : 0.f;
}

#endif

/* Drawing one bubble of a shadowgraph: its loss of light (deficit = 1 - transmission) on a small
 * patch, which the caller multiplies into the frame's transmission. */
#ifndef SP_SYNTH_RENDER_H
#define SP_SYNTH_RENDER_H

#include <stddef.h>

/* How one bubble looks in one frame. Pixel coordinates: origin at the top-left pixel's centre,
 * y downward; tilt counter-clockwise from +x with y up (CONTRACT.md). */
typedef struct sp_bubble_look {
    double x_px, y_px;           /* centre at mid-exposure */
    double a_px, b_px;           /* semi-axes, a >= b > 0 */
    double tilt_deg;             /* direction of the major axis */
    double band;                 /* transmission of the thick dark band (0 = black) */
    double shoulder;             /* transmission of the thin grey shoulder just inside the outline */
    double shoulder_px;          /* width of that shoulder */
    double spot;                 /* peak transmission of the refraction spot (0 = none) */
    double spot_frac;            /* spot semi-axes as a fraction of the bubble's */
    double spot_u, spot_v;       /* spot centre offset along the major/minor axis, fractions of a, b */
    double contrast;             /* multiplies the deficit: weak for small or far-off-focus bubbles */
    double blur_px;              /* pillbox (defocus disc) radius */
    double motion_dx, motion_dy; /* displacement during the exposure, pixels */
} sp_bubble_look;

/* A patch of deficit values. Buffers are owned by the patch and reused between calls. */
typedef struct sp_patch {
    int x0, y0, w, h; /* position of d[0] in the frame and size */
    float *d;         /* w*h deficits in [0, 1], row stride w */
    float *tmp;       /* scratch for the blurs */
    size_t cap;       /* floats allocated in d and in tmp */
} sp_patch;

/* Render the bubble for a frame of fw×fh (the patch is clipped to the frame plus the blur
 * margin). The sharp silhouette is exact: pixels the outline crosses are supersampled (8×8, or 16×16 below 8 px semi-minor axis), so
 * the deficit of a flat black bubble sums to its area. Returns 0, or -1 when out of memory. */
int sp_render_bubble(const sp_bubble_look *b, int fw, int fh, sp_patch *p);

/* trans[y*fw + x] *= 1 - d over the part of the patch inside the frame. */
void sp_render_composite(const sp_patch *p, float *trans, int fw, int fh);

void sp_patch_free(sp_patch *p);

/* Half extents of the ellipse's bounding box along x and y. */
void sp_ellipse_extent(double a, double b, double tilt_deg, double *hx, double *hy);

#endif

/* Sub-pixel outline of one labelled component (internal to the detect layer).
 *
 * Method (documented choice): the outer outline is the set of 4-neighbour pixel pairs (p, q) with p
 * in the component and q in the component's exterior, where the exterior is the background reached
 * from outside the bounding box through 4-connected non-component pixels (so an unfilled bright
 * refraction spot or any enclosed pixel never contributes). Along the line through p and q, the
 * transmission profile n(p + k·d), k = −3..4, is searched for the upward crossing nearest to the
 * p–q step, interpolated linearly between the two samples: first of the component-wide level
 * n_dark + edge_level·(n_light − n_dark), then of the local step. The local step runs from the
 * transmission SP_EDGE_INSET_PX inside that first crossing (on the profile, interpolated) to the light:
 * a backlit bubble's outline is often a thin grey shoulder (light totally reflected at grazing
 * incidence) lighter than the dark band further in, and the edge sits at edge_level of the step the
 * outline itself makes, not of the step to the band. On a plain step both levels coincide.
 *
 * Levels: n_light is the median transmission of background pixels (label 0) 3..10 px outside the
 * component along the same pair directions: far enough to step over a defocus ramp of up to ~3.5 px at any
 * edge direction, near enough to follow residual light gradients, and blind to other bubbles. n_dark is the
 * 20th percentile of the component's own pixels: the dark band, unaffected by a bright spot that covers less
 * than ~80 % of the area. */
#ifndef SP_DETECT_EDGES_H
#define SP_DETECT_EDGES_H

#include "spume.h"
#include "detect/frameview.h"
#include "detect/label.h"

/* How far inside the provisional edge the local step's inner level is read, px: one pixel, past the
 * edge pixel's own partial coverage and still on a grey shoulder of a pixel or more. */
#define SP_EDGE_INSET_PX 1.2

/* One crack of the traced outer contour. */
typedef struct sp_contour_pt {
    double x, y;   /* sub-pixel crossing, or the crack midpoint where none was found */
    float wid;     /* 25..75 % width of the local step along (dx, dy), px; NaN if unmeasured */
    int8_t dx, dy; /* pair direction, component pixel towards the exterior */
    uint8_t ok;    /* 1 when (x, y) is a sub-pixel crossing */
} sp_contour_pt;

/* How far outside the component's bounding box any stage reads transmission, px: the light level's
 * samples reach 10 px out along the outline pairs, the profiles 4 (edges.h, method). */
#define SP_EDGE_REACH_PX 10

typedef struct sp_edges {
    /* Padded bounding-box window: component bbox grown by 1 px on every side. */
    int wx0, wy0, ww, wh;
    uint8_t *ext; /* ww×wh: 0 component, 1 enclosed, 2 exterior */
    size_t ext_cap;
    int32_t *stack;
    size_t stack_cap;
    uint32_t *opair; /* outline pairs in raster order, direction order: window index << 2 | direction */
    size_t opair_cap, nopair;
    int32_t *cell_pair; /* ww×wh: index of the cell's first outline pair, -1 if none (sp_edges_trace) */
    size_t cell_pair_cap;
    /* Patch of normalised transmission (sp_view_norm, bit for bit) over the bounding box grown by
     * SP_EDGE_REACH_PX and clipped to the frame, filled by sp_edges_levels: every later stage reads
     * it instead of dividing again. Within the reach, a position is in the frame iff in the patch. */
    float *nv;
    size_t nv_cap;
    int px0, py0, pw, ph;
    /* Per outline pair, what sp_edges_points found (for sp_edges_trace, which walks the same pairs):
     * pair_ok 0/1 (-1 = not computed), crossing and width; valid for the level cached_level. */
    int8_t *pair_ok;
    double *pair_t;
    float *pair_w;
    size_t pair_cap;
    double cached_level, cached_light;
    float *vals; /* scratch samples for percentiles */
    size_t vals_cap;
    uint16_t *vbin; /* per sample of vals: its histogram bin (the quantile's first pass) */
    size_t vbin_cap;
    float *vsel; /* the samples of the bin that holds the quantile's rank */
    size_t vsel_cap;
    double *xy; /* sub-pixel outline points, n pairs */
    size_t xy_cap;
    float *wid;     /* per point: width of the central half (25..75 %) of the local step along the pair
                       direction, px; NaN where a crossing fell off the profile */
    int8_t *pdir;   /* per point: pair direction dx, dy (2 entries) */
    size_t aux_cap; /* points held by wid and pdir */
    int n;
    /* Ordered outer contour (sp_edges_trace): one entry per boundary crack, in walking order. */
    sp_contour_pt *cpt;
    size_t c_cap;
    int nc;
    float n_dark, n_light, n_min; /* levels found by sp_edges_levels */
    float n_step_in;              /* median inner level of the local steps (sp_edges_points) */
} sp_edges;

void sp_edges_release(sp_edges *e);

/* Mark the exterior of component `label` (described by *c) in e->ext. holes_filled: the mask had
 * its holes filled before labelling, so every cell not in the component is exterior (no flood). */
int sp_edges_exterior(sp_edges *e, const int32_t *labels, int w, int h, int label, const sp_component *c,
                      int holes_filled, sp_error *err);

/* Dark, light and minimum transmission of the component (after sp_edges_exterior). Fills the
 * transmission patch the later calls (points, trace, area) read: call it first. */
int sp_edges_levels(sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                    const sp_component *c, sp_error *err);

/* Sub-pixel points where n crosses `level` on the outer outline (after sp_edges_exterior). */
int sp_edges_points(sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                    const sp_component *c, double level, sp_error *err);

/* The outer contour in walking order (crack following with the exterior on the left, 8-connected
 * object), each crack carrying the sub-pixel crossing of the same pair as sp_edges_points, into
 * cpt / nc. Call after sp_edges_points (it uses n_step_in only through the same local-step rule).
 * Bounded by 4·area + 4 cracks. */
int sp_edges_trace(sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                   const sp_component *c, double frac, sp_error *err);

/* Area of the outline at the edge level from partial coverage: pixels of the component count 1,
 * except the band along the outline (component pixels 8-adjacent to the exterior, and exterior
 * background pixels 8-adjacent to the component), which count their coverage
 * (n_light − n)/(n_light − n_in), with n_in the inner level of the local steps (n_step_in after
 * sp_edges_points, else n_dark). Unbiased on an anti-aliased step; a blur wider than ~1 px
 * spreads darkness outside the band and the estimate then falls short. */
double sp_edges_area(const sp_edges *e, const sp_frame_view *v, const int32_t *labels, int label,
                     const sp_component *c);

#endif

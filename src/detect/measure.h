/* Measurement of one labelled component: ellipse, equivalent diameters, shape. */
#ifndef SP_DETECT_MEASURE_H
#define SP_DETECT_MEASURE_H

#include "spume.h"
#include "detect/frameview.h"
#include "detect/label.h"
#include "detect/ellipse.h"

typedef struct sp_measure_opts {
    double min_diam_px; /* components with area-equivalent diameter below this are dropped (default 3) */
    double max_diam_px; /* and above this (0 = no limit, default) */
    double
        fit_min_px; /* refine by the sub-pixel edge fit from this area-equivalent diameter up (default 8) */
    double edge_level;     /* the edge lies where transmission crosses this fraction of the local step
                              from bubble to light (default 0.5) */
    double min_sharpness;  /* in-focus band: outline sharpness at least this, 1/px (default
                              SP_FOCUS_MIN_SHARPNESS_DEFAULT, focus.h); 0 = every bubble in focus */
    int split;             /* 1: split clusters of overlapping bubbles (default 1) */
    double split_solidity; /* a component below this solidity with no concave point is still a
                              cluster (flagged, unsplit) (default 0.9) */
    int holes_filled;      /* 1: the mask's holes were filled, so no component encloses anything
                              (set by the detection chain; default 0) */
} sp_measure_opts;

void sp_measure_opts_default(sp_measure_opts *o);

typedef struct sp_bubble {
    double x, y;               /* centroid, pixels, frame coordinates of the delivered (ROI) frame */
    double area_px;            /* filled pixel count */
    double major_px, minor_px; /* full axis lengths of the fitted ellipse */
    double tilt_deg;           /* major axis from +x, counter-clockwise with y up, in (-90, 90] */
    double d_area_px;          /* area-equivalent diameter of the measured outline */
    double d_vol_px;           /* (major² · minor)^(1/3) */
    double aspect;             /* minor / major */
    double solidity;           /* area / convex-hull area of the filled pixels */
    double contrast;           /* 1 − darkest normalised transmission inside (0..1) */
    int edge;                  /* touches the frame (ROI) border */
    int split;                 /* 0 = isolated; else id shared by pieces of one cluster */
    int fit;                   /* 0 = moment ellipse, 1 = sub-pixel edge fit */
    int cluster;               /* 1 = overlapping bubbles that could not be split with confidence: one
                                  object, its size meaningless (statistics leave it out) */
    double sharpness;          /* outline sharpness, 1/px (focus.h); 0 when unmeasured */
    int in_focus;              /* sharpness >= min_sharpness */
    double u_d_px;             /* standard uncertainty of d_vol_px (and d_area_px), px */
    int x0, y0, x1, y1;        /* bounding box, inclusive */
} sp_bubble;

typedef struct sp_measurer sp_measurer; /* reusable workspace, one per thread */

sp_measurer *sp_measurer_new(void);
void sp_measurer_free(sp_measurer *m);

/* Measure component `label` (1-based, as in labels) described by *c. Returns 0 and sets *keep = 1
 * when the component passes the size gates and *out is filled; *keep = 0 when gated out. */
int sp_measure_component(sp_measurer *m, const sp_frame_view *v, const int32_t *labels, int label,
                         const sp_component *c, const sp_measure_opts *o, sp_bubble *out, int *keep,
                         sp_error *err);

/* Split the component just measured by sp_measure_component (same m, v, labels, label, c; its
 * result *whole) when it is a cluster. On return *np pieces are in pieces[0..*np) (at most max),
 * each with split = label and the cluster's flags; *np = 0 leaves *whole as the one object, with
 * whole->cluster set when it is a cluster that could not be split. */
int sp_measure_split(sp_measurer *m, const sp_frame_view *v, const int32_t *labels, int label,
                     const sp_component *c, const sp_measure_opts *o, sp_bubble *whole, sp_bubble *pieces,
                     int max, int *np, sp_error *err);

#endif

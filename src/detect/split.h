/* Splitting a cluster of overlapping bubbles into single ellipses (internal to the detect layer).
 *
 * Method: concave points on the outer contour, then an ellipse fitted to each contour arc between
 * them, arcs of one bubble regrouped (after Bai, Sun & Zhou 2009, Pattern Recogn. 42:2434, from
 * memory). Concavity of contour point i is its signed distance inside the chord from point i − k
 * to i + k; concave points are local maxima of that depth above a floor. Each arc (trimmed near its
 * concave ends, where the two outlines blur together) gets a direct least-squares ellipse (Halir &
 * Flusser 1998); arcs are merged greedily while one ellipse still fits both within the residual
 * tolerance. The split is accepted only when every piece fits its arc closely (a defocused arc, its
 * edge crossings noisier, is allowed a little more), spans enough of its own outline, and the union
 * of the pieces reproduces the cluster's silhouette; otherwise the cluster is reported unsplit and
 * flagged, never guessed. */
#ifndef SP_DETECT_SPLIT_H
#define SP_DETECT_SPLIT_H

#include "detect/edges.h"
#include "detect/ellipse.h"

#define SP_SPLIT_MAX 8 /* most pieces one cluster is split into */

enum { SP_SPLIT_SINGLE = 0, SP_SPLIT_DONE = 1, SP_SPLIT_FAILED = 2 };

typedef struct sp_split_piece {
    sp_ellipse el;
    double rms_px;    /* RMS geometric residual of the arc points to the ellipse */
    int npts;         /* arc points fitted */
    double span;      /* fraction of the ellipse's angular extent the arc covers, 0..1 */
    double sharpness; /* median outline sharpness of the arc, 1/px (focus.h) */
} sp_split_piece;

typedef struct sp_splitter sp_splitter; /* reusable workspace, one per thread */

sp_splitter *sp_splitter_new(void);
void sp_splitter_free(sp_splitter *s);

/* Examine the traced contour e->cpt (sp_edges_trace) of one component and, where it is a cluster,
 * split it. *status: SP_SPLIT_SINGLE (no concavity: one bubble), SP_SPLIT_DONE (*np ≥ 2 pieces
 * written, at most SP_SPLIT_MAX) or SP_SPLIT_FAILED (concave, but no confident split). fw×fh is the
 * frame: a cluster cut by its border is split when the arcs inside pin the pieces down, and the
 * silhouette checks count only pixels inside the frame. Returns a status code (out of memory only). */
int sp_split_contour(sp_splitter *s, const sp_edges *e, int fw, int fh, sp_split_piece *pieces, int *np,
                     int *status, sp_error *err);

#endif

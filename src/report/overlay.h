/* Overlays: the detections of bubbles.csv drawn over the original frames — each bubble's fitted
 * ellipse in the colour and glyph of its state, its track id, and the recent trail of its track. */
#ifndef SP_REPORT_OVERLAY_H
#define SP_REPORT_OVERLAY_H

#include "report/canvas.h"
#include "report/table.h"

/* States, told apart by colour and glyph (legend in the report):
 *   isolated      solid outline, green
 *   split piece   solid outline, orange, with a '+' at the centroid
 *   out of focus  dashed outline, sky blue
 *   cut by edge   dashed outline, vermilion, with corner brackets on the bounding box
 * An edge bubble is drawn as edge whatever else it is; a split piece as split before focus. */
enum { SP_STATE_ISOLATED = 0, SP_STATE_SPLIT = 1, SP_STATE_DEFOCUS = 2, SP_STATE_EDGE = 3 };

extern const sp_rgb sp_overlay_state_rgb[4];
extern const sp_rgb sp_overlay_trail_rgb;

typedef struct sp_overlay_opts {
    int trail;             /* frames of track history drawn behind each bubble (default 20) */
    double focus_contrast; /* out of focus below this contrast, when bubbles.csv has no in_focus
                              column (default 0.3) */
    int label_scale;       /* digit size multiplier; 0 = chosen from the frame size */
} sp_overlay_opts;

void sp_overlay_opts_default(sp_overlay_opts *o);

/* The rows of bubbles.csv the overlay needs, ordered by frame. */
typedef struct sp_overlay_data {
    sp_table t;
    size_t *order; /* row indices sorted by (frame, row) */
    size_t *prev;  /* per row: the previous row of the same track, or (size_t)-1 */
    int has_focus; /* bubbles.csv has in_focus */
} sp_overlay_data;

int sp_overlay_load(const char *dir, sp_overlay_data *d, sp_error *err);
void sp_overlay_free(sp_overlay_data *d);
/* State of row i. */
int sp_overlay_state(const sp_overlay_data *d, size_t i, const sp_overlay_opts *o);
/* Draw every detection of `frame` onto c (already holding that frame). Returns the number drawn. */
size_t sp_overlay_draw(const sp_overlay_data *d, int64_t frame, sp_canvas *c, const sp_overlay_opts *o);
/* Frame numbers that have detections: first and last, and the number of distinct frames. */
void sp_overlay_frames(const sp_overlay_data *d, int64_t *first, int64_t *last, size_t *nframes);

#endif

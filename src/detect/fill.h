/* Hole filling: a backlit bubble is a dark ring around a bright refraction spot, and the spot
 * belongs to the bubble. */
#ifndef SP_DETECT_FILL_H
#define SP_DETECT_FILL_H

#include "spume.h"

typedef struct sp_filler sp_filler; /* reusable workspace, one per thread */

sp_filler *sp_filler_new(void);
void sp_filler_free(sp_filler *f);

/* Set to 1 every background pixel of mask (w×h, stride w, values 0/1) that cannot reach the
 * image border through 4-connected background (the dual of 8-connected foreground). */
int sp_fill_holes(sp_filler *f, uint8_t *mask, int w, int h, sp_error *err);

/* The same, told which rows hold foreground (rows[y] = 0: row y is all zeros and is not read; NULL:
 * every row is read). Holes lie only in rows with foreground, so rows stays true after filling. */
int sp_fill_holes_rows(sp_filler *f, uint8_t *mask, int w, int h, const uint8_t *rows, sp_error *err);

#endif

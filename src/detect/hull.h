/* Convex hull of integer points (internal to the detect layer). */
#ifndef SP_DETECT_HULL_H
#define SP_DETECT_HULL_H

#include "spume.h"

/* Andrew's monotone chain (1979): sorts the n points pts[2i], pts[2i+1] in place and returns twice
 * the area of their convex hull (exact, integer). work must hold 2·(n + 1) int32 pairs. Returns 0
 * for fewer than 3 points or collinear points. */
int64_t sp_hull_area2(int32_t *pts, int n, int32_t *work);
/* The same for points already in lexicographic order (first coordinate, then second). */
int64_t sp_hull_area2_sorted(const int32_t *pts, int n, int32_t *work);

#endif

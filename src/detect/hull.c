/* Convex hull area by Andrew's monotone chain (Andrew 1979, Inf. Process. Lett. 9:216). */
#include "detect/hull.h"

#include <stdlib.h>

static int cmp_pt(const void *pa, const void *pb)
{
    const int32_t *a = pa, *b = pb;
    if (a[0] != b[0])
        return a[0] < b[0] ? -1 : 1;
    if (a[1] != b[1])
        return a[1] < b[1] ? -1 : 1;
    return 0;
}

/* z of (a − o) × (b − o); int64 is exact for coordinates below 2^30. */
static int64_t cross(const int32_t *o, const int32_t *a, const int32_t *b)
{
    return (int64_t)(a[0] - o[0]) * (b[1] - o[1]) - (int64_t)(a[1] - o[1]) * (b[0] - o[0]);
}

int64_t sp_hull_area2(int32_t *pts, int n, int32_t *work)
{
    if (n < 3)
        return 0;
    qsort(pts, (size_t)n, 2 * sizeof(int32_t), cmp_pt);
    return sp_hull_area2_sorted(pts, n, work);
}

int64_t sp_hull_area2_sorted(const int32_t *pts, int n, int32_t *work)
{
    if (n < 3)
        return 0;
    int k = 0;
    /* Lower chain left to right, then upper chain right to left; collinear points dropped. */
    for (int i = 0; i < n; i++) {
        while (k >= 2 && cross(work + 2 * (k - 2), work + 2 * (k - 1), pts + 2 * i) <= 0)
            k--;
        work[2 * k] = pts[2 * i];
        work[2 * k + 1] = pts[2 * i + 1];
        k++;
    }
    for (int i = n - 2, lo = k + 1; i >= 0; i--) {
        while (k >= lo && cross(work + 2 * (k - 2), work + 2 * (k - 1), pts + 2 * i) <= 0)
            k--;
        work[2 * k] = pts[2 * i];
        work[2 * k + 1] = pts[2 * i + 1];
        k++;
    }
    k--; /* the last point repeats the first */
    if (k < 3)
        return 0;
    int64_t a2 = 0;
    for (int i = 0; i < k; i++) {
        const int32_t *p = work + 2 * i, *q = work + 2 * ((i + 1) % k);
        a2 += (int64_t)p[0] * q[1] - (int64_t)q[0] * p[1];
    }
    return a2 < 0 ? -a2 : a2;
}

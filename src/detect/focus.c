/* Outline sharpness for the depth-of-field flag; the definition is in focus.h. */
#include "detect/focus.h"

#include <math.h>
#include <stdlib.h>

#define PROFILE_LEN_PX 8.0 /* samples k = -3..4 of edges.c */

static int cmp_float(const void *a, const void *b)
{
    float x = *(const float *)a, y = *(const float *)b;
    return (x > y) - (x < y);
}

/* |cos| of the angle between the outline normal of el at (x, y) and the direction (dx, dy). */
static double normal_cos(const sp_ellipse *el, double x, double y, int dx, int dy)
{
    double c = cos(el->theta), s = sin(el->theta);
    double px = x - el->cx, py = y - el->cy;
    double u = px * c + py * s, v = -px * s + py * c;
    /* Gradient of (u/a)² + (v/b)² in the ellipse frame, rotated back. */
    double gu = u / (el->a * el->a), gv = v / (el->b * el->b);
    double gx = gu * c - gv * s, gy = gu * s + gv * c;
    double g = hypot(gx, gy);
    return g > 0 ? fabs(gx * dx + gy * dy) / g : 0;
}

/* One point's width along the normal, or -1 when unusable. */
static float normal_width(const sp_ellipse *el, double x, double y, float wid, int dx, int dy)
{
    double cs = normal_cos(el, x, y, dx, dy);
    if (cs < 0.5)
        return -1.f;
    double wd = isnan(wid) ? PROFILE_LEN_PX : (double)wid;
    return (float)(wd * cs);
}

/* The sharp flank of the outline: the lower quartile of the widths. Defocus widens every part of
 * the outline alike, motion blur only the parts facing the motion, so the flanks along the velocity
 * keep a moving bubble that is in focus sharp. */
static double median_sharp(float *v, int m)
{
    if (m == 0)
        return 0;
    qsort(v, (size_t)m, sizeof *v, cmp_float);
    double pos = 0.25 * (m - 1);
    int k = (int)pos;
    double q = k + 1 < m ? v[k] + (pos - k) * ((double)v[k + 1] - v[k]) : v[k];
    /* A width below 0.25 px is interpolation noise on a pixel-sharp step. */
    return 0.5 / (q > 0.25 ? q : 0.25);
}

double sp_focus_sharpness(const double *xy, const float *wid, const int8_t *dir, int n, const sp_ellipse *el,
                          float *scratch)
{
    int m = 0;
    for (int i = 0; i < n; i++) {
        float wn = normal_width(el, xy[2 * i], xy[2 * i + 1], wid[i], dir[2 * i], dir[2 * i + 1]);
        if (wn >= 0)
            scratch[m++] = wn;
    }
    return median_sharp(scratch, m);
}

double sp_focus_sharpness_arc(const sp_contour_pt *pts, int nc, int i0, int i1, const sp_ellipse *el,
                              float *scratch)
{
    int m = 0;
    for (int k = i0; k < i1; k++) {
        const sp_contour_pt *q = &pts[((k % nc) + nc) % nc];
        if (!q->ok)
            continue;
        float wn = normal_width(el, q->x, q->y, q->wid, q->dx, q->dy);
        if (wn >= 0)
            scratch[m++] = wn;
    }
    return median_sharp(scratch, m);
}

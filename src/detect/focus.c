/* Outline sharpness for the depth-of-field flag; the definition is in focus.h. */
#include "detect/focus.h"

#include "detect/select.h"

#include <math.h>
#include <stdlib.h>

#define PROFILE_LEN_PX 8.0 /* samples k = -3..4 of edges.c */

/* The ellipse's frame, computed once per outline rather than per point. */
typedef struct frame {
    const sp_ellipse *el;
    double c, s, ia2, ib2;
} frame;

static frame frame_of(const sp_ellipse *el)
{
    frame f = {el, cos(el->theta), sin(el->theta), 1.0 / (el->a * el->a), 1.0 / (el->b * el->b)};
    return f;
}

/* |cos| of the angle between the outline normal of the ellipse at (x, y) and the direction (dx, dy). */
static double normal_cos(const frame *f, double x, double y, int dx, int dy)
{
    double px = x - f->el->cx, py = y - f->el->cy;
    double u = px * f->c + py * f->s, v = -px * f->s + py * f->c;
    /* Gradient of (u/a)² + (v/b)² in the ellipse frame, rotated back. */
    double gu = u * f->ia2, gv = v * f->ib2;
    double gx = gu * f->c - gv * f->s, gy = gu * f->s + gv * f->c;
    double g = sqrt(gx * gx + gy * gy);
    return g > 0 ? fabs(gx * dx + gy * dy) / g : 0;
}

/* One point's width along the normal, or -1 when unusable. */
static float normal_width(const frame *f, double x, double y, float wid, int dx, int dy)
{
    double cs = normal_cos(f, x, y, dx, dy);
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
    double pos = 0.25 * (m - 1);
    int k = (int)pos;
    double q = sp_select_float(v, (size_t)m, (size_t)k);
    if (k + 1 < m) {
        /* After the selection everything above index k is at least v[k]: the next order statistic is
         * the smallest of them. */
        float nx = v[k + 1];
        for (int i = k + 2; i < m; i++)
            nx = v[i] < nx ? v[i] : nx;
        q += (pos - k) * ((double)nx - q);
    }
    /* A width below 0.25 px is interpolation noise on a pixel-sharp step. */
    return 0.5 / (q > 0.25 ? q : 0.25);
}

double sp_focus_sharpness(const double *xy, const float *wid, const int8_t *dir, int n, const sp_ellipse *el,
                          float *scratch)
{
    int m = 0;
    frame f = frame_of(el);
    for (int i = 0; i < n; i++) {
        float wn = normal_width(&f, xy[2 * i], xy[2 * i + 1], wid[i], dir[2 * i], dir[2 * i + 1]);
        if (wn >= 0)
            scratch[m++] = wn;
    }
    return median_sharp(scratch, m);
}

double sp_focus_sharpness_arc(const sp_contour_pt *pts, int nc, int i0, int i1, const sp_ellipse *el,
                              float *scratch)
{
    int m = 0;
    frame f = frame_of(el);
    for (int k = i0; k < i1; k++) {
        const sp_contour_pt *q = &pts[((k % nc) + nc) % nc];
        if (!q->ok)
            continue;
        float wn = normal_width(&f, q->x, q->y, q->wid, q->dx, q->dy);
        if (wn >= 0)
            scratch[m++] = wn;
    }
    return median_sharp(scratch, m);
}

/* Ellipses from second-order moments and from boundary points. */
#ifndef SP_DETECT_ELLIPSE_H
#define SP_DETECT_ELLIPSE_H

#include "spume.h"

#include <math.h>

/* Image coordinates: x right, y down, pixel centres at integers. */
typedef struct sp_ellipse {
    double cx, cy; /* centre */
    double a, b;   /* semi-axes, a >= b > 0 */
    double theta;  /* angle of the major axis from +x towards +y (image y down), radians in (-pi/2, pi/2] */
} sp_ellipse;

/* hypot(x, y), bit for bit, without the library call for well-scaled arguments: sqrt(x² + y²) with
 * Borges's correction term (C. F. Borges, "An improved algorithm for hypot(a, b)", 2019, the
 * "corrected" form without fused multiply-add), which is what the C library computes; outside
 * [2⁻⁵¹¹, 2⁵¹¹], or for Inf and NaN, the library itself. test_detect_ellipse compares the two. */
static inline double sp_hypot(double x, double y)
{
    double ax = fabs(x), ay = fabs(y);
    if (ax < ay) {
        double t = ax;
        ax = ay;
        ay = t;
    }
    if (!(ax <= 0x1p+511 && ay >= 0x1p-511))
        return hypot(x, y);
    if (ay <= ax * 0x1p-54)
        return ax + ay;
    double h = sqrt(ax * ax + ay * ay), t1, t2;
    if (h <= 2.0 * ay) {
        double delta = h - ay;
        t1 = ax * (2.0 * delta - ax);
        t2 = (delta - 2.0 * (ax - ay)) * delta;
    } else {
        double delta = h - ax;
        t1 = 2.0 * delta * (ax - 2.0 * ay);
        t2 = (4.0 * delta - ay) * ay + delta * delta;
    }
    return h - (t1 + t2) / (2.0 * h);
}

/* An ellipse's own frame (rotation and squared semi-axes), computed once for loops that measure
 * many points against one ellipse: cos/sin of theta cost more than the rest of a distance. */
typedef struct sp_ellipse_frame {
    double cx, cy, c, s, a2, b2, b;
} sp_ellipse_frame;

void sp_ellipse_frame_init(sp_ellipse_frame *f, const sp_ellipse *el);

/* Approximate signed geometric distance of (x, y) from the ellipse (first order, |F| / |∇F| with
 * F = (u/a)² + (v/b)² − 1 in the ellipse's frame): negative inside; −b at the centre itself. */
static inline double sp_ellipse_frame_distance(const sp_ellipse_frame *f, double x, double y)
{
    double px = x - f->cx, py = y - f->cy;
    double u = px * f->c + py * f->s, v = -px * f->s + py * f->c;
    double F = u * u / f->a2 + v * v / f->b2 - 1.0;
    double g = 2.0 * sp_hypot(u / f->a2, v / f->b2);
    return g > 1e-12 ? F / g : -f->b;
}

/* sp_ellipse_frame_distance(f, x, y) <= 0, exactly, without its hypot and division: the gradient's
 * norm g is positive, and F / g (|F| at least 2⁻⁵³ when not zero, g far from overflow for the
 * pieces' ellipses, b >= 2 px) keeps F's sign. g > 1e-12 is decided from the larger component when that alone
 * settles it (hypot is at least the larger of its arguments). */
static inline int sp_ellipse_frame_inside(const sp_ellipse_frame *f, double x, double y)
{
    double px = x - f->cx, py = y - f->cy;
    double u = px * f->c + py * f->s, v = -px * f->s + py * f->c;
    double F = u * u / f->a2 + v * v / f->b2 - 1.0;
    if (isnan(F))
        return sp_ellipse_frame_distance(f, x, y) <= 0;
    double gu = fabs(u / f->a2), gv = fabs(v / f->b2);
    int g_big = 2.0 * (gu > gv ? gu : gv) > 1e-12 || 2.0 * sp_hypot(gu, gv) > 1e-12;
    return g_big ? F <= 0 : -f->b <= 0;
}

/* Ellipse with the same second-order central moments as a region: covariance C = mu/m00,
 * semi-axes 2·sqrt(eigenvalues), theta = ½ atan2(2 mu11, mu20 − mu02). Returns 0 on success. */
int sp_ellipse_from_moments(double m00, double cx, double cy, double mu20, double mu11, double mu02,
                            sp_ellipse *e);

/* Direct least-squares ellipse fit to n points xy[2i], xy[2i+1] (Fitzgibbon, Pilu & Fisher 1999,
 * in the numerically stable form of Halir & Flusser 1998). Returns 0 on success, non-zero when the
 * points do not determine an ellipse (fewer than 6, collinear, or the conic is not an ellipse). */
int sp_ellipse_fit(const double *xy, int n, sp_ellipse *e);

#endif

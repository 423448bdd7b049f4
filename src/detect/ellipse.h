/* Ellipses from second-order moments and from boundary points. */
#ifndef SP_DETECT_ELLIPSE_H
#define SP_DETECT_ELLIPSE_H

#include "spume.h"

/* Image coordinates: x right, y down, pixel centres at integers. */
typedef struct sp_ellipse {
    double cx, cy; /* centre */
    double a, b;   /* semi-axes, a >= b > 0 */
    double theta;  /* angle of the major axis from +x towards +y (image y down), radians in (-pi/2, pi/2] */
} sp_ellipse;

/* Ellipse with the same second-order central moments as a region: covariance C = mu/m00,
 * semi-axes 2·sqrt(eigenvalues), theta = ½ atan2(2 mu11, mu20 − mu02). Returns 0 on success. */
int sp_ellipse_from_moments(double m00, double cx, double cy, double mu20, double mu11, double mu02,
                            sp_ellipse *e);

/* Direct least-squares ellipse fit to n points xy[2i], xy[2i+1] (Fitzgibbon, Pilu & Fisher 1999,
 * in the numerically stable form of Halir & Flusser 1998). Returns 0 on success, non-zero when the
 * points do not determine an ellipse (fewer than 6, collinear, or the conic is not an ellipse). */
int sp_ellipse_fit(const double *xy, int n, sp_ellipse *e);

#endif

/* Ellipses from second-order moments and from boundary points. */
#include "detect/ellipse.h"

#include <math.h>
#include <string.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

/* Map an axis angle into (-pi/2, pi/2]: an axis has no direction, so angles are taken mod pi. */
static double wrap_axis(double t)
{
    while (t > M_PI / 2)
        t -= M_PI;
    while (t <= -M_PI / 2)
        t += M_PI;
    return t;
}

int sp_ellipse_from_moments(double m00, double cx, double cy, double mu20, double mu11, double mu02,
                            sp_ellipse *e)
{
    if (!e || !(m00 > 0) || !isfinite(mu20) || !isfinite(mu11) || !isfinite(mu02))
        return 1;
    /* Eigenvalues of the covariance [c20 c11; c11 c02]; an ellipse of semi-axes a, b has variances
     * a²/4 and b²/4 along its axes, hence the factor 2. */
    double c20 = mu20 / m00, c11 = mu11 / m00, c02 = mu02 / m00;
    double mean = 0.5 * (c20 + c02);
    double d = hypot(0.5 * (c20 - c02), c11);
    double l1 = mean + d, l2 = mean - d;
    if (!(l2 > 0))
        return 1;
    e->cx = cx;
    e->cy = cy;
    e->a = 2.0 * sqrt(l1);
    e->b = 2.0 * sqrt(l2);
    e->theta = wrap_axis(0.5 * atan2(2.0 * c11, c20 - c02));
    return 0;
}

void sp_ellipse_frame_init(sp_ellipse_frame *f, const sp_ellipse *el)
{
    f->cx = el->cx;
    f->cy = el->cy;
    f->c = cos(el->theta);
    f->s = sin(el->theta);
    f->a2 = el->a * el->a;
    f->b2 = el->b * el->b;
    f->b = el->b;
}

/* Real roots of x³ + a x² + b x + c (all three real here: the pencil (C, M) of the direct fit with M
 * positive semi-definite has real eigenvalues). Trigonometric form, then Newton polish. */
static void cubic_roots(double a, double b, double c, double r[3])
{
    double p = b - a * a / 3.0;
    double q = 2.0 * a * a * a / 27.0 - a * b / 3.0 + c;
    double scale = fabs(a) + fabs(b) + fabs(c) + 1e-300;
    if (p > -1e-14 * scale * scale) {
        /* (Near-)triple root. */
        double m = cbrt(-q);
        r[0] = r[1] = r[2] = m - a / 3.0;
    } else {
        double s = 2.0 * sqrt(-p / 3.0);
        double arg = 3.0 * q / (p * s);
        if (arg > 1)
            arg = 1;
        if (arg < -1)
            arg = -1;
        double phi = acos(arg) / 3.0;
        for (int k = 0; k < 3; k++)
            r[k] = s * cos(phi - 2.0 * M_PI * k / 3.0) - a / 3.0;
    }
    for (int k = 0; k < 3; k++) {
        for (int it = 0; it < 3; it++) {
            double x = r[k];
            double f = ((x + a) * x + b) * x + c;
            double df = (3.0 * x + 2.0 * a) * x + b;
            if (df == 0.0)
                break;
            double nx = x - f / df;
            if (!isfinite(nx))
                break;
            r[k] = nx;
        }
    }
}

static void cross3(const double u[3], const double v[3], double w[3])
{
    w[0] = u[1] * v[2] - u[2] * v[1];
    w[1] = u[2] * v[0] - u[0] * v[2];
    w[2] = u[0] * v[1] - u[1] * v[0];
}

/* Null vector of the 3×3 matrix A − λI: the largest cross product of two of its rows. */
static int eigvec3(const double A[3][3], double lam, double v[3])
{
    double R[3][3];
    memcpy(R, A, sizeof R);
    for (int i = 0; i < 3; i++)
        R[i][i] -= lam;
    double best = 0;
    static const int pr[3][2] = {{0, 1}, {0, 2}, {1, 2}};
    for (int k = 0; k < 3; k++) {
        double w[3];
        cross3(R[pr[k][0]], R[pr[k][1]], w);
        double nn = w[0] * w[0] + w[1] * w[1] + w[2] * w[2];
        if (nn > best) {
            best = nn;
            memcpy(v, w, sizeof w);
        }
    }
    if (!(best > 0))
        return 1;
    double s = 1.0 / sqrt(best);
    for (int i = 0; i < 3; i++)
        v[i] *= s;
    return 0;
}

/* Invert a symmetric 3×3 matrix by cofactors; returns 1 when singular. */
static int inv3(const double S[3][3], double I[3][3])
{
    double c00 = S[1][1] * S[2][2] - S[1][2] * S[2][1];
    double c01 = S[1][2] * S[2][0] - S[1][0] * S[2][2];
    double c02 = S[1][0] * S[2][1] - S[1][1] * S[2][0];
    double det = S[0][0] * c00 + S[0][1] * c01 + S[0][2] * c02;
    double norm = fabs(S[0][0]) + fabs(S[1][1]) + fabs(S[2][2]);
    if (!(fabs(det) > 1e-14 * norm * norm * norm))
        return 1;
    double id = 1.0 / det;
    I[0][0] = c00 * id;
    I[1][0] = c01 * id;
    I[2][0] = c02 * id;
    I[0][1] = (S[0][2] * S[2][1] - S[0][1] * S[2][2]) * id;
    I[1][1] = (S[0][0] * S[2][2] - S[0][2] * S[2][0]) * id;
    I[2][1] = (S[0][1] * S[2][0] - S[0][0] * S[2][1]) * id;
    I[0][2] = (S[0][1] * S[1][2] - S[0][2] * S[1][1]) * id;
    I[1][2] = (S[0][2] * S[1][0] - S[0][0] * S[1][2]) * id;
    I[2][2] = (S[0][0] * S[1][1] - S[0][1] * S[1][0]) * id;
    return 0;
}

/* Direct least-squares ellipse fit: Fitzgibbon, Pilu & Fisher (1999) minimise the algebraic distance
 * under 4AC − B² = 1; Halir & Flusser (1998) split the scatter matrix into quadratic and linear parts
 * so the 6×6 singular generalised eigenproblem becomes an ordinary 3×3 one. The points are centred
 * and scaled to unit RMS radius first, which keeps the scatter sums well conditioned for any size. */
int sp_ellipse_fit(const double *xy, int n, sp_ellipse *e)
{
    if (!xy || !e || n < 6)
        return 1;
    double mx = 0, my = 0;
    for (int i = 0; i < n; i++) {
        if (!isfinite(xy[2 * i]) || !isfinite(xy[2 * i + 1]))
            return 1;
        mx += xy[2 * i];
        my += xy[2 * i + 1];
    }
    mx /= n;
    my /= n;
    double r2 = 0;
    for (int i = 0; i < n; i++) {
        double dx = xy[2 * i] - mx, dy = xy[2 * i + 1] - my;
        r2 += dx * dx + dy * dy;
    }
    if (!(r2 > 0))
        return 1;
    double sc = sqrt(r2 / n);
    double is = 1.0 / sc;

    /* S1 = D1ᵀD1, S2 = D1ᵀD2, S3 = D2ᵀD2 with D1 = [x² xy y²], D2 = [x y 1]. */
    double S1[3][3] = {{0}}, S2[3][3] = {{0}}, S3[3][3] = {{0}};
    for (int i = 0; i < n; i++) {
        double x = (xy[2 * i] - mx) * is, y = (xy[2 * i + 1] - my) * is;
        double d1[3] = {x * x, x * y, y * y}, d2[3] = {x, y, 1.0};
        for (int r = 0; r < 3; r++)
            for (int c = 0; c < 3; c++) {
                S1[r][c] += d1[r] * d1[c];
                S2[r][c] += d1[r] * d2[c];
                S3[r][c] += d2[r] * d2[c];
            }
    }
    double S3i[3][3];
    if (inv3(S3, S3i))
        return 1; /* collinear points */
    /* T = −S3⁻¹ S2ᵀ; M = S1 + S2 T (the reduced scatter matrix). */
    double T[3][3], M[3][3];
    for (int r = 0; r < 3; r++)
        for (int c = 0; c < 3; c++) {
            double s = 0;
            for (int k = 0; k < 3; k++)
                s += S3i[r][k] * S2[c][k];
            T[r][c] = -s;
        }
    for (int r = 0; r < 3; r++)
        for (int c = 0; c < 3; c++) {
            double s = S1[r][c];
            for (int k = 0; k < 3; k++)
                s += S2[r][k] * T[k][c];
            M[r][c] = s;
        }
    /* Premultiply by C1⁻¹ of the constraint matrix C1 = [0 0 2; 0 −1 0; 2 0 0]. */
    double Mp[3][3];
    for (int c = 0; c < 3; c++) {
        Mp[0][c] = M[2][c] / 2.0;
        Mp[1][c] = -M[1][c];
        Mp[2][c] = M[0][c] / 2.0;
    }
    /* Characteristic polynomial λ³ − tr λ² + m λ − det. */
    double tr = Mp[0][0] + Mp[1][1] + Mp[2][2];
    double mi = Mp[0][0] * Mp[1][1] - Mp[0][1] * Mp[1][0] + Mp[0][0] * Mp[2][2] - Mp[0][2] * Mp[2][0] +
                Mp[1][1] * Mp[2][2] - Mp[1][2] * Mp[2][1];
    double det = Mp[0][0] * (Mp[1][1] * Mp[2][2] - Mp[1][2] * Mp[2][1]) -
                 Mp[0][1] * (Mp[1][0] * Mp[2][2] - Mp[1][2] * Mp[2][0]) +
                 Mp[0][2] * (Mp[1][0] * Mp[2][1] - Mp[1][1] * Mp[2][0]);
    double lam[3];
    cubic_roots(-tr, mi, -det, lam);

    /* The ellipse is the eigenvector with 4AC − B² > 0 (Halir & Flusser); take the largest. */
    double a1[3] = {0}, best = 0;
    for (int k = 0; k < 3; k++) {
        double v[3] = {0, 0, 0};
        if (eigvec3(Mp, lam[k], v))
            continue;
        double cond = 4.0 * v[0] * v[2] - v[1] * v[1];
        if (cond > best) {
            best = cond;
            memcpy(a1, v, sizeof v);
        }
    }
    if (!(best > 0))
        return 1;
    double a2[3];
    for (int r = 0; r < 3; r++)
        a2[r] = T[r][0] * a1[0] + T[r][1] * a1[1] + T[r][2] * a1[2];

    /* Conic A x² + B xy + C y² + D x + E y + F = 0 in normalised coordinates → geometry. */
    double A = a1[0], B = a1[1], C = a1[2], D = a2[0], E = a2[1], F = a2[2];
    if (A + C < 0) {
        A = -A, B = -B, C = -C, D = -D, E = -E, F = -F;
    }
    double den = 4.0 * A * C - B * B;
    if (!(den > 0))
        return 1;
    double x0 = (B * E - 2.0 * C * D) / den;
    double y0 = (B * D - 2.0 * A * E) / den;
    double F0 = F + 0.5 * (D * x0 + E * y0); /* conic value at the centre */
    if (!(F0 < 0))
        return 1; /* imaginary ellipse */
    double mean = 0.5 * (A + C), dd = hypot(0.5 * (A - C), 0.5 * B);
    double lmin = mean - dd, lmax = mean + dd;
    if (!(lmin > 0))
        return 1;
    double a = sqrt(-F0 / lmin), b = sqrt(-F0 / lmax);
    /* The major axis lies along the eigenvector of the smaller eigenvalue of [A B/2; B/2 C]. */
    double th = 0.5 * atan2(B, A - C) + M_PI / 2;
    if (!isfinite(a) || !isfinite(b) || !(b > 0))
        return 1;
    e->cx = mx + sc * x0;
    e->cy = my + sc * y0;
    e->a = sc * a;
    e->b = sc * b;
    e->theta = wrap_axis(th);
    return 0;
}

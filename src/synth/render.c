/* Drawing one bubble of a shadowgraph. Backlit, a gas bubble in liquid refracts most rays out of
 * the camera's aperture, so it images as a thick dark disc; rays near the axis pass almost
 * undeviated and make a bright spot, and rays at grazing incidence are totally reflected,
 * leaving a thin grey shoulder just inside the outline. Defocus spreads each point into a disc
 * (geometric optics, a pillbox), and a finite exposure smears it along the velocity. */
#include "synth/render.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Supersampling per axis on pixels the outline crosses: 16 for small bubbles, whose area is
 * mostly edge pixels, 8 otherwise; either keeps the covered area within 0.1-0.5 % of pi*a*b. */
#define PI 3.14159265358979323846

void sp_ellipse_extent(double a, double b, double tilt_deg, double *hx, double *hy)
{
    double t = tilt_deg * (PI / 180.0), c = cos(t), s = sin(t);
    *hx = sqrt(a * a * c * c + b * b * s * s);
    *hy = sqrt(a * a * s * s + b * b * c * c);
}

static double smoothstep(double e0, double e1, double x)
{
    if (x <= e0)
        return 0.0;
    if (x >= e1)
        return 1.0;
    double t = (x - e0) / (e1 - e0);
    return t * t * (3.0 - 2.0 * t);
}

/* Transmission inside the outline at bubble-frame position (u along the major axis, v along the
 * minor), with rho the normalised radius (< 1). */
static double inside_transmission(const sp_bubble_look *b, double u, double v, double rho)
{
    /* Distance to the outline along the ray from the centre: r_ray * (1 - rho). */
    double r = sqrt(u * u + v * v);
    double s = rho > 1e-9 ? r * (1.0 / rho - 1.0) : 1e9;
    double ws = b->shoulder_px;
    double t = b->shoulder + (b->band - b->shoulder) * smoothstep(ws, 2.0 * ws, s);
    if (b->spot > 0.0 && b->spot_frac > 0.0) {
        double su = (u - b->spot_u * b->a_px) / (b->spot_frac * b->a_px);
        double sv = (v - b->spot_v * b->b_px) / (b->spot_frac * b->b_px);
        double sig = sqrt(su * su + sv * sv);
        double spot = b->spot * (1.0 - smoothstep(0.45, 1.0, sig));
        if (spot > t)
            t = spot;
    }
    return t;
}

static int reserve(sp_patch *p, size_t n)
{
    if (n <= p->cap)
        return 0;
    float *d = realloc(p->d, n * sizeof *d);
    if (!d)
        return -1;
    p->d = d;
    float *t = realloc(p->tmp, n * sizeof *t);
    if (!t)
        return -1;
    p->tmp = t;
    p->cap = n;
    return 0;
}

/* Box of the motion smear: K bilinear samples spread evenly over the displacement. */
static void motion_blur(sp_patch *p, double mdx, double mdy)
{
    double len = sqrt(mdx * mdx + mdy * mdy);
    int k = (int)ceil(len * 2.0) + 1;
    memcpy(p->tmp, p->d, (size_t)p->w * (size_t)p->h * sizeof(float));
    for (int y = 0; y < p->h; y++) {
        for (int x = 0; x < p->w; x++) {
            double acc = 0.0;
            for (int i = 0; i < k; i++) {
                double f = (double)i / (double)(k - 1) - 0.5;
                double sx = x - f * mdx, sy = y - f * mdy;
                int ix = (int)floor(sx), iy = (int)floor(sy);
                double fx = sx - ix, fy = sy - iy;
                double v00 = 0, v10 = 0, v01 = 0, v11 = 0;
                if (iy >= 0 && iy < p->h) {
                    const float *r = p->tmp + (size_t)iy * (size_t)p->w;
                    if (ix >= 0 && ix < p->w)
                        v00 = r[ix];
                    if (ix + 1 >= 0 && ix + 1 < p->w)
                        v10 = r[ix + 1];
                }
                if (iy + 1 >= 0 && iy + 1 < p->h) {
                    const float *r = p->tmp + (size_t)(iy + 1) * (size_t)p->w;
                    if (ix >= 0 && ix < p->w)
                        v01 = r[ix];
                    if (ix + 1 >= 0 && ix + 1 < p->w)
                        v11 = r[ix + 1];
                }
                acc += (1 - fy) * ((1 - fx) * v00 + fx * v10) + fy * ((1 - fx) * v01 + fx * v11);
            }
            p->d[(size_t)y * (size_t)p->w + (size_t)x] = (float)(acc / k);
        }
    }
}

/* Pillbox of radius R: for each kernel row a run of pixels whose half-width sqrt(R²-dy²) is
 * honoured to a fraction of a pixel (end pixels weighted), summed through row prefix sums. */
static int pillbox_blur(sp_patch *p, double R)
{
    int w = p->w, h = p->h, n = (int)floor(R);
    /* prefix sums of each row, w+1 entries, in tmp (cap >= (w+1)*h is reserved by the caller) */
    double *half = malloc((size_t)(2 * n + 1) * sizeof *half);
    float *src = malloc((size_t)w * (size_t)h * sizeof *src);
    if (!half || !src) {
        free(half);
        free(src);
        return -1;
    }
    memcpy(src, p->d, (size_t)w * (size_t)h * sizeof *src);
    double wsum = 0.0;
    for (int dy = -n; dy <= n; dy++) {
        double hw = sqrt(fmax(0.0, R * R - (double)dy * dy));
        half[dy + n] = hw;
        int m = (int)floor(hw);
        wsum += 2 * m + 1 + 2 * (hw - m);
    }
    for (int y = 0; y < h; y++) {
        float *pr = p->tmp + (size_t)y * (size_t)(w + 1);
        const float *sr = src + (size_t)y * (size_t)w;
        double acc = 0.0;
        pr[0] = 0.f;
        for (int x = 0; x < w; x++) {
            acc += sr[x];
            pr[x + 1] = (float)acc;
        }
    }
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            double acc = 0.0;
            for (int dy = -n; dy <= n; dy++) {
                int yy = y + dy;
                if (yy < 0 || yy >= h)
                    continue;
                const float *pr = p->tmp + (size_t)yy * (size_t)(w + 1);
                const float *sr = src + (size_t)yy * (size_t)w;
                double hw = half[dy + n];
                int m = (int)floor(hw);
                int lo = x - m, hi = x + m;
                int clo = lo < 0 ? 0 : lo, chi = hi >= w ? w - 1 : hi;
                if (chi >= clo)
                    acc += (double)pr[chi + 1] - (double)pr[clo];
                double f = hw - m;
                if (f > 0.0) {
                    if (lo - 1 >= 0)
                        acc += f * sr[lo - 1];
                    if (hi + 1 < w)
                        acc += f * sr[hi + 1];
                }
            }
            p->d[(size_t)y * (size_t)w + (size_t)x] = (float)(acc / wsum);
        }
    }
    free(half);
    free(src);
    return 0;
}

int sp_render_bubble(const sp_bubble_look *b, int fw, int fh, sp_patch *p)
{
    double hx, hy;
    sp_ellipse_extent(b->a_px, b->b_px, b->tilt_deg, &hx, &hy);
    double mlen = sqrt(b->motion_dx * b->motion_dx + b->motion_dy * b->motion_dy);
    double margin = ceil(b->blur_px) + ceil(mlen * 0.5) + 2.0;
    double fx0 = floor(b->x_px - hx) - margin, fx1 = ceil(b->x_px + hx) + margin;
    double fy0 = floor(b->y_px - hy) - margin, fy1 = ceil(b->y_px + hy) + margin;
    /* Clip to the frame widened by the blur margin: pixels beyond it cannot reach the frame. */
    fx0 = fmax(fx0, -margin);
    fy0 = fmax(fy0, -margin);
    fx1 = fmin(fx1, fw - 1 + margin);
    fy1 = fmin(fy1, fh - 1 + margin);
    p->x0 = (int)fx0;
    p->y0 = (int)fy0;
    p->w = fx1 >= fx0 ? (int)(fx1 - fx0) + 1 : 0;
    p->h = fy1 >= fy0 ? (int)(fy1 - fy0) + 1 : 0;
    if (p->w <= 0 || p->h <= 0) {
        p->w = p->h = 0;
        return 0;
    }
    if (reserve(p, (size_t)(p->w + 1) * (size_t)p->h))
        return -1;

    double t = b->tilt_deg * (PI / 180.0), ct = cos(t), st = sin(t);
    double ia = 1.0 / b->a_px, ib = 1.0 / b->b_px;
    /* rho is a norm with Lipschitz constant 1/b, so over a pixel (half-diagonal sqrt(2)/2) it
     * changes by at most 0.7072/b: pixels farther than that from rho = 1 are wholly in or out. */
    double lip = 0.7072 * ib;
    double con = b->contrast;
    const int ss = b->b_px < 8.0 ? 16 : 8;
    for (int j = 0; j < p->h; j++) {
        double py = p->y0 + j;
        float *row = p->d + (size_t)j * (size_t)p->w;
        for (int i = 0; i < p->w; i++) {
            double px = p->x0 + i;
            double dx = px - b->x_px, dyu = -(py - b->y_px); /* y up in the bubble frame */
            double u = dx * ct + dyu * st, v = -dx * st + dyu * ct;
            double rho = sqrt(u * u * ia * ia + v * v * ib * ib);
            double dval;
            if (rho - 1.0 > lip) {
                dval = 0.0;
            } else if (1.0 - rho > lip) {
                dval = 1.0 - inside_transmission(b, u, v, rho);
            } else {
                double acc = 0.0;
                for (int sy = 0; sy < ss; sy++) {
                    double oy = -0.5 + (sy + 0.5) / ss;
                    for (int sx = 0; sx < ss; sx++) {
                        double ox = -0.5 + (sx + 0.5) / ss;
                        double ddx = dx + ox, ddy = dyu - oy;
                        double uu = ddx * ct + ddy * st, vv = -ddx * st + ddy * ct;
                        double rr = sqrt(uu * uu * ia * ia + vv * vv * ib * ib);
                        if (rr < 1.0)
                            acc += 1.0 - inside_transmission(b, uu, vv, rr);
                    }
                }
                dval = acc / (ss * ss);
            }
            row[i] = (float)(con * dval);
        }
    }
    if (mlen >= 0.05)
        motion_blur(p, b->motion_dx, b->motion_dy);
    if (b->blur_px >= 0.5 && pillbox_blur(p, b->blur_px))
        return -1;
    return 0;
}

void sp_render_composite(const sp_patch *p, float *trans, int fw, int fh)
{
    for (int j = 0; j < p->h; j++) {
        int y = p->y0 + j;
        if (y < 0 || y >= fh)
            continue;
        const float *row = p->d + (size_t)j * (size_t)p->w;
        float *dst = trans + (size_t)y * (size_t)fw;
        for (int i = 0; i < p->w; i++) {
            int x = p->x0 + i;
            if (x >= 0 && x < fw)
                dst[x] *= 1.0f - row[i];
        }
    }
}

void sp_patch_free(sp_patch *p)
{
    if (!p)
        return;
    free(p->d);
    free(p->tmp);
    memset(p, 0, sizeof *p);
}

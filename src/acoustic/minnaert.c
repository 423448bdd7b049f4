#include "acoustic/minnaert.h"

#include <complex.h>
#include <math.h>

#define R_LO 1e-6
#define R_HI 0.1

void sp_bubble_medium_default(sp_bubble_medium *m)
{
    m->rho_kg_m3 = 998.21;
    m->sigma_n_m = 0.07274;
    m->p_atm_pa = 101325.0;
    m->p_vapour_pa = 0.0;
    m->depth_m = 0.0;
    m->g_m_s2 = 9.80665;
    m->gamma = 1.4;
    m->d_gas_m2_s = 2.12e-5;
    m->model = SP_MINNAERT_THERMAL;
}

double sp_minnaert_p0(const sp_bubble_medium *m)
{
    return m->p_atm_pa + m->rho_kg_m3 * m->g_m_s2 * m->depth_m;
}

/* Prosperetti (1977): Phi = 3 gamma / {1 - 3 (gamma - 1) i chi [sqrt(i/chi) coth sqrt(i/chi) - 1]},
 * chi = D / (omega R^2). coth is written with exp(-2z) so that large arguments (big, cold bubbles:
 * the adiabatic limit) do not overflow. */
double sp_minnaert_kappa(const sp_bubble_medium *m, double omega, double r_m)
{
    if (m->model != SP_MINNAERT_THERMAL || omega <= 0 || r_m <= 0)
        return m->gamma;
    double chi = m->d_gas_m2_s / (omega * r_m * r_m);
    double complex z = csqrt(I / chi);
    double complex e = cexp(-2.0 * z);
    double complex coth = (1.0 + e) / (1.0 - e);
    double complex phi = 3.0 * m->gamma / (1.0 - 3.0 * (m->gamma - 1.0) * I * chi * (z * coth - 1.0));
    return creal(phi) / 3.0;
}

/* rho R^2 omega^2 - stiffness(R, omega): zero at the natural frequency. Gas pressure at rest is
 * p0 + 2 sigma / R - p_v; vapour at constant pressure adds no stiffness; -2 sigma / R is the
 * surface-tension term of Devin (1959). */
static double balance(const sp_bubble_medium *m, double omega, double r)
{
    double st = m->model == SP_MINNAERT_PLAIN ? 0.0 : 2.0 * m->sigma_n_m / r;
    double pg = sp_minnaert_p0(m) + st - m->p_vapour_pa;
    double k = sp_minnaert_kappa(m, omega, r);
    return m->rho_kg_m3 * r * r * omega * omega - (3.0 * k * pg - st);
}

double sp_minnaert_freq(const sp_bubble_medium *m, double r_m)
{
    if (!(r_m > 0) || !(m->rho_kg_m3 > 0))
        return 0.0;
    /* Bracket around the plain Minnaert frequency; kappa lies in [1, gamma] and surface tension
     * raises the stiffness at most by a bounded factor for R >= 1 um. */
    double pg = sp_minnaert_p0(m) + 2.0 * m->sigma_n_m / r_m;
    double wm = sqrt(3.0 * m->gamma * (pg > 0 ? pg : sp_minnaert_p0(m)) / m->rho_kg_m3) / r_m;
    double lo = 0.05 * wm, hi = 4.0 * wm;
    double flo = balance(m, lo, r_m), fhi = balance(m, hi, r_m);
    if (!(flo < 0 && fhi > 0))
        return 0.0;
    for (int i = 0; i < 200 && hi - lo > 1e-13 * hi; i++) {
        double mid = 0.5 * (lo + hi);
        if (balance(m, mid, r_m) < 0)
            lo = mid;
        else
            hi = mid;
    }
    return 0.5 * (lo + hi) / (2.0 * M_PI);
}

double sp_minnaert_radius(const sp_bubble_medium *m, double f_hz, double *kappa_out)
{
    if (kappa_out)
        *kappa_out = 0.0;
    if (!(f_hz > 0) || !(m->rho_kg_m3 > 0))
        return 0.0;
    double omega = 2.0 * M_PI * f_hz;
    /* balance() is negative for small R (stiffness wins) and positive for large R (inertia wins). */
    double lo = log(R_LO), hi = log(R_HI);
    if (!(balance(m, omega, R_LO) < 0 && balance(m, omega, R_HI) > 0))
        return 0.0;
    for (int i = 0; i < 200 && hi - lo > 1e-13; i++) {
        double mid = 0.5 * (lo + hi);
        if (balance(m, omega, exp(mid)) < 0)
            lo = mid;
        else
            hi = mid;
    }
    double r = exp(0.5 * (lo + hi));
    if (kappa_out)
        *kappa_out = sp_minnaert_kappa(m, omega, r);
    return r;
}

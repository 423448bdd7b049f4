/* Single-bubble correlations: dimensionless groups, terminal rise velocity and aspect ratio. */
#include "physics/correlations.h"

#include <math.h>
#include <string.h>

static double drho(const sp_liquid *l)
{
    return l->rho_kg_m3 - l->rho_gas_kg_m3;
}

double sp_group_re(const sp_liquid *l, double d_m, double u_m_s)
{
    return l->rho_kg_m3 * u_m_s * d_m / l->mu_pa_s;
}

double sp_group_eo(const sp_liquid *l, double d_m)
{
    return drho(l) * l->g_m_s2 * d_m * d_m / l->sigma_n_m;
}

double sp_group_we(const sp_liquid *l, double d_m, double u_m_s)
{
    return l->rho_kg_m3 * u_m_s * u_m_s * d_m / l->sigma_n_m;
}

double sp_group_mo(const sp_liquid *l)
{
    double mu2 = l->mu_pa_s * l->mu_pa_s, s = l->sigma_n_m;
    return l->g_m_s2 * mu2 * mu2 * drho(l) / (l->rho_kg_m3 * l->rho_kg_m3 * s * s * s);
}

void sp_groups_compute(const sp_liquid *l, double d_m, double u_m_s, sp_groups *out)
{
    int u_ok = u_m_s > 0.0 && isfinite(u_m_s);
    out->re = u_ok ? sp_group_re(l, d_m, u_m_s) : NAN;
    out->we = u_ok ? sp_group_we(l, d_m, u_m_s) : NAN;
    out->eo = sp_group_eo(l, d_m);
    out->mo = sp_group_mo(l);
}

/* Mendelson (1967), AIChE J 13:250: the rise of a deformed bubble as a surface wave. */
double sp_rise_mendelson(const sp_liquid *l, double d_m)
{
    return sqrt(2.0 * l->sigma_n_m / (l->rho_kg_m3 * d_m) + l->g_m_s2 * d_m / 2.0);
}

/* Davies & Taylor (1950), Proc. R. Soc. A 200:375: U = (2/3) sqrt(g R_cap), written with the
 * volume-equivalent diameter as 0.711 sqrt(g d). */
double sp_rise_davies_taylor(const sp_liquid *l, double d_m)
{
    return 0.711 * sqrt(l->g_m_s2 * d_m);
}

double sp_rise_stokes(const sp_liquid *l, double d_m)
{
    return drho(l) * l->g_m_s2 * d_m * d_m / (18.0 * l->mu_pa_s);
}

double sp_rise_hadamard(const sp_liquid *l, double d_m)
{
    return drho(l) * l->g_m_s2 * d_m * d_m / (12.0 * l->mu_pa_s);
}

/* Tomiyama et al. (1998), JSME Int. J. B 41:472: the viscous branch (Schiller–Naumann with the
 * clean-interface limits 16/Re and 48/Re, or their contaminated counterparts 24/Re and 72/Re) against
 * the Eötvös-number branch of deformed bubbles. */
double sp_drag_tomiyama(sp_contam c, double re, double eo)
{
    double sn = 1.0 + 0.15 * pow(re, 0.687);
    double cap = 8.0 * eo / (3.0 * (eo + 4.0));
    double visc;
    switch (c) {
    case SP_CONTAM_PURE:
        visc = fmin(16.0 / re * sn, 48.0 / re);
        break;
    case SP_CONTAM_SLIGHT:
        visc = fmin(24.0 / re * sn, 72.0 / re);
        break;
    default:
        visc = 24.0 / re * sn;
        break;
    }
    return fmax(visc, cap);
}

/* Re²·C_D(Re) is strictly increasing (each branch is, and min/max keep that), so the terminal
 * condition Re²·C_D = 4 g d³ Δρ ρ/(3 μ²) has exactly one root; bisection on ln Re finds it without
 * any starting guess. */
double sp_rise_tomiyama(const sp_liquid *l, double d_m, sp_contam c, int *iters)
{
    int it = 0;
    double u = NAN;
    double dr = drho(l);
    if (iters)
        *iters = 0;
    if (!(d_m > 0.0 && isfinite(d_m)) || !(dr > 0.0) || !(l->mu_pa_s > 0.0) || !(l->sigma_n_m > 0.0) ||
        !(l->g_m_s2 > 0.0))
        return NAN;
    double eo = sp_group_eo(l, d_m);
    double k = 4.0 * l->g_m_s2 * d_m * d_m * d_m * dr * l->rho_kg_m3 / (3.0 * l->mu_pa_s * l->mu_pa_s);
    if (!(k > 0.0 && isfinite(k)))
        return NAN;
    /* Bracket: G(Re) >= 16 Re on every law, so G(k/16) >= k; expand down until G(lo) < k. */
    double hi = k / 16.0, lo = hi;
    for (int n = 0; n < 2000; n++) {
        lo *= 0.01;
        if (lo * lo * sp_drag_tomiyama(c, lo, eo) < k)
            break;
    }
    if (!(lo * lo * sp_drag_tomiyama(c, lo, eo) < k) || !(hi * hi * sp_drag_tomiyama(c, hi, eo) >= k))
        return NAN;
    while (hi / lo - 1.0 > 1e-13 && it < 400) {
        double mid = sqrt(lo * hi);
        if (mid <= lo || mid >= hi)
            break;
        if (mid * mid * sp_drag_tomiyama(c, mid, eo) < k)
            lo = mid;
        else
            hi = mid;
        it++;
    }
    double re = sqrt(lo * hi);
    u = re * l->mu_pa_s / (l->rho_kg_m3 * d_m);
    if (iters)
        *iters = it;
    return u;
}

/* Wellek, Agrawal & Skelland (1966), AIChE J 12:854, drops and bubbles in uncontaminated systems. */
double sp_aspect_wellek(double eo)
{
    return 1.0 / (1.0 + 0.163 * pow(eo, 0.757));
}

/* Aoyama, Hayashi, Hosokawa & Tomiyama (2016), Int. J. Multiphase Flow 79:23. */
double sp_aspect_aoyama(double eo, double re)
{
    return pow(1.0 + 0.016 * pow(eo, 1.12) * re, -0.388);
}

void sp_rise_predict(const sp_liquid *l, double d_m, double u_m_s, sp_rise_predictions *out)
{
    memset(out, 0, sizeof *out);
    sp_groups_compute(l, d_m, u_m_s, &out->groups);
    double eo = out->groups.eo, mo = out->groups.mo;
    out->mendelson_m_s = sp_rise_mendelson(l, d_m);
    out->tomiyama_pure_m_s = sp_rise_tomiyama(l, d_m, SP_CONTAM_PURE, NULL);
    out->tomiyama_slight_m_s = sp_rise_tomiyama(l, d_m, SP_CONTAM_SLIGHT, NULL);
    out->tomiyama_full_m_s = sp_rise_tomiyama(l, d_m, SP_CONTAM_FULL, NULL);
    out->davies_taylor_m_s = sp_rise_davies_taylor(l, d_m);
    out->stokes_m_s = sp_rise_stokes(l, d_m);
    out->hadamard_m_s = sp_rise_hadamard(l, d_m);
    /* Ranges: docs/methods-physics.md. Mendelson's wave analogy needs surface-tension-dominated,
     * low-Morton liquids and bubbles past the spherical regime. */
    out->mendelson_ok = eo >= 0.3 && eo <= 40.0 && mo <= 1e-8;
    out->tomiyama_ok = eo >= 1e-2 && eo <= 1e3 && mo >= 1e-14 && mo <= 1e7;
    out->davies_taylor_ok = eo > 40.0;
    out->stokes_ok = sp_group_re(l, d_m, out->stokes_m_s) < 1.0;
    out->hadamard_ok = sp_group_re(l, d_m, out->hadamard_m_s) < 1.0;
    out->aspect_wellek = sp_aspect_wellek(eo);
    out->wellek_ok = eo < 40.0;
    if (u_m_s > 0.0 && isfinite(u_m_s)) {
        out->aspect_aoyama = sp_aspect_aoyama(eo, out->groups.re);
        out->aoyama_ok = eo < 40.0;
    } else {
        out->aspect_aoyama = NAN;
    }
}

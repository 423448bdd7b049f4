/* Rise-velocity and shape correlations for single bubbles, and the dimensionless groups.
 * d is the volume-equivalent diameter in metres, velocities in m/s; liquid properties come from an
 * sp_liquid (Δρ = rho_kg_m3 − rho_gas_kg_m3). Sources and validity: docs/methods-physics.md. */
#ifndef SP_PHYSICS_CORRELATIONS_H
#define SP_PHYSICS_CORRELATIONS_H

#include "physics/liquid.h"

/* ---------------------------------------------------------------- groups */

double sp_group_re(const sp_liquid *l, double d_m, double u_m_s); /* Reynolds ρUd/μ */
double sp_group_eo(const sp_liquid *l, double d_m);               /* Eötvös (Bond) Δρ g d²/σ */
double sp_group_we(const sp_liquid *l, double d_m, double u_m_s); /* Weber ρU²d/σ */
double sp_group_mo(const sp_liquid *l);                           /* Morton g μ⁴ Δρ/(ρ² σ³) */

typedef struct sp_groups {
    double re, eo, we, mo;
} sp_groups;

void sp_groups_compute(const sp_liquid *l, double d_m, double u_m_s, sp_groups *out);

/* ---------------------------------------------------------------- rise velocity */

/* Mendelson (1967) wave analogy: sqrt(2σ/(ρd) + g d/2). */
double sp_rise_mendelson(const sp_liquid *l, double d_m);
/* Davies & Taylor (1950) spherical cap: 0.711 sqrt(g d). */
double sp_rise_davies_taylor(const sp_liquid *l, double d_m);
/* Stokes (rigid sphere) Δρ g d²/(18μ) and Hadamard–Rybczynski (clean inviscid-gas sphere) /(12μ). */
double sp_rise_stokes(const sp_liquid *l, double d_m);
double sp_rise_hadamard(const sp_liquid *l, double d_m);

/* Tomiyama, Kataoka, Zun & Sakaguchi (1998) drag laws. */
typedef enum sp_contam { SP_CONTAM_PURE = 0, SP_CONTAM_SLIGHT = 1, SP_CONTAM_FULL = 2 } sp_contam;

/* Drag coefficient C_D(Re, Eo) of the chosen law. */
double sp_drag_tomiyama(sp_contam c, double re, double eo);
/* Terminal velocity solving U = sqrt(4 g d Δρ/(3 ρ C_D(Re(U), Eo))): bisection on ln Re of the
 * strictly increasing Re²·C_D(Re), bracketed and converged to a relative width below 1e-13.
 * Returns NAN for non-positive or non-finite d or an unusable liquid. *iters (may be NULL)
 * receives the number of bisection steps. */
double sp_rise_tomiyama(const sp_liquid *l, double d_m, sp_contam c, int *iters);

/* ---------------------------------------------------------------- shape */

/* Wellek, Agrawal & Skelland (1966): E = 1/(1 + 0.163 Eo^0.757), Eo < 40. */
double sp_aspect_wellek(double eo);
/* Aoyama, Hayashi, Hosokawa & Tomiyama (2016): E = (1 + 0.016 Eo^1.12 Re)^(−0.388). */
double sp_aspect_aoyama(double eo, double re);

/* ---------------------------------------------------------------- all at once */

/* The predictions written beside a measured track. Each velocity comes with a flag: 1 where the
 * bubble lies inside the correlation's stated range (docs/methods-physics.md), else 0; the value is
 * always computed so that tables keep their columns. */
typedef struct sp_rise_predictions {
    double mendelson_m_s, tomiyama_pure_m_s, tomiyama_slight_m_s, tomiyama_full_m_s;
    double davies_taylor_m_s, stokes_m_s, hadamard_m_s;
    int mendelson_ok, tomiyama_ok, davies_taylor_ok, stokes_ok, hadamard_ok;
    double aspect_wellek; /* from Eo */
    double aspect_aoyama; /* from Eo and the Re of u_m_s (measured speed); NAN if u_m_s <= 0 */
    int wellek_ok, aoyama_ok;
    sp_groups groups; /* at the measured speed u_m_s (Re and We NAN if u_m_s is not > 0) */
} sp_rise_predictions;

void sp_rise_predict(const sp_liquid *l, double d_m, double u_m_s, sp_rise_predictions *out);

#endif

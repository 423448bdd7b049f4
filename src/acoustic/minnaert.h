/* Bubble radius from the natural frequency of its volume oscillation: Minnaert (1933) with the
 * corrections for surface tension (Devin 1959), heat exchange with the liquid (the effective
 * polytropic exponent of Prosperetti 1977 / Prosperetti, Crum & Commander 1988), hydrostatic
 * pressure at depth and vapour pressure. Liquid properties come in as plain numbers. */
#ifndef SP_ACOUSTIC_MINNAERT_H
#define SP_ACOUSTIC_MINNAERT_H

enum {
    SP_MINNAERT_PLAIN = 0,  /* f = sqrt(3 gamma p0 / rho) / (2 pi R): no surface tension, adiabatic */
    SP_MINNAERT_DEVIN = 1,  /* adiabatic with surface tension (Devin 1959) */
    SP_MINNAERT_THERMAL = 2 /* surface tension and the thermal polytropic exponent (Prosperetti) */
};

typedef struct sp_bubble_medium {
    double rho_kg_m3;   /* liquid density (default 998.21, water at 20 C) */
    double sigma_n_m;   /* surface tension (default 0.07274, water at 20 C, IAPWS 1994) */
    double p_atm_pa;    /* pressure at the free surface (default 101325) */
    double p_vapour_pa; /* vapour pressure of the liquid (default 0: ignored; 2339 Pa for water at 20 C) */
    double depth_m;     /* depth of the bubble below the free surface (default 0) */
    double g_m_s2;      /* gravity (default 9.80665) */
    double gamma;       /* ratio of specific heats of the gas (default 1.4, air) */
    double d_gas_m2_s;  /* thermal diffusivity of the gas (default 2.12e-5, air near 20 C) */
    int model;          /* SP_MINNAERT_* (default SP_MINNAERT_THERMAL) */
} sp_bubble_medium;

void sp_bubble_medium_default(sp_bubble_medium *m);

/* Static pressure at the bubble's depth, p_atm + rho g z. */
double sp_minnaert_p0(const sp_bubble_medium *m);

/* Effective polytropic exponent kappa_eff = Re(Phi)/3 for angular frequency omega (rad/s) and
 * radius r_m (Prosperetti 1977); gamma for the adiabatic models. */
double sp_minnaert_kappa(const sp_bubble_medium *m, double omega, double r_m);

/* Natural frequency (Hz) of a bubble of radius r_m; 0 when no positive root exists. */
double sp_minnaert_freq(const sp_bubble_medium *m, double r_m);

/* Radius (m) of the bubble ringing at f_hz: a bracketed root (bisection on log R between 1 um and
 * 0.1 m). Returns 0 when f lies outside what that bracket covers. kappa_out (may be NULL) receives
 * the effective polytropic exponent at the solution. */
double sp_minnaert_radius(const sp_bubble_medium *m, double f_hz, double *kappa_out);

#endif

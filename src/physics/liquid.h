/* Liquid and gas properties for the correlations and the acoustic radius: a plain record, filled
 * from a water model at a temperature or from a preset file (calib/liquids/<name>.json), with any
 * field overridable by the user. SI units throughout; every name carries its unit. */
#ifndef SP_PHYSICS_LIQUID_H
#define SP_PHYSICS_LIQUID_H

#include "spume.h"

#define SP_G_STANDARD 9.80665  /* standard gravity, m/s² (CGPM 1901) */
#define SP_P_STANDARD 101325.0 /* standard atmosphere, Pa */
#define SP_R_GAS 8.314462618   /* molar gas constant, J/(mol·K) (CODATA 2018) */
#define SP_M_AIR 0.0289647     /* molar mass of dry air, kg/mol */
#define SP_M_CO2 0.0440095     /* molar mass of CO2, kg/mol */

typedef struct sp_liquid {
    char name[64];
    double temp_c;           /* liquid (and gas) temperature, °C */
    double rho_kg_m3;        /* liquid density */
    double mu_pa_s;          /* liquid dynamic viscosity */
    double sigma_n_m;        /* surface tension against the gas */
    double rho_gas_kg_m3;    /* gas density inside the bubble at depth_m (ideal gas) */
    double p_atm_pa;         /* pressure above the free surface */
    double g_m_s2;           /* gravity */
    double vapour_pa;        /* vapour pressure of the liquid at temp_c */
    double depth_m;          /* depth of the observed bubbles below the free surface */
    double gas_molar_kg_mol; /* molar mass of the bubble gas (air by default) */
} sp_liquid;

/* Water model (0–100 °C at atmospheric pressure): density Kell (1975), viscosity IAPWS (2008),
 * surface tension IAPWS (1994), vapour pressure Wagner & Pruss (1993/2002); air in the bubbles at
 * p_atm + ρ g depth. p_atm = 101325 Pa, g = 9.80665 m/s², depth 0. Out-of-range temperature:
 * SP_ERR_INPUT. */
int sp_liquid_water(double temp_c, sp_liquid *out, sp_error *err);

/* Pure-water property functions behind sp_liquid_water (T in °C; NAN outside 0–100 °C, except the
 * viscosity, which takes a density and is valid from the melting line to 1173 K). */
double sp_water_density_kell(double temp_c);                      /* kg/m³ */
double sp_water_viscosity_iapws(double temp_k, double rho_kg_m3); /* Pa·s, IAPWS 2008 (μ2 = 1) */
double sp_water_surface_tension_iapws(double temp_c);             /* N/m, IAPWS 1994 */
double sp_water_vapour_pressure_wagner(double temp_c);            /* Pa, Wagner & Pruss */
double sp_water_vapour_pressure_buck(double temp_c);              /* Pa, Buck (1981), cross-check */

/* Ideal-gas density of the bubble gas at the liquid's temperature and the hydrostatic pressure at
 * its depth (Laplace pressure and vapour content neglected: below 0.3% for d > 1 mm in water). */
double sp_liquid_gas_density(const sp_liquid *l);
double sp_liquid_pressure_pa(const sp_liquid *l); /* p_atm + ρ g depth */

/* Load a preset: NAME_OR_PATH is either a path to a JSON file (it contains '/' or ends in ".json")
 * or a preset name resolved as DIR/NAME.json. DIR is calib_dir when non-NULL, else
 * $SPUME_CALIB_DIR/liquids, else SPUME_CALIB_DIR_DEFAULT/liquids when the build defines it. The
 * name "water" falls back to the built-in model when no file is found. temp_c: NAN keeps the
 * preset's own temperature; otherwise a "water"-model preset is evaluated at temp_c and a "fixed"
 * preset only records it. Bad JSON, unknown or missing keys, absurd values: SP_ERR_INPUT naming
 * the file and the key. The file format is documented in docs/methods-physics.md. */
int sp_liquid_preset(const char *name_or_path, double temp_c, sp_liquid *out, sp_error *err);
int sp_liquid_preset_in(const char *calib_dir, const char *name_or_path, double temp_c, sp_liquid *out,
                        sp_error *err);

/* Override one field by its name in the struct ("mu_pa_s", "depth_m", ...). Changing p_atm_pa,
 * depth_m, g_m_s2, rho_kg_m3 or gas_molar_kg_mol recomputes rho_gas_kg_m3 from the ideal gas; set
 * rho_gas_kg_m3 last to fix it. "temp_c" only records the value (re-run the preset to re-evaluate a
 * model). Unknown key or absurd value: SP_ERR_INPUT. */
int sp_liquid_set(sp_liquid *l, const char *key, double value, sp_error *err);
/* The same from a "key=value" string, as given on a command line. */
int sp_liquid_assign(sp_liquid *l, const char *key_eq_value, sp_error *err);

/* Check every field against a physically plausible range; `what` names the source in the error. */
int sp_liquid_check(const sp_liquid *l, const char *what, sp_error *err);

#endif

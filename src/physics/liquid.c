/* Liquid properties: a water model from published correlations, presets from JSON files, and
 * per-field overrides. The formulas and their sources are listed in docs/methods-physics.md. */
#include "physics/liquid.h"

#include <errno.h>
#include <jansson.h>
#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#define T_CRIT_K 647.096       /* critical temperature of water (IAPWS-95) */
#define P_CRIT_PA 22.064e6     /* critical pressure of water (IAPWS-95) */
#define RHO_CRIT_KG_M3 322.0   /* critical density of water (IAPWS-95) */
#define PRESET_MAX_BYTES 65536 /* a preset is a few hundred bytes; refuse anything large */

/* Kell (1975), J. Chem. Eng. Data 20:97, density of air-free water at 1 atm, 0–150 °C
 * (coefficients from memory; agrees with REFERENCES.md 998.21 kg/m³ at 20 °C to 0.01). */
double sp_water_density_kell(double temp_c)
{
    if (!(temp_c >= 0.0 && temp_c <= 100.0))
        return NAN;
    double t = temp_c;
    double num =
        999.83952 +
        t * (16.945176 + t * (-7.9870401e-3 + t * (-46.170461e-6 + t * (105.56302e-9 + t * -280.54253e-12))));
    return num / (1.0 + 16.879850e-3 * t);
}

/* IAPWS (2008) release on the viscosity of ordinary water, eqs. 10–12 (Huber et al. 2009, J. Phys.
 * Chem. Ref. Data 38:101), without the critical enhancement μ2 (= 1 outside a small region near
 * the critical point). Coefficients from memory, checked in the tests against the release's own
 * verification table. */
double sp_water_viscosity_iapws(double temp_k, double rho_kg_m3)
{
    static const double h0[4] = {1.67752, 2.20462, 0.6366564, -0.241605};
    static const double h1[6][7] = {
        {5.20094e-1, 2.22531e-1, -2.81378e-1, 1.61913e-1, -3.25372e-2, 0.0, 0.0},
        {8.50895e-2, 9.99115e-1, -9.06851e-1, 2.57399e-1, 0.0, 0.0, 0.0},
        {-1.08374, 1.88797, -7.72479e-1, 0.0, 0.0, 0.0, 0.0},
        {-2.89555e-1, 1.26613, -4.89837e-1, 0.0, 6.98452e-2, 0.0, -4.35673e-3},
        {0.0, 0.0, -2.57040e-1, 0.0, 0.0, 8.72102e-3, 0.0},
        {0.0, 1.20573e-1, 0.0, 0.0, 0.0, 0.0, -5.93264e-4},
    };
    if (!(temp_k >= 250.0 && temp_k <= 1173.15 && rho_kg_m3 > 0.0 && rho_kg_m3 <= 1500.0))
        return NAN;
    double tb = temp_k / T_CRIT_K, rb = rho_kg_m3 / RHO_CRIT_KG_M3;
    double s = 0.0;
    for (int i = 0; i < 4; i++)
        s += h0[i] / pow(tb, i);
    double mu0 = 100.0 * sqrt(tb) / s;
    double a = 1.0 / tb - 1.0, b = rb - 1.0, sum = 0.0, ai = 1.0;
    for (int i = 0; i < 6; i++) {
        double bj = 1.0, inner = 0.0;
        for (int j = 0; j < 7; j++) {
            inner += h1[i][j] * bj;
            bj *= b;
        }
        sum += ai * inner;
        ai *= a;
    }
    double mu1 = exp(rb * sum);
    return mu0 * mu1 * 1e-6; /* reference viscosity 1 µPa·s */
}

/* IAPWS (1994) release on the surface tension of ordinary water substance (Vargaftik et al. 1983). */
double sp_water_surface_tension_iapws(double temp_c)
{
    if (!(temp_c >= 0.0 && temp_c <= 100.0))
        return NAN;
    double tau = 1.0 - (temp_c + 273.15) / T_CRIT_K;
    return 235.8e-3 * pow(tau, 1.256) * (1.0 - 0.625 * tau);
}

/* Wagner & Pruss (1993), J. Phys. Chem. Ref. Data 22:783, saturation pressure (ITS-90), also in
 * the IAPWS-95 paper (Wagner & Pruss 2002, eq. 2.5). Coefficients from memory; the tests compare
 * with the Buck form and the normal boiling point. */
double sp_water_vapour_pressure_wagner(double temp_c)
{
    static const double a[6] = {-7.85951783, 1.84408259, -11.7866497, 22.6807411, -15.9618719, 1.80122502};
    if (!(temp_c >= 0.0 && temp_c <= 100.0))
        return NAN;
    double tk = temp_c + 273.15, th = 1.0 - tk / T_CRIT_K;
    double s = a[0] * th + a[1] * pow(th, 1.5) + a[2] * pow(th, 3.0) + a[3] * pow(th, 3.5) +
               a[4] * pow(th, 4.0) + a[5] * pow(th, 7.5);
    return P_CRIT_PA * exp(T_CRIT_K / tk * s);
}

/* Buck (1981), J. Appl. Meteorol. 20:1527, over liquid water (the 1996 revision of the constants,
 * from memory). Used only as an independent cross-check of the Wagner & Pruss form. */
double sp_water_vapour_pressure_buck(double temp_c)
{
    double t = temp_c;
    return 611.21 * exp((18.678 - t / 234.5) * (t / (257.14 + t)));
}

double sp_liquid_pressure_pa(const sp_liquid *l)
{
    return l->p_atm_pa + l->rho_kg_m3 * l->g_m_s2 * l->depth_m;
}

double sp_liquid_gas_density(const sp_liquid *l)
{
    return sp_liquid_pressure_pa(l) * l->gas_molar_kg_mol / (SP_R_GAS * (l->temp_c + 273.15));
}

int sp_liquid_water(double temp_c, sp_liquid *out, sp_error *err)
{
    if (!(temp_c >= 0.0 && temp_c <= 100.0))
        return sp_error_set(err, SP_ERR_INPUT, "water model: temperature %g °C is outside 0–100 °C", temp_c);
    memset(out, 0, sizeof *out);
    snprintf(out->name, sizeof out->name, "water");
    out->temp_c = temp_c;
    out->rho_kg_m3 = sp_water_density_kell(temp_c);
    out->mu_pa_s = sp_water_viscosity_iapws(temp_c + 273.15, out->rho_kg_m3);
    out->sigma_n_m = sp_water_surface_tension_iapws(temp_c);
    out->vapour_pa = sp_water_vapour_pressure_wagner(temp_c);
    out->p_atm_pa = SP_P_STANDARD;
    out->g_m_s2 = SP_G_STANDARD;
    out->depth_m = 0.0;
    out->gas_molar_kg_mol = SP_M_AIR;
    out->rho_gas_kg_m3 = sp_liquid_gas_density(out);
    return SP_OK;
}

/* ---------------------------------------------------------------- fields by name */

typedef struct field {
    const char *key;
    size_t off;
    double lo, hi; /* plausible range, inclusive */
    int gas;       /* 1: changing it changes the ideal-gas density */
} field;

/* Ranges wide enough for any liquid one films bubbles in (liquid metals to heavy oils, a
 * centrifuge to a drop tower excluded), narrow enough to catch unit slips (mPa·s for Pa·s,
 * mN/m for N/m, bar for Pa). */
static const field fields[] = {
    {"temp_c", offsetof(sp_liquid, temp_c), -100.0, 500.0, 1},
    {"rho_kg_m3", offsetof(sp_liquid, rho_kg_m3), 100.0, 25000.0, 1},
    {"mu_pa_s", offsetof(sp_liquid, mu_pa_s), 1e-6, 1e3, 0},
    {"sigma_n_m", offsetof(sp_liquid, sigma_n_m), 1e-4, 3.0, 0},
    {"rho_gas_kg_m3", offsetof(sp_liquid, rho_gas_kg_m3), 0.0, 1000.0, 0},
    {"p_atm_pa", offsetof(sp_liquid, p_atm_pa), 100.0, 1e8, 1},
    {"g_m_s2", offsetof(sp_liquid, g_m_s2), 1e-3, 1000.0, 1},
    {"vapour_pa", offsetof(sp_liquid, vapour_pa), 0.0, 1e8, 0},
    {"depth_m", offsetof(sp_liquid, depth_m), 0.0, 12000.0, 1},
    {"gas_molar_kg_mol", offsetof(sp_liquid, gas_molar_kg_mol), 1e-3, 1.0, 1},
};
#define NFIELDS (sizeof fields / sizeof fields[0])

static const field *field_find(const char *key)
{
    for (size_t i = 0; i < NFIELDS; i++)
        if (strcmp(fields[i].key, key) == 0)
            return &fields[i];
    return NULL;
}

static double *field_ptr(sp_liquid *l, const field *f)
{
    return (double *)((char *)l + f->off);
}

static int field_range(const field *f, double v, const char *what, sp_error *err)
{
    if (!(v >= f->lo && v <= f->hi))
        return sp_error_set(err, SP_ERR_INPUT, "%s: %s = %g is outside the plausible range [%g, %g]", what,
                            f->key, v, f->lo, f->hi);
    return SP_OK;
}

int sp_liquid_check(const sp_liquid *l, const char *what, sp_error *err)
{
    for (size_t i = 0; i < NFIELDS; i++) {
        int rc = field_range(&fields[i], *field_ptr((sp_liquid *)l, &fields[i]), what, err);
        if (rc)
            return rc;
    }
    if (!(l->rho_gas_kg_m3 < l->rho_kg_m3))
        return sp_error_set(err, SP_ERR_INPUT, "%s: rho_gas_kg_m3 = %g is not below rho_kg_m3 = %g", what,
                            l->rho_gas_kg_m3, l->rho_kg_m3);
    return SP_OK;
}

int sp_liquid_set(sp_liquid *l, const char *key, double value, sp_error *err)
{
    const field *f = key ? field_find(key) : NULL;
    if (!f)
        return sp_error_set(err, SP_ERR_INPUT, "liquid: unknown property '%s'", key ? key : "(null)");
    int rc = field_range(f, value, "liquid", err);
    if (rc)
        return rc;
    *field_ptr(l, f) = value;
    if (f->gas && strcmp(key, "temp_c") != 0)
        l->rho_gas_kg_m3 = sp_liquid_gas_density(l);
    return SP_OK;
}

int sp_liquid_assign(sp_liquid *l, const char *kv, sp_error *err)
{
    char key[64];
    const char *eq = kv ? strchr(kv, '=') : NULL;
    if (!eq || eq == kv || (size_t)(eq - kv) >= sizeof key)
        return sp_error_set(err, SP_ERR_INPUT, "liquid: '%s' is not of the form key=value",
                            kv ? kv : "(null)");
    memcpy(key, kv, (size_t)(eq - kv));
    key[eq - kv] = '\0';
    char *end;
    errno = 0;
    double v = strtod(eq + 1, &end);
    if (end == eq + 1 || *end != '\0' || errno == ERANGE || !isfinite(v))
        return sp_error_set(err, SP_ERR_INPUT, "liquid: value of '%s' is not a number: '%s'", key, eq + 1);
    return sp_liquid_set(l, key, v, err);
}

/* ---------------------------------------------------------------- presets */

static int is_path(const char *s)
{
    size_t n = strlen(s);
    return strchr(s, '/') != NULL || (n >= 5 && strcmp(s + n - 5, ".json") == 0);
}

static int valid_name(const char *s)
{
    if (!*s || strlen(s) > 48)
        return 0;
    for (; *s; s++)
        if (!((*s >= 'a' && *s <= 'z') || (*s >= 'A' && *s <= 'Z') || (*s >= '0' && *s <= '9') || *s == '_' ||
              *s == '-'))
            return 0;
    return 1;
}

static int file_exists(const char *path)
{
    struct stat st;
    return stat(path, &st) == 0 && S_ISREG(st.st_mode);
}

/* Keys a preset may hold besides the numeric fields; keys beginning with '_' are comments. */
static int known_text_key(const char *k)
{
    return !strcmp(k, "name") || !strcmp(k, "model") || !strcmp(k, "gas") || !strcmp(k, "source") ||
           !strcmp(k, "notes") || k[0] == '_';
}

static int num_key(json_t *root, const char *path, const char *key, double *v, int *have, sp_error *err)
{
    json_t *j = json_object_get(root, key);
    *have = 0;
    if (!j)
        return SP_OK;
    if (!json_is_number(j))
        return sp_error_set(err, SP_ERR_INPUT, "%s: key '%s' must be a number", path, key);
    *v = json_number_value(j);
    *have = 1;
    return SP_OK;
}

static int load_file(const char *path, double temp_c, sp_liquid *out, sp_error *err)
{
    json_t *root = NULL;
    json_error_t jerr;
    int rc = SP_ERR_INPUT;
    struct stat st;
    sp_liquid l;
    memset(&l, 0, sizeof l);

    if (stat(path, &st) != 0 || !S_ISREG(st.st_mode)) {
        sp_error_set(err, SP_ERR_INPUT, "%s: liquid preset not found or not a regular file", path);
        goto fail;
    }
    if (st.st_size > PRESET_MAX_BYTES) {
        sp_error_set(err, SP_ERR_INPUT, "%s: liquid preset is %lld bytes, larger than the %d-byte cap", path,
                     (long long)st.st_size, PRESET_MAX_BYTES);
        goto fail;
    }
    root = json_load_file(path, JSON_REJECT_DUPLICATES, &jerr);
    if (!root) {
        sp_error_set(err, SP_ERR_INPUT, "%s: line %d: bad JSON: %s", path, jerr.line, jerr.text);
        goto fail;
    }
    if (!json_is_object(root)) {
        sp_error_set(err, SP_ERR_INPUT, "%s: a liquid preset must be a JSON object", path);
        goto fail;
    }
    const char *k;
    json_t *v;
    json_object_foreach(root, k, v)
    {
        if (field_find(k))
            continue;
        if (!known_text_key(k)) {
            sp_error_set(err, SP_ERR_INPUT, "%s: unknown key '%s'", path, k);
            goto fail;
        }
        if (k[0] != '_' && strcmp(k, "notes") != 0 && !json_is_string(v)) {
            sp_error_set(err, SP_ERR_INPUT, "%s: key '%s' must be a string", path, k);
            goto fail;
        }
    }

    json_t *jm = json_object_get(root, "model");
    if (!jm) {
        sp_error_set(err, SP_ERR_INPUT, "%s: missing key 'model' (\"water\" or \"fixed\")", path);
        goto fail;
    }
    const char *model = json_string_value(jm);
    int water = strcmp(model, "water") == 0;
    if (!water && strcmp(model, "fixed") != 0) {
        sp_error_set(err, SP_ERR_INPUT, "%s: key 'model' is \"%s\"; expected \"water\" or \"fixed\"", path,
                     model);
        goto fail;
    }

    double file_t = NAN;
    int have_t;
    if (num_key(root, path, "temp_c", &file_t, &have_t, err))
        goto fail;
    if (!have_t) {
        sp_error_set(err, SP_ERR_INPUT, "%s: missing key 'temp_c'", path);
        goto fail;
    }
    double t = isfinite(temp_c) ? temp_c : file_t;
    if (water) {
        if (sp_liquid_water(t, &l, err)) {
            sp_error_set(err, SP_ERR_INPUT, "%s: temp_c = %g °C is outside the water model's 0–100 °C", path,
                         t);
            goto fail;
        }
    } else {
        /* Fixed values hold at the file's temperature only; evaluating them elsewhere would be silent
         * extrapolation. */
        if (isfinite(temp_c) && fabs(temp_c - file_t) > 0.05) {
            sp_error_set(
                err, SP_ERR_INPUT,
                "%s: fixed properties are given at %g °C only; %g °C needs a preset for that temperature",
                path, file_t, temp_c);
            goto fail;
        }
        static const char *required[] = {"rho_kg_m3", "mu_pa_s", "sigma_n_m"};
        for (int i = 0; i < 3; i++)
            if (!json_object_get(root, required[i])) {
                sp_error_set(err, SP_ERR_INPUT, "%s: missing key '%s' (required by model \"fixed\")", path,
                             required[i]);
                goto fail;
            }
        l.temp_c = t;
        l.p_atm_pa = SP_P_STANDARD;
        l.g_m_s2 = SP_G_STANDARD;
        l.gas_molar_kg_mol = SP_M_AIR;
        /* Vapour pressure defaults to pure water's (a small correction to the gas pressure). */
        l.vapour_pa = (t >= 0.0 && t <= 100.0) ? sp_water_vapour_pressure_wagner(t) : 0.0;
    }

    json_t *jg = json_object_get(root, "gas");
    if (jg) {
        const char *gas = json_string_value(jg);
        if (!strcmp(gas, "air"))
            l.gas_molar_kg_mol = SP_M_AIR;
        else if (!strcmp(gas, "co2"))
            l.gas_molar_kg_mol = SP_M_CO2;
        else {
            sp_error_set(err, SP_ERR_INPUT, "%s: key 'gas' is \"%s\"; expected \"air\" or \"co2\"", path,
                         gas);
            goto fail;
        }
    }

    /* Numeric overrides, the gas density last so that an explicit value wins over the ideal gas. */
    for (size_t i = 0; i < NFIELDS; i++) {
        const field *f = &fields[i];
        double x;
        int have;
        if (!strcmp(f->key, "temp_c") || !strcmp(f->key, "rho_gas_kg_m3"))
            continue;
        if (num_key(root, path, f->key, &x, &have, err))
            goto fail;
        if (!have)
            continue;
        if (field_range(f, x, path, err))
            goto fail;
        *field_ptr(&l, f) = x;
    }
    l.rho_gas_kg_m3 = sp_liquid_gas_density(&l);
    {
        double x;
        int have;
        if (num_key(root, path, "rho_gas_kg_m3", &x, &have, err))
            goto fail;
        if (have)
            l.rho_gas_kg_m3 = x;
    }

    json_t *jn = json_object_get(root, "name");
    const char *name = jn ? json_string_value(jn) : NULL;
    if (!name) {
        const char *base = strrchr(path, '/');
        name = base ? base + 1 : path;
    }
    snprintf(l.name, sizeof l.name, "%s", name);
    char *dot = strstr(l.name, ".json");
    if (!jn && dot)
        *dot = '\0';

    if (sp_liquid_check(&l, path, err))
        goto fail;
    *out = l;
    rc = SP_OK;
fail:
    json_decref(root);
    return rc;
}

int sp_liquid_preset_in(const char *calib_dir, const char *name_or_path, double temp_c, sp_liquid *out,
                        sp_error *err)
{
    char path[4096];
    if (!name_or_path || !*name_or_path)
        return sp_error_set(err, SP_ERR_INPUT, "liquid: empty preset name");
    if (isnan(temp_c) == 0 && !isfinite(temp_c))
        return sp_error_set(err, SP_ERR_INPUT, "%s: temperature is not finite", name_or_path);
    if (is_path(name_or_path))
        return load_file(name_or_path, temp_c, out, err);
    if (!valid_name(name_or_path))
        return sp_error_set(err, SP_ERR_INPUT, "liquid: '%s' is neither a preset name nor a .json path",
                            name_or_path);

    const char *dirs[2] = {NULL, NULL};
    char envdir[4096];
    if (calib_dir) {
        dirs[0] = calib_dir;
    } else {
        const char *env = getenv("SPUME_CALIB_DIR");
        /* An explicit $SPUME_CALIB_DIR is the only place looked in; the build's own calib/ otherwise. */
        if (env && *env && snprintf(envdir, sizeof envdir, "%s/liquids", env) < (int)sizeof envdir)
            dirs[0] = envdir;
#ifdef SPUME_CALIB_DIR_DEFAULT
        else
            dirs[1] = SPUME_CALIB_DIR_DEFAULT "/liquids";
#endif
    }
    for (int i = 0; i < 2; i++) {
        if (!dirs[i])
            continue;
        if (snprintf(path, sizeof path, "%s/%s.json", dirs[i], name_or_path) >= (int)sizeof path)
            return sp_error_set(err, SP_ERR_INPUT, "%s: preset directory path too long", dirs[i]);
        if (file_exists(path))
            return load_file(path, temp_c, out, err);
    }
    if (!strcmp(name_or_path, "water"))
        return sp_liquid_water(isfinite(temp_c) ? temp_c : 20.0, out, err);
    for (int i = 0; i < 2; i++)
        if (dirs[i])
            return sp_error_set(err, SP_ERR_INPUT, "%s/%s.json: no such liquid preset", dirs[i],
                                name_or_path);
    return sp_error_set(
        err, SP_ERR_INPUT,
        "liquid preset '%s': no preset directory (set SPUME_CALIB_DIR to the folder holding liquids/)",
        name_or_path);
}

int sp_liquid_preset(const char *name_or_path, double temp_c, sp_liquid *out, sp_error *err)
{
    return sp_liquid_preset_in(NULL, name_or_path, temp_c, out, err);
}

/* Liquid properties: the water model against published values, the presets in calib/liquids, the
 * override interface and bad preset files. Each expected value names its source; "from memory"
 * marks values not re-read in the source, checked with a wider tolerance. */
#include "physics/liquid.h"

#include "check.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static char calib_dir[4096]; /* <repo>/calib/liquids, found from this file's path */
static char tmp_dir[4096];

static void write_file(const char *name, const char *text, char *path, size_t n)
{
    snprintf(path, n, "%s/%s", tmp_dir, name);
    FILE *f = fopen(path, "w");
    if (!f) {
        perror(path);
        exit(1);
    }
    fputs(text, f);
    fclose(f);
}

/* A preset file that must be refused with SP_ERR_INPUT and a one-line message naming the file and
 * the given word (usually the offending key). */
static void bad_preset(const char *name, const char *text, const char *word)
{
    char path[4200];
    sp_liquid l;
    sp_error err;
    sp_error_clear(&err);
    write_file(name, text, path, sizeof path);
    int rc = sp_liquid_preset(path, NAN, &l, &err);
    CHECK(rc == SP_ERR_INPUT && err.code == SP_ERR_INPUT, "%s: rc %d", name, rc);
    CHECK(strstr(err.msg, path) != NULL, "%s: message does not name the file: %s", name, err.msg);
    CHECK(strstr(err.msg, word) != NULL, "%s: message does not name '%s': %s", name, word, err.msg);
    CHECK(strchr(err.msg, '\n') == NULL, "%s: message spans lines", name);
    unlink(path);
}

static void test_water_model(void)
{
    /* REFERENCES.md, water at 20 °C: ρ 998.21 kg/m³, μ 1.0016 mPa·s, σ 72.74 mN/m. */
    sp_liquid w;
    sp_error err;
    CHECK(sp_liquid_water(20.0, &w, &err) == SP_OK, "water 20");
    CHECK_NEAR(w.rho_kg_m3, 998.21, 0.02, "Kell density 20 °C vs REFERENCES 998.21");
    CHECK_NEAR(w.mu_pa_s * 1e3, 1.0016, 0.0005, "IAPWS 2008 viscosity 20 °C vs REFERENCES 1.0016 mPa·s");
    CHECK_NEAR(w.sigma_n_m * 1e3, 72.74, 0.005, "IAPWS 1994 surface tension 20 °C vs REFERENCES");
    CHECK_NEAR(w.g_m_s2, 9.80665, 0, "standard gravity");
    CHECK_NEAR(w.p_atm_pa, 101325, 0, "standard atmosphere");

    /* REFERENCES.md: IAPWS (1994) σ at 10 / 25 °C (values given to 0.01 mN/m). */
    CHECK_NEAR(sp_water_surface_tension_iapws(10.0) * 1e3, 74.22, 0.005, "IAPWS σ 10 °C");
    CHECK_NEAR(sp_water_surface_tension_iapws(25.0) * 1e3, 71.97, 0.005, "IAPWS σ 25 °C");
    /* IAPWS (1994) release table (from memory): 0.01 °C 75.65, 100 °C 58.91 mN/m. */
    CHECK_NEAR(sp_water_surface_tension_iapws(0.01) * 1e3, 75.65, 0.02, "IAPWS σ 0.01 °C (memory)");
    CHECK_NEAR(sp_water_surface_tension_iapws(100.0) * 1e3, 58.91, 0.02, "IAPWS σ 100 °C (memory)");

    /* Kell (1975) density: maximum near 3.98 °C of 999.97 kg/m³; 100 °C 958.35 (steam tables, from
     * memory). */
    double best_t = 0, best = 0;
    for (int i = 0; i <= 1000; i++) {
        double t = i * 0.01, r = sp_water_density_kell(t);
        if (r > best)
            best = r, best_t = t;
    }
    CHECK_NEAR(best_t, 3.98, 0.03, "temperature of maximum density (memory)");
    CHECK_NEAR(best, 999.972, 0.005, "maximum density (memory)");
    CHECK_NEAR(sp_water_density_kell(100.0), 958.35, 0.1, "density at 100 °C (memory)");
    CHECK(isnan(sp_water_density_kell(-1.0)) && isnan(sp_water_density_kell(101.0)), "Kell outside 0–100");

    /* IAPWS (2008) viscosity release, verification table 4 (values from memory, to 1e-6 relative:
     * a wrong coefficient would show at the 1e-3 level). T K, ρ kg/m³, μ µPa·s. */
    static const double vt[][3] = {
        {298.15, 998.0, 889.735100}, {298.15, 1200.0, 1437.649467}, {373.15, 1000.0, 307.883622},
        {433.15, 1.0, 14.538324},    {433.15, 1000.0, 217.685358},  {873.15, 1.0, 32.619287},
        {873.15, 100.0, 35.802262},  {873.15, 600.0, 77.430195},    {1173.15, 1.0, 44.217245},
        {1173.15, 100.0, 47.640433}, {1173.15, 400.0, 64.154608},
    };
    for (size_t i = 0; i < sizeof vt / sizeof vt[0]; i++) {
        double mu = sp_water_viscosity_iapws(vt[i][0], vt[i][1]) * 1e6;
        CHECK(fabs(mu / vt[i][2] - 1) < 1e-6, "IAPWS 2008 check (%g K, %g kg/m³): %.6f vs %.6f µPa·s",
              vt[i][0], vt[i][1], mu, vt[i][2]);
    }

    /* Vapour pressure: normal boiling point 99.974 °C on ITS-90 → 101325 Pa (IAPWS-95, from memory);
     * 20 °C → 2339 Pa (steam tables, from memory); the Buck (1981) form agrees within 0.3% on 0–100 °C. */
    CHECK_NEAR(sp_water_vapour_pressure_wagner(99.974), 101325, 60, "p_sat at the normal boiling point");
    CHECK_NEAR(sp_water_vapour_pressure_wagner(20.0), 2339, 2, "p_sat 20 °C (memory)");
    CHECK_NEAR(sp_water_vapour_pressure_wagner(0.01), 611.657, 0.5, "p_sat at the triple point (memory)");
    for (int t = 0; t <= 100; t += 5) {
        double a = sp_water_vapour_pressure_wagner(t), b = sp_water_vapour_pressure_buck(t);
        CHECK(fabs(a / b - 1) < 3e-3, "Wagner vs Buck at %d °C: %g vs %g Pa", t, a, b);
    }

    /* Ideal-gas air at 20 °C, 1 atm: 101325·0.0289647/(8.314462618·293.15) = 1.2041 kg/m³ (tables:
     * 1.204, from memory). Depth scales it with p_atm + ρ g z. */
    CHECK_NEAR(w.rho_gas_kg_m3, 1.2041, 0.0005, "air density 20 °C");
    sp_liquid d = w;
    CHECK(sp_liquid_set(&d, "depth_m", 10.0, &err) == SP_OK, "set depth");
    CHECK_NEAR(d.rho_gas_kg_m3 / w.rho_gas_kg_m3, (101325 + 998.2067 * 9.80665 * 10) / 101325, 1e-4,
               "gas density at 10 m");
    CHECK_NEAR(sp_liquid_pressure_pa(&d), 101325 + w.rho_kg_m3 * 9.80665 * 10, 1e-6, "hydrostatic pressure");

    CHECK(sp_liquid_water(-0.5, &d, &err) == SP_ERR_INPUT && strstr(err.msg, "-0.5"), "water below 0 °C");
    CHECK(sp_liquid_water(NAN, &d, &err) == SP_ERR_INPUT, "water NaN");
    CHECK(sp_liquid_water(100.5, &d, &err) == SP_ERR_INPUT, "water above 100 °C");
}

static void test_presets(void)
{
    sp_liquid l;
    sp_error err;
    char path[4200];

    CHECK(sp_liquid_preset_in(calib_dir, "water", 25.0, &l, &err) == SP_OK, "water preset: %s", err.msg);
    CHECK(!strcmp(l.name, "water"), "name %s", l.name);
    CHECK_NEAR(l.sigma_n_m * 1e3, 71.97, 0.005, "water.json at 25 °C (IAPWS, REFERENCES)");
    CHECK(sp_liquid_preset_in(calib_dir, "water", NAN, &l, &err) == SP_OK && l.temp_c == 20.0,
          "water.json own temperature");

    /* seawater.json: S = 35 g/kg at 20 °C, values from memory (see the file). Density EOS-80 1024.76. */
    CHECK(sp_liquid_preset_in(calib_dir, "seawater", NAN, &l, &err) == SP_OK, "seawater: %s", err.msg);
    CHECK_NEAR(l.rho_kg_m3, 1024.76, 0.1, "seawater density");
    CHECK(l.mu_pa_s > 1.05e-3 && l.mu_pa_s < 1.10e-3, "seawater viscosity %g", l.mu_pa_s);
    CHECK(l.sigma_n_m > 0.0730 && l.sigma_n_m < 0.0745, "seawater surface tension %g", l.sigma_n_m);
    CHECK(sp_liquid_preset_in(calib_dir, "seawater", 30.0, &l, &err) == SP_ERR_INPUT &&
              strstr(err.msg, "seawater.json"),
          "seawater at another temperature is refused: %s", err.msg);
    CHECK(sp_liquid_preset_in(calib_dir, "seawater", 20.0, &l, &err) == SP_OK, "seawater at its temperature");

    /* carbonated.json: water with CO2; ideal gas 1.8295 kg/m³ at 20 °C (real CO2 1.84, from memory). */
    CHECK(sp_liquid_preset_in(calib_dir, "carbonated", 4.0, &l, &err) == SP_OK, "carbonated: %s", err.msg);
    CHECK_NEAR(l.rho_kg_m3, sp_water_density_kell(4.0), 1e-9, "carbonated liquid is water");
    CHECK(sp_liquid_preset_in(calib_dir, "carbonated", 20.0, &l, &err) == SP_OK, "carbonated 20");
    CHECK_NEAR(l.rho_gas_kg_m3, 1.84, 0.02, "CO2 density 20 °C");

    /* By path, and through SPUME_CALIB_DIR. */
    snprintf(path, sizeof path, "%s/seawater.json", calib_dir);
    CHECK(sp_liquid_preset(path, NAN, &l, &err) == SP_OK && !strcmp(l.name, "seawater"), "preset by path");
    char parent[4096];
    snprintf(parent, sizeof parent, "%s", calib_dir);
    *strrchr(parent, '/') = '\0';
    setenv("SPUME_CALIB_DIR", parent, 1);
    CHECK(sp_liquid_preset("seawater", NAN, &l, &err) == SP_OK, "SPUME_CALIB_DIR: %s", err.msg);
    setenv("SPUME_CALIB_DIR", tmp_dir, 1); /* no liquids/ there */
    CHECK(sp_liquid_preset("water", 30.0, &l, &err) == SP_OK && l.temp_c == 30.0, "built-in water fallback");
    CHECK(sp_liquid_preset("seawater", NAN, &l, &err) == SP_ERR_INPUT && strstr(err.msg, "seawater"),
          "missing preset: %s", err.msg);
    unsetenv("SPUME_CALIB_DIR");
    CHECK(sp_liquid_preset("../etc/passwd", NAN, &l, &err) == SP_ERR_INPUT, "path-like name");
    CHECK(sp_liquid_preset("bad name!", NAN, &l, &err) == SP_ERR_INPUT, "invalid name");
    CHECK(sp_liquid_preset("", NAN, &l, &err) == SP_ERR_INPUT, "empty name");

    /* A user preset with overrides: fixed-model oil. */
    write_file("oil.json",
               "{\"model\": \"fixed\", \"temp_c\": 25, \"rho_kg_m3\": 965, \"mu_pa_s\": 0.485, "
               "\"sigma_n_m\": 0.0211, \"depth_m\": 0.5, \"_comment\": [1, 2]}",
               path, sizeof path);
    CHECK(sp_liquid_preset(path, NAN, &l, &err) == SP_OK, "oil: %s", err.msg);
    CHECK(!strcmp(l.name, "oil") && l.mu_pa_s == 0.485 && l.depth_m == 0.5, "oil fields");
    CHECK_NEAR(l.rho_gas_kg_m3, (101325 + 965 * 9.80665 * 0.5) * SP_M_AIR / (SP_R_GAS * 298.15), 1e-9,
               "oil gas density at depth");
    unlink(path);
}

static void test_bad_presets(void)
{
    bad_preset("syntax.json", "{\"model\": \"water\", \"temp_c\": 20,", "JSON");
    bad_preset("array.json", "[1, 2]", "object");
    bad_preset("unknown.json", "{\"model\": \"water\", \"temp_c\": 20, \"viscosity\": 1}", "viscosity");
    bad_preset("nomodel.json", "{\"temp_c\": 20}", "model");
    bad_preset("badmodel.json", "{\"model\": \"oil\", \"temp_c\": 20}", "model");
    bad_preset("notemp.json", "{\"model\": \"water\"}", "temp_c");
    bad_preset("hot.json", "{\"model\": \"water\", \"temp_c\": 150}", "temp_c");
    bad_preset("nomu.json",
               "{\"model\": \"fixed\", \"temp_c\": 20, \"rho_kg_m3\": 1000, \"sigma_n_m\": 0.07}", "mu_pa_s");
    bad_preset("strmu.json",
               "{\"model\": \"fixed\", \"temp_c\": 20, \"rho_kg_m3\": 1000, \"sigma_n_m\": 0.07, "
               "\"mu_pa_s\": \"1e-3\"}",
               "mu_pa_s");
    /* A unit slip: surface tension in mN/m. */
    bad_preset("mn.json", "{\"model\": \"water\", \"temp_c\": 20, \"sigma_n_m\": 72.7}", "sigma_n_m");
    bad_preset("negdepth.json", "{\"model\": \"water\", \"temp_c\": 20, \"depth_m\": -1}", "depth_m");
    bad_preset("heavygas.json", "{\"model\": \"water\", \"temp_c\": 20, \"rho_gas_kg_m3\": 999.9}",
               "rho_gas_kg_m3");
    bad_preset("gas.json", "{\"model\": \"water\", \"temp_c\": 20, \"gas\": \"helium\"}", "gas");
    bad_preset("name.json", "{\"model\": \"water\", \"temp_c\": 20, \"name\": 5}", "name");
    bad_preset("dup.json", "{\"model\": \"water\", \"temp_c\": 20, \"temp_c\": 30}", "JSON");
    bad_preset("empty.json", "", "JSON");
    bad_preset("huge.json", "{\"model\": \"water\", \"temp_c\": 1e999}", "JSON");
    /* A file far larger than any preset is refused before it is read. */
    size_t n = 200000;
    char *big = malloc(n + 1);
    if (big) {
        memset(big, ' ', n);
        big[0] = '{';
        big[n - 1] = '}';
        big[n] = '\0';
        bad_preset("big.json", big, "cap");
        free(big);
    }
    sp_liquid l;
    sp_error err;
    char path[4200];
    snprintf(path, sizeof path, "%s/none.json", tmp_dir);
    CHECK(sp_liquid_preset(path, NAN, &l, &err) == SP_ERR_INPUT && strstr(err.msg, path), "missing file");
    CHECK(sp_liquid_preset(tmp_dir, NAN, &l, &err) == SP_ERR_INPUT, "a directory");
}

static void test_overrides(void)
{
    sp_liquid l, w;
    sp_error err;
    sp_liquid_water(20.0, &w, &err);
    l = w;
    CHECK(sp_liquid_assign(&l, "mu_pa_s=0.002", &err) == SP_OK && l.mu_pa_s == 0.002, "assign mu");
    CHECK(l.rho_gas_kg_m3 == w.rho_gas_kg_m3, "viscosity leaves the gas alone");
    CHECK(sp_liquid_assign(&l, "p_atm_pa=50662.5", &err) == SP_OK, "assign p_atm");
    CHECK_NEAR(l.rho_gas_kg_m3, w.rho_gas_kg_m3 / 2, 1e-12, "gas density follows p_atm");
    CHECK(sp_liquid_assign(&l, "rho_gas_kg_m3=0", &err) == SP_OK && l.rho_gas_kg_m3 == 0,
          "explicit gas density");
    CHECK(sp_liquid_assign(&l, "viscosity=1", &err) == SP_ERR_INPUT && strstr(err.msg, "viscosity"),
          "unknown key: %s", err.msg);
    CHECK(sp_liquid_assign(&l, "mu_pa_s=abc", &err) == SP_ERR_INPUT, "non-number");
    CHECK(sp_liquid_assign(&l, "mu_pa_s=", &err) == SP_ERR_INPUT, "empty value");
    CHECK(sp_liquid_assign(&l, "mu_pa_s", &err) == SP_ERR_INPUT, "no '='");
    CHECK(sp_liquid_assign(&l, "=1", &err) == SP_ERR_INPUT, "no key");
    CHECK(sp_liquid_assign(&l, "mu_pa_s=nan", &err) == SP_ERR_INPUT, "nan");
    CHECK(sp_liquid_assign(&l, "sigma_n_m=72", &err) == SP_ERR_INPUT && strstr(err.msg, "sigma_n_m"),
          "mN/m slip: %s", err.msg);
    CHECK(sp_liquid_set(&l, NULL, 1, &err) == SP_ERR_INPUT, "NULL key");
    CHECK(sp_liquid_check(&w, "w", &err) == SP_OK, "water passes the check");
}

int main(void)
{
    const char *f = __FILE__; /* absolute in CMake builds: <repo>/tests/unit/test_physics_liquid.c */
    snprintf(calib_dir, sizeof calib_dir, "%s", f);
    for (int up = 0; up < 3; up++) {
        char *s = strrchr(calib_dir, '/');
        if (s)
            *s = '\0';
    }
    strncat(calib_dir, "/calib/liquids", sizeof calib_dir - strlen(calib_dir) - 1);
    snprintf(tmp_dir, sizeof tmp_dir, "/tmp/sp_liquid_XXXXXX");
    if (!mkdtemp(tmp_dir)) {
        perror("mkdtemp");
        return 1;
    }
    unsetenv("SPUME_CALIB_DIR");
    test_water_model();
    test_presets();
    test_bad_presets();
    test_overrides();
    rmdir(tmp_dir);
    return check_report();
}

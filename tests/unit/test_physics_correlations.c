/* Correlations and groups against the worked values in /work/shared/REFERENCES.md (each check
 * names the source; the Tomiyama and Aoyama forms are marked there as "from memory", so those
 * checks allow 0.5% rather than the last printed digit), plus properties of the drag solver. */
#include "physics/correlations.h"

#include "check.h"

#include <string.h>

/* REFERENCES.md water: ρ 998.21, μ 1.0016 mPa·s, σ 72.74 mN/m, g 9.80665; air from the model. */
static sp_liquid ref_water(void)
{
    sp_liquid l;
    sp_error err;
    sp_liquid_water(20.0, &l, &err);
    l.rho_kg_m3 = 998.21;
    l.mu_pa_s = 1.0016e-3;
    l.sigma_n_m = 72.74e-3;
    return l;
}

static void test_table(void)
{
    sp_liquid w = ref_water();
    /* REFERENCES.md rise-velocity table, m/s: d mm, Mendelson, Tomiyama pure, slightly, contaminated. */
    static const double t[][5] = {
        {0.5, 0.542, 0.0733, 0.0551, 0.0551}, {1, 0.388, 0.2712, 0.1808, 0.1122},
        {2, 0.2875, 0.2875, 0.2875, 0.2080},  {4, 0.2367, 0.2367, 0.2367, 0.2367},
        {8, 0.2397, 0.2396, 0.2396, 0.2396},
    };
    for (int i = 0; i < 5; i++) {
        double d = t[i][0] * 1e-3;
        char what[96];
        /* Mendelson (1967), AIChE J 13:250: printed to 3–4 digits. */
        snprintf(what, sizeof what, "Mendelson d=%g mm", t[i][0]);
        CHECK_NEAR(sp_rise_mendelson(&w, d), t[i][1], t[i][1] < 0.3 ? 6e-5 : 6e-4, what);
        /* Tomiyama et al. (1998), JSME Int. J. B 41:472, form from memory: 0.5% */
        for (int c = 0; c < 3; c++) {
            int it;
            double u = sp_rise_tomiyama(&w, d, (sp_contam)c, &it);
            CHECK(fabs(u / t[i][2 + c] - 1) < 5e-3, "Tomiyama law %d d=%g mm: %.5f vs %.4f", c, t[i][0], u,
                  t[i][2 + c]);
            CHECK(it > 0 && it < 200, "iterations %d", it);
            /* The root satisfies the terminal condition to 1e-10. */
            double re = sp_group_re(&w, d, u), eo = sp_group_eo(&w, d);
            double rhs = sqrt(4 * w.g_m_s2 * d * (w.rho_kg_m3 - w.rho_gas_kg_m3) /
                              (3 * w.rho_kg_m3 * sp_drag_tomiyama((sp_contam)c, re, eo)));
            CHECK(fabs(u - rhs) <= 1e-10 * u, "fixed point residual %g", u - rhs);
        }
    }
    /* Mendelson minimum 0.2312 m/s at d = 5.45 mm (REFERENCES.md). */
    double best = 1, best_d = 0;
    for (int i = 1000; i <= 10000; i++) {
        double d = i * 1e-6, u = sp_rise_mendelson(&w, d);
        if (u < best)
            best = u, best_d = d;
    }
    CHECK_NEAR(best, 0.2312, 6e-5, "Mendelson minimum");
    CHECK_NEAR(best_d * 1e3, 5.45, 0.01, "Mendelson minimum diameter");

    /* Davies & Taylor (1950): d 20 mm → 0.3149 m/s. */
    CHECK_NEAR(sp_rise_davies_taylor(&w, 20e-3), 0.3149, 6e-5, "Davies-Taylor 20 mm");
    /* Stokes / Hadamard–Rybczynski, d 0.1 mm → 5.42 / 8.13 mm/s. */
    CHECK_NEAR(sp_rise_stokes(&w, 0.1e-3) * 1e3, 5.42, 0.006, "Stokes 0.1 mm");
    CHECK_NEAR(sp_rise_hadamard(&w, 0.1e-3) * 1e3, 8.13, 0.006, "Hadamard-Rybczynski 0.1 mm");
    /* In the Stokes limit the laws reduce to 16/Re (pure: Hadamard–Rybczynski drag is 16/Re) and
     * 24/Re (contaminated: Stokes): d = 5 µm, Re ~ 1e-4, where 0.15 Re^0.687 ~ 3e-4. */
    double d = 5e-6;
    CHECK(fabs(sp_rise_tomiyama(&w, d, SP_CONTAM_PURE, NULL) / sp_rise_hadamard(&w, d) - 1) < 1e-3,
          "pure law → Hadamard-Rybczynski at small Re");
    CHECK(fabs(sp_rise_tomiyama(&w, d, SP_CONTAM_FULL, NULL) / sp_rise_stokes(&w, d) - 1) < 1e-3,
          "contaminated law → Stokes at small Re");
}

static void test_groups_shape(void)
{
    sp_liquid w = ref_water();
    /* Mo of water at 20 °C 2.566e-11 (REFERENCES.md). */
    CHECK(fabs(sp_group_mo(&w) / 2.566e-11 - 1) < 5e-4, "Morton %g", sp_group_mo(&w));
    sp_groups g;
    sp_groups_compute(&w, 2e-3, 0.3, &g);
    CHECK_NEAR(g.re, 998.21 * 0.3 * 2e-3 / 1.0016e-3, 1e-9, "Re");
    CHECK_NEAR(g.we, 998.21 * 0.09 * 2e-3 / 72.74e-3, 1e-9, "We");
    CHECK_NEAR(g.eo, (998.21 - w.rho_gas_kg_m3) * 9.80665 * 4e-6 / 72.74e-3, 1e-12, "Eo");
    sp_groups_compute(&w, 2e-3, 0, &g);
    CHECK(isnan(g.re) && isnan(g.we) && g.eo > 0, "no speed: Re, We undefined");

    /* Wellek et al. (1966): Eo 0.5 → 0.9120; 1 → 0.8598; 2 → 0.7840; 5 → 0.6447. */
    static const double we[][2] = {{0.5, 0.9120}, {1, 0.8598}, {2, 0.7840}, {5, 0.6447}};
    for (int i = 0; i < 4; i++)
        CHECK_NEAR(sp_aspect_wellek(we[i][0]), we[i][1], 6e-5, "Wellek");
    /* Aoyama et al. (2016), form from memory: (0.5, 100) → 0.8073; (1, 500) → 0.4263. */
    CHECK_NEAR(sp_aspect_aoyama(0.5, 100), 0.8073, 6e-5, "Aoyama (0.5, 100)");
    CHECK_NEAR(sp_aspect_aoyama(1, 500), 0.4263, 6e-5, "Aoyama (1, 500)");
    CHECK(sp_aspect_wellek(0) == 1 && sp_aspect_aoyama(0, 100) == 1, "spheres at Eo 0");
}

static void test_solver(void)
{
    sp_liquid w = ref_water();
    /* Monotone in d on every law over 10 µm – 50 mm, finite, and bounded by the cap branch. */
    for (int c = 0; c < 3; c++) {
        double prev = 0;
        int monotone_small = 1;
        for (int i = 0; i <= 400; i++) {
            double d = 1e-5 * pow(5000.0, i / 400.0);
            double u = sp_rise_tomiyama(&w, d, (sp_contam)c, NULL);
            CHECK(isfinite(u) && u > 0, "law %d d %g: %g", c, d, u);
            double eo = sp_group_eo(&w, d);
            double umax = sqrt(4 * w.g_m_s2 * d * (w.rho_kg_m3 - w.rho_gas_kg_m3) /
                               (3 * w.rho_kg_m3 * 8 * eo / (3 * (eo + 4))));
            CHECK(u <= umax * (1 + 1e-12), "law %d d %g above the cap bound", c, d);
            if (d < 0.7e-3 && u <= prev)
                monotone_small = 0;
            prev = u;
        }
        CHECK(monotone_small, "law %d: velocity grows with d below 0.7 mm", c);
        /* Large caps: the Eo branch alone, C_D → 8/3: U → sqrt(g d Δρ/(2ρ)). */
        double dd = 0.1;
        CHECK(fabs(sp_rise_tomiyama(&w, dd, (sp_contam)c, NULL) /
                       sqrt(4 * 9.80665 * dd * (w.rho_kg_m3 - w.rho_gas_kg_m3) /
                            (3 * w.rho_kg_m3 * (8 * sp_group_eo(&w, dd) / (3 * (sp_group_eo(&w, dd) + 4))))) -
                   1) < 1e-10,
              "cap branch at 100 mm");
    }
    /* Pure ≥ slightly ≥ contaminated (drag is ordered the other way). */
    for (int i = 1; i <= 200; i++) {
        double d = i * 0.05e-3;
        double a = sp_rise_tomiyama(&w, d, SP_CONTAM_PURE, NULL),
               b = sp_rise_tomiyama(&w, d, SP_CONTAM_SLIGHT, NULL),
               c = sp_rise_tomiyama(&w, d, SP_CONTAM_FULL, NULL);
        CHECK(a >= b * (1 - 1e-12) && b >= c * (1 - 1e-12), "order at %g mm: %g %g %g", d * 1e3, a, b, c);
    }
    CHECK(isnan(sp_rise_tomiyama(&w, 0, SP_CONTAM_PURE, NULL)), "d = 0");
    CHECK(isnan(sp_rise_tomiyama(&w, -1e-3, SP_CONTAM_PURE, NULL)), "d < 0");
    CHECK(isnan(sp_rise_tomiyama(&w, NAN, SP_CONTAM_PURE, NULL)), "d NaN");
    CHECK(isnan(sp_rise_tomiyama(&w, INFINITY, SP_CONTAM_PURE, NULL)), "d inf");
    sp_liquid bad = w;
    bad.rho_gas_kg_m3 = bad.rho_kg_m3;
    CHECK(isnan(sp_rise_tomiyama(&bad, 1e-3, SP_CONTAM_PURE, NULL)), "no buoyancy");
    /* A viscous liquid (glycerol-like, Mo ~ 0.1): still converges. */
    sp_liquid gly = w;
    gly.rho_kg_m3 = 1260, gly.mu_pa_s = 1.2, gly.sigma_n_m = 0.063;
    double u = sp_rise_tomiyama(&gly, 5e-3, SP_CONTAM_FULL, NULL);
    CHECK(isfinite(u) && u > 0 && u < sp_rise_stokes(&gly, 5e-3) * 1.0001, "glycerol %g", u);

    sp_rise_predictions p;
    sp_rise_predict(&w, 2e-3, 0.3, &p);
    CHECK(p.mendelson_ok && p.tomiyama_ok && !p.stokes_ok && !p.davies_taylor_ok && p.wellek_ok &&
              p.aoyama_ok,
          "flags at 2 mm");
    CHECK_NEAR(p.tomiyama_pure_m_s, sp_rise_tomiyama(&w, 2e-3, SP_CONTAM_PURE, NULL), 0, "predict pure");
    CHECK(p.aspect_aoyama > 0 && p.aspect_aoyama < 1, "aoyama at measured speed");
    sp_rise_predict(&w, 0.05e-3, 0, &p);
    CHECK(p.stokes_ok && p.hadamard_ok && !p.mendelson_ok && isnan(p.aspect_aoyama), "flags at 50 µm");
    sp_rise_predict(&w, 30e-3, 0.38, &p);
    CHECK(p.davies_taylor_ok && !p.wellek_ok, "flags at 30 mm");
}

int main(void)
{
    test_table();
    test_groups_shape();
    test_solver();
    return check_report();
}

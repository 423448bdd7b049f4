/* Minnaert radius: the plain relation, the Devin surface-tension and Prosperetti thermal corrections
 * and the depth scaling against the worked values in REFERENCES.md; round trips f -> R -> f. */
#include "acoustic/minnaert.h"
#include "check.h"

int main(void)
{
    sp_bubble_medium m;
    sp_bubble_medium_default(&m);
    double k;

    /* Minnaert (1933), gamma 1.4, p0 101325, rho 998 (the brief's numbers): f R = 3.286 Hz m (+-0.005). */
    m.model = SP_MINNAERT_PLAIN;
    m.rho_kg_m3 = 998;
    double fR = sp_minnaert_freq(&m, 1e-3) * 1e-3;
    printf("plain Minnaert f R = %.4f Hz m\n", fR);
    CHECK_NEAR(fR, 3.286, 0.005, "Minnaert f R (REFERENCES 3.286)");
    m.gamma = 1.0;
    CHECK_NEAR(sp_minnaert_freq(&m, 1e-3) * 1e-3, 2.777, 0.005, "isothermal f R (REFERENCES 2.777)");
    sp_bubble_medium_default(&m);
    m.model = SP_MINNAERT_PLAIN;
    /* REFERENCES worked, plain adiabatic: 1.7 kHz -> 1.933 mm; 16.5 kHz -> 0.1992 mm. */
    CHECK_NEAR(sp_minnaert_radius(&m, 1700, NULL) * 1e3, 1.933, 0.0015, "plain 1.7 kHz");
    CHECK_NEAR(sp_minnaert_radius(&m, 16500, NULL) * 1e3, 0.1992, 0.00015, "plain 16.5 kHz");

    /* Devin (1959, from memory): surface tension raises f by 0.03% at 1.7 kHz, 0.27% at 16.5 kHz. */
    m.model = SP_MINNAERT_DEVIN;
    double r1 = sp_minnaert_radius(&m, 1700, NULL), r2 = sp_minnaert_radius(&m, 16500, NULL);
    m.model = SP_MINNAERT_PLAIN;
    double rise1 = sp_minnaert_freq(&m, r1) / 1700, rise2 = sp_minnaert_freq(&m, r2) / 16500;
    printf("Devin: f raised by %.3f%% at 1.7 kHz, %.3f%% at 16.5 kHz\n", 100 * (1 / rise1 - 1),
           100 * (1 / rise2 - 1));
    CHECK_NEAR(100 * (1 / rise1 - 1), 0.03, 0.01, "Devin shift at 1.7 kHz (REFERENCES 0.03%)");
    CHECK_NEAR(100 * (1 / rise2 - 1), 0.27, 0.02, "Devin shift at 16.5 kHz (REFERENCES 0.27%)");

    /* Prosperetti thermal model (from memory in REFERENCES): 1.7 kHz -> 1.914 mm (kappa 1.372);
     * 16.5 kHz -> 0.1935 mm (kappa 1.314). */
    m.model = SP_MINNAERT_THERMAL;
    double rt1 = sp_minnaert_radius(&m, 1700, &k);
    printf("thermal 1.7 kHz: R %.4f mm kappa %.4f\n", rt1 * 1e3, k);
    CHECK_NEAR(rt1 * 1e3, 1.914, 0.0015, "thermal 1.7 kHz radius");
    CHECK_NEAR(k, 1.372, 0.0015, "thermal 1.7 kHz kappa_eff");
    double rt2 = sp_minnaert_radius(&m, 16500, &k);
    printf("thermal 16.5 kHz: R %.5f mm kappa %.4f\n", rt2 * 1e3, k);
    CHECK_NEAR(rt2 * 1e3, 0.1935, 0.00015, "thermal 16.5 kHz radius");
    CHECK_NEAR(k, 1.314, 0.0015, "thermal 16.5 kHz kappa_eff");
    /* Limits: kappa tends to gamma for large, fast bubbles and to 1 for tiny, slow ones. */
    CHECK(sp_minnaert_kappa(&m, 2 * M_PI * 3000, 0.05) > 1.39, "adiabatic limit");
    CHECK(sp_minnaert_kappa(&m, 2 * M_PI * 10, 1e-6) < 1.01, "isothermal limit");

    /* Common practice (no source): 1.7 kHz <-> ~2 mm, 16.5 kHz <-> ~0.2 mm radius, within 10%. */
    CHECK(fabs(rt1 * 1e3 / 2.0 - 1) < 0.10, "1.7 kHz ~ 2 mm");
    CHECK(fabs(rt2 * 1e3 / 0.2 - 1) < 0.10, "16.5 kHz ~ 0.2 mm");

    /* Depth (REFERENCES): f scales with sqrt((p_atm + rho g z)/p_atm): x1.04719 at 1 m, x1.40218 at 10 m
     * (checked on the plain relation, where the scaling is exact). */
    m.model = SP_MINNAERT_PLAIN;
    double f0 = sp_minnaert_freq(&m, 1e-3);
    m.depth_m = 1;
    CHECK_NEAR(sp_minnaert_freq(&m, 1e-3) / f0, 1.04719, 2e-5, "depth 1 m");
    m.depth_m = 10;
    CHECK_NEAR(sp_minnaert_freq(&m, 1e-3) / f0, 1.40218, 2e-5, "depth 10 m");

    /* Vapour pressure lowers the gas pressure, so the same frequency means a smaller bubble. */
    sp_bubble_medium_default(&m);
    double rv0 = sp_minnaert_radius(&m, 3000, NULL);
    m.p_vapour_pa = 2339;
    double rv1 = sp_minnaert_radius(&m, 3000, NULL);
    CHECK(rv1 < rv0, "vapour pressure: %.6g !< %.6g", rv1, rv0);

    /* Round trips over the range, every model. */
    for (int model = 0; model <= 2; model++) {
        sp_bubble_medium_default(&m);
        m.model = model;
        m.depth_m = 0.5;
        double worst = 0;
        for (double r = 2e-5; r < 0.02; r *= 1.3) {
            double f = sp_minnaert_freq(&m, r), back = sp_minnaert_radius(&m, f, NULL);
            if (fabs(back / r - 1) > worst)
                worst = fabs(back / r - 1);
        }
        CHECK(worst < 1e-9, "model %d round trip error %.3g", model, worst);
    }
    /* Outside the bracket or nonsense: 0, never a fake radius. */
    CHECK(sp_minnaert_radius(&m, 0, NULL) == 0, "f 0");
    CHECK(sp_minnaert_radius(&m, -5, NULL) == 0, "f < 0");
    CHECK(sp_minnaert_radius(&m, 1e9, NULL) == 0, "f 1 GHz");
    return check_report();
}

/* Probe for the reference tests of the rise-velocity correlations.
 *
 *   probe_physics_rise [--liquid NAME_OR_PATH] [--temp C] [--set key=value]...
 *
 * Reads diameters in millimetres from stdin, one per line, and prints for each:
 *   d_mm u_pure u_slight u_full eo mo rho mu sigma rho_gas g      (velocities m/s, SI properties)
 * with 17 significant digits. Default liquid: the built-in water model at 20 °C.
 */
#include "physics/correlations.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int main(int argc, char **argv)
{
    const char *name = "water";
    double temp = NAN;
    sp_liquid l;
    sp_error err;
    for (int i = 1; i < argc; i++)
        if (!strcmp(argv[i], "--liquid") && i + 1 < argc)
            name = argv[++i];
        else if (!strcmp(argv[i], "--temp") && i + 1 < argc)
            temp = atof(argv[++i]);
    if (sp_liquid_preset(name, temp, &l, &err)) {
        fprintf(stderr, "%s\n", err.msg);
        return err.code;
    }
    for (int i = 1; i < argc; i++)
        if (!strcmp(argv[i], "--set") && i + 1 < argc && sp_liquid_assign(&l, argv[++i], &err)) {
            fprintf(stderr, "%s\n", err.msg);
            return err.code;
        }
    double dmm;
    while (scanf("%lf", &dmm) == 1) {
        double d = dmm * 1e-3;
        printf("%.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g\n", dmm,
               sp_rise_tomiyama(&l, d, SP_CONTAM_PURE, NULL), sp_rise_tomiyama(&l, d, SP_CONTAM_SLIGHT, NULL),
               sp_rise_tomiyama(&l, d, SP_CONTAM_FULL, NULL), sp_group_eo(&l, d), sp_group_mo(&l),
               l.rho_kg_m3, l.mu_pa_s, l.sigma_n_m, l.rho_gas_kg_m3, l.g_m_s2);
    }
    return 0;
}

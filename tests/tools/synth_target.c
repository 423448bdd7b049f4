/* Probe for the calibration tests: renders a dot-grid target.
 *
 * Usage: probe_synth_target OUT.png [key=value ...] with keys named as the fields of
 * sp_target_opts (width, height, bytes, pitch_mm, dot_diam_mm, mm_per_px, rotation_deg, persp_x,
 * persp_y, offset_x, offset_y, cols, rows, k1, k2, blur_px, noise, vignette, level, light_dots,
 * seed). Exit status 0, or the library's status with its message on stderr. */
#include "synth/target.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: probe_synth_target OUT.png [key=value ...]\n");
        return 2;
    }
    sp_target_opts o;
    sp_target_opts_default(&o);
    struct {
        const char *k;
        double *d;
        int *i;
    } keys[] = {{"pitch_mm", &o.pitch_mm, NULL},
                {"dot_diam_mm", &o.dot_diam_mm, NULL},
                {"mm_per_px", &o.mm_per_px, NULL},
                {"rotation_deg", &o.rotation_deg, NULL},
                {"persp_x", &o.persp_x, NULL},
                {"persp_y", &o.persp_y, NULL},
                {"offset_x", &o.offset_x, NULL},
                {"offset_y", &o.offset_y, NULL},
                {"k1", &o.k1, NULL},
                {"k2", &o.k2, NULL},
                {"blur_px", &o.blur_px, NULL},
                {"noise", &o.noise, NULL},
                {"vignette", &o.vignette, NULL},
                {"level", &o.level, NULL},
                {"width", NULL, &o.width},
                {"height", NULL, &o.height},
                {"bytes", NULL, &o.bytes},
                {"cols", NULL, &o.cols},
                {"rows", NULL, &o.rows},
                {"light_dots", NULL, &o.light_dots}};
    for (int a = 2; a < argc; a++) {
        const char *eq = strchr(argv[a], '=');
        int found = 0;
        if (eq && !strncmp(argv[a], "seed=", 5)) {
            o.seed = strtoull(eq + 1, NULL, 10);
            continue;
        }
        for (size_t k = 0; eq && k < sizeof keys / sizeof keys[0]; k++)
            if (strlen(keys[k].k) == (size_t)(eq - argv[a]) &&
                !strncmp(argv[a], keys[k].k, (size_t)(eq - argv[a]))) {
                if (keys[k].d)
                    *keys[k].d = atof(eq + 1);
                else
                    *keys[k].i = atoi(eq + 1);
                found = 1;
            }
        if (!found) {
            fprintf(stderr, "probe_synth_target: unknown option %s\n", argv[a]);
            return 2;
        }
    }
    sp_error err = {0};
    int rc = sp_synth_target(argv[1], &o, &err);
    if (rc)
        fprintf(stderr, "%s\n", err.msg);
    return rc;
}

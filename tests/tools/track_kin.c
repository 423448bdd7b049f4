/* Probe for the reference tests: per-track kinematics and the Lomb–Scargle periodogram.
 *
 * Input blocks on stdin:
 *   "K N MM_PER_PX HEIGHT" then N lines "frame t_s x y d_px aspect tilt_deg edge"
 *       → one line "vx vy vx_se vy_se ax ay d_vol growth growth_se osc_amp osc_freq osc_power
 *          tilt_mean aspect_mean x_birth y_birth d_first" (17 significant digits; nan allowed)
 *   "L N M" then N lines "t y" then M angular frequencies
 *       → one line of M powers, then one line of M "a:b" least-squares amplitude pairs.
 * "FAIL message" on a rejected block. */
#include "track/kinematics.h"

#include <stdio.h>
#include <stdlib.h>

int main(void)
{
    char kind[4];
    while (scanf("%3s", kind) == 1) {
        if (kind[0] == 'K') {
            int n, h;
            double s;
            if (scanf("%d %lf %d", &n, &s, &h) != 3 || n < 0 || n > 10000000)
                return 2;
            sp_track t = {1, n, 0, calloc((size_t)n + 1, sizeof(sp_track_point))};
            if (!t.pts)
                return 1;
            for (int i = 0; i < n; i++) {
                sp_track_point *p = &t.pts[i];
                long long f;
                if (scanf("%lld %lf %lf %lf %lf %lf %lf %d", &f, &p->t_s, &p->x, &p->y, &p->d_px, &p->aspect,
                          &p->tilt_deg, &p->edge) != 8)
                    return 2;
                p->frame = f;
            }
            sp_kinematics k;
            sp_error err;
            if (sp_kinematics_compute(&t, s, h, &k, &err) == 0)
                printf("%.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g %.17g "
                       "%.17g %.17g %.17g\n",
                       k.vx_mm_s, k.vy_mm_s, k.vx_se_mm_s, k.vy_se_mm_s, k.ax_mm_s2, k.ay_mm_s2, k.d_vol_mm,
                       k.growth_mm_s, k.growth_se_mm_s, k.osc_amp_mm, k.osc_freq_hz, k.osc_power,
                       k.tilt_mean_deg, k.aspect_mean, k.x_birth_mm, k.y_birth_mm, k.d_first_mm);
            else
                printf("FAIL %s\n", err.msg);
            free(t.pts);
        } else if (kind[0] == 'L') {
            int n, m;
            if (scanf("%d %d", &n, &m) != 2 || n < 1 || m < 1 || n > 10000000 || m > 10000000)
                return 2;
            double *t = malloc(sizeof *t * (size_t)n), *y = malloc(sizeof *y * (size_t)n);
            double *w = malloc(sizeof *w * (size_t)m), *a = malloc(sizeof *a * (size_t)m),
                   *b = malloc(sizeof *b * (size_t)m);
            if (!t || !y || !w || !a || !b)
                return 1;
            for (int i = 0; i < n; i++)
                if (scanf("%lf %lf", &t[i], &y[i]) != 2)
                    return 2;
            for (int i = 0; i < m; i++)
                if (scanf("%lf", &w[i]) != 1)
                    return 2;
            for (int i = 0; i < m; i++)
                printf("%s%.17g", i ? " " : "", sp_lombscargle(t, y, n, w[i], &a[i], &b[i]));
            printf("\n");
            for (int i = 0; i < m; i++)
                printf("%s%.17g:%.17g", i ? " " : "", a[i], b[i]);
            printf("\n");
            free(t);
            free(y);
            free(w);
            free(a);
            free(b);
        } else {
            return 2;
        }
    }
    return 0;
}

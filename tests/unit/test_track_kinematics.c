/* Kinematics on invented tracks with known motion: exact lines, y upward, edge rows, axial tilt
 * mean, sinusoidal zigzag recovery, too-short tracks, bad input. */
#include "check.h"
#include "track/kinematics.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static sp_track *make(int n)
{
    sp_track *t = calloc(1, sizeof *t);
    t->id = 7;
    t->n = n;
    t->pts = calloc((size_t)n, sizeof *t->pts);
    return t;
}

int main(void)
{
    sp_error err;
    sp_kinematics k;
    const double fps = 250, s = 0.02; /* mm per px */
    const int H = 1024;

    /* Rising at 100 px/s, drifting right at 25 px/s, growing 2 px/s; rows 0-1 touch the border and
     * carry a wrong diameter that must not count. */
    {
        sp_track *t = make(40);
        for (int i = 0; i < 40; i++) {
            sp_track_point *p = &t->pts[i];
            p->frame = 100 + i;
            p->t_s = p->frame / fps;
            p->x = 10 + 25 * i / fps;
            p->y = 900 - 100 * i / fps;
            p->d_px = 20 + 2 * i / fps;
            p->edge = i < 2;
            if (p->edge)
                p->d_px = 5;
            p->aspect = 0.5 + 0.01 * (i % 3);
            p->tilt_deg = i % 2 ? 89 : -89; /* axial: both near vertical, mean 90, not 0 */
        }
        CHECK(sp_kinematics_compute(t, s, H, &k, &err) == 0, "%s", err.msg);
        CHECK(k.id == 7 && k.n == 40 && k.n_clean == 38 && k.frame_first == 100 && k.frame_last == 139,
              "counts");
        CHECK_NEAR(k.vx_mm_s, 25 * s, 1e-9, "vx");
        CHECK_NEAR(k.vy_mm_s, 100 * s, 1e-9, "vy positive upward");
        CHECK(k.vx_se_mm_s < 1e-9 && k.vy_se_mm_s < 1e-9, "exact line, SE ~0");
        CHECK_NEAR(k.speed_mm_s, hypot(25, 100) * s, 1e-9, "speed");
        CHECK_NEAR(k.ax_mm_s2, 0, 1e-6, "no acceleration");
        CHECK_NEAR(k.growth_mm_s, 2 * s, 1e-9, "growth over clean rows");
        CHECK_NEAR(k.d_vol_mm, (20 + 2 * 20.5 / fps) * s, 1e-9, "median of clean rows");
        CHECK_NEAR(k.x_birth_mm, 10 * s, 1e-12, "birth x");
        CHECK_NEAR(k.y_birth_mm, (H - 1 - 900) * s, 1e-12, "birth y upward from bottom pixel centre");
        CHECK_NEAR(k.d_first_mm, 5 * s, 1e-12, "first diameter as measured");
        CHECK_NEAR(k.tilt_mean_deg, 90, 1e-9, "axial mean of ±89");
        CHECK_NEAR(k.aspect_mean, 0.5 + 0.01 * (13 * 1 + 13 * 2) / 40.0, 1e-12, "mean aspect");
        CHECK(k.osc_amp_mm < 1e-9, "a straight track has no oscillation: %g", k.osc_amp_mm);
        /* Uncalibrated: millimetre fields hold pixels. */
        CHECK(sp_kinematics_compute(t, 0, H, &k, &err) == 0 && fabs(k.vy_mm_s - 100) < 1e-9, "pixels");
        sp_track_free(t);
    }

    /* Constant acceleration and a zigzag: x = A sin(2π f t + φ) + drift, with gaps (uneven
     * sampling) and small noise. */
    {
        sp_track *t = make(300);
        unsigned long long st = 12345;
        int m = 0;
        for (int i = 0; m < 300; i++) {
            st = st * 6364136223846793005ULL + 1442695040888963407ULL;
            if ((st >> 33) % 10 == 0)
                continue; /* drop ~10 % of frames */
            double tt = i / fps, noise = ((double)((st >> 11) % 1000) / 1000 - 0.5) * 0.05;
            sp_track_point *p = &t->pts[m++];
            p->frame = i;
            p->t_s = tt;
            p->x = 300 + 40 * tt + 6 * sin(2 * M_PI * 7.3 * tt + 0.4) + noise;
            p->y = 1000 - (50 * tt + 0.5 * 400 * tt * tt);
            p->d_px = 30;
            p->aspect = 0.7;
        }
        CHECK(sp_kinematics_compute(t, s, H, &k, &err) == 0, "%s", err.msg);
        CHECK_NEAR(k.ay_mm_s2, 400 * s, 1e-6, "acceleration upward");
        CHECK_NEAR(k.osc_freq_hz, 7.3, 0.02, "zigzag frequency");
        CHECK_NEAR(k.osc_amp_mm, 6 * s, 0.2 * s, "zigzag amplitude");
        CHECK(k.osc_power > 0.9, "explained share %g", k.osc_power);
        printf("zigzag: f %.4f Hz (7.3), amplitude %.4f px (6), share %.4f\n", k.osc_freq_hz,
               k.osc_amp_mm / s, k.osc_power);
        sp_track_free(t);
    }

    /* Too short: single point, two points, seven points. */
    {
        sp_track *t = make(7);
        for (int i = 0; i < 7; i++) {
            t->pts[i].t_s = i / fps;
            t->pts[i].x = i;
            t->pts[i].y = 2 * i;
            t->pts[i].d_px = 10;
            t->pts[i].edge = 1;
        }
        t->n = 1;
        CHECK(sp_kinematics_compute(t, s, H, &k, &err) == 0, "%s", err.msg);
        CHECK(isnan(k.vx_mm_s) && isnan(k.ax_mm_s2) && isnan(k.d_vol_mm) && k.osc_amp_mm == 0 &&
                  isnan(k.osc_freq_hz),
              "single point");
        t->n = 2;
        CHECK(sp_kinematics_compute(t, s, H, &k, &err) == 0, "%s", err.msg);
        CHECK(isfinite(k.vx_mm_s) && isnan(k.vx_se_mm_s) && isnan(k.ax_mm_s2) && isnan(k.growth_mm_s),
              "two points (all edge)");
        t->n = 7;
        CHECK(sp_kinematics_compute(t, s, H, &k, &err) == 0 && isnan(k.osc_freq_hz) && k.osc_amp_mm == 0,
              "seven points");
        /* Bad input: times not increasing, NaN, bad scale/height. */
        t->pts[3].t_s = t->pts[2].t_s;
        CHECK(sp_kinematics_compute(t, s, H, &k, &err) == SP_ERR_INPUT && strstr(err.msg, "track 7"), "%s",
              err.msg);
        t->pts[3].t_s = 3 / fps;
        t->pts[4].x = NAN;
        CHECK(sp_kinematics_compute(t, s, H, &k, &err) == SP_ERR_INPUT, "NaN");
        t->pts[4].x = 4;
        CHECK(sp_kinematics_compute(t, -1, H, &k, &err) == SP_ERR_INPUT, "negative scale");
        CHECK(sp_kinematics_compute(t, s, 0, &k, &err) == SP_ERR_INPUT, "zero height");
        t->n = 0;
        CHECK(sp_kinematics_compute(t, s, H, &k, &err) == SP_ERR_INPUT, "empty");
        sp_track_free(t);
    }
    return check_report();
}

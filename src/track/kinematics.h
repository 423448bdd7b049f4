/* Per-track kinematics: velocity, acceleration, growth, size, shape, lateral oscillation. */
#ifndef SP_TRACK_KINEMATICS_H
#define SP_TRACK_KINEMATICS_H

#include "spume.h"
#include "track/linker.h"

/* Results in millimetres (x right, y up from the bottom-left pixel centre, as CONTRACT.md) and
 * seconds. With mm_per_px = 0 (uncalibrated) the "_mm" fields hold pixels. A quantity the track is
 * too short for is NaN, except osc_amp_mm which is 0 (no oscillation detectable). */
typedef struct sp_kinematics {
    int64_t id, frame_first, frame_last;
    int n;       /* detections */
    int n_clean; /* detections not touching the border (edge = 0) */
    double t_first_s, t_last_s;

    /* Birth: first detection, for nucleation sites. */
    double x_birth_mm, y_birth_mm, d_first_mm;

    /* Least-squares line through position against time (n >= 2; standard errors need n >= 3). */
    double vx_mm_s, vy_mm_s, vx_se_mm_s, vy_se_mm_s, speed_mm_s;
    /* Second derivative of a least-squares parabola (n >= 3). */
    double ax_mm_s2, ay_mm_s2;

    /* Volume-equivalent diameter over rows with edge = 0: median (n_clean >= 1), least-squares
     * slope against time and its standard error (n_clean >= 2 / >= 3). */
    double d_vol_mm, growth_mm_s, growth_se_mm_s;

    /* Lateral oscillation of x(t) after a linear detrend: Lomb–Scargle periodogram peak (Lomb 1976,
     * Scargle 1982) refined by golden-section search, amplitude of the least-squares sinusoid at
     * that frequency, and the fraction of detrended variance it explains (0..1). Needs n >= 8 and a
     * track spanning at least 1.5 cycles of the found frequency; otherwise amp 0, freq/power NaN. */
    double osc_amp_mm, osc_freq_hz, osc_power;

    double aspect_mean;   /* mean minor/major over all rows */
    double tilt_mean_deg; /* axial mean: half the angle of the mean of (cos 2θ, sin 2θ), (-90, 90] */
} sp_kinematics;

/* Compute *out from a track's series. mm_per_px >= 0 (0 = pixels); height = frame height in pixels,
 * used for y upward. Times must increase along the track. */
int sp_kinematics_compute(const sp_track *t, double mm_per_px, int height, sp_kinematics *out, sp_error *err);

/* Classic Lomb–Scargle power at angular frequency w (rad/s) of samples y(t), as
 * scipy.signal.lombscargle computes it without centring or normalisation:
 * ½ [ (Σ y cos w(t−τ))² / Σ cos² w(t−τ) + (Σ y sin w(t−τ))² / Σ sin² w(t−τ) ],
 * tan 2wτ = Σ sin 2wt / Σ cos 2wt. If a, b are non-NULL they receive the least-squares cosine and
 * sine amplitudes about τ, so sqrt(a² + b²) is the fitted sinusoid's amplitude. */
double sp_lombscargle(const double *t, const double *y, int n, double w, double *a, double *b);

#endif

/* Damped-sinusoid estimation: interpolated spectral peaks against the worked values in
 * REFERENCES.md, the Cramer-Rao bound against its worked value, and the fit's accuracy and variance on
 * synthetic pings of known frequency and decay at SNR 10-40 dB (Monte Carlo, fixed seeds). */
#include "acoustic/estimate.h"
#include "check.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

static uint64_t rng_state = 0x9E3779B97F4A7C15ull;

static double urand(void)
{
    rng_state ^= rng_state << 13;
    rng_state ^= rng_state >> 7;
    rng_state ^= rng_state << 17;
    return ((rng_state >> 11) + 0.5) / 9007199254740992.0;
}

static double gauss(void)
{
    return sqrt(-2 * log(urand())) * cos(2 * M_PI * urand());
}

static int cmp_d(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static void make_ping(float *x, int n, double fs, double f, double beta, double amp, double phase, double sd)
{
    for (int i = 0; i < n; i++) {
        double t = i / fs;
        x[i] = (float)(amp * exp(-beta * t) * cos(2 * M_PI * f * t + phase) + sd * gauss());
    }
}

int main(void)
{
    sp_error err;
    /* REFERENCES.md "Interpolated FFT peak": 1700 Hz cosine, 48 kHz, N 1024, rectangular, no noise. */
    static float x[16384];
    for (int i = 0; i < 1024; i++)
        x[i] = (float)cos(2 * M_PI * 1700.0 * i / 48000.0);
    double fp, fq, fj;
    CHECK(sp_peak_interp(x, 1024, 1024, 48000, 100, 20000, SP_PEAK_PARABOLIC, &fp, &err) == 0, "%s", err.msg);
    CHECK(sp_peak_interp(x, 1024, 1024, 48000, 100, 20000, SP_PEAK_QUINN, &fq, &err) == 0, "%s", err.msg);
    CHECK(sp_peak_interp(x, 1024, 1024, 48000, 100, 20000, SP_PEAK_JACOBSEN, &fj, &err) == 0, "%s", err.msg);
    printf("peak 1700 Hz: parabolic %.3f  Quinn %.3f  Jacobsen %.4f\n", fp, fq, fj);
    CHECK_NEAR(fp, 1690.0, 0.05, "parabolic on |X| (REFERENCES: 1690.0)");
    CHECK_NEAR(fq, 1699.98, 0.005, "Quinn 1994 (REFERENCES: 1699.98)");
    CHECK_NEAR(fj, 1700.000, 0.0005, "Jacobsen & Kootsookos 2007 (REFERENCES: 1700.000)");

    /* REFERENCES.md Cramer-Rao worked values (Rife & Boorstyn 1974, from memory): an undamped tone,
     * A 1, noise variance 0.01, N 1000 at 48 kHz -> std >= 0.1183 Hz; the damped example 0.668 Hz. */
    double crb0 = sp_ring_crb_f(1, 0, 1700, 0.3, 1000, 48000, 0.01);
    double crb1 = sp_ring_crb_f(1, 174.1, 1700, 0, 4096, 48000, 0.01);
    printf("CRB: undamped %.4f Hz, damped %.4f Hz\n", crb0, crb1);
    CHECK_NEAR(crb0, 0.1183, 0.0012, "undamped CRB (REFERENCES 0.1183; asymptotic form, 1%)");
    CHECK_NEAR(crb1, 0.668, 0.007, "damped CRB (REFERENCES 0.668)");

    /* Noise-free fit recovers the parameters closely. */
    sp_ring r;
    make_ping(x, 4096, 48000, 1700, 174.1, 1, 0.7, 0);
    CHECK(sp_ring_fit(x, 4096, 48000, 500, 20000, &r, &err) == 0, "%s", err.msg);
    CHECK_NEAR(r.f_hz, 1700, 1e-3, "noise-free f");
    CHECK_NEAR(r.beta_s, 174.1, 1e-2, "noise-free beta");
    CHECK_NEAR(r.amp, 1, 1e-5, "noise-free amplitude");
    CHECK_NEAR(r.phase_rad, 0.7, 1e-5, "noise-free phase");

    /* Monte Carlo: the REFERENCES damped case, 200 trials; the ML fit should reach the bound. */
    enum { TRIALS = 200 };
    double s1 = 0, s2 = 0;
    for (int k = 0; k < TRIALS; k++) {
        make_ping(x, 4096, 48000, 1700, 174.1, 1, 2 * M_PI * urand(), 0.1);
        sp_ring_fit(x, 4096, 48000, 500, 20000, &r, &err);
        s1 += r.f_hz;
        s2 += r.f_hz * r.f_hz;
    }
    double mean = s1 / TRIALS, sd = sqrt((s2 - s1 * s1 / TRIALS) / (TRIALS - 1));
    printf(
        "damped 1700 Hz, beta 174.1, var 0.01, N 4096: mean %.3f Hz, std %.3f Hz, CRB %.3f Hz, ratio %.2f\n",
        mean, sd, crb1, sd / crb1);
    CHECK(sd < 1.3 * crb1 && sd > 0.7 * crb1, "std %.3f not within 0.7..1.3 x CRB %.3f", sd, crb1);
    CHECK_NEAR(mean, 1700, 3 * crb1 / sqrt(TRIALS) + 0.01, "mean frequency unbiased");

    /* Sweep: frequencies and decays of 0.2-3 mm bubbles (decays near the damping model of REFERENCES.md),
     * SNR 10..40 dB (A^2 / 2 sigma^2), at 48 kHz; the 0.2 mm bubble (16.5 kHz, 0.28 ms decay) only
     * spans 80 samples at 48 kHz, where the bound itself allows a 0.27% standard deviation, so it is
     * also run at 96 kHz, the rate such small bubbles call for. */
    const double cases[][3] = {{1100, 110, 48000},  {1700, 174.1, 48000}, {4000, 500, 48000},
                               {9000, 1500, 48000}, {16500, 3600, 48000}, {16500, 3600, 96000}};
    const double snrs[] = {10, 20, 30, 40};
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        double f = cases[c][0], beta = cases[c][1], fs = cases[c][2];
        int exempt = f / fs > 0.3;      /* 0.2 mm at 48 kHz: the bound, not the estimator, limits it */
        int n = (int)(6.0 / beta * fs); /* six decay times */
        if (n > 8192)
            n = 8192;
        for (size_t s = 0; s < sizeof snrs / sizeof snrs[0]; s++) {
            double sdv = sqrt(1.0 / (2 * pow(10, snrs[s] / 10)));
            double rel[100], bsum = 0, vs = 0;
            for (int k = 0; k < 100; k++) {
                make_ping(x, n, fs, f, beta, 1, 2 * M_PI * urand(), sdv);
                sp_ring_fit(x, n, fs, 300, 22000, &r, &err);
                rel[k] = fabs(r.f_hz - f) / f;
                bsum += r.beta_s;
                vs += (r.f_hz - f) * (r.f_hz - f);
            }
            qsort(rel, 100, sizeof rel[0], cmp_d);
            double crb = sp_ring_crb_f(1, beta, f, 0, n, fs, sdv * sdv);
            printf("fs %5.0f f %6.0f beta %6.1f SNR %2.0f dB n %4d: median |df|/f %.5f%%, rms df %.3f Hz, "
                   "CRB %.3f Hz, "
                   "mean beta %.1f\n",
                   fs, f, beta, snrs[s], n, 100 * rel[50], sqrt(vs / 100), crb, bsum / 100);
            if (snrs[s] >= 20 && !exempt)
                CHECK(rel[50] <= 0.002, "f %.0f SNR %.0f: median relative error %.5f > 0.2%%", f, snrs[s],
                      rel[50]);
            CHECK(sqrt(vs / 100) < 1.25 * crb, "f %.0f SNR %.0f: rms error %.3f Hz > 1.25 CRB %.3f", f,
                  snrs[s], sqrt(vs / 100), crb);
        }
    }

    /* Bad arguments. */
    CHECK(sp_ring_fit(x, 8, 48000, 300, 22000, &r, &err) == SP_ERR_INPUT, "short segment accepted");
    CHECK(sp_peak_interp(x, 1024, 1000, 48000, 300, 22000, SP_PEAK_QUINN, &fp, &err) == SP_ERR_INPUT,
          "nfft not a power of two accepted");
    return check_report();
}

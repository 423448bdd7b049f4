/* Synthetic hydrophone recording for scenes with pings: each detachment rings as
 * A e^(-beta t) sin(2 pi f t) from its pinch-off (Minnaert 1933 frequency, damping of the
 * REFERENCES.md model), over white noise and 50 Hz hum, with clicks (1-3 sample knocks and short
 * noise bursts) in the quiet gaps. Generated in blocks from counter-based random numbers, so the file
 * is the same for a seed whatever else runs. */
#include "synth/audio.h"
#include "synth/rng.h"

#include <complex.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#define PI 3.14159265358979323846
#define BLOCK 4096
#define PATHMAX 4096
/* Streams of the audio's random draws: RNG_NOISE keyed far above any frame number. */
#define AUDIO_KEY 0x4155444900000000ULL

/* Water at 20 C and air: the numbers REFERENCES.md uses for its worked values. */
#define RHO 998.21
#define SIGMA 0.07274
#define P_ATM 101325.0
#define G 9.80665
#define GAMMA 1.4
#define D_AIR 2.12e-5

/* Prosperetti (1977): Re Phi / 3 with Phi = 3 gamma / {1 - 3 (gamma - 1) i chi [sqrt(i/chi) coth
 * sqrt(i/chi) - 1]}, chi = D / (omega R^2). */
static double kappa_eff(double omega, double r)
{
    double chi = D_AIR / (omega * r * r);
    double complex z = csqrt(I / chi);
    double complex coth = ccosh(z) / csinh(z);
    if (creal(z) > 30.0)
        coth = 1.0; /* large bubbles: the adiabatic limit, without overflowing cosh */
    double complex phi = 3.0 * GAMMA / (1.0 - 3.0 * (GAMMA - 1.0) * I * chi * (z * coth - 1.0));
    return creal(phi) / 3.0;
}

double synth_minnaert_hz(double r_m, double depth_m)
{
    if (!(r_m > 0))
        return 0.0;
    double p0 = P_ATM + RHO * G * depth_m, st = 2.0 * SIGMA / r_m;
    /* rho R^2 omega^2 = 3 kappa(omega) (p0 + 2 sigma/R) - 2 sigma/R (Devin 1959): kappa varies slowly
     * with omega, so the fixed point from the adiabatic value converges in a few steps. */
    double w = sqrt((3.0 * GAMMA * (p0 + st) - st) / (RHO * r_m * r_m));
    for (int i = 0; i < 100; i++) {
        double k = kappa_eff(w, r_m);
        double nw = sqrt((3.0 * k * (p0 + st) - st) / (RHO * r_m * r_m));
        if (fabs(nw - w) < 1e-13 * w) {
            w = nw;
            break;
        }
        w = nw;
    }
    return w / (2.0 * PI);
}

double synth_damping(double r_mm)
{
    static const double lr[4] = {0.1, 0.5, 1.0, 2.0}, dl[4] = {0.0845, 0.0490, 0.0394, 0.0322};
    if (!(r_mm > lr[0]))
        return dl[0];
    if (r_mm >= lr[3])
        return dl[3];
    int i = 0;
    while (r_mm > lr[i + 1])
        i++;
    double u = (log(r_mm) - log(lr[i])) / (log(lr[i + 1]) - log(lr[i]));
    return dl[i] + u * (dl[i + 1] - dl[i]);
}

typedef struct aping {
    double t_s, f_hz, beta_s, amp, r_mm, snr_db;
    int track;
    int64_t i0, i1; /* samples it occupies */
} aping;

typedef struct aclick {
    double t_s;
    int kind; /* 1..3: a knock of that many samples; 5: a 5-sample burst of noise */
    int64_t i0;
    double amp[5];
} aclick;

static void put_le(unsigned char *p, uint32_t v, int n)
{
    for (int i = 0; i < n; i++)
        p[i] = (unsigned char)(v >> (8 * i));
}

static int open_tmp(FILE **f, char *fin, char *tmp, const char *dir, const char *name, sp_error *err)
{
    int a = snprintf(fin, PATHMAX, "%s/%s", dir, name), b = snprintf(tmp, PATHMAX, "%s/%s.part", dir, name);
    if (a < 0 || a >= PATHMAX || b < 0 || b >= PATHMAX)
        return sp_error_set(err, SP_ERR_INPUT, "%s: path too long", dir);
    *f = fopen(tmp, "wb");
    if (!*f)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot create: %s", tmp, strerror(errno));
    return SP_OK;
}

static int close_rename(FILE **f, const char *tmp, const char *fin, sp_error *err)
{
    int bad = ferror(*f);
    int rc = fclose(*f);
    *f = NULL;
    if (rc != 0 || bad) {
        unlink(tmp);
        return sp_error_set(err, SP_ERR_INPUT, "%s: write failed", fin);
    }
    if (rename(tmp, fin) != 0) {
        unlink(tmp);
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", fin, strerror(errno));
    }
    return SP_OK;
}

int synth_audio_write(const synth_scene *sc, uint64_t seed, const char *dir, sp_error *err)
{
    int rc = SP_OK;
    aping *pp = NULL;
    aclick *cl = NULL;
    float *buf = NULL;
    FILE *fw = NULL, *fp = NULL, *fc = NULL;
    char w_fin[PATHMAX], w_tmp[PATHMAX] = "", p_fin[PATHMAX], p_tmp[PATHMAX] = "", c_fin[PATHMAX],
                         c_tmp[PATHMAX] = "";
    double fs = sc->audio_rate;
    int64_t ns = (int64_t)floor(sc->audio_len_s * fs);
    if (!(fs >= 8000) || ns < 1 || ns > (int64_t)0x7ffffff0 / 2)
        return sp_error_set(err, SP_ERR_INPUT, "synth: audio of %.3f s at %g Hz cannot be written as WAV",
                            sc->audio_len_s, fs);
    size_t np = 0, nc = 0;
    pp = calloc(sc->npings ? sc->npings : 1, sizeof *pp);
    cl = calloc(sc->npings ? sc->npings : 1, sizeof *cl);
    buf = malloc(BLOCK * sizeof *buf);
    if (!pp || !cl || !buf) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for %zu pings", sc->npings);
        goto fail;
    }
    /* Pings inside the recording, clear of the detector's warm-up at the start and of the end. */
    for (size_t i = 0; i < sc->npings; i++) {
        const synth_ping *s = &sc->pings[i];
        double t = s->t_video_s + sc->audio_offset_s;
        if (t < 0.05 || t > sc->audio_len_s - 0.1)
            continue;
        aping *p = &pp[np++];
        p->t_s = t;
        p->r_mm = s->r_mm;
        p->f_hz = synth_minnaert_hz(s->r_mm * 1e-3, sc->depth_m);
        p->beta_s = PI * p->f_hz * synth_damping(s->r_mm);
        p->snr_db = s->snr_db;
        p->amp = sqrt(2.0 * pow(10.0, 0.1 * s->snr_db)) * sc->noise_rms;
        p->track = s->track;
        p->i0 = (int64_t)ceil(t * fs);
        p->i1 = p->i0 + (int64_t)ceil(9.0 / p->beta_s * fs); /* e^-9: far below the noise */
    }
    /* Clicks: in a gap whose quiet part (after the ping has sunk into the noise, plus 8 ms) leaves
     * at least 25 ms before the next onset, with probability 0.4. */
    for (size_t i = 0; i + 1 < np; i++) {
        uint64_t kc = rng_key(seed, RNG_EMIT, 301, i);
        double quiet = pp[i].t_s + (pp[i].snr_db + 3.0) / (20.0 / log(10.0) * pp[i].beta_s) + 0.008;
        double room = pp[i + 1].t_s - 0.012 - quiet;
        if (room < 0.013 || rng_unit(kc, 0) >= 0.4)
            continue;
        aclick *c = &cl[nc++];
        c->t_s = quiet + room * rng_unit(kc, 1);
        c->i0 = (int64_t)llround(c->t_s * fs);
        c->t_s = c->i0 / fs;
        c->kind = rng_unit(kc, 2) < 0.5 ? 5 : 1 + (int)(3.0 * rng_unit(kc, 3));
        double sign = rng_unit(kc, 4) < 0.5 ? -1.0 : 1.0;
        for (int k = 0; k < 5; k++)
            c->amp[k] = c->kind == 5 ? 0.3 * rng_normal(kc, 5 + (uint64_t)k)
                                     : (k < c->kind ? sign * rng_range(kc, 5 + (uint64_t)k, 0.2, 0.6) : 0.0);
    }

    if ((rc = open_tmp(&fw, w_fin, w_tmp, dir, "audio.wav", err)))
        goto fail;
    unsigned char hdr[44];
    uint32_t data = (uint32_t)(ns * 2);
    memcpy(hdr, "RIFF", 4);
    put_le(hdr + 4, 36 + data, 4);
    memcpy(hdr + 8, "WAVEfmt ", 8);
    put_le(hdr + 16, 16, 4);
    put_le(hdr + 20, 1, 2); /* PCM */
    put_le(hdr + 22, 1, 2); /* mono */
    put_le(hdr + 24, (uint32_t)sc->audio_rate, 4);
    put_le(hdr + 28, (uint32_t)sc->audio_rate * 2, 4);
    put_le(hdr + 32, 2, 2);
    put_le(hdr + 34, 16, 2);
    memcpy(hdr + 36, "data", 4);
    put_le(hdr + 40, data, 4);
    fwrite(hdr, 1, sizeof hdr, fw);
    const double hum_ph = rng_range(rng_key(seed, RNG_EMIT, 302, 0), 0, 0.0, 2.0 * PI);
    size_t pfirst = 0;
    size_t cnext = 0;
    for (int64_t b0 = 0; b0 < ns; b0 += BLOCK) {
        int nb = (int)(ns - b0 < BLOCK ? ns - b0 : BLOCK);
        uint64_t kn = rng_key(seed, RNG_NOISE, AUDIO_KEY + (uint64_t)(b0 / BLOCK), 0);
        for (int i = 0; i < nb; i++) {
            double t = (b0 + i) / fs;
            /* mains hum at 50 Hz and its third harmonic, below the band a bubble search uses */
            buf[i] = (float)(sc->noise_rms * rng_normal(kn, (uint64_t)i) +
                             0.004 * sin(2 * PI * 50.0 * t + hum_ph) +
                             0.0015 * sin(2 * PI * 150.0 * t + 2.0 * hum_ph));
        }
        while (pfirst < np && pp[pfirst].i1 <= b0)
            pfirst++;
        for (size_t j = pfirst; j < np && pp[j].i0 < b0 + nb; j++) {
            const aping *p = &pp[j];
            int64_t lo = p->i0 > b0 ? p->i0 : b0, hi = p->i1 < b0 + nb ? p->i1 : b0 + nb;
            for (int64_t i = lo; i < hi; i++) {
                double tau = i / fs - p->t_s;
                buf[i - b0] += (float)(p->amp * exp(-p->beta_s * tau) * sin(2 * PI * p->f_hz * tau));
            }
        }
        for (size_t j = cnext; j < nc && cl[j].i0 < b0 + nb; j++)
            for (int k = 0; k < 5; k++)
                if (cl[j].i0 + k >= b0 && cl[j].i0 + k < b0 + nb)
                    buf[cl[j].i0 + k - b0] += (float)cl[j].amp[k];
        while (cnext < nc && cl[cnext].i0 + 5 <= b0 + nb)
            cnext++;
        unsigned char out[2 * BLOCK];
        for (int i = 0; i < nb; i++) {
            double v = buf[i] * 32768.0;
            long q = lround(v < -32768.0 ? -32768.0 : v > 32767.0 ? 32767.0 : v);
            put_le(out + 2 * i, (uint32_t)(uint16_t)(int16_t)q, 2);
        }
        fwrite(out, 2, (size_t)nb, fw);
    }
    if ((rc = close_rename(&fw, w_tmp, w_fin, err)))
        goto fail;

    if ((rc = open_tmp(&fp, p_fin, p_tmp, dir, "truth_pings.csv", err)))
        goto fail;
    fprintf(fp, "t_s,f_hz,r_mm,track,t_video_s,decay_s,amplitude,snr_db,d_mm\n");
    for (size_t i = 0; i < np; i++)
        fprintf(fp, "%.6f,%.3f,%.5f,%d,%.6f,%.6g,%.6g,%.2f,%.5f\n", pp[i].t_s, pp[i].f_hz, pp[i].r_mm,
                pp[i].track, pp[i].t_s - sc->audio_offset_s, 1.0 / pp[i].beta_s, pp[i].amp, pp[i].snr_db,
                2.0 * pp[i].r_mm);
    if ((rc = close_rename(&fp, p_tmp, p_fin, err)))
        goto fail;
    if ((rc = open_tmp(&fc, c_fin, c_tmp, dir, "truth_clicks.csv", err)))
        goto fail;
    fprintf(fc, "t_s,samples\n");
    for (size_t i = 0; i < nc; i++)
        fprintf(fc, "%.6f,%d\n", cl[i].t_s, cl[i].kind);
    rc = close_rename(&fc, c_tmp, c_fin, err);
fail:
    if (fw) {
        fclose(fw);
        unlink(w_tmp);
    }
    if (fp) {
        fclose(fp);
        unlink(p_tmp);
    }
    if (fc) {
        fclose(fc);
        unlink(c_tmp);
    }
    free(pp);
    free(cl);
    free(buf);
    return rc;
}

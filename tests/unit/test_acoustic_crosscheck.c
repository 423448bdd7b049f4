/* Cross-check steps on invented event trains (alignment, confidence, one-to-one pairing) and the whole
 * job on a fabricated run directory with a WAV of damped sinusoids written here. */
#include "acoustic/crosscheck.h"
#include "check.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static uint64_t st = 88172645463325252ULL;
static double urand(void) /* xorshift64 (Marsaglia 2003), uniform in [0, 1) */
{
    st ^= st << 13;
    st ^= st >> 7;
    st ^= st << 17;
    return (st >> 11) * (1.0 / 9007199254740992.0);
}

static int cmpd(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

static void test_align(void)
{
    enum { N = 60 };
    double v[N], a[N + 10];
    int na = 0;
    double t = 0.1;
    for (int i = 0; i < N; i++) {
        v[i] = t;
        t += 0.035 + 0.03 * urand();
    }
    /* Intervals 35-65 ms: a lag one interval off still finds about half as many coincidences, which
     * is what the confidence figure weighs. Pings: 90% of the births, on a clock 0.3137 s ahead with 0.5 ms
     * jitter, plus 10 strays */
    for (int i = 0; i < N; i++)
        if (i % 10 != 3)
            a[na++] = v[i] + 0.3137 + 0.001 * (urand() - 0.5);
    for (int i = 0; i < 10; i++)
        a[na++] = 3.0 * urand();
    qsort(a, (size_t)na, sizeof *a, cmpd);
    sp_xc_align al;
    sp_error err;
    int rc = sp_xc_align_run(a, na, v, N, 5.0, 0.005, &al, &err);
    CHECK(rc == 0, "align: %s", err.msg);
    CHECK_NEAR(al.offset_s, 0.3137, 0.001, "offset of irregular trains");
    CHECK(al.peak >= 54 && al.peak2 < 0.6 * al.peak, "peak %g, second %g", al.peak, al.peak2);
    int v2a[N];
    int np = sp_xc_pair(a, na, v, N, 0.3137, 0.005, v2a, &err);
    CHECK(np == 54, "pairs %d, want 54", np);
    int wrong = 0, used[N + 10] = {0};
    for (int j = 0; j < N; j++) {
        if (v2a[j] < 0)
            continue;
        wrong += fabs(a[v2a[j]] - v[j] - 0.3137) > 0.001;
        CHECK(!used[v2a[j]], "ping %d used twice", v2a[j]);
        used[v2a[j]] = 1;
    }
    CHECK(wrong == 0, "%d wrong pairs", wrong);

    /* A strictly periodic train cannot be aligned: neighbouring lags score alike. */
    double pv[40], pa[40];
    for (int i = 0; i < 40; i++) {
        pv[i] = 0.05 * i;
        pa[i] = 0.05 * i + 0.2;
    }
    rc = sp_xc_align_run(pa, 40, pv, 40, 1.0, 0.004, &al, &err);
    CHECK(rc == 0 && 1.0 - al.peak2 / al.peak < 0.1, "periodic: confidence %g", 1.0 - al.peak2 / al.peak);

    /* Pairing is one-to-one and prefers the overall best: two births 4 ms apart, two pings. */
    double bv[2] = {1.000, 1.004}, ba[2] = {1.0035, 1.0075};
    int m[2];
    np = sp_xc_pair(ba, 2, bv, 2, 0.0, 0.005, m, &err);
    CHECK(np == 2 && m[0] == 0 && m[1] == 1, "crossed pairing: %d %d %d", np, m[0], m[1]);
    np = sp_xc_pair(ba, 2, bv, 2, 0.5, 0.005, m, &err);
    CHECK(np == 0 && m[0] == -1 && m[1] == -1, "out of tolerance: %d", np);
    rc = sp_xc_align_run(ba, 2, bv, 2, 0.1, 0.0, &al, &err);
    CHECK(rc == SP_ERR_INPUT, "zero tolerance accepted");
    double far[1] = {100.0};
    rc = sp_xc_align_run(far, 1, bv, 2, 1.0, 0.005, &al, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "lag range"), "no lag in range: %s", err.msg);
}

static void put16(FILE *f, unsigned v)
{
    fputc(v & 255, f);
    fputc((v >> 8) & 255, f);
}
static void put32(FILE *f, unsigned v)
{
    put16(f, v & 0xffff);
    put16(f, v >> 16);
}

/* A run directory: births of known size every 50-80 ms; a WAV whose clock runs 0.25 s ahead, with a
 * ping per birth at the plain Minnaert frequency f R = 3.26 Hz m (the check allows for the model
 * difference). */
static void test_job(void)
{
    char dir[] = "/tmp/spume-xc-unitXXXXXX";
    if (!mkdtemp(dir)) {
        CHECK(0, "mkdtemp");
        return;
    }
    char p[512];
    enum { NB = 30 };
    double tb[NB], db[NB];
    double t = 0.1;
    const double fps = 500.0, off = 0.25;
    for (int i = 0; i < NB; i++) {
        tb[i] = ceil(t * fps) / fps; /* first frame after the pinch-off at t */
        db[i] = 1.0 + 2.5 * urand();
        t += 0.05 + 0.03 * urand();
    }
    snprintf(p, sizeof p, "%s/tracks.csv", dir);
    FILE *f = fopen(p, "w");
    fprintf(f, "track,frame_first,frame_last,n,d_vol_mm,t_first_s,d_first_mm\n");
    fprintf(f, "1,0,20,21,2.0,0.0,2.0\n"); /* present from the first frame: not a birth */
    for (int i = 0; i < NB; i++)
        fprintf(f, "%d,%ld,%ld,20,%.5f,%.6f,%.5f\n", i + 2, lround(tb[i] * fps), lround(tb[i] * fps) + 19,
                db[i], tb[i], db[i]);
    fprintf(f, "%d,100,130,31,3.0,0.2,3.0\n", NB + 2); /* enters through the border: not a birth */
    fclose(f);
    snprintf(p, sizeof p, "%s/bubbles.csv", dir);
    f = fopen(p, "w");
    fprintf(f, "frame,t_s,track,edge\n0,0.0,1,0\n");
    for (int i = 0; i < NB; i++)
        fprintf(f, "%ld,%.6f,%d,0\n", lround(tb[i] * fps), tb[i], i + 2);
    fprintf(f, "100,0.2,%d,1\n", NB + 2);
    fclose(f);
    snprintf(p, sizeof p, "%s/summary.json", dir);
    f = fopen(p, "w");
    fprintf(f, "{\"frames\": 1500, \"fps\": 500, \"tracks\": %d}\n", NB + 2);
    fclose(f);

    const int fs = 48000;
    int n = (int)((t + off + 0.3) * fs);
    float *x = calloc((size_t)n, sizeof *x);
    for (int i = 0; i < n; i++)
        x[i] = 0.002f * (float)(urand() + urand() + urand() - 1.5);
    for (int i = 0; i < NB; i++) {
        double ta = tb[i] - 0.5 / fps + 0.6 / fps * (urand() - 0.5) + off;
        double f0 = 3.26 / (0.5 * db[i] * 1e-3), beta = M_PI * f0 * 0.04;
        for (int k = (int)ceil(ta * fs); k < n && k < ta * fs + 0.05 * fs; k++) {
            double tau = k / (double)fs - ta;
            x[k] += (float)(0.1 * exp(-beta * tau) * sin(2 * M_PI * f0 * tau));
        }
    }
    char wav[600];
    snprintf(wav, sizeof wav, "%s/rec.wav", dir);
    f = fopen(wav, "wb");
    fwrite("RIFF", 1, 4, f);
    put32(f, 36 + 2 * n);
    fwrite("WAVEfmt ", 1, 8, f);
    put32(f, 16);
    put16(f, 1);
    put16(f, 1);
    put32(f, fs);
    put32(f, 2 * fs);
    put16(f, 2);
    put16(f, 16);
    fwrite("data", 1, 4, f);
    put32(f, 2 * n);
    for (int i = 0; i < n; i++)
        put16(f, (unsigned)(uint16_t)(int16_t)lrint(x[i] * 32767.0));
    fclose(f);
    free(x);

    sp_crosscheck_settings s;
    sp_crosscheck_settings_default(&s);
    sp_crosscheck_report r;
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_crosscheck(dir, wav, &s, &r, &err);
    CHECK(rc == 0, "crosscheck: %s", err.msg);
    CHECK(r.births == NB && r.pings == NB, "births %lld pings %lld", (long long)r.births, (long long)r.pings);
    CHECK(r.pairs == NB, "pairs %lld", (long long)r.pairs);
    CHECK_NEAR(r.offset_s, off, 0.5 / fps, "offset within half a frame");
    CHECK(r.confidence > 0.3, "confidence %g", r.confidence);
    /* f R = 3.26 against the thermal model's ~3.2-3.3: sizes agree within about 2% */
    CHECK(fabs(r.mean_rel) < 0.03 && r.median_abs_rel < 0.03, "agreement: mean rel %g, median |rel| %g",
          r.mean_rel, r.median_abs_rel);
    CHECK(!r.reused_pings, "first run cannot reuse pings");
    rc = sp_crosscheck(dir, wav, &s, &r, &err);
    CHECK(rc == 0 && r.reused_pings && r.pairs == NB, "second run: rc %d reused %d", rc, r.reused_pings);
    snprintf(p, sizeof p, "%s/pairs.csv", dir);
    f = fopen(p, "r");
    char line[512] = "";
    CHECK(f && fgets(line, sizeof line, f) &&
              !strncmp(line, "track,t_video_s,t_audio_s,d_optical_mm,d_acoustic_mm,", 53),
          "pairs.csv header: %s", line);
    if (f)
        fclose(f);
    snprintf(p, sizeof p, "%s/summary.json", dir);
    f = fopen(p, "r");
    char js[8192] = "";
    size_t got = f ? fread(js, 1, sizeof js - 1, f) : 0;
    js[got] = 0;
    if (f)
        fclose(f);
    CHECK(strstr(js, "\"frames\": 1500") && strstr(js, "\"crosscheck\"") && strstr(js, "\"loa_lower_mm\""),
          "summary.json keeps its keys and gains the cross-check");

    /* Bad run directories: one line naming the file. */
    snprintf(p, sizeof p, "%s/tracks.csv", dir);
    f = fopen(p, "w");
    fprintf(f, "track,frame_first,n,d_vol_mm\n2,5,10,1.0\n");
    fclose(f);
    rc = sp_crosscheck(dir, wav, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "tracks.csv") && strstr(err.msg, "t_first_s"),
          "missing column: %s", err.msg);
    f = fopen(p, "w");
    fprintf(f, "track,frame_first,n,d_vol_mm,t_first_s\n2,abc,10,1.0,0.1\n");
    fclose(f);
    rc = sp_crosscheck(dir, wav, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "line 2"), "bad number: %s", err.msg);
    f = fopen(p, "w");
    fprintf(f, "track,frame_first,n,d_vol_mm,t_first_s\n1,0,10,1.0,0.0\n");
    fclose(f);
    rc = sp_crosscheck(dir, wav, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "born inside"), "no births: %s", err.msg);
    snprintf(p, sizeof p, "%s/summary.json", dir);
    unlink(p);
    rc = sp_crosscheck(dir, wav, &s, &r, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "summary.json"), "no summary: %s", err.msg);
    CHECK(!strchr(err.msg, '\n'), "one line");
    char cmd[700];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    CHECK(system(cmd) == 0, "cleanup");
}

int main(void)
{
    test_align();
    test_job();
    return check_report();
}

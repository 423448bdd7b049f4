/* probe_acoustic_fit FILE.f32 FS FMIN FMAX [SEGMENT]
 * FILE holds consecutive segments of SEGMENT (default: the whole file) little-endian float32
 * samples; prints "f_hz beta_s amp phase_rad r2" per segment from sp_ring_fit. */
#include "acoustic/estimate.h"

#include <stdio.h>
#include <stdlib.h>

int main(int argc, char **argv)
{
    if (argc < 5) {
        fprintf(stderr, "usage: probe_acoustic_fit FILE.f32 FS FMIN FMAX [SEGMENT]\n");
        return 2;
    }
    FILE *f = fopen(argv[1], "rb");
    if (!f) {
        fprintf(stderr, "%s: cannot open\n", argv[1]);
        return 2;
    }
    double fs = atof(argv[2]), lo = atof(argv[3]), hi = atof(argv[4]);
    int seg = argc > 5 ? atoi(argv[5]) : SP_FIT_MAX_SAMPLES;
    if (seg < 1 || seg > SP_FIT_MAX_SAMPLES) {
        fclose(f);
        return 2;
    }
    float *x = malloc(sizeof(float) * (size_t)seg);
    int rc = 0;
    size_t n;
    while (x && (n = fread(x, sizeof(float), (size_t)seg, f)) > 0) {
        sp_ring r;
        sp_error err = {0};
        if ((rc = sp_ring_fit(x, (int)n, fs, lo, hi, &r, &err))) {
            fprintf(stderr, "%s\n", err.msg);
            break;
        }
        printf("%.9g %.9g %.9g %.9g %.9g\n", r.f_hz, r.beta_s, r.amp, r.phase_rad, r.r2);
    }
    free(x);
    fclose(f);
    return rc;
}

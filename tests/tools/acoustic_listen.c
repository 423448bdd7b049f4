/* probe_acoustic_listen AUDIO OUTDIR [--channel N] [--depth M] [--rmin MM] [--rmax MM]
 *                       [--model minnaert|devin|thermal] [--rejected]
 * Runs sp_listen; prints the report counts on stdout. On error: the message on stderr, its code as
 * exit status. */
#include "acoustic/listen.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: probe_acoustic_listen AUDIO OUTDIR [options]\n");
        return 2;
    }
    sp_listen_settings s;
    sp_listen_settings_default(&s);
    for (int i = 3; i < argc; i++) {
        const char *a = argv[i];
        if (!strcmp(a, "--rejected")) {
            s.write_rejected = 1;
            continue;
        }
        if (i + 1 >= argc) {
            fprintf(stderr, "option %s needs a value\n", a);
            return 2;
        }
        const char *v = argv[++i];
        if (!strcmp(a, "--channel"))
            s.channel = atoi(v);
        else if (!strcmp(a, "--depth"))
            s.medium.depth_m = atof(v);
        else if (!strcmp(a, "--rmin"))
            s.r_min_mm = atof(v);
        else if (!strcmp(a, "--rmax"))
            s.r_max_mm = atof(v);
        else if (!strcmp(a, "--model"))
            s.medium.model = !strcmp(v, "minnaert") ? SP_MINNAERT_PLAIN
                             : !strcmp(v, "devin")  ? SP_MINNAERT_DEVIN
                                                    : SP_MINNAERT_THERMAL;
        else {
            fprintf(stderr, "unknown option %s\n", a);
            return 2;
        }
    }
    sp_listen_report r;
    sp_error err = {0};
    int rc = sp_listen(argv[1], argv[2], &s, &r, &err);
    if (rc) {
        fprintf(stderr, "%s\n", err.msg);
        return rc;
    }
    printf("rate %d samples %lld band %.1f %.1f candidates %lld pings %lld click %lld overlap %lld band %lld "
           "fit %lld\n",
           r.sample_rate, (long long)r.samples, r.f_lo_hz, r.f_hi_hz, (long long)r.candidates,
           (long long)r.pings, (long long)r.rejected[1], (long long)r.rejected[2], (long long)r.rejected[3],
           (long long)r.rejected[4]);
    return 0;
}

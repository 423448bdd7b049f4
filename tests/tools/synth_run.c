/* probe_synth_run SCENARIO DIR [--bytes N] [--bits N] [--seed N] [--frames N] [--size WxH]
 *                 [--threads N] [--no-png] [--no-video]
 * Drives sp_synth_run for the reference tests until the command-line tool wraps it. */
#include "synth/synth.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: %s SCENARIO DIR [options]\n", argv[0]);
        return 2;
    }
    sp_synth_opts o;
    sp_synth_opts_default(&o);
    for (int i = 3; i < argc; i++) {
        const char *a = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
        if (!strcmp(a, "--no-png"))
            o.png = 0;
        else if (!strcmp(a, "--no-video"))
            o.video = 0;
        else if (v && !strcmp(a, "--bytes"))
            o.bytes = atoi(v), i++;
        else if (v && !strcmp(a, "--bits"))
            o.bits = atoi(v), i++;
        else if (v && !strcmp(a, "--seed"))
            o.seed = strtoull(v, NULL, 10), i++;
        else if (v && !strcmp(a, "--frames"))
            o.frames = atoi(v), i++;
        else if (v && !strcmp(a, "--threads"))
            o.threads = atoi(v), i++;
        else if (v && !strcmp(a, "--size") && sscanf(v, "%dx%d", &o.width, &o.height) == 2)
            i++;
        else {
            fprintf(stderr, "%s: unknown option %s\n", argv[0], a);
            return 2;
        }
    }
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_synth_run(argv[1], argv[2], &o, &err);
    if (rc) {
        fprintf(stderr, "%s\n", err.msg);
        return rc;
    }
    return 0;
}

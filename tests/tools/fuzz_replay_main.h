/* Shared main of the fuzz replay probes: read each file whole and hand it to the chosen target. */
#ifndef SP_FUZZ_REPLAY_MAIN_H
#define SP_FUZZ_REPLAY_MAIN_H

#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct replay_target {
    const char *name;
    int (*run)(const uint8_t *data, size_t size);
} replay_target;

static int replay_main(int argc, char **argv, const replay_target *t, size_t nt)
{
    if (argc < 3) {
        fprintf(stderr, "usage: %s TARGET FILE...\n", argv[0]);
        return 2;
    }
    const replay_target *pick = NULL;
    for (size_t i = 0; i < nt; i++)
        if (!strcmp(argv[1], t[i].name))
            pick = &t[i];
    if (!pick) {
        fprintf(stderr, "%s: unknown target %s\n", argv[0], argv[1]);
        return 2;
    }
    for (int a = 2; a < argc; a++) {
        FILE *fp = fopen(argv[a], "rb");
        if (!fp) {
            fprintf(stderr, "%s: cannot open\n", argv[a]);
            return 2;
        }
        uint8_t *buf = NULL;
        size_t len = 0, cap = 0;
        for (;;) {
            if (len == cap) {
                cap = cap ? 2 * cap : 65536;
                uint8_t *nb = realloc(buf, cap);
                if (!nb) {
                    free(buf);
                    fclose(fp);
                    fprintf(stderr, "%s: out of memory\n", argv[a]);
                    return 1;
                }
                buf = nb;
            }
            size_t n = fread(buf + len, 1, cap - len, fp);
            len += n;
            if (n == 0)
                break;
        }
        fclose(fp);
        pick->run(buf, len);
        free(buf);
        printf("ok %s %s\n", pick->name, argv[a]);
    }
    /* The targets' temporary files are per process; remove them. */
    for (int slot = 0; slot < 8; slot++) {
        static const char *suffix[8] = {".png", ".jpg", ".img", ".vid", ".aud", ".json", ".json", ""};
        char p[512];
        const char *dir = getenv("TMPDIR");
        snprintf(p, sizeof p, "%s/spume-fuzz-%ld-%d%s", dir && *dir ? dir : "/tmp", (long)getpid(), slot,
                 suffix[slot]);
        remove(p);
    }
    return 0;
}

#endif

/* probe_acoustic_audio FILE [--channel N] [--dump OUT.f32] [--block N]
 * Reads FILE through sp_audio in blocks; prints "rate R channels C samples N codec X container Y";
 * --dump writes the delivered float32 samples. On error: message on stderr, code as exit status. */
#include "io/audio.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: probe_acoustic_audio FILE [--channel N] [--dump OUT] [--block N]\n");
        return 2;
    }
    int channel = 0, block = 1000;
    const char *dump = NULL;
    for (int i = 2; i + 1 < argc; i += 2) {
        if (!strcmp(argv[i], "--channel"))
            channel = atoi(argv[i + 1]);
        else if (!strcmp(argv[i], "--dump"))
            dump = argv[i + 1];
        else if (!strcmp(argv[i], "--block"))
            block = atoi(argv[i + 1]);
    }
    if (block < 1 || block > 1 << 20)
        return 2;
    sp_error err = {0};
    sp_audio *a = NULL;
    FILE *out = NULL;
    float *buf = malloc(sizeof(float) * (size_t)block);
    int rc = sp_audio_open(&a, argv[1], channel, &err);
    if (!rc && dump && !(out = fopen(dump, "wb")))
        rc = 2;
    while (!rc) {
        int got = 0;
        if ((rc = sp_audio_read(a, buf, block, &got, &err)) || got == 0)
            break;
        if (out)
            fwrite(buf, sizeof(float), (size_t)got, out);
    }
    if (rc) {
        fprintf(stderr, "%s\n", err.msg);
    } else {
        const sp_audio_info *in = sp_audio_get_info(a);
        printf("rate %d channels %d samples %lld announced %lld codec %s container %s\n", in->sample_rate,
               in->channels, (long long)sp_audio_position(a), (long long)in->samples_total, in->codec,
               in->container);
    }
    if (out)
        fclose(out);
    sp_audio_close(a);
    free(buf);
    return rc;
}

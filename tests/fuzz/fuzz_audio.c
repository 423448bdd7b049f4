/* libFuzzer target: audio input (src/io/audio.h): open, then read a bounded number of blocks of the
 * mixed channel (or channel 0, chosen by the first byte). */
#include "fuzz_common.h"
#include "io/audio.h"

#include <math.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzz_tmp_path(4, ".aud");
    fuzz_write_file(path, data, size);
    int channel = (size && (data[0] & 1)) ? 0 : SP_AUDIO_MIX;
    sp_audio *a = NULL;
    sp_error err;
    sp_error_clear(&err);
    static float buf[4096];
    int rc = sp_audio_open(&a, path, channel, &err);
    fuzz_check_status(rc, &err, path);
    if (rc == SP_OK) {
        const sp_audio_info *in = sp_audio_get_info(a);
        if (in->sample_rate < 1 || in->sample_rate > SP_AUDIO_MAX_RATE || in->channels < 1 ||
            in->channels > SP_AUDIO_MAX_CHANNELS) {
            fprintf(stderr, "contract: rate %d channels %d\n", in->sample_rate, in->channels);
            abort();
        }
    }
    for (int i = 0; rc == SP_OK && i < 64; i++) {
        int got = 0;
        rc = sp_audio_read(a, buf, (int)(sizeof buf / sizeof buf[0]), &got, &err);
        fuzz_check_status(rc, &err, path);
        if (rc || !got)
            break;
        if (got < 0 || got > (int)(sizeof buf / sizeof buf[0])) {
            fprintf(stderr, "contract: read gave %d samples\n", got);
            abort();
        }
        for (int j = 0; j < got; j++)
            if (!isfinite(buf[j]) || buf[j] < -1.0001f || buf[j] > 1.0001f) {
                /* Float formats may carry any value; only NaN/inf would poison the fit. */
                if (!isfinite(buf[j])) {
                    fprintf(stderr, "contract: sample %d is %g\n", j, buf[j]);
                    abort();
                }
            }
    }
    sp_audio_close(a);
    return 0;
}

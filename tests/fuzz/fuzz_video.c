/* libFuzzer target: the frame source on a video file (src/spume.h sp_source_*: libavformat demux,
 * libavcodec decode, grey conversion, selection and ROI). At most a few frames are read per input so
 * each run stays short; the selection and crop come from the input's last byte, so they are fuzzed
 * too. */
#include "fuzz_common.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzz_tmp_path(3, ".vid");
    if (size == 0)
        return 0;
    fuzz_write_file(path, data, size);
    uint8_t k = data[size - 1];
    sp_source_opts o;
    sp_source_opts_default(&o);
    o.start = k & 3;
    o.step = 1 + ((k >> 2) & 3);
    o.count = 4;
    if (k & 0x10) {
        o.roi.x = 1;
        o.roi.y = 2;
        o.roi.w = 8 + (k >> 5);
        o.roi.h = 6;
    }
    sp_source *src = NULL;
    sp_image img = {0};
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_source_open(&src, path, &o, &err);
    fuzz_check_status(rc, &err, path);
    for (int i = 0; rc == SP_OK && i < 6; i++) {
        int64_t index = 0;
        double t = 0;
        int got = 0;
        rc = sp_source_next(src, &img, &index, &t, &got, &err);
        fuzz_check_status(rc, &err, path);
        if (rc || !got)
            break;
        fuzz_check_image(&img);
        const sp_source_info *in = sp_source_get_info(src);
        if (img.width != in->width || img.height != in->height) {
            fprintf(stderr, "contract: frame %dx%d, info says %dx%d\n", img.width, img.height, in->width,
                    in->height);
            abort();
        }
    }
    sp_source_close(src);
    sp_image_free(&img);
    return 0;
}

/* libFuzzer target: TIFF, BMP and PNM stills decoded by libavcodec (src/io/ffimage.h), after the
 * same content sniffing the frame source does. */
#include "fuzz_common.h"
#include "io/ffimage.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzz_tmp_path(2, ".img");
    fuzz_write_file(path, data, size);
    (void)sp_ffimage_sniff(data, size < 16 ? size : 16);
    sp_image img = {0};
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_ffimage_read(path, &img, &err);
    fuzz_check_status(rc, &err, path);
    if (rc == SP_OK)
        fuzz_check_image(&img);
    sp_image_free(&img);
    return 0;
}

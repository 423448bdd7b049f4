/* libFuzzer target: PNG still frames (src/io/png.h). */
#include "fuzz_common.h"
#include "io/png.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzz_tmp_path(0, ".png");
    fuzz_write_file(path, data, size);
    sp_image img = {0};
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_png_read(path, &img, &err);
    fuzz_check_status(rc, &err, path);
    if (rc == SP_OK)
        fuzz_check_image(&img);
    sp_image_free(&img);
    return 0;
}

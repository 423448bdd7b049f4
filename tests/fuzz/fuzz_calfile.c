/* libFuzzer target: calibration files (src/calib/calfile.h), JSON read by `measure --calib`. */
#include "fuzz_common.h"
#include "calib/calfile.h"

#include <math.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzz_tmp_path(5, ".json");
    fuzz_write_file(path, data, size);
    sp_calib_result r;
    memset(&r, 0, sizeof r);
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_calfile_read(path, &r, &err);
    fuzz_check_status(rc, &err, path);
    if (rc == SP_OK && !(r.mm_per_px > 0 && r.mm_per_px <= 1000 && isfinite(r.mm_per_px))) {
        fprintf(stderr, "contract: accepted mm_per_px %g\n", r.mm_per_px);
        abort();
    }
    return 0;
}

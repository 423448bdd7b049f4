/* libFuzzer target: liquid preset files (src/physics/liquid.h). An accepted preset must pass the
 * library's own plausibility check. The first byte picks whether a temperature is given. */
#include "fuzz_common.h"
#include "physics/liquid.h"

#include <math.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzz_tmp_path(6, ".json");
    fuzz_write_file(path, data, size);
    double temp_c = (size && (data[0] & 1)) ? 35.0 : NAN;
    sp_liquid l;
    memset(&l, 0, sizeof l);
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_liquid_preset(path, temp_c, &l, &err);
    fuzz_check_status(rc, &err, path);
    if (rc == SP_OK) {
        sp_error e2;
        sp_error_clear(&e2);
        if (sp_liquid_check(&l, path, &e2) != SP_OK || !memchr(l.name, 0, sizeof l.name)) {
            fprintf(stderr, "contract: accepted preset fails its own check: %s\n", e2.msg);
            abort();
        }
    }
    return 0;
}

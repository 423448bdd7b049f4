/* probe_calib_fuzz_replay calfile FILE...
 * Runs the libFuzzer target tests/fuzz/fuzz_calfile.c (compiled here without libFuzzer) on each
 * FILE; see acoustic_fuzz_replay.c. Lives in the calib layer because it links the calibration
 * reader. */
#define LLVMFuzzerTestOneInput fuzz_calfile_one
#include "../fuzz/fuzz_calfile.c"
#undef LLVMFuzzerTestOneInput

#include "fuzz_replay_main.h"

static const replay_target targets[] = {{"calfile", fuzz_calfile_one}};

int main(int argc, char **argv)
{
    return replay_main(argc, argv, targets, sizeof targets / sizeof targets[0]);
}

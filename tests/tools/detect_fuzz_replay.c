/* probe_detect_fuzz_replay detect FILE...
 * Runs the libFuzzer target tests/fuzz/fuzz_detect.c (compiled here without libFuzzer) on each FILE:
 * the detection chain on the frame the file describes, planned and plain passes compared bit for
 * bit; see acoustic_fuzz_replay.c. Lives in the detect layer because it links the detector. */
#define LLVMFuzzerTestOneInput fuzz_detect_one
#include "../fuzz/fuzz_detect.c"
#undef LLVMFuzzerTestOneInput

#include "fuzz_replay_main.h"

static const replay_target targets[] = {{"detect", fuzz_detect_one}};

int main(int argc, char **argv)
{
    return replay_main(argc, argv, targets, sizeof targets / sizeof targets[0]);
}

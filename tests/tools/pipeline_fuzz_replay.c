/* probe_pipeline_fuzz_replay checkpoint FILE...
 * Runs the libFuzzer target tests/fuzz/fuzz_checkpoint.c (compiled here without libFuzzer) on each
 * FILE: the first byte picks the resume file replaced and the checksum rule, the rest is its content;
 * see the target. Exit 0 when every file was handled within the error contract. With
 * SPUME_FUZZ_DUMP_SEEDS=DIR the first FILE (an empty one will do) also writes the target's seeds into
 * DIR. Lives in the pipeline layer because it runs sp_measure. */
#define LLVMFuzzerTestOneInput fuzz_checkpoint_one
#include "../fuzz/fuzz_checkpoint.c"
#undef LLVMFuzzerTestOneInput

#include "fuzz_replay_main.h"

static const replay_target targets[] = {{"checkpoint", fuzz_checkpoint_one}};

int main(int argc, char **argv)
{
    return replay_main(argc, argv, targets, sizeof targets / sizeof targets[0]);
}

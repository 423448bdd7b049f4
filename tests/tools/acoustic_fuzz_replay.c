/* probe_acoustic_fuzz_replay TARGET FILE...
 * Runs the libFuzzer target TARGET (png, jpeg, ffimage, video, audio, liquid; tests/fuzz/fuzz_*.c,
 * compiled here without libFuzzer) on each FILE, as the fuzzer would. Exit 0 when every file was
 * handled within the error contract; a contract breach aborts and a memory error crashes (caught by
 * the sanitizer build). Lives in the acoustic layer because it links io and physics. */
#define LLVMFuzzerTestOneInput fuzz_png_one
#include "../fuzz/fuzz_png.c"
#undef LLVMFuzzerTestOneInput
#define LLVMFuzzerTestOneInput fuzz_jpeg_one
#include "../fuzz/fuzz_jpeg.c"
#undef LLVMFuzzerTestOneInput
#define LLVMFuzzerTestOneInput fuzz_ffimage_one
#include "../fuzz/fuzz_ffimage.c"
#undef LLVMFuzzerTestOneInput
#define LLVMFuzzerTestOneInput fuzz_video_one
#include "../fuzz/fuzz_video.c"
#undef LLVMFuzzerTestOneInput
#define LLVMFuzzerTestOneInput fuzz_audio_one
#include "../fuzz/fuzz_audio.c"
#undef LLVMFuzzerTestOneInput
#define LLVMFuzzerTestOneInput fuzz_liquid_one
#include "../fuzz/fuzz_liquid.c"
#undef LLVMFuzzerTestOneInput

#include "fuzz_replay_main.h"

static const replay_target targets[] = {
    {"png", fuzz_png_one},     {"jpeg", fuzz_jpeg_one},   {"ffimage", fuzz_ffimage_one},
    {"video", fuzz_video_one}, {"audio", fuzz_audio_one}, {"liquid", fuzz_liquid_one},
};

int main(int argc, char **argv)
{
    return replay_main(argc, argv, targets, sizeof targets / sizeof targets[0]);
}

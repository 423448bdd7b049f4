/* The paired sound of a synthetic scene: one ping per detaching bubble at its natural frequency,
 * decaying at the damping the REFERENCES model gives, over background noise and mains hum, with a
 * few non-bubble clicks, on a clock offset from the video's. Internal to the synth layer. */
#ifndef SP_SYNTH_AUDIO_H
#define SP_SYNTH_AUDIO_H

#include "synth/scenes.h"

/* Natural frequency (Hz) of an air bubble of radius r_m in water at 20 C, depth_m below the
 * surface: Minnaert (1933) with the surface-tension term of Devin (1959) and the effective
 * polytropic exponent of Prosperetti (1977), solved here on its own (a fixed point in omega), so the
 * truth does not come from the code it checks. 0 for a non-positive radius. */
double synth_minnaert_hz(double r_m, double depth_m);

/* Total damping constant delta (= 1/Q) of a bubble of radius r_mm: the REFERENCES.md model values
 * (0.1 mm 0.0845, 0.5 mm 0.0490, 1 mm 0.0394, 2 mm 0.0322) interpolated linearly in log R, held
 * constant beyond the ends. Amplitude decays as exp(-pi f delta t). */
double synth_damping(double r_mm);

/* Write dir/audio.wav (16-bit PCM mono at sc->audio_rate), dir/truth_pings.csv and
 * dir/truth_clicks.csv for a scene with pings, each under a temporary name renamed when complete.
 * Deterministic for a seed; memory bounded by one block of samples plus the event lists. */
int synth_audio_write(const synth_scene *sc, uint64_t seed, const char *dir, sp_error *err);

#endif

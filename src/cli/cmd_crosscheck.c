/* spume crosscheck: acoustic against optical sizes of a measured run. */
#include "acoustic/crosscheck.h"
#include "cli/args.h"
#include "cli/commands.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

static const char CROSSCHECK_HELP[] =
    "usage: spume crosscheck DIR --audio AUDIO [options]\n"
    "\n"
    "DIR is the output of 'spume measure' (tracks.csv, bubbles.csv, summary.json). Finds the bubble\n"
    "pings in AUDIO (or reuses DIR/pings.csv when it was made from the same file and settings), finds\n"
    "the offset between the audio and video clocks by aligning the pings with the tracks born in\n"
    "view, pairs each ping with one track, writes DIR/pairs.csv and adds the agreement (offset,\n"
    "confidence, mean difference, limits of agreement) to DIR/summary.json under \"crosscheck\".\n"
    "\n"
    "  --audio AUDIO       the recording: WAV, FLAC, or a video file's audio stream (required)\n"
    "Ping detection (as 'spume listen')\n"
    "  --depth M           depth of the bubbles below the free surface, metres (default 0)\n"
    "  --temp C            liquid temperature, recorded (default 20)\n"
    "  --rmin MM           smallest radius sought (default 0.2)\n"
    "  --rmax MM           largest radius sought (default 5)\n"
    "  --channel N         channel analysed, from 0, or 'mix' for the mean (default 0)\n"
    "  --relisten          detect the pings again even when DIR/pings.csv could be reused\n"
    "Alignment and pairing\n"
    "  --max-lag S         clock offsets searched within -S..S seconds (default 10)\n"
    "  --tol S             pairing tolerance in seconds (default 1.5 frame periods + 2 ms)\n"
    "  --min-n N           tracks with fewer detections are not births (default 3)\n"
    "  --quiet             no summary on stderr\n";

int cmd_crosscheck(int argc, char **argv)
{
    const char *cmd = "crosscheck", *dir = NULL, *audio = NULL;
    sp_crosscheck_settings s;
    sp_crosscheck_settings_default(&s);
    int quiet = 0;
    for (int i = 0; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        double d;
        long long n;
        if (!strcmp(a, "--help") || !strcmp(a, "-h")) {
            fputs(CROSSCHECK_HELP, stdout);
            return 0;
        }
        int takes = !strcmp(a, "--audio") || !strcmp(a, "--depth") || !strcmp(a, "--temp") ||
                    !strcmp(a, "--rmin") || !strcmp(a, "--rmax") || !strcmp(a, "--channel") ||
                    !strcmp(a, "--max-lag") || !strcmp(a, "--tol") || !strcmp(a, "--min-n");
        if (takes && !v)
            return usage_error(cmd, "%s needs a value", a);
        if (takes)
            i++;
        if (!strcmp(a, "--audio")) {
            audio = v;
        } else if (!strcmp(a, "--depth")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 0 && d <= 11000))
                return usage_error(cmd, "--depth takes metres in 0..11000, not '%s'", v);
            s.listen.medium.depth_m = d;
        } else if (!strcmp(a, "--temp")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > -5 && d < 100))
                return usage_error(cmd, "--temp takes degrees C in -5..100, not '%s'", v);
            s.listen.temp_c = d;
        } else if (!strcmp(a, "--rmin") || !strcmp(a, "--rmax")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d <= 100))
                return usage_error(cmd, "radii are millimetres in (0, 100], not '%s'", v);
            *(!strcmp(a, "--rmin") ? &s.listen.r_min_mm : &s.listen.r_max_mm) = d;
        } else if (!strcmp(a, "--channel")) {
            if (!strcmp(v, "mix")) {
                s.listen.channel = -1;
            } else {
                if (parse_int(cmd, a, v, 0, 63, &n))
                    return 2;
                s.listen.channel = (int)n;
            }
        } else if (!strcmp(a, "--max-lag") || !strcmp(a, "--tol")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d <= 86400))
                return usage_error(cmd, "%s takes positive seconds up to a day", a);
            *(!strcmp(a, "--tol") ? &s.tol_s : &s.max_lag_s) = d;
        } else if (!strcmp(a, "--min-n")) {
            if (parse_int(cmd, a, v, 1, 1000000, &n))
                return 2;
            s.min_n = (int)n;
        } else if (!strcmp(a, "--relisten")) {
            s.relisten = 1;
        } else if (!strcmp(a, "--quiet") || !strcmp(a, "-q")) {
            quiet = 1;
        } else if (a[0] == '-' && a[1]) {
            return usage_error(cmd, "unknown option %s", a);
        } else if (!dir) {
            dir = a;
        } else {
            return usage_error(cmd, "one run directory only; '%s' is extra", a);
        }
    }
    if (!dir)
        return usage_error(cmd, "%s", "no run directory given");
    if (!audio)
        return usage_error(cmd, "%s", "--audio AUDIO is required");
    if (!(s.listen.r_max_mm > s.listen.r_min_mm))
        return usage_error(cmd, "%s", "--rmax must exceed --rmin");
    sp_error err;
    sp_error_clear(&err);
    sp_crosscheck_report r;
    int rc = sp_crosscheck(dir, audio, &s, &r, &err);
    if (rc) {
        fprintf(stderr, "spume crosscheck: %s\n", err.msg);
        return rc == SP_ERR_INPUT ? 2 : 1;
    }
    if (!quiet) {
        fprintf(
            stderr,
            "crosscheck: %lld pings%s, %lld births; clock offset %.4f s (+- %.4f s, confidence %.2f: %.0f "
            "coincidences against %.0f); %lld pairs (%.0f%%)\n",
            (long long)r.pings, r.reused_pings ? " (reused)" : "", (long long)r.births, r.offset_s,
            r.offset_se_s, r.confidence, r.peak, r.peak2, (long long)r.pairs, 100.0 * r.matched_frac);
        if (r.n_diff > 1)
            fprintf(stderr,
                    "crosscheck: acoustic - optical diameter: mean %+.3f mm, limits of agreement %+.3f .. "
                    "%+.3f mm "
                    "(%+.1f%% .. %+.1f%%); median |difference| %.1f%%\n",
                    r.mean_diff_mm, r.loa_lo_mm, r.loa_hi_mm, 100 * r.loa_rel_lo, 100 * r.loa_rel_hi,
                    100 * r.median_abs_rel);
    }
    return 0;
}

/* spume command line: parses arguments, calls the library, prints. Nothing else lives here. */
#include "spume.h"
#include "cli/args.h"
#include "cli/commands.h"
#include "synth/synth.h"

#include <errno.h>
#include <signal.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

static const char USAGE[] =
    "usage: spume COMMAND ...\n"
    "\n"
    "  spume measure INPUT --out DIR [options]   detect and measure bubbles in every frame\n"
    "  spume synth SCENARIO --out DIR [options]  render a shadowgraph scene with known truth\n"
    "  spume listen AUDIO --out DIR [options]    find bubble pings in a sound recording, size them\n"
    "  spume crosscheck DIR --audio AUDIO        compare acoustic with optical sizes of a measured run\n"
    "  spume calibrate IMAGE --pitch-mm P --out FILE   scale from an image of a dot-grid target\n"
    "  spume report DIR                          rebuild the plots and report.html of a measured run\n"
    "  spume version                             print the version\n"
    "  spume help [COMMAND]                      this text, or a command's options\n"
    "\n"
    "INPUT is a video file, a directory of numbered still frames, or a printf pattern such as\n"
    "frames/f%05d.png. See docs/usage.md for every option.\n";

static const char MEASURE_HELP[] =
    "usage: spume measure INPUT --out DIR [options]\n"
    "\n"
    "Frames\n"
    "  --fps F             frame rate (required for still frames; overrides a video's own)\n"
    "  --start N           first frame to analyse (default 0)\n"
    "  --count N           analyse at most N frames (default all)\n"
    "  --step N            analyse every N-th frame (default 1)\n"
    "  --roi X,Y,W,H       region of interest in pixels (default the whole frame)\n"
    "Scale\n"
    "  --scale MM_PER_PX   millimetres per pixel (without it the mm columns hold pixels)\n"
    "  --calib FILE        the scale from a calibration file written by 'spume calibrate'\n"
    "Background (the light with no bubble in front of it)\n"
    "  --background FILE   an image of the empty field instead of an estimate from the frames\n"
    "  --bg-frames N       frames sampled for the estimate (default 40, at most 255)\n"
    "  --bg-percentile P   per-pixel percentile of the samples (default 50)\n"
    "  --bg-segments K     K estimates along the run, interpolated in time (default 1)\n"
    "Detection\n"
    "  --threshold T|otsu  transmission below which a pixel is bubble (default 0.7), or Otsu per frame\n"
    "  --no-flicker        do not compensate each frame's overall light level\n"
    "  --no-fill           do not fill the bright refraction spot\n"
    "  --min-diam-px D     drop bubbles smaller than D px (default 3)\n"
    "  --max-diam-px D     drop bubbles larger than D px (default no limit)\n"
    "  --fit-min-px D      sub-pixel edge fit from D px up (default 8)\n"
    "  --edge-level F      edge where transmission crosses F of the local step (default 0.5)\n"
    "  --min-sharpness S   in-focus band: outline sharpness at least S per px (default 0.47)\n"
    "  --keep-defocused    count out-of-focus tracks in the size statistics\n"
    "  --no-split          do not split clusters of overlapping bubbles\n"
    "  --no-still-guard    let still dark objects become part of the estimated background\n"
    "  --still-level F     the still guard's darkness level (default 0.5)\n"
    "Tracks, liquid and statistics\n"
    "  --no-track          do not link bubbles into tracks (no tracks.csv, sites.csv)\n"
    "  --max-gap N         frames in a row a track may miss and still continue (default 3)\n"
    "  --liquid NAME|FILE  liquid preset (water, seawater, carbonated) or JSON file (default water)\n"
    "  --temp C            liquid temperature in degrees Celsius (default 20)\n"
    "  --liquid-set K=V    override one liquid property, e.g. sigma_n_m=0.050 (repeatable)\n"
    "  --depth-m M         depth of the bubbles below the free surface (default 0)\n"
    "  --illum-depth-mm L  depth of the illuminated volume: gives volume holdup and interfacial area\n"
    "  --boot N            bootstrap replicates for confidence intervals (default 1000, 0 = none)\n"
    "  --bins N            size histogram bins (default 20)\n"
    "  --bins-log          log-spaced histogram bins\n"
    "  --bin-range LO,HI   histogram range in mm (default: the data's)\n"
    "Report\n"
    "  --no-report         do not write report.html and the overlay thumbnails\n"
    "  --overlay-video     also write overlay.mkv, every frame annotated\n"
    "Running\n"
    "  --threads N         worker threads (default all cores)\n"
    "  --resume            go on with the interrupted run in DIR (same INPUT and options) and finish it\n"
    "  --quiet             no progress or summary on stderr\n"
    "  --json              print summary.json on stdout when done\n";

static const char SYNTH_HELP[] =
    "usage: spume synth SCENARIO --out DIR [options]\n"
    "\n"
    "  --bytes 1|2         8-bit (default) or 16-bit frames\n"
    "  --bits N            significant bits of 16-bit frames (e.g. 12 for a 12-bit camera)\n"
    "  --frames N          number of frames (default: the scenario's)\n"
    "  --size WxH          frame size (default: the scenario's)\n"
    "  --seed N            random seed (default fixed, so runs repeat)\n"
    "  --no-png            do not write the PNG frames\n"
    "  --no-video          do not write the FFV1 video\n"
    "  --threads N         worker threads (default all cores)\n"
    "  --quiet             no progress on stderr\n";

/* Set by SIGINT/SIGTERM during measure: the one piece of global state in the program, as a signal
 * handler can reach nothing else. The run polls it between batches of frames. */
static volatile sig_atomic_t interrupted;
static volatile int stop_request;

static void on_signal(int sig)
{
    (void)sig;
    interrupted = 1;
    stop_request = 1;
}

int cmd_measure(int argc, char **argv)
{
    const char *cmd = "measure", *input = NULL, *out = NULL;
    sp_measure_settings s;
    sp_measure_settings_default(&s);
    int quiet = 0, json = 0;
    enum { MAX_SET = 32 };
    const char *liquid_set[MAX_SET];
    for (int i = 0; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        long long n;
        double d;
#define NEED_VALUE()                                                                                         \
    do {                                                                                                     \
        if (!v)                                                                                              \
            return usage_error(cmd, "%s needs a value", a);                                                  \
        i++;                                                                                                 \
    } while (0)
        if (!strcmp(a, "--help") || !strcmp(a, "-h")) {
            fputs(MEASURE_HELP, stdout);
            return 0;
        } else if (!strcmp(a, "--out")) {
            NEED_VALUE();
            out = v;
        } else if (!strcmp(a, "--fps")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d < 1e8))
                return usage_error(cmd, "--fps must be positive, not '%s'", v);
            s.source.fps = d;
        } else if (!strcmp(a, "--scale")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d < 1e6))
                return usage_error(cmd, "--scale must be positive, not '%s'", v);
            s.mm_per_px = d;
        } else if (!strcmp(a, "--start")) {
            NEED_VALUE();
            if (parse_int(cmd, a, v, 0, INT64_MAX / 4, &n))
                return 2;
            s.source.start = n;
        } else if (!strcmp(a, "--count")) {
            NEED_VALUE();
            if (parse_int(cmd, a, v, 1, INT64_MAX / 4, &n))
                return 2;
            s.source.count = n;
        } else if (!strcmp(a, "--step")) {
            NEED_VALUE();
            if (parse_int(cmd, a, v, 1, 1000000, &n))
                return 2;
            s.source.step = n;
        } else if (!strcmp(a, "--roi")) {
            NEED_VALUE();
            int x, y, w, h;
            char tail;
            if (sscanf(v, "%d,%d,%d,%d%c", &x, &y, &w, &h, &tail) != 4 || x < 0 || y < 0 || w < 1 || h < 1)
                return usage_error(cmd, "--roi wants X,Y,W,H in pixels with W,H >= 1, not '%s'", v);
            s.source.roi = (sp_roi){x, y, w, h};
        } else if (!strcmp(a, "--calib")) {
            NEED_VALUE();
            s.calib_file = v;
        } else if (!strcmp(a, "--min-sharpness")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 0 && d < 10))
                return usage_error(cmd, "--min-sharpness wants a value per px in 0..10, not '%s'", v);
            s.min_sharpness = d;
        } else if (!strcmp(a, "--keep-defocused")) {
            s.keep_defocused = 1;
        } else if (!strcmp(a, "--no-split")) {
            s.split = 0;
        } else if (!strcmp(a, "--no-still-guard")) {
            s.still_guard = 0;
        } else if (!strcmp(a, "--still-level")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d < 1))
                return usage_error(cmd, "--still-level must lie between 0 and 1, not '%s'", v);
            s.still_level = d;
        } else if (!strcmp(a, "--json")) {
            json = 1;
        } else if (!strcmp(a, "--no-report")) {
            s.report = 0;
        } else if (!strcmp(a, "--overlay-video")) {
            s.overlay_video = 1;
        } else if (!strcmp(a, "--no-track")) {
            s.track = 0;
        } else if (!strcmp(a, "--max-gap")) {
            NEED_VALUE();
            if (parse_int(cmd, a, v, 0, 1000, &n))
                return 2;
            s.max_gap = (int)n;
        } else if (!strcmp(a, "--liquid")) {
            NEED_VALUE();
            s.liquid = v;
        } else if (!strcmp(a, "--temp")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > -5 && d < 150))
                return usage_error(cmd, "--temp wants degrees Celsius of a liquid, not '%s'", v);
            s.temp_c = d;
        } else if (!strcmp(a, "--liquid-set")) {
            NEED_VALUE();
            if (s.nliquid_set >= MAX_SET)
                return usage_error(cmd, "--liquid-set given more than 32 times ('%s')", v);
            liquid_set[s.nliquid_set++] = v;
            s.liquid_set = liquid_set;
        } else if (!strcmp(a, "--depth-m")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 0 && d < 11000))
                return usage_error(cmd, "--depth-m wants metres below the surface, not '%s'", v);
            s.depth_m = d;
        } else if (!strcmp(a, "--illum-depth-mm")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d < 1e6))
                return usage_error(cmd, "--illum-depth-mm must be positive, not '%s'", v);
            s.illum_depth_mm = d;
        } else if (!strcmp(a, "--boot")) {
            NEED_VALUE();
            if (parse_int(cmd, a, v, 0, 1000000, &n))
                return 2;
            if (n > 0 && n < 10)
                return usage_error(cmd, "--boot wants 0 (none) or at least 10 replicates, not '%s'", v);
            s.boot = (int)n;
        } else if (!strcmp(a, "--bins")) {
            NEED_VALUE();
            if (parse_int(cmd, a, v, 1, 10000, &n))
                return 2;
            s.bins = (int)n;
        } else if (!strcmp(a, "--bins-log")) {
            s.bins_log = 1;
        } else if (!strcmp(a, "--bin-range")) {
            NEED_VALUE();
            double lo, hi;
            char tail;
            if (sscanf(v, "%lf,%lf%c", &lo, &hi, &tail) != 2 || !(lo >= 0) || !(hi > lo))
                return usage_error(cmd, "--bin-range wants LO,HI in mm with 0 <= LO < HI, not '%s'", v);
            s.bin_lo_mm = lo;
            s.bin_hi_mm = hi;
        } else if (!strcmp(a, "--background")) {
            NEED_VALUE();
            s.bg_image = v;
        } else if (!strcmp(a, "--bg-frames")) {
            NEED_VALUE();
            if (parse_int(cmd, a, v, 1, 255, &n))
                return 2;
            s.bg_frames = (int)n;
        } else if (!strcmp(a, "--bg-percentile")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 0 && d <= 100))
                return usage_error(cmd, "--bg-percentile must lie in 0..100, not '%s'", v);
            s.bg_percentile = d;
        } else if (!strcmp(a, "--bg-segments")) {
            NEED_VALUE();
            if (parse_int(cmd, a, v, 1, 1000, &n))
                return 2;
            s.bg_segments = (int)n;
        } else if (!strcmp(a, "--threshold")) {
            NEED_VALUE();
            if (!strcmp(v, "otsu")) {
                s.otsu = 1;
            } else {
                if (parse_double(cmd, a, v, &d))
                    return 2;
                if (!(d > 0 && d < 1))
                    return usage_error(cmd, "--threshold must lie between 0 and 1 (or be 'otsu'), not '%s'",
                                       v);
                s.threshold = d;
                s.otsu = 0;
            }
        } else if (!strcmp(a, "--no-flicker")) {
            s.flicker = 0;
        } else if (!strcmp(a, "--no-fill")) {
            s.fill = 0;
        } else if (!strcmp(a, "--min-diam-px") || !strcmp(a, "--max-diam-px") || !strcmp(a, "--fit-min-px")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 0 && d <= SP_MAX_DIM))
                return usage_error(cmd, "size options take pixels in 0..16384, not '%s'", v);
            *(!strcmp(a, "--min-diam-px")   ? &s.min_diam_px
              : !strcmp(a, "--max-diam-px") ? &s.max_diam_px
                                            : &s.fit_min_px) = d;
        } else if (!strcmp(a, "--edge-level")) {
            NEED_VALUE();
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d < 1))
                return usage_error(cmd, "--edge-level must lie between 0 and 1, not '%s'", v);
            s.edge_level = d;
        } else if (!strcmp(a, "--threads")) {
            NEED_VALUE();
            if (parse_int(cmd, a, v, 1, 1024, &n))
                return 2;
            s.threads = (int)n;
        } else if (!strcmp(a, "--quiet") || !strcmp(a, "-q")) {
            quiet = 1;
        } else if (!strcmp(a, "--resume")) {
            s.resume = 1;
        } else {
            int r = args_positional(cmd, a, &input);
            if (r)
                return r;
        }
#undef NEED_VALUE
    }
    if (!input)
        return usage_error(cmd, "%s", "no INPUT given");
    if (!out)
        return usage_error(cmd, "%s", "no --out DIR given");
    if (s.calib_file && s.mm_per_px > 0)
        return usage_error(cmd, "%s", "give either --scale or --calib, not both");

    progress_state ps = {!quiet && isatty(2), 0};
    s.progress = on_progress;
    s.progress_ud = &ps;
    s.stop = &stop_request;
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;
    sigemptyset(&sa.sa_mask);
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    sp_measure_report rep;
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_measure(input, out, &s, &rep, &err);
    end_progress(&ps);
    if (rc) {
        fprintf(stderr, "spume measure: %s\n", err.msg);
        return interrupted ? 130 : err.code == SP_ERR_INPUT ? 2 : 1;
    }
    if (interrupted && rep.complete)
        /* The stop came after the last frame was measured: the tables are whole, so the run counts
         * as finished. */
        fprintf(stderr, "spume measure: stop asked after the last frame was measured; the run is complete\n");
    if (!rep.complete) {
        fprintf(stderr,
                "spume measure: interrupted after %lld frames: tables in %s are valid and marked incomplete "
                "in summary.json (the next frame would be %lld); to finish the run, repeat the command with "
                "--resume\n",
                (long long)rep.frames, out, (long long)rep.next_frame);
        return 130;
    }
    if (!quiet)
        fprintf(stderr,
                "spume measure: %lld frames (%dx%d), %lld bubbles in %lld tracks, mean holdup %.4f -> %s/\n",
                (long long)rep.frames, rep.width, rep.height, (long long)rep.detections,
                (long long)rep.tracks, rep.holdup, out);
    if (json) {
        /* The machine-readable summary, exactly as written to the folder. */
        char path[4200];
        snprintf(path, sizeof path, "%s/summary.json", out);
        FILE *f = fopen(path, "rb");
        if (!f) {
            fprintf(stderr, "spume measure: %s: cannot reopen for --json\n", path);
            return 1;
        }
        char buf[65536];
        size_t k;
        while ((k = fread(buf, 1, sizeof buf, f)) > 0)
            fwrite(buf, 1, k, stdout);
        fclose(f);
    }
    return 0;
}

static void synth_progress(void *ud, int64_t done, int64_t total)
{
    progress_state *ps = ud;
    sp_progress p = {"synth", done, total, 0};
    on_progress(ps, &p);
}

int cmd_synth(int argc, char **argv)
{
    const char *cmd = "synth", *scenario = NULL, *out = NULL;
    sp_synth_opts o;
    sp_synth_opts_default(&o);
    int quiet = 0;
    for (int i = 0; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        long long n;
        if (!strcmp(a, "--help") || !strcmp(a, "-h")) {
            fputs(SYNTH_HELP, stdout);
            fputs("\nscenarios:", stdout);
            for (const char *const *sc = sp_synth_scenarios(); *sc; sc++)
                printf(" %s", *sc);
            fputs("\n", stdout);
            return 0;
        }
        int takes = !strcmp(a, "--out") || !strcmp(a, "--bytes") || !strcmp(a, "--bits") ||
                    !strcmp(a, "--frames") || !strcmp(a, "--size") || !strcmp(a, "--seed") ||
                    !strcmp(a, "--threads");
        if (takes && !v)
            return usage_error(cmd, "%s needs a value", a);
        if (takes)
            i++;
        if (!strcmp(a, "--out")) {
            out = v;
        } else if (!strcmp(a, "--bytes")) {
            if (parse_int(cmd, a, v, 1, 2, &n))
                return 2;
            o.bytes = (int)n;
        } else if (!strcmp(a, "--bits")) {
            if (parse_int(cmd, a, v, 9, 16, &n))
                return 2;
            o.bits = (int)n;
        } else if (!strcmp(a, "--frames")) {
            if (parse_int(cmd, a, v, 1, 1000000, &n))
                return 2;
            o.frames = (int)n;
        } else if (!strcmp(a, "--size")) {
            int w, h;
            char tail;
            if (sscanf(v, "%dx%d%c", &w, &h, &tail) != 2 || w < 16 || h < 16 || w > SP_MAX_DIM ||
                h > SP_MAX_DIM)
                return usage_error(cmd, "--size wants WxH, 16..16384 each, not '%s'", v);
            o.width = w;
            o.height = h;
        } else if (!strcmp(a, "--seed")) {
            if (parse_int(cmd, a, v, 0, INT64_MAX, &n))
                return 2;
            o.seed = (uint64_t)n;
        } else if (!strcmp(a, "--threads")) {
            if (parse_int(cmd, a, v, 1, 1024, &n))
                return 2;
            o.threads = (int)n;
        } else if (!strcmp(a, "--no-png")) {
            o.png = 0;
        } else if (!strcmp(a, "--no-video")) {
            o.video = 0;
        } else if (!strcmp(a, "--quiet") || !strcmp(a, "-q")) {
            quiet = 1;
        } else {
            int r = args_positional(cmd, a, &scenario);
            if (r)
                return r;
        }
    }
    if (!scenario)
        return usage_error(cmd, "%s", "no SCENARIO given");
    if (!out)
        return usage_error(cmd, "%s", "no --out DIR given");
    progress_state ps = {!quiet && isatty(2), 0};
    o.progress = synth_progress;
    o.progress_ud = &ps;
    sp_error err;
    sp_error_clear(&err);
    int rc = sp_synth_run(scenario, out, &o, &err);
    end_progress(&ps);
    if (rc) {
        fprintf(stderr, "spume synth: %s\n", err.msg);
        return err.code == SP_ERR_INPUT ? 2 : 1;
    }
    if (!quiet)
        fprintf(stderr, "spume synth: scene '%s' written to %s\n", scenario, out);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        fputs(USAGE, stderr);
        return 2;
    }
    const char *c = argv[1];
    if (!strcmp(c, "measure"))
        return cmd_measure(argc - 2, argv + 2);
    if (!strcmp(c, "synth")) {
        if (argc > 2 && !strcmp(argv[2], "target"))
            return cmd_synth_target(argc - 3, argv + 3);
        return cmd_synth(argc - 2, argv + 2);
    }
    if (!strcmp(c, "listen"))
        return cmd_listen(argc - 2, argv + 2);
    if (!strcmp(c, "crosscheck"))
        return cmd_crosscheck(argc - 2, argv + 2);
    if (!strcmp(c, "calibrate"))
        return cmd_calibrate(argc - 2, argv + 2);
    if (!strcmp(c, "report"))
        return cmd_report(argc - 2, argv + 2);
    if (!strcmp(c, "version") || !strcmp(c, "--version")) {
        printf("spume %s\n", SP_VERSION);
        return 0;
    }
    if (!strcmp(c, "help") || !strcmp(c, "--help") || !strcmp(c, "-h")) {
        if (argc > 2 && !strcmp(argv[2], "measure"))
            fputs(MEASURE_HELP, stdout);
        else if (argc > 2 && !strcmp(argv[2], "synth"))
            fputs(SYNTH_HELP, stdout);
        else if (argc > 2) {
            /* Each remaining command prints its own options for --help. */
            char *h[] = {"--help", NULL};
            if (!strcmp(argv[2], "listen"))
                return cmd_listen(1, h);
            if (!strcmp(argv[2], "crosscheck"))
                return cmd_crosscheck(1, h);
            if (!strcmp(argv[2], "calibrate"))
                return cmd_calibrate(1, h);
            if (!strcmp(argv[2], "report"))
                return cmd_report(1, h);
            fputs(USAGE, stdout);
        } else
            fputs(USAGE, stdout);
        return 0;
    }
    fprintf(stderr, "spume: unknown command '%s'\n\n%s", c, USAGE);
    return 2;
}

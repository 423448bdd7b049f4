/* spume report DIR: rebuild the overlays, plots and report.html of a measured run. */
#include "cli/args.h"
#include "cli/commands.h"
#include "core/jsonw.h"
#include "report/report.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define MAX_FRAMES 1000

static const char *help =
    "usage: spume report DIR [options]\n"
    "Rebuild DIR/report.html (plots, tables, overlay thumbnails) from the outputs of spume measure.\n"
    "  --input INPUT      the recording, when it has moved since measure (default: summary.json input.path)\n"
    "  --frames LIST      frames to draw as overlay PNGs in DIR/overlays/, e.g. 0,10,20-25 (default: 4\n"
    "                     spread over the run)\n"
    "  --thumbnails N     number of evenly spread overlay frames when --frames is not given (default 4)\n"
    "  --video            also write DIR/overlay.mkv, every frame annotated (lossless FFV1)\n"
    "  --codec NAME       libavcodec encoder for the video (default ffv1; e.g. libx264rgb)\n"
    "  --trail N          frames of track history drawn behind each bubble (default 20)\n"
    "  --focus-contrast C contrast below which a bubble is drawn out of focus (default 0.3)\n"
    "  --json             print a machine-readable summary on stdout\n"
    "  --quiet            no summary on stderr\n";

/* "0,10,20-25" -> frame numbers; returns 2 on a malformed list. */
static int parse_frames(const char *s, int64_t *out, int *n)
{
    *n = 0;
    const char *p = s;
    while (*p) {
        char *end;
        long long a = strtoll(p, &end, 10), b;
        if (end == p || a < 0)
            return usage_error("report", "--frames: '%s' is not a list like 0,10,20-25", s);
        b = a;
        p = end;
        if (*p == '-') {
            b = strtoll(p + 1, &end, 10);
            if (end == p + 1 || b < a)
                return usage_error("report", "--frames: '%s' is not a list like 0,10,20-25", s);
            p = end;
        }
        for (long long f = a; f <= b; f++) {
            if (*n >= MAX_FRAMES)
                return usage_error("report", "--frames: more than 1000 frames in '%s'", s);
            out[(*n)++] = f;
        }
        if (*p == ',')
            p++;
        else if (*p)
            return usage_error("report", "--frames: '%s' is not a list like 0,10,20-25", s);
    }
    return *n ? 0 : usage_error("report", "--frames: empty list '%s'", s);
}

static void print_json(const char *dir, const sp_report_result *r)
{
    sp_jsonw j;
    sp_jsonw_init(&j, stdout);
    sp_jsonw_obj(&j);
    sp_jsonw_kstr(&j, "dir", dir);
    sp_jsonw_kstr(&j, "report", r->html);
    sp_jsonw_kint(&j, "frames", r->frames);
    sp_jsonw_kint(&j, "detections", r->detections);
    sp_jsonw_kint(&j, "tracks", r->tracks);
    sp_jsonw_kint(&j, "sites", r->sites);
    sp_jsonw_kint(&j, "pairs", r->pairs);
    sp_jsonw_knum(&j, "fps", r->fps);
    sp_jsonw_knum(&j, "mm_per_px", r->mm_per_px);
    sp_jsonw_knum(&j, "holdup", r->holdup);
    sp_jsonw_kstr(&j, "size_basis", r->size_basis_tracks ? "tracks" : "detections");
    sp_jsonw_knum(&j, "d10_mm", r->d10_mm);
    sp_jsonw_knum(&j, "d32_mm", r->d32_mm);
    sp_jsonw_knum(&j, "d43_mm", r->d43_mm);
    sp_jsonw_kint(&j, "plots", r->plots);
    sp_jsonw_kint(&j, "tables", r->tables);
    sp_jsonw_kint(&j, "overlays", r->overlays);
    sp_jsonw_key(&j, "video");
    if (r->video)
        sp_jsonw_str(&j, r->video_path);
    else
        sp_jsonw_null(&j);
    sp_jsonw_obj_end(&j);
    fputc('\n', stdout);
}

int cmd_report(int argc, char **argv)
{
    const char *dir = NULL;
    int quiet = 0, json = 0, nframes = 0;
    static int64_t frames[MAX_FRAMES];
    sp_report_result res;
    sp_report_opts o;
    sp_report_opts_default(&o);
    o.result = &res;

    for (int i = 0; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        long long n;
        if (!strcmp(a, "--help") || !strcmp(a, "-h")) {
            fputs(help, stdout);
            return 0;
        } else if (!strcmp(a, "--quiet")) {
            quiet = 1;
        } else if (!strcmp(a, "--json")) {
            json = 1;
        } else if (!strcmp(a, "--video")) {
            o.video = 1;
        } else if (a[0] == '-' && a[1] == '-' && !v) {
            return usage_error("report", "%s needs a value", a);
        } else if (!strcmp(a, "--input")) {
            o.input = argv[++i];
        } else if (!strcmp(a, "--codec")) {
            o.video_codec = argv[++i];
        } else if (!strcmp(a, "--frames")) {
            if (parse_frames(argv[++i], frames, &nframes))
                return 2;
            o.frames = frames;
            o.nframes = nframes;
        } else if (!strcmp(a, "--thumbnails")) {
            if (parse_int("report", a, argv[++i], 0, MAX_FRAMES, &n))
                return 2;
            o.thumbnails = (int)n;
        } else if (!strcmp(a, "--trail")) {
            if (parse_int("report", a, argv[++i], 0, 100000, &n))
                return 2;
            o.trail = (int)n;
        } else if (!strcmp(a, "--focus-contrast")) {
            if (parse_double("report", a, argv[++i], &o.focus_contrast))
                return 2;
            if (!(o.focus_contrast > 0 && o.focus_contrast <= 1))
                return usage_error("report", "--focus-contrast: '%s' is not in (0, 1]", argv[i]);
        } else if (a[0] == '-') {
            return usage_error("report", "unknown option '%s'", a);
        } else if (!dir) {
            dir = a;
        } else {
            return usage_error("report", "unexpected argument '%s'", a);
        }
    }
    if (!dir)
        return usage_error("report", "%s", "missing DIR (the output folder of spume measure)");

    sp_error err;
    sp_error_clear(&err);
    int rc = sp_report_build(dir, &o, &err);
    if (rc) {
        fprintf(stderr, "spume report: %s\n", err.msg);
        return rc == SP_ERR_INPUT ? 2 : 1;
    }
    if (!quiet) {
        fprintf(stderr, "spume report: %s\n", res.html);
        fprintf(stderr, "  %lld frames, %lld detections, %lld tracks, %lld sites", (long long)res.frames,
                (long long)res.detections, (long long)res.tracks, (long long)res.sites);
        if (res.pairs)
            fprintf(stderr, ", %lld acoustic pairs", (long long)res.pairs);
        fputc('\n', stderr);
        if (isfinite(res.d32_mm))
            fprintf(stderr, "  d10 %.3g mm, d32 %.3g mm, d43 %.3g mm (%s), holdup %.3g\n", res.d10_mm,
                    res.d32_mm, res.d43_mm, res.size_basis_tracks ? "per track" : "per detection",
                    res.holdup);
        fprintf(stderr, "  %d plots, %d tables, %d overlay frames%s\n", res.plots, res.tables, res.overlays,
                res.video ? ", annotated video" : "");
        if (res.overlay_note[0])
            fprintf(stderr, "  %s\n", res.overlay_note);
        if (res.video)
            fprintf(stderr, "  video: %s\n", res.video_path);
    }
    if (json)
        print_json(dir, &res);
    return 0;
}

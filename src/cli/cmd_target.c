/* spume synth target: a dot-grid calibration target with known scale, rotation and distortion. */
#include "cli/args.h"
#include "cli/commands.h"
#include "synth/target.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

static const char TARGET_HELP[] =
    "usage: spume synth target --out DIR [options]\n"
    "\n"
    "Renders an image of a square grid of round dots as a camera would see it, to DIR/target.png,\n"
    "with the truth (options, grid-to-pixel mapping, every dot's true centre) in\n"
    "DIR/target_truth.json. Feed the image to 'spume calibrate --pitch-mm P'.\n"
    "\n"
    "Target\n"
    "  --pitch-mm P        dot spacing (default 1)\n"
    "  --dot-mm D          dot diameter, below the pitch (default 0.5)\n"
    "  --grid CxR          a finite grid of C by R dots centred in the image (default fills it)\n"
    "  --light-dots        light dots on a dark ground (default dark dots on light)\n"
    "Camera\n"
    "  --size WxH          image size in pixels (default 1024x768)\n"
    "  --scale MM_PER_PX   millimetres per pixel at the image centre (default 0.025)\n"
    "  --rotation DEG      grid +x in the image, counter-clockwise with y up (default 0)\n"
    "  --perspective X,Y   relative change of the scale from the centre to the right and bottom edges\n"
    "                      (default 0,0; e.g. 0.05,0 = 5% larger at the right edge), within +-0.5\n"
    "  --distortion K1[,K2]  radial distortion coefficients, within +-0.3 (default 0)\n"
    "Image quality\n"
    "  --blur PX           Gaussian blur sigma in pixels (default 0.8)\n"
    "  --noise F           noise sigma as a fraction of full scale (default 0.01)\n"
    "  --vignette F        light in the corners relative to the centre, in (0, 1] (default 1)\n"
    "  --bytes 1|2         8-bit (default) or 16-bit PNG\n"
    "  --seed N            noise seed (default 1)\n"
    "  --quiet             no summary on stderr\n";

int cmd_synth_target(int argc, char **argv)
{
    const char *cmd = "synth target", *out = NULL;
    sp_target_opts o;
    sp_target_opts_default(&o);
    int quiet = 0;
    for (int i = 0; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        long long n;
        double d;
        char tail;
        if (!strcmp(a, "--help") || !strcmp(a, "-h")) {
            fputs(TARGET_HELP, stdout);
            return 0;
        }
        int takes = !strcmp(a, "--out") || !strcmp(a, "--pitch-mm") || !strcmp(a, "--dot-mm") ||
                    !strcmp(a, "--grid") || !strcmp(a, "--size") || !strcmp(a, "--scale") ||
                    !strcmp(a, "--rotation") || !strcmp(a, "--perspective") || !strcmp(a, "--distortion") ||
                    !strcmp(a, "--blur") || !strcmp(a, "--noise") || !strcmp(a, "--vignette") ||
                    !strcmp(a, "--bytes") || !strcmp(a, "--seed");
        if (takes && !v)
            return usage_error(cmd, "%s needs a value", a);
        if (takes)
            i++;
        if (!strcmp(a, "--out")) {
            out = v;
        } else if (!strcmp(a, "--pitch-mm") || !strcmp(a, "--dot-mm") || !strcmp(a, "--scale")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d <= 1e4))
                return usage_error(cmd, "lengths and scales must be positive, not '%s'", v);
            *(!strcmp(a, "--pitch-mm") ? &o.pitch_mm
              : !strcmp(a, "--dot-mm") ? &o.dot_diam_mm
                                       : &o.mm_per_px) = d;
        } else if (!strcmp(a, "--rotation")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(fabs(d) <= 360))
                return usage_error(cmd, "--rotation takes degrees in -360..360, not '%s'", v);
            o.rotation_deg = d;
        } else if (!strcmp(a, "--grid")) {
            int c, r;
            if (sscanf(v, "%dx%d%c", &c, &r, &tail) != 2 || c < 3 || r < 3 || c > 10000 || r > 10000)
                return usage_error(cmd, "--grid wants CxR dots, 3..10000 each, not '%s'", v);
            o.cols = c;
            o.rows = r;
        } else if (!strcmp(a, "--size")) {
            int w, h;
            if (sscanf(v, "%dx%d%c", &w, &h, &tail) != 2 || w < 16 || h < 16 || w > SP_MAX_DIM ||
                h > SP_MAX_DIM)
                return usage_error(cmd, "--size wants WxH, 16..16384 each, not '%s'", v);
            o.width = w;
            o.height = h;
        } else if (!strcmp(a, "--perspective")) {
            double px, py;
            if (sscanf(v, "%lf,%lf%c", &px, &py, &tail) != 2 || !(fabs(px) <= 0.5) || !(fabs(py) <= 0.5))
                return usage_error(cmd, "--perspective wants X,Y within -0.5..0.5, not '%s'", v);
            o.persp_x = px;
            o.persp_y = py;
        } else if (!strcmp(a, "--distortion")) {
            double k1, k2 = 0;
            int got = sscanf(v, "%lf,%lf%c", &k1, &k2, &tail);
            if (got == 1 && strchr(v, ','))
                got = 0;
            if ((got != 1 && got != 2) || !(fabs(k1) <= 0.3) || !(fabs(k2) <= 0.3))
                return usage_error(cmd, "--distortion wants K1 or K1,K2 within -0.3..0.3, not '%s'", v);
            o.k1 = k1;
            o.k2 = k2;
        } else if (!strcmp(a, "--blur")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 0 && d <= 20))
                return usage_error(cmd, "--blur takes pixels in 0..20, not '%s'", v);
            o.blur_px = d;
        } else if (!strcmp(a, "--noise")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 0 && d <= 0.5))
                return usage_error(cmd, "--noise takes a fraction in 0..0.5, not '%s'", v);
            o.noise = d;
        } else if (!strcmp(a, "--vignette")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d <= 1))
                return usage_error(cmd, "--vignette takes a fraction in (0, 1], not '%s'", v);
            o.vignette = d;
        } else if (!strcmp(a, "--bytes")) {
            if (parse_int(cmd, a, v, 1, 2, &n))
                return 2;
            o.bytes = (int)n;
        } else if (!strcmp(a, "--seed")) {
            if (parse_int(cmd, a, v, 0, INT64_MAX, &n))
                return 2;
            o.seed = (uint64_t)n;
        } else if (!strcmp(a, "--light-dots")) {
            o.light_dots = 1;
        } else if (!strcmp(a, "--quiet") || !strcmp(a, "-q")) {
            quiet = 1;
        } else {
            return args_positional(cmd, a, NULL);
        }
    }
    if (!out)
        return usage_error(cmd, "%s", "no --out DIR given");
    if (!(o.dot_diam_mm < o.pitch_mm)) {
        fprintf(stderr, "spume synth target: --dot-mm %g must be below --pitch-mm %g\n", o.dot_diam_mm,
                o.pitch_mm);
        return 2;
    }

    char png[4200];
    sp_error err;
    sp_error_clear(&err);
    if (strlen(out) > 4000) {
        fprintf(stderr, "spume synth target: %.100s...: output path too long\n", out);
        return 2;
    }
    snprintf(png, sizeof png, "%s/target.png", out);
    if (sp_outdir_prepare(out, &err) || sp_synth_target(png, &o, &err)) {
        fprintf(stderr, "spume synth target: %s\n", err.msg);
        return err.code == SP_ERR_INPUT ? 2 : 1;
    }
    if (!quiet)
        fprintf(stderr,
                "spume synth target: %dx%d, pitch %g mm (%.1f px), %.7g mm/px, rotation %g deg -> %s and "
                "%s/target_truth.json\n",
                o.width, o.height, o.pitch_mm, o.pitch_mm / o.mm_per_px, o.mm_per_px, o.rotation_deg, png,
                out);
    return 0;
}

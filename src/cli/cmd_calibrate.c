/* spume calibrate: millimetres per pixel from an image of a dot-grid target or two points. */
#include "calib/calfile.h"
#include "calib/calibrate.h"
#include "calib/dots.h"
#include "cli/args.h"
#include "cli/commands.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

static const char CALIBRATE_HELP[] =
    "usage: spume calibrate IMAGE --pitch-mm P --out FILE [options]\n"
    "       spume calibrate IMAGE --points X1,Y1,X2,Y2 --length-mm L --out FILE [options]\n"
    "\n"
    "Measures the scale (mm per pixel, with its standard uncertainty) and the rotation of the camera\n"
    "from an image of a square grid of round dots, or from two points a known length apart, and\n"
    "writes a calibration file (JSON) for 'spume measure --calib FILE'.\n"
    "\n"
    "Dot grid\n"
    "  --pitch-mm P         centre-to-centre spacing of the dots in millimetres\n"
    "  --dots dark|light|auto  dark dots on a light ground, the reverse, or decided from the\n"
    "                       image (default auto: the smaller class of the Otsu split)\n"
    "  --min-dot-px D       smallest dot diameter accepted, pixels (default 4)\n"
    "  --min-dots N         fewest dots the grid must hold (default 12, at least 9)\n"
    "  --distortion auto|0|1|2  radial distortion terms: chosen by an F-test (default auto), or\n"
    "                       forced\n"
    "Two points (a ruler or an object of known length)\n"
    "  --points X1,Y1,X2,Y2 the two points in pixels (origin at the top-left pixel's centre, y down)\n"
    "  --length-mm L        the length between them\n"
    "  --length-u-mm U      standard uncertainty of that length (default 0)\n"
    "  --point-u-px U       standard uncertainty of each point per axis (default 0.5)\n"
    "Output\n"
    "  --out FILE           calibration file to write (JSON: mm_per_px, mm_per_px_uncertainty,\n"
    "                       rotation_deg and the fit)\n"
    "  --quiet              no summary on stderr\n";

int cmd_calibrate(int argc, char **argv)
{
    const char *cmd = "calibrate", *image = NULL, *out = NULL;
    sp_calib_settings s;
    sp_calib_settings_default(&s);
    int quiet = 0, grid_opt = 0, point_opt = 0, have_len = 0;
    for (int i = 0; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        long long n;
        double d;
        if (!strcmp(a, "--help") || !strcmp(a, "-h")) {
            fputs(CALIBRATE_HELP, stdout);
            return 0;
        }
        int takes = !strcmp(a, "--out") || !strcmp(a, "--pitch-mm") || !strcmp(a, "--dots") ||
                    !strcmp(a, "--min-dot-px") || !strcmp(a, "--min-dots") || !strcmp(a, "--distortion") ||
                    !strcmp(a, "--points") || !strcmp(a, "--length-mm") || !strcmp(a, "--length-u-mm") ||
                    !strcmp(a, "--point-u-px");
        if (takes && !v)
            return usage_error(cmd, "%s needs a value", a);
        if (takes)
            i++;
        if (!strcmp(a, "--out")) {
            out = v;
        } else if (!strcmp(a, "--pitch-mm")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d <= 1e4))
                return usage_error(cmd, "--pitch-mm must be positive millimetres, not '%s'", v);
            s.pitch_mm = d;
            grid_opt = 1;
        } else if (!strcmp(a, "--dots")) {
            if (!strcmp(v, "dark"))
                s.polarity = SP_DOTS_DARK;
            else if (!strcmp(v, "light"))
                s.polarity = SP_DOTS_LIGHT;
            else if (!strcmp(v, "auto"))
                s.polarity = SP_DOTS_AUTO;
            else
                return usage_error(cmd, "--dots is dark, light or auto, not '%s'", v);
        } else if (!strcmp(a, "--min-dot-px")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 1 && d <= SP_MAX_DIM))
                return usage_error(cmd, "--min-dot-px takes pixels in 1..16384, not '%s'", v);
            s.min_dot_px = d;
        } else if (!strcmp(a, "--min-dots")) {
            if (parse_int(cmd, a, v, 9, 1000000, &n))
                return 2;
            s.min_dots = (int)n;
        } else if (!strcmp(a, "--distortion")) {
            if (!strcmp(v, "auto")) {
                s.distortion = -1;
            } else {
                if (parse_int(cmd, a, v, 0, 2, &n))
                    return 2;
                s.distortion = (int)n;
            }
        } else if (!strcmp(a, "--points")) {
            double p[4];
            char tail;
            if (sscanf(v, "%lf,%lf,%lf,%lf%c", &p[0], &p[1], &p[2], &p[3], &tail) != 4 || !isfinite(p[0]) ||
                !isfinite(p[1]) || !isfinite(p[2]) || !isfinite(p[3]))
                return usage_error(cmd, "--points wants X1,Y1,X2,Y2 in pixels, not '%s'", v);
            memcpy(s.points, p, sizeof p);
            s.two_point = 1;
            point_opt = 1;
        } else if (!strcmp(a, "--length-mm") || !strcmp(a, "--length-u-mm") || !strcmp(a, "--point-u-px")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            int len = !strcmp(a, "--length-mm");
            if (len ? !(d > 0 && d <= 1e6) : !(d >= 0 && d <= 1e6))
                return usage_error(cmd,
                                   len ? "--length-mm must be positive, not '%s'"
                                       : "uncertainties must be zero or positive, not '%s'",
                                   v);
            *(len ? &s.length_mm : !strcmp(a, "--length-u-mm") ? &s.length_u_mm : &s.point_u_px) = d;
            if (len)
                have_len = 1;
            else
                point_opt = 1;
        } else if (!strcmp(a, "--quiet") || !strcmp(a, "-q")) {
            quiet = 1;
        } else {
            int r = args_positional(cmd, a, &image);
            if (r)
                return r;
        }
    }
    if (!image)
        return usage_error(cmd, "%s", "no IMAGE given");
    if (!out)
        return usage_error(cmd, "%s", "no --out FILE given");
    if (grid_opt && (s.two_point || have_len))
        return usage_error(cmd, "%s",
                           "give either --pitch-mm (dot grid) or --points with --length-mm, not both");
    if (!grid_opt && !s.two_point)
        return usage_error(cmd, "%s", "give --pitch-mm P for a dot grid, or --points and --length-mm");
    if (s.two_point && !have_len)
        return usage_error(cmd, "%s", "--points needs --length-mm L");
    if (have_len && !s.two_point)
        return usage_error(cmd, "%s", "--length-mm needs --points X1,Y1,X2,Y2");
    if (point_opt && !s.two_point)
        return usage_error(cmd, "%s", "--point-u-px and --length-u-mm belong to --points mode");

    sp_calib_result r;
    sp_error err;
    sp_error_clear(&err);
    if (sp_calibrate(image, &s, &r, &err) || sp_calfile_write(out, &r, &err)) {
        fprintf(stderr, "spume calibrate: %s\n", err.msg);
        return err.code == SP_ERR_INPUT ? 2 : 1;
    }
    if (quiet)
        return 0;
    double rel = r.mm_per_px > 0 ? r.mm_per_px_uncertainty / r.mm_per_px : 0;
    double rot = fabs(r.rotation_deg) < 5e-4 ? 0.0 : r.rotation_deg; /* no "-0.000" */
    if (s.two_point) {
        fprintf(stderr,
                "spume calibrate: %.7g ± %.2g mm/px (%.3g%%), rotation %.3f ± %.3f deg, from two points "
                "%.2f px apart -> %s\n",
                r.mm_per_px, r.mm_per_px_uncertainty, 100 * rel, rot, r.rotation_uncertainty_deg,
                r.length_mm / r.mm_per_px, out);
    } else {
        fprintf(stderr,
                "spume calibrate: %.7g ± %.2g mm/px (%.3g%%), rotation %.3f ± %.3f deg, %d of %d %s dots, "
                "residuals rms %.3f px max %.3f px, %d radial term%s, scale varies %.2g%% over the "
                "corners -> %s\n",
                r.mm_per_px, r.mm_per_px_uncertainty, 100 * rel, rot, r.rotation_uncertainty_deg, r.dots_used,
                r.dots_found, r.polarity == SP_DOTS_LIGHT ? "light" : "dark", r.rms_px, r.max_px,
                r.radial.terms, r.radial.terms == 1 ? "" : "s", 100 * r.scale_variation, out);
    }
    return 0;
}

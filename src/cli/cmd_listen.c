/* spume listen: bubble pings in a sound recording, sized by their natural frequency. */
#include "acoustic/listen.h"
#include "cli/args.h"
#include "cli/commands.h"
#include "physics/liquid.h"

#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

static const char LISTEN_HELP[] =
    "usage: spume listen AUDIO --out DIR [options]\n"
    "\n"
    "Finds the pings of bubbles (a damped ring at the natural frequency) in a hydrophone or microphone\n"
    "recording (WAV, FLAC, or the audio track of a video) and writes DIR/pings.csv and DIR/listen.json.\n"
    "The radius comes from the Minnaert relation with the corrections of the chosen --model.\n"
    "\n"
    "Liquid\n"
    "  --liquid NAME|FILE  liquid preset: a name (water, seawater, carbonated) or a .json file\n"
    "                      (default water; its density, surface tension and vapour pressure are used,\n"
    "                      and the bubble gas, air or CO2)\n"
    "  --temp C            liquid temperature in degrees C (default the preset's, 20); the water\n"
    "                      model is evaluated at C, a preset of fixed values refuses another one\n"
    "  --liquid-set K=V    override one liquid property after the preset, e.g. sigma_n_m=0.050 or\n"
    "                      vapour_pa=0 (repeatable; keys as in the preset files)\n"
    "  --depth M           depth of the bubbles below the free surface in metres (default 0; also\n"
    "                      --depth-m)\n"
    "  --model NAME        minnaert (adiabatic, no surface tension), devin (adiabatic with surface\n"
    "                      tension) or thermal (surface tension and heat exchange; default)\n"
    "Search\n"
    "  --channel N|mean    channel analysed, from 0, or the mean of all channels (default 0)\n"
    "  --r-min MM          smallest radius sought (default 0.2); its frequency must lie below 0.4 of\n"
    "                      the sample rate\n"
    "  --r-max MM          largest radius sought (default 5)\n"
    "  --min-snr DB        onset when the band energy is DB above the noise floor (default 10)\n"
    "  --rejected          also list rejected candidates in pings.csv, with a status column\n"
    "Running\n"
    "  --quiet             no progress or summary on stderr\n"
    "\n"
    "Liquid presets named without a path are read from CALIB/liquids/NAME.json, where CALIB is\n"
    "$SPUME_CALIB_DIR when set, else ../calib beside the spume executable (as in a build tree), else\n"
    "../share/spume/calib beside it (as installed). 'water' works without any preset file.\n";

/* The folder of liquid presets when $SPUME_CALIB_DIR is unset: found from the executable's own path,
 * so a build tree or an installation works from any working directory. 0 and dir filled, or -1. */
static int exe_liquids_dir(char *dir, size_t n)
{
    char exe[PATH_MAX];
    ssize_t len = readlink("/proc/self/exe", exe, sizeof exe - 1);
    if (len <= 0)
        return -1;
    exe[len] = '\0';
    char *slash = strrchr(exe, '/');
    if (!slash)
        return -1;
    *slash = '\0';
    static const char *rel[] = {"../calib/liquids", "../share/spume/calib/liquids"};
    for (size_t i = 0; i < sizeof rel / sizeof rel[0]; i++) {
        struct stat st;
        char path[PATH_MAX + 64], real[PATH_MAX];
        if (snprintf(path, sizeof path, "%s/%s", exe, rel[i]) < (int)sizeof path && stat(path, &st) == 0 &&
            S_ISDIR(st.st_mode) && realpath(path, real) && snprintf(dir, n, "%s", real) < (int)n)
            return 0;
    }
    return -1;
}

static int is_file(const char *path)
{
    struct stat st;
    return stat(path, &st) == 0 && S_ISREG(st.st_mode);
}

/* Load the liquid and record where it came from. A name is looked up as $SPUME_CALIB_DIR/liquids/NAME.json
 * when that variable is set, else beside the executable (exe_liquids_dir); failing those, the library's
 * own search (the build's calib/ directory, then the built-in water model for "water"). */
static int load_liquid(const char *name, double temp_c, sp_liquid *l, char *file, size_t nfile, sp_error *err)
{
    char dir[PATH_MAX + 64];
    const char *env = getenv("SPUME_CALIB_DIR");
    size_t len = strlen(name);
    if (strchr(name, '/') || (len > 5 && !strcmp(name + len - 5, ".json"))) {
        snprintf(file, nfile, "%s", name);
        return sp_liquid_preset(name, temp_c, l, err);
    }
    if (env && *env) {
        if (snprintf(file, nfile, "%s/liquids/%s.json", env, name) < (int)nfile && is_file(file))
            return sp_liquid_preset(file, temp_c, l, err);
        snprintf(file, nfile, "built-in or the build's calib/liquids");
        return sp_liquid_preset(name, temp_c, l, err);
    }
    if (exe_liquids_dir(dir, sizeof dir) == 0) {
        if (!(snprintf(file, nfile, "%s/%s.json", dir, name) < (int)nfile && is_file(file)))
            snprintf(file, nfile, "built-in");
        return sp_liquid_preset_in(dir, name, temp_c, l, err);
    }
    snprintf(file, nfile, "built-in or the build's calib/liquids");
    return sp_liquid_preset(name, temp_c, l, err);
}

/* Progress in seconds of audio (the library reports milliseconds), not frames. */
static void listen_on_progress(void *ud, const sp_progress *p)
{
    progress_state *ps = ud;
    if (!ps->show)
        return;
    double t = wall();
    if (t - ps->last < 0.25)
        return;
    ps->last = t;
    if (p->total > 0)
        fprintf(stderr, "\rlisten     %.1f / %.1f s of audio   ", p->done * 1e-3, p->total * 1e-3);
    else
        fprintf(stderr, "\rlisten     %.1f s of audio   ", p->done * 1e-3);
    fflush(stderr);
}

int cmd_listen(int argc, char **argv)
{
    const char *cmd = "listen", *audio = NULL, *out = NULL, *liquid = "water";
    sp_listen_settings s;
    sp_listen_settings_default(&s);
    double temp_c = NAN, depth_m = 0;
    int quiet = 0, nset = 0, have_depth = 0;
    enum { MAX_SET = 32 };
    const char *liquid_set[MAX_SET];
    for (int i = 0; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        long long n;
        double d;
        if (!strcmp(a, "--help") || !strcmp(a, "-h")) {
            fputs(LISTEN_HELP, stdout);
            return 0;
        }
        int depth = !strcmp(a, "--depth") || !strcmp(a, "--depth-m");
        int takes = !strcmp(a, "--out") || depth || !strcmp(a, "--temp") || !strcmp(a, "--liquid-set") ||
                    !strcmp(a, "--channel") || !strcmp(a, "--r-min") || !strcmp(a, "--r-max") ||
                    !strcmp(a, "--model") || !strcmp(a, "--min-snr") || !strcmp(a, "--liquid");
        if (takes && !v)
            return usage_error(cmd, "%s needs a value", a);
        if (takes)
            i++;
        if (!strcmp(a, "--out")) {
            out = v;
        } else if (depth) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 0 && d <= 11000))
                return usage_error(cmd, "--depth takes metres in 0..11000, not '%s'", v);
            depth_m = d;
            have_depth = 1;
        } else if (!strcmp(a, "--temp")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > -50 && d < 400))
                return usage_error(cmd, "--temp takes degrees C, not '%s'", v);
            temp_c = d;
        } else if (!strcmp(a, "--channel")) {
            if (!strcmp(v, "mean")) {
                s.channel = -1;
            } else {
                if (parse_int(cmd, a, v, 0, 63, &n))
                    return 2;
                s.channel = (int)n;
            }
        } else if (!strcmp(a, "--r-min") || !strcmp(a, "--r-max")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d > 0 && d <= 100))
                return usage_error(cmd, "radii take millimetres in (0, 100], not '%s'", v);
            *(!strcmp(a, "--r-min") ? &s.r_min_mm : &s.r_max_mm) = d;
        } else if (!strcmp(a, "--model")) {
            if (!strcmp(v, "minnaert"))
                s.medium.model = SP_MINNAERT_PLAIN;
            else if (!strcmp(v, "devin"))
                s.medium.model = SP_MINNAERT_DEVIN;
            else if (!strcmp(v, "thermal"))
                s.medium.model = SP_MINNAERT_THERMAL;
            else
                return usage_error(cmd, "--model is minnaert, devin or thermal, not '%s'", v);
        } else if (!strcmp(a, "--min-snr")) {
            if (parse_double(cmd, a, v, &d))
                return 2;
            if (!(d >= 1 && d <= 100))
                return usage_error(cmd, "--min-snr takes decibels in 1..100, not '%s'", v);
            s.ping.snr_min_db = d;
        } else if (!strcmp(a, "--liquid")) {
            if (!*v)
                return usage_error(cmd, "%s", "--liquid needs a preset name or a .json file");
            liquid = v;
        } else if (!strcmp(a, "--liquid-set")) {
            if (nset >= MAX_SET)
                return usage_error(cmd, "at most 32 --liquid-set options, not '%s'", v);
            if (!strchr(v, '='))
                return usage_error(cmd, "--liquid-set wants KEY=VALUE, not '%s'", v);
            liquid_set[nset++] = v;
        } else if (!strcmp(a, "--rejected")) {
            s.write_rejected = 1;
        } else if (!strcmp(a, "--quiet") || !strcmp(a, "-q")) {
            quiet = 1;
        } else {
            int r = args_positional(cmd, a, &audio);
            if (r)
                return r;
        }
    }
    if (!audio)
        return usage_error(cmd, "%s", "no AUDIO given");
    if (!out)
        return usage_error(cmd, "%s", "no --out DIR given");
    if (!(s.r_max_mm > s.r_min_mm)) {
        fprintf(stderr, "spume listen: --r-max %g mm must exceed --r-min %g mm\n", s.r_max_mm, s.r_min_mm);
        return 2;
    }

    sp_error err;
    sp_error_clear(&err);
    sp_liquid l;
    /* Depth first, so that an explicit --liquid-set rho_gas_kg_m3 is not recomputed after it. */
    int rc = load_liquid(liquid, temp_c, &l, s.liquid_file, sizeof s.liquid_file, &err);
    if (!rc && have_depth)
        rc = sp_liquid_set(&l, "depth_m", depth_m, &err);
    for (int k = 0; !rc && k < nset; k++)
        if ((rc = sp_liquid_assign(&l, liquid_set[k], &err)))
            return usage_error(cmd, "--liquid-set: %s", err.msg);
    if (rc || sp_liquid_check(&l, liquid, &err) || sp_listen_use_liquid(&s, &l, liquid, &err)) {
        fprintf(stderr, "spume listen: %s\n", err.msg);
        return err.code == SP_ERR_INPUT ? 2 : 1;
    }

    progress_state ps = {!quiet && isatty(2), 0};
    s.progress = listen_on_progress;
    s.progress_ud = &ps;
    sp_listen_report rep;
    rc = sp_listen(audio, out, &s, &rep, &err);
    end_progress(&ps);
    if (rc) {
        fprintf(stderr, "spume listen: %s\n", err.msg);
        return err.code == SP_ERR_INPUT ? 2 : 1;
    }
    if (!quiet)
        fprintf(stderr,
                "spume listen: %.1f s at %d Hz, %lld pings (%lld candidates rejected: %lld clicks, %lld "
                "overlaps, %lld out of range, %lld poor fits) -> %s/pings.csv\n",
                rep.duration_s, rep.sample_rate, (long long)rep.pings,
                (long long)(rep.candidates - rep.pings), (long long)rep.rejected[SP_PING_CLICK],
                (long long)rep.rejected[SP_PING_OVERLAP], (long long)rep.rejected[SP_PING_BAND],
                (long long)rep.rejected[SP_PING_FIT], out);
    return 0;
}

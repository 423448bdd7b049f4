/* The synthesiser's driver: light, dust and noise of the set-up, the frame loop, and the truth
 * and frame files. Frames are rendered in small batches in parallel (one frame per task) and
 * written in order; every random value comes from a counter-based generator keyed by (seed,
 * frame, pixel), so output is byte-identical at any thread count. */
#include "synth/synth.h"
#include "synth/audio.h"
#include "synth/rng.h"
#include "synth/scenes.h"
#include "io/png.h"
#include "io/videowriter.h"

#include <errno.h>
#include <math.h>
#include <omp.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <unistd.h>

#define PI 3.14159265358979323846
#define PATHMAX 4096

void sp_synth_opts_default(sp_synth_opts *o)
{
    memset(o, 0, sizeof *o);
    o->bytes = 1;
    o->bits = 16;
    o->seed = 1;
    o->png = 1;
    o->video = 1;
}

/* ---------------------------------------------------------------- light and dust */

typedef struct camera {
    float *light;    /* static relative light × dust transmission, 1 near the centre */
    double cx;       /* centre of the vignetting, px */
    double run_s;    /* duration of the run, for the drift */
    double flick_ph; /* phase of the mains flicker */
    uint64_t seed;
    int maxdn;        /* brightest value the file can hold */
    double level_dn;  /* light level at the centre above the offset, DN */
    double offset_dn; /* dark offset */
    double e_per_dn;  /* electrons per DN: shot noise grows as sqrt(signal) */
    double read_e;    /* read noise, electrons rms */
} camera;

/* Dust on the window: specks (small soft dots), fibres (thin curves) and a few faint smudges.
 * They never move, so a background model learns them; none is a bubble. */
static void add_dust(float *light, int w, int h, uint64_t seed)
{
    uint64_t kd = rng_key(seed, RNG_DUST, 0, 0);
    double area = (double)w * h;
    int nspeck = (int)(area / 30000.0) + 3;
    int nfibre = (int)(area / 300000.0) + 2;
    int nsmudge = (int)(area / 600000.0) + 1;
    uint64_t c = 0;
    for (int i = 0; i < nspeck; i++) {
        double x = rng_range(kd, c++, 0, w - 1), y = rng_range(kd, c++, 0, h - 1);
        double r = rng_range(kd, c++, 0.6, 1.8), dep = rng_range(kd, c++, 0.08, 0.35);
        int rr = (int)ceil(3.0 * r);
        for (int yy = (int)y - rr; yy <= (int)y + rr; yy++)
            for (int xx = (int)x - rr; xx <= (int)x + rr; xx++) {
                if (xx < 0 || yy < 0 || xx >= w || yy >= h)
                    continue;
                double d2 = ((xx - x) * (xx - x) + (yy - y) * (yy - y)) / (r * r);
                light[(size_t)yy * w + xx] *= (float)(1.0 - dep * exp(-d2));
            }
    }
    for (int i = 0; i < nfibre; i++) {
        /* quadratic Bezier, 20-80 px long, ~1 px wide */
        double x0 = rng_range(kd, c++, 0, w - 1), y0 = rng_range(kd, c++, 0, h - 1);
        double len = rng_range(kd, c++, 20, 80), ang = rng_range(kd, c++, 0, 2 * PI);
        double bend = rng_range(kd, c++, -0.4, 0.4) * len;
        double x2 = x0 + len * cos(ang), y2 = y0 + len * sin(ang);
        double x1 = 0.5 * (x0 + x2) - bend * sin(ang), y1 = 0.5 * (y0 + y2) + bend * cos(ang);
        double sg = rng_range(kd, c++, 0.45, 0.8), dep = rng_range(kd, c++, 0.10, 0.28);
        enum { NS = 48 };
        double px[NS + 1], py[NS + 1];
        for (int k = 0; k <= NS; k++) {
            double t = (double)k / NS;
            px[k] = (1 - t) * (1 - t) * x0 + 2 * t * (1 - t) * x1 + t * t * x2;
            py[k] = (1 - t) * (1 - t) * y0 + 2 * t * (1 - t) * y1 + t * t * y2;
        }
        int bx0 = (int)floor(fmin(fmin(x0, x1), x2)) - 4, bx1 = (int)ceil(fmax(fmax(x0, x1), x2)) + 4;
        int by0 = (int)floor(fmin(fmin(y0, y1), y2)) - 4, by1 = (int)ceil(fmax(fmax(y0, y1), y2)) + 4;
        for (int yy = by0 < 0 ? 0 : by0; yy <= by1 && yy < h; yy++)
            for (int xx = bx0 < 0 ? 0 : bx0; xx <= bx1 && xx < w; xx++) {
                double best = 1e30;
                for (int k = 0; k < NS; k++) { /* distance to the polyline */
                    double ex = px[k + 1] - px[k], ey = py[k + 1] - py[k];
                    double l2 = ex * ex + ey * ey;
                    double t = l2 > 0 ? ((xx - px[k]) * ex + (yy - py[k]) * ey) / l2 : 0;
                    t = t < 0 ? 0 : t > 1 ? 1 : t;
                    double qx = px[k] + t * ex - xx, qy = py[k] + t * ey - yy;
                    double d2 = qx * qx + qy * qy;
                    if (d2 < best)
                        best = d2;
                }
                if (best < 16.0)
                    light[(size_t)yy * w + xx] *= (float)(1.0 - dep * exp(-best / (2 * sg * sg)));
            }
    }
    for (int i = 0; i < nsmudge; i++) {
        double x = rng_range(kd, c++, 0, w - 1), y = rng_range(kd, c++, 0, h - 1);
        double r = rng_range(kd, c++, 8, 22), dep = rng_range(kd, c++, 0.03, 0.07);
        int rr = (int)ceil(2.5 * r);
        for (int yy = (int)y - rr; yy <= (int)y + rr; yy++)
            for (int xx = (int)x - rr; xx <= (int)x + rr; xx++) {
                if (xx < 0 || yy < 0 || xx >= w || yy >= h)
                    continue;
                double d2 = ((xx - x) * (xx - x) + (yy - y) * (yy - y)) / (r * r);
                light[(size_t)yy * w + xx] *= (float)(1.0 - dep * exp(-d2 * d2));
            }
    }
}

/* Uneven backlight: vignetting falling to half at the farthest corner (cos⁴-like,
 * 1/(1 + k r²)²), a gentle gradient and a broad ripple from the diffuser. */
static int camera_init(camera *cam, const synth_scene *sc, const sp_synth_opts *o, sp_error *err)
{
    int w = sc->width, h = sc->height;
    memset(cam, 0, sizeof *cam);
    cam->light = malloc((size_t)w * (size_t)h * sizeof(float));
    if (!cam->light)
        return sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for a %dx%d light map", w, h);
    uint64_t kl = rng_key(o->seed, RNG_LIGHT, 0, 0);
    double cx = 0.5 * (w - 1) + rng_range(kl, 0, -0.06, 0.06) * w;
    double cy = 0.5 * (h - 1) + rng_range(kl, 1, -0.06, 0.06) * h;
    double fx = fmax(cx, w - 1 - cx), fy = fmax(cy, h - 1 - cy);
    double kv = (sqrt(2.0) - 1.0) / (fx * fx + fy * fy);
    double lx = rng_range(kl, 2, 0.8, 1.6) * w, ly = rng_range(kl, 3, 0.8, 1.6) * h;
    double p1 = rng_range(kl, 4, 0, 2 * PI), p2 = rng_range(kl, 5, 0, 2 * PI);
    double p3 = rng_range(kl, 6, 0, 2 * PI), l3 = rng_range(kl, 7, 0.5, 0.9) * (w + h);
    double gx = rng_range(kl, 8, -0.05, 0.05), gy = rng_range(kl, 9, -0.05, 0.05);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double r2 = (x - cx) * (x - cx) + (y - cy) * (y - cy);
            double v = 1.0 / ((1.0 + kv * r2) * (1.0 + kv * r2));
            double u = 1.0 + 0.05 * sin(2 * PI * x / lx + p1) * cos(2 * PI * y / ly + p2) +
                       0.025 * sin(2 * PI * (x + y) / l3 + p3) + gx * (x - cx) / w + gy * (y - cy) / h;
            cam->light[(size_t)y * w + x] = (float)(v * u);
        }
    add_dust(cam->light, w, h, o->seed);
    cam->cx = cx;
    cam->run_s = sc->frames > 1 ? (sc->frames - 1) / sc->fps : 1.0;
    cam->flick_ph = rng_range(kl, 10, 0, 2 * PI);
    cam->seed = o->seed;
    cam->maxdn = o->bytes == 1 ? 255 : (1 << o->bits) - 1;
    cam->offset_dn = 0.02 * cam->maxdn;
    cam->level_dn = 0.76 * cam->maxdn;
    cam->e_per_dn = 9000.0 / cam->level_dn; /* ~9000 e⁻ at the centre: 1 % shot noise */
    cam->read_e = 9.0;
    return SP_OK;
}

/* Relative light of frame f: slow drift over the run (dimming lamp, warming diffuser) and
 * flicker at twice a 50 Hz mains frequency with a small random part. */
static double frame_gain(const camera *cam, int64_t f, double fps, double *tilt)
{
    double t = f / fps;
    double frac = t / cam->run_s;
    uint64_t kf = rng_key(cam->seed, RNG_FLICKER, (uint64_t)f, 0);
    *tilt = 0.03 * frac; /* the light's left-right balance shifts over the run */
    return (1.0 - 0.04 * frac) *
           (1.0 + 0.02 * sin(2 * PI * 100.0 * t + cam->flick_ph) + 0.004 * rng_normal(kf, 0));
}

/* Approximately standard normal from one 64-bit draw: the sum of four 16-bit uniforms
 * (Irwin–Hall, n = 4) rescaled to unit variance. Tails stop at 3.46 sigma, which camera noise
 * does not miss, and it costs no log or sine per pixel. */
static inline double fast_normal(uint64_t u)
{
    double s = (double)(u & 0xffff) + (double)((u >> 16) & 0xffff) + (double)((u >> 32) & 0xffff) +
               (double)(u >> 48);
    /* mean 4·32767.5, variance 4·(65536² − 1)/12 */
    return (s - 131070.0) * (1.0 / 37837.2);
}

/* Light × transmission → electrons → shot and read noise → DN in the image. */
static void expose(const camera *cam, const float *trans, int64_t f, double fps, sp_image *img)
{
    int w = img->width, h = img->height;
    double tilt;
    double g = frame_gain(cam, f, fps, &tilt) * cam->level_dn * cam->e_per_dn;
    uint64_t kn = rng_key(cam->seed, RNG_NOISE, (uint64_t)f, 0);
    double r2 = cam->read_e * cam->read_e, inv = 1.0 / cam->e_per_dn;
    double maxdn = cam->maxdn;
    for (int y = 0; y < h; y++) {
        const float *lr = cam->light + (size_t)y * w;
        const float *tr = trans + (size_t)y * w;
        uint8_t *r8 = (uint8_t *)img->data + (ptrdiff_t)y * img->stride;
        uint16_t *r16 = (uint16_t *)r8;
        for (int x = 0; x < w; x++) {
            double col = 1.0 + tilt * (x - cam->cx) / w;
            double e = g * col * lr[x] * tr[x];
            /* shot noise (Poisson, variance = signal, as a normal) plus read noise */
            double z = fast_normal(rng_u64(kn, (uint64_t)y * (uint64_t)w + (uint64_t)x));
            double v = cam->offset_dn + (e + z * sqrt(e + r2)) * inv;
            v = v < 0.0 ? 0.0 : v > maxdn ? maxdn : v;
            unsigned q = (unsigned)(v + 0.5);
            if (img->bytes == 1)
                r8[x] = (uint8_t)q;
            else
                r16[x] = (uint16_t)q;
        }
    }
}

/* ---------------------------------------------------------------- per-frame bubbles */

typedef struct fbubble {
    size_t track; /* index in the scene */
    synth_state st;
    sp_bubble_look lk;
    int edge, overlap;
} fbubble;

typedef struct slot {
    int64_t frame;
    fbubble *b;
    size_t n, cap;
    float *trans;
    sp_patch patch;
    sp_image img;
    int rc;
    sp_error err;
} slot;

/* Points on the outline of ellipse A, grown by `grow` px, tested against ellipse B grown alike:
 * the silhouettes touch if any lies inside, or if one centre lies inside the other. */
static int inside_ellipse(const synth_state *e, double grow, double x, double y)
{
    double t = e->tilt_deg * (PI / 180.0), c = cos(t), s = sin(t);
    double dx = x - e->x, dy = -(y - e->y);
    double u = dx * c + dy * s, v = -dx * s + dy * c;
    double a = 0.5 * e->major + grow, b = 0.5 * e->minor + grow;
    return (u * u) / (a * a) + (v * v) / (b * b) <= 1.0;
}

static int outline_hits(const synth_state *a, const synth_state *b, double grow)
{
    double t = a->tilt_deg * (PI / 180.0), c = cos(t), s = sin(t);
    double ra = 0.5 * a->major + grow, rb = 0.5 * a->minor + grow;
    for (int k = 0; k < 128; k++) {
        double ph = 2 * PI * k / 128.0, u = ra * cos(ph), v = rb * sin(ph);
        double x = a->x + u * c - v * s, y = a->y - (u * s + v * c);
        if (inside_ellipse(b, grow, x, y))
            return 1;
    }
    return inside_ellipse(b, grow, a->x, a->y);
}

static int silhouettes_touch(const synth_state *a, const synth_state *b)
{
    const double grow = 0.5; /* touching within a pixel counts */
    double ha = 0.5 * a->major + grow, hb = 0.5 * b->major + grow;
    double dx = a->x - b->x, dy = a->y - b->y;
    if (dx * dx + dy * dy > (ha + hb) * (ha + hb))
        return 0;
    return outline_hits(a, b, grow) || outline_hits(b, a, grow);
}

static int state_on_edge(const synth_scene *sc, const synth_state *st);

static int gather_frame(const synth_scene *sc, int64_t f, slot *s, sp_error *err)
{
    s->frame = f;
    s->n = 0;
    /* Live tracks have f_first in (f - max_life, f]; tracks are sorted by f_first. */
    size_t lo = 0, hi = sc->ntracks;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (sc->tracks[mid].f_first <= f - sc->max_life)
            lo = mid + 1;
        else
            hi = mid;
    }
    double t = f / sc->fps;
    for (size_t i = lo; i < sc->ntracks && sc->tracks[i].f_first <= f; i++) {
        const synth_track *tr = &sc->tracks[i];
        if (f > tr->f_last)
            continue;
        synth_state st;
        synth_track_state(tr, t, &st);
        if (!synth_state_visible(sc, &st))
            continue;
        if (s->n == s->cap) {
            size_t nc = s->cap ? 2 * s->cap : 64;
            fbubble *nb = realloc(s->b, nc * sizeof *nb);
            if (!nb)
                return sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory listing bubbles");
            s->b = nb;
            s->cap = nc;
        }
        fbubble *b = &s->b[s->n++];
        b->track = i;
        b->st = st;
        synth_track_look(sc, tr, &st, &b->lk);
        b->edge = state_on_edge(sc, &st);
        b->overlap = 0;
    }
    for (size_t i = 0; i < s->n; i++)
        for (size_t j = i + 1; j < s->n; j++)
            if (silhouettes_touch(&s->b[i].st, &s->b[j].st))
                s->b[i].overlap = s->b[j].overlap = 1;
    return SP_OK;
}

static int render_frame(const synth_scene *sc, const camera *cam, slot *s)
{
    int w = sc->width, h = sc->height;
    size_t np = (size_t)w * (size_t)h;
    for (size_t i = 0; i < np; i++)
        s->trans[i] = 1.0f;
    for (size_t i = 0; i < s->n; i++) {
        if (sp_render_bubble(&s->b[i].lk, w, h, &s->patch))
            return sp_error_set(&s->err, SP_ERR_INTERNAL, "synth: out of memory rendering frame %lld",
                                (long long)s->frame);
        sp_render_composite(&s->patch, s->trans, w, h);
    }
    expose(cam, s->trans, s->frame, sc->fps, &s->img);
    return SP_OK;
}

/* ---------------------------------------------------------------- files */

static int join(char *out, const char *dir, const char *name, sp_error *err)
{
    int n = snprintf(out, PATHMAX, "%s/%s", dir, name);
    if (n < 0 || n >= PATHMAX)
        return sp_error_set(err, SP_ERR_INPUT, "%s: path too long", dir);
    return SP_OK;
}

/* mkdir -p */
static int make_dirs(const char *dir, sp_error *err)
{
    char buf[PATHMAX];
    size_t n = strlen(dir);
    if (n == 0 || n >= sizeof buf)
        return sp_error_set(err, SP_ERR_INPUT, "%s: output directory name empty or too long", dir);
    memcpy(buf, dir, n + 1);
    for (size_t i = 1; i <= n; i++) {
        if (buf[i] == '/' || buf[i] == '\0') {
            char keep = buf[i];
            buf[i] = '\0';
            if (mkdir(buf, 0777) != 0 && errno != EEXIST)
                return sp_error_set(err, SP_ERR_INPUT, "%s: cannot create directory: %s", buf,
                                    strerror(errno));
            buf[i] = keep;
        }
    }
    struct stat st;
    if (stat(dir, &st) != 0 || !S_ISDIR(st.st_mode))
        return sp_error_set(err, SP_ERR_INPUT, "%s: not a directory", dir);
    if (access(dir, W_OK | X_OK) != 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: output directory is not writable", dir);
    return SP_OK;
}

static int finish_file(FILE *f, const char *tmp, const char *final, sp_error *err)
{
    int bad = ferror(f);
    if (fclose(f) != 0 || bad)
        return sp_error_set(err, SP_ERR_INPUT, "%s: write failed: %s", final, strerror(errno));
    if (rename(tmp, final) != 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", final, strerror(errno));
    return SP_OK;
}

typedef struct track_acc {
    int64_t n, first, last;
    double st, stt, sx, sxt, sy, syt;
} track_acc;

static void write_bubble_rows(FILE *f, const synth_scene *sc, const slot *s, track_acc *acc)
{
    double sc_mm = sc->mm_per_px, t = s->frame / sc->fps;
    for (size_t i = 0; i < s->n; i++) {
        const fbubble *b = &s->b[i];
        const synth_track *tr = &sc->tracks[b->track];
        double x_mm = b->st.x * sc_mm, y_mm = (sc->height - 1 - b->st.y) * sc_mm;
        double M = b->st.major * sc_mm, m = b->st.minor * sc_mm;
        int in_focus = fabs(tr->z_mm) <= 0.5 * sc->dof_mm;
        fprintf(f, "%lld,%.6f,%d,%.4f,%.4f,%.5f,%.5f,%.5f,%.5f,%.3f,%.5f,%.5f,%.5f,%d,%.4f,%.4f,%.4f,%d,%d\n",
                (long long)s->frame, t, tr->id, b->st.x, b->st.y, x_mm, y_mm, M, m, b->st.tilt_deg,
                sqrt(M * m), cbrt(M * M * m), m / M, b->edge, b->st.major, b->st.minor, tr->z_mm, in_focus,
                b->overlap);
        track_acc *a = &acc[b->track];
        if (a->n == 0)
            a->first = s->frame;
        a->last = s->frame;
        a->n++;
        a->st += t;
        a->stt += t * t;
        a->sx += x_mm;
        a->sxt += x_mm * t;
        a->sy += y_mm;
        a->syt += y_mm * t;
    }
}

static double ls_slope(int64_t n, double st, double stt, double sv, double svt)
{
    double den = n * stt - st * st;
    if (n < 2 || fabs(den) < 1e-18)
        return 0.0;
    return (n * svt - st * sv) / den;
}

static int cmp_dbl(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

/* The edge rule of the truth rows: the outline reaches the centre line of a border pixel row or
 * column. */
static int state_on_edge(const synth_scene *sc, const synth_state *st)
{
    double hx, hy;
    sp_ellipse_extent(0.5 * st->major, 0.5 * st->minor, st->tilt_deg, &hx, &hy);
    return st->x - hx <= 0.0 || st->x + hx >= sc->width - 1.0 || st->y - hy <= 0.0 ||
           st->y + hy >= sc->height - 1.0;
}

/* Median volume-equivalent diameter (px) and least-squares growth rate (px/s) over the track's
 * non-edge rows, as tracks.csv defines them, by replaying the track's frames. `buf` holds the
 * track's life in doubles. Falls back to all rows when every row touches the edge. */
static void track_size(const synth_scene *sc, const synth_track *tr, const track_acc *a, double *buf,
                       double *d_med, double *growth)
{
    for (int pass = 0; pass < 2; pass++) {
        size_t k = 0;
        double st_ = 0, stt = 0, sd = 0, sdt = 0;
        for (int64_t f = a->first; f <= a->last; f++) {
            synth_state st;
            double t = f / sc->fps;
            synth_track_state(tr, t, &st);
            if (!synth_state_visible(sc, &st) || (pass == 0 && state_on_edge(sc, &st)))
                continue;
            double d = cbrt(st.major * st.major * st.minor);
            buf[k++] = d;
            st_ += t;
            stt += t * t;
            sd += d;
            sdt += d * t;
        }
        if (k < 2 && pass == 0)
            continue; /* one non-edge row gives no slope: use all rows */
        if (k == 0)
            continue;
        *growth = ls_slope((int64_t)k, st_, stt, sd, sdt);
        qsort(buf, k, sizeof *buf, cmp_dbl);
        *d_med = k % 2 ? buf[k / 2] : 0.5 * (buf[k / 2 - 1] + buf[k / 2]);
        return;
    }
    *d_med = tr->d_vol_px;
    *growth = 0.0;
}

static int write_tracks(FILE *f, const synth_scene *sc, const track_acc *acc, sp_error *err)
{
    int64_t life = sc->max_life > 0 ? sc->max_life : 1;
    double *buf = malloc((size_t)life * sizeof *buf);
    if (!buf)
        return sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for a track of %lld frames",
                            (long long)life);
    fprintf(f, "track,frame_first,frame_last,n,d_vol_mm,growth_mm_s,vx_mm_s,vy_mm_s,speed_mm_s,site,z_mm,"
               "source,born,x_first_mm,y_first_mm,d_first_mm,osc_amp_mm,osc_hz\n");
    for (size_t i = 0; i < sc->ntracks; i++) {
        const track_acc *a = &acc[i];
        const synth_track *tr = &sc->tracks[i];
        if (a->n == 0)
            continue;
        double vx = ls_slope(a->n, a->st, a->stt, a->sx, a->sxt);
        double vy = ls_slope(a->n, a->st, a->stt, a->sy, a->syt);
        double s = sc->mm_per_px, d_med = tr->d_vol_px, growth = 0.0;
        /* A constant volume needs no replay: the median is the volume's diameter, growth 0. */
        if (tr->growth_px_s != 0.0)
            track_size(sc, tr, a, buf, &d_med, &growth);
        synth_state s0;
        synth_track_state(tr, a->first / sc->fps, &s0);
        fprintf(f, "%d,%lld,%lld,%lld,%.5f,%.5f,%.4f,%.4f,%.4f,%d,%.4f,%d,%d,%.5f,%.5f,%.5f,%.4f,%.4f\n",
                tr->id, (long long)a->first, (long long)a->last, (long long)a->n, d_med * s, growth * s, vx,
                vy, hypot(vx, vy), tr->site, tr->z_mm, tr->source, tr->born, s0.x * s,
                (sc->height - 1 - s0.y) * s, cbrt(s0.major * s0.major * s0.minor) * s, tr->wob_amp * s,
                tr->wob_hz);
    }
    free(buf);
    return SP_OK;
}

static int cmp_time(const void *a, const void *b)
{
    return cmp_dbl(a, b);
}

/* truth_sites.csv: per site the births seen in the run (tracks with that site): their number, the
 * emission rate (n - 1)/(t_last - t_first) over the detachment times, the median detachment
 * diameter and growth rate, beside the generating parameters. */
static int write_sites(FILE *f, const synth_scene *sc, sp_error *err)
{
    double *tb = malloc((sc->ntracks ? sc->ntracks : 1) * 3 * sizeof *tb);
    if (!tb)
        return sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for %zu tracks", sc->ntracks);
    double *db = tb + (sc->ntracks ? sc->ntracks : 1), *gb = db + (sc->ntracks ? sc->ntracks : 1);
    double s = sc->mm_per_px;
    fprintf(f, "site,x_mm,y_mm,n,rate_hz,d_detach_mm,growth_mm_s,interval_cv,rate_nominal_hz,"
               "d_detach_nominal_mm,growth_nominal_mm_s\n");
    for (size_t k = 0; k < sc->nsites; k++) {
        const synth_site *p = &sc->sites[k];
        size_t n = 0;
        for (size_t i = 0; i < sc->ntracks; i++) {
            const synth_track *tr = &sc->tracks[i];
            if (tr->site != (int)k + 1)
                continue;
            tb[n] = tr->t0;
            db[n] = tr->d_vol_px * s;
            gb[n++] = tr->growth_px_s * s;
        }
        double rate = 0, cv = NAN, dd = NAN, gg = NAN;
        if (n > 0) {
            qsort(tb, n, sizeof *tb, cmp_time);
            qsort(db, n, sizeof *db, cmp_dbl);
            qsort(gb, n, sizeof *gb, cmp_dbl);
            dd = n % 2 ? db[n / 2] : 0.5 * (db[n / 2 - 1] + db[n / 2]);
            gg = n % 2 ? gb[n / 2] : 0.5 * (gb[n / 2 - 1] + gb[n / 2]);
            double span = tb[n - 1] - tb[0];
            if (n >= 2 && span > 0)
                rate = (n - 1) / span;
            if (n >= 3 && span > 0) {
                double mean = span / (n - 1), ss = 0;
                for (size_t j = 1; j < n; j++)
                    ss += (tb[j] - tb[j - 1] - mean) * (tb[j] - tb[j - 1] - mean);
                cv = sqrt(ss / (n - 2)) / mean;
            }
        }
        fprintf(f, "%zu,%.5f,%.5f,%zu,%.5f,%.5f,%.5f,%.5f,%.5f,%.5f,%.5f\n", k + 1, p->x_px * s,
                (sc->height - 1 - p->y_px) * s, n, rate, dd, gg, cv, p->rate_hz, p->d_detach_mm,
                p->growth_mm_s);
    }
    free(tb);
    return SP_OK;
}

static void write_scene_json(FILE *f, const synth_scene *sc, const sp_synth_opts *o, int bits, size_t ntracks,
                             int64_t rows)
{
    fprintf(f, "{\n");
    fprintf(f, "  \"scenario\": \"%s\",\n", sc->name);
    fprintf(f, "  \"description\": \"%s\",\n", sc->description);
    fprintf(f, "  \"version\": \"%s\",\n", SP_VERSION);
    fprintf(f, "  \"width\": %d,\n  \"height\": %d,\n", sc->width, sc->height);
    fprintf(f, "  \"bytes\": %d,\n  \"bits\": %d,\n", o->bytes, bits);
    fprintf(f, "  \"fps\": %.6g,\n  \"mm_per_px\": %.6g,\n", sc->fps, sc->mm_per_px);
    fprintf(f, "  \"frames\": %lld,\n", (long long)sc->frames);
    fprintf(f, "  \"seed\": %llu,\n", (unsigned long long)o->seed);
    fprintf(f, "  \"dof_mm\": %.6g,\n", sc->dof_mm);
    fprintf(f, "  \"in_focus_rule\": \"abs(z_mm) <= dof_mm / 2\",\n");
    fprintf(f, "  \"edge_rule\": \"the true outline reaches the centre of a border pixel row or column\",\n");
    fprintf(f, "  \"overlap_rule\": \"true outlines, each grown by 0.5 px, intersect\",\n");
    fprintf(f, "  \"exposure_s\": %.6g,\n", sc->exposure_s);
    fprintf(f, "  \"defocus_blur_px_per_mm\": %.6g,\n", sc->blur_px_per_mm);
    fprintf(f, "  \"tracks\": %zu,\n  \"truth_rows\": %lld,\n", ntracks, (long long)rows);
    fprintf(f, "  \"frames_png\": %s,\n  \"video\": %s%s\n", o->png ? "\"frames/frame_%05d.png\"" : "null",
            o->video ? "\"video.mkv\"" : "null", sc->pings ? "," : "");
    if (sc->pings) {
        /* The audio's truth: its clock runs ahead of the video's by the offset. */
        fprintf(f, "  \"audio\": \"audio.wav\",\n  \"audio_sample_rate\": %d,\n", sc->audio_rate);
        fprintf(f, "  \"audio_offset_s\": %.9g,\n", sc->audio_offset_s);
        fprintf(f, "  \"audio_clock_rule\": \"t_audio_s = t_video_s + audio_offset_s\",\n");
        fprintf(f, "  \"audio_length_s\": %.9g,\n  \"noise_rms\": %.6g,\n", sc->audio_len_s, sc->noise_rms);
        fprintf(f, "  \"depth_m\": %.6g,\n", sc->depth_m);
        fprintf(f,
                "  \"ping_model\": \"Minnaert with Devin surface tension and Prosperetti thermal exponent, "
                "water 20 C, air; damping delta from REFERENCES.md model values\"\n");
    }
    fprintf(f, "}\n");
}

/* ---------------------------------------------------------------- run */

/* The empty field: the same light, window dust and camera with no bubble in view, averaged over
 * 16 exposures taken just before the run, as a lab records before releasing bubbles. Measuring
 * still bubbles needs it: a background estimated from the frames would absorb them. */
#define EMPTY_FIELD_EXPOSURES 16
static int write_empty_field(const synth_scene *sc, const camera *cam, const sp_synth_opts *o,
                             const char *dir, sp_error *err)
{
    int rc = SP_OK;
    size_t npx = (size_t)sc->width * (size_t)sc->height;
    float *ones = malloc(npx * sizeof *ones);
    double *sum = calloc(npx, sizeof *sum);
    sp_image img = {0}, avg = {0};
    char fin[PATHMAX], tmp[PATHMAX];
    if (!ones || !sum) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for the empty field");
        goto done;
    }
    if ((rc = join(fin, dir, "empty_field.png", err)) || (rc = join(tmp, dir, "empty_field.png.part", err)))
        goto done;
    if ((rc = sp_image_alloc(&img, sc->width, sc->height, o->bytes, err)) ||
        (rc = sp_image_alloc(&avg, sc->width, sc->height, o->bytes, err)))
        goto done;
    avg.bits = img.bits = o->bits;
    for (size_t i = 0; i < npx; i++)
        ones[i] = 1.f;
    for (int k = 1; k <= EMPTY_FIELD_EXPOSURES; k++) {
        expose(cam, ones, -k, sc->fps, &img);
        for (int y = 0; y < sc->height; y++)
            for (int x = 0; x < sc->width; x++)
                sum[(size_t)y * sc->width + x] += img.bytes == 1 ? sp_row8(&img, y)[x] : sp_row16(&img, y)[x];
    }
    for (int y = 0; y < sc->height; y++)
        for (int x = 0; x < sc->width; x++) {
            unsigned q = (unsigned)(sum[(size_t)y * sc->width + x] / EMPTY_FIELD_EXPOSURES + 0.5);
            uint8_t *row = (uint8_t *)avg.data + (ptrdiff_t)y * avg.stride;
            if (avg.bytes == 1)
                row[x] = (uint8_t)q;
            else
                ((uint16_t *)row)[x] = (uint16_t)q;
        }
    if ((rc = sp_png_write(tmp, &avg, err))) {
        unlink(tmp);
        goto done;
    }
    if (rename(tmp, fin) != 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", fin, strerror(errno));
        unlink(tmp);
    }
done:
    free(ones);
    free(sum);
    sp_image_free(&img);
    sp_image_free(&avg);
    return rc;
}

int sp_synth_run(const char *scenario, const char *outdir, const sp_synth_opts *opts, sp_error *err)
{
    int rc = SP_OK;
    sp_synth_opts o;
    synth_scene sc;
    camera cam;
    slot *slots = NULL;
    int nslots = 0;
    track_acc *acc = NULL;
    FILE *fb = NULL, *ft = NULL, *fj = NULL, *fs = NULL;
    sp_video_writer *vw = NULL;
    char p_bub[PATHMAX] = "", p_bub_t[PATHMAX] = "", p_trk[PATHMAX] = "", p_trk_t[PATHMAX] = "";
    char p_js[PATHMAX] = "", p_js_t[PATHMAX] = "", p_vid[PATHMAX] = "", p_vid_t[PATHMAX] = "";
    char p_frames[PATHMAX] = "", p_sit[PATHMAX] = "", p_sit_t[PATHMAX] = "";
    int64_t rows = 0;

    memset(&sc, 0, sizeof sc);
    memset(&cam, 0, sizeof cam);
    if (opts)
        o = *opts;
    else
        sp_synth_opts_default(&o);
    if (!outdir || !outdir[0])
        return sp_error_set(err, SP_ERR_INPUT, "synth: no output directory given");
    if (o.bytes != 1 && o.bytes != 2)
        return sp_error_set(err, SP_ERR_INPUT, "synth: sample size must be 1 or 2 bytes, not %d", o.bytes);
    int bits = o.bytes == 1 ? 8 : (o.bits == 0 ? 16 : o.bits);
    if (o.bytes == 2 && (bits < 9 || bits > 16))
        return sp_error_set(err, SP_ERR_INPUT, "synth: 16-bit output needs 9..16 significant bits, not %d",
                            o.bits);
    o.bits = bits;
    rc = synth_scene_build(scenario, &o, &sc, err);
    if (rc)
        return rc;

    if ((rc = join(p_bub, outdir, "truth_bubbles.csv", err)) ||
        (rc = join(p_bub_t, outdir, "truth_bubbles.csv.part", err)) ||
        (rc = join(p_trk, outdir, "truth_tracks.csv", err)) ||
        (rc = join(p_trk_t, outdir, "truth_tracks.csv.part", err)) ||
        (rc = join(p_js, outdir, "scene.json", err)) || (rc = join(p_js_t, outdir, "scene.json.part", err)) ||
        (rc = join(p_vid, outdir, "video.mkv", err)) || (rc = join(p_vid_t, outdir, "video.part.mkv", err)) ||
        (rc = join(p_sit, outdir, "truth_sites.csv", err)) ||
        (rc = join(p_sit_t, outdir, "truth_sites.csv.part", err)) ||
        (rc = join(p_frames, outdir, "frames", err)))
        goto fail;
    if ((rc = make_dirs(outdir, err)))
        goto fail;
    if (o.png && (rc = make_dirs(p_frames, err)))
        goto fail;
    if ((rc = camera_init(&cam, &sc, &o, err)))
        goto fail;
    if ((rc = write_empty_field(&sc, &cam, &o, outdir, err)))
        goto fail;

    fb = fopen(p_bub_t, "w");
    if (!fb) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot create: %s", p_bub_t, strerror(errno));
        goto fail;
    }
    fprintf(fb,
            "frame,t_s,track,x_px,y_px,x_mm,y_mm,major_mm,minor_mm,tilt_deg,d_area_mm,d_vol_mm,aspect,edge,"
            "major_px,minor_px,z_mm,in_focus,overlap\n");
    acc = calloc(sc.ntracks ? sc.ntracks : 1, sizeof *acc);
    if (!acc) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for %zu tracks", sc.ntracks);
        goto fail;
    }
    if (o.video) {
        sp_video_writer_opts vo = {"ffv1", sc.fps, 0};
        if ((rc = sp_video_writer_open(&vw, p_vid_t, sc.width, sc.height, o.bytes, &vo, err)))
            goto fail;
    }

    int nt = o.threads > 0 ? o.threads : omp_get_max_threads();
    if (nt < 1)
        nt = 1;
    nslots = 2 * nt;
    slots = calloc((size_t)nslots, sizeof *slots);
    if (!slots) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory");
        goto fail;
    }
    for (int i = 0; i < nslots; i++) {
        slots[i].trans = malloc((size_t)sc.width * (size_t)sc.height * sizeof(float));
        if (!slots[i].trans) {
            rc = sp_error_set(err, SP_ERR_INTERNAL, "synth: out of memory for frame buffers");
            goto fail;
        }
        if ((rc = sp_image_alloc(&slots[i].img, sc.width, sc.height, o.bytes, err)))
            goto fail;
        slots[i].img.bits = bits;
    }

    for (int64_t f0 = 0; f0 < sc.frames; f0 += nslots) {
        int nb = (int)(sc.frames - f0 < nslots ? sc.frames - f0 : nslots);
        for (int i = 0; i < nb; i++) { /* in frame order: truth rows and accumulators */
            if ((rc = gather_frame(&sc, f0 + i, &slots[i], err)))
                goto fail;
            write_bubble_rows(fb, &sc, &slots[i], acc);
            rows += (int64_t)slots[i].n;
        }
#pragma omp parallel for schedule(dynamic, 1) num_threads(nt)
        for (int i = 0; i < nb; i++) {
            slot *s = &slots[i];
            sp_error_clear(&s->err);
            s->rc = render_frame(&sc, &cam, s);
            if (!s->rc && o.png) {
                char name[64], fin[PATHMAX], tmp[PATHMAX];
                snprintf(name, sizeof name, "frame_%05lld.png", (long long)s->frame);
                int n1 = snprintf(fin, sizeof fin, "%s/%s", p_frames, name);
                int n2 = snprintf(tmp, sizeof tmp, "%s/%s.part", p_frames, name);
                if (n1 < 0 || n1 >= PATHMAX || n2 < 0 || n2 >= PATHMAX)
                    s->rc = sp_error_set(&s->err, SP_ERR_INPUT, "%s: path too long", p_frames);
                else if ((s->rc = sp_png_write(tmp, &s->img, &s->err)) != 0)
                    unlink(tmp);
                else if (rename(tmp, fin) != 0) {
                    s->rc = sp_error_set(&s->err, SP_ERR_INPUT, "%s: cannot rename into place: %s", fin,
                                         strerror(errno));
                    unlink(tmp);
                }
            }
        }
        for (int i = 0; i < nb; i++) {
            if (slots[i].rc) {
                rc = slots[i].rc;
                if (err)
                    *err = slots[i].err;
                goto fail;
            }
            if (vw && (rc = sp_video_writer_put(vw, &slots[i].img, err)))
                goto fail;
        }
        if (o.progress)
            o.progress(o.progress_ud, f0 + nb, sc.frames);
    }

    if (vw) {
        rc = sp_video_writer_close(vw, err);
        vw = NULL;
        if (rc)
            goto fail;
        if (rename(p_vid_t, p_vid) != 0) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", p_vid, strerror(errno));
            goto fail;
        }
    }
    rc = finish_file(fb, p_bub_t, p_bub, err);
    fb = NULL;
    if (rc)
        goto fail;
    ft = fopen(p_trk_t, "w");
    if (!ft) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot create: %s", p_trk_t, strerror(errno));
        goto fail;
    }
    if ((rc = write_tracks(ft, &sc, acc, err)))
        goto fail;
    rc = finish_file(ft, p_trk_t, p_trk, err);
    ft = NULL;
    if (rc)
        goto fail;
    if (sc.nsites > 0) {
        fs = fopen(p_sit_t, "w");
        if (!fs) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot create: %s", p_sit_t, strerror(errno));
            goto fail;
        }
        if ((rc = write_sites(fs, &sc, err)))
            goto fail;
        rc = finish_file(fs, p_sit_t, p_sit, err);
        fs = NULL;
        if (rc)
            goto fail;
    } else {
        unlink(p_sit); /* no sites: a table left by an earlier run would mislead */
    }
    if (sc.pings && (rc = synth_audio_write(&sc, o.seed, outdir, err)))
        goto fail;
    size_t ntr = 0;
    for (size_t i = 0; i < sc.ntracks; i++)
        ntr += acc[i].n > 0;
    fj = fopen(p_js_t, "w");
    if (!fj) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot create: %s", p_js_t, strerror(errno));
        goto fail;
    }
    write_scene_json(fj, &sc, &o, bits, ntr, rows);
    rc = finish_file(fj, p_js_t, p_js, err);
    fj = NULL;
    if (rc)
        goto fail;

fail:
    if (vw) {
        sp_video_writer_close(vw, NULL);
        unlink(p_vid_t);
    }
    if (fb) {
        fclose(fb);
        unlink(p_bub_t);
    }
    if (ft) {
        fclose(ft);
        unlink(p_trk_t);
    }
    if (fj) {
        fclose(fj);
        unlink(p_js_t);
    }
    if (fs) {
        fclose(fs);
        unlink(p_sit_t);
    }
    if (rc && p_js_t[0]) { /* partial temporaries never stay behind */
        unlink(p_vid_t);
        unlink(p_bub_t);
        unlink(p_trk_t);
        unlink(p_js_t);
        unlink(p_sit_t);
    }
    for (int i = 0; i < nslots; i++) {
        free(slots[i].b);
        free(slots[i].trans);
        sp_patch_free(&slots[i].patch);
        sp_image_free(&slots[i].img);
    }
    free(slots);
    free(acc);
    free(cam.light);
    synth_scene_free(&sc);
    return rc;
}

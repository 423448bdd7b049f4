/* Overlay drawing. Kept deliberately plain (no anti-aliasing): an outline pixel is either the
 * colour of its state or the untouched frame, so a reader (or a test) can tell exactly what was
 * drawn where. */
#include "report/canvas.h"

#include <errno.h>
#include <math.h>
#include <png.h>
#include <setjmp.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int sp_canvas_from_image(sp_canvas *c, const sp_image *img, sp_error *err)
{
    int rc = sp_check_dims(img->width, img->height, "overlay frame", err);
    if (rc)
        return rc;
    if (img->bytes != 1 && img->bytes != 2)
        return sp_error_set(err, SP_ERR_INTERNAL, "overlay frame: unsupported sample size %d", img->bytes);
    if (c->w != img->width || c->h != img->height || !c->rgb) {
        free(c->rgb);
        c->rgb = malloc((size_t)img->width * (size_t)img->height * 3);
        if (!c->rgb) {
            c->w = c->h = 0;
            return sp_error_set(err, SP_ERR_INTERNAL, "overlay frame: out of memory");
        }
        c->w = img->width;
        c->h = img->height;
    }
    int shift = img->bytes == 2 ? (img->bits > 8 && img->bits <= 16 ? img->bits - 8 : 8) : 0;
    for (int y = 0; y < c->h; y++) {
        unsigned char *o = c->rgb + (size_t)y * (size_t)c->w * 3;
        for (int x = 0; x < c->w; x++) {
            unsigned v = img->bytes == 1 ? sp_row8(img, y)[x] : (unsigned)sp_row16(img, y)[x] >> shift;
            if (v > 255)
                v = 255;
            o[3 * x] = o[3 * x + 1] = o[3 * x + 2] = (unsigned char)v;
        }
    }
    return SP_OK;
}

void sp_canvas_free(sp_canvas *c)
{
    free(c->rgb);
    memset(c, 0, sizeof *c);
}

void sp_canvas_pixel(sp_canvas *c, int x, int y, sp_rgb col)
{
    if (x < 0 || y < 0 || x >= c->w || y >= c->h)
        return;
    unsigned char *p = c->rgb + ((size_t)y * (size_t)c->w + (size_t)x) * 3;
    p[0] = col.r;
    p[1] = col.g;
    p[2] = col.b;
}

void sp_canvas_line(sp_canvas *c, double fx0, double fy0, double fx1, double fy1, sp_rgb col)
{
    if (!isfinite(fx0) || !isfinite(fy0) || !isfinite(fx1) || !isfinite(fy1))
        return;
    /* Clamp far-off coordinates so the loop stays bounded on absurd table values. */
    double lim = 4.0 * SP_MAX_DIM;
    if (fabs(fx0) > lim || fabs(fy0) > lim || fabs(fx1) > lim || fabs(fy1) > lim)
        return;
    long x0 = lround(fx0), y0 = lround(fy0), x1 = lround(fx1), y1 = lround(fy1);
    long dx = labs(x1 - x0), dy = -labs(y1 - y0);
    long sx = x0 < x1 ? 1 : -1, sy = y0 < y1 ? 1 : -1, e = dx + dy;
    for (;;) {
        sp_canvas_pixel(c, (int)x0, (int)y0, col);
        if (x0 == x1 && y0 == y1)
            break;
        long e2 = 2 * e;
        if (e2 >= dy) {
            e += dy;
            x0 += sx;
        }
        if (e2 <= dx) {
            e += dx;
            y0 += sy;
        }
    }
}

void sp_canvas_ellipse(sp_canvas *c, double cx, double cy, double major, double minor, double tilt_deg,
                       int dash, sp_rgb col)
{
    if (!isfinite(cx) || !isfinite(cy) || !isfinite(major) || !isfinite(minor) || major <= 0 || minor <= 0 ||
        major > 4.0 * SP_MAX_DIM)
        return;
    if (!isfinite(tilt_deg))
        tilt_deg = 0;
    double a = 0.5 * major, b = 0.5 * minor;
    double th = tilt_deg * M_PI / 180.0, ct = cos(th), st = sin(th);
    /* Steps of at most a quarter pixel along the curve: no gaps, no doubled corners. */
    int n = (int)ceil(2 * M_PI * a * 4.0);
    if (n < 16)
        n = 16;
    double arc = 0, px = NAN, py = NAN;
    for (int i = 0; i < n; i++) {
        double ph = 2 * M_PI * i / n;
        double u = a * cos(ph), v = b * sin(ph);
        double x = cx + u * ct - v * st;
        double y = cy - (u * st + v * ct); /* y up on screen, y down in the image */
        if (isfinite(px))
            arc += hypot(x - px, y - py);
        px = x;
        py = y;
        /* Dashes 4 px on, 3 px off, measured along the outline. */
        if (dash && fmod(arc, 7.0) >= 4.0)
            continue;
        sp_canvas_pixel(c, (int)lround(x), (int)lround(y), col);
    }
}

/* 3×5 glyphs, one row per 3 bits (MSB = left column). */
static const unsigned char *glyph(char ch)
{
    static const unsigned char digits[10][5] = {
        {7, 5, 5, 5, 7}, {2, 6, 2, 2, 7}, {7, 1, 7, 4, 7}, {7, 1, 3, 1, 7}, {5, 5, 7, 1, 1},
        {7, 4, 7, 1, 7}, {7, 4, 7, 5, 7}, {7, 1, 1, 2, 2}, {7, 5, 7, 5, 7}, {7, 5, 7, 1, 7},
    };
    static const unsigned char minus[5] = {0, 0, 7, 0, 0}, plus[5] = {0, 2, 7, 2, 0},
                               hash[5] = {5, 7, 5, 7, 5};
    if (ch >= '0' && ch <= '9')
        return digits[ch - '0'];
    if (ch == '-')
        return minus;
    if (ch == '+')
        return plus;
    if (ch == '#')
        return hash;
    return NULL;
}

int sp_canvas_text_width(const char *s, int scale)
{
    int n = (int)strlen(s);
    return n ? (4 * n - 1) * scale : 0;
}

static void block(sp_canvas *c, int x, int y, int s, sp_rgb col)
{
    for (int j = 0; j < s; j++)
        for (int i = 0; i < s; i++)
            sp_canvas_pixel(c, x + i, y + j, col);
}

void sp_canvas_text(sp_canvas *c, int x, int y, const char *s, int scale, sp_rgb col, sp_rgb halo)
{
    if (scale < 1)
        scale = 1;
    for (int pass = 0; pass < 2; pass++) {
        int gx = x;
        for (const char *p = s; *p; p++, gx += 4 * scale) {
            const unsigned char *g = glyph(*p);
            if (!g)
                continue;
            for (int r = 0; r < 5; r++)
                for (int k = 0; k < 3; k++) {
                    if (!(g[r] >> (2 - k) & 1))
                        continue;
                    int bx = gx + k * scale, by = y + r * scale;
                    if (pass == 0) { /* halo first, then the glyph over it */
                        for (int dy = -1; dy <= 1; dy++)
                            for (int dx = -1; dx <= 1; dx++)
                                block(c, bx + dx, by + dy, scale, halo);
                    } else {
                        block(c, bx, by, scale, col);
                    }
                }
        }
    }
}

/* ---------------------------------------------------------------- PNG */

typedef struct png_mem {
    unsigned char *p;
    size_t n, cap;
    int oom;
    const char *what;
    sp_error *err;
    int reported;
} png_mem;

static void mem_write(png_structp png, png_bytep data, png_size_t len)
{
    png_mem *m = png_get_io_ptr(png);
    if (m->oom)
        return;
    if (m->n + len > m->cap) {
        size_t nc = m->cap ? m->cap : 65536;
        while (nc < m->n + len)
            nc *= 2;
        unsigned char *q = realloc(m->p, nc);
        if (!q) {
            m->oom = 1;
            return;
        }
        m->p = q;
        m->cap = nc;
    }
    memcpy(m->p + m->n, data, len);
    m->n += len;
}

static void mem_flush(png_structp png)
{
    (void)png;
}

static void on_error(png_structp png, png_const_charp msg)
{
    png_mem *m = png_get_error_ptr(png);
    if (!m->reported) {
        sp_error_set(m->err, SP_ERR_INTERNAL, "%s: cannot encode PNG: %s", m->what, msg);
        m->reported = 1;
    }
    png_longjmp(png, 1);
}

static void on_warning(png_structp png, png_const_charp msg)
{
    (void)png;
    (void)msg; /* the library never prints */
}

int sp_canvas_png(const sp_canvas *c, unsigned char **out, size_t *n, const char *what, sp_error *err)
{
    png_structp png = NULL;
    png_infop info = NULL;
    png_mem m = {NULL, 0, 0, 0, what, err, 0};
    *out = NULL;
    *n = 0;
    if (!c->rgb || c->w < 1 || c->h < 1)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: empty canvas", what);
    png = png_create_write_struct(PNG_LIBPNG_VER_STRING, &m, on_error, on_warning);
    if (!png || !(info = png_create_info_struct(png))) {
        if (png)
            png_destroy_write_struct(&png, NULL);
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory creating the PNG writer", what);
    }
    if (setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, &info);
        free(m.p);
        return m.reported ? err->code : sp_error_set(err, SP_ERR_INTERNAL, "%s: cannot encode PNG", what);
    }
    png_set_write_fn(png, &m, mem_write, mem_flush);
    /* Fast deflate and one fixed filter: an overlay is mostly flat grey, where harder deflate and
     * the adaptive filter choice cost several times the time for a few percent of size. */
    png_set_compression_level(png, 1);
    png_set_filter(png, PNG_FILTER_TYPE_BASE, PNG_FILTER_SUB);
    png_set_IHDR(png, info, (png_uint_32)c->w, (png_uint_32)c->h, 8, PNG_COLOR_TYPE_RGB, PNG_INTERLACE_NONE,
                 PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    png_write_info(png, info);
    for (int y = 0; y < c->h; y++)
        png_write_row(png, c->rgb + (size_t)y * (size_t)c->w * 3);
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    if (m.oom) {
        free(m.p);
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory encoding PNG", what);
    }
    *out = m.p;
    *n = m.n;
    return SP_OK;
}

int sp_canvas_png_write(const sp_canvas *c, const char *path, sp_error *err)
{
    unsigned char *p = NULL;
    size_t n = 0;
    int rc = sp_canvas_png(c, &p, &n, path, err);
    if (rc)
        return rc;
    rc = sp_png_bytes_write(p, n, path, err);
    free(p);
    return rc;
}

int sp_png_bytes_write(const unsigned char *p, size_t n, const char *path, sp_error *err)
{
    char tmp[4200];
    if (snprintf(tmp, sizeof tmp, "%s.tmp", path) >= (int)sizeof tmp)
        return sp_error_set(err, SP_ERR_INPUT, "%s: path too long", path);
    FILE *f = fopen(tmp, "wb");
    if (!f)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot open for writing: %s", tmp, strerror(errno));
    size_t w = fwrite(p, 1, n, f);
    if (fclose(f) != 0 || w != n) {
        remove(tmp);
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot write: %s", path, strerror(errno));
    }
    if (rename(tmp, path) != 0) {
        remove(tmp);
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", path, strerror(errno));
    }
    return SP_OK;
}

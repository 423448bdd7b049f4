/* Numbered still frames: a directory (natural order of the names) or a printf pattern such as
 * frames/f%05d.png. Each file is read when its turn comes; only the list of names is held. */
#include "io/ffimage.h"
#include "io/jpeg.h"
#include "io/png.h"
#include "io/source_internal.h"

#include <ctype.h>
#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>

/* Files in a directory taken as frames (case-insensitive); the content decides the decoder. */
static const char *const image_ext[] = {"png", "jpg", "jpeg", "tif", "tiff",
                                        "bmp", "pgm", "ppm",  "pbm", NULL};

/* Longest sequence a pattern may describe (stat calls at open). */
#define PATTERN_MAX_FRAMES 100000000LL

struct sp_stills {
    char *path; /* the directory, the pattern or the single file, for messages */
    int kind;
    char **names; /* DIR / SINGLE: full paths in frame order */
    int64_t n;    /* frames in the sequence */
    /* PATTERN: prefix + number (zero-padded to width) + suffix, numbers from first */
    char *prefix, *suffix;
    int width, zero;
    int64_t first;
    int64_t next; /* position of the next frame */
    int w, h, bytes, bits;
    char *name; /* scratch for pattern names */
    size_t name_size;
};

int sp_still_read(const char *path, sp_image *img, char *format, size_t format_size, sp_error *err)
{
    uint8_t head[16];
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot open (%s)", path, strerror(errno));
    size_t n = fread(head, 1, sizeof head, fp);
    fclose(fp);
    if (n == 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: empty file", path);
    const char *name = NULL;
    int rc;
    if (n >= 8 && memcmp(head, "\x89PNG\r\n\x1a\n", 8) == 0) {
        name = "png";
        rc = sp_png_read(path, img, err);
    } else if (n >= 3 && head[0] == 0xFF && head[1] == 0xD8 && head[2] == 0xFF) {
        name = "jpeg";
        rc = sp_jpeg_read(path, img, err);
    } else if ((name = sp_ffimage_sniff(head, n)) != NULL) {
        rc = sp_ffimage_read(path, img, err);
    } else {
        return sp_error_set(err, SP_ERR_INPUT, "%s: not a PNG, JPEG, TIFF, BMP or PNM image", path);
    }
    if (!rc && format)
        snprintf(format, format_size, "%s", name);
    return rc;
}

/* ---------------------------------------------------------------- names */

static int has_image_ext(const char *name)
{
    const char *dot = strrchr(name, '.');
    if (!dot || dot == name)
        return 0;
    for (int i = 0; image_ext[i]; i++)
        if (strcasecmp(dot + 1, image_ext[i]) == 0)
            return 1;
    return 0;
}

/* Natural order: runs of digits compare by value (f2 < f10), the rest byte by byte; names equal
 * under that rule fall back to plain byte order so the order is total. */
static int natural_cmp(const char *a, const char *b)
{
    const char *pa = a, *pb = b;
    while (*pa && *pb) {
        if (isdigit((unsigned char)*pa) && isdigit((unsigned char)*pb)) {
            while (*pa == '0')
                pa++;
            while (*pb == '0')
                pb++;
            size_t la = 0, lb = 0;
            while (isdigit((unsigned char)pa[la]))
                la++;
            while (isdigit((unsigned char)pb[lb]))
                lb++;
            if (la != lb)
                return la < lb ? -1 : 1;
            int c = memcmp(pa, pb, la);
            if (c)
                return c;
            pa += la;
            pb += lb;
        } else {
            if (*pa != *pb)
                return (unsigned char)*pa < (unsigned char)*pb ? -1 : 1;
            pa++;
            pb++;
        }
    }
    if (*pa || *pb)
        return *pa ? 1 : -1;
    return strcmp(a, b);
}

static int cmp_names(const void *x, const void *y)
{
    const char *a = *(const char *const *)x, *b = *(const char *const *)y;
    /* compare the file names, not the shared directory prefix */
    const char *sa = strrchr(a, '/'), *sb = strrchr(b, '/');
    return natural_cmp(sa ? sa + 1 : a, sb ? sb + 1 : b);
}

int sp_stills_is_pattern(const char *path)
{
    int found = 0;
    for (const char *p = path; *p; p++) {
        if (*p != '%')
            continue;
        if (p[1] == '%') {
            p++;
            continue;
        }
        const char *q = p + 1;
        if (*q == '0')
            q++;
        int digits = 0;
        while (isdigit((unsigned char)*q) && digits < 3)
            q++, digits++;
        if (*q != 'd' || found)
            return -1;
        found = 1;
        p = q;
    }
    return found;
}

/* Split a validated pattern into prefix, width/zero flag and suffix ("%%" becomes "%"). */
static int parse_pattern(sp_stills *s, const char *pat)
{
    size_t len = strlen(pat);
    s->prefix = calloc(len + 1, 1);
    s->suffix = calloc(len + 1, 1);
    if (!s->prefix || !s->suffix)
        return -1;
    char *out = s->prefix;
    for (const char *p = pat; *p; p++) {
        if (*p == '%' && p[1] == '%') {
            *out++ = '%';
            p++;
        } else if (*p == '%') {
            p++;
            if (*p == '0') {
                s->zero = 1;
                p++;
            }
            while (isdigit((unsigned char)*p))
                s->width = s->width * 10 + (*p++ - '0');
            out = s->suffix; /* *p == 'd' */
        } else {
            *out++ = *p;
        }
    }
    s->name_size = len + 32 + (size_t)s->width;
    s->name = malloc(s->name_size);
    return s->name ? 0 : -1;
}

static const char *pattern_name(sp_stills *s, int64_t num)
{
    /* Formatted by hand from the parsed pieces: the user's string is never a format string. */
    if (s->zero)
        snprintf(s->name, s->name_size, "%s%0*lld%s", s->prefix, s->width, (long long)num, s->suffix);
    else
        snprintf(s->name, s->name_size, "%s%*lld%s", s->prefix, s->width, (long long)num, s->suffix);
    return s->name;
}

static int is_file(const char *path)
{
    struct stat sb;
    return stat(path, &sb) == 0 && S_ISREG(sb.st_mode);
}

static const char *frame_path(sp_stills *s, int64_t pos)
{
    return s->kind == SP_STILLS_PATTERN ? pattern_name(s, s->first + pos) : s->names[pos];
}

static int list_dir(sp_stills *s, const char *dir, sp_error *err)
{
    DIR *d = opendir(dir);
    if (!d)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot read the directory (%s)", dir, strerror(errno));
    int rc = SP_OK;
    size_t cap = 0, dl = strlen(dir);
    int slash = dl > 0 && dir[dl - 1] == '/';
    struct dirent *e;
    errno = 0;
    while ((e = readdir(d)) != NULL) {
        if (e->d_name[0] == '.' || !has_image_ext(e->d_name))
            continue;
        if ((size_t)s->n == cap) {
            size_t nc = cap ? 2 * cap : 256;
            char **nn = realloc(s->names, nc * sizeof *nn);
            if (!nn)
                goto oom;
            s->names = nn;
            cap = nc;
        }
        size_t sz = dl + strlen(e->d_name) + 2;
        char *full = malloc(sz);
        if (!full)
            goto oom;
        snprintf(full, sz, "%s%s%s", dir, slash ? "" : "/", e->d_name);
        s->names[s->n++] = full;
        errno = 0;
    }
    if (errno) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot read the directory (%s)", dir, strerror(errno));
        goto done;
    }
    if (s->n == 0) {
        rc = sp_error_set(
            err, SP_ERR_INPUT,
            "%s: no image files (.png .jpg .jpeg .tif .tiff .bmp .pgm .ppm .pbm) in the directory", dir);
        goto done;
    }
    qsort(s->names, (size_t)s->n, sizeof *s->names, cmp_names);
    goto done;
oom:
    rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory listing the directory", dir);
done:
    closedir(d);
    return rc;
}

int sp_stills_open(sp_stills **out, const char *path, int kind, sp_source_info *info, sp_error *err)
{
    int rc = SP_OK;
    sp_image first = {0};
    *out = NULL;
    sp_stills *s = calloc(1, sizeof *s);
    if (!s || !(s->path = strdup(path)))
        goto oom;
    s->kind = kind;
    if (kind == SP_STILLS_DIR) {
        rc = list_dir(s, path, err);
        if (rc)
            goto fail;
    } else if (kind == SP_STILLS_PATTERN) {
        if (sp_stills_is_pattern(path) != 1) {
            rc = sp_error_set(err, SP_ERR_INPUT,
                              "%s: a frame pattern needs exactly one %%d conversion (such as %%05d)", path);
            goto fail;
        }
        if (parse_pattern(s, path))
            goto oom;
        /* The sequence starts at the first existing number among 0..9 and runs while files exist. */
        s->first = -1;
        for (int64_t k = 0; k <= 9 && s->first < 0; k++)
            if (is_file(pattern_name(s, k)))
                s->first = k;
        if (s->first < 0) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: no frame file numbered 0 to 9 matches the pattern",
                              path);
            goto fail;
        }
        while (s->n < PATTERN_MAX_FRAMES && is_file(pattern_name(s, s->first + s->n)))
            s->n++;
    } else {
        s->names = malloc(sizeof *s->names);
        if (!s->names || !(s->names[0] = strdup(path)))
            goto oom;
        s->n = 1;
    }

    /* The first frame fixes the size every other frame must have. */
    char fmt[32] = "";
    rc = sp_still_read(frame_path(s, 0), &first, fmt, sizeof fmt, err);
    if (rc)
        goto fail;
    s->w = first.width;
    s->h = first.height;
    s->bytes = first.bytes;
    s->bits = first.bits;
    sp_image_free(&first);
    info->full_width = s->w;
    info->full_height = s->h;
    info->bytes = s->bytes;
    info->bits = s->bits;
    info->fps = 0;
    info->frames_total = s->n;
    snprintf(info->kind, sizeof info->kind, "stills");
    snprintf(info->format, sizeof info->format, "%s", fmt);
    *out = s;
    return SP_OK;
oom:
    rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
fail:
    sp_image_free(&first);
    sp_stills_close(s);
    return rc;
}

int sp_stills_next(sp_stills *s, int want, sp_image *full, int *got, sp_error *err)
{
    *got = 0;
    if (s->next >= s->n)
        return SP_OK;
    int64_t pos = s->next++;
    if (want) {
        const char *p = frame_path(s, pos);
        int rc = sp_still_read(p, full, NULL, 0, err);
        if (rc)
            return rc;
        if (full->width != s->w || full->height != s->h || full->bytes != s->bytes)
            return sp_error_set(err, SP_ERR_INPUT,
                                "%s: frame %lld is %dx%d at %d bits but the first frame is %dx%d at %d bits",
                                p, (long long)pos, full->width, full->height, 8 * full->bytes, s->w, s->h,
                                8 * s->bytes);
    }
    *got = 1;
    return SP_OK;
}

void sp_stills_close(sp_stills *s)
{
    if (!s)
        return;
    if (s->names)
        for (int64_t i = 0; i < s->n; i++)
            free(s->names[i]);
    free(s->names);
    free(s->prefix);
    free(s->suffix);
    free(s->name);
    free(s->path);
    free(s);
}

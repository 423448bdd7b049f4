/* probe_io_decode INPUT [--fps F] [--start N --count N --step N] [--roi x,y,w,h] [--dump FILE]
 * Prints "frames N", then "index t_s" per delivered frame; --dump writes every delivered frame's
 * samples (native depth, little-endian, rows without padding) to FILE. Also prints an "info" line on
 * stderr. On error: the sp_error message on stderr and its code as exit status. */
#include "spume.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int usage(void)
{
    fprintf(stderr, "usage: probe_io_decode INPUT [--fps F] [--start N] [--count N] [--step N] "
                    "[--roi x,y,w,h] [--dump FILE]\n");
    return 2;
}

int main(int argc, char **argv)
{
    if (argc < 2)
        return usage();
    sp_source_opts o;
    sp_source_opts_default(&o);
    const char *dump = NULL;
    for (int i = 2; i < argc; i++) {
        if (i + 1 >= argc)
            return usage();
        const char *a = argv[i], *v = argv[++i];
        if (!strcmp(a, "--fps"))
            o.fps = atof(v);
        else if (!strcmp(a, "--start"))
            o.start = atoll(v);
        else if (!strcmp(a, "--count"))
            o.count = atoll(v);
        else if (!strcmp(a, "--step"))
            o.step = atoll(v);
        else if (!strcmp(a, "--roi")) {
            if (sscanf(v, "%d,%d,%d,%d", &o.roi.x, &o.roi.y, &o.roi.w, &o.roi.h) != 4)
                return usage();
        } else if (!strcmp(a, "--dump"))
            dump = v;
        else
            return usage();
    }
    sp_error err;
    sp_error_clear(&err);
    sp_source *src = NULL;
    sp_image img = {0};
    FILE *df = NULL;
    uint8_t *row = NULL;
    int rc = sp_source_open(&src, argv[1], &o, &err);
    if (rc)
        goto fail;
    const sp_source_info *in = sp_source_get_info(src);
    fprintf(
        stderr,
        "info kind=%s format=%s size=%dx%d full=%dx%d bytes=%d bits=%d fps=%.9g total=%lld selected=%lld\n",
        in->kind, in->format, in->width, in->height, in->full_width, in->full_height, in->bytes, in->bits,
        in->fps, (long long)in->frames_total, (long long)in->frames_selected);
    if (dump && !(df = fopen(dump, "wb"))) {
        rc = sp_error_set(&err, SP_ERR_INTERNAL, "%s: cannot write", dump);
        goto fail;
    }
    /* Lines are collected first so "frames N" can lead. */
    size_t cap = 1024, len = 0;
    char *lines = malloc(cap);
    if (!lines) {
        rc = sp_error_set(&err, SP_ERR_INTERNAL, "out of memory");
        goto fail;
    }
    long long n = 0;
    for (;;) {
        int64_t index = 0;
        double t = 0;
        int got = 0;
        rc = sp_source_next(src, &img, &index, &t, &got, &err);
        if (rc || !got)
            break;
        char line[80];
        int k = snprintf(line, sizeof line, "%lld %.9f\n", (long long)index, t);
        if (len + (size_t)k + 1 > cap) {
            char *nl = realloc(lines, cap * 2);
            if (!nl) {
                rc = sp_error_set(&err, SP_ERR_INTERNAL, "out of memory");
                break;
            }
            lines = nl;
            cap *= 2;
        }
        memcpy(lines + len, line, (size_t)k);
        len += (size_t)k;
        n++;
        if (df) {
            size_t rb = (size_t)img.width * (size_t)img.bytes;
            uint8_t *nr = realloc(row, rb);
            if (!nr) {
                rc = sp_error_set(&err, SP_ERR_INTERNAL, "out of memory");
                break;
            }
            row = nr;
            for (int y = 0; y < img.height; y++) {
                if (img.bytes == 1) {
                    memcpy(row, sp_row8(&img, y), rb);
                } else {
                    const uint16_t *r16 = sp_row16(&img, y);
                    for (int x = 0; x < img.width; x++) {
                        row[2 * x] = (uint8_t)(r16[x] & 0xff);
                        row[2 * x + 1] = (uint8_t)(r16[x] >> 8);
                    }
                }
                if (fwrite(row, 1, rb, df) != rb) {
                    rc = sp_error_set(&err, SP_ERR_INTERNAL, "%s: write failed", dump);
                    break;
                }
            }
            if (rc)
                break;
        }
    }
    if (!rc) {
        printf("frames %lld\n", n);
        fwrite(lines, 1, len, stdout);
    }
    free(lines);
fail:
    free(row);
    if (df && fclose(df) != 0 && !rc)
        rc = sp_error_set(&err, SP_ERR_INTERNAL, "%s: write failed", dump);
    sp_image_free(&img);
    sp_source_close(src);
    if (rc) {
        fprintf(stderr, "%s\n", err.msg);
        return rc;
    }
    return 0;
}

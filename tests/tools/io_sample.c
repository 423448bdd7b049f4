/* probe_io_sample INPUT N [--start S] [--count C] [--roi x,y,w,h] [--fps F] [--mode keys|skip|seek]
 *                 [--dump FILE]
 * Reads frames near N target positions spread evenly over the selection (position (2j+1)·n/(2N)),
 * either with sp_source_sample (mode keys: prints "done D", then "pos target" per frame read) or in
 * order, passing the others over with sp_source_skip (mode skip: prints "done 1", then
 * "pos target" for the frame at each target position) or by seeking to each target with
 * sp_source_seek (mode seek: "pos target" per frame, then "done S", S the seeks that moved). --dump writes
 * each frame read (8-bit rows, or 16-bit little-endian) to FILE in the order printed. On error: the message
 * on stderr and its code as exit status. */
#include "spume.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct ctx {
    FILE *df;
    int n;
} ctx;

static int dump(FILE *df, const sp_image *img)
{
    for (int y = 0; df && y < img->height; y++) {
        if (img->bytes == 1) {
            if (fwrite(sp_row8(img, y), 1, (size_t)img->width, df) != (size_t)img->width)
                return -1;
        } else {
            const uint16_t *r = sp_row16(img, y);
            for (int x = 0; x < img->width; x++)
                if (fputc(r[x] & 0xff, df) == EOF || fputc(r[x] >> 8, df) == EOF)
                    return -1;
        }
    }
    return 0;
}

static int got_one(void *ud, const sp_image *img, int64_t pos, int target, sp_error *err)
{
    ctx *c = ud;
    printf("%lld %d\n", (long long)pos, target);
    c->n++;
    return dump(c->df, img) ? sp_error_set(err, SP_ERR_INTERNAL, "dump: write failed") : SP_OK;
}

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: probe_io_sample INPUT N [--start S] [--count C] [--roi x,y,w,h] "
                        "[--mode keys|skip] [--dump FILE]\n");
        return 2;
    }
    sp_source_opts o;
    sp_source_opts_default(&o);
    o.sparse = 1;
    int n = atoi(argv[2]);
    const char *mode = "keys";
    const char *dpath = NULL;
    for (int i = 3; i + 1 < argc; i += 2) {
        const char *a = argv[i], *v = argv[i + 1];
        if (!strcmp(a, "--fps"))
            o.fps = atof(v);
        else if (!strcmp(a, "--start"))
            o.start = atoll(v);
        else if (!strcmp(a, "--count"))
            o.count = atoll(v);
        else if (!strcmp(a, "--roi"))
            sscanf(v, "%d,%d,%d,%d", &o.roi.x, &o.roi.y, &o.roi.w, &o.roi.h);
        else if (!strcmp(a, "--mode"))
            mode = v;
        else if (!strcmp(a, "--dump"))
            dpath = v;
    }
    sp_error err;
    sp_error_clear(&err);
    sp_source *src = NULL;
    sp_image img = {0};
    ctx c = {NULL, 0};
    int64_t *pos = NULL;
    int rc = sp_source_open(&src, argv[1], &o, &err);
    if (rc)
        goto fail;
    int64_t sel = sp_source_get_info(src)->frames_selected;
    if (n < 1 || sel < 1 || !(pos = malloc(sizeof *pos * (size_t)n))) {
        rc = sp_error_set(&err, SP_ERR_INPUT, "nothing to sample");
        goto fail;
    }
    for (int j = 0; j < n; j++)
        pos[j] = (2 * (int64_t)j + 1) * sel / (2 * n);
    if (dpath && !(c.df = fopen(dpath, "wb"))) {
        rc = sp_error_set(&err, SP_ERR_INTERNAL, "%s: cannot write", dpath);
        goto fail;
    }
    if (!strcmp(mode, "keys")) {
        int done = 0;
        rc = sp_source_sample(src, pos, n, n, got_one, &c, &done, &err);
        if (!rc)
            printf("done %d\n", done);
    } else if (!strcmp(mode, "seek")) {
        /* Seek to each target, then read it: prints "done S" with S the seeks that moved. */
        int moved_n = 0;
        for (int j = 0; j < n && !rc; j++) {
            int moved = 0;
            int64_t idx;
            double t;
            int got = 0;
            if ((rc = sp_source_seek(src, pos[j], &moved, &err)))
                break;
            if (moved < 0) {
                rc = sp_error_set(&err, SP_ERR_INTERNAL, "seek to %lld lost the position", (long long)pos[j]);
                break;
            }
            moved_n += moved;
            for (;;) { /* without a seek, read on to the target */
                if ((rc = sp_source_next(src, &img, &idx, &t, &got, &err)) || !got)
                    break;
                if (idx >= o.start + pos[j])
                    break;
            }
            if (rc || !got)
                break;
            if (idx != o.start + pos[j]) {
                rc = sp_error_set(&err, SP_ERR_INTERNAL, "target %lld read as %lld", (long long)pos[j],
                                  (long long)idx);
                break;
            }
            rc = got_one(&c, &img, pos[j], j, &err);
        }
        if (!rc)
            printf("done %d\n", moved_n);
    } else {
        printf("done 1\n");
        int j = 0;
        for (int64_t p = 0;; p++) {
            int64_t idx;
            double t;
            int got = 0;
            int take = j < n && pos[j] == p;
            rc = take ? sp_source_next(src, &img, &idx, &t, &got, &err)
                      : sp_source_skip(src, &idx, &got, &err);
            if (rc || !got)
                break;
            if (idx != o.start + p) {
                rc = sp_error_set(&err, SP_ERR_INTERNAL, "position %lld gave index %lld", (long long)p,
                                  (long long)idx);
                break;
            }
            if (take) {
                if ((rc = got_one(&c, &img, p, j, &err)))
                    break;
                j++;
            }
        }
    }
fail:
    if (c.df && fclose(c.df) != 0 && !rc)
        rc = sp_error_set(&err, SP_ERR_INTERNAL, "dump: write failed");
    free(pos);
    sp_image_free(&img);
    sp_source_close(src);
    if (rc) {
        fprintf(stderr, "%s\n", err.msg);
        return rc;
    }
    return 0;
}

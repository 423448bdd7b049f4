/* Probe for the reference tests of labelling, Otsu and hole filling.
 *
 *   probe_detect_label IN.pgm OUT.bin [--threads N]
 *       labels (int32 little-endian, w·h) to OUT.bin; on stdout one line per component:
 *       label area x0 y0 x1 y1 cx cy mu20 mu11 mu02 border
 *   probe_detect_label --otsu IN.pgm       prints the Otsu bin of the 256-bin histogram
 *   probe_detect_label --fill IN.pgm OUT.pgm   fills holes of (IN != 0), writes 0/1 with maxval 1
 *
 * IN.pgm is a binary PGM (P5) with maxval <= 255.
 */
#include "detect/fill.h"
#include "detect/label.h"
#include "detect/threshold.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int read_token(FILE *fp, long *v)
{
    int c;
    for (;;) {
        c = fgetc(fp);
        if (c == '#') {
            while (c != '\n' && c != EOF)
                c = fgetc(fp);
        } else if (c != ' ' && c != '\t' && c != '\r' && c != '\n')
            break;
    }
    if (c < '0' || c > '9')
        return -1;
    long x = 0;
    while (c >= '0' && c <= '9') {
        if (x > 100000000)
            return -1;
        x = x * 10 + (c - '0');
        c = fgetc(fp);
    }
    *v = x; /* c is the single whitespace byte before the raster */
    return 0;
}

static uint8_t *read_pgm(const char *path, int *w, int *h, sp_error *err)
{
    FILE *fp = fopen(path, "rb");
    uint8_t *px = NULL;
    long ww, hh, maxv;
    if (!fp) {
        sp_error_set(err, SP_ERR_INPUT, "%s: cannot open", path);
        return NULL;
    }
    if (fgetc(fp) != 'P' || fgetc(fp) != '5' || read_token(fp, &ww) || read_token(fp, &hh) ||
        read_token(fp, &maxv) || maxv < 1 || maxv > 255) {
        sp_error_set(err, SP_ERR_INPUT, "%s: not an 8-bit binary PGM", path);
        goto fail;
    }
    if (sp_check_dims(ww, hh, path, err))
        goto fail;
    px = malloc((size_t)ww * (size_t)hh);
    if (!px) {
        sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto fail;
    }
    if (fread(px, 1, (size_t)ww * (size_t)hh, fp) != (size_t)ww * (size_t)hh) {
        sp_error_set(err, SP_ERR_INPUT, "%s: truncated raster", path);
        free(px);
        px = NULL;
        goto fail;
    }
    *w = (int)ww;
    *h = (int)hh;
fail:
    fclose(fp);
    return px;
}

static int do_label(const char *in, const char *out, int threads, sp_error *err)
{
    int w, h, rc = SP_ERR_INTERNAL, n = 0;
    int32_t *labels = NULL;
    sp_labeler *lb = NULL;
    const sp_component *c = NULL;
    FILE *fo = NULL;
    uint8_t *m = read_pgm(in, &w, &h, err);
    if (!m)
        return err->code;
    labels = malloc((size_t)w * (size_t)h * sizeof *labels);
    lb = sp_labeler_new();
    if (!labels || !lb) {
        sp_error_set(err, SP_ERR_INTERNAL, "probe: out of memory");
        goto fail;
    }
    /* Run twice so the second call exercises workspace reuse. */
    for (int pass = 0; pass < 2; pass++)
        if ((rc = sp_label_run(lb, m, w, w, h, labels, &c, &n, threads, err)))
            goto fail;
    fo = fopen(out, "wb");
    if (!fo || fwrite(labels, sizeof *labels, (size_t)w * (size_t)h, fo) != (size_t)w * (size_t)h) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: cannot write", out);
        goto fail;
    }
    for (int i = 0; i < n; i++)
        printf("%d %lld %d %d %d %d %.17g %.17g %.17g %.17g %.17g %d\n", i + 1, (long long)c[i].area, c[i].x0,
               c[i].y0, c[i].x1, c[i].y1, c[i].cx, c[i].cy, c[i].mu20, c[i].mu11, c[i].mu02, c[i].border);
    rc = SP_OK;
fail:
    if (fo && fclose(fo) && rc == SP_OK)
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: cannot write", out);
    sp_labeler_free(lb);
    free(labels);
    free(m);
    return rc;
}

static int do_otsu(const char *in, sp_error *err)
{
    int w, h;
    uint8_t *m = read_pgm(in, &w, &h, err);
    if (!m)
        return err->code;
    uint64_t hist[256] = {0};
    for (size_t i = 0; i < (size_t)w * (size_t)h; i++)
        hist[m[i]]++;
    printf("%d\n", sp_otsu_hist(hist, 256));
    free(m);
    return SP_OK;
}

static int do_fill(const char *in, const char *out, sp_error *err)
{
    int w, h, rc;
    uint8_t *m = read_pgm(in, &w, &h, err);
    if (!m)
        return err->code;
    for (size_t i = 0; i < (size_t)w * (size_t)h; i++)
        m[i] = m[i] != 0;
    sp_filler *f = sp_filler_new();
    if (!f) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "probe: out of memory");
        goto fail;
    }
    if ((rc = sp_fill_holes(f, m, w, h, err)))
        goto fail;
    FILE *fo = fopen(out, "wb");
    if (!fo) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: cannot write", out);
        goto fail;
    }
    fprintf(fo, "P5\n%d %d\n1\n", w, h);
    size_t ok = fwrite(m, 1, (size_t)w * (size_t)h, fo);
    if (fclose(fo) || ok != (size_t)w * (size_t)h)
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: cannot write", out);
fail:
    sp_filler_free(f);
    free(m);
    return rc;
}

int main(int argc, char **argv)
{
    sp_error err;
    sp_error_clear(&err);
    int rc;
    if (argc == 3 && !strcmp(argv[1], "--otsu"))
        rc = do_otsu(argv[2], &err);
    else if (argc == 4 && !strcmp(argv[1], "--fill"))
        rc = do_fill(argv[2], argv[3], &err);
    else if (argc == 3 || (argc == 5 && !strcmp(argv[3], "--threads")))
        rc = do_label(argv[1], argv[2], argc == 5 ? atoi(argv[4]) : 1, &err);
    else {
        fprintf(stderr, "usage: probe_detect_label IN.pgm OUT.bin [--threads N] | --otsu IN.pgm | "
                        "--fill IN.pgm OUT.pgm\n");
        return 2;
    }
    if (rc)
        fprintf(stderr, "%s\n", err.msg);
    return rc;
}

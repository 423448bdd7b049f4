/* Probe for the accuracy tests: runs the per-frame detection chain on binary PGM frames (P5, 8- or
 * 16-bit) against a background PGM and prints one line per bubble.
 *
 * Usage: probe_detect_frames [--min-sharpness S] [--no-split] BG.pgm FRAME.pgm...
 * Output header then rows: frame x y d_vol d_area major minor split cluster sharpness in_focus u_d edge fit
 */
#include "detect/background.h"
#include "detect/detect.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int read_pgm(const char *path, sp_image *im)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return -1;
    int w, h, maxv;
    char m[3] = {0};
    if (fscanf(f, "%2s %d %d %d", m, &w, &h, &maxv) != 4 || strcmp(m, "P5") || w < 1 || h < 1 || w > 20000 ||
        h > 20000 || maxv < 1 || maxv > 65535) {
        fclose(f);
        return -1;
    }
    fgetc(f);
    sp_error err;
    int bytes = maxv > 255 ? 2 : 1;
    if (sp_image_alloc(im, w, h, bytes, &err)) {
        fclose(f);
        return -1;
    }
    for (int y = 0; y < h; y++) {
        uint8_t *row = (uint8_t *)im->data + (ptrdiff_t)y * im->stride;
        if (fread(row, (size_t)bytes, (size_t)w, f) != (size_t)w) {
            fclose(f);
            return -1;
        }
        if (bytes == 2)
            for (int x = 0; x < w; x++) {
                uint8_t *p = row + 2 * x;
                ((uint16_t *)row)[x] = (uint16_t)(p[0] << 8 | p[1]);
            }
    }
    fclose(f);
    return 0;
}

int main(int argc, char **argv)
{
    sp_detect_opts o;
    sp_detect_opts_default(&o);
    int i = 1;
    for (; i < argc && argv[i][0] == '-'; i++) {
        if (!strcmp(argv[i], "--min-sharpness") && i + 1 < argc)
            o.measure.min_sharpness = atof(argv[++i]);
        else if (!strcmp(argv[i], "--no-split"))
            o.measure.split = 0;
        else
            return 2;
    }
    if (argc - i < 2)
        return 2;
    sp_image bgi = {0};
    if (read_pgm(argv[i], &bgi))
        return 2;
    float *bg = malloc(sizeof(float) * (size_t)bgi.width * (size_t)bgi.height);
    sp_error err;
    if (!bg || sp_bg_from_image(&bgi, bg, &err))
        return 1;
    sp_detector *d = sp_detector_new();
    if (!d)
        return 1;
    printf("frame x y d_vol d_area major minor split cluster sharpness in_focus u_d edge fit\n");
    for (int k = i + 1; k < argc; k++) {
        sp_image fr = {0};
        if (read_pgm(argv[k], &fr) || fr.width != bgi.width || fr.height != bgi.height)
            return 2;
        sp_detect_result r;
        if (sp_detect_run(d, &fr, bg, &o, 1, &r, &err)) {
            fprintf(stderr, "%s\n", err.msg);
            return err.code;
        }
        for (int j = 0; j < r.n; j++) {
            const sp_bubble *b = &r.bubbles[j];
            printf("%d %.6f %.6f %.6f %.6f %.6f %.6f %d %d %.6f %d %.6f %d %d\n", k - i - 1, b->x, b->y,
                   b->d_vol_px, b->d_area_px, b->major_px, b->minor_px, b->split, b->cluster, b->sharpness,
                   b->in_focus, b->u_d_px, b->edge, b->fit);
        }
        sp_image_free(&fr);
    }
    sp_detector_free(d);
    sp_image_free(&bgi);
    free(bg);
    return 0;
}

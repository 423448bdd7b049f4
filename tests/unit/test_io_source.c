/* Frame-source API behaviour on frames written by sp_png_write: defaults, selection bookkeeping
 * (frames_selected equals what is delivered), end of stream is sticky, native depth round trip,
 * and the time rule t = index / fps for stills. */
#include "io/png.h"
#include "spume.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

static int fails = 0;
#define CHECK(c, ...)                                                                                        \
    do {                                                                                                     \
        if (!(c)) {                                                                                          \
            fails++;                                                                                         \
            printf("FAIL %s:%d: ", __FILE__, __LINE__);                                                      \
            printf(__VA_ARGS__);                                                                             \
            printf("\n");                                                                                    \
        }                                                                                                    \
    } while (0)

static uint16_t value(int k, int x, int y)
{
    return (uint16_t)((k * 7919 + x * 131 + y * 977) & 0xffff);
}

int main(void)
{
    sp_error err;
    sp_error_clear(&err);
    char dir[] = "/tmp/spume_io_unit_XXXXXX";
    if (!mkdtemp(dir))
        return 1;

    /* Defaults: whole recording, every frame, container timing. */
    sp_source_opts o;
    memset(&o, 0x5a, sizeof o);
    sp_source_opts_default(&o);
    CHECK(o.fps == 0 && o.start == 0 && o.count == 0 && o.step == 1 && o.roi.w == 0 && o.roi.h == 0,
          "defaults");

    /* Seven 16-bit frames of 23x17, written by the PNG writer. */
    const int N = 7, W = 23, H = 17;
    char path[512];
    for (int k = 0; k < N; k++) {
        sp_image im = {0};
        if (sp_image_alloc(&im, W, H, 2, &err))
            return 1;
        for (int y = 0; y < H; y++)
            for (int x = 0; x < W; x++)
                ((uint16_t *)((uint8_t *)im.data + y * im.stride))[x] = value(k, x, y);
        snprintf(path, sizeof path, "%s/frame_%03d.png", dir, k);
        CHECK(sp_png_write(path, &im, &err) == 0, "write %s: %s", path, err.msg);
        sp_image_free(&im);
    }

    /* A pattern with start/step/count: frames 1, 4 (count 2 cuts 7). */
    snprintf(path, sizeof path, "%s/frame_%%03d.png", dir);
    o.fps = 50;
    o.start = 1;
    o.step = 3;
    o.count = 2;
    sp_source *s = NULL;
    int rc = sp_source_open(&s, path, &o, &err);
    CHECK(rc == 0, "open pattern: %s", err.msg);
    if (rc == 0) {
        const sp_source_info *in = sp_source_get_info(s);
        CHECK(in->frames_total == N && in->frames_selected == 2, "total %lld selected %lld",
              (long long)in->frames_total, (long long)in->frames_selected);
        CHECK(in->bytes == 2 && in->bits == 16 && in->width == W && in->height == H, "geometry");
        CHECK(strcmp(in->kind, "stills") == 0 && strcmp(in->format, "png") == 0, "kind %s format %s",
              in->kind, in->format);
        sp_image img = {0};
        int64_t want[] = {1, 4}, idx = -1;
        double t = -1;
        int got = 0, n = 0;
        while (sp_source_next(s, &img, &idx, &t, &got, &err) == 0 && got) {
            CHECK(n < 2 && idx == want[n], "index %lld", (long long)idx);
            CHECK(fabs(t - idx / 50.0) < 1e-12, "t %g for index %lld", t, (long long)idx);
            int bad = 0;
            for (int y = 0; y < H; y++)
                for (int x = 0; x < W; x++)
                    bad += sp_row16(&img, y)[x] != value((int)idx, x, y);
            CHECK(bad == 0, "frame %lld: %d samples differ from what was written", (long long)idx, bad);
            n++;
        }
        CHECK(n == 2, "delivered %d", n);
        /* The end is sticky. */
        CHECK(sp_source_next(s, &img, &idx, &t, &got, &err) == 0 && got == 0, "second end");
        sp_image_free(&img);
        sp_source_close(s);
    }

    /* Start beyond the end: nothing selected, nothing delivered, no error. */
    sp_source_opts_default(&o);
    o.fps = 10;
    o.start = 100;
    rc = sp_source_open(&s, dir, &o, &err);
    CHECK(rc == 0, "open dir: %s", err.msg);
    if (rc == 0) {
        CHECK(sp_source_get_info(s)->frames_selected == 0, "selected");
        sp_image img = {0};
        int64_t idx;
        double t;
        int got = 1;
        CHECK(sp_source_next(s, &img, &idx, &t, &got, &err) == 0 && got == 0, "nothing past the end");
        sp_source_close(s);
    }

    /* A single image needs no rate: one frame at t = 0. */
    snprintf(path, sizeof path, "%s/frame_006.png", dir);
    rc = sp_source_open(&s, path, NULL, &err);
    CHECK(rc == 0, "open single: %s", err.msg);
    if (rc == 0) {
        sp_image img = {0};
        int64_t idx = -1;
        double t = -1;
        int got = 0;
        CHECK(sp_source_next(s, &img, &idx, &t, &got, &err) == 0 && got && idx == 0 && t == 0,
              "single frame");
        CHECK(sp_source_next(s, &img, &idx, &t, &got, &err) == 0 && !got, "single end");
        sp_image_free(&img);
        sp_source_close(s);
    }

    for (int k = 0; k < N; k++) {
        snprintf(path, sizeof path, "%s/frame_%03d.png", dir, k);
        unlink(path);
    }
    rmdir(dir);
    printf("%s\n", fails ? "FAILED" : "ok");
    return fails ? 1 : 0;
}

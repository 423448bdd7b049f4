/* Shared by the libFuzzer targets: every reader under test takes a path, so each input is written
 * to one temporary file per process (rewritten in place for every run), and every answer is checked
 * against the library's error contract. A broken contract aborts, which the fuzzer reports like a
 * crash. The same targets are compiled into tests/tools/{acoustic,calib}_fuzz_replay.c, which
 * replays the files under fixtures/fuzz-regress/ in the ordinary test suite. */
#ifndef SP_FUZZ_COMMON_H
#define SP_FUZZ_COMMON_H

#include "spume.h"

#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* A per-process path under $TMPDIR (or /tmp) ending in `suffix`; built once per suffix slot. */
static inline const char *fuzz_tmp_path(int slot, const char *suffix)
{
    static char paths[8][512];
    if (slot < 0 || slot >= 8)
        abort();
    if (!paths[slot][0]) {
        const char *dir = getenv("TMPDIR");
        if (!dir || !*dir)
            dir = "/tmp";
        snprintf(paths[slot], sizeof paths[slot], "%s/spume-fuzz-%ld-%d%s", dir, (long)getpid(), slot,
                 suffix);
    }
    return paths[slot];
}

/* Write data to path; a failure here is the harness's, not the library's. */
static inline void fuzz_write_file(const char *path, const uint8_t *data, size_t size)
{
    FILE *fp = fopen(path, "wb");
    if (!fp || (size && fwrite(data, 1, size, fp) != size) || fclose(fp) != 0) {
        fprintf(stderr, "fuzz harness: cannot write %s\n", path);
        abort();
    }
}

/* The error contract of every reader: a status of 0, SP_ERR_INPUT or SP_ERR_INTERNAL; on failure
 * sp_error carries the same code and one non-empty line that names the file. */
static inline void fuzz_check_status(int rc, const sp_error *err, const char *path)
{
    if (rc == SP_OK)
        return;
    if (rc != SP_ERR_INPUT && rc != SP_ERR_INTERNAL) {
        fprintf(stderr, "contract: status %d is neither 1 nor 2\n", rc);
        abort();
    }
    if (err->code != rc || !err->msg[0] || strchr(err->msg, '\n')) {
        fprintf(stderr, "contract: status %d with error code %d, message \"%s\"\n", rc, err->code, err->msg);
        abort();
    }
    /* The message names the file: its base name at least (messages may shorten long paths). */
    const char *base = strrchr(path, '/');
    base = base ? base + 1 : path;
    if (!strstr(err->msg, base)) {
        fprintf(stderr, "contract: message \"%s\" does not name %s\n", err->msg, path);
        abort();
    }
}

/* A decoded image must respect the caps and be fully readable (ASan checks the reads). */
static inline void fuzz_check_image(const sp_image *im)
{
    if (im->width < 1 || im->height < 1 || im->width > SP_MAX_DIM || im->height > SP_MAX_DIM ||
        (long long)im->width * im->height > SP_MAX_PIXELS || (im->bytes != 1 && im->bytes != 2) ||
        im->bits < 1 || im->bits > 8 * im->bytes || im->stride < (ptrdiff_t)im->width * im->bytes ||
        !im->data) {
        fprintf(stderr, "contract: image %dx%d bytes %d bits %d stride %td\n", im->width, im->height,
                im->bytes, im->bits, im->stride);
        abort();
    }
    unsigned acc = 0;
    for (int y = 0; y < im->height; y++) {
        const uint8_t *r = sp_row8(im, y);
        acc += r[0] + r[(size_t)im->width * im->bytes - 1];
    }
    /* Keep the reads from being optimised away. */
    volatile unsigned sink = acc;
    (void)sink;
}

#endif

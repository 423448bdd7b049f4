#include "pipeline/identity.h"

#include <libavutil/mem.h>
#include <libavutil/sha.h>
#include <stdio.h>
#include <stdlib.h>
#include <sys/stat.h>

int sp_identity_hash(const char *path, char hex[65], long long *size)
{
    struct stat st;
    if (stat(path, &st) != 0 || !S_ISREG(st.st_mode))
        return -1;
    *size = (long long)st.st_size;
    FILE *f = fopen(path, "rb");
    if (!f)
        return -1;
    struct AVSHA *sha = av_sha_alloc();
    unsigned char *buf = malloc(1 << 16);
    int rc = -1;
    if (!sha || !buf || av_sha_init(sha, 256) < 0)
        goto done;
    size_t left = 1 << 20, n;
    while (left > 0 && (n = fread(buf, 1, left < (1 << 16) ? left : (1 << 16), f)) > 0) {
        av_sha_update(sha, buf, n);
        left -= n;
    }
    if (ferror(f))
        goto done;
    uint8_t dig[32];
    av_sha_final(sha, dig);
    for (int i = 0; i < 32; i++)
        snprintf(hex + 2 * i, 3, "%02x", dig[i]);
    rc = 0;
done:
    av_free(sha);
    free(buf);
    fclose(f);
    return rc;
}

void sp_identity_write(sp_jsonw *j, const char *path, const sp_source_info *info)
{
    sp_jsonw_obj(j);
    sp_jsonw_kstr(j, "path", path);
    sp_jsonw_kstr(j, "kind", info->kind);
    sp_jsonw_kstr(j, "format", info->format);
    char hex[65];
    long long size = 0;
    if (sp_identity_hash(path, hex, &size) == 0) {
        sp_jsonw_kint(j, "bytes", size);
        sp_jsonw_kstr(j, "sha256_first_mib", hex);
    }
    sp_jsonw_kint(j, "width", info->full_width);
    sp_jsonw_kint(j, "height", info->full_height);
    sp_jsonw_kint(j, "bits", info->bits);
    sp_jsonw_kint(j, "frames_total", info->frames_total);
    sp_jsonw_knum(j, "fps", info->fps);
    sp_jsonw_obj_end(j);
}

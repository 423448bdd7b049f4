/* Output directory: created if missing, and proven writable before any work starts. */
#include "spume.h"

#include <errno.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

static int mkdir_p(char *path)
{
    for (char *p = path + 1; *p; p++) {
        if (*p != '/')
            continue;
        *p = '\0';
        int rc = mkdir(path, 0777);
        *p = '/';
        if (rc != 0 && errno != EEXIST)
            return -1;
    }
    if (mkdir(path, 0777) != 0 && errno != EEXIST)
        return -1;
    return 0;
}

int sp_outdir_prepare(const char *dir, sp_error *err)
{
    char buf[4096];
    if (!dir || !*dir)
        return sp_error_set(err, SP_ERR_INPUT, "no output directory given");
    if (strlen(dir) >= sizeof buf - 64)
        return sp_error_set(err, SP_ERR_INPUT, "%s: output path too long", dir);
    strcpy(buf, dir);
    if (mkdir_p(buf) != 0)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot create output directory: %s", dir,
                            strerror(errno));
    struct stat st;
    if (stat(dir, &st) != 0 || !S_ISDIR(st.st_mode))
        return sp_error_set(err, SP_ERR_INPUT, "%s: not a directory", dir);
    snprintf(buf, sizeof buf, "%s/.write-test.%ld", dir, (long)getpid());
    FILE *f = fopen(buf, "wb");
    if (!f)
        return sp_error_set(err, SP_ERR_INPUT, "%s: output directory is not writable: %s", dir,
                            strerror(errno));
    fclose(f);
    unlink(buf);
    return SP_OK;
}

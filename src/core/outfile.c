#include "core/outfile.h"

#include <errno.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

int sp_outfile_open(sp_outfile *o, const char *dir, const char *name, sp_error *err)
{
    memset(o, 0, sizeof *o);
    int n1 = snprintf(o->final, sizeof o->final, "%s/%s", dir, name);
    int n2 = snprintf(o->tmp, sizeof o->tmp, "%s/.%s.%ld.partial", dir, name, (long)getpid());
    if (n1 < 0 || n2 < 0 || (size_t)n1 >= sizeof o->final || (size_t)n2 >= sizeof o->tmp)
        return sp_error_set(err, SP_ERR_INPUT, "%s: output path too long", dir);
    o->f = fopen(o->tmp, "wb");
    if (!o->f)
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot create %s: %s", dir, name, strerror(errno));
    setvbuf(o->f, NULL, _IOFBF, 1 << 20);
    return SP_OK;
}

int sp_outfile_commit(sp_outfile *o, sp_error *err)
{
    if (!o->f)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: committed twice", o->final);
    int bad = ferror(o->f);
    int e = errno;
    if (fflush(o->f) != 0) {
        bad = 1;
        e = errno;
    }
    if (fclose(o->f) != 0 && !bad) {
        bad = 1;
        e = errno;
    }
    o->f = NULL;
    if (bad) {
        unlink(o->tmp);
        return sp_error_set(err, SP_ERR_INPUT, "%s: write failed: %s", o->final, strerror(e));
    }
    if (rename(o->tmp, o->final) != 0) {
        e = errno;
        unlink(o->tmp);
        return sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", o->final, strerror(e));
    }
    o->tmp[0] = '\0';
    return SP_OK;
}

void sp_outfile_abort(sp_outfile *o)
{
    if (o->f) {
        fclose(o->f);
        o->f = NULL;
    }
    if (o->tmp[0]) {
        unlink(o->tmp);
        o->tmp[0] = '\0';
    }
}

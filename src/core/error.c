/* Error records: one message per failure, written once where it is detected. */
#include "spume.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

int sp_error_set(sp_error *err, int code, const char *fmt, ...)
{
    if (!err)
        return code;
    err->code = code;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err->msg, sizeof err->msg, fmt, ap);
    va_end(ap);
    /* Keep the message to one line: the CLI prints it as is. */
    for (char *p = err->msg; *p; p++)
        if (*p == '\n' || *p == '\r')
            *p = ' ';
    return code;
}

void sp_error_clear(sp_error *err)
{
    if (err) {
        err->code = SP_OK;
        err->msg[0] = '\0';
    }
}

#include "err.h"

#include <stdarg.h>
#include <stdio.h>

int err_set(struct err *e, int code, const char *fmt, ...)
{
    if (!e)
        return code;
    e->code = code;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(e->msg, sizeof e->msg, fmt, ap);
    va_end(ap);
    return code;
}

void err_clear(struct err *e)
{
    if (!e)
        return;
    e->code = ST_OK;
    e->msg[0] = '\0';
}

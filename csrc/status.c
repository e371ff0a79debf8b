/* status.c: status codes, error messages and library set-up. */
#include <stdarg.h>
#include <stdio.h>

#include <gsl/gsl_errno.h>

#include "wkb.h"

static const char *const status_names[WKB_NSTATUS] = {
    "SUCCESS", "EINVAL", "ENOWELL", "EMULTIWELL", "ENOLEVEL", "ENOCONV", "ENOMEM", "ENUMERIC",
};

const char *wkb_status_name(int status)
{
    return (status >= 0 && status < WKB_NSTATUS) ? status_names[status] : "unknown";
}

int wkb_fail(wkb_error *err, int status, const char *fmt, ...)
{
    if (err) {
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(err->message, sizeof err->message, fmt, ap);
        va_end(ap);
        err->status = status;
    }
    return status;
}

void wkb_init_library(void)
{
    /* The core checks every GSL status itself; GSL must never abort the process. */
    gsl_set_error_handler_off();
}

#include "util/status.h"

#include <stdarg.h>
#include <stdio.h>

mitilog_status mitilog_error_set(mitilog_error *error, mitilog_status status,
                                 const char *format, ...)
{
    if (error != NULL) {
        va_list arguments;
        va_start(arguments, format);
        vsnprintf(error->text, sizeof error->text, format, arguments);
        va_end(arguments);
    }
    return status;
}

const char *mitilog_status_name(mitilog_status status)
{
    switch (status) {
    case MITILOG_OK: return "ok";
    case MITILOG_ERROR_INVALID: return "invalid";
    case MITILOG_ERROR_PARSE: return "parse";
    case MITILOG_ERROR_IO: return "io";
    case MITILOG_ERROR_DATABASE: return "database";
    case MITILOG_ERROR_MEMORY: return "memory";
    case MITILOG_ERROR_NOT_FOUND: return "not-found";
    case MITILOG_ERROR_REFUSED: return "refused";
    }
    return "unknown";
}

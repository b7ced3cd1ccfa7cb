#include "util/status.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

mitilog_status mitilog_error_set(mitilog_error *error, mitilog_status status, const char *format,
                                 ...)
{
    if (error != NULL) {
        va_list arguments;
        va_start(arguments, format);
        vsnprintf(error->text, sizeof error->text, format, arguments);
        va_end(arguments);
    }
    return status;
}

mitilog_status mitilog_error_append(mitilog_error *error, mitilog_status status, const char *format,
                                    ...)
{
    static const char more[] = "\n(more errors not shown)";
    if (error == NULL)
        return status;
    char line[MITILOG_ERROR_TEXT_SIZE];
    va_list arguments;
    va_start(arguments, format);
    vsnprintf(line, sizeof line, format, arguments);
    va_end(arguments);
    size_t used = strlen(error->text);
    if (used == 0) {
        snprintf(error->text, sizeof error->text, "%s", line);
        return status;
    }
    if (used >= sizeof more - 1 && strcmp(error->text + used - (sizeof more - 1), more) == 0)
        return status;
    if (used + 1 + strlen(line) + sizeof more <= sizeof error->text)
        snprintf(error->text + used, sizeof error->text - used, "\n%s", line);
    else if (used + sizeof more <= sizeof error->text)
        snprintf(error->text + used, sizeof error->text - used, "%s", more);
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

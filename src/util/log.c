#include "util/log.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>
#include <sys/time.h>
#include <time.h>

/* The one process-wide setting (log.h): written once at start-up, before
 * any thread; read by every line. */
static log_level minimum_level = LOG_LEVEL_INFO;

void log_set_level(log_level level) { minimum_level = level; }

int log_parse_level(const char *text, log_level *level)
{
    static const char *const names[] = {"debug", "info", "warning", "error"};
    for (int i = 0; i < 4; i++) {
        if (strcasecmp(text, names[i]) == 0) {
            *level = (log_level)i;
            return 0;
        }
    }
    return -1;
}

static void log_write(log_level level, const char *format, va_list arguments)
{
    static const char *const labels[] = {"debug", "info", "warning", "error"};
    if (level < minimum_level)
        return;
    char line[4096];
    struct timeval now;
    struct tm broken;
    gettimeofday(&now, NULL);
    gmtime_r(&now.tv_sec, &broken);
    int used = (int)strftime(line, sizeof line, "%Y-%m-%dT%H:%M:%S", &broken);
    used += snprintf(line + used, sizeof line - (size_t)used,
                     ".%03ldZ %s: ", (long)(now.tv_usec / 1000), labels[level]);
    char message[2048];
    vsnprintf(message, sizeof message, format, arguments);
    /* One event, one line: control characters from anywhere (an AE title,
     * a UID, a file name) are written as \xNN, so that no value can end
     * the line or forge another one, nor send terminal escapes. */
    for (const unsigned char *c = (const unsigned char *)message;
         *c != '\0' && used < (int)sizeof line - 5; c++) {
        if (*c < 0x20 || *c == 0x7f)
            used += snprintf(line + used, sizeof line - (size_t)used, "\\x%02x", *c);
        else
            line[used++] = (char)*c;
    }
    line[used] = '\0';
    /* stderr's own lock (POSIX flockfile) keeps each line whole. */
    flockfile(stderr);
    fputs(line, stderr);
    fputc('\n', stderr);
    fflush(stderr);
    funlockfile(stderr);
}

#define LOG_DEFINE(name, level)                                                                    \
    void name(const char *format, ...)                                                             \
    {                                                                                              \
        va_list arguments;                                                                         \
        va_start(arguments, format);                                                               \
        log_write(level, format, arguments);                                                       \
        va_end(arguments);                                                                         \
    }

LOG_DEFINE(log_debug, LOG_LEVEL_DEBUG)
LOG_DEFINE(log_info, LOG_LEVEL_INFO)
LOG_DEFINE(log_warning, LOG_LEVEL_WARNING)
LOG_DEFINE(log_error, LOG_LEVEL_ERROR)

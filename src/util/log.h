/*
 * log.h - the small logging API: one line per event on stderr (journald
 * collects it), with a level, a UTC timestamp and the message. Each line
 * should name the association or object it is about.
 *
 * Thread-safe: lines from several threads never interleave. The only
 * process-wide state is the minimum level, set once at start-up.
 */
#ifndef MITILOG_LOG_H
#define MITILOG_LOG_H

#ifdef __cplusplus
extern "C" {
#endif

typedef enum log_level {
    LOG_LEVEL_DEBUG = 0,
    LOG_LEVEL_INFO,
    LOG_LEVEL_WARNING,
    LOG_LEVEL_ERROR
} log_level;

void log_set_level(log_level level);
/* Parses "debug", "info", "warning", "error"; returns 0 on success. */
int log_parse_level(const char *text, log_level *level);

void log_debug(const char *format, ...) __attribute__((format(printf, 1, 2)));
void log_info(const char *format, ...) __attribute__((format(printf, 1, 2)));
void log_warning(const char *format, ...) __attribute__((format(printf, 1, 2)));
void log_error(const char *format, ...) __attribute__((format(printf, 1, 2)));

#ifdef __cplusplus
}
#endif

#endif

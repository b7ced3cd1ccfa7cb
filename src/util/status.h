/*
 * status.h - the one result convention of mitilog.
 *
 * Every function that can fail returns a mitilog_status and, on failure,
 * writes a human-readable reason into a caller-supplied mitilog_error.
 * The error struct is owned by the caller (usually on its stack); callees
 * only write into it. A NULL error pointer is allowed and means "not
 * interested in the text".
 */
#ifndef MITILOG_STATUS_H
#define MITILOG_STATUS_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef enum mitilog_status {
    MITILOG_OK = 0,
    MITILOG_ERROR_INVALID,   /* bad argument, bad value, bad input data  */
    MITILOG_ERROR_PARSE,     /* input could not be parsed (DICOM, config) */
    MITILOG_ERROR_IO,        /* file system or network failure           */
    MITILOG_ERROR_DATABASE,  /* SQLite failed (locked, full, read-only)  */
    MITILOG_ERROR_MEMORY,    /* allocation failed                        */
    MITILOG_ERROR_NOT_FOUND, /* the thing asked for does not exist       */
    MITILOG_ERROR_REFUSED    /* a policy said no (allowlist, limits)     */
} mitilog_status;

enum { MITILOG_ERROR_TEXT_SIZE = 2048 };

typedef struct mitilog_error {
    char text[MITILOG_ERROR_TEXT_SIZE];
} mitilog_error;

/* printf-style; safe with error == NULL. Returns status for chaining:
 * return mitilog_error_set(error, MITILOG_ERROR_IO, "open %s", path); */
mitilog_status mitilog_error_set(mitilog_error *error, mitilog_status status, const char *format,
                                 ...) __attribute__((format(printf, 3, 4)));

/* For a loader that reports every problem of a file: the first call on
 * an error whose text is empty sets it, later ones add a line each. When
 * no more fits, the text ends with "(more errors not shown)". Returns
 * status. */
mitilog_status mitilog_error_append(mitilog_error *error, mitilog_status status, const char *format,
                                    ...) __attribute__((format(printf, 3, 4)));

/* Stable lower-case name of a status ("ok", "invalid", ...). */
const char *mitilog_status_name(mitilog_status status);

#ifdef __cplusplus
}
#endif

#endif

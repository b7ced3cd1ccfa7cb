/*
 * files.h - small file-system helpers: creating folders with restrictive
 * permissions, atomic moves and copies, and the UTC clock as ISO 8601.
 */
#ifndef MITILOG_FILES_H
#define MITILOG_FILES_H

#include <stddef.h>

#include "util/status.h"

/* mkdir -p with mode 0750 for each created level. */
mitilog_status files_make_directories(const char *path, mitilog_error *error);
/* rename(); falls back to copy + unlink across file systems. */
mitilog_status files_move(const char *from, const char *to, mitilog_error *error);
/* Copies bytes to a temporary name beside `to`, fsyncs, renames. */
mitilog_status files_copy(const char *from, const char *to, mitilog_error *error);
/* Now in UTC: "YYYY-MM-DDTHH:MM:SS.mmmZ" (out must hold 32 bytes). */
void files_utc_now(char *out, size_t size);

#endif

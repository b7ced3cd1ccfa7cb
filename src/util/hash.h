/*
 * hash.h - SHA-256 (OpenSSL) as lower-case hex, used to name files from
 * identifiers so no raw header string ever becomes a path.
 */
#ifndef MITILOG_HASH_H
#define MITILOG_HASH_H

#include <stddef.h>

#include "util/status.h"

enum { HASH_HEX_SIZE = 65 };

/* Hash of a text. Returns MITILOG_OK or MITILOG_ERROR_MEMORY. */
mitilog_status hash_text_hex(const char *text, char out[HASH_HEX_SIZE]);
/* Hash of a file's bytes. */
mitilog_status hash_file_hex(const char *path, char out[HASH_HEX_SIZE], mitilog_error *error);

#endif

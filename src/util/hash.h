/*
 * hash.h - SHA-256 (OpenSSL) as lower-case hex, used to name files from
 * identifiers so no raw header string ever becomes a path; and FNV-1a, a
 * fast 64-bit hash for the in-memory lookup table of hash_table.h (not
 * for anything that must resist a chosen input). No allocation is left to the caller.
 */
#ifndef MITILOG_HASH_H
#define MITILOG_HASH_H

#include <stddef.h>
#include <stdint.h>

#include "util/status.h"

enum { HASH_HEX_SIZE = 65 };

/* Hash of a text. Returns MITILOG_OK or MITILOG_ERROR_MEMORY. */
mitilog_status hash_text_hex(const char *text, char out[HASH_HEX_SIZE]);
/* HMAC-SHA-256 of text under key [std: RFC 2104; FIPS 180-4]. */
mitilog_status hash_hmac_hex(const char *key, const char *text, char out[HASH_HEX_SIZE]);
/* Hash of a file's bytes. */
mitilog_status hash_file_hex(const char *path, char out[HASH_HEX_SIZE], mitilog_error *error);

/* FNV-1a over size bytes [std: FNV, Fowler-Noll-Vo, 64-bit offset basis
 * 14695981039346656037 and prime 1099511628211]. */
uint64_t hash_fnv1a(const void *bytes, size_t size);

#endif

/*
 * json.h - a small writer of JSON text (RFC 8259) for the documents
 * mitilog computes (reports, statistics, drift); documents that are plain
 * reads of tables are still written by SQLite's JSON functions.
 *
 * Owns: one growing buffer per json_writer, on the caller's stack or in
 * its struct. json_writer_init starts it empty; json_writer_take hands the
 * text (NUL-terminated, malloc'd) to the caller, who frees it with free();
 * json_writer_free releases whatever the writer still holds (safe after
 * take and on a writer that failed).
 *
 * The output is the same, byte for byte, as SQLite's JSON functions write
 * for the same values, so that documents do not change when they move from
 * SQL to this writer:
 *   - no white space between tokens;
 *   - strings: '"' and '\' escaped with a backslash; the control characters
 *     U+0008, U+0009, U+000A, U+000C, U+000D as \b \t \n \f \r; the other
 *     control characters below U+0020 as \u00XX (lower-case hex); every
 *     other byte (DEL, UTF-8 sequences, '/') as it is (RFC 8259 section 7
 *     allows all of these);
 *   - numbers with a fraction: SQLite's "%!.15g" (15 significant digits,
 *     at least one digit after the point: 1.0, 0.7, 1.0e-05, 1.0e+20),
 *     printed by SQLite's own printf so that the digits are its digits
 *     (the 15 digits of a double within 5e-15 of the largest one round
 *     above it: such a number reads back as infinity);
 *     absent, NaN and infinities are null (RFC 8259 section 6 has no
 *     number for them);
 *   - integers in decimal.
 *
 * Errors are sticky: the first failure (out of memory, a key outside an
 * object, nesting deeper than JSON_MAX_DEPTH, an end without a begin) is
 * kept, later calls do nothing, and json_writer_take reports it.
 */
#ifndef MITILOG_JSON_H
#define MITILOG_JSON_H

#include "util/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

enum { JSON_MAX_DEPTH = 32 };

typedef struct json_writer {
    char *text;
    size_t length, capacity;
    mitilog_status status;
    const char *failure; /* what went wrong, plain words */
    unsigned depth;
    unsigned char is_object[JSON_MAX_DEPTH]; /* per open container */
    unsigned char has_member[JSON_MAX_DEPTH];
    int after_key; /* a key waits for its value */
} json_writer;

void json_writer_init(json_writer *writer);
void json_writer_free(json_writer *writer);

/* The finished document: *text is the caller's (free()). Fails when a
 * call failed, or when a container is still open. */
mitilog_status json_writer_take(json_writer *writer, char **text, mitilog_error *error);

void json_object_begin(json_writer *writer);
void json_object_end(json_writer *writer);
void json_array_begin(json_writer *writer);
void json_array_end(json_writer *writer);

/* The name of the next member of the open object. */
void json_key(json_writer *writer, const char *key);

/* Values: a NULL string is null; an absent or non-finite number is null. */
void json_string(json_writer *writer, const char *text);
void json_number(json_writer *writer, int present, double value);
void json_integer(json_writer *writer, long long value);
void json_boolean(json_writer *writer, int value);
void json_null(json_writer *writer);

#ifdef __cplusplus
}
#endif

#endif

/*
 * json.c - the JSON writer of json.h.
 */
#include "json/json.h"

#include <math.h>
#include <sqlite3.h>
#include <stdlib.h>
#include <string.h>

void json_writer_init(json_writer *writer)
{
    memset(writer, 0, sizeof *writer);
    writer->status = MITILOG_OK;
}

void json_writer_free(json_writer *writer)
{
    free(writer->text);
    writer->text = NULL;
    writer->length = writer->capacity = 0;
}

static void fail(json_writer *writer, mitilog_status status, const char *failure)
{
    if (writer->status == MITILOG_OK) {
        writer->status = status;
        writer->failure = failure;
    }
}

static int reserve(json_writer *writer, size_t more)
{
    if (writer->status != MITILOG_OK)
        return 0;
    if (writer->length + more + 1 <= writer->capacity)
        return 1;
    size_t capacity = writer->capacity ? writer->capacity : 256;
    while (capacity < writer->length + more + 1) {
        if (capacity > ((size_t)-1) / 2) {
            fail(writer, MITILOG_ERROR_MEMORY, "the document is too large");
            return 0;
        }
        capacity *= 2;
    }
    char *text = realloc(writer->text, capacity);
    if (text == NULL) {
        fail(writer, MITILOG_ERROR_MEMORY, "out of memory");
        return 0;
    }
    writer->text = text;
    writer->capacity = capacity;
    return 1;
}

static void append(json_writer *writer, const char *bytes, size_t count)
{
    if (!reserve(writer, count))
        return;
    memcpy(writer->text + writer->length, bytes, count);
    writer->length += count;
    writer->text[writer->length] = '\0';
}

/* Before a value: the comma between members or elements; a member of an
 * object needs its key first. */
static int value_start(json_writer *writer)
{
    if (writer->status != MITILOG_OK)
        return 0;
    if (writer->depth == 0) {
        if (writer->length > 0) {
            fail(writer, MITILOG_ERROR_INVALID, "a second value after the document");
            return 0;
        }
        return 1;
    }
    unsigned top = writer->depth - 1;
    if (writer->is_object[top]) {
        if (!writer->after_key) {
            fail(writer, MITILOG_ERROR_INVALID, "an object member without a key");
            return 0;
        }
        writer->after_key = 0;
        return 1;
    }
    if (writer->has_member[top])
        append(writer, ",", 1);
    writer->has_member[top] = 1;
    return writer->status == MITILOG_OK;
}

static void begin(json_writer *writer, int is_object)
{
    if (!value_start(writer))
        return;
    if (writer->depth >= JSON_MAX_DEPTH) {
        fail(writer, MITILOG_ERROR_INVALID, "nested deeper than the writer allows");
        return;
    }
    writer->is_object[writer->depth] = (unsigned char)is_object;
    writer->has_member[writer->depth] = 0;
    writer->depth++;
    append(writer, is_object ? "{" : "[", 1);
}

static void end(json_writer *writer, int is_object)
{
    if (writer->status != MITILOG_OK)
        return;
    if (writer->depth == 0 || writer->is_object[writer->depth - 1] != is_object ||
        writer->after_key) {
        fail(writer, MITILOG_ERROR_INVALID,
             is_object ? "an object ends that is not open or waits for a value"
                       : "an array ends that is not open");
        return;
    }
    writer->depth--;
    append(writer, is_object ? "}" : "]", 1);
}

void json_object_begin(json_writer *writer) { begin(writer, 1); }
void json_object_end(json_writer *writer) { end(writer, 1); }
void json_array_begin(json_writer *writer) { begin(writer, 0); }
void json_array_end(json_writer *writer) { end(writer, 0); }

/* RFC 8259 section 7, with SQLite's choice of escapes (json.h). */
static void quoted(json_writer *writer, const char *text)
{
    static const char hex[] = "0123456789abcdef";
    append(writer, "\"", 1);
    const char *run = text;
    for (const char *p = text; *p != '\0'; p++) {
        unsigned char c = (unsigned char)*p;
        if (c >= 0x20 && c != '"' && c != '\\')
            continue;
        append(writer, run, (size_t)(p - run));
        run = p + 1;
        char escape[6] = {'\\', 0, 0, 0, 0, 0};
        size_t size = 2;
        switch (c) {
        case '"': escape[1] = '"'; break;
        case '\\': escape[1] = '\\'; break;
        case '\b': escape[1] = 'b'; break;
        case '\t': escape[1] = 't'; break;
        case '\n': escape[1] = 'n'; break;
        case '\f': escape[1] = 'f'; break;
        case '\r': escape[1] = 'r'; break;
        default:
            escape[1] = 'u';
            escape[2] = '0';
            escape[3] = '0';
            escape[4] = hex[c >> 4];
            escape[5] = hex[c & 0xf];
            size = 6;
        }
        append(writer, escape, size);
    }
    append(writer, run, strlen(run));
    append(writer, "\"", 1);
}

void json_key(json_writer *writer, const char *key)
{
    if (writer->status != MITILOG_OK)
        return;
    if (writer->depth == 0 || !writer->is_object[writer->depth - 1] || writer->after_key ||
        key == NULL) {
        fail(writer, MITILOG_ERROR_INVALID, "a key outside an object or without a name");
        return;
    }
    unsigned top = writer->depth - 1;
    if (writer->has_member[top])
        append(writer, ",", 1);
    writer->has_member[top] = 1;
    quoted(writer, key);
    append(writer, ":", 1);
    writer->after_key = 1;
}

void json_string(json_writer *writer, const char *text)
{
    if (text == NULL) {
        json_null(writer);
        return;
    }
    if (value_start(writer))
        quoted(writer, text);
}

void json_number(json_writer *writer, int present, double value)
{
    if (!present || !isfinite(value)) {
        json_null(writer);
        return;
    }
    if (!value_start(writer))
        return;
    /* SQLite's own printf, the one its JSON functions use (json.h). */
    char buffer[64];
    sqlite3_snprintf((int)sizeof buffer, buffer, "%!.15g", value);
    append(writer, buffer, strlen(buffer));
}

void json_integer(json_writer *writer, long long value)
{
    if (!value_start(writer))
        return;
    char buffer[32];
    sqlite3_snprintf((int)sizeof buffer, buffer, "%lld", value);
    append(writer, buffer, strlen(buffer));
}

void json_boolean(json_writer *writer, int value)
{
    if (value_start(writer))
        append(writer, value ? "true" : "false", value ? 4 : 5);
}

void json_null(json_writer *writer)
{
    if (value_start(writer))
        append(writer, "null", 4);
}

mitilog_status json_writer_take(json_writer *writer, char **text, mitilog_error *error)
{
    *text = NULL;
    if (writer->status == MITILOG_OK && (writer->depth > 0 || writer->length == 0))
        fail(writer, MITILOG_ERROR_INVALID, "the document is not complete");
    if (writer->status != MITILOG_OK) {
        mitilog_status status = writer->status;
        json_writer_free(writer);
        return mitilog_error_set(error, status, "JSON document: %s", writer->failure);
    }
    *text = writer->text;
    writer->text = NULL;
    writer->length = writer->capacity = 0;
    return MITILOG_OK;
}

/*
 * store_postgresql_text.c - SQLite-style parameters to PostgreSQL's $N
 * (see store_postgresql_text.h for the rules).
 */
#include "store/store_postgresql_text.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Letters, digits, '_' and any byte of a UTF-8 sequence: what SQLite's
 * tokenizer takes into an identifier or a parameter name. */
static int store_text_identifier_char(unsigned char c)
{
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' ||
           c >= 0x80;
}

static int store_text_identifier_start(unsigned char c)
{
    return store_text_identifier_char(c) && !(c >= '0' && c <= '9');
}

/* The rewrite under way: the output and the parameters seen so far. */
typedef struct store_text_rewrite {
    char *out;
    size_t length;
    int largest;
    int names_size;
    char **names;
} store_text_rewrite;

static mitilog_status store_text_grow_names(store_text_rewrite *rewrite, int count,
                                            mitilog_error *error)
{
    if (count <= rewrite->names_size)
        return MITILOG_OK;
    int size = rewrite->names_size > 0 ? rewrite->names_size : 8;
    while (size < count)
        size *= 2;
    char **names = realloc(rewrite->names, (size_t)size * sizeof *names);
    if (names == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory for %d parameters",
                                 count);
    for (int i = rewrite->names_size; i < size; i++)
        names[i] = NULL;
    rewrite->names = names;
    rewrite->names_size = size;
    return MITILOG_OK;
}

/* Writes "$number" and remembers it as the largest when it is. */
static mitilog_status store_text_emit(store_text_rewrite *rewrite, long number,
                                      mitilog_error *error)
{
    if (number < 1 || number > STORE_POSTGRESQL_PARAMETER_MAX)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "parameter number %ld is outside 1..%d", number,
                                 STORE_POSTGRESQL_PARAMETER_MAX);
    mitilog_status status = store_text_grow_names(rewrite, (int)number, error);
    if (status != MITILOG_OK)
        return status;
    if (number > rewrite->largest)
        rewrite->largest = (int)number;
    rewrite->length += (size_t)sprintf(rewrite->out + rewrite->length, "$%ld", number);
    return MITILOG_OK;
}

/* A named parameter: the index it had, else the largest plus one. */
static mitilog_status store_text_named(store_text_rewrite *rewrite, const char *name,
                                       size_t name_length, mitilog_error *error)
{
    for (int i = 0; i < rewrite->largest; i++) {
        const char *known = rewrite->names[i];
        if (known != NULL && strlen(known) == name_length && memcmp(known, name, name_length) == 0)
            return store_text_emit(rewrite, i + 1, error);
    }
    long number = (long)rewrite->largest + 1;
    mitilog_status status = store_text_emit(rewrite, number, error);
    if (status != MITILOG_OK)
        return status;
    char *copy = malloc(name_length + 1);
    if (copy == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory for a parameter name");
    memcpy(copy, name, name_length);
    copy[name_length] = '\0';
    rewrite->names[number - 1] = copy;
    return MITILOG_OK;
}

/* Copies from *at up to and including the closing quote; '' (or "")
 * inside is the quote itself; backslashes escape when escapes is set. */
static int store_text_copy_quoted(store_text_rewrite *rewrite, const char **at, char quote,
                                  int escapes)
{
    const char *p = *at;
    rewrite->out[rewrite->length++] = *p++;
    for (;;) {
        if (*p == '\0')
            return 0;
        if (escapes && *p == '\\' && p[1] != '\0') {
            rewrite->out[rewrite->length++] = *p++;
            rewrite->out[rewrite->length++] = *p++;
            continue;
        }
        rewrite->out[rewrite->length++] = *p;
        if (*p++ == quote) {
            if (*p != quote)
                break;
            rewrite->out[rewrite->length++] = *p++;
        }
    }
    *at = p;
    return 1;
}

/* The length of a dollar-quote opening "$tag$" at p, or 0 when p does
 * not start one. */
static size_t store_text_dollar_tag(const char *p)
{
    size_t n = 1;
    if (p[n] == '$')
        return 2;
    if (!store_text_identifier_start((unsigned char)p[n]))
        return 0;
    while (store_text_identifier_char((unsigned char)p[n]))
        n++;
    return p[n] == '$' ? n + 1 : 0;
}

mitilog_status store_postgresql_rewrite(const char *sql, store_postgresql_text *out,
                                        mitilog_error *error)
{
    memset(out, 0, sizeof *out);
    if (sql == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no SQL text");
    size_t sql_length = strlen(sql);
    store_text_rewrite rewrite = {0};
    /* Each parameter grows at most from "?" to "$32766". */
    rewrite.out = malloc(sql_length * 6 + 1);
    if (rewrite.out == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                 "out of memory rewriting a %zu-byte statement", sql_length);
    mitilog_status status = MITILOG_OK;
    const char *p = sql;
    while (status == MITILOG_OK && *p != '\0') {
        unsigned char c = (unsigned char)*p;
        unsigned char previous = p > sql ? (unsigned char)p[-1] : ' ';
        if (c == '\'') {
            int escapes = (previous == 'E' || previous == 'e') &&
                          (p - sql < 2 || !store_text_identifier_char((unsigned char)p[-2]));
            if (!store_text_copy_quoted(&rewrite, &p, '\'', escapes))
                status = mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                           "a string literal is not closed");
        } else if (c == '"') {
            if (!store_text_copy_quoted(&rewrite, &p, '"', 0))
                status = mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                           "a quoted identifier is not closed");
        } else if (c == '-' && p[1] == '-') {
            while (*p != '\0' && *p != '\n')
                rewrite.out[rewrite.length++] = *p++;
        } else if (c == '/' && p[1] == '*') {
            /* PostgreSQL's block comments nest. */
            int depth = 0;
            do {
                if (*p == '/' && p[1] == '*') {
                    depth++;
                    rewrite.out[rewrite.length++] = *p++;
                } else if (*p == '*' && p[1] == '/') {
                    depth--;
                    rewrite.out[rewrite.length++] = *p++;
                }
                rewrite.out[rewrite.length++] = *p++;
            } while (depth > 0 && *p != '\0');
            if (depth > 0)
                status = mitilog_error_set(error, MITILOG_ERROR_INVALID, "a comment is not closed");
        } else if (store_text_identifier_char(c)) {
            /* A whole word, so that "a$1" or "x:y" inside one is kept. */
            while (store_text_identifier_char((unsigned char)*p) || *p == '$')
                rewrite.out[rewrite.length++] = *p++;
        } else if (c == ':' && p[1] == ':') {
            rewrite.out[rewrite.length++] = *p++;
            rewrite.out[rewrite.length++] = *p++;
        } else if (c == '?' && p[1] >= '0' && p[1] <= '9') {
            char *end = NULL;
            long number = strtol(p + 1, &end, 10);
            p = end;
            status = store_text_emit(&rewrite, number, error);
        } else if (c == '?') {
            p++;
            status = store_text_emit(&rewrite, (long)rewrite.largest + 1, error);
        } else if (c == '$' && p[1] >= '0' && p[1] <= '9') {
            char *end = NULL;
            long number = strtol(p + 1, &end, 10);
            p = end;
            status = store_text_emit(&rewrite, number, error);
        } else if (c == '$' && store_text_dollar_tag(p) > 0) {
            size_t tag = store_text_dollar_tag(p);
            const char *close = p + tag;
            while ((close = strchr(close, '$')) != NULL && strncmp(close, p, tag) != 0)
                close++;
            if (close == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                           "a dollar-quoted string is not closed");
            } else {
                size_t span = (size_t)(close - p) + tag;
                memcpy(rewrite.out + rewrite.length, p, span);
                rewrite.length += span;
                p += span;
            }
        } else if ((c == ':' || c == '$') && store_text_identifier_start((unsigned char)p[1])) {
            const char *name = p++;
            while (store_text_identifier_char((unsigned char)*p))
                p++;
            status = store_text_named(&rewrite, name, (size_t)(p - name), error);
        } else {
            rewrite.out[rewrite.length++] = *p++;
        }
    }
    rewrite.out[rewrite.length] = '\0';
    out->text = rewrite.out;
    out->parameter_count = rewrite.largest;
    out->names = rewrite.names;
    if (status != MITILOG_OK)
        store_postgresql_text_free(out);
    else if (out->names == NULL && out->parameter_count > 0)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    return status;
}

int store_postgresql_text_index(const store_postgresql_text *text, const char *name)
{
    if (text == NULL || name == NULL)
        return 0;
    for (int i = 0; i < text->parameter_count; i++)
        if (text->names[i] != NULL && strcmp(text->names[i], name) == 0)
            return i + 1;
    return 0;
}

void store_postgresql_text_free(store_postgresql_text *text)
{
    if (text == NULL)
        return;
    if (text->names != NULL)
        for (int i = 0; i < text->parameter_count; i++)
            free(text->names[i]);
    free(text->names);
    free(text->text);
    memset(text, 0, sizeof *text);
}

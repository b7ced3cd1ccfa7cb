/*
 * store_postgresql_text.h - SQLite-style parameters of the sql/ files
 * turned into PostgreSQL's positional ones, for the PostgreSQL engine
 * (store_engine_postgresql.c) to prepare.
 *
 * The files of sql/ write parameters as SQLite does (sqlite.org/lang_expr.html,
 * "Parameters"): "?NNN" is parameter NNN, a bare "?" the largest so far
 * plus one, ":name" and "$name" the index the same name had before, else
 * the largest so far plus one. PostgreSQL wants "$N" (PostgreSQL
 * documentation, "PREPARE" and "Positional Parameters"). The rewrite keeps
 * SQLite's numbering, so binding by position means the same on both
 * engines, and keeps the names for parameter_index. Text inside string
 * literals ('...', E'...', $tag$...$tag$), quoted identifiers ("...") and
 * comments (-- to the end of the line, nested block comments) is copied unchanged, as are
 * PostgreSQL's casts ("::type") and positional "$N" already written in an
 * override file. A PostgreSQL override must not use the jsonb operators
 * "?", "?|" and "?&" (it would read as a parameter): use jsonb_exists().
 *
 * Ownership: store_postgresql_rewrite fills a caller-supplied
 * store_postgresql_text whose text and names are heap copies;
 * store_postgresql_text_free releases them.
 */
#ifndef MITILOG_STORE_POSTGRESQL_TEXT_H
#define MITILOG_STORE_POSTGRESQL_TEXT_H

#include "util/status.h"

/* The highest parameter number accepted: SQLite's default
 * SQLITE_MAX_VARIABLE_NUMBER, below PostgreSQL's 65535. */
enum { STORE_POSTGRESQL_PARAMETER_MAX = 32766 };

typedef struct store_postgresql_text {
    char *text;          /* the statement with $N parameters */
    int parameter_count; /* the highest N; 0 when none */
    /* names[N - 1]: the name of parameter N with its prefix (":id",
     * "$id"), or NULL when it was numbered; parameter_count entries. */
    char **names;
} store_postgresql_text;

/* Rewrites sql into out. Fails (MITILOG_ERROR_INVALID) on a string,
 * identifier or comment left open and on a parameter number out of range. */
mitilog_status store_postgresql_rewrite(const char *sql, store_postgresql_text *out,
                                        mitilog_error *error);

/* The 1-based index of the parameter called name (with its prefix), or 0. */
int store_postgresql_text_index(const store_postgresql_text *text, const char *name);

void store_postgresql_text_free(store_postgresql_text *text);

#endif

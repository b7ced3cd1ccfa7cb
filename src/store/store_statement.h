/*
 * store_statement.h - the statement and binding layer of the store, over
 * the engine of store_engine.h; not API (the subject files of src/store/
 * use it).
 *
 * A store_link is one connection with its engine, its statements and
 * what it remembers of their parameters. Every statement is named by its
 * SQL file ("queries/<subject>/NAME.sql", store_sql_text() picks the
 * engine's text), prepared on its first use on that connection and kept
 * until store_link_close(): parsing the SQL again for every call cost
 * more than running it. A link is used by one thread at a time (the
 * store's writer by the batch leader, its reader under reader_lock), so
 * neither the cache nor the parameter memo takes a lock.
 *
 * A store_query is one use of a cached statement: binds (by name or by
 * position) and steps record the first failure in the query itself, so a
 * sequence of binds needs no test after each; store_query_end() resets
 * the statement, clears its bindings and returns that first failure.
 * Bound texts and blobs are borrowed until store_query_end().
 *
 * Ownership: the link owns its connection and statements; texts read
 * with store_column_text() belong to the statement until the next step
 * or store_query_end(); store_column_copy() gives a malloc'd copy the
 * caller frees.
 */
#ifndef MITILOG_STORE_STATEMENT_H
#define MITILOG_STORE_STATEMENT_H

#include <stddef.h>

#include "store/store_engine.h"
#include "util/hash_table.h"
#include "util/status.h"

/* The text of SQL file name ("queries/<subject>/NAME.sql" or
 * "migrations/NNN_NAME.sql") for engine: PostgreSQL's override
 * ("queries/<subject>/postgresql/NAME.sql") when there is one, else the
 * common file; NULL when neither is built in. */
const char *store_sql_text(const store_engine *engine, const char *name);

typedef struct store_link {
    const store_engine *engine;
    store_connection *connection;
    hash_table statements; /* file name -> store_statement * */
    /* parameter_index() remembered by statement and name: binding an
     * instance by the names of its ~90 parameters spent more
     * instructions on finding them than on the insert. */
    hash_table parameters;
} store_link;

/* Opens a connection of engine to target (store_engine.h's open). */
mitilog_status store_link_open(store_link *link, const store_engine *engine, const char *target,
                               int read_only, int busy_timeout_ms, mitilog_error *error);
/* Finalizes the cached statements, forgets their parameters (so that a
 * later statement at the same address is never answered from an older
 * one's memory) and closes the connection. A zeroed link is fine. */
void store_link_close(store_link *link);

/* Runs every statement of SQL file name (a migration, a PRAGMA file). */
mitilog_status store_link_script(store_link *link, const char *name, mitilog_error *error);
/* Runs sql (a script already read, named name for messages). */
mitilog_status store_link_script_text(store_link *link, const char *name, const char *sql,
                                      mitilog_error *error);
/* Rows changed by the last statement run on the link. */
long long store_link_changes(store_link *link);
/* 1 while a transaction is open on the link. */
int store_link_in_transaction(store_link *link);

typedef struct store_query {
    store_link *link;
    store_statement *statement;
    const char *name;      /* the SQL file */
    mitilog_status status; /* the first failure, or MITILOG_OK */
    mitilog_error error;   /* its reason: the engine's message */
    int has_row;           /* the last step gave a row */
} store_query;

/* Starts a query of cached statement name on link; on failure the query
 * holds the reason (query->error) and every later call does nothing. */
mitilog_status store_query_begin(store_query *query, store_link *link, const char *name);
/* Resets the statement and clears its bindings; returns query->status.
 * Fine on a query whose begin failed. */
mitilog_status store_query_end(store_query *query);

/* 1 when the statement has parameter name (":name"). */
int store_query_has_parameter(store_query *query, const char *name);

/* Binds by name (":name"); a name the statement lacks fails the query
 * ("no parameter :name"). Text NULL binds NULL. */
void store_bind_text(store_query *query, const char *name, const char *text);
void store_bind_integer(store_query *query, const char *name, long long value);
/* NULL when !present or value is not finite. */
void store_bind_real(store_query *query, const char *name, int present, double value);
void store_bind_null(store_query *query, const char *name);
void store_bind_blob(store_query *query, const char *name, const void *data, size_t size);

/* The same by 1-based position. */
void store_bind_text_at(store_query *query, int index, const char *text);
/* A filter: NULL and "" both bind NULL ("no filter"). */
void store_bind_filter_at(store_query *query, int index, const char *text);
void store_bind_integer_at(store_query *query, int index, long long value);
void store_bind_real_at(store_query *query, int index, double value);
void store_bind_null_at(store_query *query, int index);

/* Runs (first call) or advances the query: 1 when a row is current, 0
 * when done or failed (query->status tells which). */
int store_query_step(store_query *query);
/* Steps through every row to the end; returns query->status. */
mitilog_status store_query_run(store_query *query);

int store_column_count(store_query *query);
int store_column_is_null(store_query *query, int column);
long long store_column_integer(store_query *query, int column);
double store_column_real(store_query *query, int column);
/* NULL for SQL NULL. */
const char *store_column_text(store_query *query, int column);
const void *store_column_blob(store_query *query, int column);
size_t store_column_bytes(store_query *query, int column);
/* A malloc'd copy of a text column (NULL for SQL NULL; sets *failed when
 * out of memory). */
char *store_column_copy(store_query *query, int column, int *failed);

/* Runs a one-row, one-column query already bound and copies its text to
 * *out (malloc'd); what names it in messages. A query without a row
 * fails with MITILOG_ERROR_NOT_FOUND when not_found is set, else with
 * MITILOG_ERROR_DATABASE. Ends the query. */
mitilog_status store_query_text(store_query *query, const char *what, int not_found, char **out,
                                mitilog_error *error);

/* Collects column 0 of every row (NULL skipped) into *texts, a malloc'd
 * array of *count malloc'd strings (store_texts_free); failures name the
 * query's SQL file. Ends the query. */
mitilog_status store_query_texts(store_query *query, char ***texts, size_t *count,
                                 mitilog_error *error);

#endif

/*
 * store_engine.h - the database engine under the store: one table of
 * functions per engine (SQLite, PostgreSQL). The store's subject files
 * never call an engine's library directly; they call the statement layer
 * (store_statement.h), which calls the engine through this table.
 *
 * Owns nothing itself. An engine's open() gives a connection freed by its
 * close(); prepare() gives a statement of that connection, freed by
 * finalize() before the connection is closed. Texts and blobs passed to
 * bind_text/bind_blob are borrowed: they must stay valid and unchanged
 * until the statement is reset or finalized. Texts and blobs returned by
 * column_* belong to the statement and are valid until its next
 * step/reset/finalize.
 *
 * Parameters in SQL text are SQLite style (?1, :name); an engine whose
 * server spells them otherwise rewrites them at prepare and keeps the
 * name -> index map for parameter_index. A connection and its statements
 * are used by one thread at a time (the caller serialises).
 *
 * The tables are read-only data (extern const), not mutable state.
 */
#ifndef MITILOG_STORE_ENGINE_H
#define MITILOG_STORE_ENGINE_H

#include <stddef.h>

#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct store_connection store_connection; /* engine-owned, opaque */
typedef struct store_statement store_statement;   /* engine-owned, of one connection */

typedef enum store_value_type {
    STORE_VALUE_NULL = 0,
    STORE_VALUE_INTEGER,
    STORE_VALUE_REAL,
    STORE_VALUE_TEXT,
    STORE_VALUE_BLOB
} store_value_type;

typedef struct store_engine {
    /* "sqlite" or "postgresql": the [storage] engine value. */
    const char *name;
    /* Connects to target (an SQLite path, a PostgreSQL conninfo). read_only:
     * the connection only reads (SQLite opens the file read-only; the
     * database must exist). busy_timeout_ms bounds waits on a lock held by
     * another connection (0: do not wait). */
    mitilog_status (*open)(const char *target, int read_only, int busy_timeout_ms,
                           store_connection **out, mitilog_error *error);
    /* NULL is fine. Finalize the connection's statements first. */
    void (*close)(store_connection *connection);
    /* Runs every statement of sql in order (a migration, a PRAGMA file),
     * discarding rows; name is for messages. */
    mitilog_status (*execute_script)(store_connection *connection, const char *name,
                                     const char *sql, mitilog_error *error);
    /* Prepares sql, which must hold exactly one statement (comments and
     * blanks after it are fine); name is for messages. */
    mitilog_status (*prepare)(store_connection *connection, const char *name, const char *sql,
                              store_statement **out, mitilog_error *error);
    /* ":name" -> its 1-based index; 0 when the statement has no such
     * parameter. */
    int (*parameter_index)(store_statement *statement, const char *name);
    mitilog_status (*bind_null)(store_statement *statement, int index, mitilog_error *error);
    mitilog_status (*bind_integer)(store_statement *statement, int index, long long value,
                                   mitilog_error *error);
    mitilog_status (*bind_real)(store_statement *statement, int index, double value,
                                mitilog_error *error);
    mitilog_status (*bind_text)(store_statement *statement, int index, const char *text,
                                size_t length, mitilog_error *error);
    mitilog_status (*bind_blob)(store_statement *statement, int index, const void *data,
                                size_t length, mitilog_error *error);
    /* Runs (first call) or advances: *has_row = 1 when a row is current,
     * 0 when done. On error the statement must be reset before reuse. */
    mitilog_status (*step)(store_statement *statement, int *has_row, mitilog_error *error);
    int (*column_count)(store_statement *statement);
    store_value_type (*column_type)(store_statement *statement, int column);
    long long (*column_integer)(store_statement *statement, int column);
    double (*column_real)(store_statement *statement, int column);
    /* NULL for SQL NULL; valid until the next step/reset. */
    const char *(*column_text)(store_statement *statement, int column);
    const void *(*column_blob)(store_statement *statement, int column);
    size_t (*column_bytes)(store_statement *statement, int column);
    /* Back to before the first step; bindings cleared. NULL is fine. */
    void (*reset)(store_statement *statement);
    /* NULL is fine. */
    void (*finalize)(store_statement *statement);
    /* Rows changed by the last statement run on connection. */
    long long (*changes)(store_connection *connection);
    /* 1 when the last error came from losing the server (a PostgreSQL
     * connection gone): the caller answers A700 and reconnects. */
    int (*connection_lost)(store_connection *connection);
    /* 1 while a transaction is open on connection (0 after COMMIT,
     * ROLLBACK, or a rollback the engine did by itself on a full disk or
     * an I/O error). */
    int (*in_transaction)(store_connection *connection);
} store_engine;

extern const store_engine store_engine_sqlite;     /* store_engine_sqlite.c */
extern const store_engine store_engine_postgresql; /* store_engine_postgresql.c */

#ifdef __cplusplus
}
#endif

#endif

/*
 * store_engine_sqlite.c - the SQLite engine (store_engine.h): the only
 * file of mitilog that calls sqlite3_* for the store.
 *
 * A store_connection is the sqlite3 handle itself and a store_statement
 * the sqlite3_stmt itself (no wrapper to allocate); bound texts and blobs
 * are SQLITE_STATIC, as the seam says they are borrowed until reset.
 */
#include "store/store_engine.h"
#include "store/store_engine_sqlite.h"

#include <sqlite3.h>
#include <stdint.h>

static sqlite3 *store_sqlite_database(store_connection *connection)
{
    return (sqlite3 *)(void *)connection;
}

static sqlite3_stmt *store_sqlite_statement(store_statement *statement)
{
    return (sqlite3_stmt *)(void *)statement;
}

static mitilog_status store_sqlite_error(mitilog_error *error, sqlite3 *db, const char *what)
{
    if (db == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: out of memory", what);
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", what, sqlite3_errmsg(db));
}

/* The error of a bind call: the message of the code itself (the
 * connection's last message may be of an earlier statement). */
static mitilog_status store_sqlite_bind_result(int rc, mitilog_error *error)
{
    if (rc == SQLITE_OK)
        return MITILOG_OK;
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "bind: %s", sqlite3_errstr(rc));
}

static mitilog_status store_sqlite_open(const char *target, int read_only, int busy_timeout_ms,
                                        store_connection **out, mitilog_error *error)
{
    *out = NULL;
    /* The read connection: NOMUTEX, since every use of it is serialised
     * by the store, and SQLite's own mutex around each column call cost a
     * sixth of a period view's instructions. The writer: FULLMUTEX. */
    int flags = read_only ? SQLITE_OPEN_READONLY | SQLITE_OPEN_NOMUTEX
                          : SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE | SQLITE_OPEN_FULLMUTEX;
    sqlite3 *db = NULL;
    if (sqlite3_open_v2(target, &db, flags, NULL) != SQLITE_OK) {
        mitilog_error_set(error, MITILOG_ERROR_DATABASE, "open %s: %s", target,
                          db != NULL ? sqlite3_errmsg(db) : "out of memory");
        sqlite3_close(db);
        return MITILOG_ERROR_DATABASE;
    }
    sqlite3_extended_result_codes(db, 1);
    sqlite3_busy_timeout(db, busy_timeout_ms > 0 ? busy_timeout_ms : 0);
    *out = (store_connection *)(void *)db;
    return MITILOG_OK;
}

static void store_sqlite_close(store_connection *connection)
{
    sqlite3 *db = store_sqlite_database(connection);
    if (db != NULL && sqlite3_close(db) != SQLITE_OK)
        sqlite3_close_v2(db); /* statements left: closed once they are finalized */
}

static mitilog_status store_sqlite_execute_script(store_connection *connection, const char *name,
                                                  const char *sql, mitilog_error *error)
{
    sqlite3 *db = store_sqlite_database(connection);
    const char *next = sql;
    while (next != NULL && *next != '\0') {
        sqlite3_stmt *statement = NULL;
        const char *tail = NULL;
        if (sqlite3_prepare_v2(db, next, -1, &statement, &tail) != SQLITE_OK)
            return store_sqlite_error(error, db, name);
        if (statement == NULL) /* only comments or blanks were left */
            break;
        int rc;
        while ((rc = sqlite3_step(statement)) == SQLITE_ROW)
            continue;
        if (rc != SQLITE_DONE) {
            mitilog_status status = store_sqlite_error(error, db, name);
            sqlite3_finalize(statement);
            return status;
        }
        sqlite3_finalize(statement);
        next = tail;
    }
    return MITILOG_OK;
}

static mitilog_status store_sqlite_prepare(store_connection *connection, const char *name,
                                           const char *sql, store_statement **out,
                                           mitilog_error *error)
{
    sqlite3 *db = store_sqlite_database(connection);
    *out = NULL;
    sqlite3_stmt *statement = NULL;
    const char *tail = NULL;
    if (sqlite3_prepare_v3(db, sql, -1, SQLITE_PREPARE_PERSISTENT, &statement, &tail) !=
            SQLITE_OK ||
        statement == NULL) {
        mitilog_status status = store_sqlite_error(error, db, name);
        sqlite3_finalize(statement);
        return status;
    }
    /* A query file holds exactly one statement; anything after it but
     * comments and blanks would be silently ignored. */
    sqlite3_stmt *extra = NULL;
    if (sqlite3_prepare_v2(db, tail, -1, &extra, NULL) != SQLITE_OK || extra != NULL) {
        sqlite3_finalize(extra);
        sqlite3_finalize(statement);
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "%s: must hold exactly one statement", name);
    }
    *out = (store_statement *)(void *)statement;
    return MITILOG_OK;
}

static int store_sqlite_parameter_index(store_statement *statement, const char *name)
{
    return sqlite3_bind_parameter_index(store_sqlite_statement(statement), name);
}

static mitilog_status store_sqlite_bind_null(store_statement *statement, int index,
                                             mitilog_error *error)
{
    return store_sqlite_bind_result(sqlite3_bind_null(store_sqlite_statement(statement), index),
                                    error);
}

static mitilog_status store_sqlite_bind_integer(store_statement *statement, int index,
                                                long long value, mitilog_error *error)
{
    return store_sqlite_bind_result(
        sqlite3_bind_int64(store_sqlite_statement(statement), index, (sqlite3_int64)value), error);
}

static mitilog_status store_sqlite_bind_real(store_statement *statement, int index, double value,
                                             mitilog_error *error)
{
    return store_sqlite_bind_result(
        sqlite3_bind_double(store_sqlite_statement(statement), index, value), error);
}

static mitilog_status store_sqlite_bind_text(store_statement *statement, int index,
                                             const char *text, size_t length, mitilog_error *error)
{
    return store_sqlite_bind_result(sqlite3_bind_text64(store_sqlite_statement(statement), index,
                                                        text, (sqlite3_uint64)length, SQLITE_STATIC,
                                                        SQLITE_UTF8),
                                    error);
}

static mitilog_status store_sqlite_bind_blob(store_statement *statement, int index,
                                             const void *data, size_t length, mitilog_error *error)
{
    return store_sqlite_bind_result(sqlite3_bind_blob64(store_sqlite_statement(statement), index,
                                                        data, (sqlite3_uint64)length,
                                                        SQLITE_STATIC),
                                    error);
}

static mitilog_status store_sqlite_step(store_statement *statement, int *has_row,
                                        mitilog_error *error)
{
    sqlite3_stmt *stmt = store_sqlite_statement(statement);
    int rc = sqlite3_step(stmt);
    if (rc == SQLITE_ROW) {
        *has_row = 1;
        return MITILOG_OK;
    }
    *has_row = 0;
    if (rc == SQLITE_DONE)
        return MITILOG_OK;
    sqlite3 *db = sqlite3_db_handle(stmt);
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s", sqlite3_errmsg(db));
}

static int store_sqlite_column_count(store_statement *statement)
{
    return sqlite3_column_count(store_sqlite_statement(statement));
}

static store_value_type store_sqlite_column_type(store_statement *statement, int column)
{
    switch (sqlite3_column_type(store_sqlite_statement(statement), column)) {
    case SQLITE_INTEGER: return STORE_VALUE_INTEGER;
    case SQLITE_FLOAT: return STORE_VALUE_REAL;
    case SQLITE_TEXT: return STORE_VALUE_TEXT;
    case SQLITE_BLOB: return STORE_VALUE_BLOB;
    default: return STORE_VALUE_NULL;
    }
}

static long long store_sqlite_column_integer(store_statement *statement, int column)
{
    return (long long)sqlite3_column_int64(store_sqlite_statement(statement), column);
}

static double store_sqlite_column_real(store_statement *statement, int column)
{
    return sqlite3_column_double(store_sqlite_statement(statement), column);
}

static const char *store_sqlite_column_text(store_statement *statement, int column)
{
    return (const char *)sqlite3_column_text(store_sqlite_statement(statement), column);
}

static const void *store_sqlite_column_blob(store_statement *statement, int column)
{
    return sqlite3_column_blob(store_sqlite_statement(statement), column);
}

static size_t store_sqlite_column_bytes(store_statement *statement, int column)
{
    int bytes = sqlite3_column_bytes(store_sqlite_statement(statement), column);
    return bytes > 0 ? (size_t)bytes : 0;
}

static void store_sqlite_reset(store_statement *statement)
{
    sqlite3_stmt *stmt = store_sqlite_statement(statement);
    if (stmt == NULL)
        return;
    sqlite3_reset(stmt);
    sqlite3_clear_bindings(stmt);
}

static void store_sqlite_finalize(store_statement *statement)
{
    sqlite3_finalize(store_sqlite_statement(statement));
}

static long long store_sqlite_changes(store_connection *connection)
{
    return (long long)sqlite3_changes64(store_sqlite_database(connection));
}

static int store_sqlite_connection_lost(store_connection *connection)
{
    (void)connection;
    return 0; /* a file is never lost the way a server is */
}

static int store_sqlite_in_transaction(store_connection *connection)
{
    return !sqlite3_get_autocommit(store_sqlite_database(connection));
}

const store_engine store_engine_sqlite = {
    .name = "sqlite",
    .open = store_sqlite_open,
    .close = store_sqlite_close,
    .execute_script = store_sqlite_execute_script,
    .prepare = store_sqlite_prepare,
    .parameter_index = store_sqlite_parameter_index,
    .bind_null = store_sqlite_bind_null,
    .bind_integer = store_sqlite_bind_integer,
    .bind_real = store_sqlite_bind_real,
    .bind_text = store_sqlite_bind_text,
    .bind_blob = store_sqlite_bind_blob,
    .step = store_sqlite_step,
    .column_count = store_sqlite_column_count,
    .column_type = store_sqlite_column_type,
    .column_integer = store_sqlite_column_integer,
    .column_real = store_sqlite_column_real,
    .column_text = store_sqlite_column_text,
    .column_blob = store_sqlite_column_blob,
    .column_bytes = store_sqlite_column_bytes,
    .reset = store_sqlite_reset,
    .finalize = store_sqlite_finalize,
    .changes = store_sqlite_changes,
    .connection_lost = store_sqlite_connection_lost,
    .in_transaction = store_sqlite_in_transaction,
};

void *store_engine_sqlite_handle(store_connection *connection)
{
    return store_sqlite_database(connection);
}

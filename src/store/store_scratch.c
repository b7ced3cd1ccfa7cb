/*
 * store_scratch.c - a private in-memory SQLite connection on which
 * src/report/ writes computed rows into temporary tables (bound
 * parameters only) and serialises them with SQLite's JSON functions, so
 * no JSON is written by hand (DEVELOPERS.md). SQL text from sql/.
 */
#include "store/store_internal.h"

#include <stdlib.h>
#include <string.h>

struct store_scratch_statement {
    sqlite3_stmt *statement;
    struct store_scratch_statement *next;
};

struct store_scratch {
    sqlite3 *db;
    store_scratch_statement *statements;
};

mitilog_status store_scratch_open(const char *schema, store_scratch **out,
                                  mitilog_error *error)
{
    *out = NULL;
    store_scratch *scratch = calloc(1, sizeof *scratch);
    if (scratch == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "scratch: out of memory");
    if (sqlite3_open_v2(":memory:", &scratch->db, SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE,
                        NULL) != SQLITE_OK) {
        mitilog_status status = store_sql_error(error, scratch->db, "open scratch database");
        store_scratch_close(scratch);
        return status;
    }
    if (schema != NULL) {
        mitilog_status status = store_exec_file(scratch->db, schema, error);
        if (status != MITILOG_OK) {
            store_scratch_close(scratch);
            return status;
        }
    }
    *out = scratch;
    return MITILOG_OK;
}

void store_scratch_close(store_scratch *scratch)
{
    if (scratch == NULL)
        return;
    store_scratch_statement *next;
    for (store_scratch_statement *s = scratch->statements; s != NULL; s = next) {
        next = s->next;
        sqlite3_finalize(s->statement);
        free(s);
    }
    sqlite3_close(scratch->db);
    free(scratch);
}

mitilog_status store_scratch_prepare(store_scratch *scratch, const char *name,
                                     store_scratch_statement **out, mitilog_error *error)
{
    *out = NULL;
    store_scratch_statement *s = calloc(1, sizeof *s);
    if (s == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "scratch: out of memory");
    mitilog_status status = store_prepare(scratch->db, name, &s->statement, error);
    if (status != MITILOG_OK) {
        free(s);
        return status;
    }
    s->next = scratch->statements;
    scratch->statements = s;
    *out = s;
    return MITILOG_OK;
}

static int scratch_index(store_scratch_statement *s, const char *name)
{
    return sqlite3_bind_parameter_index(s->statement, name);
}

mitilog_status store_scratch_bind_text(store_scratch_statement *s, const char *name,
                                       const char *text)
{
    int index = scratch_index(s, name);
    if (index == 0)
        return MITILOG_ERROR_INVALID;
    int rc = text == NULL ? sqlite3_bind_null(s->statement, index)
                          : sqlite3_bind_text(s->statement, index, text, -1, SQLITE_TRANSIENT);
    return rc == SQLITE_OK ? MITILOG_OK : MITILOG_ERROR_DATABASE;
}

mitilog_status store_scratch_bind_double(store_scratch_statement *s, const char *name,
                                         int present, double value)
{
    int index = scratch_index(s, name);
    if (index == 0)
        return MITILOG_ERROR_INVALID;
    /* NaN and infinities are not JSON numbers: bound as NULL. */
    int finite = value == value && value - value == 0.0;
    int rc = present && finite ? sqlite3_bind_double(s->statement, index, value)
                               : sqlite3_bind_null(s->statement, index);
    return rc == SQLITE_OK ? MITILOG_OK : MITILOG_ERROR_DATABASE;
}

mitilog_status store_scratch_bind_int(store_scratch_statement *s, const char *name,
                                      long long value)
{
    int index = scratch_index(s, name);
    if (index == 0)
        return MITILOG_ERROR_INVALID;
    return sqlite3_bind_int64(s->statement, index, value) == SQLITE_OK
               ? MITILOG_OK
               : MITILOG_ERROR_DATABASE;
}

mitilog_status store_scratch_run(store_scratch_statement *s, mitilog_error *error)
{
    int rc = sqlite3_step(s->statement);
    mitilog_status status = MITILOG_OK;
    if (rc != SQLITE_DONE && rc != SQLITE_ROW)
        status = store_sql_error(error, sqlite3_db_handle(s->statement), "scratch insert");
    sqlite3_reset(s->statement);
    sqlite3_clear_bindings(s->statement);
    return status;
}

mitilog_status store_scratch_text(store_scratch_statement *s, char **text,
                                  mitilog_error *error)
{
    *text = NULL;
    mitilog_status status;
    if (sqlite3_step(s->statement) != SQLITE_ROW)
        status = store_sql_error(error, sqlite3_db_handle(s->statement), "scratch query");
    else
        status = store_column_dup(s->statement, text, error);
    sqlite3_reset(s->statement);
    sqlite3_clear_bindings(s->statement);
    return status;
}

/*
 * store_metrics.c - the database's figures for GET /metrics
 * (store_metrics.h): one grouped count of the current findings and the
 * database's size. Read connection, under reader_lock.
 */
#include "store/store_metrics.h"

#include <stdlib.h>
#include <string.h>

#include "store/store_internal.h"

static const char store_metrics_findings_sql[] = "queries/metrics/findings_by_rule.sql";
static const char store_metrics_size_sql[] = "queries/metrics/database_size.sql";

/* The database's size in bytes by its engine's own measure (the SQL file
 * says which); 0 when it cannot be read (the series is then left out). */
static int store_metrics_size(store *st, uint64_t *bytes)
{
    sqlite3_stmt *statement = NULL;
    int found = 0;
    if (store_cached_statement(&st->reader_cache, st->reader, store_metrics_size_sql, &statement,
                               NULL) == MITILOG_OK &&
        sqlite3_step(statement) == SQLITE_ROW && sqlite3_column_int64(statement, 0) >= 0) {
        *bytes = (uint64_t)sqlite3_column_int64(statement, 0);
        found = 1;
    }
    store_release(statement);
    return found;
}

/* Appends the current row to database->findings; SQLITE_NOMEM when it
 * cannot. */
static int store_metrics_row(sqlite3_stmt *statement, metrics_database *database, size_t *capacity)
{
    if (database->finding_count == *capacity) {
        size_t grown = *capacity != 0 ? *capacity * 2 : 16;
        metrics_finding_count *rows = realloc(database->findings, grown * sizeof *rows);
        if (rows == NULL)
            return SQLITE_NOMEM;
        database->findings = rows;
        *capacity = grown;
    }
    const unsigned char *rule = sqlite3_column_text(statement, 0);
    const unsigned char *severity = sqlite3_column_text(statement, 1);
    metrics_finding_count *row = &database->findings[database->finding_count];
    row->rule_id = strdup(rule != NULL ? (const char *)rule : "");
    row->severity = strdup(severity != NULL ? (const char *)severity : "");
    sqlite3_int64 count = sqlite3_column_int64(statement, 2);
    row->count = count > 0 ? (uint64_t)count : 0;
    database->finding_count++;
    return row->rule_id != NULL && row->severity != NULL ? SQLITE_OK : SQLITE_NOMEM;
}

mitilog_status store_metrics_read(store *st, metrics_database *database, mitilog_error *error)
{
    if (st == NULL || database == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_metrics_read: no store or result");
    memset(database, 0, sizeof *database);
    size_t capacity = 0;
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_cached_statement(&st->reader_cache, st->reader,
                                                   store_metrics_findings_sql, &statement, error);
    if (status == MITILOG_OK) {
        int rc;
        while ((rc = sqlite3_step(statement)) == SQLITE_ROW) {
            rc = store_metrics_row(statement, database, &capacity);
            if (rc != SQLITE_OK)
                break;
        }
        if (rc == SQLITE_NOMEM)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                       "out of memory reading the findings' counts");
        else if (rc != SQLITE_DONE)
            status = store_sql_error(error, st->reader, store_metrics_findings_sql);
    }
    store_release(statement);
    if (status == MITILOG_OK)
        database->has_size = store_metrics_size(st, &database->size_bytes);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        metrics_database_free(database);
        return status;
    }
    database->readable = 1;
    return MITILOG_OK;
}

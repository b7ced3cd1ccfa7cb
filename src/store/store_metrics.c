/*
 * store_metrics.c - the database's figures for GET /metrics
 * (store_metrics.h): one grouped count of the current findings and the
 * database's size, through the statement layer (store_statement.h) on the
 * read link, under reader_lock; the SQL is in sql/queries/metrics/.
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
    store_query query;
    store_query_begin(&query, &st->reader, store_metrics_size_sql);
    int found = store_query_step(&query) && !store_column_is_null(&query, 0) &&
                store_column_integer(&query, 0) >= 0;
    if (found)
        *bytes = (uint64_t)store_column_integer(&query, 0);
    store_query_end(&query);
    return found;
}

/* Appends the current row to database->findings; 0 when out of memory. */
static int store_metrics_row(store_query *query, metrics_database *database, size_t *capacity)
{
    if (database->finding_count == *capacity) {
        size_t grown = *capacity != 0 ? *capacity * 2 : 16;
        metrics_finding_count *rows = realloc(database->findings, grown * sizeof *rows);
        if (rows == NULL)
            return 0;
        database->findings = rows;
        *capacity = grown;
    }
    const char *rule = store_column_text(query, 0);
    const char *severity = store_column_text(query, 1);
    metrics_finding_count *row = &database->findings[database->finding_count];
    row->rule_id = strdup(rule != NULL ? rule : "");
    row->severity = strdup(severity != NULL ? severity : "");
    long long count = store_column_integer(query, 2);
    row->count = count > 0 ? (uint64_t)count : 0;
    database->finding_count++;
    return row->rule_id != NULL && row->severity != NULL;
}

mitilog_status store_metrics_read(store *st, metrics_database *database, mitilog_error *error)
{
    if (st == NULL || database == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_metrics_read: no store or result");
    memset(database, 0, sizeof *database);
    size_t capacity = 0;
    int out_of_memory = 0;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, store_metrics_findings_sql);
    while (!out_of_memory && store_query_step(&query))
        out_of_memory = !store_metrics_row(&query, database, &capacity);
    mitilog_status status = store_query_end(&query);
    if (out_of_memory)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                   "out of memory reading the findings' counts");
    else if (status != MITILOG_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "findings by rule: %s",
                                   query.error.text);
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

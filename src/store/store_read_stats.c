/*
 * store_read_stats.c - the reads behind statistics, outliers and the
 * ingest status (store.h, "Statistics reads"): plain rows for src/report/,
 * from sql/queries/stats_*.sql and ingest_status.sql, on the read
 * connection under reader_lock. Statements are prepared per call (these
 * are reports, not hot paths) so the store's statement table is unchanged.
 */
#include "store/store_internal.h"

#include <stdlib.h>
#include <string.h>

/* Column text copied (NULL stays NULL); sets *failed on allocation
 * failure. */
static char *store_text_copy(sqlite3_stmt *statement, int column, int *failed)
{
    const unsigned char *text = sqlite3_column_text(statement, column);
    if (text == NULL)
        return NULL;
    size_t length = (size_t)sqlite3_column_bytes(statement, column);
    char *copy = malloc(length + 1);
    if (copy == NULL) {
        *failed = 1;
        return NULL;
    }
    memcpy(copy, text, length);
    copy[length] = '\0';
    return copy;
}

static double store_double(sqlite3_stmt *statement, int column, int *present)
{
    int null = sqlite3_column_type(statement, column) == SQLITE_NULL;
    if (present != NULL)
        *present = !null;
    return null ? 0.0 : sqlite3_column_double(statement, column);
}

/* Prepares name on the reader and binds the two days. Call under lock. */
static mitilog_status store_period_statement(store *st, const char *name,
                                             const char *from_day,
                                             const char *to_day,
                                             sqlite3_stmt **statement,
                                             mitilog_error *error)
{
    mitilog_status status = store_prepare(st->reader, name, statement, error);
    if (status != MITILOG_OK)
        return status;
    if (sqlite3_bind_text(*statement, 1, from_day, -1, SQLITE_TRANSIENT) != SQLITE_OK ||
        sqlite3_bind_text(*statement, 2, to_day, -1, SQLITE_TRANSIENT) != SQLITE_OK) {
        sqlite3_finalize(*statement);
        *statement = NULL;
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind failed", name);
    }
    return MITILOG_OK;
}

void store_exam_rows_free(store_exam_row *rows, size_t count)
{
    for (size_t i = 0; rows != NULL && i < count; i++) {
        store_exam_row *row = &rows[i];
        free(row->study_instance_uid);
        free(row->day);
        free(row->exam_type);
        free(row->exam_type_label);
        free(row->governing_index);
        free(row->room);
        free(row->preset);
        free(row->shift);
        free(row->transducer);
        free(row->study_description);
        free(row->first_acquired_at);
    }
    free(rows);
}

mitilog_status store_load_exam_rows(store *st, const char *from_day, const char *to_day,
                                    store_exam_row **rows, size_t *count,
                                    mitilog_error *error)
{
    *rows = NULL;
    *count = 0;
    if (st == NULL || from_day == NULL || to_day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_load_exam_rows: no store or period");
    sqlite3_stmt *statement = NULL;
    store_exam_row *list = NULL;
    size_t n = 0, capacity = 0;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status = store_period_statement(st, "queries/stats_exam_rows.sql",
                                                   from_day, to_day, &statement, error);
    int rc = SQLITE_DONE;
    while (status == MITILOG_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        if (n == capacity) {
            size_t grown_capacity = capacity ? capacity * 2 : 256;
            store_exam_row *grown = realloc(list, grown_capacity * sizeof *grown);
            if (grown == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam rows: out of memory");
                break;
            }
            list = grown;
            capacity = grown_capacity;
        }
        store_exam_row *row = &list[n++];
        memset(row, 0, sizeof *row);
        int failed = 0;
        row->study_instance_uid = store_text_copy(statement, 0, &failed);
        row->day = store_text_copy(statement, 1, &failed);
        row->exam_type = store_text_copy(statement, 2, &failed);
        row->exam_type_label = store_text_copy(statement, 3, &failed);
        row->governing_index = store_text_copy(statement, 4, &failed);
        row->max_governing = store_double(statement, 5, &row->has_max_governing);
        row->max_mi = store_double(statement, 6, &row->has_max_mi);
        row->room = store_text_copy(statement, 7, &failed);
        row->preset = store_text_copy(statement, 8, &failed);
        row->shift = store_text_copy(statement, 9, &failed);
        row->transducer = store_text_copy(statement, 10, &failed);
        row->study_description = store_text_copy(statement, 11, &failed);
        row->estimated_seconds = store_double(statement, 12, NULL);
        for (int t = 0; t < STORE_THRESHOLD_COUNT; t++)
            row->seconds_at_or_above[t] = store_double(statement, 13 + t, NULL);
        row->capture_count = (long)sqlite3_column_int64(statement, 17);
        row->indexed_count = (long)sqlite3_column_int64(statement, 18);
        row->finding_count = (long)sqlite3_column_int64(statement, 19);
        row->first_acquired_at = store_text_copy(statement, 20, &failed);
        if (failed)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam rows: out of memory");
    }
    if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = store_sql_error(error, st->reader, "query exam rows");
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_exam_rows_free(list, n);
        return status;
    }
    *rows = list;
    *count = n;
    return MITILOG_OK;
}

void store_finding_counts_free(store_finding_count *rows, size_t count)
{
    for (size_t i = 0; rows != NULL && i < count; i++) {
        free(rows[i].study_instance_uid);
        free(rows[i].rule_id);
    }
    free(rows);
}

mitilog_status store_load_finding_counts(store *st, const char *from_day, const char *to_day,
                                         store_finding_count **rows, size_t *count,
                                         mitilog_error *error)
{
    *rows = NULL;
    *count = 0;
    if (st == NULL || from_day == NULL || to_day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_load_finding_counts: no store or period");
    sqlite3_stmt *statement = NULL;
    store_finding_count *list = NULL;
    size_t n = 0, capacity = 0;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status = store_period_statement(st, "queries/stats_finding_counts.sql",
                                                   from_day, to_day, &statement, error);
    int rc = SQLITE_DONE;
    while (status == MITILOG_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        if (n == capacity) {
            size_t grown_capacity = capacity ? capacity * 2 : 64;
            store_finding_count *grown = realloc(list, grown_capacity * sizeof *grown);
            if (grown == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "findings: out of memory");
                break;
            }
            list = grown;
            capacity = grown_capacity;
        }
        store_finding_count *row = &list[n++];
        int failed = 0;
        row->study_instance_uid = store_text_copy(statement, 0, &failed);
        row->rule_id = store_text_copy(statement, 1, &failed);
        row->count = (long)sqlite3_column_int64(statement, 2);
        if (failed)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "findings: out of memory");
    }
    if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = store_sql_error(error, st->reader, "query finding counts");
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_finding_counts_free(list, n);
        return status;
    }
    *rows = list;
    *count = n;
    return MITILOG_OK;
}

void store_period_info_free(store_period_info *info)
{
    if (info == NULL)
        return;
    free(info->policy_version);
    free(info->policy_name);
    free(info->finding_policy_versions);
    free(info->first_day);
    free(info->last_day);
    memset(info, 0, sizeof *info);
}

mitilog_status store_load_period_info(store *st, const char *from_day, const char *to_day,
                                      store_period_info *info, mitilog_error *error)
{
    memset(info, 0, sizeof *info);
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_load_period_info: no store");
    sqlite3_stmt *statement = NULL;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status = store_period_statement(st, "queries/stats_policy_info.sql",
                                                   from_day ? from_day : "0000-00-00",
                                                   to_day ? to_day : "9999-99-99",
                                                   &statement, error);
    if (status == MITILOG_OK) {
        if (sqlite3_step(statement) != SQLITE_ROW) {
            status = store_sql_error(error, st->reader, "query period information");
        } else {
            int failed = 0;
            info->policy_version = store_text_copy(statement, 0, &failed);
            info->policy_name = store_text_copy(statement, 1, &failed);
            info->finding_policy_versions = store_text_copy(statement, 2, &failed);
            info->first_day = store_text_copy(statement, 3, &failed);
            info->last_day = store_text_copy(statement, 4, &failed);
            if (failed)
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                           "period information: out of memory");
        }
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK)
        store_period_info_free(info);
    return status;
}

mitilog_status store_ingest_json(store *st, int window_hours, int silent_hours, int days,
                                 char **json, mitilog_error *error)
{
    *json = NULL;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_ingest_json: no store");
    sqlite3_stmt *statement = NULL;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status = store_prepare(st->reader, "queries/ingest_status.sql",
                                          &statement, error);
    if (status == MITILOG_OK) {
        if (sqlite3_bind_int(statement, 1, window_hours) != SQLITE_OK ||
            sqlite3_bind_int(statement, 2, silent_hours) != SQLITE_OK ||
            sqlite3_bind_int(statement, 3, days) != SQLITE_OK)
            status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "ingest status: bind");
        else if (sqlite3_step(statement) != SQLITE_ROW)
            status = store_sql_error(error, st->reader, "query ingest status");
        else
            status = store_column_dup(statement, json, error);
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

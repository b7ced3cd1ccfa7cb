/*
 * store_findings_read.c - the read side of the ALARA policy engine: what
 * an evaluation needs (a study's context, lists of studies and days, the
 * instances of a day) and the JSON of GET /api/v1/findings and
 * /api/v1/policy. Read connection, under reader_lock; statements come from the
 * reader's statement cache (store_cached_statement) and live until
 * store_close().
 */
#include "store/store_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "extract/ext_timeline.h"

enum { STORE_FINDINGS_LIMIT_DEFAULT = 1000, STORE_FINDINGS_LIMIT_MAX = 10000 };

static char *store_copy(sqlite3_stmt *statement, int column, int *failed)
{
    const unsigned char *text = sqlite3_column_text(statement, column);
    if (text == NULL)
        return NULL;
    char *copy = strdup((const char *)text);
    if (copy == NULL)
        *failed = 1;
    return copy;
}

static int store_bind_optional(sqlite3_stmt *statement, int index, const char *text)
{
    if (text == NULL || text[0] == '\0')
        return sqlite3_bind_null(statement, index);
    return sqlite3_bind_text(statement, index, text, -1, SQLITE_TRANSIENT);
}

void store_active_policy_version(store *st, char out[65])
{
    out[0] = '\0';
    if (st == NULL)
        return;
    pthread_mutex_lock(&st->reader_lock);
    snprintf(out, 65, "%s", st->active_policy);
    pthread_mutex_unlock(&st->reader_lock);
}

void store_study_context_free(store_study_context *context)
{
    if (context == NULL)
        return;
    free(context->room);
    free(context->preset);
    free(context->shift);
    free(context->transducer);
    free(context->age_group);
    free(context->last_received_at);
    memset(context, 0, sizeof *context);
}

mitilog_status store_load_study_context(store *st, const char *study_instance_uid,
                                        double now_unix_seconds, store_study_context *context,
                                        mitilog_error *error)
{
    memset(context, 0, sizeof *context);
    if (st == NULL || study_instance_uid == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "study context: no study");
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_cached_statement(
        &st->reader_cache, st->reader, "queries/instances/study_context.sql", &statement, error);
    if (status == MITILOG_OK) {
        int rc = sqlite3_bind_text(statement, 1, study_instance_uid, -1, SQLITE_TRANSIENT);
        if (rc == SQLITE_OK)
            rc = sqlite3_bind_double(statement, 2, now_unix_seconds);
        if (rc == SQLITE_OK && sqlite3_step(statement) == SQLITE_ROW) {
            int failed = 0;
            context->room = store_copy(statement, 0, &failed);
            context->preset = store_copy(statement, 1, &failed);
            context->shift = store_copy(statement, 2, &failed);
            context->transducer = store_copy(statement, 3, &failed);
            context->age_group = store_copy(statement, 4, &failed);
            context->last_received_at = store_copy(statement, 5, &failed);
            context->found = context->last_received_at != NULL;
            context->idle_seconds = sqlite3_column_double(statement, 6);
            if (failed)
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
        } else {
            status = store_sql_error(error, st->reader, "study context");
        }
    }
    store_release(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK)
        store_study_context_free(context);
    return status;
}

void store_texts_free(char **texts, size_t count)
{
    for (size_t i = 0; texts != NULL && i < count; i++)
        free(texts[i]);
    free(texts);
}

mitilog_status store_list(store *st, store_list_kind kind, const char *a, const char *b,
                          char ***texts, size_t *count, mitilog_error *error)
{
    static const char *const files[] = {
        "queries/exams/exams_in_period.sql", "queries/exams/exams_due_closing.sql",
        "queries/instances/study_days.sql", "queries/reports/days_in_period.sql"};
    *texts = NULL;
    *count = 0;
    if (st == NULL || (unsigned)kind > STORE_LIST_DAYS)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_list: bad arguments");
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_cached_statement(&st->reader_cache, st->reader, files[kind], &statement, error);
    size_t capacity = 0;
    if (status == MITILOG_OK) {
        int rc;
        if (kind == STORE_LIST_DUE_CLOSING) {
            rc = sqlite3_bind_double(statement, 1, a != NULL ? strtod(a, NULL) : 0);
            if (rc == SQLITE_OK)
                rc = sqlite3_bind_double(statement, 2, b != NULL ? strtod(b, NULL) : 0);
        } else {
            rc = store_bind_optional(statement, 1, a);
            if (rc == SQLITE_OK && kind != STORE_LIST_STUDY_DAYS)
                rc = store_bind_optional(statement, 2, b);
        }
        while (rc == SQLITE_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
            rc = SQLITE_OK;
            if (sqlite3_column_text(statement, 0) == NULL)
                continue;
            if (*count == capacity) {
                size_t grown = capacity ? capacity * 2 : 16;
                char **array = realloc(*texts, grown * sizeof *array);
                if (array == NULL) {
                    rc = SQLITE_NOMEM;
                    break;
                }
                *texts = array;
                capacity = grown;
            }
            int failed = 0;
            (*texts)[*count] = store_copy(statement, 0, &failed);
            if (failed) {
                rc = SQLITE_NOMEM;
                break;
            }
            (*count)++;
        }
        if (rc != SQLITE_DONE)
            status = rc == SQLITE_NOMEM
                         ? mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory")
                         : store_sql_error(error, st->reader, files[kind]);
    }
    store_release(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_texts_free(*texts, *count);
        *texts = NULL;
        *count = 0;
    }
    return status;
}

void store_day_instances_free(exam_device_instance *instances, size_t count)
{
    for (size_t i = 0; instances != NULL && i < count; i++) {
        free((char *)instances[i].sop_instance_uid);
        free((char *)instances[i].study_instance_uid);
        free((char *)instances[i].room);
        free((char *)instances[i].transducer);
    }
    free(instances);
}

mitilog_status store_load_day_instances(store *st, const char *day,
                                        exam_device_instance **instances, size_t *count,
                                        mitilog_error *error)
{
    *instances = NULL;
    *count = 0;
    if (st == NULL || day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "day instances: no day");
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_cached_statement(
        &st->reader_cache, st->reader, "queries/instances/device_instances.sql", &statement, error);
    size_t capacity = 0;
    if (status == MITILOG_OK) {
        int rc = sqlite3_bind_text(statement, 1, day, -1, SQLITE_TRANSIENT);
        while (rc == SQLITE_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
            rc = SQLITE_OK;
            if (*count == capacity) {
                size_t grown = capacity ? capacity * 2 : 64;
                exam_device_instance *array = realloc(*instances, grown * sizeof *array);
                if (array == NULL) {
                    rc = SQLITE_NOMEM;
                    break;
                }
                *instances = array;
                capacity = grown;
            }
            exam_device_instance *instance = &(*instances)[(*count)++];
            int failed = 0;
            memset(instance, 0, sizeof *instance);
            instance->sop_instance_uid = store_copy(statement, 0, &failed);
            instance->study_instance_uid = store_copy(statement, 1, &failed);
            instance->room = store_copy(statement, 2, &failed);
            instance->transducer = store_copy(statement, 3, &failed);
            instance->has_any_index = sqlite3_column_int(statement, 4) != 0;
            const unsigned char *acquired_at = sqlite3_column_text(statement, 5);
            double seconds =
                acquired_at != NULL ? ext_iso_to_seconds((const char *)acquired_at) : -1;
            instance->time_seconds = seconds;
            instance->has_time = seconds >= 0;
            if (failed) {
                rc = SQLITE_NOMEM;
                break;
            }
        }
        if (rc != SQLITE_DONE)
            status = rc == SQLITE_NOMEM
                         ? mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory")
                         : store_sql_error(error, st->reader, "day instances");
    }
    store_release(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_day_instances_free(*instances, *count);
        *instances = NULL;
        *count = 0;
    }
    return status;
}

/* Runs a one-row JSON query prepared here; NOT_FOUND when it gives no row. */
static mitilog_status store_json_query(store *st, sqlite3_stmt *statement, int rc, const char *what,
                                       char **json, mitilog_error *error)
{
    mitilog_status status;
    if (rc != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind: %s", what,
                                   sqlite3_errstr(rc));
    else if ((rc = sqlite3_step(statement)) == SQLITE_DONE)
        status = mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "%s: none", what);
    else if (rc != SQLITE_ROW)
        status = store_sql_error(error, st->reader, what);
    else
        status = store_column_dup(statement, json, error);
    return status;
}

mitilog_status store_findings_json(store *st, const store_finding_filter *filter, char **json,
                                   mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_findings_json: no store");
    *json = NULL;
    store_finding_filter none = {0};
    if (filter == NULL)
        filter = &none;
    long limit = filter->limit <= 0                         ? STORE_FINDINGS_LIMIT_DEFAULT
                 : filter->limit > STORE_FINDINGS_LIMIT_MAX ? STORE_FINDINGS_LIMIT_MAX
                                                            : filter->limit;
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_cached_statement(
        &st->reader_cache, st->reader, "queries/findings/findings.sql", &statement, error);
    if (status == MITILOG_OK) {
        const char *texts[] = {filter->from, filter->to,     filter->severity, filter->rule,
                               filter->room, filter->preset, filter->shift};
        int rc = SQLITE_OK;
        for (int i = 0; rc == SQLITE_OK && i < 7; i++)
            rc = store_bind_optional(statement, i + 1, texts[i]);
        if (rc == SQLITE_OK)
            rc = sqlite3_bind_int(statement, 8, filter->include_superseded != 0);
        if (rc == SQLITE_OK)
            rc = sqlite3_bind_int64(statement, 9, limit);
        if (rc == SQLITE_OK)
            rc = store_bind_sites(statement, filter->sites);
        status = store_json_query(st, statement, rc, "query findings", json, error);
    }
    store_release(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_policy_json(store *st, char **json, mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_policy_json: no store");
    *json = NULL;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status;
    sqlite3_stmt *statement = NULL;
    if (st->active_policy[0] == '\0')
        status = mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "no policy is loaded");
    else if ((status = store_cached_statement(&st->reader_cache, st->reader,
                                              "queries/findings/policy_json.sql", &statement,
                                              error)) == MITILOG_OK)
        status = store_json_query(
            st, statement, sqlite3_bind_text(statement, 1, st->active_policy, -1, SQLITE_TRANSIENT),
            "query policy", json, error);
    store_release(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

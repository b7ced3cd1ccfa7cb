/*
 * store_read_exam.c - the read side of exams: a study's instances as
 * plain structs for ext_exam_build() (store_load_study), and the JSON of
 * one exam (store_study_json). Read connection, under reader_lock.
 */
#include "store/store_internal.h"

#include <stdlib.h>
#include <string.h>

static char *store_column_copy(sqlite3_stmt *statement, int column, int *failed)
{
    const unsigned char *text = sqlite3_column_text(statement, column);
    if (text == NULL)
        return NULL;
    char *copy = strdup((const char *)text);
    if (copy == NULL)
        *failed = 1;
    return copy;
}

static exam_value_status store_status_of(const unsigned char *text)
{
    if (text == NULL)
        return EXAM_VALUE_MISSING;
    if (strcmp((const char *)text, "ok") == 0)
        return EXAM_VALUE_OK;
    return strcmp((const char *)text, "invalid") == 0 ? EXAM_VALUE_INVALID : EXAM_VALUE_MISSING;
}

static int store_fill_instance(sqlite3_stmt *statement, ext_exam_instance *instance)
{
    int failed = 0;
    memset(instance, 0, sizeof *instance);
    instance->sop_instance_uid = store_column_copy(statement, 0, &failed);
    instance->kind = store_column_copy(statement, 1, &failed);
    instance->acquired_at = store_column_copy(statement, 2, &failed);
    instance->exam_type = store_column_copy(statement, 3, &failed);
    instance->exam_type_source = store_column_copy(statement, 4, &failed);
    instance->is_capture = sqlite3_column_int(statement, 5) != 0 && instance->kind != NULL &&
                           strcmp(instance->kind, "sr") != 0;
    for (int x = 0; x < EXAM_INDEX_COUNT; x++) {
        instance->indices[x].status = store_status_of(sqlite3_column_text(statement, 7 + 2 * x));
        if (instance->indices[x].status == EXAM_VALUE_OK)
            instance->indices[x].value = sqlite3_column_double(statement, 6 + 2 * x);
    }
    instance->modes = (unsigned)sqlite3_column_int64(statement, 18);
    instance->cine_seconds = sqlite3_column_double(statement, 19);
    if (sqlite3_column_type(statement, 20) != SQLITE_NULL) {
        instance->has_sr_gestational_age = 1;
        instance->sr_gestational_age_weeks = sqlite3_column_double(statement, 20);
        instance->sr_gestational_age_position = store_column_copy(statement, 21, &failed);
    }
    if (sqlite3_column_type(statement, 22) != SQLITE_NULL) {
        instance->has_sr_scan_time = 1;
        instance->sr_scan_time_seconds = sqlite3_column_double(statement, 22);
    }
    return failed ? -1 : 0;
}

mitilog_status store_load_study(store *st, const char *study_instance_uid,
                                ext_exam_instance **instances, size_t *count, mitilog_error *error)
{
    *instances = NULL;
    *count = 0;
    if (st == NULL || study_instance_uid == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_load_study: no study");
    mitilog_status status = MITILOG_OK;
    size_t capacity = 0;
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = st->read.study_load;
    int rc = sqlite3_bind_text(statement, 1, study_instance_uid, -1, SQLITE_TRANSIENT);
    while (rc == SQLITE_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        if (*count == capacity) {
            size_t grown = capacity == 0 ? 16 : capacity * 2;
            ext_exam_instance *array = realloc(*instances, grown * sizeof *array);
            if (array == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
                break;
            }
            *instances = array;
            capacity = grown;
        }
        int failed = store_fill_instance(statement, &(*instances)[*count]);
        (*count)++;
        if (failed) {
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
            break;
        }
        rc = SQLITE_OK;
    }
    if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = store_sql_error(error, st->reader, "load study");
    sqlite3_reset(statement);
    sqlite3_clear_bindings(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_study_free(*instances, *count);
        *instances = NULL;
        *count = 0;
    }
    return status;
}

void store_study_free(ext_exam_instance *instances, size_t count)
{
    for (size_t i = 0; instances != NULL && i < count; i++) {
        free(instances[i].sop_instance_uid);
        free(instances[i].kind);
        free(instances[i].acquired_at);
        free(instances[i].exam_type);
        free(instances[i].exam_type_source);
        free(instances[i].sr_gestational_age_position);
    }
    free(instances);
}

mitilog_status store_study_json(store *st, const char *study_instance_uid, char **json,
                                mitilog_error *error)
{
    if (st == NULL || json == NULL || study_instance_uid == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_study_json: no study");
    *json = NULL;
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = st->read.study_detail;
    mitilog_status status;
    int rc = sqlite3_bind_text(statement, 1, study_instance_uid, -1, SQLITE_TRANSIENT);
    if (rc == SQLITE_OK)
        rc = st->active_policy[0] != '\0'
                 ? sqlite3_bind_text(statement, 2, st->active_policy, -1, SQLITE_TRANSIENT)
                 : sqlite3_bind_null(statement, 2);
    if (rc != SQLITE_OK)
        status =
            mitilog_error_set(error, MITILOG_ERROR_DATABASE, "study: bind: %s", sqlite3_errstr(rc));
    else if ((rc = sqlite3_step(statement)) == SQLITE_DONE)
        status =
            mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "no study %s", study_instance_uid);
    else if (rc != SQLITE_ROW)
        status = store_sql_error(error, st->reader, "query study");
    else
        status = store_column_dup(statement, json, error);
    sqlite3_reset(statement);
    sqlite3_clear_bindings(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

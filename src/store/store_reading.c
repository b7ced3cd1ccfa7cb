/*
 * store_reading.c - the reading queue and the pixel readings (migration
 * 007, store_reading.h). Writes run on the writer connection inside a
 * batch's transaction; the lists on the read connection.
 */
#include "store/store_reading.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/store_internal.h"
#include "util/files.h"

static mitilog_status reading_error(store *st, mitilog_error *error, const char *what)
{
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "reading queue: %s: %s", what,
                             sqlite3_errmsg(st->writer));
}

static sqlite3_stmt *writer_statement(store *st, const char *name, mitilog_error *error)
{
    sqlite3_stmt *statement = NULL;
    if (store_cached_statement(&st->writer_cache, st->writer, name, &statement, error) !=
        MITILOG_OK)
        return NULL;
    return statement;
}

static mitilog_status clear_older(store *st, sqlite3_int64 instance_id, char **stale_spool,
                                  mitilog_error *error);
static mitilog_status write_request(store *st, const store_reading_request *reading,
                                    sqlite3_int64 instance_id, mitilog_error *error);

mitilog_status store_write_reading(store *st, const store_reading_request *reading,
                                   sqlite3_int64 instance_id, int replaced, char **stale_spool,
                                   mitilog_error *error)
{
    *stale_spool = NULL;
    if (replaced) {
        mitilog_status status = clear_older(st, instance_id, stale_spool, error);
        if (status != MITILOG_OK)
            return status;
    }
    if (reading == NULL)
        return MITILOG_OK;
    return write_request(st, reading, instance_id, error);
}

/* Drops an instance's older queue row and reading. */
static mitilog_status clear_older(store *st, sqlite3_int64 instance_id, char **stale_spool,
                                  mitilog_error *error)
{
    sqlite3_stmt *clear_queue =
        writer_statement(st, "queries/readings/reading_clear_queue.sql", error);
    if (clear_queue == NULL)
        return MITILOG_ERROR_DATABASE;
    int rc = sqlite3_bind_int64(clear_queue, 1, instance_id);
    while (rc == SQLITE_OK && (rc = sqlite3_step(clear_queue)) == SQLITE_ROW) {
        const unsigned char *path = sqlite3_column_text(clear_queue, 0);
        if (path != NULL && *stale_spool == NULL)
            *stale_spool = strdup((const char *)path);
        rc = SQLITE_OK;
    }
    store_release(clear_queue);
    if (rc != SQLITE_DONE)
        return reading_error(st, error, "clear");
    sqlite3_stmt *clear_reading =
        writer_statement(st, "queries/readings/reading_clear_reading.sql", error);
    if (clear_reading == NULL)
        return MITILOG_ERROR_DATABASE;
    rc = sqlite3_bind_int64(clear_reading, 1, instance_id);
    if (rc == SQLITE_OK)
        rc = store_step_done(clear_reading);
    store_release(clear_reading);
    if (rc != SQLITE_DONE)
        return reading_error(st, error, "clear reading");
    return MITILOG_OK;
}

/* The queue row (or the 'not_read' state) of a reading request. */
static mitilog_status write_request(store *st, const store_reading_request *reading,
                                    sqlite3_int64 instance_id, mitilog_error *error)
{
    char now[40];
    int rc;
    files_utc_now(now, sizeof now);
    if (reading->not_read_reason == NULL) {
        sqlite3_stmt *insert =
            writer_statement(st, "queries/readings/reading_queue_insert.sql", error);
        if (insert == NULL)
            return MITILOG_ERROR_DATABASE;
        rc = store_bind_int_named(st, insert, ":instance_id", instance_id);
        if (rc == SQLITE_OK)
            rc = store_bind_text_named(st, insert, ":path", reading->path);
        if (rc == SQLITE_OK)
            rc = store_bind_int_named(st, insert, ":owned", reading->owned ? 1 : 0);
        if (rc == SQLITE_OK)
            rc = store_bind_int_named(st, insert, ":bytes", reading->bytes);
        if (rc == SQLITE_OK)
            rc = store_bind_text_named(st, insert, ":queued_at", now);
        if (rc == SQLITE_OK)
            rc = store_step_done(insert);
        store_release(insert);
        if (rc != SQLITE_DONE)
            return reading_error(st, error, "queue");
    }
    sqlite3_stmt *state = writer_statement(st, "queries/readings/reading_state_insert.sql", error);
    if (state == NULL)
        return MITILOG_ERROR_DATABASE;
    rc = store_bind_int_named(st, state, ":instance_id", instance_id);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, state, ":state",
                                   reading->not_read_reason == NULL ? "queued" : "not_read");
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, state, ":reason", reading->not_read_reason);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, state, ":updated_at", now);
    if (rc == SQLITE_OK)
        rc = store_step_done(state);
    store_release(state);
    if (rc != SQLITE_DONE)
        return reading_error(st, error, "state");
    return MITILOG_OK;
}

typedef struct enqueue_context {
    long long instance_id;
    const store_reading_request *reading;
} enqueue_context;

static mitilog_status write_enqueue(store *st, const void *context, mitilog_error *error)
{
    const enqueue_context *c = context;
    char *stale = NULL;
    mitilog_status status = store_write_reading(st, c->reading, c->instance_id, 1, &stale, error);
    free(stale); /* a backfill never replaces a spool copy still queued */
    return status;
}

mitilog_status store_reading_enqueue(store *st, long long instance_id,
                                     const store_reading_request *reading, mitilog_error *error)
{
    if (st == NULL || reading == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "reading queue: nothing to queue");
    enqueue_context context = {instance_id, reading};
    return store_submit_custom(st, write_enqueue, &context, error);
}

typedef struct result_context {
    const store_screen_result *result;
    int stale;
} result_context;

static int bind_value(store *st, sqlite3_stmt *statement, const char *index,
                      const store_screen_value *v)
{
    char name[48];
    int read = v->status != NULL && strcmp(v->status, "read") == 0;
    snprintf(name, sizeof name, ":%s", index);
    int rc = store_bind_double_named(st, statement, name, read, v->value);
    snprintf(name, sizeof name, ":%s_status", index);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, name, v->status);
    snprintf(name, sizeof name, ":%s_text", index);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, name, v->status != NULL ? v->text : NULL);
    snprintf(name, sizeof name, ":%s_decimals", index);
    if (rc == SQLITE_OK) {
        int i = store_parameter_index(st, statement, name);
        rc = i == 0 ? SQLITE_RANGE
             : read ? sqlite3_bind_int(statement, i, v->decimals)
                    : sqlite3_bind_null(statement, i);
    }
    snprintf(name, sizeof name, ":%s_reason", index);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, name, read ? NULL : v->reason);
    return rc;
}

static mitilog_status write_result(store *st, const void *context, mitilog_error *error)
{
    result_context *c = (result_context *)context;
    const store_screen_result *r = c->result;
    sqlite3_stmt *take = writer_statement(st, "queries/readings/reading_queue_take.sql", error);
    if (take == NULL)
        return MITILOG_ERROR_DATABASE;
    int rc = sqlite3_bind_int64(take, 1, r->instance_id);
    if (rc == SQLITE_OK)
        rc = sqlite3_bind_text(take, 2, r->path, -1, SQLITE_TRANSIENT);
    int taken = 0;
    while (rc == SQLITE_OK && (rc = sqlite3_step(take)) == SQLITE_ROW) {
        taken = 1;
        rc = SQLITE_OK;
    }
    store_release(take);
    if (rc != SQLITE_DONE)
        return reading_error(st, error, "take");
    if (!taken) {
        c->stale = 1;
        return MITILOG_OK;
    }
    sqlite3_stmt *upsert =
        writer_statement(st, "queries/readings/reading_result_upsert.sql", error);
    if (upsert == NULL)
        return MITILOG_ERROR_DATABASE;
    char now[40];
    files_utc_now(now, sizeof now);
    rc = store_bind_int_named(st, upsert, ":instance_id", r->instance_id);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, upsert, ":state", r->read ? "read" : "not_read");
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, upsert, ":reason", r->reason);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, upsert, ":profile_key", r->profile_key);
    if (rc == SQLITE_OK) {
        int i = store_parameter_index(st, upsert, ":profile_version");
        rc = i == 0           ? SQLITE_RANGE
             : r->profile_key ? sqlite3_bind_int(upsert, i, r->profile_version)
                              : sqlite3_bind_null(upsert, i);
    }
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, upsert, ":frames_read", r->frames_read);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, upsert, ":updated_at", now);
    for (int i = 0; rc == SQLITE_OK && i < EXAM_INDEX_COUNT; i++)
        rc = bind_value(st, upsert, exam_index_name((exam_index)i), &r->values[i]);
    if (rc == SQLITE_OK)
        rc = store_step_done(upsert);
    store_release(upsert);
    if (rc != SQLITE_DONE)
        return reading_error(st, error, "result");
    return MITILOG_OK;
}

mitilog_status store_put_screen_result(store *st, const store_screen_result *result, int *stale,
                                       mitilog_error *error)
{
    if (st == NULL || result == NULL || result->path == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "reading: nothing to write");
    result_context context = {result, 0};
    mitilog_status status = store_submit_custom(st, write_result, &context, error);
    if (stale != NULL)
        *stale = context.stale;
    return status;
}

static char *column_copy(sqlite3_stmt *statement, int column, int *failed)
{
    const unsigned char *text = sqlite3_column_text(statement, column);
    if (text == NULL)
        return NULL;
    char *copy = strdup((const char *)text);
    if (copy == NULL)
        *failed = 1;
    return copy;
}

/* Runs a list on the read connection: columns instance id, SOP UID, study
 * UID, path, then (queue only) owned and bytes. */
static mitilog_status load_entries(store *st, const char *name, const char *from, const char *to,
                                   store_reading_entry **entries, size_t *count,
                                   mitilog_error *error)
{
    *entries = NULL;
    *count = 0;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no store");
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_prepare(st->reader, name, &statement, error);
    size_t capacity = 0;
    int failed = 0;
    if (status == MITILOG_OK && sqlite3_bind_parameter_count(statement) >= 2) {
        sqlite3_bind_text(statement, 1, from, -1, SQLITE_TRANSIENT);
        sqlite3_bind_text(statement, 2, to, -1, SQLITE_TRANSIENT);
    }
    int rc = SQLITE_DONE;
    while (status == MITILOG_OK && !failed && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        if (*count == capacity) {
            size_t grown = capacity ? capacity * 2 : 16;
            store_reading_entry *more = realloc(*entries, grown * sizeof *more);
            if (more == NULL) {
                failed = 1;
                break;
            }
            *entries = more;
            capacity = grown;
        }
        store_reading_entry *e = &(*entries)[*count];
        memset(e, 0, sizeof *e);
        (*count)++;
        e->instance_id = sqlite3_column_int64(statement, 0);
        e->sop_instance_uid = column_copy(statement, 1, &failed);
        e->study_instance_uid = column_copy(statement, 2, &failed);
        e->path = column_copy(statement, 3, &failed);
        if (sqlite3_column_count(statement) > 5) {
            e->owned = sqlite3_column_int(statement, 4);
            e->bytes = sqlite3_column_int64(statement, 5);
        }
    }
    if (status == MITILOG_OK && failed)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "reading queue: out of memory");
    else if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "reading queue: %s",
                                   sqlite3_errmsg(st->reader));
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_reading_entries_free(*entries, *count);
        *entries = NULL;
        *count = 0;
    }
    return status;
}

mitilog_status store_reading_queue_load(store *st, store_reading_entry **entries, size_t *count,
                                        mitilog_error *error)
{
    return load_entries(st, "queries/readings/reading_queue_list.sql", NULL, NULL, entries, count,
                        error);
}

mitilog_status store_reading_backfill_candidates(store *st, const char *from, const char *to,
                                                 store_reading_entry **entries, size_t *count,
                                                 mitilog_error *error)
{
    return load_entries(st, "queries/readings/reading_backfill_candidates.sql", from, to, entries,
                        count, error);
}

void store_reading_entries_free(store_reading_entry *entries, size_t count)
{
    for (size_t i = 0; entries != NULL && i < count; i++) {
        free(entries[i].sop_instance_uid);
        free(entries[i].study_instance_uid);
        free(entries[i].path);
    }
    free(entries);
}

static mitilog_status write_index_source(store *st, const void *context, mitilog_error *error)
{
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_prepare(st->writer, "queries/readings/index_source_set.sql", &statement, error);
    if (status != MITILOG_OK)
        return status;
    if (sqlite3_bind_text(statement, 1, context, -1, SQLITE_TRANSIENT) != SQLITE_OK ||
        sqlite3_step(statement) != SQLITE_DONE)
        status = reading_error(st, error, "index source");
    sqlite3_finalize(statement);
    return status;
}

mitilog_status store_set_index_source(store *st, const char *preferred, mitilog_error *error)
{
    if (st == NULL || preferred == NULL ||
        (strcmp(preferred, "screen") != 0 && strcmp(preferred, "header") != 0))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "index source must be screen or header");
    return store_submit_custom(st, write_index_source, preferred, error);
}

mitilog_status store_load_mismatches(store *st, const char *study_instance_uid,
                                     store_mismatch **rows, size_t *count, mitilog_error *error)
{
    *rows = NULL;
    *count = 0;
    if (st == NULL || study_instance_uid == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "mismatches: no study");
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_cached_statement(&st->reader_cache, st->reader,
                               "queries/readings/reading_mismatches.sql", &statement, error);
    size_t capacity = 0;
    int failed = 0, rc = SQLITE_DONE;
    if (status == MITILOG_OK)
        rc = sqlite3_bind_text(statement, 1, study_instance_uid, -1, SQLITE_TRANSIENT);
    while (status == MITILOG_OK && rc == SQLITE_OK && !failed &&
           (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        rc = SQLITE_OK;
        if (*count == capacity) {
            size_t grown = capacity ? capacity * 2 : 8;
            store_mismatch *more = realloc(*rows, grown * sizeof *more);
            if (more == NULL) {
                failed = 1;
                break;
            }
            *rows = more;
            capacity = grown;
        }
        store_mismatch *m = &(*rows)[(*count)++];
        memset(m, 0, sizeof *m);
        m->sop_instance_uid = column_copy(statement, 0, &failed);
        m->index = column_copy(statement, 1, &failed);
        m->header_value = sqlite3_column_double(statement, 2);
        m->screen_value = sqlite3_column_double(statement, 3);
        m->screen_text = column_copy(statement, 4, &failed);
        m->decimals = sqlite3_column_int(statement, 5);
        m->room = column_copy(statement, 6, &failed);
        m->profile_key = column_copy(statement, 7, &failed);
        m->profile_version = sqlite3_column_int(statement, 8);
    }
    if (status == MITILOG_OK && failed)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "mismatches: out of memory");
    else if (status == MITILOG_OK && rc != SQLITE_DONE && rc != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "mismatches: %s",
                                   sqlite3_errmsg(st->reader));
    store_release(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_mismatches_free(*rows, *count);
        *rows = NULL;
        *count = 0;
    }
    return status;
}

void store_mismatches_free(store_mismatch *rows, size_t count)
{
    for (size_t i = 0; rows != NULL && i < count; i++) {
        free(rows[i].sop_instance_uid);
        free(rows[i].index);
        free(rows[i].screen_text);
        free(rows[i].room);
        free(rows[i].profile_key);
    }
    free(rows);
}

/*
 * store_readings.c - the reading queue and the pixel readings (migration
 * 007, store_readings.h). Writes run on the writer link inside a batch's
 * transaction; the lists on the read connection. SQL:
 * sql/queries/readings/.
 */
#include "store/store_readings.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/store_internal.h"
#include "util/files.h"

static mitilog_status reading_error(mitilog_error *error, const char *what,
                                    const store_query *query)
{
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "reading queue: %s: %s", what,
                             query->error.text);
}

/* Drops an instance's older queue row and reading. */
static mitilog_status clear_older(store_link *writer, long long instance_id, char **stale_spool,
                                  mitilog_error *error)
{
    store_query query;
    store_query_begin(&query, writer, "queries/readings/reading_clear_queue.sql");
    store_bind_integer_at(&query, 1, instance_id);
    while (store_query_step(&query)) {
        const char *path = store_column_text(&query, 0);
        if (path != NULL && *stale_spool == NULL)
            *stale_spool = strdup(path);
    }
    if (store_query_end(&query) != MITILOG_OK)
        return reading_error(error, "clear", &query);
    store_query_begin(&query, writer, "queries/readings/reading_clear_reading.sql");
    store_bind_integer_at(&query, 1, instance_id);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return reading_error(error, "clear reading", &query);
    return MITILOG_OK;
}

/* The queue row (or the 'not_read' state) of a reading request. */
static mitilog_status write_request(store_link *writer, const store_reading_request *reading,
                                    long long instance_id, mitilog_error *error)
{
    char now[40];
    files_utc_now(now, sizeof now);
    store_query query;
    if (reading->not_read_reason == NULL) {
        store_query_begin(&query, writer, "queries/readings/reading_queue_insert.sql");
        store_bind_integer(&query, ":instance_id", instance_id);
        store_bind_text(&query, ":path", reading->path);
        store_bind_integer(&query, ":owned", reading->owned ? 1 : 0);
        store_bind_integer(&query, ":bytes", reading->bytes);
        store_bind_text(&query, ":queued_at", now);
        store_query_run(&query);
        if (store_query_end(&query) != MITILOG_OK)
            return reading_error(error, "queue", &query);
    }
    store_query_begin(&query, writer, "queries/readings/reading_state_insert.sql");
    store_bind_integer(&query, ":instance_id", instance_id);
    store_bind_text(&query, ":state", reading->not_read_reason == NULL ? "queued" : "not_read");
    store_bind_text(&query, ":reason", reading->not_read_reason);
    store_bind_text(&query, ":updated_at", now);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return reading_error(error, "state", &query);
    return MITILOG_OK;
}

mitilog_status store_readings_write(store_link *writer, const store_reading_request *reading,
                                    long long instance_id, int replaced, char **stale_spool,
                                    mitilog_error *error)
{
    *stale_spool = NULL;
    if (replaced) {
        mitilog_status status = clear_older(writer, instance_id, stale_spool, error);
        if (status != MITILOG_OK)
            return status;
    }
    if (reading == NULL)
        return MITILOG_OK;
    return write_request(writer, reading, instance_id, error);
}

typedef struct enqueue_context {
    long long instance_id;
    const store_reading_request *reading;
} enqueue_context;

static mitilog_status write_enqueue(store_link *writer, void *context, mitilog_error *error)
{
    const enqueue_context *c = context;
    char *stale = NULL;
    mitilog_status status =
        store_readings_write(writer, c->reading, c->instance_id, 1, &stale, error);
    free(stale); /* a backfill never replaces a spool copy still queued */
    return status;
}

mitilog_status store_reading_enqueue(store *st, long long instance_id,
                                     const store_reading_request *reading, mitilog_error *error)
{
    if (st == NULL || reading == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "reading queue: nothing to queue");
    enqueue_context context = {instance_id, reading};
    return store_commit_submit(st, write_enqueue, &context, error);
}

typedef struct result_context {
    const store_screen_result *result;
    int stale;
} result_context;

static void bind_value(store_query *query, const char *index, const store_screen_value *v)
{
    char name[48];
    int read = v->status != NULL && strcmp(v->status, "read") == 0;
    snprintf(name, sizeof name, ":%s", index);
    store_bind_real(query, name, read, v->value);
    snprintf(name, sizeof name, ":%s_status", index);
    store_bind_text(query, name, v->status);
    snprintf(name, sizeof name, ":%s_text", index);
    store_bind_text(query, name, v->status != NULL ? v->text : NULL);
    snprintf(name, sizeof name, ":%s_decimals", index);
    if (read)
        store_bind_integer(query, name, v->decimals);
    else
        store_bind_null(query, name);
    snprintf(name, sizeof name, ":%s_reason", index);
    store_bind_text(query, name, read ? NULL : v->reason);
}

static mitilog_status write_result(store_link *writer, void *context, mitilog_error *error)
{
    result_context *c = context;
    const store_screen_result *r = c->result;
    c->stale = 0;
    store_query query;
    store_query_begin(&query, writer, "queries/readings/reading_queue_take.sql");
    store_bind_integer_at(&query, 1, r->instance_id);
    store_bind_text_at(&query, 2, r->path);
    int taken = 0;
    while (store_query_step(&query))
        taken = 1;
    if (store_query_end(&query) != MITILOG_OK)
        return reading_error(error, "take", &query);
    if (!taken) {
        c->stale = 1;
        return MITILOG_OK;
    }
    char now[40];
    files_utc_now(now, sizeof now);
    store_query_begin(&query, writer, "queries/readings/reading_result_upsert.sql");
    store_bind_integer(&query, ":instance_id", r->instance_id);
    store_bind_text(&query, ":state", r->read ? "read" : "not_read");
    store_bind_text(&query, ":reason", r->reason);
    store_bind_text(&query, ":profile_key", r->profile_key);
    if (r->profile_key != NULL)
        store_bind_integer(&query, ":profile_version", r->profile_version);
    else
        store_bind_null(&query, ":profile_version");
    store_bind_integer(&query, ":frames_read", r->frames_read);
    store_bind_text(&query, ":updated_at", now);
    for (int i = 0; i < EXAM_INDEX_COUNT; i++)
        bind_value(&query, exam_index_name((exam_index)i), &r->values[i]);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return reading_error(error, "result", &query);
    return MITILOG_OK;
}

mitilog_status store_put_screen_result(store *st, const store_screen_result *result, int *stale,
                                       mitilog_error *error)
{
    if (st == NULL || result == NULL || result->path == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "reading: nothing to write");
    result_context context = {result, 0};
    mitilog_status status = store_commit_submit(st, write_result, &context, error);
    if (stale != NULL)
        *stale = context.stale;
    return status;
}

/* Runs a list on the read connection: columns instance id, SOP UID, study
 * UID, path, then (queue only) owned and bytes. period: bind from and to. */
static mitilog_status load_entries(store *st, const char *name, int period, const char *from,
                                   const char *to, store_reading_entry **entries, size_t *count,
                                   mitilog_error *error)
{
    *entries = NULL;
    *count = 0;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no store");
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, name);
    if (period) {
        store_bind_text_at(&query, 1, from);
        store_bind_text_at(&query, 2, to);
    }
    size_t capacity = 0;
    int failed = 0;
    while (!failed && store_query_step(&query)) {
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
        e->instance_id = store_column_integer(&query, 0);
        e->sop_instance_uid = store_column_copy(&query, 1, &failed);
        e->study_instance_uid = store_column_copy(&query, 2, &failed);
        e->path = store_column_copy(&query, 3, &failed);
        if (store_column_count(&query) > 5) {
            e->owned = (int)store_column_integer(&query, 4);
            e->bytes = store_column_integer(&query, 5);
        }
    }
    mitilog_status status = MITILOG_OK;
    if (failed)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "reading queue: out of memory");
    if (store_query_end(&query) != MITILOG_OK && status == MITILOG_OK)
        status =
            mitilog_error_set(error, MITILOG_ERROR_DATABASE, "reading queue: %s", query.error.text);
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
    return load_entries(st, "queries/readings/reading_queue_list.sql", 0, NULL, NULL, entries,
                        count, error);
}

mitilog_status store_reading_backfill_candidates(store *st, const char *from, const char *to,
                                                 store_reading_entry **entries, size_t *count,
                                                 mitilog_error *error)
{
    return load_entries(st, "queries/readings/reading_backfill_candidates.sql", 1, from, to,
                        entries, count, error);
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

static mitilog_status write_index_source(store_link *writer, void *context, mitilog_error *error)
{
    store_query query;
    store_query_begin(&query, writer, "queries/readings/index_source_set.sql");
    store_bind_text_at(&query, 1, context);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return reading_error(error, "index source", &query);
    return MITILOG_OK;
}

mitilog_status store_set_index_source(store *st, const char *preferred, mitilog_error *error)
{
    if (st == NULL || preferred == NULL ||
        (strcmp(preferred, "screen") != 0 && strcmp(preferred, "header") != 0))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "index source must be screen or header");
    return store_commit_submit(st, write_index_source, (void *)preferred, error);
}

mitilog_status store_load_mismatches(store *st, const char *study_instance_uid,
                                     store_mismatch **rows, size_t *count, mitilog_error *error)
{
    *rows = NULL;
    *count = 0;
    if (st == NULL || study_instance_uid == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "mismatches: no study");
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/readings/reading_mismatches.sql");
    store_bind_text_at(&query, 1, study_instance_uid);
    size_t capacity = 0;
    int failed = 0;
    while (!failed && store_query_step(&query)) {
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
        m->sop_instance_uid = store_column_copy(&query, 0, &failed);
        m->index = store_column_copy(&query, 1, &failed);
        m->header_value = store_column_real(&query, 2);
        m->screen_value = store_column_real(&query, 3);
        m->screen_text = store_column_copy(&query, 4, &failed);
        m->decimals = (int)store_column_integer(&query, 5);
        m->room = store_column_copy(&query, 6, &failed);
        m->profile_key = store_column_copy(&query, 7, &failed);
        m->profile_version = (int)store_column_integer(&query, 8);
    }
    mitilog_status status = MITILOG_OK;
    if (failed)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "mismatches: out of memory");
    if (store_query_end(&query) != MITILOG_OK && status == MITILOG_OK)
        status =
            mitilog_error_set(error, MITILOG_ERROR_DATABASE, "mismatches: %s", query.error.text);
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

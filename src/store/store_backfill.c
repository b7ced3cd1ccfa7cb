/*
 * store_backfill.c - the backfill's tables (store_backfill.h, migration
 * 015). A few statements per study, not per object, except the instance
 * look-up of a resumed study; each through the store's statement layer
 * (store_statement.h) on the writer's batches or the read link. SQL in
 * sql/queries/backfill/, in the subset SQLite and PostgreSQL share.
 */
#include "store/store_backfill.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "json/json.h"
#include "store/store_internal.h"
#include "store/store_statement.h"
#include "util/files.h"

/* One bound value: text (NULL binds NULL), integer or real. */
typedef enum backfill_value_type {
    BACKFILL_VALUE_TEXT,
    BACKFILL_VALUE_INTEGER,
    BACKFILL_VALUE_REAL,
    BACKFILL_VALUE_NULL
} backfill_value_type;

typedef struct backfill_value {
    backfill_value_type type;
    const char *text;
    long long integer;
    double real;
} backfill_value;

#define BACKFILL_TEXT(t)                                                                           \
    {                                                                                              \
        BACKFILL_VALUE_TEXT, (t), 0, 0.0                                                           \
    }
#define BACKFILL_INTEGER(i)                                                                        \
    {                                                                                              \
        BACKFILL_VALUE_INTEGER, NULL, (i), 0.0                                                     \
    }

static void backfill_bind(store_query *query, const backfill_value *values, int count)
{
    for (int i = 0; i < count; i++) {
        const backfill_value *v = &values[i];
        switch (v->type) {
        case BACKFILL_VALUE_TEXT:
            if (v->text != NULL)
                store_bind_text_at(query, i + 1, v->text);
            else
                store_bind_null_at(query, i + 1);
            break;
        case BACKFILL_VALUE_INTEGER: store_bind_integer_at(query, i + 1, v->integer); break;
        case BACKFILL_VALUE_REAL: store_bind_real_at(query, i + 1, v->real); break;
        case BACKFILL_VALUE_NULL: store_bind_null_at(query, i + 1); break;
        }
    }
}

/* ---- writes (inside the writer's batch) -------------------------------- */

typedef struct backfill_write {
    const char *name; /* sql file */
    const char *what; /* for messages */
    const backfill_value *values;
    int count;
    long long returned; /* first column of a returned row, if any */
} backfill_write;

static mitilog_status backfill_write_run(store_link *writer, void *context, mitilog_error *error)
{
    backfill_write *write = context;
    write->returned = 0;
    store_query query;
    store_query_begin(&query, writer, write->name);
    backfill_bind(&query, write->values, write->count);
    /* One step runs the statement; only a row (RETURNING) needs the rest
     * stepped through (a step after the end would run it again). */
    if (store_query_step(&query)) {
        write->returned = store_column_integer(&query, 0);
        store_query_run(&query);
    }
    if (store_query_end(&query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", write->what,
                                 query.error.text);
    return MITILOG_OK;
}

static mitilog_status backfill_submit(store *st, backfill_write *write, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: no store", write->what);
    return store_commit_submit(st, backfill_write_run, write, error);
}

mitilog_status store_backfill_found(store *st, const store_backfill_study *study,
                                    mitilog_error *error)
{
    char now[32];
    files_utc_now(now, sizeof now);
    backfill_value values[] = {
        BACKFILL_TEXT(study->source),
        BACKFILL_TEXT(study->study_instance_uid),
        BACKFILL_TEXT(study->study_date),
        BACKFILL_TEXT(study->accession_number),
        BACKFILL_TEXT(study->study_description),
        study->expected_objects >= 0 ? (backfill_value)BACKFILL_INTEGER(study->expected_objects)
                                     : (backfill_value){BACKFILL_VALUE_NULL, NULL, 0, 0.0},
        BACKFILL_TEXT(now),
    };
    backfill_write write = {"queries/backfill/study_found.sql", "backfill: record a found study",
                            values, 7, 0};
    return backfill_submit(st, &write, error);
}

mitilog_status store_backfill_start(store *st, const char *source, const char *study_instance_uid,
                                    mitilog_error *error)
{
    char now[32];
    files_utc_now(now, sizeof now);
    backfill_value values[] = {BACKFILL_TEXT(source), BACKFILL_TEXT(study_instance_uid),
                               BACKFILL_TEXT(now)};
    backfill_write write = {"queries/backfill/study_start.sql", "backfill: start a study", values,
                            3, 0};
    return backfill_submit(st, &write, error);
}

mitilog_status store_backfill_finish(store *st, const char *source, const char *study_instance_uid,
                                     const char *state, long stored, long failed, long skipped,
                                     const char *message, mitilog_error *error)
{
    char now[32];
    files_utc_now(now, sizeof now);
    backfill_value values[] = {
        BACKFILL_TEXT(source),
        BACKFILL_TEXT(study_instance_uid),
        BACKFILL_TEXT(state),
        BACKFILL_INTEGER(stored),
        BACKFILL_INTEGER(failed),
        BACKFILL_INTEGER(skipped),
        BACKFILL_TEXT(message != NULL ? message : ""),
        BACKFILL_TEXT(now),
    };
    backfill_write write = {"queries/backfill/study_finish.sql", "backfill: finish a study", values,
                            8, 0};
    return backfill_submit(st, &write, error);
}

mitilog_status store_backfill_run_begin(store *st, const char *source, long long *run_id,
                                        mitilog_error *error)
{
    char now[32];
    files_utc_now(now, sizeof now);
    backfill_value values[] = {BACKFILL_TEXT(source), BACKFILL_TEXT(now)};
    backfill_write write = {"queries/backfill/run_insert.sql", "backfill: record the run", values,
                            2, 0};
    mitilog_status status = backfill_submit(st, &write, error);
    *run_id = write.returned;
    return status;
}

mitilog_status store_backfill_run_update(store *st, long long run_id,
                                         const store_backfill_progress *progress,
                                         mitilog_error *error)
{
    char now[32];
    files_utc_now(now, sizeof now);
    backfill_value nothing = {BACKFILL_VALUE_NULL, NULL, 0, 0.0};
    backfill_value values[] = {
        BACKFILL_INTEGER(run_id),
        BACKFILL_TEXT(progress->state),
        BACKFILL_TEXT(progress->message != NULL ? progress->message : ""),
        BACKFILL_INTEGER(progress->studies_found),
        BACKFILL_INTEGER(progress->studies_done),
        BACKFILL_INTEGER(progress->studies_failed),
        BACKFILL_INTEGER(progress->objects),
        progress->objects_per_minute >= 0
            ? (backfill_value){BACKFILL_VALUE_REAL, NULL, 0, progress->objects_per_minute}
            : nothing,
        progress->seconds_left >= 0 ? (backfill_value)BACKFILL_INTEGER(progress->seconds_left)
                                    : nothing,
        BACKFILL_TEXT(now),
        BACKFILL_INTEGER(progress->finished ? 1 : 0),
    };
    backfill_write write = {"queries/backfill/run_update.sql", "backfill: record progress", values,
                            11, 0};
    return backfill_submit(st, &write, error);
}

mitilog_status store_backfill_run_interrupt(store *st, const char *message, mitilog_error *error)
{
    char now[32];
    files_utc_now(now, sizeof now);
    backfill_value values[] = {BACKFILL_TEXT(message), BACKFILL_TEXT(now)};
    backfill_write write = {"queries/backfill/run_interrupt.sql", "backfill: record the stop",
                            values, 2, 0};
    return backfill_submit(st, &write, error);
}

/* ---- reads (read connection) ------------------------------------------- */

/* Runs a one-row query on the read connection; row() copies what it needs
 * from the row (no row: row is not called). */
static mitilog_status backfill_read(store *st, const char *name, const backfill_value *values,
                                    int count, const char *what,
                                    mitilog_status (*row)(store_query *query, void *out,
                                                          mitilog_error *error),
                                    void *out, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: no store", what);
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, name);
    backfill_bind(&query, values, count);
    mitilog_status status = MITILOG_OK;
    if (store_query_step(&query))
        status = row(&query, out, error);
    if (store_query_end(&query) != MITILOG_OK && status == MITILOG_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", what, query.error.text);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

static mitilog_status backfill_row_state(store_query *query, void *out, mitilog_error *error)
{
    (void)error;
    const char *text = store_column_text(query, 0);
    snprintf((char *)out, 16, "%s", text != NULL ? text : "");
    return MITILOG_OK;
}

static mitilog_status backfill_row_count(store_query *query, void *out, mitilog_error *error)
{
    (void)error;
    *(long *)out = (long)store_column_integer(query, 0);
    return MITILOG_OK;
}

mitilog_status store_backfill_state(store *st, const char *source, const char *study_instance_uid,
                                    char *state, mitilog_error *error)
{
    state[0] = '\0';
    backfill_value values[] = {BACKFILL_TEXT(source), BACKFILL_TEXT(study_instance_uid)};
    return backfill_read(st, "queries/backfill/study_state.sql", values, 2,
                         "backfill: read a study's state", backfill_row_state, state, error);
}

mitilog_status store_backfill_instance_known(store *st, const char *sop_instance_uid, int *known,
                                             mitilog_error *error)
{
    long count = 0;
    backfill_value values[] = {BACKFILL_TEXT(sop_instance_uid)};
    mitilog_status status =
        backfill_read(st, "queries/backfill/instance_known.sql", values, 1,
                      "backfill: look up an instance", backfill_row_count, &count, error);
    *known = count > 0;
    return status;
}

mitilog_status store_backfill_study_instances(store *st, const char *study_instance_uid,
                                              long *count, mitilog_error *error)
{
    *count = 0;
    backfill_value values[] = {BACKFILL_TEXT(study_instance_uid)};
    return backfill_read(st, "queries/backfill/study_instance_count.sql", values, 1,
                         "backfill: count a study's instances", backfill_row_count, count, error);
}

static void backfill_json_text(json_writer *writer, const char *key, store_query *query, int column)
{
    json_key(writer, key);
    const char *text = store_column_text(query, column);
    if (text == NULL)
        json_null(writer);
    else
        json_string(writer, text);
}

static mitilog_status backfill_row_json(store_query *query, void *out, mitilog_error *error)
{
    json_writer writer;
    json_writer_init(&writer);
    json_object_begin(&writer);
    backfill_json_text(&writer, "source", query, 1);
    backfill_json_text(&writer, "state", query, 2);
    backfill_json_text(&writer, "message", query, 3);
    json_key(&writer, "run");
    json_object_begin(&writer);
    json_key(&writer, "studies_found");
    json_integer(&writer, store_column_integer(query, 4));
    json_key(&writer, "studies_done");
    json_integer(&writer, store_column_integer(query, 5));
    json_key(&writer, "studies_failed");
    json_integer(&writer, store_column_integer(query, 6));
    json_key(&writer, "objects");
    json_integer(&writer, store_column_integer(query, 7));
    json_object_end(&writer);
    json_key(&writer, "objects_per_minute");
    json_number(&writer, !store_column_is_null(query, 8), store_column_real(query, 8));
    json_key(&writer, "seconds_left");
    if (store_column_is_null(query, 9))
        json_null(&writer);
    else
        json_integer(&writer, store_column_integer(query, 9));
    backfill_json_text(&writer, "started_at", query, 10);
    backfill_json_text(&writer, "updated_at", query, 11);
    backfill_json_text(&writer, "finished_at", query, 12);
    json_key(&writer, "source_totals");
    json_object_begin(&writer);
    json_key(&writer, "studies");
    json_integer(&writer, store_column_integer(query, 13));
    json_key(&writer, "studies_done");
    json_integer(&writer, store_column_integer(query, 14));
    json_key(&writer, "studies_failed");
    json_integer(&writer, store_column_integer(query, 15));
    json_key(&writer, "objects_stored");
    json_integer(&writer, store_column_integer(query, 16));
    json_object_end(&writer);
    json_object_end(&writer);
    mitilog_status status = json_writer_take(&writer, (char **)out, error);
    json_writer_free(&writer);
    return status;
}

mitilog_status store_backfill_status_json(store *st, char **json, mitilog_error *error)
{
    *json = NULL;
    mitilog_status status =
        backfill_read(st, "queries/backfill/run_latest.sql", NULL, 0,
                      "backfill: read the latest run", backfill_row_json, json, error);
    if (status == MITILOG_OK && *json == NULL) {
        *json = strdup("null");
        if (*json == NULL)
            status =
                mitilog_error_set(error, MITILOG_ERROR_MEMORY, "backfill status: out of memory");
    }
    return status;
}

mitilog_status store_backfill_lock(store *st, int *held, mitilog_error *error)
{
    *held = -1;
    if (store_sql_text(st->writer.engine, "queries/backfill/run_lock.sql") == NULL)
        return MITILOG_OK;
    /* The writer link belongs to whoever leads a batch: hold the queue. */
    store_commit_hold(&st->queue);
    store_query query;
    store_query_begin(&query, &st->writer, "queries/backfill/run_lock.sql");
    if (store_query_step(&query))
        *held = store_column_integer(&query, 0) == 1;
    mitilog_status status = store_query_end(&query);
    store_commit_release(&st->queue);
    if (status != MITILOG_OK)
        return mitilog_error_set(error, status,
                                 "backfill: cannot take the database's backfill "
                                 "lock: %s",
                                 query.error.text);
    if (*held < 0)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "backfill: the database's backfill lock gave no answer");
    return MITILOG_OK;
}

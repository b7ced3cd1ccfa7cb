/*
 * store_backfill.c - the backfill's tables (store_backfill.h, migration
 * 015). A few statements per study, not per object, except the instance
 * look-up of a resumed study: statements are prepared per call. SQL in
 * sql/queries/backfill/, in the subset SQLite and PostgreSQL share.
 */
#include "store/store_backfill.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "json/json.h"
#include "store/store_internal.h"
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

static mitilog_status backfill_bind(sqlite3_stmt *statement, const backfill_value *values,
                                    int count, const char *what, mitilog_error *error)
{
    int rc = SQLITE_OK;
    for (int i = 0; rc == SQLITE_OK && i < count; i++) {
        const backfill_value *v = &values[i];
        switch (v->type) {
        case BACKFILL_VALUE_TEXT:
            rc = v->text != NULL
                     ? sqlite3_bind_text(statement, i + 1, v->text, -1, SQLITE_TRANSIENT)
                     : sqlite3_bind_null(statement, i + 1);
            break;
        case BACKFILL_VALUE_INTEGER: rc = sqlite3_bind_int64(statement, i + 1, v->integer); break;
        case BACKFILL_VALUE_REAL: rc = sqlite3_bind_double(statement, i + 1, v->real); break;
        case BACKFILL_VALUE_NULL: rc = sqlite3_bind_null(statement, i + 1); break;
        }
    }
    if (rc != SQLITE_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind: %s", what,
                                 sqlite3_errstr(rc));
    return MITILOG_OK;
}

/* ---- writes (inside the writer's batch) -------------------------------- */

typedef struct backfill_write {
    const char *name; /* sql file */
    const char *what; /* for messages */
    const backfill_value *values;
    int count;
    long long returned; /* first column of a returned row, if any */
} backfill_write;

static mitilog_status backfill_write_run(store *st, const void *context, mitilog_error *error)
{
    backfill_write *write = (backfill_write *)context;
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_prepare(st->writer, write->name, &statement, error);
    if (status == MITILOG_OK)
        status = backfill_bind(statement, write->values, write->count, write->what, error);
    if (status == MITILOG_OK) {
        int rc = sqlite3_step(statement);
        if (rc == SQLITE_ROW) {
            write->returned = sqlite3_column_int64(statement, 0);
            rc = sqlite3_step(statement);
        }
        if (rc != SQLITE_DONE)
            status = store_sql_error(error, st->writer, write->what);
    }
    sqlite3_finalize(statement);
    return status;
}

static mitilog_status backfill_submit(store *st, backfill_write *write, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: no store", write->what);
    return store_submit_custom(st, backfill_write_run, write, error);
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
 * from the row (no row: row is not called and *found stays 0). */
static mitilog_status backfill_read(store *st, const char *name, const backfill_value *values,
                                    int count, const char *what,
                                    mitilog_status (*row)(sqlite3_stmt *statement, void *out,
                                                          mitilog_error *error),
                                    void *out, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: no store", what);
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_prepare(st->reader, name, &statement, error);
    if (status == MITILOG_OK)
        status = backfill_bind(statement, values, count, what, error);
    if (status == MITILOG_OK) {
        int rc = sqlite3_step(statement);
        if (rc == SQLITE_ROW)
            status = row(statement, out, error);
        else if (rc != SQLITE_DONE)
            status = store_sql_error(error, st->reader, what);
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

static mitilog_status backfill_row_state(sqlite3_stmt *statement, void *out, mitilog_error *error)
{
    (void)error;
    const unsigned char *text = sqlite3_column_text(statement, 0);
    snprintf((char *)out, 16, "%s", text != NULL ? (const char *)text : "");
    return MITILOG_OK;
}

static mitilog_status backfill_row_count(sqlite3_stmt *statement, void *out, mitilog_error *error)
{
    (void)error;
    *(long *)out = (long)sqlite3_column_int64(statement, 0);
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

static void backfill_json_text(json_writer *writer, const char *key, sqlite3_stmt *statement,
                               int column)
{
    json_key(writer, key);
    const unsigned char *text = sqlite3_column_text(statement, column);
    if (text == NULL)
        json_null(writer);
    else
        json_string(writer, (const char *)text);
}

static mitilog_status backfill_row_json(sqlite3_stmt *statement, void *out, mitilog_error *error)
{
    json_writer writer;
    json_writer_init(&writer);
    json_object_begin(&writer);
    backfill_json_text(&writer, "source", statement, 1);
    backfill_json_text(&writer, "state", statement, 2);
    backfill_json_text(&writer, "message", statement, 3);
    json_key(&writer, "run");
    json_object_begin(&writer);
    json_key(&writer, "studies_found");
    json_integer(&writer, sqlite3_column_int64(statement, 4));
    json_key(&writer, "studies_done");
    json_integer(&writer, sqlite3_column_int64(statement, 5));
    json_key(&writer, "studies_failed");
    json_integer(&writer, sqlite3_column_int64(statement, 6));
    json_key(&writer, "objects");
    json_integer(&writer, sqlite3_column_int64(statement, 7));
    json_object_end(&writer);
    json_key(&writer, "objects_per_minute");
    json_number(&writer, sqlite3_column_type(statement, 8) != SQLITE_NULL,
                sqlite3_column_double(statement, 8));
    json_key(&writer, "seconds_left");
    if (sqlite3_column_type(statement, 9) == SQLITE_NULL)
        json_null(&writer);
    else
        json_integer(&writer, sqlite3_column_int64(statement, 9));
    backfill_json_text(&writer, "started_at", statement, 10);
    backfill_json_text(&writer, "updated_at", statement, 11);
    backfill_json_text(&writer, "finished_at", statement, 12);
    json_key(&writer, "source_totals");
    json_object_begin(&writer);
    json_key(&writer, "studies");
    json_integer(&writer, sqlite3_column_int64(statement, 13));
    json_key(&writer, "studies_done");
    json_integer(&writer, sqlite3_column_int64(statement, 14));
    json_key(&writer, "studies_failed");
    json_integer(&writer, sqlite3_column_int64(statement, 15));
    json_key(&writer, "objects_stored");
    json_integer(&writer, sqlite3_column_int64(statement, 16));
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

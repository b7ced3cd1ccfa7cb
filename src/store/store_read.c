/*
 * store_read.c - the read side: the JSON documents of the HTTP API, built
 * by SQLite's JSON functions in sql/queries/, on the read-only connection
 * (one query at a time, under reader_lock; WAL: never waits for writes).
 */
#include "store/store_internal.h"

#include "json/json.h"

#include <stdlib.h>

enum { STORE_LIMIT_DEFAULT = 1000, STORE_LIMIT_MAX = 10000 };

/* The row limit actually applied: default for <= 0, capped at the max. */
static long store_clamp_limit(long limit)
{
    if (limit <= 0)
        return STORE_LIMIT_DEFAULT;
    return limit > STORE_LIMIT_MAX ? STORE_LIMIT_MAX : limit;
}

/* Binds text to parameter index, with NULL and "" both meaning SQL NULL
 * ("no filter"). */
static int store_bind_filter(sqlite3_stmt *statement, int index, const char *text)
{
    if (text == NULL || text[0] == '\0')
        return sqlite3_bind_null(statement, index);
    return sqlite3_bind_text(statement, index, text, -1, SQLITE_TRANSIENT);
}

/* Runs a bound one-row, one-column statement and copies its text to *json;
 * resets the statement either way. Call under reader_lock. */
static mitilog_status store_run_json(store *st, sqlite3_stmt *statement, int bind_rc,
                                     const char *what, char **json, mitilog_error *error)
{
    mitilog_status status;
    if (bind_rc != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind: %s", what,
                                   sqlite3_errstr(bind_rc));
    else if (sqlite3_step(statement) != SQLITE_ROW)
        status = store_sql_error(error, st->reader, what);
    else
        status = store_column_dup(statement, json, error);
    sqlite3_reset(statement);
    sqlite3_clear_bindings(statement);
    return status;
}

mitilog_status store_instances_json(store *st, const store_instance_filter *filter, char **json,
                                    mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_instances_json: no store or result");
    *json = NULL;
    store_instance_filter none = {NULL, NULL, 0};
    if (filter == NULL)
        filter = &none;
    long limit = store_clamp_limit(filter->limit);
    int by_study = filter->study_instance_uid != NULL && filter->study_instance_uid[0] != '\0';

    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = by_study ? st->read.instances_by_study : st->read.instances_since;
    int rc;
    if (by_study) {
        rc = store_bind_filter(statement, 1, filter->study_instance_uid);
        if (rc == SQLITE_OK)
            rc = store_bind_filter(statement, 2, filter->since);
        if (rc == SQLITE_OK)
            rc = sqlite3_bind_int64(statement, 3, limit);
    } else {
        rc = store_bind_filter(statement, 1, filter->since);
        if (rc == SQLITE_OK)
            rc = sqlite3_bind_int64(statement, 2, limit);
    }
    mitilog_status status = store_run_json(st, statement, rc, "query instances", json, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_studies_json(store *st, const char *from, const char *to,
                                  const store_sites *sites, char **json, mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_studies_json: no store or result");
    *json = NULL;
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = st->read.studies;
    int rc = store_bind_filter(statement, 1, from);
    if (rc == SQLITE_OK)
        rc = store_bind_filter(statement, 2, to);
    if (rc == SQLITE_OK)
        rc = store_bind_sites(statement, sites);
    mitilog_status status = store_run_json(st, statement, rc, "query studies", json, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

/* On failure returns MITILOG_ERROR_DATABASE and, when it can still be
 * built, sets *json to {"status":"error","database":"error","message":..}
 * for the health check to serve. */
mitilog_status store_health_json(store *st, char **json, mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_health_json: no store or result");
    *json = NULL;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status =
        store_run_json(st, st->read.health, SQLITE_OK, "health query", json, error);
    if (status != MITILOG_OK) {
        /* written without the database, which just failed */
        json_writer writer;
        json_writer_init(&writer);
        json_object_begin(&writer);
        json_key(&writer, "status");
        json_string(&writer, "error");
        json_key(&writer, "database");
        json_string(&writer, "error");
        json_key(&writer, "message");
        json_string(&writer, error != NULL ? error->text : "health query failed");
        json_object_end(&writer);
        if (json_writer_take(&writer, json, NULL) != MITILOG_OK)
            *json = NULL;
        status = MITILOG_ERROR_DATABASE;
    }
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_read_prepare(store *st, mitilog_error *error)
{
    const struct {
        const char *name;
        sqlite3_stmt **statement;
    } files[] = {
        {"queries/instances/instances_by_study.sql", &st->read.instances_by_study},
        {"queries/instances/instances_since.sql", &st->read.instances_since},
        {"queries/instances/studies.sql", &st->read.studies},
        {"queries/database/health.sql", &st->read.health},
        {"queries/instances/study_load.sql", &st->read.study_load},
        {"queries/instances/study_detail.sql", &st->read.study_detail},
    };
    for (size_t i = 0; i < sizeof files / sizeof files[0]; i++) {
        mitilog_status status = store_prepare(st->reader, files[i].name, files[i].statement, error);
        if (status != MITILOG_OK)
            return status;
    }
    return MITILOG_OK;
}

void store_read_finalize(store *st)
{
    sqlite3_stmt **statements[] = {&st->read.instances_by_study,
                                   &st->read.instances_since,
                                   &st->read.studies,
                                   &st->read.health,
                                   &st->read.study_load,
                                   &st->read.study_detail};
    for (size_t i = 0; i < sizeof statements / sizeof statements[0]; i++) {
        sqlite3_finalize(*statements[i]);
        *statements[i] = NULL;
    }
}

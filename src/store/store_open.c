/*
 * store_open.c - the store's handle and lifecycle (store.h): opening the
 * writer link (WAL, synchronous FULL) and applying the schema migrations
 * of sql/migrations through the engine, the read-only link for the
 * queries, durability, health and closing.
 */
#include "store/store_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "json/json.h"
#include "store/store_exams.h"
#include "store/sql_files.h"
#include "store/store_engine_postgresql.h"
#include "store/store_engine_sqlite.h"
#include "util/log.h"

static const char migration_prefix[] = "migrations/";

/* The number NNN of "migrations/NNN_name.sql", or -1 for other files. */
static int store_migration_number(const char *name)
{
    size_t prefix = sizeof migration_prefix - 1;
    if (strncmp(name, migration_prefix, prefix) != 0)
        return -1;
    int number = 0;
    const char *digit = name + prefix;
    for (; *digit >= '0' && *digit <= '9'; digit++) {
        if (number > 100000)
            return -1;
        number = number * 10 + (*digit - '0');
    }
    if (digit == name + prefix || *digit != '_')
        return -1;
    return number;
}

/* Runs a query of no parameters whose first row holds what is wanted;
 * *has_row says whether it gave one. The query is left open for its
 * columns: end it with store_query_end(). */
static mitilog_status store_first_row(store_link *link, const char *name, store_query *query,
                                      int *has_row, const char *what, mitilog_error *error)
{
    store_query_begin(query, link, name);
    *has_row = store_query_step(query);
    if (query->status != MITILOG_OK) {
        store_query_end(query);
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", what, query->error.text);
    }
    return MITILOG_OK;
}

/* Reads the schema version (PRAGMA user_version) into *version. */
static mitilog_status store_read_version(store_link *link, int *version, mitilog_error *error)
{
    store_query query;
    int has_row = 0;
    mitilog_status status = store_first_row(link, "queries/database/schema_version.sql", &query,
                                            &has_row, "read schema version", error);
    if (status != MITILOG_OK)
        return status;
    if (has_row)
        *version = (int)store_column_integer(&query, 0);
    else
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "read schema version: no row");
    store_query_end(&query);
    return status;
}

/* MITILOG_OK when no foreign key of the database is dangling. */
static mitilog_status store_check_foreign_keys(store_link *link, const char *name,
                                               mitilog_error *error)
{
    store_query query;
    int has_row = 0;
    mitilog_status status = store_first_row(link, "queries/database/foreign_key_check.sql", &query,
                                            &has_row, name, error);
    if (status != MITILOG_OK)
        return status;
    if (has_row)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                   "%s left a dangling reference in table %s", name,
                                   store_column_text(&query, 0));
    store_query_end(&query);
    return status;
}

/* Applies one migration in its own transaction, unless another process
 * applied it meanwhile. The file itself sets user_version; this checks it,
 * and that no reference is left dangling (foreign keys are off while
 * migrations run, so that a table can be rebuilt). */
static mitilog_status store_apply_migration(store_link *link, const sql_file *file, int number,
                                            const char *path, mitilog_error *error)
{
    mitilog_status status = store_link_script(link, "queries/database/write_begin.sql", error);
    if (status != MITILOG_OK)
        return status;
    int version = 0;
    status = store_read_version(link, &version, error);
    if (status == MITILOG_OK && version < number) {
        status = store_link_script(link, file->name, error);
        if (status == MITILOG_OK)
            status = store_read_version(link, &version, error);
        if (status == MITILOG_OK && version != number)
            status = mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                       "%s left user_version at %d, "
                                       "expected %d",
                                       file->name, version, number);
        if (status == MITILOG_OK)
            status = store_check_foreign_keys(link, file->name, error);
    }
    if (status == MITILOG_OK)
        status = store_link_script(link, "queries/database/write_commit.sql", error);
    if (status != MITILOG_OK) {
        store_link_script(link, "queries/database/write_rollback.sql", NULL);
        return status;
    }
    log_info("database %s: schema at version %d (%s)", path, number, file->name);
    return MITILOG_OK;
}

/* Brings the schema up to the newest built-in migration; *version gets
 * the resulting schema version. SQLite's history: sql/migrations/NNN_*.sql
 * in order. */
static mitilog_status store_migrate(store_link *link, const char *path, int *version,
                                    mitilog_error *error)
{
    int latest = 0;
    for (const sql_file *file = sql_files; file->name != NULL; file++) {
        int number = store_migration_number(file->name);
        if (number < 0)
            continue;
        /* Numbers rise; a gap is allowed, since numbers are handed out
         * to changes made side by side and merged in any order. */
        if (number <= latest)
            return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                     "migration %s out of sequence "
                                     "(expected a number above %d)",
                                     file->name, latest);
        latest = number;
    }
    mitilog_status status = store_read_version(link, version, error);
    if (status != MITILOG_OK)
        return status;
    if (*version > latest)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "database %s has schema version %d, newer "
                                 "than this program's %d",
                                 path, *version, latest);
    if (*version == latest)
        return MITILOG_OK;
    status = store_link_script(link, "queries/database/pragma_foreign_keys_off.sql", error);
    for (const sql_file *file = sql_files; status == MITILOG_OK && file->name != NULL; file++) {
        int number = store_migration_number(file->name);
        if (number <= *version)
            continue;
        status = store_apply_migration(link, file, number, path, error);
        if (status == MITILOG_OK)
            *version = number;
    }
    mitilog_error restore_error;
    mitilog_status restored =
        store_link_script(link, "queries/database/pragma_foreign_keys_on.sql", &restore_error);
    if (status == MITILOG_OK && restored != MITILOG_OK && error != NULL)
        *error = restore_error;
    return status != MITILOG_OK ? status : restored;
}

/* Puts the writer into WAL mode and applies its PRAGMAs. */
static mitilog_status store_configure_writer(store_link *link, const char *path,
                                             mitilog_error *error)
{
    store_query query;
    int has_row = 0;
    mitilog_status status = store_first_row(link, "queries/database/pragma_journal_wal.sql", &query,
                                            &has_row, "set WAL mode", error);
    if (status != MITILOG_OK)
        return status;
    const char *mode = has_row ? store_column_text(&query, 0) : NULL;
    if (!has_row)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "set WAL mode: no row");
    else if (mode == NULL || strcmp(mode, "wal") != 0)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                   "database %s: cannot use WAL mode "
                                   "(journal mode stays %s)",
                                   path, mode != NULL ? mode : "unknown");
    store_query_end(&query);
    if (status != MITILOG_OK)
        return status;
    return store_link_script(link, "queries/database/pragma_writer.sql", error);
}

/* Opens the store on engine: target (an SQLite path, a PostgreSQL
 * conninfo) for the writer, read_target for the read connection. */
static mitilog_status store_open_engine(const store_engine *engine, const char *target,
                                        const char *read_target, int busy_timeout_ms, store **out,
                                        mitilog_error *error)
{
    if (out == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_open: no result pointer");
    *out = NULL;
    int postgresql = engine == &store_engine_postgresql;
    /* Messages name the SQLite file; never a conninfo (it may hold a
     * password). */
    const char *path = postgresql ? "(PostgreSQL)" : target;
    store *opened = calloc(1, sizeof *opened);
    if (opened == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory opening %s", path);
    store_commit_init(&opened->queue);
    pthread_mutex_init(&opened->reader_lock, NULL);
    snprintf(opened->site, sizeof opened->site, "%s", EXAM_SITE_DEFAULT);
    opened->exam_job_settle_ms = STORE_EXAM_JOB_SETTLE_MS;
    opened->exam_job_max_wait_ms = STORE_EXAM_JOB_MAX_WAIT_MS;

    mitilog_status status =
        store_link_open(&opened->writer, engine, target, 0, busy_timeout_ms, error);
    if (status == MITILOG_OK && postgresql) {
        /* Receivers starting together migrate and sync the vocabulary
         * once: one after the other under the advisory lock (SQLite's
         * BEGIN IMMEDIATE serialises them; PostgreSQL's BEGIN does not). */
        status = store_postgresql_lock(opened->writer.connection, error);
        if (status == MITILOG_OK) {
            status = store_postgresql_migrate(opened->writer.connection, busy_timeout_ms,
                                              &opened->schema_version, error);
            if (status == MITILOG_OK)
                status =
                    store_link_script(&opened->writer, "queries/database/pragma_writer.sql", error);
            if (status == MITILOG_OK)
                status = store_exams_sync_vocabulary(&opened->writer, path, error);
            mitilog_error unlock_error;
            if (store_postgresql_unlock(opened->writer.connection, busy_timeout_ms,
                                        &unlock_error) != MITILOG_OK &&
                status == MITILOG_OK) {
                status = MITILOG_ERROR_DATABASE;
                if (error != NULL)
                    *error = unlock_error;
            }
        }
    }
    if (status == MITILOG_OK && !postgresql)
        status = store_configure_writer(&opened->writer, path, error);
    if (status == MITILOG_OK && !postgresql)
        status = store_migrate(&opened->writer, path, &opened->schema_version, error);
    if (status == MITILOG_OK && !postgresql)
        status = store_exams_sync_vocabulary(&opened->writer, path, error);
    /* The read connection is opened after the migrations, read-only. */
    if (status == MITILOG_OK)
        status = store_link_open(&opened->reader, engine, read_target, 1, busy_timeout_ms, error);
    if (status == MITILOG_OK)
        status = store_link_script(&opened->reader, "queries/database/pragma_reader.sql", error);
    if (status != MITILOG_OK) {
        store_close(opened);
        return status;
    }
    *out = opened;
    return MITILOG_OK;
}

mitilog_status store_open(const char *path, int busy_timeout_ms, store **out, mitilog_error *error)
{
    if (path == NULL || path[0] == '\0') {
        if (out != NULL)
            *out = NULL;
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_open: no database path");
    }
    return store_open_engine(&store_engine_sqlite, path, path, busy_timeout_ms, out, error);
}

mitilog_status store_open_postgresql(const char *connection, const char *read_connection,
                                     int busy_timeout_ms, store **out, mitilog_error *error)
{
    if (connection == NULL || connection[0] == '\0') {
        if (out != NULL)
            *out = NULL;
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "no PostgreSQL connection string: set [storage] connection");
    }
    const char *reads =
        read_connection != NULL && read_connection[0] != '\0' ? read_connection : connection;
    return store_open_engine(&store_engine_postgresql, connection, reads, busy_timeout_ms, out,
                             error);
}

void store_close(store *st)
{
    if (st == NULL)
        return;
    store_commit_drain(&st->queue);
    store_link_close(&st->reader);
    if (st->writer.connection != NULL) {
        mitilog_error error;
        if (store_link_script(&st->writer, "queries/database/checkpoint.sql", &error) != MITILOG_OK)
            log_warning("database checkpoint at close failed: %s", error.text);
    }
    store_link_close(&st->writer);
    pthread_mutex_destroy(&st->reader_lock);
    store_commit_destroy(&st->queue);
    free(st);
}

int store_schema_version(store *st) { return st != NULL ? st->schema_version : 0; }

void *store_writer_connection(store *st)
{
    if (st == NULL || st->writer.engine != &store_engine_sqlite)
        return NULL;
    return store_engine_sqlite_handle(st->writer.connection);
}

mitilog_status store_set_durability(store *st, store_durability durability, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_set_durability: no store");
    /* The writer link belongs to whoever leads a batch: wait until nobody
     * does, and hold the queue so nobody starts meanwhile. */
    store_commit_hold(&st->queue);
    mitilog_status status = store_link_script(&st->writer,
                                              durability == STORE_DURABILITY_PROCESS
                                                  ? "queries/database/pragma_synchronous_normal.sql"
                                                  : "queries/database/pragma_synchronous_full.sql",
                                              error);
    store_commit_release(&st->queue);
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
    store_query query;
    store_query_begin(&query, &st->reader, "queries/database/health.sql");
    mitilog_status status = store_query_text(&query, "health query", 0, json, error);
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

mitilog_status store_set_site(store *st, const char *site, mitilog_error *error)
{
    char reason[160];
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_set_site: no store");
    if (!exam_site_name_check(site, reason, sizeof reason))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "site \"%.80s\": %s",
                                 site != NULL ? site : "", reason);
    snprintf(st->site, sizeof st->site, "%s", site);
    return MITILOG_OK;
}

const char *store_site(const store *st) { return st != NULL ? st->site : ""; }

void store_bind_sites(store_query *query, const store_sites *sites)
{
    size_t count = sites != NULL ? sites->count : 0;
    if (count > EXAM_SITES_MAX)
        count = EXAM_SITES_MAX;
    if (store_query_has_parameter(query, ":site_count"))
        store_bind_integer(query, ":site_count", (long long)count);
    for (size_t i = 1; i <= EXAM_SITES_MAX; i++) {
        char name[16];
        snprintf(name, sizeof name, ":site_%zu", i);
        if (!store_query_has_parameter(query, name))
            continue;
        if (i <= count)
            store_bind_text(query, name, sites->names[i - 1]);
        else
            store_bind_null(query, name);
    }
}

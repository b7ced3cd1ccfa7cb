/*
 * store_open.c - opening and closing the store: the writer connection
 * (WAL, synchronous FULL), the schema migrations of sql/migrations, and
 * the read-only connection for the queries.
 */
#include "store/store_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "exam/exam.h"
#include "store/sql_files.h"
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

/* Reads PRAGMA user_version into *version. */
static mitilog_status store_read_version(sqlite3 *db, int *version, mitilog_error *error)
{
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_prepare(db, "queries/database/schema_version.sql", &statement, error);
    if (status != MITILOG_OK)
        return status;
    if (sqlite3_step(statement) == SQLITE_ROW) {
        *version = sqlite3_column_int(statement, 0);
    } else {
        status = store_sql_error(error, db, "read schema version");
    }
    sqlite3_finalize(statement);
    return status;
}

/* MITILOG_OK when no foreign key of the database is dangling. */
static mitilog_status store_check_foreign_keys(sqlite3 *db, const char *name, mitilog_error *error)
{
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_prepare(db, "queries/database/foreign_key_check.sql", &statement, error);
    if (status != MITILOG_OK)
        return status;
    int rc = sqlite3_step(statement);
    if (rc == SQLITE_ROW)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                   "%s left a dangling reference in table %s", name,
                                   sqlite3_column_text(statement, 0));
    else if (rc != SQLITE_DONE)
        status = store_sql_error(error, db, name);
    sqlite3_finalize(statement);
    return status;
}

/* Applies one migration in its own transaction, unless another process
 * applied it meanwhile. The file itself sets user_version; this checks it,
 * and that no reference is left dangling (foreign keys are off while
 * migrations run, so that a table can be rebuilt). */
static mitilog_status store_apply_migration(sqlite3 *db, const sql_file *file, int number,
                                            const char *path, mitilog_error *error)
{
    mitilog_status status = store_exec_file(db, "queries/database/write_begin.sql", error);
    if (status != MITILOG_OK)
        return status;
    int version = 0;
    status = store_read_version(db, &version, error);
    if (status == MITILOG_OK && version < number) {
        status = store_exec_text(db, file->name, file->text, error);
        if (status == MITILOG_OK)
            status = store_read_version(db, &version, error);
        if (status == MITILOG_OK && version != number)
            status = mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                       "%s left user_version at %d, "
                                       "expected %d",
                                       file->name, version, number);
        if (status == MITILOG_OK)
            status = store_check_foreign_keys(db, file->name, error);
    }
    if (status == MITILOG_OK)
        status = store_exec_file(db, "queries/database/write_commit.sql", error);
    if (status != MITILOG_OK) {
        store_exec_file(db, "queries/database/write_rollback.sql", NULL);
        return status;
    }
    log_info("database %s: schema at version %d (%s)", path, number, file->name);
    return MITILOG_OK;
}

/* Brings the schema up to the newest built-in migration; *version gets
 * the resulting schema version. */
static mitilog_status store_migrate(sqlite3 *db, const char *path, int *version,
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
    mitilog_status status = store_read_version(db, version, error);
    if (status != MITILOG_OK)
        return status;
    if (*version > latest)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "database %s has schema version %d, newer "
                                 "than this program's %d",
                                 path, *version, latest);
    if (*version == latest)
        return MITILOG_OK;
    status = store_exec_file(db, "queries/database/pragma_foreign_keys_off.sql", error);
    for (const sql_file *file = sql_files; status == MITILOG_OK && file->name != NULL; file++) {
        int number = store_migration_number(file->name);
        if (number <= *version)
            continue;
        status = store_apply_migration(db, file, number, path, error);
        if (status == MITILOG_OK)
            *version = number;
    }
    mitilog_error restore_error;
    mitilog_status restored =
        store_exec_file(db, "queries/database/pragma_foreign_keys_on.sql", &restore_error);
    if (status == MITILOG_OK && restored != MITILOG_OK && error != NULL)
        *error = restore_error;
    return status != MITILOG_OK ? status : restored;
}

/* Opens path with flags, extended result codes and the busy timeout. */
static mitilog_status store_connect(const char *path, int flags, int busy_timeout_ms, sqlite3 **out,
                                    mitilog_error *error)
{
    sqlite3 *db = NULL;
    if (sqlite3_open_v2(path, &db, flags | SQLITE_OPEN_FULLMUTEX, NULL) != SQLITE_OK) {
        mitilog_error_set(error, MITILOG_ERROR_DATABASE, "open %s: %s", path,
                          db != NULL ? sqlite3_errmsg(db) : "out of memory");
        sqlite3_close(db);
        return MITILOG_ERROR_DATABASE;
    }
    sqlite3_extended_result_codes(db, 1);
    sqlite3_busy_timeout(db, busy_timeout_ms > 0 ? busy_timeout_ms : 0);
    *out = db;
    return MITILOG_OK;
}

/* Puts the writer into WAL mode and applies its PRAGMAs. */
static mitilog_status store_configure_writer(sqlite3 *db, const char *path, mitilog_error *error)
{
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_prepare(db, "queries/database/pragma_journal_wal.sql", &statement, error);
    if (status != MITILOG_OK)
        return status;
    if (sqlite3_step(statement) != SQLITE_ROW) {
        status = store_sql_error(error, db, "set WAL mode");
    } else {
        const char *mode = (const char *)sqlite3_column_text(statement, 0);
        if (mode == NULL || strcmp(mode, "wal") != 0)
            status = mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                       "database %s: cannot use WAL mode "
                                       "(journal mode stays %s)",
                                       path, mode != NULL ? mode : "unknown");
    }
    sqlite3_finalize(statement);
    if (status != MITILOG_OK)
        return status;
    return store_exec_file(db, "queries/database/pragma_writer.sql", error);
}

/* 1 when the database's TI ladder (ti_thresholds) and mode names
 * (mode_names) are the exam vocabulary's, 0 when not, -1 on error;
 * *ladder_matches tells which. */
static int store_vocabulary_matches(sqlite3 *db, int *ladder_matches, mitilog_error *error)
{
    sqlite3_stmt *ladder = NULL, *modes = NULL;
    if (store_prepare(db, "queries/exams/ti_thresholds_select.sql", &ladder, error) != MITILOG_OK ||
        store_prepare(db, "queries/exams/mode_names_select.sql", &modes, error) != MITILOG_OK) {
        sqlite3_finalize(ladder);
        return -1;
    }
    int thresholds_match = 1, modes_match = 1, count = 0, rc;
    while ((rc = sqlite3_step(ladder)) == SQLITE_ROW) {
        if (count >= EXAM_TI_STEP_COUNT ||
            sqlite3_column_double(ladder, 0) != exam_ti_ladder[count])
            thresholds_match = 0;
        count++;
    }
    if (count != EXAM_TI_STEP_COUNT)
        thresholds_match = 0;
    int result = rc == SQLITE_DONE ? 0 : -1;
    count = 0;
    while (result == 0 && (rc = sqlite3_step(modes)) == SQLITE_ROW) {
        const char *name = (const char *)sqlite3_column_text(modes, 1);
        if (count >= EXAM_MODE_COUNT || sqlite3_column_int(modes, 0) != count || name == NULL ||
            strcmp(name, exam_mode_name((exam_mode)count)) != 0)
            modes_match = 0;
        count++;
    }
    if (result == 0 && rc != SQLITE_DONE)
        result = -1;
    if (count != EXAM_MODE_COUNT)
        modes_match = 0;
    if (result < 0)
        store_sql_error(error, db, "vocabulary of the database");
    sqlite3_finalize(ladder);
    sqlite3_finalize(modes);
    *ladder_matches = thresholds_match;
    return result < 0 ? -1 : thresholds_match && modes_match;
}

/* Makes the database's TI ladder and mode names the exam vocabulary's
 * (exam_ti_ladder, exam_mode_name()), in one transaction: when the ladder
 * differs, the thresholds are replaced and every exam's time at or above
 * them recomputed; when a mode name differs, the names are replaced
 * (a mode keeps its bit position: modes are only ever added at the end).
 * Another process that did it meanwhile leaves nothing to do. */
static mitilog_status store_sync_vocabulary(sqlite3 *db, const char *path, mitilog_error *error)
{
    int ladder_matches = 1;
    int matches = store_vocabulary_matches(db, &ladder_matches, error);
    if (matches != 0)
        return matches > 0 ? MITILOG_OK : MITILOG_ERROR_DATABASE;
    mitilog_status status = store_exec_file(db, "queries/database/write_begin.sql", error);
    if (status != MITILOG_OK)
        return status;
    matches = store_vocabulary_matches(db, &ladder_matches, error);
    if (matches < 0)
        status = MITILOG_ERROR_DATABASE;
    if (matches == 0 && !ladder_matches) {
        status = store_exec_file(db, "queries/exams/ti_thresholds_delete.sql", error);
        sqlite3_stmt *insert = NULL;
        if (status == MITILOG_OK)
            status = store_prepare(db, "queries/exams/ti_threshold_insert.sql", &insert, error);
        for (int k = 0; status == MITILOG_OK && k < EXAM_TI_STEP_COUNT; k++) {
            if (sqlite3_bind_double(insert, 1, exam_ti_ladder[k]) != SQLITE_OK ||
                store_step_done(insert) != SQLITE_DONE)
                status = store_sql_error(error, db, "queries/exams/ti_threshold_insert.sql");
        }
        sqlite3_finalize(insert);
        if (status == MITILOG_OK)
            status =
                store_exec_file(db, "queries/exams/exam_time_at_or_above_refresh_all.sql", error);
    }
    if (status == MITILOG_OK && matches == 0) {
        status = store_exec_file(db, "queries/exams/mode_names_delete.sql", error);
        sqlite3_stmt *insert = NULL;
        if (status == MITILOG_OK)
            status = store_prepare(db, "queries/exams/mode_name_insert.sql", &insert, error);
        for (int m = 0; status == MITILOG_OK && m < EXAM_MODE_COUNT; m++) {
            if (sqlite3_bind_int(insert, 1, m) != SQLITE_OK ||
                sqlite3_bind_text(insert, 2, exam_mode_name((exam_mode)m), -1, SQLITE_STATIC) !=
                    SQLITE_OK ||
                store_step_done(insert) != SQLITE_DONE)
                status = store_sql_error(error, db, "queries/exams/mode_name_insert.sql");
        }
        sqlite3_finalize(insert);
    }
    if (status == MITILOG_OK)
        status = store_exec_file(db, "queries/database/write_commit.sql", error);
    if (status != MITILOG_OK) {
        store_exec_file(db, "queries/database/write_rollback.sql", NULL);
        return status;
    }
    if (matches == 0 && !ladder_matches)
        log_info("database %s: TI threshold ladder updated, time at or above recomputed", path);
    return MITILOG_OK;
}

mitilog_status store_open(const char *path, int busy_timeout_ms, store **out, mitilog_error *error)
{
    if (out == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_open: no result pointer");
    *out = NULL;
    if (path == NULL || path[0] == '\0')
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_open: no database path");
    store *opened = calloc(1, sizeof *opened);
    if (opened == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory opening %s", path);
    pthread_mutex_init(&opened->queue_lock, NULL);
    pthread_cond_init(&opened->queue_changed, NULL);
    pthread_mutex_init(&opened->reader_lock, NULL);
    pthread_mutex_init(&opened->parameter_lock, NULL);
    hash_table_init(&opened->parameter_indices, STORE_PARAMETER_ENTRIES);
    snprintf(opened->site, sizeof opened->site, "%s", EXAM_SITE_DEFAULT);

    mitilog_status status = store_connect(path, SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE,
                                          busy_timeout_ms, &opened->writer, error);
    if (status == MITILOG_OK)
        status = store_configure_writer(opened->writer, path, error);
    if (status == MITILOG_OK)
        status = store_migrate(opened->writer, path, &opened->schema_version, error);
    if (status == MITILOG_OK)
        status = store_sync_vocabulary(opened->writer, path, error);
    if (status == MITILOG_OK)
        status = store_write_prepare(opened, error);
    /* The read connection is opened after the migrations, read-only. */
    if (status == MITILOG_OK)
        /* NOMUTEX: every use of the read connection is already serialised
         * by reader_lock, and SQLite's own mutex around each column call
         * cost a sixth of a period view's instructions. */
        status = store_connect(path, SQLITE_OPEN_READONLY | SQLITE_OPEN_NOMUTEX, busy_timeout_ms,
                               &opened->reader, error);
    if (status == MITILOG_OK)
        status = store_exec_file(opened->reader, "queries/database/pragma_reader.sql", error);
    if (status == MITILOG_OK)
        status = store_read_prepare(opened, error);
    if (status != MITILOG_OK) {
        store_close(opened);
        return status;
    }
    *out = opened;
    return MITILOG_OK;
}

void store_close(store *st)
{
    if (st == NULL)
        return;
    store_write_drain(st);
    /* Nobody writes any more: what threads remember of the writer's
     * parameters is forgotten before its statements are finalized. */
    store_parameter_forget(st);
    store_read_finalize(st);
    store_cache_finalize(&st->reader_cache);
    sqlite3_close(st->reader);
    store_write_finalize(st);
    store_cache_finalize(&st->writer_cache);
    if (st->writer != NULL) {
        mitilog_error error;
        if (store_exec_file(st->writer, "queries/database/checkpoint.sql", &error) != MITILOG_OK)
            log_warning("database checkpoint at close failed: %s", error.text);
        if (sqlite3_close(st->writer) != SQLITE_OK)
            log_warning("database close failed: %s", sqlite3_errmsg(st->writer));
    }
    pthread_mutex_destroy(&st->parameter_lock);
    pthread_mutex_destroy(&st->reader_lock);
    pthread_cond_destroy(&st->queue_changed);
    pthread_mutex_destroy(&st->queue_lock);
    free(st);
}

int store_schema_version(store *st) { return st != NULL ? st->schema_version : 0; }

sqlite3 *store_writer_connection(store *st) { return st != NULL ? st->writer : NULL; }

mitilog_status store_set_durability(store *st, store_durability durability, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_set_durability: no store");
    /* The writer connection belongs to whoever leads a batch: wait until
     * nobody does, and hold the queue so nobody starts meanwhile. */
    pthread_mutex_lock(&st->queue_lock);
    while (st->leader_active)
        pthread_cond_wait(&st->queue_changed, &st->queue_lock);
    mitilog_status status = store_exec_file(st->writer,
                                            durability == STORE_DURABILITY_PROCESS
                                                ? "queries/database/pragma_synchronous_normal.sql"
                                                : "queries/database/pragma_synchronous_full.sql",
                                            error);
    pthread_mutex_unlock(&st->queue_lock);
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

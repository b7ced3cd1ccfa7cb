/*
 * store_postgresql_migrate.c - the schema migrations of a PostgreSQL
 * database (see store_engine_postgresql.h for the order and the rules).
 * Runs every statement through the engine table of
 * store_engine_postgresql.c; the SQL text is the embedded sql/ files.
 */
#include "store/store_engine_postgresql.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "store/sql_files.h"
#include "util/log.h"

static const char store_pg_migrations[] = "migrations/";
static const char store_pg_overrides[] = "migrations/postgresql/";
static const char store_pg_baseline[] = "migrations/postgresql/012_baseline.sql";
static const char store_pg_compat[] = "migrations/postgresql/compat.sql";
enum { STORE_PG_BASELINE_VERSION = 12 };

/* Every mitilog database of a server shares this advisory lock key
 * ("mitilog" in ASCII); it is taken only while migrating. */
#define STORE_PG_MIGRATION_LOCK "7595448634288487"

/* NNN of "<prefix>NNN_name.sql", or -1. */
static int store_pg_migration_number(const char *name, const char *prefix)
{
    size_t length = strlen(prefix);
    if (strncmp(name, prefix, length) != 0)
        return -1;
    int number = 0;
    const char *digit = name + length;
    for (; *digit >= '0' && *digit <= '9'; digit++) {
        if (number > 100000)
            return -1;
        number = number * 10 + (*digit - '0');
    }
    if (digit == name + length || *digit != '_')
        return -1;
    return number;
}

int store_postgresql_latest_migration(void)
{
    int latest = 0;
    for (const sql_file *file = sql_files; file->name != NULL; file++) {
        int number = store_pg_migration_number(file->name, store_pg_migrations);
        if (number > latest)
            latest = number;
    }
    return latest;
}

/* The text PostgreSQL runs for common migration number: its override,
 * else the common file without its PRAGMA user_version statement
 * (a malloc'd copy in *owned). */
static const char *store_pg_migration_text(const sql_file *common, int number, char **owned,
                                           const char **name)
{
    *owned = NULL;
    *name = common->name;
    for (const sql_file *file = sql_files; file->name != NULL; file++) {
        if (store_pg_migration_number(file->name, store_pg_overrides) == number) {
            *name = file->name;
            return file->text;
        }
    }
    char *copy = strdup(common->text);
    if (copy == NULL)
        return NULL;
    static const char pragma[] = "PRAGMA user_version";
    for (char *at = copy; *at != '\0'; at++) {
        if (strncasecmp(at, pragma, sizeof pragma - 1) != 0)
            continue;
        char *end = strchr(at, ';');
        char *stop = end != NULL ? end + 1 : at + strlen(at);
        memset(at, ' ', (size_t)(stop - at));
        at = stop - 1;
    }
    *owned = copy;
    return copy;
}

static mitilog_status store_pg_script(store_connection *c, const char *name, const char *sql,
                                      mitilog_error *error)
{
    return store_engine_postgresql.execute_script(c, name, sql, error);
}

/* Runs sql in a transaction of its own. */
static mitilog_status store_pg_in_transaction(store_connection *c, const char *name,
                                              const char *sql, mitilog_error *error)
{
    mitilog_status status = store_pg_script(c, name, "BEGIN", error);
    if (status != MITILOG_OK)
        return status;
    status = store_pg_script(c, name, sql, error);
    if (status == MITILOG_OK)
        status = store_pg_script(c, name, "COMMIT", error);
    if (status != MITILOG_OK)
        store_pg_script(c, name, "ROLLBACK", NULL);
    return status;
}

/* The database's schema version: 0 when it has no schema_version table. */
static mitilog_status store_pg_read_version(store_connection *c, int *version, mitilog_error *error)
{
    *version = 0;
    const store_engine *engine = &store_engine_postgresql;
    store_statement *statement = NULL;
    mitilog_status status = engine->prepare(
        c, "schema version", "SELECT to_regclass('schema_version') IS NOT NULL", &statement, error);
    int has_row = 0, exists = 0;
    if (status == MITILOG_OK)
        status = engine->step(statement, &has_row, error);
    if (status == MITILOG_OK && has_row)
        exists = (int)engine->column_integer(statement, 0);
    engine->finalize(statement);
    statement = NULL;
    if (status != MITILOG_OK || !exists)
        return status;
    status =
        engine->prepare(c, "schema version", "SELECT coalesce(max(version), 0) FROM schema_version",
                        &statement, error);
    if (status == MITILOG_OK)
        status = engine->step(statement, &has_row, error);
    if (status == MITILOG_OK && has_row)
        *version = (int)engine->column_integer(statement, 0);
    engine->finalize(statement);
    return status;
}

static mitilog_status store_pg_migrate_locked(store_connection *c, int *version,
                                              mitilog_error *error)
{
    int latest = store_postgresql_latest_migration();
    const char *compat = sql_file_text(store_pg_compat);
    mitilog_status status = MITILOG_OK;
    if (compat != NULL)
        status = store_pg_in_transaction(c, store_pg_compat, compat, error);
    if (status == MITILOG_OK)
        status = store_pg_read_version(c, version, error);
    if (status != MITILOG_OK)
        return status;
    if (*version > latest)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "the PostgreSQL database has schema version %d, newer than this "
                                 "program's %d: run the newer mitilog, or restore a backup made "
                                 "for this one",
                                 *version, latest);
    if (*version < STORE_PG_BASELINE_VERSION) {
        const char *baseline = sql_file_text(store_pg_baseline);
        if (baseline == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "SQL file %s is not built in",
                                     store_pg_baseline);
        status = store_pg_in_transaction(c, store_pg_baseline, baseline, error);
        if (status == MITILOG_OK)
            status = store_pg_read_version(c, version, error);
        if (status == MITILOG_OK && *version != STORE_PG_BASELINE_VERSION)
            status = mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                       "%s left the schema at version %d, expected %d",
                                       store_pg_baseline, *version, STORE_PG_BASELINE_VERSION);
        if (status != MITILOG_OK)
            return status;
        log_info("database: PostgreSQL schema created at version %d", *version);
    }
    for (const sql_file *file = sql_files; status == MITILOG_OK && file->name != NULL; file++) {
        int number = store_pg_migration_number(file->name, store_pg_migrations);
        if (number <= *version)
            continue;
        char *owned = NULL;
        const char *name = NULL;
        const char *text = store_pg_migration_text(file, number, &owned, &name);
        if (text == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory for %s",
                                     file->name);
        char set_version[96];
        snprintf(set_version, sizeof set_version,
                 "UPDATE schema_version SET version = %d WHERE only_row = 1", number);
        status = store_pg_script(c, name, "BEGIN", error);
        if (status == MITILOG_OK)
            status = store_pg_script(c, name, text, error);
        if (status == MITILOG_OK)
            status = store_pg_script(c, name, set_version, error);
        if (status == MITILOG_OK)
            status = store_pg_script(c, name, "COMMIT", error);
        if (status != MITILOG_OK)
            store_pg_script(c, name, "ROLLBACK", NULL);
        free(owned);
        if (status == MITILOG_OK) {
            *version = number;
            log_info("database: PostgreSQL schema at version %d (%s)", number, name);
        }
    }
    if (status == MITILOG_OK)
        /* From the oldest month waiting in the default partition (rows
         * that arrived before their month's partition, or were copied in)
         * to twelve months ahead. */
        status = store_pg_in_transaction(
            c, "month partitions",
            "SELECT mitilog_month_partitions(least(current_date, (SELECT "
            "to_date(substr(min(first_received_at), 1, 7), 'YYYY-MM') FROM instances_default "
            "WHERE first_received_at ~ '^[0-9]{4}-[0-9]{2}')), "
            "(current_date + interval '12 months')::date)",
            error);
    return status;
}

mitilog_status store_postgresql_lock(store_connection *connection, mitilog_error *error)
{
    /* The lock waits as long as another receiver migrates. */
    return store_pg_script(
        connection, "migration lock",
        "SET lock_timeout = 0; SELECT pg_advisory_lock(" STORE_PG_MIGRATION_LOCK ")", error);
}

mitilog_status store_postgresql_unlock(store_connection *connection, int busy_timeout_ms,
                                       mitilog_error *error)
{
    char restore[160];
    snprintf(restore, sizeof restore,
             "SELECT pg_advisory_unlock(" STORE_PG_MIGRATION_LOCK "); SET lock_timeout = %d",
             busy_timeout_ms > 0 ? busy_timeout_ms : 1);
    return store_pg_script(connection, "migration unlock", restore, error);
}

mitilog_status store_postgresql_migrate(store_connection *connection, int busy_timeout_ms,
                                        int *version, mitilog_error *error)
{
    *version = 0;
    mitilog_status status = store_postgresql_lock(connection, error);
    if (status != MITILOG_OK)
        return status;
    status = store_pg_migrate_locked(connection, version, error);
    mitilog_error unlock_error;
    mitilog_status unlocked = store_postgresql_unlock(connection, busy_timeout_ms, &unlock_error);
    if (status == MITILOG_OK && unlocked != MITILOG_OK) {
        if (error != NULL)
            *error = unlock_error;
        status = unlocked;
    }
    return status;
}

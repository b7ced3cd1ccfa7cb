/*
 * store_sql.c - running the SQL files of sql/ (embedded at build time):
 * preparing one-statement query files, running multi-statement scripts
 * (migrations, PRAGMA files), and turning SQLite errors into mitilog
 * errors.
 */
#include "store/store_internal.h"

#include <stdlib.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "store/sql_files.h"

mitilog_status store_sql_error(mitilog_error *error, sqlite3 *db, const char *what)
{
    if (db == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: out of memory", what);
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", what, sqlite3_errmsg(db));
}

mitilog_status store_prepare(sqlite3 *db, const char *name, sqlite3_stmt **statement,
                             mitilog_error *error)
{
    *statement = NULL;
    const char *text = sql_file_text(name);
    if (text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "SQL file %s is not built in",
                                 name);
    const char *tail = NULL;
    if (sqlite3_prepare_v3(db, text, -1, SQLITE_PREPARE_PERSISTENT, statement, &tail) !=
            SQLITE_OK ||
        *statement == NULL) {
        mitilog_status status = store_sql_error(error, db, name);
        sqlite3_finalize(*statement);
        *statement = NULL;
        return status;
    }
    /* A query file holds exactly one statement; anything after it but
     * comments and blanks would be silently ignored. */
    sqlite3_stmt *extra = NULL;
    if (sqlite3_prepare_v2(db, tail, -1, &extra, NULL) != SQLITE_OK || extra != NULL) {
        sqlite3_finalize(extra);
        sqlite3_finalize(*statement);
        *statement = NULL;
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "%s: must hold exactly one statement", name);
    }
    return MITILOG_OK;
}

mitilog_status store_cached_statement(store_cache *cache, sqlite3 *db, const char *name,
                                      sqlite3_stmt **statement, mitilog_error *error)
{
    for (size_t i = 0; i < cache->count; i++) {
        if (cache->names[i] == name || strcmp(cache->names[i], name) == 0) {
            *statement = cache->statements[i];
            return MITILOG_OK;
        }
    }
    if (cache->count == STORE_CACHE_MAX)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: statement cache full", name);
    mitilog_status status = store_prepare(db, name, statement, error);
    if (status != MITILOG_OK)
        return status;
    cache->names[cache->count] = name;
    cache->statements[cache->count++] = *statement;
    return MITILOG_OK;
}

enum { STORE_PARAMETER_NAME_MAX = 256 };

int store_parameter_index(store *st, sqlite3_stmt *statement, const char *name)
{
    /* The key: the statement's address, then the name's bytes. */
    unsigned char key[sizeof statement + STORE_PARAMETER_NAME_MAX];
    size_t length = strlen(name);
    if (length > STORE_PARAMETER_NAME_MAX)
        return sqlite3_bind_parameter_index(statement, name);
    memcpy(key, &statement, sizeof statement);
    memcpy(key + sizeof statement, name, length);
    size_t key_size = sizeof statement + length;
    pthread_mutex_lock(&st->parameter_lock);
    const hash_entry *entry = hash_table_find(&st->parameter_indices, key, key_size);
    int index;
    if (entry != NULL) {
        index = (int)entry->number;
    } else {
        index = sqlite3_bind_parameter_index(statement, name);
        /* Out of memory: not remembered; asked again next time. */
        (void)hash_table_put(&st->parameter_indices, key, key_size, (uint64_t)index, NULL);
    }
    pthread_mutex_unlock(&st->parameter_lock);
    return index;
}

void store_parameter_forget(store *st)
{
    pthread_mutex_lock(&st->parameter_lock);
    hash_table_free(&st->parameter_indices);
    pthread_mutex_unlock(&st->parameter_lock);
}

void store_release(sqlite3_stmt *statement)
{
    if (statement == NULL)
        return;
    sqlite3_reset(statement);
    sqlite3_clear_bindings(statement);
}

void store_cache_finalize(store_cache *cache)
{
    for (size_t i = 0; i < cache->count; i++)
        sqlite3_finalize(cache->statements[i]);
    memset(cache, 0, sizeof *cache);
}

mitilog_status store_exec_text(sqlite3 *db, const char *name, const char *text,
                               mitilog_error *error)
{
    const char *next = text;
    while (next != NULL && *next != '\0') {
        sqlite3_stmt *statement = NULL;
        const char *tail = NULL;
        if (sqlite3_prepare_v2(db, next, -1, &statement, &tail) != SQLITE_OK)
            return store_sql_error(error, db, name);
        if (statement == NULL) /* only comments or blanks were left */
            break;
        int rc;
        while ((rc = sqlite3_step(statement)) == SQLITE_ROW)
            continue;
        if (rc != SQLITE_DONE) {
            mitilog_status status = store_sql_error(error, db, name);
            sqlite3_finalize(statement);
            return status;
        }
        sqlite3_finalize(statement);
        next = tail;
    }
    return MITILOG_OK;
}

mitilog_status store_exec_file(sqlite3 *db, const char *name, mitilog_error *error)
{
    const char *text = sql_file_text(name);
    if (text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "SQL file %s is not built in",
                                 name);
    return store_exec_text(db, name, text, error);
}

int store_step_done(sqlite3_stmt *statement)
{
    int rc;
    while ((rc = sqlite3_step(statement)) == SQLITE_ROW)
        continue;
    sqlite3_reset(statement);
    return rc;
}

mitilog_status store_column_dup(sqlite3_stmt *statement, char **out, mitilog_error *error)
{
    const unsigned char *text = sqlite3_column_text(statement, 0);
    size_t length = (size_t)sqlite3_column_bytes(statement, 0);
    if (text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "query gave no text");
    char *copy = malloc(length + 1);
    if (copy == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory for a %zu-byte result",
                                 length);
    memcpy(copy, text, length);
    copy[length] = '\0';
    *out = copy;
    return MITILOG_OK;
}

int store_bind_sites(sqlite3_stmt *statement, const store_sites *sites)
{
    size_t count = sites != NULL ? sites->count : 0;
    if (count > EXAM_SITES_MAX)
        return SQLITE_RANGE;
    int index = sqlite3_bind_parameter_index(statement, ":site_count");
    int rc = index > 0 ? sqlite3_bind_int64(statement, index, (sqlite3_int64)count) : SQLITE_OK;
    for (int i = 1; rc == SQLITE_OK && i <= EXAM_SITES_MAX; i++) {
        char name[16];
        snprintf(name, sizeof name, ":site_%d", i);
        index = sqlite3_bind_parameter_index(statement, name);
        if (index <= 0)
            continue;
        if ((size_t)i <= count)
            rc = sqlite3_bind_text(statement, index, sites->names[i - 1], -1, SQLITE_TRANSIENT);
        else
            rc = sqlite3_bind_null(statement, index);
    }
    return rc;
}

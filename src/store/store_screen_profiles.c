/*
 * store_screen_profiles.c - the table of device screen profiles
 * (sql/migrations/008_screen_profiles.sql): writes go through the writer's
 * batches (store_submit_custom), reads through the read connection. Not on
 * a hot path: statements are prepared per call.
 */
#include "store/store_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int bind_text_or_null(sqlite3_stmt *statement, const char *name, const char *value)
{
    int index = sqlite3_bind_parameter_index(statement, name);
    if (index == 0)
        return SQLITE_RANGE;
    return value != NULL ? sqlite3_bind_text(statement, index, value, -1, SQLITE_STATIC)
                         : sqlite3_bind_null(statement, index);
}

static int bind_int(sqlite3_stmt *statement, const char *name, int value)
{
    int index = sqlite3_bind_parameter_index(statement, name);
    return index == 0 ? SQLITE_RANGE : sqlite3_bind_int(statement, index, value);
}

/* ---- writes ------------------------------------------------------------ */

typedef struct put_context {
    const store_screen_profile_new *profile;
    int version;
} put_context;

static mitilog_status write_put(store *st, const void *context, mitilog_error *error)
{
    put_context *put = (put_context *)context;
    const store_screen_profile_new *p = put->profile;
    sqlite3_stmt *next = NULL, *insert = NULL;
    mitilog_status status =
        store_prepare(st->writer, "queries/devices/screen_profile_next_version.sql", &next, error);
    if (status == MITILOG_OK)
        status =
            store_prepare(st->writer, "queries/devices/screen_profile_insert.sql", &insert, error);
    if (status == MITILOG_OK) {
        int rc = bind_text_or_null(next, ":profile_key", p->key);
        if (rc == SQLITE_OK && sqlite3_step(next) == SQLITE_ROW)
            put->version = sqlite3_column_int(next, 0);
        else
            status = store_sql_error(error, st->writer, "screen profile version");
    }
    if (status == MITILOG_OK) {
        int rc = bind_text_or_null(insert, ":profile_key", p->key);
        if (rc == SQLITE_OK)
            rc = bind_int(insert, ":version", put->version);
        if (rc == SQLITE_OK)
            rc = bind_text_or_null(insert, ":manufacturer", p->manufacturer);
        if (rc == SQLITE_OK)
            rc = bind_text_or_null(insert, ":model_name", p->model_name);
        if (rc == SQLITE_OK)
            rc = bind_text_or_null(insert, ":software_versions", p->software_versions);
        if (rc == SQLITE_OK)
            rc = bind_int(insert, ":rows", p->rows);
        if (rc == SQLITE_OK)
            rc = bind_int(insert, ":columns", p->columns);
        if (rc == SQLITE_OK)
            rc = bind_text_or_null(insert, ":profile_text", p->text);
        if (rc == SQLITE_OK)
            rc = bind_text_or_null(insert, ":report", p->report);
        if (rc == SQLITE_OK) {
            int index = sqlite3_bind_parameter_index(insert, ":example_image");
            rc =
                p->example != NULL && p->example_size > 0
                    ? sqlite3_bind_blob64(insert, index, p->example, p->example_size, SQLITE_STATIC)
                    : sqlite3_bind_null(insert, index);
        }
        if (rc != SQLITE_OK || sqlite3_step(insert) != SQLITE_DONE)
            status = store_sql_error(error, st->writer, "store screen profile");
    }
    sqlite3_finalize(next);
    sqlite3_finalize(insert);
    return status;
}

mitilog_status store_screen_profile_put(store *st, const store_screen_profile_new *profile,
                                        int *version, mitilog_error *error)
{
    if (st == NULL || profile == NULL || profile->key == NULL || profile->key[0] == '\0' ||
        profile->text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_screen_profile_put: no store, key or text");
    put_context context = {.profile = profile, .version = 0};
    mitilog_status status = store_submit_custom(st, write_put, &context, error);
    if (status == MITILOG_OK && version != NULL)
        *version = context.version;
    return status;
}

typedef struct state_context {
    const char *key;
    int version;
    const char *who;
} state_context;

/* Runs one prepared UPDATE with key (and version, who) bound; *changed gets
 * the rows it changed. */
static mitilog_status run_update(store *st, const char *name, const state_context *c, int *changed,
                                 mitilog_error *error)
{
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_prepare(st->writer, name, &statement, error);
    if (status != MITILOG_OK)
        return status;
    int rc = bind_text_or_null(statement, ":profile_key", c->key);
    if (rc == SQLITE_OK && sqlite3_bind_parameter_index(statement, ":version") > 0)
        rc = bind_int(statement, ":version", c->version);
    if (rc == SQLITE_OK && sqlite3_bind_parameter_index(statement, ":confirmed_by") > 0)
        rc = bind_text_or_null(statement, ":confirmed_by", c->who);
    if (rc != SQLITE_OK || sqlite3_step(statement) != SQLITE_DONE)
        status = store_sql_error(error, st->writer, name);
    else if (changed != NULL)
        *changed = sqlite3_changes(st->writer);
    sqlite3_finalize(statement);
    return status;
}

static mitilog_status write_activate(store *st, const void *context, mitilog_error *error)
{
    state_context c = *(const state_context *)context;
    if (c.version == 0) {
        sqlite3_stmt *next = NULL;
        mitilog_status status = store_prepare(
            st->writer, "queries/devices/screen_profile_next_version.sql", &next, error);
        if (status != MITILOG_OK)
            return status;
        if (bind_text_or_null(next, ":profile_key", c.key) == SQLITE_OK &&
            sqlite3_step(next) == SQLITE_ROW)
            c.version = sqlite3_column_int(next, 0) - 1;
        sqlite3_finalize(next);
    }
    int changed = 0;
    mitilog_status status =
        run_update(st, "queries/devices/screen_profile_retire_others.sql", &c, NULL, error);
    if (status == MITILOG_OK)
        status = run_update(st, "queries/devices/screen_profile_activate.sql", &c, &changed, error);
    if (status == MITILOG_OK && changed == 0)
        status = mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND,
                                   "no screen profile %s version %d: list them with "
                                   "'mitilog device list'",
                                   c.key, c.version);
    return status;
}

mitilog_status store_screen_profile_activate(store *st, const char *key, int version,
                                             const char *confirmed_by, mitilog_error *error)
{
    if (st == NULL || key == NULL || version < 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_screen_profile_activate: no store or key");
    state_context context = {.key = key, .version = version, .who = confirmed_by};
    return store_submit_custom(st, write_activate, &context, error);
}

static mitilog_status write_retire(store *st, const void *context, mitilog_error *error)
{
    const state_context *c = context;
    int changed = 0;
    mitilog_status status =
        run_update(st, "queries/devices/screen_profile_retire.sql", c, &changed, error);
    if (status == MITILOG_OK && changed == 0)
        status = mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND,
                                   "no proposed or active screen profile %s: list them "
                                   "with 'mitilog device list'",
                                   c->key);
    return status;
}

mitilog_status store_screen_profile_retire(store *st, const char *key, mitilog_error *error)
{
    if (st == NULL || key == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_screen_profile_retire: no store or key");
    state_context context = {.key = key};
    return store_submit_custom(st, write_retire, &context, error);
}

/* ---- reads ------------------------------------------------------------- */

static char *duplicate_column(sqlite3_stmt *statement, int column)
{
    const unsigned char *text = sqlite3_column_text(statement, column);
    size_t length = (size_t)sqlite3_column_bytes(statement, column);
    char *copy = malloc(length + 1);
    if (copy != NULL) {
        if (text != NULL)
            memcpy(copy, text, length);
        copy[text != NULL ? length : 0] = '\0';
    }
    return copy;
}

mitilog_status store_screen_profiles_active(store *st, char ***texts, size_t *count,
                                            mitilog_error *error)
{
    if (st == NULL || texts == NULL || count == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_screen_profiles_active: NULL argument");
    *texts = NULL;
    *count = 0;
    char **list = NULL;
    size_t used = 0, capacity = 0;
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_prepare(st->reader, "queries/devices/screen_profiles_active.sql", &statement, error);
    int rc = SQLITE_DONE;
    while (status == MITILOG_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        if (used == capacity) {
            size_t grown = capacity ? capacity * 2 : 8;
            char **bigger = realloc(list, grown * sizeof *bigger);
            if (bigger == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
                break;
            }
            list = bigger;
            capacity = grown;
        }
        list[used] = duplicate_column(statement, 0);
        if (list[used] == NULL) {
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
            break;
        }
        used++;
    }
    if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = store_sql_error(error, st->reader, "active screen profiles");
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        for (size_t i = 0; i < used; i++)
            free(list[i]);
        free(list);
        return status;
    }
    *texts = list;
    *count = used;
    return MITILOG_OK;
}

void store_screen_profile_row_free(store_screen_profile_row *row)
{
    if (row == NULL)
        return;
    free(row->text);
    free(row->report);
    free(row->example);
    memset(row, 0, sizeof *row);
}

mitilog_status store_screen_profile_get(store *st, const char *key, int version,
                                        store_screen_profile_row *row, mitilog_error *error)
{
    if (st == NULL || key == NULL || row == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_screen_profile_get: NULL argument");
    memset(row, 0, sizeof *row);
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_prepare(st->reader, "queries/devices/screen_profile_latest.sql", &statement, error);
    if (status == MITILOG_OK) {
        int rc = bind_text_or_null(statement, ":profile_key", key);
        if (rc == SQLITE_OK)
            rc = bind_int(statement, ":version", version);
        if (rc == SQLITE_OK)
            rc = sqlite3_step(statement);
        if (rc == SQLITE_ROW) {
            row->version = sqlite3_column_int(statement, 0);
            const unsigned char *state = sqlite3_column_text(statement, 1);
            snprintf(row->state, sizeof row->state, "%s", state ? (const char *)state : "");
            row->text = duplicate_column(statement, 2);
            row->report = duplicate_column(statement, 3);
            int size = sqlite3_column_bytes(statement, 4);
            const void *blob = sqlite3_column_blob(statement, 4);
            if (blob != NULL && size > 0) {
                row->example = malloc((size_t)size);
                if (row->example != NULL) {
                    memcpy(row->example, blob, (size_t)size);
                    row->example_size = (size_t)size;
                }
            }
            if (row->text == NULL || row->report == NULL ||
                (blob != NULL && size > 0 && row->example == NULL))
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
        } else if (rc == SQLITE_DONE) {
            status = mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND,
                                       "no screen profile %s%s: list them with "
                                       "'mitilog device list'",
                                       key, version ? " of that version" : "");
        } else {
            status = store_sql_error(error, st->reader, "screen profile");
        }
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK)
        store_screen_profile_row_free(row);
    return status;
}

mitilog_status store_screen_profiles_json(store *st, char **json, mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_screen_profiles_json: NULL argument");
    *json = NULL;
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_prepare(st->reader, "queries/devices/screen_profiles_json.sql", &statement, error);
    if (status == MITILOG_OK) {
        if (sqlite3_step(statement) == SQLITE_ROW)
            status = store_column_dup(statement, json, error);
        else
            status = store_sql_error(error, st->reader, "screen profiles");
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

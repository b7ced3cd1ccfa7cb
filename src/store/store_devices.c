/*
 * store_devices.c - the table of device screen profiles (migration 008,
 * store_devices.h): writes go through the group-commit queue, reads
 * through the read connection. SQL: sql/queries/devices/.
 */
#include "store/store_devices.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/store_internal.h"

static mitilog_status device_error(mitilog_error *error, const char *what, const store_query *query)
{
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", what,
                             query->status != MITILOG_OK ? query->error.text : "no row");
}

/* ---- writes ------------------------------------------------------------ */

typedef struct put_context {
    const store_screen_profile_new *profile;
    int version;
} put_context;

/* The next version of key (1 for a new key), or -1 with error set. */
static int next_version(store_link *writer, const char *key, mitilog_error *error)
{
    store_query query;
    store_query_begin(&query, writer, "queries/devices/screen_profile_next_version.sql");
    store_bind_text(&query, ":profile_key", key);
    int version = store_query_step(&query) ? (int)store_column_integer(&query, 0) : -1;
    if (version < 0)
        device_error(error, "screen profile version", &query);
    store_query_end(&query);
    return version;
}

static mitilog_status write_put(store_link *writer, void *context, mitilog_error *error)
{
    put_context *put = context;
    const store_screen_profile_new *p = put->profile;
    put->version = next_version(writer, p->key, error);
    if (put->version < 0) {
        put->version = 0;
        return MITILOG_ERROR_DATABASE;
    }
    store_query insert;
    store_query_begin(&insert, writer, "queries/devices/screen_profile_insert.sql");
    store_bind_text(&insert, ":profile_key", p->key);
    store_bind_integer(&insert, ":version", put->version);
    store_bind_text(&insert, ":manufacturer", p->manufacturer);
    store_bind_text(&insert, ":model_name", p->model_name);
    store_bind_text(&insert, ":software_versions", p->software_versions);
    store_bind_integer(&insert, ":rows", p->rows);
    store_bind_integer(&insert, ":columns", p->columns);
    store_bind_text(&insert, ":profile_text", p->text);
    store_bind_text(&insert, ":report", p->report);
    if (p->example != NULL && p->example_size > 0)
        store_bind_blob(&insert, ":example_image", p->example, p->example_size);
    else
        store_bind_null(&insert, ":example_image");
    store_query_run(&insert);
    if (store_query_end(&insert) != MITILOG_OK)
        return device_error(error, "store screen profile", &insert);
    return MITILOG_OK;
}

mitilog_status store_screen_profile_put(store *st, const store_screen_profile_new *profile,
                                        int *version, mitilog_error *error)
{
    if (st == NULL || profile == NULL || profile->key == NULL || profile->key[0] == '\0' ||
        profile->text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_screen_profile_put: no store, key or text");
    put_context context = {.profile = profile, .version = 0};
    mitilog_status status = store_commit_submit(st, write_put, &context, error);
    if (status == MITILOG_OK && version != NULL)
        *version = context.version;
    return status;
}

typedef struct state_context {
    const char *key;
    int version;
    const char *who;
} state_context;

/* Runs one UPDATE with key (and version, who) bound; *changed gets the
 * rows it changed. */
static mitilog_status run_update(store_link *writer, const char *name, const state_context *c,
                                 int *changed, mitilog_error *error)
{
    store_query query;
    store_query_begin(&query, writer, name);
    store_bind_text(&query, ":profile_key", c->key);
    if (store_query_has_parameter(&query, ":version"))
        store_bind_integer(&query, ":version", c->version);
    if (store_query_has_parameter(&query, ":confirmed_by"))
        store_bind_text(&query, ":confirmed_by", c->who);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return device_error(error, name, &query);
    if (changed != NULL)
        *changed = (int)store_link_changes(writer);
    return MITILOG_OK;
}

static mitilog_status write_activate(store_link *writer, void *context, mitilog_error *error)
{
    state_context c = *(const state_context *)context;
    if (c.version == 0) {
        mitilog_error ignored;
        int next = next_version(writer, c.key, &ignored);
        if (next >= 0)
            c.version = next - 1;
    }
    int changed = 0;
    mitilog_status status =
        run_update(writer, "queries/devices/screen_profile_retire_others.sql", &c, NULL, error);
    if (status == MITILOG_OK)
        status =
            run_update(writer, "queries/devices/screen_profile_activate.sql", &c, &changed, error);
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
    return store_commit_submit(st, write_activate, &context, error);
}

static mitilog_status write_retire(store_link *writer, void *context, mitilog_error *error)
{
    const state_context *c = context;
    int changed = 0;
    mitilog_status status =
        run_update(writer, "queries/devices/screen_profile_retire.sql", c, &changed, error);
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
    return store_commit_submit(st, write_retire, &context, error);
}

/* ---- reads ------------------------------------------------------------- */

/* A malloc'd copy of a text column ("" for NULL); NULL when out of memory. */
static char *duplicate_column(store_query *query, int column)
{
    const char *text = store_column_text(query, column);
    size_t length = text != NULL ? store_column_bytes(query, column) : 0;
    char *copy = malloc(length + 1);
    if (copy != NULL) {
        if (text != NULL)
            memcpy(copy, text, length);
        copy[length] = '\0';
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
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/devices/screen_profiles_active.sql");
    while (status == MITILOG_OK && store_query_step(&query)) {
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
        list[used] = duplicate_column(&query, 0);
        if (list[used] == NULL) {
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
            break;
        }
        used++;
    }
    if (store_query_end(&query) != MITILOG_OK && status == MITILOG_OK)
        status = device_error(error, "active screen profiles", &query);
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
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/devices/screen_profile_latest.sql");
    store_bind_text(&query, ":profile_key", key);
    store_bind_integer(&query, ":version", version);
    if (store_query_step(&query)) {
        row->version = (int)store_column_integer(&query, 0);
        const char *state = store_column_text(&query, 1);
        snprintf(row->state, sizeof row->state, "%s", state ? state : "");
        row->text = duplicate_column(&query, 2);
        row->report = duplicate_column(&query, 3);
        size_t size = store_column_bytes(&query, 4);
        const void *blob = store_column_blob(&query, 4);
        if (blob != NULL && size > 0) {
            row->example = malloc(size);
            if (row->example != NULL) {
                memcpy(row->example, blob, size);
                row->example_size = size;
            }
        }
        if (row->text == NULL || row->report == NULL ||
            (blob != NULL && size > 0 && row->example == NULL))
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    } else if (query.status == MITILOG_OK) {
        status = mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND,
                                   "no screen profile %s%s: list them with "
                                   "'mitilog device list'",
                                   key, version ? " of that version" : "");
    } else {
        status = device_error(error, "screen profile", &query);
    }
    store_query_end(&query);
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
    store_query query;
    store_query_begin(&query, &st->reader, "queries/devices/screen_profiles_json.sql");
    mitilog_status status = store_query_text(&query, "screen profiles", 0, json, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

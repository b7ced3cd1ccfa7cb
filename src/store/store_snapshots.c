/*
 * store_snapshots.c - kept documents of the period views and the
 * signature of their data (store_snapshots.h). SQL:
 * sql/queries/snapshots/.
 */
#include "store/store_snapshots.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/store_internal.h"

mitilog_status store_snapshot_signature(store *st, const char *from_day, const char *to_day,
                                        char signature[STORE_SNAPSHOT_SIGNATURE_MAX + 1],
                                        mitilog_error *error)
{
    signature[0] = '\0';
    if (st == NULL || from_day == NULL || to_day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "snapshot signature: no days");
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/snapshots/snapshot_signature.sql");
    store_bind_text_at(&query, 1, from_day);
    store_bind_text_at(&query, 2, to_day);
    if (store_query_step(&query)) {
        const char *loaded = store_column_text(&query, 3);
        const char *first = store_column_text(&query, 4);
        const char *last = store_column_text(&query, 5);
        snprintf(signature, STORE_SNAPSHOT_SIGNATURE_MAX + 1, "%lld/%lld/%lld/%s/%s/%s",
                 store_column_integer(&query, 0), store_column_integer(&query, 1),
                 store_column_integer(&query, 2), loaded != NULL ? loaded : "-",
                 first != NULL ? first : "-", last != NULL ? last : "-");
    } else if (query.status == MITILOG_OK) {
        mitilog_error_set(&query.error, MITILOG_ERROR_DATABASE, "no row");
        query.status = MITILOG_ERROR_DATABASE;
    }
    mitilog_status status = store_query_end(&query);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "snapshot signature: %s",
                                 query.error.text);
    return MITILOG_OK;
}

mitilog_status store_snapshot_get(store *st, const char *view, const char *request,
                                  const char *signature, char **body, char made_at[32],
                                  char asked_at[32], mitilog_error *error)
{
    *body = NULL;
    made_at[0] = asked_at[0] = '\0';
    if (st == NULL || view == NULL || request == NULL || signature == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "snapshot: no view or request");
    int failed = 0;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/snapshots/snapshot_get.sql");
    store_bind_text_at(&query, 1, view);
    store_bind_text_at(&query, 2, request);
    store_bind_text_at(&query, 3, signature);
    if (store_query_step(&query)) {
        *body = store_column_copy(&query, 0, &failed);
        const char *made = store_column_text(&query, 1);
        snprintf(made_at, 32, "%s", made != NULL ? made : "");
        const char *asked = store_column_text(&query, 2);
        snprintf(asked_at, 32, "%s", asked != NULL ? asked : "");
    }
    mitilog_status status = store_query_end(&query);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK || failed) {
        free(*body);
        *body = NULL;
        return status != MITILOG_OK
                   ? mitilog_error_set(error, MITILOG_ERROR_DATABASE, "snapshot: %s",
                                       query.error.text)
                   : mitilog_error_set(error, MITILOG_ERROR_MEMORY, "snapshot: out of memory");
    }
    return MITILOG_OK;
}

typedef struct store_snapshot_write {
    const char *view, *request, *signature, *body;
    double made_ms;
    int asked;
} store_snapshot_write;

static mitilog_status store_write_snapshot(store_link *writer, void *context, mitilog_error *error)
{
    const store_snapshot_write *write = context;
    store_query query;
    store_query_begin(&query, writer, "queries/snapshots/snapshot_put.sql");
    store_bind_text_at(&query, 1, write->view);
    store_bind_text_at(&query, 2, write->request);
    store_bind_text_at(&query, 3, write->signature);
    store_bind_text_at(&query, 4, write->body);
    store_bind_real_at(&query, 5, write->made_ms);
    store_bind_integer_at(&query, 6, write->asked);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "keep snapshot: %s",
                                 query.error.text);
    return MITILOG_OK;
}

mitilog_status store_snapshot_put(store *st, const char *view, const char *request,
                                  const char *signature, const char *body, double made_ms,
                                  int asked, mitilog_error *error)
{
    if (st == NULL || view == NULL || request == NULL || signature == NULL || body == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "snapshot: nothing to keep");
    store_snapshot_write write = {view, request, signature, body, made_ms, asked != 0};
    return store_commit_submit(st, store_write_snapshot, &write, error);
}

typedef struct store_snapshot_asking {
    const char *view, *request;
} store_snapshot_asking;

static mitilog_status store_write_asked(store_link *writer, void *context, mitilog_error *error)
{
    const store_snapshot_asking *asking = context;
    store_query query;
    store_query_begin(&query, writer, "queries/snapshots/snapshot_asked.sql");
    store_bind_text_at(&query, 1, asking->view);
    store_bind_text_at(&query, 2, asking->request);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "snapshot asked: %s",
                                 query.error.text);
    return MITILOG_OK;
}

mitilog_status store_snapshot_asked(store *st, const char *view, const char *request,
                                    mitilog_error *error)
{
    if (st == NULL || view == NULL || request == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "snapshot asked: no view");
    store_snapshot_asking asking = {view, request};
    return store_commit_submit(st, store_write_asked, &asking, error);
}

static mitilog_status store_write_prune(store_link *writer, void *context, mitilog_error *error)
{
    store_query query;
    store_query_begin(&query, writer, "queries/snapshots/snapshots_prune.sql");
    store_bind_text_at(&query, 1, context);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "prune snapshots: %s",
                                 query.error.text);
    return MITILOG_OK;
}

mitilog_status store_snapshots_prune(store *st, const char *before, mitilog_error *error)
{
    if (st == NULL || before == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "prune snapshots: no time");
    return store_commit_submit(st, store_write_prune, (void *)before, error);
}

mitilog_status store_snapshot_keys(store *st, const char *since, size_t limit,
                                   store_snapshot_key **keys, size_t *count, mitilog_error *error)
{
    *keys = NULL;
    *count = 0;
    if (st == NULL || since == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "snapshot keys: no time");
    store_snapshot_key *list = NULL;
    size_t used = 0, capacity = 0;
    int failed = 0;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/snapshots/snapshot_keys.sql");
    store_bind_text_at(&query, 1, since);
    store_bind_integer_at(&query, 2, (long long)limit);
    while (!failed && store_query_step(&query)) {
        if (used == capacity) {
            size_t more = capacity ? capacity * 2 : 16;
            store_snapshot_key *grown = realloc(list, more * sizeof *grown);
            if (grown == NULL) {
                failed = 1;
                break;
            }
            list = grown;
            capacity = more;
        }
        store_snapshot_key *key = &list[used++];
        memset(key, 0, sizeof *key);
        key->view = store_column_copy(&query, 0, &failed);
        key->request = store_column_copy(&query, 1, &failed);
        key->signature = store_column_copy(&query, 2, &failed);
    }
    mitilog_status status = store_query_end(&query);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK || failed) {
        store_snapshot_keys_free(list, used);
        return status != MITILOG_OK
                   ? mitilog_error_set(error, MITILOG_ERROR_DATABASE, "snapshot keys: %s",
                                       query.error.text)
                   : mitilog_error_set(error, MITILOG_ERROR_MEMORY, "snapshot keys: out of memory");
    }
    *keys = list;
    *count = used;
    return MITILOG_OK;
}

void store_snapshot_keys_free(store_snapshot_key *keys, size_t count)
{
    for (size_t i = 0; keys != NULL && i < count; i++) {
        free(keys[i].view);
        free(keys[i].request);
        free(keys[i].signature);
    }
    free(keys);
}

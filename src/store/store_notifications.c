/*
 * store_notifications.c - the outbox of findings to notify (see
 * store_notifications.h; schema in migrations/016_notifications.sql,
 * statements in queries/notifications/).
 */
#include "store/store_notifications.h"

#include <stdlib.h>
#include <string.h>

#include "store/store_internal.h"
#include "util/files.h"

void store_notifications_configure(store *st, int minimum_rank, int webhook, int syslog)
{
    st->notify.minimum_rank = minimum_rank;
    st->notify.webhook = webhook;
    st->notify.syslog = syslog;
}

int store_notifications_rank(const char *severity)
{
    if (severity == NULL)
        return 0;
    if (strcmp(severity, "violation") == 0)
        return 3;
    if (strcmp(severity, "warning") == 0)
        return 2;
    if (strcmp(severity, "advisory") == 0)
        return 1;
    return 0;
}

mitilog_status store_notifications_enqueue(store_link *writer, const store_evaluation *e,
                                           const store_notification_queueing *queueing,
                                           mitilog_error *error)
{
    if (queueing->minimum_rank <= 0 || (!queueing->webhook && !queueing->syslog))
        return MITILOG_OK;
    char now[32];
    files_utc_now(now, sizeof now);
    const char *channels[2] = {queueing->webhook ? "webhook" : NULL,
                               queueing->syslog ? "syslog" : NULL};
    for (size_t i = 0; i < 2; i++) {
        if (channels[i] == NULL)
            continue;
        store_query query;
        store_query_begin(&query, writer, "queries/notifications/outbox_enqueue.sql");
        store_bind_text(&query, ":channel", channels[i]);
        store_bind_text(&query, ":now", now);
        store_bind_text(&query, ":policy_version", e->policy_version);
        store_bind_text(&query, ":study", e->study_instance_uid);
        store_bind_text(&query, ":rule_id", e->rule_id);
        store_bind_text(&query, ":period", e->period);
        store_bind_integer(&query, ":minimum_rank", queueing->minimum_rank);
        store_query_run(&query);
        if (store_query_end(&query) != MITILOG_OK)
            return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                     "queueing findings to notify: %s", query.error.text);
    }
    return MITILOG_OK;
}

void store_notifications_free(store_notification *rows, size_t count)
{
    for (size_t i = 0; rows != NULL && i < count; i++) {
        store_notification *row = &rows[i];
        char *strings[] = {row->channel,
                           row->study_instance_uid,
                           row->accession_number,
                           row->room,
                           row->preset,
                           row->rule_id,
                           row->severity,
                           row->quantity,
                           row->unit,
                           row->started_at,
                           row->period,
                           row->created_at};
        for (size_t j = 0; j < sizeof strings / sizeof strings[0]; j++)
            free(strings[j]);
    }
    free(rows);
}

/* What one take asks and what it got (store_notifications_take_write). */
typedef struct store_notification_take {
    const char *now, *lease_until;
    size_t limit;
    store_notification *rows;
    size_t used;
    int failed; /* out of memory */
} store_notification_take;

static mitilog_status store_notifications_take_write(store_link *writer, void *context,
                                                     mitilog_error *error)
{
    store_notification_take *take = context;
    store_notifications_free(take->rows, take->used); /* a batch tried again starts over */
    take->rows = calloc(take->limit > 0 ? take->limit : 1, sizeof *take->rows);
    take->used = 0;
    take->failed = 0;
    if (take->rows == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "outbox: out of memory");
    store_query query;
    store_query_begin(&query, writer, "queries/notifications/outbox_take.sql");
    store_bind_text(&query, ":now", take->now);
    store_bind_text(&query, ":lease_until", take->lease_until);
    store_bind_integer(&query, ":limit", (long long)take->limit);
    while (store_query_step(&query)) {
        if (take->used == take->limit)
            continue; /* the LIMIT holds; read to the end all the same */
        store_notification *row = &take->rows[take->used++];
        row->id = store_column_integer(&query, 0);
        row->channel = store_column_copy(&query, 1, &take->failed);
        row->study_instance_uid = store_column_copy(&query, 2, &take->failed);
        row->accession_number = store_column_copy(&query, 3, &take->failed);
        row->room = store_column_copy(&query, 4, &take->failed);
        row->preset = store_column_copy(&query, 5, &take->failed);
        row->rule_id = store_column_copy(&query, 6, &take->failed);
        row->severity = store_column_copy(&query, 7, &take->failed);
        row->quantity = store_column_copy(&query, 8, &take->failed);
        row->has_value = !store_column_is_null(&query, 9);
        row->measured_value = row->has_value ? store_column_real(&query, 9) : 0.0;
        row->unit = store_column_copy(&query, 10, &take->failed);
        row->has_limit = !store_column_is_null(&query, 11);
        row->limit_value = row->has_limit ? store_column_real(&query, 11) : 0.0;
        row->started_at = store_column_copy(&query, 12, &take->failed);
        row->period = store_column_copy(&query, 13, &take->failed);
        row->created_at = store_column_copy(&query, 14, &take->failed);
        row->attempts = (long)store_column_integer(&query, 15);
        if (row->channel == NULL || row->rule_id == NULL || row->severity == NULL)
            take->failed = 1;
    }
    if (store_query_end(&query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "taking from the notification outbox: %s", query.error.text);
    if (take->failed)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "outbox: out of memory");
    return MITILOG_OK;
}

/* Oldest first, as they were chosen (UPDATE ... RETURNING gives no order). */
static int store_notifications_by_id(const void *a, const void *b)
{
    long long x = ((const store_notification *)a)->id, y = ((const store_notification *)b)->id;
    return (x > y) - (x < y);
}

mitilog_status store_notifications_take(store *st, const char *now, const char *lease_until,
                                        size_t limit, store_notification **out, size_t *count,
                                        mitilog_error *error)
{
    *out = NULL;
    *count = 0;
    /* A read first: an idle sender writes nothing. */
    long long due = 0;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/notifications/outbox_due_count.sql");
    store_bind_text(&query, ":now", now);
    if (store_query_step(&query))
        due = store_column_integer(&query, 0);
    mitilog_status read = store_query_end(&query);
    pthread_mutex_unlock(&st->reader_lock);
    if (read != MITILOG_OK)
        return mitilog_error_set(error, read, "reading the notification outbox: %s",
                                 query.error.text);
    if (due == 0)
        return MITILOG_OK;
    store_notification_take take = {now, lease_until, limit, NULL, 0, 0};
    mitilog_status status = store_commit_submit(st, store_notifications_take_write, &take, error);
    if (status != MITILOG_OK) {
        store_notifications_free(take.rows, take.used);
        return status;
    }
    qsort(take.rows, take.used, sizeof *take.rows, store_notifications_by_id);
    *out = take.rows;
    *count = take.used;
    return MITILOG_OK;
}

typedef struct store_notification_outcome {
    long long id;
    const char *state, *now, *next_attempt_at, *last_error;
} store_notification_outcome;

static mitilog_status store_notifications_write(store_link *writer, void *context,
                                                mitilog_error *error)
{
    const store_notification_outcome *outcome = context;
    store_query query;
    store_query_begin(&query, writer, "queries/notifications/outbox_record.sql");
    store_bind_text(&query, ":state", outcome->state);
    store_bind_text(&query, ":now", outcome->now);
    store_bind_text(&query, ":next_attempt_at", outcome->next_attempt_at);
    store_bind_text(&query, ":last_error", outcome->last_error);
    store_bind_integer(&query, ":id", outcome->id);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "recording a notification attempt: %s", query.error.text);
    return MITILOG_OK;
}

mitilog_status store_notifications_record(store *st, long long id, const char *state,
                                          const char *now, const char *next_attempt_at,
                                          const char *last_error, mitilog_error *error)
{
    store_notification_outcome outcome = {id, state, now, next_attempt_at, last_error};
    return store_commit_submit(st, store_notifications_write, &outcome, error);
}

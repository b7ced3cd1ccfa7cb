/*
 * store_notifications.c - the outbox of findings to notify (see
 * store_notifications.h; schema in migrations/016_notifications.sql,
 * statements in queries/notifications/).
 *
 * Statements are prepared for one call and finalized at its end: a
 * sender reads the outbox once a second at most, and the writer queues
 * only when an evaluation changed.
 */
#include "store/store_internal.h"
#include "store/store_notifications.h"

#include <stdlib.h>
#include <string.h>

#include "util/files.h"

void store_notifications_configure(store *st, int minimum_rank, int webhook, int syslog)
{
    st->notify_minimum_rank = minimum_rank;
    st->notify_webhook = webhook;
    st->notify_syslog = syslog;
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

static int store_bind_optional(sqlite3_stmt *statement, const char *name, const char *text)
{
    int index = sqlite3_bind_parameter_index(statement, name);
    if (index == 0)
        return SQLITE_RANGE;
    if (text == NULL)
        return sqlite3_bind_null(statement, index);
    return sqlite3_bind_text(statement, index, text, -1, SQLITE_TRANSIENT);
}

static int store_bind_number(sqlite3_stmt *statement, const char *name, sqlite3_int64 value)
{
    int index = sqlite3_bind_parameter_index(statement, name);
    return index == 0 ? SQLITE_RANGE : sqlite3_bind_int64(statement, index, value);
}

int store_notifications_enqueue(store *st, const store_evaluation *e)
{
    if (st->notify_minimum_rank <= 0 || (!st->notify_webhook && !st->notify_syslog))
        return SQLITE_OK;
    sqlite3_stmt *insert = NULL;
    mitilog_error error;
    if (store_prepare(st->writer, "queries/notifications/outbox_enqueue.sql", &insert, &error) !=
        MITILOG_OK)
        return SQLITE_ERROR;
    char now[32];
    files_utc_now(now, sizeof now);
    const char *channels[2] = {st->notify_webhook ? "webhook" : NULL,
                               st->notify_syslog ? "syslog" : NULL};
    int rc = SQLITE_OK;
    for (size_t i = 0; rc == SQLITE_OK && i < 2; i++) {
        if (channels[i] == NULL)
            continue;
        rc = store_bind_optional(insert, ":channel", channels[i]);
        if (rc == SQLITE_OK)
            rc = store_bind_optional(insert, ":now", now);
        if (rc == SQLITE_OK)
            rc = store_bind_optional(insert, ":policy_version", e->policy_version);
        if (rc == SQLITE_OK)
            rc = store_bind_optional(insert, ":study", e->study_instance_uid);
        if (rc == SQLITE_OK)
            rc = store_bind_optional(insert, ":rule_id", e->rule_id);
        if (rc == SQLITE_OK)
            rc = store_bind_optional(insert, ":period", e->period);
        if (rc == SQLITE_OK)
            rc = store_bind_number(insert, ":minimum_rank", st->notify_minimum_rank);
        if (rc == SQLITE_OK)
            rc = sqlite3_step(insert) == SQLITE_DONE ? SQLITE_OK : SQLITE_ERROR;
        sqlite3_reset(insert);
        sqlite3_clear_bindings(insert);
    }
    sqlite3_finalize(insert);
    return rc;
}

static char *store_column_copy(sqlite3_stmt *statement, int column)
{
    const unsigned char *text = sqlite3_column_text(statement, column);
    return text != NULL ? strdup((const char *)text) : NULL;
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

mitilog_status store_notifications_due(store *st, const char *now, size_t limit,
                                       store_notification **out, size_t *count,
                                       mitilog_error *error)
{
    *out = NULL;
    *count = 0;
    store_notification *rows = calloc(limit > 0 ? limit : 1, sizeof *rows);
    if (rows == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "outbox: out of memory");
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *select = NULL;
    mitilog_status status =
        store_prepare(st->reader, "queries/notifications/outbox_due.sql", &select, error);
    int rc = status == MITILOG_OK ? store_bind_optional(select, ":now", now) : SQLITE_ERROR;
    if (rc == SQLITE_OK)
        rc = store_bind_number(select, ":limit", (sqlite3_int64)limit);
    size_t used = 0;
    int memory = 0;
    while (rc == SQLITE_OK && used < limit) {
        int step = sqlite3_step(select);
        if (step == SQLITE_DONE)
            break;
        if (step != SQLITE_ROW) {
            rc = step;
            break;
        }
        store_notification *row = &rows[used++];
        row->id = sqlite3_column_int64(select, 0);
        row->channel = store_column_copy(select, 1);
        row->study_instance_uid = store_column_copy(select, 2);
        row->accession_number = store_column_copy(select, 3);
        row->room = store_column_copy(select, 4);
        row->preset = store_column_copy(select, 5);
        row->rule_id = store_column_copy(select, 6);
        row->severity = store_column_copy(select, 7);
        row->quantity = store_column_copy(select, 8);
        row->has_value = sqlite3_column_type(select, 9) != SQLITE_NULL;
        row->measured_value = sqlite3_column_double(select, 9);
        row->unit = store_column_copy(select, 10);
        row->has_limit = sqlite3_column_type(select, 11) != SQLITE_NULL;
        row->limit_value = sqlite3_column_double(select, 11);
        row->started_at = store_column_copy(select, 12);
        row->period = store_column_copy(select, 13);
        row->created_at = store_column_copy(select, 14);
        row->attempts = (long)sqlite3_column_int64(select, 15);
        if (row->channel == NULL || row->rule_id == NULL || row->severity == NULL)
            memory = 1;
    }
    if (status == MITILOG_OK && rc != SQLITE_OK)
        status = store_sql_error(error, st->reader, "reading the notification outbox");
    sqlite3_finalize(select);
    pthread_mutex_unlock(&st->reader_lock);
    if (status == MITILOG_OK && memory)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "outbox: out of memory");
    if (status != MITILOG_OK) {
        store_notifications_free(rows, used);
        return status;
    }
    *out = rows;
    *count = used;
    return MITILOG_OK;
}

typedef struct store_notification_outcome {
    long long id;
    const char *state, *now, *next_attempt_at, *last_error;
} store_notification_outcome;

static mitilog_status store_notifications_write(store *st, const void *context,
                                                mitilog_error *error)
{
    const store_notification_outcome *outcome = context;
    sqlite3_stmt *update = NULL;
    mitilog_status status =
        store_prepare(st->writer, "queries/notifications/outbox_record.sql", &update, error);
    if (status != MITILOG_OK)
        return status;
    int rc = store_bind_optional(update, ":state", outcome->state);
    if (rc == SQLITE_OK)
        rc = store_bind_optional(update, ":now", outcome->now);
    if (rc == SQLITE_OK)
        rc = store_bind_optional(update, ":next_attempt_at", outcome->next_attempt_at);
    if (rc == SQLITE_OK)
        rc = store_bind_optional(update, ":last_error", outcome->last_error);
    if (rc == SQLITE_OK)
        rc = store_bind_number(update, ":id", outcome->id);
    if (rc == SQLITE_OK && sqlite3_step(update) != SQLITE_DONE)
        rc = SQLITE_ERROR;
    if (rc != SQLITE_OK)
        status = store_sql_error(error, st->writer, "recording a notification attempt");
    sqlite3_finalize(update);
    return status;
}

mitilog_status store_notifications_record(store *st, long long id, const char *state,
                                          const char *now, const char *next_attempt_at,
                                          const char *last_error, mitilog_error *error)
{
    store_notification_outcome outcome = {id, state, now, next_attempt_at, last_error};
    return store_submit_custom(st, store_notifications_write, &outcome, error);
}

/*
 * store_notifications.h - the outbox of findings to notify (migration
 * 016): which findings are queued when an evaluation is written, the
 * pending rows a sender reads, and the outcome of each attempt.
 *
 * Ownership: store_notifications_due() gives an array of rows whose
 * strings it allocated; store_notifications_free() frees them all.
 * Thread-safe as the rest of the store: queueing happens inside the
 * evaluation's own transaction (store_findings.c), reads on the read
 * connection, outcomes through the group-commit queue.
 */
#ifndef MITILOG_STORE_NOTIFICATIONS_H
#define MITILOG_STORE_NOTIFICATIONS_H

#include <stddef.h>

#include "store/store.h"
#include "store/store_findings.h"
#include "util/status.h"

/* Which findings are queued from now on: severity at or above
 * minimum_rank (1 advisory, 2 warning, 3 violation; 0: none), for each
 * channel that is on. Call before any evaluation is written (before the
 * ingest starts its workers); not changed afterwards. */
void store_notifications_configure(store *store, int minimum_rank, int webhook, int syslog);

/* 1 advisory, 2 warning, 3 violation; 0 for anything else. */
int store_notifications_rank(const char *severity);

typedef struct store_notification {
    long long id;
    char *channel;                                               /* "webhook" or "syslog" */
    char *study_instance_uid, *accession_number, *room, *preset; /* NULL: absent */
    char *rule_id, *severity, *quantity, *unit, *started_at, *period, *created_at;
    int has_value, has_limit;
    double measured_value, limit_value;
    long attempts; /* made before this one */
} store_notification;

/* Takes pending rows whose next attempt is at or before now (ISO 8601
 * UTC), at most limit, oldest first, for this sender alone: their next
 * attempt moves to lease_until, so that another sender on the same
 * database (another receiver) does not take them, and they come back
 * due when a sender stops before recording the outcome (killed, machine
 * gone). On PostgreSQL the rows are locked as they are taken (FOR UPDATE
 * SKIP LOCKED); on SQLite the writer lock makes takes one at a time. */
mitilog_status store_notifications_take(store *store, const char *now, const char *lease_until,
                                        size_t limit, store_notification **out, size_t *count,
                                        mitilog_error *error);
void store_notifications_free(store_notification *rows, size_t count);

/* Records one attempt: state "delivered", "pending" (next attempt at
 * next_attempt_at) or "failed" (given up); last_error NULL when none. */
mitilog_status store_notifications_record(store *store, long long id, const char *state,
                                          const char *now, const char *next_attempt_at,
                                          const char *last_error, mitilog_error *error);

/* What is queued: severity rank at or above minimum_rank (0: nothing),
 * for each channel that is on. */
typedef struct store_notification_queueing {
    int minimum_rank;
    int webhook, syslog;
} store_notification_queueing;

struct store_link; /* store_statement.h */

/* Inside the transaction of an evaluation that wrote findings
 * (store_findings.c): queues them for each channel that is on. */
mitilog_status store_notifications_enqueue(struct store_link *writer,
                                           const store_evaluation *evaluation,
                                           const store_notification_queueing *queueing,
                                           mitilog_error *error);

#endif

/*
 * notify.h - tells people about findings as they are written: a JSON
 * document posted to a webhook (libcurl) and/or a syslog line, for each
 * finding of [notifications] severity or above.
 *
 * Never blocks ingest: the store queues each finding to notify in the
 * transaction that writes it (store_notifications.h, the outbox), and the
 * one sender thread this module owns delivers the queue, retrying a
 * failed delivery after retry_initial_seconds, doubled at each failure up
 * to retry_max_seconds, and giving up after max_attempts (the row is then
 * marked failed with its last error). Pending rows survive a restart.
 *
 * Never sends patient names or IDs: a study is named by its key (the
 * first 8 hex digits of SHA-256 of its UID, as the API names it), its
 * Study Instance UID (the dashboard's link needs it) and its accession
 * number; the rest is room, preset, site, rule, severity, value, limit
 * and times.
 *
 * Ownership: notify_start() gives a sender freed by notify_stop(), which
 * lets an attempt under way finish first. The store must outlive it.
 */
#ifndef MITILOG_NOTIFY_H
#define MITILOG_NOTIFY_H

#include "config/config.h"
#include "store/store.h"
#include "store/store_notifications.h"
#include "util/status.h"

typedef struct notify notify;

/* Configures the store's queueing from config (call before the ingest
 * starts) and, when a webhook or syslog is set, starts the sender; *out
 * is NULL when neither is. */
mitilog_status notify_start(const config *config, store *store, notify **out, mitilog_error *error);
void notify_stop(notify *notify);

/* The JSON document of one notification (malloc'd; the caller frees it).
 * site and dashboard_url may be NULL or "". For tests. */
char *notify_document(const store_notification *row, const char *site, const char *dashboard_url);
/* The syslog message text (without the priority and header) into out. */
void notify_syslog_text(const store_notification *row, const char *site, const char *dashboard_url,
                        char *out, size_t size);
/* Seconds to wait after the attempts-th failure (1 = the first). */
unsigned notify_backoff_seconds(unsigned initial, unsigned maximum, long attempts);

#endif

/*
 * report_refresher.h - the daemon's thread that keeps the kept documents
 * of the period views ready (report.h, report_snapshots_refresh): every
 * few seconds it makes again those asked for lately whose data has
 * changed, so that the next request is answered from a kept document.
 *
 * Ownership: report_refresher_start() gives a refresher that
 * report_refresher_stop() stops and frees (NULL is fine); the store must
 * outlive it.
 */
#ifndef MITILOG_REPORT_REFRESHER_H
#define MITILOG_REPORT_REFRESHER_H

#include "store/store.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct report_refresher report_refresher;

/* Starts the thread: a round every seconds seconds (> 0); version names
 * the build (copied). */
mitilog_status report_refresher_start(store *store, unsigned seconds, const char *version,
                                      report_refresher **out, mitilog_error *error);
/* Wakes the thread, waits for its round to end and frees it. */
void report_refresher_stop(report_refresher *refresher);

#ifdef __cplusplus
}
#endif

#endif

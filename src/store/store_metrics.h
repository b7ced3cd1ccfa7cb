/*
 * store_metrics.h - what the database tells the monitoring (GET /metrics):
 * its size and the current findings by rule and severity, read at scrape
 * time on the read connection (metrics/metrics.h writes them).
 *
 * Ownership: the caller's metrics_database is filled with malloc'ed
 * strings; free it with metrics_database_free(), also after a failure.
 */
#ifndef MITILOG_STORE_METRICS_H
#define MITILOG_STORE_METRICS_H

#include "metrics/metrics.h"
#include "store/store.h"

/* Fills database (zeroed first). On a failed query returns
 * MITILOG_ERROR_DATABASE (or MEMORY) with database->readable 0. */
mitilog_status store_metrics_read(store *store, metrics_database *database, mitilog_error *error);

#endif

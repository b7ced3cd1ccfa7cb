/*
 * store.h - the store's handle and lifecycle: opening (migrations
 * applied), closing, durability, schema version and health, and the types
 * the subjects share. The API of each subject has its own header:
 * store_instances.h (instances, rejections, header copies),
 * store_exams.h, store_findings.h (findings and policy), store_reports.h
 * (the period reads of statistics, outliers and reports),
 * store_readings.h, store_devices.h and store_reviews.h.
 *
 * Owns the database connections. One writer connection serialises all
 * writes (any thread may call store_put_*; calls block until their
 * transaction has committed, so a caller may acknowledge after return).
 * A separate read connection serves queries (WAL mode: reads never wait
 * for writes). SQL text lives in sql/ and is compiled in; only prepared
 * statements with bound parameters are used.
 *
 * Ownership: store_open() gives a store freed by store_close(). JSON
 * strings returned by the query calls are malloc'ed; the caller frees them
 * with free(); lists of texts with store_texts_free().
 */
#ifndef MITILOG_STORE_H
#define MITILOG_STORE_H

#include <stddef.h>

#include "exam/exam.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct store store;

/* Opens (creating if needed) the database at path, enables WAL, applies
 * the migrations in sql/migrations in order and records the schema version
 * in PRAGMA user_version. busy_timeout_ms bounds waits on a locked file. */
mitilog_status store_open(const char *path, int busy_timeout_ms, store **out, mitilog_error *error);
/* Opens the store on a PostgreSQL server: connection (libpq's conninfo)
 * for the writes and the schema (store_engine_postgresql.h: baseline,
 * later migrations, month partitions, under an advisory lock so that
 * receivers starting together migrate once); read_connection (a replica,
 * or NULL/"" for connection itself) for the reads, in read-only sessions.
 * When the server goes away, writes fail (the receiver answers A700) and
 * the next request connects again. busy_timeout_ms bounds lock waits. */
mitilog_status store_open_postgresql(const char *connection, const char *read_connection,
                                     int busy_timeout_ms, store **out, mitilog_error *error);
/* Finishes pending writes, checkpoints the WAL and closes. NULL is fine. */
void store_close(store *store);

/* How far a commit is durable before store_put_* returns (and so before
 * a C-STORE is answered). POWER_LOSS (the default after store_open):
 * every commit syncs the WAL. PROCESS: a commit survives the process being
 * killed but not a power loss (the WAL is synced at checkpoints). */
typedef enum store_durability {
    STORE_DURABILITY_POWER_LOSS = 0,
    STORE_DURABILITY_PROCESS
} store_durability;

mitilog_status store_set_durability(store *store, store_durability durability,
                                    mitilog_error *error);

/* The site this store's writes record on every instance and rejection
 * ([receiver] site; exam.h says what a site name is); "main" until set.
 * Call before the first write. MITILOG_ERROR_INVALID when not a site name. */
mitilog_status store_set_site(store *store, const char *site, mitilog_error *error);
/* The site set by store_set_site ("main" until set); owned by the store,
 * valid while it is open. */
const char *store_site(const store *store);

/* The sites a read is limited to: count 0 (or a NULL pointer where one is
 * taken) reads every site; a name that no row holds matches nothing.
 * Names are borrowed for the call. */
typedef struct store_sites {
    size_t count; /* at most EXAM_SITES_MAX */
    const char *names[EXAM_SITES_MAX];
} store_sites;

/* Schema version after migration (PRAGMA user_version). */
int store_schema_version(store *store);

/* JSON object: database status, schema version and counts. */
mitilog_status store_health_json(store *store, char **json, mitilog_error *error);

/* A list of texts given by a subject's list call: a malloc'ed array of
 * malloc'ed strings. NULL with count 0 is fine. */
void store_texts_free(char **texts, size_t count);

#ifdef __cplusplus
}
#endif

#endif

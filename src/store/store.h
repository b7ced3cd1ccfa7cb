/*
 * store.h - the SQLite store: schema migrations, writing exposure records,
 * and the read queries the HTTP API serves.
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
 * with free().
 */
#ifndef MITILOG_STORE_H
#define MITILOG_STORE_H

#include <stddef.h>

#include "extract/ext.h"
#include "extract/ext_exam.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct store store;

/* Opens (creating if needed) the database at path, enables WAL, applies
 * the migrations in sql/migrations in order and records the schema version
 * in PRAGMA user_version. busy_timeout_ms bounds waits on a locked file. */
mitilog_status store_open(const char *path, int busy_timeout_ms, store **out,
                          mitilog_error *error);
/* Finishes pending writes, checkpoints the WAL and closes. NULL is fine. */
void store_close(store *store);

/* Schema version after migration (PRAGMA user_version). */
int store_schema_version(store *store);

typedef enum store_put_outcome {
    STORE_PUT_INSERTED = 0,
    STORE_PUT_REPLACED        /* same SOP Instance UID was stored before */
} store_put_outcome;

/* Writes the instance row and its indices in one transaction; returns
 * after the commit. Re-sending a SOP Instance UID replaces its row.
 * MITILOG_ERROR_DATABASE when the database cannot be written (locked,
 * read-only, full): nothing of the record is kept. */
mitilog_status store_put_instance(store *store, const ext_record *record,
                                  store_put_outcome *outcome,
                                  mitilog_error *error);

/* A rejected object: the received bytes were moved to quarantine_path. */
typedef struct store_rejection {
    const char *received_at;        /* ISO 8601 UTC */
    const char *calling_ae_title;   /* "" for imports */
    const char *peer_address;       /* "" for imports */
    const char *sop_class_uid;      /* as announced, may be "" */
    const char *sop_instance_uid;   /* as announced, may be "" */
    const char *source_path;        /* imported path, or "" */
    const char *quarantine_path;    /* "" when the bytes were not kept */
    const char *reason;
} store_rejection;

mitilog_status store_put_rejection(store *store,
                                   const store_rejection *rejection,
                                   mitilog_error *error);

/* An exam to write: the record built by ext_exam_build() from the
 * instances it was built from (their strings are borrowed). */
typedef struct store_exam {
    const char *study_instance_uid;
    const ext_exam *exam;
    const ext_exam_instance *instances;
    size_t instance_count;
} store_exam;

/* Writes (replaces) the study's exam row, timeline and per-mode maxima in
 * one transaction; returns after the commit. */
mitilog_status store_put_exam(store *store, const store_exam *exam,
                              mitilog_error *error);

/* The study's instances as plain structs for ext_exam_build(), in
 * acquisition order; *instances is malloc'ed (NULL with count 0 when the
 * study has none). Free with store_study_free(). */
mitilog_status store_load_study(store *store, const char *study_instance_uid,
                                ext_exam_instance **instances, size_t *count,
                                mitilog_error *error);
void store_study_free(ext_exam_instance *instances, size_t count);

/* JSON object of one exam with its instances and timeline;
 * MITILOG_ERROR_NOT_FOUND when no instance has that Study Instance UID. */
mitilog_status store_study_json(store *store, const char *study_instance_uid,
                                char **json, mitilog_error *error);

/* Read side. Filters: NULL or "" means "no filter". */
typedef struct store_instance_filter {
    const char *study_instance_uid;
    const char *since;              /* received_at >= since (ISO 8601) */
    long limit;                     /* <= 0: default 1000 */
} store_instance_filter;

/* JSON array of instance objects (keys as documented in docs/api.md). */
mitilog_status store_instances_json(store *store,
                                    const store_instance_filter *filter,
                                    char **json, mitilog_error *error);

/* JSON array, one object per study with acquisitions between from and to
 * (dates "YYYY-MM-DD", inclusive; NULL = open). */
mitilog_status store_studies_json(store *store, const char *from,
                                  const char *to, char **json,
                                  mitilog_error *error);

/* JSON object: database status, schema version and counts. */
mitilog_status store_health_json(store *store, char **json,
                                 mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

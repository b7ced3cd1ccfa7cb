/*
 * store_instances.h - the store's instances: writing an instance row with
 * its SR values and header copy, rejected objects, reading back header
 * copies, and the instance and study lists of the HTTP API
 * (store_instances.c, sql/queries/instances/).
 *
 * Ownership: strings in the structs passed in are borrowed for the call;
 * JSON strings and header bytes returned are malloc'ed, freed by the
 * caller with free().
 */
#ifndef MITILOG_STORE_INSTANCES_H
#define MITILOG_STORE_INSTANCES_H

#include <stddef.h>

#include "extract/ext.h"
#include "store/store.h"
#include "store/store_readings.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum store_put_outcome {
    STORE_PUT_INSERTED = 0,
    STORE_PUT_REPLACED /* same SOP Instance UID was stored before */
} store_put_outcome;

/* Bytes borrowed for the duration of a call. */
typedef struct store_bytes {
    const void *data;
    size_t size;
} store_bytes;

/* Writes the instance row, its indices and, when header is not NULL, its
 * header copy (the Part 10 bytes of dcm_object_header_bytes) in one
 * transaction; returns after the commit. Re-sending a SOP Instance UID
 * replaces its row and its copy (a re-send without a header removes the
 * older copy). MITILOG_ERROR_DATABASE when the database cannot be written
 * (locked, read-only, full): nothing of the record is kept. */
mitilog_status store_put_instance(store *store, const ext_record *record, const store_bytes *header,
                                  store_put_outcome *outcome, mitilog_error *error);

/* store_put_instance() with, when reading is not NULL, its queue row and
 * state in the same transaction. *instance_id (may be NULL) gets the
 * row's id. Every (re)store of an instance drops its older queue row and
 * reading; *stale_spool (may be NULL; malloc'd, the caller deletes that
 * file and frees the string) gets the spool copy of a dropped queue row. */
mitilog_status store_put_instance_read(store *store, const ext_record *record,
                                       const store_bytes *header,
                                       const store_reading_request *reading,
                                       store_put_outcome *outcome, long long *instance_id,
                                       char **stale_spool, mitilog_error *error);

/* The header copy of an instance, malloc'd into *bytes (the caller frees
 * it); *bytes stays NULL when the instance or its copy is not stored. */
mitilog_status store_get_header(store *store, const char *sop_instance_uid, unsigned char **bytes,
                                size_t *size, mitilog_error *error);

/* A rejected object: the received bytes were moved to quarantine_path. */
typedef struct store_rejection {
    const char *received_at;      /* ISO 8601 UTC */
    const char *calling_ae_title; /* "" for imports */
    const char *peer_address;     /* "" for imports */
    const char *sop_class_uid;    /* as announced, may be "" */
    const char *sop_instance_uid; /* as announced, may be "" */
    const char *source_path;      /* imported path, or "" */
    const char *quarantine_path;  /* "" when the bytes were not kept */
    const char *reason;
} store_rejection;

mitilog_status store_put_rejection(store *store, const store_rejection *rejection,
                                   mitilog_error *error);

/* Read side. Filters: NULL or "" means "no filter". */
typedef struct store_instance_filter {
    const char *study_instance_uid;
    const char *since; /* received_at >= since (ISO 8601) */
    long limit;        /* <= 0: default 1000 */
} store_instance_filter;

/* JSON array of instance objects (keys as documented in docs/api.md). */
mitilog_status store_instances_json(store *store, const store_instance_filter *filter, char **json,
                                    mitilog_error *error);

/* JSON array, one object per study with acquisitions between from and to
 * (dates "YYYY-MM-DD", inclusive; NULL = open). */
mitilog_status store_studies_json(store *store, const char *from, const char *to, char **json,
                                  mitilog_error *error);

/* JSON object for GET /api/v1/ingest (docs/api.md): objects per hour over
 * window_hours, rejections and quarantine, devices (silent after
 * silent_hours), transducers not reporting output in the last days. */
mitilog_status store_ingest_json(store *store, int window_hours, int silent_hours, int days,
                                 char **json, mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

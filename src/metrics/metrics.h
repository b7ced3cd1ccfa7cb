/*
 * metrics.h - the daemon's counters for monitoring and their text in the
 * Prometheus text exposition format, version 0.0.4 (GET /metrics).
 *
 * Owns one metrics context: the counters, gauges and the commit latency
 * histogram that the stages report into while they work (the receiver in
 * src/dicom, ingest and its exam worker and pixel reader in src/ingest).
 * Every value is an atomic, so any thread may report at any time without
 * a lock and a scrape never waits for the pipeline. What the database
 * holds (findings, its size) is not counted here: the store reads it at
 * scrape time into a metrics_database (store_metrics.h), and
 * metrics_exposition() writes both.
 *
 * No file-scope state: `serve` creates one context and passes it to each
 * stage. Every report function accepts a NULL context and then does
 * nothing, so `import`, `rescore` and the unit tests run without one.
 *
 * Ownership: metrics_create() gives a context freed by metrics_free(),
 * after every stage that reports into it has stopped. metrics_exposition()
 * gives malloc'ed text that the caller frees. Strings in a
 * metrics_database are owned by it (metrics_database_free()).
 */
#ifndef MITILOG_METRICS_H
#define MITILOG_METRICS_H

#include <stddef.h>
#include <stdint.h>

#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct metrics metrics;

mitilog_status metrics_create(metrics **out, mitilog_error *error);
void metrics_free(metrics *metrics);

/* Why an association (or a connection before its request was whole) was
 * refused; the label value of each is in metrics.c. */
typedef enum metrics_refusal {
    METRICS_REFUSAL_CALLED_AE_TITLE = 0, /* not our AE title              */
    METRICS_REFUSAL_CALLING_AE_TITLE,    /* not in the allowlist          */
    METRICS_REFUSAL_NO_PRESENTATION_CONTEXT,
    METRICS_REFUSAL_APPLICATION_CONTEXT,   /* not the DICOM one             */
    METRICS_REFUSAL_TOO_MANY_ASSOCIATIONS, /* max_associations              */
    METRICS_REFUSAL_NEGOTIATION_LIMIT,     /* max_negotiations[_per_address],
                                              stopping: closed unread       */
    METRICS_REFUSAL_INVALID_REQUEST,       /* A-ASSOCIATE-RQ refused before
                                              DCMTK parsed it (A-ABORT)     */
    METRICS_REFUSAL_REQUEST_TIMEOUT,       /* acse_timeout_seconds passed   */
    METRICS_REFUSAL_INTERNAL_ERROR,
    METRICS_REFUSAL_COUNT
} metrics_refusal;

/* Why the indices drawn in an object's pixels were not read. */
typedef enum metrics_pixel_refusal {
    METRICS_PIXEL_QUEUE_FULL = 0,    /* [reading] queue bounds          */
    METRICS_PIXEL_NOT_KEPT,          /* no copy could be kept to read   */
    METRICS_PIXEL_NO_PROFILE,        /* no active screen profile        */
    METRICS_PIXEL_SOFTWARE_CHANGED,  /* profile learned on other software */
    METRICS_PIXEL_OBJECT_UNREADABLE, /* the kept copy does not load     */
    METRICS_PIXEL_FRAME_NOT_DECODED, /* no frame to read                */
    METRICS_PIXEL_READER_FAILED,     /* the screen reader failed        */
    METRICS_PIXEL_SCREEN_REFUSED,    /* the reader refused the frame    */
    METRICS_PIXEL_REFUSAL_COUNT
} metrics_pixel_refusal;

typedef enum metrics_queue {
    METRICS_QUEUE_EXAM_REBUILD = 0, /* studies waiting for their exam record */
    METRICS_QUEUE_PIXEL_READING,    /* objects waiting for their pixels      */
    METRICS_QUEUE_COUNT
} metrics_queue;

/* ---- Reports (any thread) ---- */
void metrics_association_accepted(metrics *metrics);
void metrics_association_refused(metrics *metrics, metrics_refusal reason);
/* A C-STORE answered with status (DIMSE status code, e.g. 0x0000). */
void metrics_object_answered(metrics *metrics, uint16_t status);
/* Data set bytes received over the network (counted as they arrive,
 * discarded objects included). */
void metrics_bytes_received(metrics *metrics, uint64_t bytes);
/* A whole object arrived at unix_seconds (wall clock). */
void metrics_object_received(metrics *metrics, double unix_seconds);
/* An instance row committed after seconds (request to commit). */
void metrics_commit_observed(metrics *metrics, double seconds);
void metrics_queue_set(metrics *metrics, metrics_queue queue, uint64_t items);
void metrics_pixel_read(metrics *metrics);
void metrics_pixel_refused(metrics *metrics, metrics_pixel_refusal reason);
/* A period view's document answered: kept (from the database, still
 * true) or made now (report.h, report_view_serve). */
void metrics_document_served(metrics *metrics, int kept);

/* ---- What the store reads at scrape time (store_metrics.h) ---- */
typedef struct metrics_finding_count {
    char *rule_id;
    char *severity;
    uint64_t count;
} metrics_finding_count;

typedef struct metrics_database {
    int readable;                    /* 0: the query failed; nothing below is set */
    int has_size;                    /* 0: the size could not be read             */
    uint64_t size_bytes;             /* the engine's measure (store_metrics.c)   */
    metrics_finding_count *findings; /* current (not superseded) findings */
    size_t finding_count;
} metrics_database;

void metrics_database_free(metrics_database *database);

/* ---- The text ---- */

/* The Content-Type of the exposition (version 0.0.4). */
#define METRICS_CONTENT_TYPE "text/plain; version=0.0.4; charset=utf-8"

/* Writes every series of metrics and database (NULL: none of the
 * database's) into *text (malloc'ed, NUL-terminated, the caller frees).
 * version names the build (mitilog_build_info). */
mitilog_status metrics_exposition(const metrics *metrics, const metrics_database *database,
                                  const char *version, const char *site, char **text,
                                  mitilog_error *error);

/* A growing text; zero-initialise it, free data when done. */
typedef struct metrics_text {
    char *data;
    size_t length, capacity;
    int failed; /* an allocation failed: the text is incomplete */
} metrics_text;
void metrics_text_append(metrics_text *out, const char *text);
/* Appends value as a label value of the text format: backslash, double
 * quote and line feed written as \\, \" and \n, the format's three
 * escapes. Exposed for the unit tests. */
void metrics_text_label_value(metrics_text *out, const char *value);

#ifdef __cplusplus
}
#endif

#endif

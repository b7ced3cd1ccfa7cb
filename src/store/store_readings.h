/*
 * store_readings.h - the durable queue of objects waiting for their pixels
 * to be read, and the readings (migration 007; the reader itself is
 * src/screen, the workers src/ingest/ingest_reading.c).
 *
 * An instance that needs reading is stored with store_put_instance_read()
 * (store_instances.h) and a store_reading_request: its queue row (or, when the queue is full,
 * its 'not_read' state) commits in the same transaction as its row, so an
 * object acknowledged but not yet read survives a crash. The result of a
 * reading is written by store_put_screen_result(), which also takes the
 * object off the queue in the same transaction.
 *
 * Ownership: strings in the structs passed in are borrowed for the call;
 * store_reading_queue_load() gives a malloc'd array freed with
 * store_reading_entries_free().
 */
#ifndef MITILOG_STORE_READINGS_H
#define MITILOG_STORE_READINGS_H

#include "exam/exam.h"
#include "store/store.h"

/* What to do about the pixels of an instance being stored. */
typedef struct store_reading_request {
    const char *path; /* the file to read; NULL with not_read_reason */
    int owned;        /* 1: a spool copy, deleted once read */
    long long bytes;
    const char *not_read_reason; /* set: not queued, state 'not_read' */
} store_reading_request;

/* Queues an instance already stored (mitilog rescore --read-pixels). */
mitilog_status store_reading_enqueue(store *store, long long instance_id,
                                     const store_reading_request *reading, mitilog_error *error);

/* One index as read from the pixels. status: "read", "not_read",
 * "not_shown", or NULL (not recorded). */
typedef struct store_screen_value {
    const char *status;
    double value;       /* when "read" */
    int decimals;       /* when "read" */
    const char *text;   /* the characters read, or NULL */
    const char *reason; /* when "not_read" */
} store_screen_value;

typedef struct store_screen_result {
    long long instance_id;
    const char *path;        /* the queue row's path this answers */
    int read;                /* 1: state 'read' (values below), 0 'not_read' */
    const char *reason;      /* whole-object reason, or NULL */
    const char *profile_key; /* NULL when no profile matched */
    int profile_version;
    int frames_read;
    store_screen_value values[EXAM_INDEX_COUNT];
} store_screen_result;

/* Writes a result and takes its queue row off, in one transaction. When
 * the queue row no longer names result->path (the object was re-sent and
 * queued again meanwhile) nothing is written and *stale is set to 1. */
mitilog_status store_put_screen_result(store *store, const store_screen_result *result, int *stale,
                                       mitilog_error *error);

typedef struct store_reading_entry {
    long long instance_id;
    char *sop_instance_uid;
    char *study_instance_uid;
    char *path; /* for the backfill: the imported path or NULL */
    int owned;
    long long bytes;
} store_reading_entry;

/* Every queued object, oldest first. */
mitilog_status store_reading_queue_load(store *store, store_reading_entry **entries, size_t *count,
                                        mitilog_error *error);
/* Ultrasound images and cines between from and to (dates, NULL open) not
 * in the queue (path: the imported file or NULL). */
mitilog_status store_reading_backfill_candidates(store *store, const char *from, const char *to,
                                                 store_reading_entry **entries, size_t *count,
                                                 mitilog_error *error);
void store_reading_entries_free(store_reading_entry *entries, size_t count);

/* A capture whose header and screen disagree beyond the screen's rounding
 * (sql/queries/readings/reading_mismatches.sql). Strings malloc'd. */
typedef struct store_mismatch {
    char *sop_instance_uid;
    char *index; /* "mi", "tis", ... */
    double header_value, screen_value;
    char *screen_text;
    int decimals;
    char *room;
    char *profile_key;
    int profile_version;
} store_mismatch;
mitilog_status store_load_mismatches(store *store, const char *study_instance_uid,
                                     store_mismatch **rows, size_t *count, mitilog_error *error);
void store_mismatches_free(store_mismatch *rows, size_t count);

/* Which value of an index the rules and the API use when both the header
 * and the screen have one: "screen" or "header" (the policy's
 * index_source, kept in the database so every reader uses the same). */
mitilog_status store_set_index_source(store *store, const char *preferred, mitilog_error *error);

#endif

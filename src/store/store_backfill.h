/*
 * store_backfill.h - the backfill's bookkeeping (migration 015): the
 * studies a PACS returned and how far each got (backfill_studies), and
 * one progress row per run of `mitilog backfill` (backfill_runs), which
 * the ingest status shows.
 *
 * Writes go through the writer's batches, reads through the read
 * connection. Strings passed in are borrowed; the one document handed
 * out (store_backfill_status_json) is malloc'd and freed by the caller.
 */
#ifndef MITILOG_STORE_BACKFILL_H
#define MITILOG_STORE_BACKFILL_H

#include "store/store.h"
#include "util/status.h"

/* A study as the PACS described it (NULL for what it did not return). */
typedef struct store_backfill_study {
    const char *source; /* AE@HOST:PORT */
    const char *study_instance_uid;
    const char *study_date;
    const char *accession_number;
    const char *study_description;
    long expected_objects; /* -1: the PACS did not say */
} store_backfill_study;

/* Records a study (once per source; a study already there keeps its
 * state and counts). */
mitilog_status store_backfill_found(store *st, const store_backfill_study *study,
                                    mitilog_error *error);

/* The state of a study ("found", "retrieving", "done", "failed"), or ""
 * when the source has no such study. state holds at least 16 bytes. */
mitilog_status store_backfill_state(store *st, const char *source, const char *study_instance_uid,
                                    char *state, mitilog_error *error);

/* A study's retrieval begins (state retrieving, attempts + 1). */
mitilog_status store_backfill_start(store *st, const char *source, const char *study_instance_uid,
                                    mitilog_error *error);

/* A study's retrieval ended: state "done" or "failed"; stored adds up
 * over attempts, failed and skipped are this attempt's. */
mitilog_status store_backfill_finish(store *st, const char *source, const char *study_instance_uid,
                                     const char *state, long stored, long failed, long skipped,
                                     const char *message, mitilog_error *error);

/* Whether an instance is stored (*known 1 or 0). */
mitilog_status store_backfill_instance_known(store *st, const char *sop_instance_uid, int *known,
                                             mitilog_error *error);

/* Instances of a study stored. */
mitilog_status store_backfill_study_instances(store *st, const char *study_instance_uid,
                                              long *count, mitilog_error *error);

/* A run's progress as the terminal shows it. */
typedef struct store_backfill_progress {
    const char *state; /* running, waiting, finished, failed, interrupted */
    const char *message;
    long studies_found, studies_done, studies_failed;
    long objects;
    double objects_per_minute; /* < 0: not known yet */
    long seconds_left;         /* < 0: not known yet */
    int finished;
} store_backfill_progress;

mitilog_status store_backfill_run_begin(store *st, const char *source, long long *run_id,
                                        mitilog_error *error);
mitilog_status store_backfill_run_update(store *st, long long run_id,
                                         const store_backfill_progress *progress,
                                         mitilog_error *error);

/* Marks the newest run still running or waiting as interrupted, with
 * message. */
mitilog_status store_backfill_run_interrupt(store *st, const char *message, mitilog_error *error);

/* One backfill per database at a time. On an engine with a lock of its
 * own (PostgreSQL's advisory lock, queries/backfill/postgresql/
 * run_lock.sql) tries it on the writer connection without waiting:
 * *held 1 when taken (until the store is closed or the process ends), 0
 * when another backfill holds it. *held -1 on an engine without one
 * (SQLite): the caller locks a file beside the database. */
mitilog_status store_backfill_lock(store *st, int *held, mitilog_error *error);

/* The newest run as a JSON object (the "backfill" member of the ingest
 * status, docs/api.md), or the text "null" when there never was one. */
mitilog_status store_backfill_status_json(store *st, char **json, mitilog_error *error);

#endif

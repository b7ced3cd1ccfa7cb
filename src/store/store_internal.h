/*
 * store_internal.h - the store handle that the files of src/store/ share;
 * not API.
 *
 * store_open.c       opens the links (store_statement.h) and migrates;
 * store_commit.c     group commit of the writes each subject submits;
 * store_<subject>.c  one file per subject (instances, exams, findings and
 *                    policy, reports, readings, devices, reviews), each
 *                    with its sql/queries/<subject>/ folder.
 *
 * Ownership: the store owns its links; store_close() frees everything.
 */
#ifndef MITILOG_STORE_INTERNAL_H
#define MITILOG_STORE_INTERNAL_H

#include <pthread.h>

#include "store/store.h"
#include "store/store_notifications.h"
#include "store/store_statement.h"

/* A write of one subject, run by the batch leader on the writer link
 * inside the batch's open transaction. It may run more than once (when
 * its batch is written again one request per transaction), so it sets
 * every output of its context afresh each time. */
typedef mitilog_status (*store_write_function)(store_link *writer, void *context,
                                               mitilog_error *error);

/* One queued write: lives on the caller's stack while the caller waits. */
typedef struct store_commit_request {
    store_write_function write;
    void *context;
    mitilog_status status;
    mitilog_error error;
    int done; /* under queue_lock */
    struct store_commit_request *next;
} store_commit_request;

/* The group-commit queue (store_commit.c). */
typedef struct store_commit_queue {
    pthread_mutex_t lock;
    pthread_cond_t changed; /* a batch finished */
    store_commit_request *head;
    store_commit_request *tail;
    int leader_active; /* a caller is writing a batch */
} store_commit_queue;

struct store {
    store_link writer; /* used by the batch leader only */
    store_commit_queue queue;

    store_link reader; /* under reader_lock */
    pthread_mutex_t reader_lock;

    int schema_version;
    char active_policy[65];       /* under reader_lock; "" = none */
    char site[EXAM_SITE_MAX + 1]; /* recorded by every write (store_set_site) */
    long long exam_job_settle_ms, exam_job_max_wait_ms; /* store_set_exam_job_timing */

    /* Findings queued for notification (store_notifications.c); set
     * before any evaluation is written, read-only afterwards. */
    store_notification_queueing notify;
};

/* Binds :site_count and :site_1 ... :site_16, those the query's
 * statement has (sites NULL: every site; store_open.c). */
void store_bind_sites(store_query *query, const store_sites *sites);

/* store_commit.c: runs write(context) in a batch on the writer, waiting
 * until its batch has committed or failed; returns its status. */
mitilog_status store_commit_submit(store *st, store_write_function write, void *context,
                                   mitilog_error *error);
void store_commit_init(store_commit_queue *queue);
void store_commit_destroy(store_commit_queue *queue);
/* Blocks until no batch is being written and the queue is empty. */
void store_commit_drain(store_commit_queue *queue);
/* Holds the queue while no batch is being written, so that the caller
 * may use the writer link; store_commit_release() lets batches go on. */
void store_commit_hold(store_commit_queue *queue);
void store_commit_release(store_commit_queue *queue);

/* For fault injection in tests only: the sqlite3 handle of an SQLite
 * writer (NULL for another engine); use it only while no store_put_* is
 * running (store_open.c). */
void *store_writer_connection(store *store);

struct store_exam;            /* store_exams.h */
struct store_reading_request; /* store_readings.h */

/* store_exams.c, for the writes of exams with findings (store_findings.c):
 * an exam with its timeline and mode maxima, and the summary rows of a
 * study refreshed from what the transaction wrote. */
mitilog_status store_exams_check(const struct store_exam *exam, mitilog_error *error);
mitilog_status store_exams_write(store_link *writer, const struct store_exam *exam,
                                 mitilog_error *error);
mitilog_status store_exams_refresh_summary(store_link *writer, const char *study_instance_uid,
                                           mitilog_error *error);
/* Makes the database's TI ladder and mode names the exam vocabulary's
 * (store_open, on the writer before any batch). */
mitilog_status store_exams_sync_vocabulary(store_link *writer, const char *path,
                                           mitilog_error *error);

/* store_exam_jobs.c: marks the study's exam for a rebuild, inside the
 * batch's transaction (the instance write calls it); settle_ms and
 * max_wait_ms as store_set_exam_job_timing sets them. */
mitilog_status store_exam_jobs_mark(store_link *writer, const char *study_instance_uid,
                                    long long now_ms, long long settle_ms, long long max_wait_ms,
                                    mitilog_error *error);

/* store_readings.c: an instance's queue row and reading state, after its
 * row, inside the batch's transaction (store_instances.c). replaced: the
 * row existed before, so its older queue row and reading are dropped
 * first. *stale_spool: as in store_put_instance_read(). */
mitilog_status store_readings_write(store_link *writer, const struct store_reading_request *reading,
                                    long long instance_id, int replaced, char **stale_spool,
                                    mitilog_error *error);

#endif

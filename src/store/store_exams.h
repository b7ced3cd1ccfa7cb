/*
 * store_exams.h - the store's exams: writing an exam record with its
 * timeline and per-mode maxima, loading a study's instances to build it,
 * the JSON of one exam, and the lists of exams an evaluation walks
 * (store_exams.c, sql/queries/exams/).
 *
 * Ownership: strings in the structs passed in are borrowed for the call;
 * what the loads give is malloc'ed and freed by the matching *_free().
 */
#ifndef MITILOG_STORE_EXAMS_H
#define MITILOG_STORE_EXAMS_H

#include <stddef.h>

#include "extract/ext_exam.h"
#include "store/store.h"

#ifdef __cplusplus
extern "C" {
#endif

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
mitilog_status store_put_exam(store *store, const store_exam *exam, mitilog_error *error);

/* The study's instances as plain structs for ext_exam_build(), in
 * acquisition order; *instances is malloc'ed (NULL with count 0 when the
 * study has none). Free with store_study_free(). */
mitilog_status store_load_study(store *store, const char *study_instance_uid,
                                ext_exam_instance **instances, size_t *count, mitilog_error *error);
void store_study_free(ext_exam_instance *instances, size_t count);

/* JSON object of one exam with its instances and timeline;
 * MITILOG_ERROR_NOT_FOUND when no instance has that Study Instance UID. */
mitilog_status store_study_json(store *store, const char *study_instance_uid, char **json,
                                mitilog_error *error);

/* Study UIDs of the exams whose first acquisition date is in
 * [from_day, to_day] (YYYY-MM-DD, NULL open); store_texts_free(). */
mitilog_status store_exams_in_period(store *store, const char *from_day, const char *to_day,
                                     char ***study_uids, size_t *count, mitilog_error *error);
/* Study UIDs of the open exams idle for at least idle_seconds at
 * now_unix_seconds (the same clock as store_load_study_context());
 * store_texts_free(). */
mitilog_status store_exams_due_closing(store *store, double now_unix_seconds, double idle_seconds,
                                       char ***study_uids, size_t *count, mitilog_error *error);

/* ---- The exam rebuild queue (exam_jobs, migration 013;
 * store_exam_jobs.c). Every instance written marks its study's exam in
 * the same transaction: due settle_ms after its latest mark, at most
 * max_wait_ms after the first (Unix milliseconds). The exam worker of
 * each receiver takes due jobs (rows locked on PostgreSQL), rebuilds
 * them and finishes them; a job marked again meanwhile stays and is
 * rebuilt again, so each burst is rebuilt once, whichever receiver takes
 * it, and a kill -9 after an acknowledgement loses no rebuild. */
enum { STORE_EXAM_JOB_SETTLE_MS = 500, STORE_EXAM_JOB_MAX_WAIT_MS = 5000 };
void store_set_exam_job_timing(store *store, long long settle_ms, long long max_wait_ms);
/* The clock of the queue: Unix milliseconds (CLOCK_REALTIME, shared by
 * receivers on several machines). */
long long store_now_ms(void);
/* Marks a study in its own commit (the closing sweep, a finished reading). */
mitilog_status store_mark_exam_job(store *store, const char *study_instance_uid, long long now_ms,
                                   mitilog_error *error);
typedef struct store_exam_job {
    char *study_instance_uid; /* malloc'ed */
    long long generation;     /* the mark taken */
} store_exam_job;
/* Takes up to limit jobs due at now_ms for owner (waiting ones, and ones
 * taken before stale_before_ms by a receiver that never finished them);
 * *jobs is malloc'ed, freed with store_exam_jobs_free(). */
mitilog_status store_take_exam_jobs(store *store, const char *owner, long long now_ms,
                                    long long stale_before_ms, size_t limit, store_exam_job **jobs,
                                    size_t *count, mitilog_error *error);
void store_exam_jobs_free(store_exam_job *jobs, size_t count);
/* done: the exam was rebuilt as of job->generation; the job is removed
 * unless marked again meanwhile, then handed back (as when done is 0). */
mitilog_status store_finish_exam_job(store *store, const char *owner, const store_exam_job *job,
                                     int done, mitilog_error *error);
/* Hands back every job owner holds (its process is gone). */
mitilog_status store_release_exam_jobs(store *store, const char *owner, mitilog_error *error);
/* The owners holding jobs (store_texts_free). */
mitilog_status store_exam_job_owners(store *store, char ***owners, size_t *count,
                                     mitilog_error *error);
/* The earliest due time of a waiting job (-1: none), the jobs queued and
 * the earliest time a job still taken was taken (-1: none). */
mitilog_status store_exam_jobs_next(store *store, long long *next_due_ms, long long *queued,
                                    long long *oldest_taken_ms, mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

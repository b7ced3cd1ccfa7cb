/*
 * store_exam_jobs.c - the exam rebuild queue (exam_jobs, migration 013;
 * store_exams.h, "The exam rebuild queue"). An instance's write marks its
 * study in the same transaction (store_exam_jobs_mark, called by
 * store_instances.c); the exam worker takes due jobs, rebuilds them and
 * finishes them through the writer's batches (store_commit_submit), so
 * that taking and marking never interleave; on PostgreSQL the take locks
 * its rows (queries/exams/postgresql/exam_jobs_take.sql).
 */
#include "store/store_exams.h"
#include "store/store_internal.h"

#include <stdlib.h>
#include <string.h>
#include <time.h>

long long store_now_ms(void)
{
    struct timespec now;
    clock_gettime(CLOCK_REALTIME, &now);
    return (long long)now.tv_sec * 1000 + now.tv_nsec / 1000000;
}

void store_set_exam_job_timing(store *st, long long settle_ms, long long max_wait_ms)
{
    if (st == NULL)
        return;
    st->exam_job_settle_ms = settle_ms;
    st->exam_job_max_wait_ms = max_wait_ms;
}

mitilog_status store_exam_jobs_mark(store_link *writer, const char *study_instance_uid,
                                    long long now_ms, long long settle_ms, long long max_wait_ms,
                                    mitilog_error *error)
{
    if (study_instance_uid == NULL || study_instance_uid[0] == '\0')
        return MITILOG_OK; /* no study, no exam */
    store_query query;
    store_query_begin(&query, writer, "queries/exams/exam_job_mark.sql");
    store_bind_text(&query, ":study_instance_uid", study_instance_uid);
    store_bind_integer(&query, ":now_ms", now_ms);
    store_bind_integer(&query, ":settle_ms", settle_ms);
    store_bind_integer(&query, ":max_wait_ms", max_wait_ms);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "study %s: not queued for its exam rebuild: %s",
                                 study_instance_uid, query.error.text);
    return MITILOG_OK;
}

typedef struct store_job_mark_context {
    const char *study_instance_uid;
    long long now_ms, settle_ms, max_wait_ms;
} store_job_mark_context;

static mitilog_status store_job_mark_write(store_link *writer, void *context, mitilog_error *error)
{
    const store_job_mark_context *mark = context;
    return store_exam_jobs_mark(writer, mark->study_instance_uid, mark->now_ms, mark->settle_ms,
                                mark->max_wait_ms, error);
}

mitilog_status store_mark_exam_job(store *st, const char *study_instance_uid, long long now_ms,
                                   mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_mark_exam_job: no store");
    store_job_mark_context context = {study_instance_uid, now_ms, st->exam_job_settle_ms,
                                      st->exam_job_max_wait_ms};
    return store_commit_submit(st, store_job_mark_write, &context, error);
}

void store_exam_jobs_free(store_exam_job *jobs, size_t count)
{
    for (size_t i = 0; jobs != NULL && i < count; i++)
        free(jobs[i].study_instance_uid);
    free(jobs);
}

typedef struct store_job_take_context {
    const char *owner;
    long long now_ms, stale_before_ms;
    size_t limit;
    store_exam_job *jobs;
    size_t count;
} store_job_take_context;

static mitilog_status store_job_take_write(store_link *writer, void *context, mitilog_error *error)
{
    store_job_take_context *take = context;
    /* A batch that failed is written again request by request: start over. */
    store_exam_jobs_free(take->jobs, take->count);
    take->count = 0;
    take->jobs = calloc(take->limit, sizeof *take->jobs);
    if (take->jobs == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam jobs: out of memory");
    store_query query;
    store_query_begin(&query, writer, "queries/exams/exam_jobs_take.sql");
    store_bind_text(&query, ":owner", take->owner);
    store_bind_integer(&query, ":now_ms", take->now_ms);
    store_bind_integer(&query, ":stale_before_ms", take->stale_before_ms);
    store_bind_integer(&query, ":limit", (long long)take->limit);
    mitilog_status status = MITILOG_OK;
    while (status == MITILOG_OK && store_query_step(&query)) {
        const char *study = store_column_text(&query, 0);
        if (study == NULL || take->count == take->limit)
            continue;
        store_exam_job *job = &take->jobs[take->count];
        job->study_instance_uid = strdup(study);
        if (job->study_instance_uid == NULL)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam jobs: out of memory");
        else
            job->generation = store_column_integer(&query, 1);
        take->count += job->study_instance_uid != NULL;
    }
    if (store_query_end(&query) != MITILOG_OK && status == MITILOG_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "take exam jobs: %s",
                                   query.error.text);
    return status;
}

mitilog_status store_take_exam_jobs(store *st, const char *owner, long long now_ms,
                                    long long stale_before_ms, size_t limit, store_exam_job **jobs,
                                    size_t *count, mitilog_error *error)
{
    *jobs = NULL;
    *count = 0;
    if (st == NULL || owner == NULL || limit == 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_take_exam_jobs: no store");
    store_job_take_context context = {owner, now_ms, stale_before_ms, limit, NULL, 0};
    mitilog_status status = store_commit_submit(st, store_job_take_write, &context, error);
    if (status == MITILOG_OK) {
        *jobs = context.jobs;
        *count = context.count;
    } else {
        store_exam_jobs_free(context.jobs, context.count); /* rolled back: none taken */
    }
    return status;
}

typedef struct store_job_finish_context {
    const char *owner;
    const store_exam_job *job; /* NULL: every job of owner */
    int done;                  /* 0: hand it back without trying to remove it */
} store_job_finish_context;

/* Runs one of the job statements with the finish context bound. */
static mitilog_status store_job_run(store_link *writer, const char *name,
                                    const store_job_finish_context *finish, mitilog_error *error)
{
    store_query query;
    store_query_begin(&query, writer, name);
    store_bind_text(&query, ":owner", finish->owner);
    if (finish->job != NULL)
        store_bind_text(&query, ":study_instance_uid", finish->job->study_instance_uid);
    if (finish->job != NULL && store_query_has_parameter(&query, ":generation"))
        store_bind_integer(&query, ":generation", finish->job->generation);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", name, query.error.text);
    return MITILOG_OK;
}

static mitilog_status store_job_finish_write(store_link *writer, void *context,
                                             mitilog_error *error)
{
    const store_job_finish_context *finish = context;
    mitilog_status status = MITILOG_OK;
    if (finish->job == NULL)
        return store_job_run(writer, "queries/exams/exam_jobs_release_owner.sql", finish, error);
    if (finish->done)
        status = store_job_run(writer, "queries/exams/exam_job_finish.sql", finish, error);
    /* Still there: marked again meanwhile (or not done), so back to the
     * queue; nothing to change when the finish removed it. */
    if (status == MITILOG_OK)
        status = store_job_run(writer, "queries/exams/exam_job_release.sql", finish, error);
    return status;
}

mitilog_status store_finish_exam_job(store *st, const char *owner, const store_exam_job *job,
                                     int done, mitilog_error *error)
{
    if (st == NULL || owner == NULL || job == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_finish_exam_job: no job");
    store_job_finish_context context = {owner, job, done};
    return store_commit_submit(st, store_job_finish_write, &context, error);
}

mitilog_status store_release_exam_jobs(store *st, const char *owner, mitilog_error *error)
{
    if (st == NULL || owner == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_release_exam_jobs: no owner");
    store_job_finish_context context = {owner, NULL, 0};
    return store_commit_submit(st, store_job_finish_write, &context, error);
}

mitilog_status store_exam_job_owners(store *st, char ***owners, size_t *count, mitilog_error *error)
{
    *owners = NULL;
    *count = 0;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_exam_job_owners: no store");
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/exams/exam_jobs_owners.sql");
    mitilog_status status = store_query_texts(&query, owners, count, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_exam_jobs_next(store *st, long long *next_due_ms, long long *queued,
                                    long long *oldest_taken_ms, mitilog_error *error)
{
    *next_due_ms = -1;
    *queued = 0;
    *oldest_taken_ms = -1;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_exam_jobs_next: no store");
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/exams/exam_jobs_next.sql");
    if (store_query_step(&query)) {
        if (!store_column_is_null(&query, 0))
            *next_due_ms = store_column_integer(&query, 0);
        *queued = store_column_integer(&query, 1);
        if (!store_column_is_null(&query, 2))
            *oldest_taken_ms = store_column_integer(&query, 2);
    }
    if (store_query_end(&query) != MITILOG_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "query the exam jobs: %s",
                                   query.error.text);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

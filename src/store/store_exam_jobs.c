/*
 * store_exam_jobs.c - the exam rebuild queue (exam_jobs, migration 013;
 * store.h, "The exam rebuild queue"). An instance's write marks its
 * study in the same transaction (store_write_exam_job_mark, called by
 * store_write.c); the exam worker takes due jobs, rebuilds them and
 * finishes them through the writer's batches (store_submit_custom), so
 * that taking and marking never interleave; on PostgreSQL the take locks
 * its rows (queries/exams/postgresql/exam_jobs_take.sql). Not a hot path
 * beyond the mark: other statements are prepared per call.
 */
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

/* A statement's named parameter bound, or SQLITE_RANGE when it has none. */
static int store_job_bind_text(sqlite3_stmt *statement, const char *name, const char *value)
{
    int index = sqlite3_bind_parameter_index(statement, name);
    return index == 0 ? SQLITE_RANGE : sqlite3_bind_text(statement, index, value, -1, SQLITE_STATIC);
}

static int store_job_bind_integer(sqlite3_stmt *statement, const char *name, long long value)
{
    int index = sqlite3_bind_parameter_index(statement, name);
    return index == 0 ? SQLITE_RANGE : sqlite3_bind_int64(statement, index, value);
}

void store_set_exam_job_timing(store *st, long long settle_ms, long long max_wait_ms)
{
    if (st == NULL)
        return;
    st->exam_job_settle_ms = settle_ms;
    st->exam_job_max_wait_ms = max_wait_ms;
}

mitilog_status store_write_exam_job_mark(store *st, const char *study_instance_uid,
                                         long long now_ms, mitilog_error *error)
{
    if (study_instance_uid == NULL || study_instance_uid[0] == '\0')
        return MITILOG_OK; /* no study, no exam */
    static const char name[] = "queries/exams/exam_job_mark.sql";
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_cached_statement(&st->writer_cache, st->writer, name, &statement, error);
    if (status != MITILOG_OK)
        return status;
    int rc = store_bind_text_named(st, statement, ":study_instance_uid", study_instance_uid);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":now_ms", now_ms);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":settle_ms", st->exam_job_settle_ms);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":max_wait_ms", st->exam_job_max_wait_ms);
    if (rc != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind: %s", name,
                                   sqlite3_errstr(rc));
    else if (sqlite3_step(statement) != SQLITE_DONE)
        status = store_sql_error(error, st->writer, "mark the exam for a rebuild");
    store_release(statement);
    return status;
}

typedef struct store_job_mark_context {
    const char *study_instance_uid;
    long long now_ms;
} store_job_mark_context;

static mitilog_status store_job_mark_write(store *st, const void *context, mitilog_error *error)
{
    const store_job_mark_context *mark = context;
    return store_write_exam_job_mark(st, mark->study_instance_uid, mark->now_ms, error);
}

mitilog_status store_mark_exam_job(store *st, const char *study_instance_uid, long long now_ms,
                                   mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_mark_exam_job: no store");
    store_job_mark_context context = {study_instance_uid, now_ms};
    return store_submit_custom(st, store_job_mark_write, &context, error);
}

typedef struct store_job_take_context {
    const char *owner;
    long long now_ms, stale_before_ms;
    size_t limit;
    store_exam_job *jobs;
    size_t count;
} store_job_take_context;

static mitilog_status store_job_take_write(store *st, const void *context, mitilog_error *error)
{
    store_job_take_context *take = (store_job_take_context *)context;
    /* A batch that failed is written again request by request: start over. */
    store_exam_jobs_free(take->jobs, take->count);
    take->jobs = NULL;
    take->count = 0;
    static const char name[] = "queries/exams/exam_jobs_take.sql";
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_prepare(st->writer, name, &statement, error);
    if (status != MITILOG_OK)
        return status;
    int rc = store_job_bind_text(statement, ":owner", take->owner);
    if (rc == SQLITE_OK)
        rc = store_job_bind_integer(statement, ":now_ms", take->now_ms);
    if (rc == SQLITE_OK)
        rc = store_job_bind_integer(statement, ":stale_before_ms", take->stale_before_ms);
    if (rc == SQLITE_OK)
        rc = store_job_bind_integer(statement, ":limit", (long long)take->limit);
    if (rc != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind: %s", name,
                                   sqlite3_errstr(rc));
    take->jobs = status == MITILOG_OK ? calloc(take->limit, sizeof *take->jobs) : NULL;
    if (status == MITILOG_OK && take->jobs == NULL)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam jobs: out of memory");
    while (status == MITILOG_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        const unsigned char *study = sqlite3_column_text(statement, 0);
        if (study == NULL || take->count == take->limit)
            continue;
        store_exam_job *job = &take->jobs[take->count];
        job->study_instance_uid = strdup((const char *)study);
        if (job->study_instance_uid == NULL) {
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam jobs: out of memory");
            break;
        }
        job->generation = sqlite3_column_int64(statement, 1);
        take->count++;
    }
    if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = store_sql_error(error, st->writer, "take exam jobs");
    sqlite3_finalize(statement);
    if (status != MITILOG_OK) {
        /* The batch rolls back: nothing was taken. */
        store_exam_jobs_free(take->jobs, take->count);
        take->jobs = NULL;
        take->count = 0;
    }
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
    mitilog_status status = store_submit_custom(st, store_job_take_write, &context, error);
    if (status == MITILOG_OK) {
        *jobs = context.jobs;
        *count = context.count;
    } else {
        store_exam_jobs_free(context.jobs, context.count);
    }
    return status;
}

void store_exam_jobs_free(store_exam_job *jobs, size_t count)
{
    for (size_t i = 0; jobs != NULL && i < count; i++)
        free(jobs[i].study_instance_uid);
    free(jobs);
}

typedef struct store_job_finish_context {
    const char *owner;
    const store_exam_job *job;
    int done; /* 0: hand it back without trying to remove it */
} store_job_finish_context;

/* Runs one of the job statements with the finish context bound. */
static mitilog_status store_job_run(store *st, const char *name,
                                    const store_job_finish_context *finish, mitilog_error *error)
{
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_prepare(st->writer, name, &statement, error);
    if (status != MITILOG_OK)
        return status;
    int rc = store_job_bind_text(statement, ":owner", finish->owner);
    if (rc == SQLITE_OK && finish->job != NULL)
        rc = store_job_bind_text(statement, ":study_instance_uid",
                                 finish->job->study_instance_uid);
    if (rc == SQLITE_OK && finish->job != NULL &&
        sqlite3_bind_parameter_index(statement, ":generation") > 0)
        rc = store_job_bind_integer(statement, ":generation", finish->job->generation);
    if (rc != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind: %s", name,
                                   sqlite3_errstr(rc));
    else if (sqlite3_step(statement) != SQLITE_DONE)
        status = store_sql_error(error, st->writer, name);
    sqlite3_finalize(statement);
    return status;
}

static mitilog_status store_job_finish_write(store *st, const void *context, mitilog_error *error)
{
    const store_job_finish_context *finish = context;
    mitilog_status status = MITILOG_OK;
    if (finish->done)
        status = store_job_run(st, "queries/exams/exam_job_finish.sql", finish, error);
    /* Still there: marked again meanwhile (or not done), so back to the
     * queue; nothing to change when the finish removed it. */
    if (status == MITILOG_OK)
        status = store_job_run(st, "queries/exams/exam_job_release.sql", finish, error);
    return status;
}

mitilog_status store_finish_exam_job(store *st, const char *owner, const store_exam_job *job,
                                     int done, mitilog_error *error)
{
    if (st == NULL || owner == NULL || job == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_finish_exam_job: no job");
    store_job_finish_context context = {owner, job, done};
    return store_submit_custom(st, store_job_finish_write, &context, error);
}

static mitilog_status store_job_release_owner_write(store *st, const void *context,
                                                    mitilog_error *error)
{
    store_job_finish_context finish = {(const char *)context, NULL, 0};
    return store_job_run(st, "queries/exams/exam_jobs_release_owner.sql", &finish, error);
}

mitilog_status store_release_exam_jobs(store *st, const char *owner, mitilog_error *error)
{
    if (st == NULL || owner == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_release_exam_jobs: no owner");
    return store_submit_custom(st, store_job_release_owner_write, owner, error);
}

mitilog_status store_exam_job_owners(store *st, char ***owners, size_t *count,
                                     mitilog_error *error)
{
    *owners = NULL;
    *count = 0;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_exam_job_owners: no store");
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_prepare(st->reader, "queries/exams/exam_jobs_owners.sql", &statement, error);
    size_t capacity = 0;
    int rc = SQLITE_DONE;
    while (status == MITILOG_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        const unsigned char *owner = sqlite3_column_text(statement, 0);
        if (owner == NULL)
            continue;
        if (*count == capacity) {
            size_t grown_capacity = capacity ? capacity * 2 : 8;
            char **grown = realloc(*owners, grown_capacity * sizeof *grown);
            if (grown == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
                break;
            }
            *owners = grown;
            capacity = grown_capacity;
        }
        (*owners)[*count] = strdup((const char *)owner);
        if ((*owners)[*count] == NULL) {
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
            break;
        }
        (*count)++;
    }
    if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = store_sql_error(error, st->reader, "list exam job owners");
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_texts_free(*owners, *count);
        *owners = NULL;
        *count = 0;
    }
    return status;
}

mitilog_status store_exam_jobs_next(store *st, long long *next_due_ms, long long *queued,
                                    mitilog_error *error)
{
    *next_due_ms = -1;
    *queued = 0;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_exam_jobs_next: no store");
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_cached_statement(&st->reader_cache, st->reader,
                                                   "queries/exams/exam_jobs_next.sql", &statement,
                                                   error);
    if (status == MITILOG_OK) {
        if (sqlite3_step(statement) != SQLITE_ROW) {
            status = store_sql_error(error, st->reader, "query the exam jobs");
        } else {
            if (sqlite3_column_type(statement, 0) != SQLITE_NULL)
                *next_due_ms = sqlite3_column_int64(statement, 0);
            *queued = sqlite3_column_int64(statement, 1);
        }
    }
    store_release(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

/*
 * ingest_exam.c - the exam worker (ingest_internal.h). Choice: the exam
 * record is rebuilt off the C-STORE path. ingest_object() commits the
 * instance together with a mark of its study in the database's exam
 * queue (exam_jobs, store.h "The exam rebuild queue"; only then is the
 * C-STORE answered), and this thread takes due jobs from that queue and
 * rebuilds them one at a time from what the store holds, so a burst of a
 * study's images costs one rebuild (marks coalesce while a job waits),
 * whichever of the receivers writing the database takes it, and a job
 * marked before a kill -9 is rebuilt after the restart. A rebuilt study
 * queues its days, and the day-level rules run once a day has settled.
 * `import` flushes before it exits and `serve` drains the queues at
 * shutdown (ingest_free).
 */
#include "ingest/ingest_internal.h"

#include <errno.h>
#include <limits.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/types.h>
#include <time.h>
#include <unistd.h>

#include "extract/ext_exam.h"
#include "ingest/ingest.h"
#include "util/log.h"
#include "store/store_exams.h"
#include "store/store_findings.h"

/* A study is rebuilt once no instance of it has arrived for
 * STORE_EXAM_JOB_SETTLE_MS, or STORE_EXAM_JOB_MAX_WAIT_MS after its first
 * waiting instance (store.h), so a study sent as a burst costs one
 * rebuild instead of one per image. A day's device-level rules
 * (output_not_reported) read every instance of the day, so a day waits
 * longer: it is evaluated once its studies have been quiet for
 * DAY_SETTLE seconds (at most DAY_MAX_WAIT). Jobs are taken a few at a
 * time; one taken by a receiver that never finished it is taken again
 * after JOB_STALE; another receiver's marks are seen within JOB_POLL. */
#define INGEST_JOB_TAKE_LIMIT 8
#define INGEST_JOB_STALE_MS (10LL * 60 * 1000)
#define INGEST_JOB_POLL_SECONDS 1.0
#define INGEST_DAY_SETTLE_SECONDS 5.0
#define INGEST_DAY_MAX_WAIT_SECONDS 60.0

/* Index of the first key of pending that is due, or -1; *wake is lowered
 * to the earliest time one becomes due. Under exams->lock. */
static long ingest_pending_due(const ingest_exams *exams, const ingest_pending *pending,
                               double settle, double max_wait, double now, double *wake)
{
    for (size_t i = 0; i < pending->count; i++) {
        double due = pending->last[i] + settle;
        double limit = pending->first[i] + max_wait;
        if (limit < due)
            due = limit;
        if (exams->flushing || exams->stopping || due <= now)
            return (long)i;
        if (due < *wake)
            *wake = due;
    }
    return -1;
}

/* Takes key i out of pending; the caller frees the returned key. */
static char *ingest_pending_take(ingest_pending *pending, size_t i)
{
    char *key = pending->keys[i];
    size_t after = pending->count - i - 1;
    memmove(pending->keys + i, pending->keys + i + 1, after * sizeof *pending->keys);
    memmove(pending->first + i, pending->first + i + 1, after * sizeof(double));
    memmove(pending->last + i, pending->last + i + 1, after * sizeof(double));
    pending->count--;
    return key;
}

/* Adds key (copied) and returns 1, or, when it is waiting already, moves
 * its latest mark to now and returns 0; -1 when out of memory. */
static int ingest_pending_mark(ingest_pending *pending, const char *key, double now)
{
    for (size_t i = pending->count; i-- > 0;) {
        if (strcmp(pending->keys[i], key) == 0) {
            pending->last[i] = now;
            return 0;
        }
    }
    if (pending->count == pending->capacity) {
        size_t grown = pending->capacity == 0 ? 16 : pending->capacity * 2;
        char **keys = realloc(pending->keys, grown * sizeof *keys);
        if (keys != NULL)
            pending->keys = keys;
        double *first = keys ? realloc(pending->first, grown * sizeof *first) : NULL;
        if (first != NULL)
            pending->first = first;
        double *last = first ? realloc(pending->last, grown * sizeof *last) : NULL;
        if (last != NULL)
            pending->last = last;
        if (last == NULL)
            return -1;
        pending->capacity = grown;
    }
    char *copy = strdup(key);
    if (copy == NULL)
        return -1;
    pending->first[pending->count] = now;
    pending->last[pending->count] = now;
    pending->keys[pending->count++] = copy;
    return 1;
}

static void ingest_pending_free(ingest_pending *pending)
{
    for (size_t i = 0; i < pending->count; i++)
        free(pending->keys[i]);
    free(pending->keys);
    free(pending->first);
    free(pending->last);
    memset(pending, 0, sizeof *pending);
}

static void ingest_exams_wait_until(ingest_exams *exams, double when)
{
    struct timespec until;
    until.tv_sec = (time_t)when;
    until.tv_nsec = (long)((when - (double)until.tv_sec) * 1e9);
    pthread_cond_timedwait(&exams->changed, &exams->lock, &until);
}

mitilog_status ingest_exam_rebuild(store *store, const ext_site_rules *rules,
                                   const char *study_instance_uid, mitilog_error *error)
{
    ext_exam_instance *instances = NULL;
    size_t count = 0;
    mitilog_status status = store_load_study(store, study_instance_uid, &instances, &count, error);
    if (status != MITILOG_OK || count == 0) {
        store_study_free(instances, count);
        return status;
    }
    ext_exam exam;
    status = ext_exam_build(rules, instances, count, &exam, error);
    if (status == MITILOG_OK) {
        store_exam input = {study_instance_uid, &exam, instances, count};
        status = store_put_exam(store, &input, error);
        ext_exam_free(&exam);
    }
    store_study_free(instances, count);
    return status;
}

ingest_policy_handle *ingest_exams_hold_policy(ingest_exams *exams)
{
    pthread_mutex_lock(&exams->policy_lock);
    ingest_policy_handle *handle = exams->policy;
    if (handle != NULL)
        handle->holders++;
    pthread_mutex_unlock(&exams->policy_lock);
    return handle;
}

static void ingest_policy_handle_drop(ingest_policy_handle *handle)
{
    rules_policy_free(handle->policy);
    free(handle);
}

void ingest_exams_release_policy(ingest_exams *exams, ingest_policy_handle *handle)
{
    if (handle == NULL)
        return;
    pthread_mutex_lock(&exams->policy_lock);
    int last = --handle->holders == 0;
    pthread_mutex_unlock(&exams->policy_lock);
    if (last)
        ingest_policy_handle_drop(handle);
}

void ingest_exams_swap_policy(ingest_exams *exams, rules_policy *policy)
{
    ingest_policy_handle *handle = NULL;
    if (policy != NULL) {
        handle = calloc(1, sizeof *handle);
        if (handle == NULL) {
            log_error("policy: out of memory, the previous policy stays");
            rules_policy_free(policy);
            return;
        }
        handle->policy = policy;
        handle->holders = 1; /* the exams' own reference */
    }
    pthread_mutex_lock(&exams->policy_lock);
    ingest_policy_handle *old = exams->policy;
    exams->policy = handle;
    pthread_mutex_unlock(&exams->policy_lock);
    ingest_exams_release_policy(exams, old);
    pthread_mutex_lock(&exams->lock);
    exams->next_sweep = 0; /* sweep soon under the new closing time */
    pthread_cond_broadcast(&exams->changed);
    pthread_mutex_unlock(&exams->lock);
}

/* Seconds between sweeps: a minute, or a quarter of a short closing time
 * (at least a second), so tests with closed_after_idle_minutes = 0.05 see
 * exams close within seconds. */
static double ingest_sweep_interval(const rules_policy *policy)
{
    double idle = rules_policy_closed_after_idle_minutes(policy) * 60.0 / 4.0;
    return idle < 1.0 ? 1.0 : idle > 60.0 ? 60.0 : idle;
}

/* Queues the open exams that have been idle long enough (under lock). */
static void ingest_exams_sweep(ingest_exams *exams, const rules_policy *policy)
{
    char **due = NULL;
    size_t count = 0;
    mitilog_error error;
    if (store_exams_due_closing(exams->store, ingest_clock_now(),
                                rules_policy_closed_after_idle_minutes(policy) * 60.0, &due, &count,
                                &error) != MITILOG_OK) {
        log_warning("closing sweep: %s", error.text);
        return;
    }
    if (count > 0)
        log_debug("closing sweep: %zu exam(s) became closed", count);
    for (size_t i = 0; i < count; i++)
        ingest_exams_mark(exams, due[i]);
    store_texts_free(due, count);
}

/* Rebuilds and evaluates one study, then queues its days; MITILOG_OK
 * when rebuilt. */
static mitilog_status ingest_exams_do_study(ingest_exams *exams, const char *study)
{
    mitilog_error error;
    ingest_policy_handle *handle = ingest_exams_hold_policy(exams);
    const rules_policy *policy = handle != NULL ? handle->policy : NULL;
    store_evaluation_counts counts = {0};
    mitilog_status status = ingest_evaluate_study(exams->store, exams->rules, policy, study,
                                                  ingest_clock_now(), &counts, &error);
    char **days = NULL;
    size_t day_count = 0;
    if (status == MITILOG_OK && policy != NULL)
        status = store_study_days(exams->store, study, &days, &day_count, &error);
    ingest_exams_release_policy(exams, handle);
    if (status != MITILOG_OK)
        log_error("study %s: exam record not rebuilt or not evaluated: %s", study, error.text);
    else
        log_debug("study %s: exam record rebuilt by %s; %lu finding(s) written, %lu superseded",
                  study, exams->owner, counts.written, counts.superseded);
    pthread_mutex_lock(&exams->lock);
    double now = ingest_clock_now();
    for (size_t i = 0; i < day_count; i++)
        if (ingest_pending_mark(&exams->days, days[i], now) < 0)
            log_error("day %s: out of memory, output_not_reported not evaluated", days[i]);
    if (status == MITILOG_OK)
        exams->rebuilt++;
    else
        exams->failed++;
    pthread_mutex_unlock(&exams->lock);
    store_texts_free(days, day_count);
    return status;
}

/* Evaluates the day-level rules of one day under the current policy. */
static void ingest_exams_do_day(ingest_exams *exams, const char *day)
{
    ingest_policy_handle *handle = ingest_exams_hold_policy(exams);
    if (handle == NULL)
        return;
    mitilog_error error;
    store_evaluation_counts counts = {0};
    if (ingest_evaluate_day(exams->store, handle->policy, day, &counts, &error) != MITILOG_OK)
        log_error("day %s: output_not_reported not evaluated: %s", day, error.text);
    ingest_exams_release_policy(exams, handle);
}

/* Takes the due jobs (every waiting one when draining) and rebuilds them;
 * the number taken. Called without the lock. */
static size_t ingest_exams_do_jobs(ingest_exams *exams, int draining)
{
    long long now_ms = store_now_ms();
    store_exam_job *jobs = NULL;
    size_t count = 0;
    mitilog_error error;
    /* A look first, on the read connection: a take is a write, and an
     * idle receiver writes nothing. */
    long long next_due_ms = -1, queued = 0, oldest_taken_ms = -1;
    if (store_exam_jobs_next(exams->store, &next_due_ms, &queued, &oldest_taken_ms, &error) ==
        MITILOG_OK) {
        int stale = oldest_taken_ms >= 0 && oldest_taken_ms < now_ms - INGEST_JOB_STALE_MS;
        int due = next_due_ms >= 0 && (draining || next_due_ms <= now_ms);
        if (!stale && !due)
            return 0;
    }
    if (store_take_exam_jobs(exams->store, exams->owner, draining ? LLONG_MAX : now_ms,
                             now_ms - INGEST_JOB_STALE_MS, INGEST_JOB_TAKE_LIMIT, &jobs, &count,
                             &error) != MITILOG_OK) {
        log_error("exam queue: jobs not taken, tried again shortly: %s", error.text);
        return 0;
    }
    for (size_t i = 0; i < count; i++) {
        pthread_mutex_lock(&exams->lock);
        exams->busy = 1;
        pthread_mutex_unlock(&exams->lock);
        /* A rebuild that failed is logged and dropped, as the exam's next
         * instance marks it again; only a job marked again meanwhile
         * stays queued. */
        ingest_exams_do_study(exams, jobs[i].study_instance_uid);
        if (store_finish_exam_job(exams->store, exams->owner, &jobs[i], 1, &error) != MITILOG_OK)
            log_error("study %s: exam job not finished, taken again after %lld s: %s",
                      jobs[i].study_instance_uid, INGEST_JOB_STALE_MS / 1000, error.text);
        pthread_mutex_lock(&exams->lock);
        exams->busy = 0;
        pthread_cond_broadcast(&exams->changed);
        pthread_mutex_unlock(&exams->lock);
    }
    store_exam_jobs_free(jobs, count);
    return count;
}

static void *ingest_exams_run(void *argument)
{
    ingest_exams *exams = argument;
    pthread_mutex_lock(&exams->lock);
    for (;;) {
        int draining = exams->flushing || exams->stopping;
        /* The closing sweep, when a policy is loaded and it is time. */
        ingest_policy_handle *handle = draining ? NULL : ingest_exams_hold_policy(exams);
        if (handle != NULL) {
            double now = ingest_clock_now();
            if (now >= exams->next_sweep) {
                exams->next_sweep = now + ingest_sweep_interval(handle->policy);
                pthread_mutex_unlock(&exams->lock);
                ingest_exams_sweep(exams, handle->policy);
                ingest_exams_release_policy(exams, handle);
                pthread_mutex_lock(&exams->lock);
                continue;
            }
            ingest_exams_release_policy(exams, handle);
        }
        pthread_mutex_unlock(&exams->lock);
        size_t taken = ingest_exams_do_jobs(exams, draining);
        pthread_mutex_lock(&exams->lock);
        if (taken > 0)
            continue;
        /* Days go after every due study: a study's rebuild may queue its
         * days again. */
        double now = ingest_clock_now();
        double wake = now + INGEST_JOB_POLL_SECONDS;
        long day = ingest_pending_due(exams, &exams->days, INGEST_DAY_SETTLE_SECONDS,
                                      INGEST_DAY_MAX_WAIT_SECONDS, now, &wake);
        if (day >= 0) {
            char *key = ingest_pending_take(&exams->days, (size_t)day);
            exams->busy = 1;
            pthread_mutex_unlock(&exams->lock);
            ingest_exams_do_day(exams, key);
            free(key);
            pthread_mutex_lock(&exams->lock);
            exams->busy = 0;
            pthread_cond_broadcast(&exams->changed);
            continue;
        }
        if (draining) {
            /* Nothing left to take: a flush that began before this pass
             * is over. */
            exams->empty_passes++;
            pthread_cond_broadcast(&exams->changed);
            if (exams->stopping)
                break;
        }
        /* Until the next job is due (this receiver's marks wake it
         * sooner: ingest_exams_wake), a day settles, the next sweep, or
         * the poll for other receivers' marks. */
        pthread_mutex_unlock(&exams->lock);
        long long next_due_ms = -1, queued = 0, oldest_taken_ms = -1;
        mitilog_error error;
        if (store_exam_jobs_next(exams->store, &next_due_ms, &queued, &oldest_taken_ms, &error) !=
            MITILOG_OK)
            log_warning("exam queue: not read: %s", error.text);
        else
            metrics_queue_set(exams->metrics, METRICS_QUEUE_EXAM_REBUILD, (size_t)queued);
        pthread_mutex_lock(&exams->lock);
        if (next_due_ms >= 0 && (double)next_due_ms / 1000.0 < wake)
            wake = (double)next_due_ms / 1000.0;
        /* The policy is swapped under policy_lock (taken after lock, as
         * ingest_exams_hold_policy does). */
        pthread_mutex_lock(&exams->policy_lock);
        int has_policy = exams->policy != NULL;
        pthread_mutex_unlock(&exams->policy_lock);
        if (has_policy && exams->next_sweep < wake)
            wake = exams->next_sweep;
        if (exams->flushing || exams->stopping || exams->woken)
            wake = now; /* asked for meanwhile: go round again */
        exams->woken = 0;
        if (wake > now) {
            exams->wake_at = wake;
            ingest_exams_wait_until(exams, wake);
            exams->wake_at = 0;
        }
    }
    pthread_mutex_unlock(&exams->lock);
    return NULL;
}

/* Hands back the jobs of earlier processes on this host that ended while
 * holding them (a kill -9 during a rebuild), so they are taken again at
 * once rather than after INGEST_JOB_STALE_MS. */
static void ingest_exams_release_dead(ingest_exams *exams, const char *host_part)
{
    char **owners = NULL;
    size_t count = 0;
    mitilog_error error;
    if (store_exam_job_owners(exams->store, &owners, &count, &error) != MITILOG_OK) {
        log_warning("exam queue: owners not read: %s", error.text);
        return;
    }
    size_t length = strlen(host_part);
    for (size_t i = 0; i < count; i++) {
        const char *at = strstr(owners[i], host_part);
        if (at == NULL || at[length] != ' ' || strncmp(at + length, " pid ", 5) != 0)
            continue;
        char *end = NULL;
        long pid = strtol(at + length + 5, &end, 10);
        if (end == at + length + 5 || *end != '\0' || pid <= 0)
            continue;
        if (pid != (long)getpid() && kill((pid_t)pid, 0) != 0 && errno == ESRCH) {
            if (store_release_exam_jobs(exams->store, owners[i], &error) != MITILOG_OK)
                log_warning("exam queue: jobs of %s not handed back: %s", owners[i], error.text);
            else
                log_info("exam queue: jobs left taken by %s (ended) handed back", owners[i]);
        }
    }
    store_texts_free(owners, count);
}

mitilog_status ingest_exams_start(ingest_exams *exams, store *store, const ext_site_rules *rules,
                                  const char *site, metrics *metrics, mitilog_error *error)
{
    memset(exams, 0, sizeof *exams);
    exams->store = store;
    exams->metrics = metrics;
    exams->rules = rules;
    /* Who takes jobs: the site, this host and this process. */
    char host[128] = "";
    if (gethostname(host, sizeof host - 1) != 0 || host[0] == '\0')
        snprintf(host, sizeof host, "localhost");
    host[sizeof host - 1] = '\0';
    char host_part[256];
    snprintf(host_part, sizeof host_part, "@%s", host);
    snprintf(exams->owner, sizeof exams->owner, "%s%s pid %ld", site != NULL ? site : "", host_part,
             (long)getpid());
    ingest_exams_release_dead(exams, host_part);
    pthread_mutex_init(&exams->lock, NULL);
    pthread_mutex_init(&exams->policy_lock, NULL);
    pthread_cond_init(&exams->changed, NULL);
    if (pthread_create(&exams->thread, NULL, ingest_exams_run, exams) != 0) {
        pthread_cond_destroy(&exams->changed);
        pthread_mutex_destroy(&exams->lock);
        pthread_mutex_destroy(&exams->policy_lock);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "cannot start the exam worker");
    }
    exams->started = 1;
    return MITILOG_OK;
}

void ingest_exams_wake(ingest_exams *exams)
{
    if (!exams->started)
        return;
    pthread_mutex_lock(&exams->lock);
    /* A new job is due a settling time from now: only a worker asleep
     * beyond that needs waking (waking it for every image cost a context
     * switch per object). */
    double due = ingest_clock_now() + (double)STORE_EXAM_JOB_SETTLE_MS / 1000.0;
    if (exams->wake_at > due) {
        exams->woken = 1;
        pthread_cond_broadcast(&exams->changed);
    }
    pthread_mutex_unlock(&exams->lock);
}

void ingest_exams_mark(ingest_exams *exams, const char *study_instance_uid)
{
    if (!exams->started || study_instance_uid == NULL || study_instance_uid[0] == '\0')
        return;
    mitilog_error error;
    if (store_mark_exam_job(exams->store, study_instance_uid, store_now_ms(), &error) !=
        MITILOG_OK) {
        log_error("study %s: exam not queued for a rebuild: %s", study_instance_uid, error.text);
        return;
    }
    ingest_exams_wake(exams);
}

void ingest_exams_flush(ingest_exams *exams)
{
    if (!exams->started)
        return;
    pthread_mutex_lock(&exams->lock);
    exams->flushing++;
    /* Two empty passes from now: the first may have begun before this. */
    unsigned long until = exams->empty_passes + 2;
    pthread_cond_broadcast(&exams->changed);
    while (exams->empty_passes < until || exams->busy)
        pthread_cond_wait(&exams->changed, &exams->lock);
    exams->flushing--;
    pthread_mutex_unlock(&exams->lock);
}

void ingest_exams_stop(ingest_exams *exams)
{
    if (!exams->started)
        return;
    ingest_exams_flush(exams);
    pthread_mutex_lock(&exams->lock);
    exams->stopping = 1;
    pthread_cond_broadcast(&exams->changed);
    pthread_mutex_unlock(&exams->lock);
    pthread_join(exams->thread, NULL);
    ingest_pending_free(&exams->days);
    ingest_exams_release_policy(exams, exams->policy);
    exams->policy = NULL;
    pthread_cond_destroy(&exams->changed);
    pthread_mutex_destroy(&exams->lock);
    pthread_mutex_destroy(&exams->policy_lock);
    exams->started = 0;
}

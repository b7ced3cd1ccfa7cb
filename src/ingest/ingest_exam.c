/*
 * ingest_exam.c - the exam worker (ingest_internal.h). Choice: the exam
 * record is rebuilt off the C-STORE path. ingest_object() commits the
 * instance (and only then is the C-STORE answered), then marks its study
 * dirty; this thread rebuilds dirty studies one at a time from what the
 * store holds, so a burst of a study's images costs few rebuilds (marks
 * coalesce while a study waits). `import` flushes before it exits and
 * `serve` drains the queue at shutdown (ingest_free).
 */
#include "ingest/ingest_internal.h"

#include <stdlib.h>
#include <string.h>

#include "extract/ext_exam.h"
#include "util/log.h"

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

static void *ingest_exams_run(void *argument)
{
    ingest_exams *exams = argument;
    pthread_mutex_lock(&exams->lock);
    for (;;) {
        while (exams->dirty_count == 0 && !exams->stopping)
            pthread_cond_wait(&exams->changed, &exams->lock);
        if (exams->dirty_count == 0)
            break; /* stopping, nothing left */
        char *study = exams->dirty[0];
        memmove(exams->dirty, exams->dirty + 1, (exams->dirty_count - 1) * sizeof *exams->dirty);
        exams->dirty_count--;
        exams->busy = 1;
        pthread_mutex_unlock(&exams->lock);

        mitilog_error error;
        mitilog_status status = ingest_exam_rebuild(exams->store, exams->rules, study, &error);
        if (status != MITILOG_OK)
            log_error("study %s: exam record not rebuilt: %s", study, error.text);
        else
            log_debug("study %s: exam record rebuilt", study);
        free(study);

        pthread_mutex_lock(&exams->lock);
        exams->busy = 0;
        if (status == MITILOG_OK)
            exams->rebuilt++;
        else
            exams->failed++;
        pthread_cond_broadcast(&exams->changed);
    }
    pthread_mutex_unlock(&exams->lock);
    return NULL;
}

mitilog_status ingest_exams_start(ingest_exams *exams, store *store, const ext_site_rules *rules,
                                  mitilog_error *error)
{
    memset(exams, 0, sizeof *exams);
    exams->store = store;
    exams->rules = rules;
    pthread_mutex_init(&exams->lock, NULL);
    pthread_cond_init(&exams->changed, NULL);
    if (pthread_create(&exams->thread, NULL, ingest_exams_run, exams) != 0) {
        pthread_cond_destroy(&exams->changed);
        pthread_mutex_destroy(&exams->lock);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "cannot start the exam worker");
    }
    exams->started = 1;
    return MITILOG_OK;
}

void ingest_exams_mark(ingest_exams *exams, const char *study_instance_uid)
{
    if (!exams->started || study_instance_uid == NULL || study_instance_uid[0] == '\0')
        return;
    pthread_mutex_lock(&exams->lock);
    for (size_t i = 0; i < exams->dirty_count; i++) {
        if (strcmp(exams->dirty[i], study_instance_uid) == 0) {
            pthread_mutex_unlock(&exams->lock);
            return;
        }
    }
    if (exams->dirty_count == exams->dirty_capacity) {
        size_t grown = exams->dirty_capacity == 0 ? 16 : exams->dirty_capacity * 2;
        char **array = realloc(exams->dirty, grown * sizeof *array);
        if (array == NULL) {
            pthread_mutex_unlock(&exams->lock);
            log_error("study %s: out of memory, exam record not rebuilt", study_instance_uid);
            return;
        }
        exams->dirty = array;
        exams->dirty_capacity = grown;
    }
    char *copy = strdup(study_instance_uid);
    if (copy == NULL) {
        pthread_mutex_unlock(&exams->lock);
        log_error("study %s: out of memory, exam record not rebuilt", study_instance_uid);
        return;
    }
    exams->dirty[exams->dirty_count++] = copy;
    pthread_cond_broadcast(&exams->changed);
    pthread_mutex_unlock(&exams->lock);
}

void ingest_exams_flush(ingest_exams *exams)
{
    if (!exams->started)
        return;
    pthread_mutex_lock(&exams->lock);
    while (exams->dirty_count > 0 || exams->busy)
        pthread_cond_wait(&exams->changed, &exams->lock);
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
    for (size_t i = 0; i < exams->dirty_count; i++)
        free(exams->dirty[i]);
    free(exams->dirty);
    pthread_cond_destroy(&exams->changed);
    pthread_mutex_destroy(&exams->lock);
    exams->started = 0;
}

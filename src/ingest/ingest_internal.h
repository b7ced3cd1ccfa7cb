/*
 * ingest_internal.h - what the files of src/ingest/ share; not API.
 *
 * ingest.c       one object through read, extract, retain, commit;
 * ingest_exam.c  the exam worker: studies marked in the database's exam
 *                queue with their instance's commit are taken and rebuilt
 *                (store_load_study -> ext_exam_build -> store_put_exam)
 *                on one background thread, so a C-STORE is answered as
 *                soon as its instance (and its mark) has committed;
 * ingest_site.c  the site rules, and logging unknown SR schemes once.
 */
#ifndef MITILOG_INGEST_INTERNAL_H
#define MITILOG_INGEST_INTERNAL_H

#include <pthread.h>

#include "extract/ext_site.h"
#include "metrics/metrics.h"
#include "rules/rules.h"
#include "store/store.h"
#include "store/store_exams.h"

/* A policy shared by the worker and whoever swaps it (SIGHUP): freed when
 * the last holder releases it (ingest_rules_handle_release). */
typedef struct ingest_policy_handle {
    rules_policy *policy;
    unsigned holders; /* under ingest_exams.policy_lock     */
} ingest_policy_handle;

/* Keys waiting for work, each with the times of its first and latest
 * mark (ingest_clock_now()); no duplicates. Under ingest_exams.lock. */
typedef struct ingest_pending {
    char **keys;
    double *first;
    double *last;
    size_t count, capacity;
} ingest_pending;

typedef struct ingest_exams {
    store *store;
    const ext_site_rules *rules;
    pthread_mutex_t lock;
    pthread_cond_t changed;
    ingest_pending days;        /* days whose device rules are evaluated */
    int flushing;               /* rebuild everything now, no settling */
    int busy;                   /* the worker is rebuilding one */
    int woken;                  /* a job was marked while the worker waited */
    double wake_at;             /* when the waiting worker wakes; 0: not waiting */
    unsigned long empty_passes; /* passes that found nothing to do while draining */
    char owner[512];            /* "SITE@HOST pid N": who takes exam jobs */
    int stopping;
    int started;
    pthread_t thread;
    unsigned long rebuilt, failed;
    pthread_mutex_t policy_lock;
    ingest_policy_handle *policy; /* current; NULL: exams not evaluated */
    double next_sweep;            /* ingest_clock_now() of the next sweep */
    metrics *metrics;             /* set at start; NULL: nothing reported */
} ingest_exams;

/* The current policy, held until ingest_exams_release_policy (NULL: none). */
ingest_policy_handle *ingest_exams_hold_policy(ingest_exams *exams);
void ingest_exams_release_policy(ingest_exams *exams, ingest_policy_handle *handle);
/* Makes policy (taken over) current; the old one is freed once released. */
void ingest_exams_swap_policy(ingest_exams *exams, rules_policy *policy);

/* metrics: borrowed, NULL: nothing reported. */
mitilog_status ingest_exams_start(ingest_exams *exams, store *store, const ext_site_rules *rules,
                                  const char *site, metrics *metrics, mitilog_error *error);
/* Queues a study in the database's exam queue (its own commit); a study
 * already waiting is not queued twice. Once rebuilt, its days are queued
 * in turn, so the day-level rules run once per settled day, not once per
 * study. */
void ingest_exams_mark(ingest_exams *exams, const char *study_instance_uid);
/* Tells the worker that an instance's commit marked a study. */
void ingest_exams_wake(ingest_exams *exams);
/* Waits until every queued study has been rebuilt (every job of the
 * queue this receiver can take). */
void ingest_exams_flush(ingest_exams *exams);
/* Flushes, stops and joins the worker. */
void ingest_exams_stop(ingest_exams *exams);

/* Rebuilds one study's exam now (also used by tests). */
mitilog_status ingest_exam_rebuild(store *store, const ext_site_rules *rules,
                                   const char *study_instance_uid, mitilog_error *error);

typedef struct ingest_schemes {
    pthread_mutex_t lock;
    char **seen;
    size_t count;
} ingest_schemes;

/* Logs "SR coding scheme X is not in [sr_codes]" the first time only. */
void ingest_schemes_note(ingest_schemes *schemes, const char *scheme, const char *sop_instance_uid);
void ingest_schemes_free(ingest_schemes *schemes);

#endif

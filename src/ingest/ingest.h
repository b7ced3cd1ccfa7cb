/*
 * ingest.h - one object through the pipeline: read (dicom shim), extract
 * (ext), keep a copy per the retention setting, commit (store), and decide
 * the DIMSE status. Used by `serve` (network objects received into memory
 * files) and by `import` (files and folders).
 *
 * Owns the data folder layout: quarantine/ (objects that could not be
 * parsed), objects/ (full copies, retention full) and reading/ (objects
 * waiting for their pixels to be read); header copies live in the
 * database. Each file is named from a SHA-256, never from header text. The store is
 * borrowed (it must outlive the ingest). ingest_create() gives an ingest
 * freed by ingest_free(). Thread-safe: network threads call it at once.
 */
#ifndef MITILOG_INGEST_H
#define MITILOG_INGEST_H

#include <stdint.h>

#include "config/config.h"
#include "dicom/dcm.h"
#include "extract/ext.h"
#include "metrics/metrics.h"
#include "rules/rules.h"
#include "store/store.h"
#include "store/store_findings.h"
#include "util/status.h"

typedef struct ingest ingest;

typedef enum ingest_outcome {
    INGEST_OUTCOME_STORED = 0,
    INGEST_OUTCOME_REPLACED,   /* same SOP Instance UID stored before     */
    INGEST_OUTCOME_REJECTED,   /* cannot be understood: quarantined       */
    INGEST_OUTCOME_MISMATCHED, /* object is not what its C-STORE command
                                  announced (class or instance UID):
                                  quarantined, answered A900             */
    INGEST_OUTCOME_NOT_STORED  /* database or disk failure: retry later   */
} ingest_outcome;

typedef struct ingest_source {
    const char *path;
    int is_spool;                        /* 1: the receiver's memory file       */
    const char *calling_ae_title;        /* "" for imports                      */
    const char *peer_address;            /* "" for imports                      */
    const char *announced_sop_class_uid; /* C-STORE command, or ""    */
    const char *announced_sop_instance_uid;
    unsigned long association_id; /* 0 for imports                       */
    /* Names the object in log lines when it came neither by association
     * nor by import (e.g. "STOW-RS part 2 from 10.1.2.3"); NULL: by the
     * association or the path. */
    const char *description;
} ingest_source;

/* Creates the data folders (mode 0750) from the configuration. metrics
 * (borrowed; it must outlive the ingest; NULL: nothing reported) receives
 * from the start what the workers do, also before the first object
 * arrives (a queue left by an earlier run): commit latency, pixel reading
 * outcomes and queue depths. `serve` passes its own; the commands pass
 * NULL. */
mitilog_status ingest_create(const config *config, store *store, metrics *metrics, ingest **out,
                             mitilog_error *error);
void ingest_free(ingest *ingest);

/* Runs one object through the pipeline. reason receives the cause of a
 * rejection or failure (it is also logged). */
ingest_outcome ingest_object(ingest *ingest, const ingest_source *source, mitilog_error *reason);

/* What the object said it is, for a sender's receipt (DICOMweb STOW-RS
 * answers with the UIDs of each part): both "" when the object could not
 * be read that far. */
typedef struct ingest_receipt {
    char sop_class_uid[65];
    char sop_instance_uid[65];
} ingest_receipt;

/* ingest_object() that also fills receipt (may be NULL). */
ingest_outcome ingest_object_receipt(ingest *ingest, const ingest_source *source,
                                     ingest_receipt *receipt, mitilog_error *reason);

/* Waits until the exam records of every study touched so far have been
 * rebuilt (the exam worker, ingest_exam.c). ingest_free() also drains. */
void ingest_flush(ingest *ingest);

/* Queues a study's exam record for a rebuild, as a commit of one of its
 * instances does (the backfill, for a study whose objects were all
 * stored by an earlier, interrupted run). */
void ingest_mark_study(ingest *ingest, const char *study_instance_uid);

/* The site rules the ingest was created with (borrowed). */
const struct ext_site_rules *ingest_site_rules(const ingest *ingest);

/* Reads one loaded object into facts and a fully enriched record (the
 * same path ingest_object() takes; `mitilog inspect` uses it). The caller
 * frees both (dcm_facts_free, ext_record_free), also after a failure.
 * requests: the private tags of the rules' preset sources, index-aligned
 * with rules->presets (NULL creators for non-private entries). */
mitilog_status ingest_read_record(dcm_object *object, const struct ext_site_rules *rules,
                                  const dcm_private_request *requests, const char *calling_ae_title,
                                  const char *received_at, dcm_facts *facts, ext_record *record,
                                  mitilog_error *error);

/* ---- The ALARA policy (ingest_rules.c). ingest_create() loads
 * [rules] policy (none when the path is ""); every rebuilt exam is then
 * evaluated and its findings written (store_put_evaluation), and once a
 * sweep interval (a minute, shorter for a short closing time) open exams
 * that have been idle for closed_after_idle_minutes are re-evaluated so
 * their findings lose the provisional flag. */

/* Makes policy (taken over; NULL allowed) current for exams evaluated
 * from now on and registers it in the store. The previous policy is freed
 * when the worker no longer uses it. On error the policy is freed and the
 * old one stays. */
mitilog_status ingest_set_policy(ingest *ingest, rules_policy *policy, mitilog_error *error);

/* The clock of open/closed decisions: Unix seconds. */
double ingest_clock_now(void);

/* Registers a policy in the store (policies row, rules as JSON) and makes
 * it the store's active one. */
mitilog_status ingest_register_policy(store *store, const rules_policy *policy,
                                      mitilog_error *error);

/* Rebuilds a study's exam record and, with a policy, evaluates it at now
 * (the day-level rules are evaluated apart: ingest_evaluate_day). counts
 * may be NULL. The exam worker and `mitilog rescore` use it. */
mitilog_status ingest_evaluate_study(store *store, const struct ext_site_rules *rules,
                                     const rules_policy *policy, const char *study_instance_uid,
                                     double now, store_evaluation_counts *counts,
                                     mitilog_error *error);
/* output_not_reported over the ultrasound instances of one day. */
mitilog_status ingest_evaluate_day(store *store, const rules_policy *policy, const char *day,
                                   store_evaluation_counts *counts, mitilog_error *error);

/* Backfill (mitilog rescore --read-pixels): queues for reading every
 * stored ultrasound image and cine acquired between from and to (dates,
 * NULL open) whose object is still at hand (retention full keeps it under
 * objects/; an imported file where it was imported from) and whose device
 * has an active profile, and waits until they are read. Counts (may be
 * NULL) are added to. */
typedef struct ingest_backfill_counts {
    unsigned long queued, not_kept, no_profile, queue_full;
} ingest_backfill_counts;
mitilog_status ingest_read_stored(ingest *ingest, const char *from, const char *to,
                                  ingest_backfill_counts *counts, mitilog_error *error);

/* dcm_store_handler for the receiver: context is the ingest. */
uint16_t ingest_store_handler(void *context, const dcm_received *object);

#endif

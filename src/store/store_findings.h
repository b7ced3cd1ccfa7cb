/*
 * store_findings.h - ALARA policy and findings in the store: registering a
 * policy, writing one evaluation (of an exam or of a device-level rule
 * over a period), what an evaluation reads (a study's context and days,
 * the instances of a day), and the JSON of GET /api/v1/findings and
 * /api/v1/policy (store_findings.c, sql/queries/findings/).
 *
 * The store knows no rules: callers (src/ingest, src/cli) pass a policy
 * and its findings as the exam vocabulary's types (exam/exam.h); every
 * string is borrowed for the call. What the loads give is malloc'ed and
 * freed by the matching *_free().
 */
#ifndef MITILOG_STORE_FINDINGS_H
#define MITILOG_STORE_FINDINGS_H

#include <stddef.h>

#include "exam/exam.h"
#include "store/store.h"
#include "store/store_exams.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct store_policy {
    const char *version; /* SHA-256 hex of the normalised text */
    const char *name;
    const char *normalised_text;
    double closed_after_idle_minutes, gap_cap_seconds;
    const exam_rule_info *rules;
    size_t rule_count;
    const exam_limits *limits; /* per group and age group, for the */
    size_t limit_count;        /* dashboard (/api/v1/policy) */
} store_policy;

/* Writes (or refreshes) the policy row with its rules described as JSON
 * (written by json/json.h) and makes it this store's active
 * policy: the one GET /api/v1/policy serves and study details use. */
mitilog_status store_register_policy(store *store, const store_policy *policy,
                                     mitilog_error *error);
/* Copies the active version ("" when none) into out. */
void store_active_policy_version(store *store, char out[65]);

/* One evaluation: of an exam (study_instance_uid set) or of a
 * device-level rule over a period (study_instance_uid NULL, rule_id and
 * period set). Written in ONE transaction: policy row ensured, this
 * version's findings of the exam (or rule and period) deleted, other
 * versions' marked superseded, the new findings inserted, and for an
 * exam its exam_context and exam_measurements rows upserted. An
 * evaluation whose content hash equals the stored one (and that leaves
 * nothing to supersede) writes nothing: re-evaluating is idempotent. */
typedef struct store_evaluation {
    /* The exam record this evaluation was made from, written first in
     * the same transaction (one commit per rebuilt exam instead of two);
     * NULL: only the evaluation. */
    const store_exam *exam;
    const char *policy_version, *policy_name, *normalised_text;
    const char *study_instance_uid;
    const char *rule_id, *period; /* device-level */
    /* exam context */
    const char *exam_type, *room, *preset, *shift, *transducer, *age_group;
    const char *last_received_at;
    int closed;
    const exam_finding *findings;
    size_t finding_count;
    const exam_measurements *measurements; /* of an exam; NULL: device-level */
} store_evaluation;

typedef struct store_evaluation_counts {
    unsigned long evaluations, unchanged, written, superseded;
} store_evaluation_counts;

/* counts (may be NULL) is added to. */
mitilog_status store_put_evaluation(store *store, const store_evaluation *evaluation,
                                    store_evaluation_counts *counts, mitilog_error *error);

/* A study's context for an evaluation (malloc'ed strings, NULL when
 * absent; store_study_context_free). found = 0: no instance. */
typedef struct store_study_context {
    int found;
    char *room, *preset, *shift, *transducer, *age_group, *last_received_at;
    double idle_seconds; /* now - last receipt */
} store_study_context;
mitilog_status store_load_study_context(store *store, const char *study_instance_uid,
                                        double now_unix_seconds, store_study_context *context,
                                        mitilog_error *error);
void store_study_context_free(store_study_context *context);

/* The days (YYYY-MM-DD) of a study's instances, for the device-level
 * rules of those days; store_texts_free(). */
mitilog_status store_study_days(store *store, const char *study_instance_uid, char ***days,
                                size_t *count, mitilog_error *error);
/* The days with ultrasound instances in [from_day, to_day] (NULL open);
 * store_texts_free(). */
mitilog_status store_days_in_period(store *store, const char *from_day, const char *to_day,
                                    char ***days, size_t *count, mitilog_error *error);

/* Ultrasound instances of one day for rule output_not_reported; free
 * with store_day_instances_free(). */
mitilog_status store_load_day_instances(store *store, const char *day,
                                        exam_device_instance **instances, size_t *count,
                                        mitilog_error *error);
void store_day_instances_free(exam_device_instance *instances, size_t count);

/* GET /api/v1/findings. Filters: NULL or "" = none. */
typedef struct store_finding_filter {
    const char *from, *to; /* dates YYYY-MM-DD */
    const char *severity, *rule, *room, *preset, *shift;
    int include_superseded;
    long limit; /* <= 0: default 1000 */
} store_finding_filter;
mitilog_status store_findings_json(store *store, const store_finding_filter *filter, char **json,
                                   mitilog_error *error);
/* GET /api/v1/policy: the active policy; MITILOG_ERROR_NOT_FOUND if none. */
mitilog_status store_policy_json(store *store, char **json, mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

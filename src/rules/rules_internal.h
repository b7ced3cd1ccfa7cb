/*
 * rules_internal.h - what the files of src/rules/ share: the parsed policy
 * and the finding builder. Not part of the contract (see rules.h).
 */
#ifndef MITILOG_RULES_INTERNAL_H
#define MITILOG_RULES_INTERNAL_H

#include <stddef.h>

#include "extract/ext_timeline.h"
#include "rules/rules.h"

typedef enum rules_kind {
    RULES_KIND_TI_CEILING = 0,
    RULES_KIND_MI_CEILING,
    RULES_KIND_EQUIPMENT_MAXIMA,
    RULES_KIND_DWELL,
    RULES_KIND_FIRST_TRIMESTER_DOPPLER,
    RULES_KIND_OUTPUT_NOT_REPORTED,
    RULES_KIND_THERMAL_DOSE,
    RULES_KIND_EXAM_DURATION,
    RULES_KIND_COUNT
} rules_kind;

const char *rules_kind_name(rules_kind kind);

/* Who a limit or an applies/except entry selects. */
typedef enum rules_selector_kind {
    RULES_SELECT_ALL = 0,
    RULES_SELECT_CATEGORY,
    RULES_SELECT_GROUP,
    RULES_SELECT_AGE
} rules_selector_kind;

typedef struct rules_selector {
    rules_selector_kind kind;
    char *category; /* RULES_SELECT_CATEGORY */
    int value;      /* exam_group or rules_age */
} rules_selector;

/* One "base[.selector.name] = number|off" key. */
typedef struct rules_limit {
    char *base; /* "limit", "mi_limit", ... */
    rules_selector selector;
    int off;
    double value;
} rules_limit;

enum { RULES_MAX_SELECTORS = 16 };

typedef struct rules_rule {
    char *id;
    rules_kind kind;
    exam_severity severity;
    int has_severity;
    exam_severity severity_over_limit; /* first_trimester_doppler */
    int has_severity_over_limit;
    int enabled;
    char *source;
    int line; /* of the [rule ...] header, for messages */

    rules_selector applies[RULES_MAX_SELECTORS];
    size_t applies_count; /* 0: all exams */
    rules_selector excepts[RULES_MAX_SELECTORS];
    size_t except_count;

    rules_limit *limits;
    size_t limit_count;
    exam_dwell_step steps[EXAM_MAX_DWELL_STEPS];
    size_t step_count;          /* sorted by threshold */
    double before_weeks;        /* first_trimester_doppler, default 14 */
    unsigned minimum_instances; /* output_not_reported, default 1 */

    char **seen_keys; /* for "set twice" errors */
    size_t seen_count;

    exam_setting *settings; /* normalised, for iteration */
    size_t setting_count;
} rules_rule;

struct rules_policy {
    rules_rule *rules; /* sorted by kind, then id */
    size_t rule_count;
    char *name;
    double closed_after_idle_minutes;
    double gap_cap_seconds;
    int index_source_header; /* [policy] index_source = header */
    char *normalised;
    char version[HASH_HEX_SIZE];
};

/* rules_policy.c: builds settings, the normalised text and the version
 * once parsing is complete. */
mitilog_status rules_policy_finish(rules_policy *policy, mitilog_error *error);
/* Formats a number the way the normalised text does ("2.0", "0.25"). */
void rules_format_number(double value, char *out, size_t size);

/* rules_select.c */
int rules_rule_applies(const rules_rule *rule, const rules_exam *exam);
/* The most specific limit named base for the exam: category, then group,
 * then age, then the plain key. Returns 1 and sets *value when a number
 * applies, 0 when none is set or the applicable one is "off". */
int rules_rule_limit(const rules_rule *rule, const char *base, const rules_exam *exam,
                     double *value);

/* rules_findings.c: appending findings to a result. */
typedef struct rules_finding_input {
    const rules_rule *rule;
    exam_severity severity;
    const char *quantity;
    double measured;
    const char *unit;
    double limit;
    int has_limit;
    double threshold;
    exam_index index;
    int has_index;
    const char **instance_uids;
    size_t instance_count;
    double first_seconds;
    double last_seconds;
    int has_span;
    double estimated_seconds;
    const char *assumptions;
    int provisional;
    const char *study_instance_uid;
    const char *room;
    const char *transducer;
} rules_finding_input;

mitilog_status rules_result_append(rules_result *result, const rules_finding_input *input,
                                   const char *policy_version, mitilog_error *error);

/* rules_exposure.c: the per-exam rules, on a prepared exam view. */
typedef struct rules_view {
    const rules_exam *exam;
    exam_index governing;
    const exam_capture *captures; /* the exam's, exam->capture_count */
    ext_timeline_entry *entries;  /* timeline, summary.entry_count */
    ext_timeline_summary summary;
    const char *assumptions; /* the timeline's, for findings */
    const char *policy_version;
} rules_view;

mitilog_status rules_check_ceiling(const rules_rule *rule, const rules_view *view,
                                   rules_result *result, mitilog_error *error);
mitilog_status rules_check_equipment(const rules_rule *rule, const rules_view *view,
                                     rules_result *result, mitilog_error *error);
mitilog_status rules_check_dwell(const rules_rule *rule, const rules_view *view,
                                 rules_result *result, mitilog_error *error);
mitilog_status rules_check_first_trimester(const rules_rule *rule, const rules_view *view,
                                           rules_result *result, mitilog_error *error);
mitilog_status rules_check_thermal_dose(const rules_rule *rule, const rules_view *view,
                                        rules_result *result, mitilog_error *error);
mitilog_status rules_check_duration(const rules_rule *rule, const rules_view *view,
                                    rules_result *result, mitilog_error *error);

/* rules_captures.c: the captures of an exam that match. */
typedef enum rules_compare { RULES_AT_OR_ABOVE, RULES_ABOVE } rules_compare;

typedef struct rules_match {
    const char **uids; /* heap array of borrowed UIDs; free(uids) */
    size_t count;
    double first_seconds, last_seconds;
    int has_span;
    double estimated_seconds; /* their attributed timeline time */
    double max_value;         /* over the matching captures */
    exam_index max_index;
} rules_match;

/* Captures whose index (EXAM_INDEX_COUNT: the highest reported TI of any
 * kind) compares with threshold, and which have any of mode_mask (0: any
 * mode). Returns 0, or -1 when out of memory. */
int rules_match_captures(const rules_view *view, exam_index index, rules_compare compare,
                         double threshold, unsigned mode_mask, rules_match *match);
/* Highest reported value of an index (EXAM_INDEX_COUNT: any TI) over all
 * captures; 0 if none reports it. */
int rules_highest(const rules_view *view, exam_index index, double *value, exam_index *which);

/* Appends a finding for an exam from a match (rules_captures.c). */
mitilog_status rules_emit(const rules_rule *rule, const rules_view *view, exam_severity severity,
                          const char *quantity, double measured, const char *unit,
                          const double *limit, double threshold, exam_index index,
                          const rules_match *match, const char *note, rules_result *result,
                          mitilog_error *error);

/* CEM43 over the timeline on the governing index (untimed and unreported
 * captures contribute nothing). */
double rules_timeline_cem43(const rules_view *view);

#endif

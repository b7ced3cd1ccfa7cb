/*
 * stats_outliers.h - the weekly outlier list: per exam type a baseline of
 * governing index values from the trailing ISO weeks, each exam of the
 * chosen week flagged by robust z or the baseline P95, the week's exams
 * grouped by a dimension and ranked. docs/domain.md section 5
 * ("Outliers").
 *
 * Pure computation on caller-owned arrays of exam_row (exam/exam.h). A result holds
 * indices into the caller's week array and borrows its strings: the input
 * must outlive the result. stats_week_result_free() frees what
 * stats_week_outliers() allocated; it accepts a zeroed or partly filled
 * result.
 */
#ifndef MITILOG_STATS_OUTLIERS_H
#define MITILOG_STATS_OUTLIERS_H

#include <stddef.h>

#include "stats/stats_exam.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- Weekly outliers ---- */

typedef struct stats_week_settings {
    size_t baseline_weeks;   /* trailing ISO weeks; default 12 */
    size_t minimum_baseline; /* fewer exams of a type: "thin"; default 20 */
    double z_limit;          /* robust z; default 3 */
} stats_week_settings;

/* The defaults above. */
stats_week_settings stats_week_default_settings(void);

typedef struct stats_baseline {
    const char *exam_type;   /* borrowed; NULL: unclassified exams */
    size_t count;            /* values the baseline holds */
    size_t trailing_count;   /* of which from the trailing weeks */
    int thin;                /* trailing_count < minimum: week added */
    double median, mad, p95; /* when count > 0 */
} stats_baseline;

typedef struct stats_exam_flag {
    int has_value; /* the exam has a governing index value */
    int is_outlier, above_robust_z, above_p95;
    double robust_z; /* NAN when the baseline MAD is 0 */
    size_t baseline; /* index into stats_week_result.baselines */
    /* What the exam was compared with: its exam type's baseline without
     * the exams of its own group (without_group set) when that leaves
     * minimum_baseline values, else the type's whole baseline. */
    int without_group;
    size_t compared_count;
    double compared_median, compared_p95;
} stats_exam_flag;

typedef struct stats_rule_tally {
    const char *rule_id; /* borrowed */
    size_t count;
} stats_rule_tally;

typedef struct stats_group {
    const char *key;     /* borrowed; NULL: not recorded */
    size_t exam_count;   /* exams in the group */
    size_t valued_count; /* ... with a governing index value */
    size_t outlier_count;
    double outlier_rate; /* outlier_count / valued_count, 0 if none */
    int has_median;
    double median_governing;             /* median of the group's exams */
    double department_median;            /* median of all the week's exams of the
                                   exam types the group has */
    double median_mi;                    /* NAN when no MI */
    size_t capture_count, indexed_count; /* data completeness */
    size_t finding_count;
    int worst_severity;      /* most severe finding of its exams, an
                                   EXAM_SEVERITY_RANK_ (exam.h) */
    stats_rule_tally *rules; /* findings by rule, by rule id */
    size_t rule_count;
    size_t *members; /* indices of the group's week exams:
                                   outliers and exams with findings first
                                   (highest robust z first), then others */
    size_t member_count;
} stats_group;

typedef struct stats_week_result {
    stats_exam_flag *flags; /* one per week exam, input order */
    size_t flag_count;
    stats_baseline *baselines; /* one per exam type of the week */
    size_t baseline_count;
    stats_group *groups; /* ranked: most severe finding (violation,
                                   warning, advisory above its limit), then
                                   outlier count, rate, key */
    size_t group_count;
    int any_thin;
} stats_week_result;

/* week: the chosen week's exams; baseline: the exams of the trailing
 * weeks (the caller selects them; stats_week_days gives the days) with
 * the group's column when by is not the exam type. Each exam is compared
 * with the baseline of its exam type built without its own group's exams,
 * so that a group's own habit (a shift's long Doppler, a hot preset) is
 * not absorbed into the baseline it is judged by; when that leaves fewer
 * than minimum_baseline values, with the type's whole baseline. Per exam type: the baseline's governing index values; when they
 * are fewer than settings->minimum_baseline the week's own values are
 * added ("baseline thin"). An exam is an outlier when its governing index
 * has robust z > z_limit or exceeds the baseline P95 (stats_outlier_test).
 * Then grouped by the dimension. MITILOG_ERROR_MEMORY on allocation. */
mitilog_status stats_week_outliers(const exam_row *week, size_t week_count,
                                   const exam_row *baseline, size_t baseline_count,
                                   const stats_week_settings *settings, stats_dimension by,
                                   stats_week_result *result, mitilog_error *error);
void stats_week_result_free(stats_week_result *result);

/* First and last day numbers of the week and of its trailing baseline. */
void stats_week_days(long monday, size_t baseline_weeks, long *baseline_first, long *week_last);

#ifdef __cplusplus
}
#endif

#endif

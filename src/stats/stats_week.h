/*
 * stats_week.h - ISO 8601 weeks, the weekly outlier list, statistics per
 * exam type (or room, preset, shift, transducer) for a period, and preset
 * drift. Domain reference section 5 ("Statistics by exam type",
 * "Outliers", "Shifts").
 *
 * Pure computation on caller-owned arrays of stats_exam (one per exam, as
 * the store loads them; src/report/ converts). Results hold indices into
 * the caller's array and borrow its strings: the input must outlive the
 * result. Every result is freed with its own *_free(), which accepts a
 * zeroed or partly filled result.
 */
#ifndef MITILOG_STATS_WEEK_H
#define MITILOG_STATS_WEEK_H

#include <stddef.h>

#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- ISO 8601 weeks (Monday start; week 1 holds the year's first
 * Thursday). Dates are local calendar dates "YYYY-MM-DD". ---- */

/* Days since 1970-01-01 of a valid proleptic Gregorian date; -1 with
 * MITILOG_ERROR_INVALID for anything else (format, month, day of month). */
mitilog_status stats_day_number(const char *date, long *days);
/* The date of a day number, "YYYY-MM-DD" (out holds 11 bytes). */
void stats_day_text(long days, char out[11]);
/* ISO year and week of a day number. */
void stats_iso_week_of_day(long days, int *iso_year, int *iso_week);
/* 52 or 53. */
int stats_iso_weeks_in_year(int iso_year);
/* Day number of the Monday of an ISO week; MITILOG_ERROR_INVALID when the
 * week does not exist (e.g. 2025-W53). */
mitilog_status stats_iso_week_monday(int iso_year, int iso_week, long *monday);
/* Parses "YYYY-Www" (e.g. "2026-W48"); checks the week exists. */
mitilog_status stats_iso_week_parse(const char *text, int *iso_year, int *iso_week);
/* "YYYY-Www" (out holds 9 bytes). */
void stats_iso_week_text(int iso_year, int iso_week, char out[9]);

/* ---- Input ---- */

enum { STATS_THRESHOLD_COUNT = 4 };
/* Governing TI thresholds for "estimated time at or above" (the rows of
 * the default dwell tables, docs/policy.md). */
extern const double stats_thresholds[STATS_THRESHOLD_COUNT];

typedef struct stats_rule_count {
    const char *rule_id;
    size_t count;
} stats_rule_count;

/* One exam. Strings are borrowed; NULL means "not recorded". */
typedef struct stats_exam {
    const char *study_instance_uid;
    const char *day;             /* local date of the first capture */
    const char *exam_type;
    const char *room, *preset, *shift, *transducer;
    double max_governing;        /* highest governing TI, when has_governing */
    int has_governing;
    double max_mi;
    int has_mi;
    double estimated_seconds;    /* timeline estimate */
    double seconds_at_or_above[STATS_THRESHOLD_COUNT];
    size_t capture_count;        /* captures that could carry indices */
    size_t indexed_count;        /* ... of which carried at least one */
    size_t finding_count;        /* findings of the current policy */
    const stats_rule_count *rules;   /* findings by rule */
    size_t rule_count;
} stats_exam;

typedef enum stats_dimension {
    STATS_BY_EXAM_TYPE = 0,
    STATS_BY_ROOM,
    STATS_BY_PRESET,
    STATS_BY_SHIFT,
    STATS_BY_TRANSDUCER
} stats_dimension;

/* "exam_type", "room", "preset", "shift", "transducer". */
const char *stats_dimension_name(stats_dimension dimension);
/* 0 and *dimension set, or -1 for an unknown name. */
int stats_dimension_parse(const char *name, stats_dimension *dimension);
/* The exam's value for a dimension (may be NULL). */
const char *stats_exam_key(const stats_exam *exam, stats_dimension dimension);

/* ---- Weekly outliers ---- */

typedef struct stats_week_settings {
    size_t baseline_weeks;      /* trailing ISO weeks; default 12 */
    size_t minimum_baseline;    /* fewer exams of a type: "thin"; default 20 */
    double z_limit;             /* robust z; default 3 */
} stats_week_settings;

/* The defaults above. */
stats_week_settings stats_week_default_settings(void);

typedef struct stats_baseline {
    const char *exam_type;      /* borrowed; NULL: unclassified exams */
    size_t count;               /* values the baseline holds */
    size_t trailing_count;      /* of which from the trailing weeks */
    int thin;                   /* trailing_count < minimum: week added */
    double median, mad, p95;    /* when count > 0 */
} stats_baseline;

typedef struct stats_exam_flag {
    int has_value;              /* the exam has a governing index value */
    int is_outlier, above_robust_z, above_p95;
    double robust_z;            /* NAN when the baseline MAD is 0 */
    size_t baseline;            /* index into stats_week_result.baselines */
} stats_exam_flag;

typedef struct stats_rule_tally {
    const char *rule_id;        /* borrowed */
    size_t count;
} stats_rule_tally;

typedef struct stats_group {
    const char *key;            /* borrowed; NULL: not recorded */
    size_t exam_count;          /* exams in the group */
    size_t valued_count;        /* ... with a governing index value */
    size_t outlier_count;
    double outlier_rate;        /* outlier_count / valued_count, 0 if none */
    int has_median;
    double median_governing;    /* median of the group's exams */
    double department_median;   /* median of all the week's exams of the
                                   exam types the group has */
    double median_mi;           /* NAN when no MI */
    size_t capture_count, indexed_count;   /* data completeness */
    size_t finding_count;
    stats_rule_tally *rules;    /* findings by rule, by rule id */
    size_t rule_count;
    size_t *members;            /* indices of the group's week exams:
                                   outliers and exams with findings first
                                   (highest robust z first), then others */
    size_t member_count;
} stats_group;

typedef struct stats_week_result {
    stats_exam_flag *flags;     /* one per week exam, input order */
    size_t flag_count;
    stats_baseline *baselines;  /* one per exam type of the week */
    size_t baseline_count;
    stats_group *groups;        /* ranked: outlier count, then rate, key */
    size_t group_count;
    int any_thin;
} stats_week_result;

/* week: the chosen week's exams; baseline: the exams of the trailing
 * weeks (the caller selects them; stats_week_baseline_range gives the
 * days). Per exam type: the baseline's governing index values; when they
 * are fewer than settings->minimum_baseline the week's own values are
 * added ("baseline thin"). An exam is an outlier when its governing index
 * has robust z > z_limit or exceeds the baseline P95 (stats_outlier_test).
 * Then grouped by the dimension. MITILOG_ERROR_MEMORY on allocation. */
mitilog_status stats_week_outliers(const stats_exam *week, size_t week_count,
                                   const stats_exam *baseline, size_t baseline_count,
                                   const stats_week_settings *settings,
                                   stats_dimension by, stats_week_result *result,
                                   mitilog_error *error);
void stats_week_result_free(stats_week_result *result);

/* First and last day numbers of the week and of its trailing baseline. */
void stats_week_days(long monday, size_t baseline_weeks, long *baseline_first,
                     long *week_last);

/* ---- Statistics for a period ---- */

typedef struct stats_distribution {
    size_t count;
    double minimum, p05, p25, median, p75, p95, maximum;   /* count > 0 */
} stats_distribution;

typedef struct stats_threshold_time {
    double threshold;
    size_t exam_count;          /* exams with any estimated time at or above */
    double median_seconds;      /* over all exams with a governing value */
    double p95_seconds;
    double total_seconds;
} stats_threshold_time;

typedef struct stats_period_row {
    const char *key;            /* borrowed; NULL: not recorded */
    size_t exam_count;
    size_t with_findings_count;
    double share_with_findings;
    stats_distribution governing;
    stats_distribution mi;
    stats_distribution estimated_seconds;
    stats_threshold_time thresholds[STATS_THRESHOLD_COUNT];
    size_t capture_count, indexed_count;
} stats_period_row;

typedef struct stats_period_result {
    stats_period_row *rows;     /* by key (NULL last) */
    size_t row_count;
    stats_period_row total;     /* all exams; key NULL */
} stats_period_result;

mitilog_status stats_period_table(const stats_exam *exams, size_t count,
                                  stats_dimension by, stats_period_result *result,
                                  mitilog_error *error);
void stats_period_result_free(stats_period_result *result);

/* ---- Preset drift ----
 * Per preset and room (a preset lives on one machine), the weekly median
 * of the governing index. Each week is compared with the same series'
 * exams of the baseline_weeks before it: z = (week median - baseline
 * median) / (1.4826 x baseline MAD x 1.2533 / sqrt(n)), n = the week's
 * exams (1.2533 sqrt(1/n) is the large-sample standard error of a median
 * in units of the spread). |z| > z_limit flags the week. Weeks without a
 * baseline of at least minimum_baseline exams, or with MAD 0, are not
 * scored. */
typedef struct stats_drift_point {
    int iso_year, iso_week;
    size_t count;
    int has_median;
    double median;
    size_t baseline_count;
    double baseline_median, baseline_mad;
    int has_z;
    double z;
    int flagged;
} stats_drift_point;

typedef struct stats_drift_series {
    const char *preset, *room;  /* borrowed */
    const char *exam_type;      /* of the series' first exam */
    stats_drift_point *points;  /* week_count points, in week order */
    size_t flagged_count;
    double max_abs_z;           /* 0 when no week was scored */
} stats_drift_series;

typedef struct stats_drift_result {
    stats_drift_series *series; /* flagged first (largest |z|), then by
                                   preset and room */
    size_t series_count;
    size_t week_count;
} stats_drift_result;

/* exams may span the weeks and their baselines; first_monday is the day
 * number of the first week shown. */
mitilog_status stats_drift(const stats_exam *exams, size_t count, long first_monday,
                           size_t week_count, size_t baseline_weeks,
                           size_t minimum_baseline, double z_limit,
                           stats_drift_result *result, mitilog_error *error);
void stats_drift_result_free(stats_drift_result *result);

#ifdef __cplusplus
}
#endif

#endif

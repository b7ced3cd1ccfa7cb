/*
 * stats_drift.h - preset drift: per preset and room, the weekly median of
 * the governing index scored against the same series' trailing weeks.
 * docs/domain.md section 5.
 *
 * Pure computation on caller-owned arrays of exam_row (exam/exam.h). Series borrow
 * the input's strings: the input must outlive the result; each series
 * owns its points. stats_drift_result_free() frees what stats_drift()
 * allocated; it accepts a zeroed or partly filled result.
 */
#ifndef MITILOG_STATS_DRIFT_H
#define MITILOG_STATS_DRIFT_H

#include <stddef.h>

#include "stats/stats_exam.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- Preset drift ----
 * Per preset and room (a preset lives on one machine), the weekly median
 * of the governing index. Each week is compared with the same series'
 * exams of the baseline_weeks before it: z = (week median - baseline
 * median) / (1.4826 x baseline MAD x 1.2533 / sqrt(n)), n = the week's
 * exams (1.2533 sqrt(1/n) is the large-sample standard error of a median
 * in units of the spread). Only a rise is flagged: z > z_limit with at
 * least STATS_DRIFT_WEEK_MINIMUM exams in the week; a drop (z below
 * -z_limit) keeps its z, shown, never flagged, since lower output is what
 * ALARA asks for. Weeks without a
 * baseline of at least minimum_baseline exams, or with MAD 0, are not
 * scored. */
/* A week's median from fewer exams is shown but never flagged (common
 * practice, no source: a median of two or three exams moves with any one
 * of them). */
enum { STATS_DRIFT_WEEK_MINIMUM = 5 };

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
    const char *preset, *room; /* borrowed */
    const char *exam_type;     /* of the series' first exam */
    stats_drift_point *points; /* week_count points, in week order */
    size_t flagged_count;
    double max_abs_z; /* largest |z| of a scored week with at
                                   least STATS_DRIFT_WEEK_MINIMUM exams, 0
                                   when none: a drop counts here, shown */
} stats_drift_series;

typedef struct stats_drift_result {
    stats_drift_series *series; /* flagged first (largest |z|), then by
                                   preset and room */
    size_t series_count;
    size_t week_count;
} stats_drift_result;

/* exams may span the weeks and their baselines; first_monday is the day
 * number of the first week shown. */
mitilog_status stats_drift(const exam_row *exams, size_t count, long first_monday,
                           size_t week_count, size_t baseline_weeks, size_t minimum_baseline,
                           double z_limit, stats_drift_result *result, mitilog_error *error);
void stats_drift_result_free(stats_drift_result *result);

#ifdef __cplusplus
}
#endif

#endif

/*
 * stats_period.h - the statistics table of a period: per value of a
 * dimension (exam type, room, preset, shift, transducer) and in total,
 * the distributions of the governing index, MI and estimated exam time,
 * the share of exams with findings and the time at or above each
 * threshold. docs/domain.md section 5 ("Statistics by exam type").
 * Quantiles are type 7 (stats.h).
 *
 * Pure computation on caller-owned arrays of exam_row (exam/exam.h). Rows borrow the
 * input's strings: the input must outlive the result.
 * stats_period_result_free() frees what stats_period_table() allocated;
 * it accepts a zeroed or partly filled result.
 */
#ifndef MITILOG_STATS_PERIOD_H
#define MITILOG_STATS_PERIOD_H

#include <stddef.h>

#include "stats/stats_exam.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct stats_distribution {
    size_t count;
    double minimum, p05, p25, median, p75, p95, maximum; /* count > 0 */
} stats_distribution;

typedef struct stats_threshold_time {
    double threshold;
    size_t exam_count;     /* exams with any estimated time at or above */
    double median_seconds; /* over all exams with a governing value */
    double p95_seconds;
    double total_seconds;
} stats_threshold_time;

typedef struct stats_period_row {
    const char *key; /* borrowed; NULL: not recorded */
    size_t exam_count;
    size_t with_findings_count; /* a violation, a warning or an advisory
                                    above its own limit */
    double share_with_findings;
    size_t informational_only_count; /* only informational advisories */
    double share_informational_only;
    stats_distribution governing;
    stats_distribution mi;
    stats_distribution estimated_seconds;
    stats_threshold_time thresholds[EXAM_TI_STATISTICS_STEPS];
    size_t capture_count, indexed_count;
} stats_period_row;

typedef struct stats_period_result {
    stats_period_row *rows; /* by key (NULL last) */
    size_t row_count;
    stats_period_row total; /* all exams; key NULL */
} stats_period_result;

mitilog_status stats_period_table(const exam_row *exams, size_t count, stats_dimension by,
                                  stats_period_result *result, mitilog_error *error);
void stats_period_result_free(stats_period_result *result);

#ifdef __cplusplus
}
#endif

#endif

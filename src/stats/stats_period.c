/*
 * stats_period.c - the statistics table of a period (stats_period.h).
 * Quantiles are type 7 (stats.h).
 */
#include "stats/stats_period.h"

#include <stdlib.h>
#include <string.h>

#include "stats/stats.h"
#include "stats/stats_keys.h"

static void distribution_of(double *values, size_t count, stats_distribution *out)
{
    memset(out, 0, sizeof *out);
    out->count = count;
    if (count == 0)
        return;
    static const double p[] = {0.05, 0.25, 0.50, 0.75, 0.95};
    double q[5];
    stats_quantiles(values, count, p, 5, q, &out->minimum, &out->maximum);
    out->p05 = q[0];
    out->p25 = q[1];
    out->median = q[2];
    out->p75 = q[3];
    out->p95 = q[4];
}

void stats_period_result_free(stats_period_result *result)
{
    if (result == NULL)
        return;
    free(result->rows);
    memset(result, 0, sizeof *result);
}

static int compare_rows(const void *left, const void *right)
{
    const stats_period_row *a = left, *b = right;
    return stats_keys_compare(a->key, b->key);
}

/* One row over the exams listed in members (count of them), or over all
 * exams in input order when members is NULL. */
static void period_row(const exam_row *exams, const size_t *members, size_t count, const char *key,
                       double *values, stats_period_row *row)
{
#define MEMBER(at) (&exams[members != NULL ? members[at] : (at)])
    memset(row, 0, sizeof *row);
    row->key = key;
    size_t n = 0;
    for (size_t at = 0; at < count; at++) {
        const exam_row *exam = MEMBER(at);
        row->exam_count++;
        row->capture_count += exam->capture_count;
        row->indexed_count += exam->indexed_count;
        /* "with findings": a violation, a warning or an advisory above
         * its own limit; an exam with only informational advisories is
         * counted apart (exam.h) */
        if (exam->finding_count > exam->informational_count)
            row->with_findings_count++;
        else if (exam->informational_count > 0)
            row->informational_only_count++;
        if (exam->has_governing)
            values[n++] = exam->max_governing;
    }
    row->share_with_findings =
        row->exam_count > 0 ? (double)row->with_findings_count / (double)row->exam_count : 0.0;
    row->share_informational_only =
        row->exam_count > 0 ? (double)row->informational_only_count / (double)row->exam_count : 0.0;
    distribution_of(values, n, &row->governing);
    n = 0;
    for (size_t at = 0; at < count; at++) {
        if (MEMBER(at)->has_mi)
            values[n++] = MEMBER(at)->max_mi;
    }
    distribution_of(values, n, &row->mi);
    n = 0;
    for (size_t at = 0; at < count; at++) {
        if (MEMBER(at)->has_governing)
            values[n++] = MEMBER(at)->estimated_seconds;
    }
    distribution_of(values, n, &row->estimated_seconds);
    for (int t = 0; t < EXAM_TI_STATISTICS_STEPS; t++) {
        stats_threshold_time *time = &row->thresholds[t];
        time->threshold = exam_ti_ladder[t];
        n = 0;
        for (size_t at = 0; at < count; at++) {
            const exam_row *exam = MEMBER(at);
            if (!exam->has_governing)
                continue;
            double seconds = exam->seconds_at_or_above[t];
            values[n++] = seconds;
            time->total_seconds += seconds;
            if (seconds > 0)
                time->exam_count++;
        }
        if (n > 0) {
            static const double p[] = {0.50, 0.95};
            double q[2];
            stats_quantiles(values, n, p, 2, q, NULL, NULL);
            time->median_seconds = q[0];
            time->p95_seconds = q[1];
        }
    }
#undef MEMBER
}

mitilog_status stats_period_table(const exam_row *exams, size_t count, stats_dimension by,
                                  stats_period_result *result, mitilog_error *error)
{
    memset(result, 0, sizeof *result);
    stats_key_groups keys;
    memset(&keys, 0, sizeof keys);
    double *values = malloc((count + 1) * sizeof *values);
    mitilog_status status = MITILOG_ERROR_MEMORY;
    if (values == NULL || stats_group_by_key(exams, count, by, &keys) != MITILOG_OK)
        goto done;
    size_t key_count = keys.table.count;
    result->rows = calloc(key_count + 1, sizeof *result->rows);
    if (result->rows == NULL)
        goto done;
    for (size_t k = 0; k < key_count; k++)
        period_row(exams, &keys.members[keys.start[k]], keys.start[k + 1] - keys.start[k],
                   keys.table.keys[k], values, &result->rows[k]);
    result->row_count = key_count;
    if (key_count > 1)
        qsort(result->rows, key_count, sizeof *result->rows, compare_rows);
    period_row(exams, NULL, count, NULL, values, &result->total);
    status = MITILOG_OK;
done:
    free(values);
    stats_key_groups_free(&keys);
    if (status != MITILOG_OK) {
        stats_period_result_free(result);
        mitilog_error_set(error, status, "period statistics: out of memory");
    }
    return status;
}

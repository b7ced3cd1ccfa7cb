/*
 * stats_drift.c - preset drift (stats_drift.h).
 */
#include "stats/stats_drift.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "stats/stats.h"
#include "stats/stats_calendar.h"
#include "stats/stats_keys.h"

void stats_drift_result_free(stats_drift_result *result)
{
    if (result == NULL)
        return;
    for (size_t i = 0; i < result->series_count; i++)
        free(result->series[i].points);
    free(result->series);
    memset(result, 0, sizeof *result);
}

static int compare_series(const void *left, const void *right)
{
    const stats_drift_series *a = left, *b = right;
    if ((a->flagged_count > 0) != (b->flagged_count > 0))
        return a->flagged_count > 0 ? -1 : 1;
    if (a->flagged_count > 0 && a->max_abs_z != b->max_abs_z)
        return a->max_abs_z > b->max_abs_z ? -1 : 1;
    int c = stats_keys_compare(a->preset, b->preset);
    return c != 0 ? c : stats_keys_compare(a->room, b->room);
}

mitilog_status stats_drift(const exam_row *exams, size_t count, long first_monday,
                           size_t week_count, size_t baseline_weeks, size_t minimum_baseline,
                           double z_limit, stats_drift_result *result, mitilog_error *error)
{
    memset(result, 0, sizeof *result);
    result->week_count = week_count;
    if (z_limit <= 0)
        z_limit = 3.0;
    if (minimum_baseline < 1)
        minimum_baseline = 1;
    stats_key_table presets, rooms;
    memset(&presets, 0, sizeof presets);
    memset(&rooms, 0, sizeof rooms);
    stats_key_groups series_groups;
    memset(&series_groups, 0, sizeof series_groups);
    size_t *preset_of = malloc((count + 1) * sizeof *preset_of);
    size_t *room_of = malloc((count + 1) * sizeof *room_of);
    size_t *pairs = NULL;
    long *days = malloc((count + 1) * sizeof *days);
    double *values = malloc((count + 1) * sizeof *values);
    double *scratch = malloc((count + 1) * sizeof *scratch);
    mitilog_status status = MITILOG_ERROR_MEMORY;
    series_groups.key_of = malloc((count + 1) * sizeof *series_groups.key_of);
    if (preset_of == NULL || room_of == NULL || days == NULL || values == NULL || scratch == NULL ||
        series_groups.key_of == NULL)
        goto done;
    result->series = calloc(count + 1, sizeof *result->series);
    if (result->series == NULL)
        goto done;
    for (size_t i = 0; i < count; i++) {
        if (exams[i].preset == NULL || stats_day_number(exams[i].day, &days[i]) != MITILOG_OK)
            days[i] = -1;
        else if (stats_key_add(&presets, exams[i].preset, &preset_of[i]) != MITILOG_OK ||
                 stats_key_add(&rooms, exams[i].room, &room_of[i]) != MITILOG_OK)
            goto done;
    }
    /* Series: each (preset, room) pair, in first-seen order. */
    pairs = calloc(presets.count * rooms.count + 1, sizeof *pairs);
    if (pairs == NULL)
        goto done;
    for (size_t i = 0; i < count; i++) {
        series_groups.key_of[i] = SIZE_MAX;
        if (days[i] < 0)
            continue;
        size_t *pair = &pairs[preset_of[i] * rooms.count + room_of[i]];
        if (*pair == 0) {
            stats_drift_series *series = &result->series[result->series_count++];
            series->preset = exams[i].preset;
            series->room = exams[i].room;
            series->exam_type = exams[i].exam_type;
            series->points = calloc(week_count + 1, sizeof *series->points);
            if (series->points == NULL)
                goto done;
            *pair = result->series_count;
        }
        series_groups.key_of[i] = *pair - 1;
    }
    if (stats_key_groups_fill(&series_groups, count, result->series_count) != MITILOG_OK)
        goto done;
    for (size_t s = 0; s < result->series_count; s++) {
        stats_drift_series *series = &result->series[s];
        const size_t *members = &series_groups.members[series_groups.start[s]];
        size_t member_count = series_groups.start[s + 1] - series_groups.start[s];
        for (size_t w = 0; w < week_count; w++) {
            stats_drift_point *point = &series->points[w];
            long monday = first_monday + 7L * (long)w;
            stats_iso_week_of_day(monday, &point->iso_year, &point->iso_week);
            size_t n = 0, b = 0;
            for (size_t m = 0; m < member_count; m++) {
                size_t i = members[m];
                if (exams[i].has_governing && days[i] >= monday && days[i] <= monday + 6)
                    values[n++] = exams[i].max_governing;
            }
            point->count = n;
            point->has_median = n > 0;
            point->median = stats_median_of(values, n);
            for (size_t m = 0; m < member_count; m++) {
                size_t i = members[m];
                if (exams[i].has_governing && days[i] < monday &&
                    days[i] >= monday - 7L * (long)baseline_weeks)
                    values[b++] = exams[i].max_governing;
            }
            point->baseline_count = b;
            if (b == 0)
                continue;
            stats_mad(values, b, scratch, &point->baseline_median, &point->baseline_mad);
            if (n == 0 || b < minimum_baseline || !(point->baseline_mad > 0))
                continue;
            double spread = STATS_MAD_SCALE * point->baseline_mad * 1.2533 / sqrt((double)n);
            point->z = (point->median - point->baseline_median) / spread;
            point->has_z = 1;
            /* a rise only, from enough exams (stats_drift.h) */
            point->flagged = point->z > z_limit && n >= STATS_DRIFT_WEEK_MINIMUM;
            if (point->flagged)
                series->flagged_count++;
            /* the largest |z| only of weeks with enough exams to flag */
            if (n >= STATS_DRIFT_WEEK_MINIMUM && fabs(point->z) > series->max_abs_z)
                series->max_abs_z = fabs(point->z);
        }
    }
    if (result->series_count > 1)
        qsort(result->series, result->series_count, sizeof *result->series, compare_series);
    status = MITILOG_OK;
done:
    free(preset_of);
    free(room_of);
    free(pairs);
    free(days);
    free(values);
    free(scratch);
    stats_key_table_free(&presets);
    stats_key_table_free(&rooms);
    stats_key_groups_free(&series_groups);
    if (status != MITILOG_OK) {
        stats_drift_result_free(result);
        mitilog_error_set(error, status, "preset drift: out of memory");
    }
    return status;
}

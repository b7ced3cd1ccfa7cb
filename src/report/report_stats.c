/*
 * report_stats.c - statistics for a period by exam type (or room, preset,
 * shift, transducer) as JSON, CSV or HTML (the accreditation table), and
 * preset drift as JSON.
 */
#include "report/report_internal.h"
#include "store/store_reports.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct stats_document {
    char from[11], to[11];
    stats_dimension by;
    const char *institution;
    const store_sites *sites;
    report_data data;
    stats_period_result result;
} stats_document;

static mitilog_status stats_compute(store *st, const report_stats_request *request,
                                    stats_document *doc, mitilog_error *error)
{
    memset(doc, 0, sizeof *doc);
    doc->by = request->by;
    doc->institution = request->institution;
    doc->sites = request->sites;
    long from_day, to_day;
    if (request->to == NULL || request->to[0] == '\0') {
        /* the Sunday of the default week (report.h), never a part week */
        int year, week;
        long monday;
        report_default_week(st, request->sites, &year, &week);
        to_day = stats_iso_week_monday(year, week, &monday) == MITILOG_OK
                     ? monday + 6
                     : report_last_complete_day(st, request->sites);
    } else if (stats_day_number(request->to, &to_day) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "to: not a date YYYY-MM-DD");
    if (request->from == NULL || request->from[0] == '\0') {
        char *first_day = NULL, *last_day = NULL;
        from_day = to_day - 27;
        if (store_load_day_range(st, request->sites, &first_day, &last_day, error) == MITILOG_OK) {
            long first;
            if (first_day != NULL && stats_day_number(first_day, &first) == MITILOG_OK)
                from_day = first;
        }
        free(first_day);
        free(last_day);
    } else if (stats_day_number(request->from, &from_day) != MITILOG_OK) {
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "from: not a date YYYY-MM-DD");
    }
    if (from_day > to_day)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "from is after to");
    stats_day_text(from_day, doc->from);
    stats_day_text(to_day, doc->to);
    /* Statistics need the grouping column only, not the findings by rule. */
    mitilog_status status = report_data_load(st, doc->from, doc->to, request->sites,
                                             report_dimension_column(doc->by) | STORE_EXAM_DETAIL,
                                             REPORT_LOAD_INFO, &doc->data, error);
    if (status == MITILOG_OK)
        status =
            stats_period_table(doc->data.rows, doc->data.row_count, doc->by, &doc->result, error);
    return status;
}

static void stats_document_free(stats_document *doc)
{
    stats_period_result_free(&doc->result);
    report_data_free(&doc->data);
}

static void distribution_json(json_writer *w, const char *name, const stats_distribution *d)
{
    int valued = d->count > 0;
    json_key(w, name);
    json_object_begin(w);
    json_key(w, "count");
    json_integer(w, (long long)d->count);
    json_key(w, "min");
    json_number(w, valued, d->minimum);
    json_key(w, "p05");
    json_number(w, valued, d->p05);
    json_key(w, "p25");
    json_number(w, valued, d->p25);
    json_key(w, "median");
    json_number(w, valued, d->median);
    json_key(w, "p75");
    json_number(w, valued, d->p75);
    json_key(w, "p95");
    json_number(w, valued, d->p95);
    json_key(w, "max");
    json_number(w, valued, d->maximum);
    json_object_end(w);
}

/* The thresholds of a row in ascending order (the ladder's order). */
static int threshold_compare(const void *left, const void *right)
{
    const stats_threshold_time *a = *(const stats_threshold_time *const *)left;
    const stats_threshold_time *b = *(const stats_threshold_time *const *)right;
    return (a->threshold > b->threshold) - (a->threshold < b->threshold);
}

static void row_json(json_writer *w, const stats_document *doc, const stats_period_row *row,
                     int is_total)
{
    double completeness = report_completeness(row->capture_count, row->indexed_count);
    json_object_begin(w);
    json_key(w, "key");
    json_string(w, is_total ? "(all)" : row->key);
    const char *label = NULL, *governing = NULL;
    if (!is_total)
        report_pack_row_facts(&doc->data, doc->by, row->key, &label, &governing);
    json_key(w, "label");
    json_string(w, label);
    json_key(w, "governing_index");
    json_string(w, governing);
    json_key(w, "governing_without_value");
    json_integer(w, (long long)(row->exam_count - row->governing.count));
    json_key(w, "exam_count");
    json_integer(w, (long long)row->exam_count);
    json_key(w, "exams_with_findings");
    json_integer(w, (long long)row->with_findings_count);
    json_key(w, "share_with_findings");
    json_number(w, 1, row->share_with_findings);
    json_key(w, "exams_informational_only");
    json_integer(w, (long long)row->informational_only_count);
    json_key(w, "share_informational_only");
    json_number(w, 1, row->share_informational_only);
    json_key(w, "captures");
    json_integer(w, (long long)row->capture_count);
    json_key(w, "captures_with_indices");
    json_integer(w, (long long)row->indexed_count);
    json_key(w, "data_completeness");
    json_number(w, 1, completeness);
    distribution_json(w, "governing", &row->governing);
    distribution_json(w, "mi", &row->mi);
    const stats_distribution *est = &row->estimated_seconds;
    json_key(w, "estimated_seconds");
    json_object_begin(w);
    json_key(w, "count");
    json_integer(w, (long long)est->count);
    json_key(w, "median");
    json_number(w, est->count > 0, est->median);
    json_key(w, "p75");
    json_number(w, est->count > 0, est->p75);
    json_key(w, "p95");
    json_number(w, est->count > 0, est->p95);
    json_object_end(w);

    const stats_threshold_time *order[EXAM_TI_STATISTICS_STEPS];
    for (int t = 0; t < EXAM_TI_STATISTICS_STEPS; t++)
        order[t] = &row->thresholds[t];
    qsort(order, EXAM_TI_STATISTICS_STEPS, sizeof order[0], threshold_compare);
    int valued = row->governing.count > 0;
    json_key(w, "time_at_or_above");
    json_array_begin(w);
    for (int t = 0; t < EXAM_TI_STATISTICS_STEPS; t++) {
        const stats_threshold_time *time = order[t];
        json_object_begin(w);
        json_key(w, "threshold");
        json_number(w, 1, time->threshold);
        json_key(w, "exam_count");
        json_integer(w, (long long)time->exam_count);
        json_key(w, "median_seconds");
        json_number(w, valued, time->median_seconds);
        json_key(w, "p95_seconds");
        json_number(w, valued, time->p95_seconds);
        json_key(w, "total_seconds");
        json_number(w, 1, time->total_seconds);
        json_object_end(w);
    }
    json_array_end(w);
    json_object_end(w);
}

static mitilog_status stats_json(const stats_document *doc, char **out, mitilog_error *error)
{
    json_writer json;
    json_writer_init(&json);
    json_writer *w = &json;
    json_object_begin(w);
    report_meta meta = {w};
    report_meta_text(&meta, "report", "statistics");
    report_meta_text(&meta, "from", doc->from);
    report_meta_text(&meta, "to", doc->to);
    report_meta_text(&meta, "by", stats_dimension_name(doc->by));
    report_meta_text(&meta, "quantile_method",
                     "inclusive (Hyndman & Fan type 7; Python statistics.quantiles "
                     "method='inclusive', R type 7)");
    report_meta_text(&meta, "governing_value", "highest governing thermal index of each exam");
    report_meta_int(&meta, "exam_count", (long long)doc->result.total.exam_count);
    report_meta_text(&meta, "institution", doc->institution);
    report_meta_sites(&meta, doc->sites);
    report_meta_common(&meta, &doc->data.info, doc->data.capture_count, doc->data.indexed_count);
    json_key(w, "rows");
    json_array_begin(w);
    for (size_t r = 0; r < doc->result.row_count; r++)
        row_json(w, doc, &doc->result.rows[r], 0);
    json_array_end(w);
    json_key(w, "total");
    row_json(w, doc, &doc->result.total, 1);
    json_object_end(w);
    mitilog_status status = json_writer_take(w, out, error);
    json_writer_free(w);
    return status;
}

static const char *const stats_csv_columns[] = {"record",
                                                "from",
                                                "to",
                                                "by",
                                                "key",
                                                "exams",
                                                "exams_with_findings",
                                                "share_with_findings",
                                                "governing_n",
                                                "governing_median",
                                                "governing_p75",
                                                "governing_p95",
                                                "governing_max",
                                                "mi_n",
                                                "mi_median",
                                                "mi_p75",
                                                "mi_p95",
                                                "mi_max",
                                                "estimated_minutes_median",
                                                "estimated_minutes_p95",
                                                "exams_at_or_above_0_7",
                                                "minutes_at_or_above_0_7_median",
                                                "minutes_at_or_above_0_7_p95",
                                                "exams_at_or_above_1_0",
                                                "minutes_at_or_above_1_0_median",
                                                "minutes_at_or_above_1_0_p95",
                                                "exams_at_or_above_1_5",
                                                "minutes_at_or_above_1_5_median",
                                                "minutes_at_or_above_1_5_p95",
                                                "exams_at_or_above_2_0",
                                                "minutes_at_or_above_2_0_median",
                                                "minutes_at_or_above_2_0_p95",
                                                "data_completeness",
                                                "policy_version",
                                                "note",
                                                "label",
                                                "governing_index",
                                                "governing_without_value",
                                                "institution",
                                                "exams_informational_only",
                                                "share_informational_only"};
enum { STATS_CSV_COLUMNS = sizeof stats_csv_columns / sizeof stats_csv_columns[0] };

static void stats_csv_row(const stats_document *doc, FILE *out, const stats_period_row *row,
                          const char *record, const char *key, int is_total)
{
    const stats_distribution *g = &row->governing, *mi = &row->mi, *est = &row->estimated_seconds;
    report_csv_field(out, 1, record);
    report_csv_field(out, 0, doc->from);
    report_csv_field(out, 0, doc->to);
    report_csv_field(out, 0, stats_dimension_name(doc->by));
    report_csv_field(out, 0, key);
    report_csv_count(out, row->exam_count);
    report_csv_count(out, row->with_findings_count);
    report_csv_number(out, 1, row->share_with_findings);
    report_csv_count(out, g->count);
    report_csv_number(out, g->count > 0, g->median);
    report_csv_number(out, g->count > 0, g->p75);
    report_csv_number(out, g->count > 0, g->p95);
    report_csv_number(out, g->count > 0, g->maximum);
    report_csv_count(out, mi->count);
    report_csv_number(out, mi->count > 0, mi->median);
    report_csv_number(out, mi->count > 0, mi->p75);
    report_csv_number(out, mi->count > 0, mi->p95);
    report_csv_number(out, mi->count > 0, mi->maximum);
    report_csv_number(out, est->count > 0, est->median / 60.0);
    report_csv_number(out, est->count > 0, est->p95 / 60.0);
    for (int t = 0; t < EXAM_TI_STATISTICS_STEPS; t++) {
        const stats_threshold_time *time = &row->thresholds[t];
        report_csv_count(out, time->exam_count);
        report_csv_number(out, g->count > 0, time->median_seconds / 60.0);
        report_csv_number(out, g->count > 0, time->p95_seconds / 60.0);
    }
    double completeness = report_completeness(row->capture_count, row->indexed_count);
    report_csv_number(out, isfinite(completeness), completeness);
    report_csv_field(out, 0, doc->data.info.policy_version);
    report_csv_field(out, 0, "");
    const char *label = NULL, *governing = NULL;
    if (!is_total)
        report_pack_row_facts(&doc->data, doc->by, row->key, &label, &governing);
    report_csv_field(out, 0, label);
    report_csv_field(out, 0, governing);
    report_csv_count(out, row->exam_count - g->count);
    report_csv_field(out, 0, "");
    report_csv_count(out, row->informational_only_count);
    report_csv_number(out, 1, row->share_informational_only);
    report_csv_end(out);
}

static void stats_csv(const stats_document *doc, FILE *out)
{
    for (int c = 0; c < STATS_CSV_COLUMNS; c++)
        report_csv_field(out, c == 0, stats_csv_columns[c]);
    report_csv_end(out);
    char policy[256], note[768];
    double completeness = report_completeness(doc->data.capture_count, doc->data.indexed_count);
    snprintf(note, sizeof note,
             "%s Percentiles: inclusive method (Hyndman & Fan type 7). Times are estimates "
             "from the exam timeline.",
             report_caution);
    report_csv_field(out, 1, "report");
    report_csv_field(out, 0, doc->from);
    report_csv_field(out, 0, doc->to);
    report_csv_field(out, 0, stats_dimension_name(doc->by));
    report_csv_field(out, 0, "");
    report_csv_count(out, doc->result.total.exam_count);
    /* up to data_completeness, the 9th column from the end */
    for (int c = 6; c < STATS_CSV_COLUMNS - 9; c++)
        fputc(',', out);
    report_csv_number(out, isfinite(completeness), completeness);
    report_csv_field(out, 0, report_policy_text(&doc->data.info, policy, sizeof policy));
    report_csv_field(out, 0, note);
    report_csv_field(out, 0, "");
    report_csv_field(out, 0, "");
    report_csv_field(out, 0, "");
    report_csv_field(out, 0, doc->institution != NULL ? doc->institution : "");
    report_csv_field(out, 0, "");
    report_csv_field(out, 0, "");
    report_csv_end(out);
    for (size_t r = 0; r < doc->result.row_count; r++) {
        const stats_period_row *row = &doc->result.rows[r];
        stats_csv_row(doc, out, row, "row", row->key != NULL ? row->key : "(not recorded)", 0);
    }
    stats_csv_row(doc, out, &doc->result.total, "total", "(all)", 1);
}

static void stats_html(const stats_document *doc, FILE *out)
{
    report_pack_input in = {doc->from,        doc->to,    doc->by,
                            doc->institution, &doc->data, &doc->result};
    report_pack_html(&in, out);
}

mitilog_status report_stats(store *st, const report_stats_request *request, report_format format,
                            char **out, mitilog_error *error)
{
    *out = NULL;
    report_stats_request defaults = {NULL, NULL, STATS_BY_EXAM_TYPE, NULL, NULL};
    if (request == NULL)
        request = &defaults;
    stats_document doc;
    mitilog_status status = stats_compute(st, request, &doc, error);
    if (status == MITILOG_OK) {
        if (format == REPORT_JSON) {
            status = stats_json(&doc, out, error);
        } else {
            report_buffer buffer;
            status = report_buffer_open(&buffer, error);
            if (status == MITILOG_OK) {
                if (format == REPORT_CSV)
                    stats_csv(&doc, buffer.file);
                else
                    stats_html(&doc, buffer.file);
                status = report_buffer_finish(&buffer, out, error);
            }
        }
    }
    stats_document_free(&doc);
    return status;
}

/* ---- drift ---- */

report_drift_request report_drift_default_request(void)
{
    report_drift_request request;
    memset(&request, 0, sizeof request);
    request.weeks = 12;
    request.baseline_weeks = 12;
    request.minimum_baseline = 10;
    request.z_limit = 3.0;
    return request;
}

mitilog_status report_drift_span(store *st, const report_drift_request *request, int *iso_year,
                                 int *iso_week, long *first_day, long *last_day,
                                 mitilog_error *error)
{
    size_t weeks = request->weeks ? request->weeks : 12;
    size_t baseline_weeks = request->baseline_weeks ? request->baseline_weeks : 12;
    int year = request->iso_year, week = request->iso_week;
    if (!request->has_week)
        report_default_week(st, request->sites, &year, &week);
    long last_monday;
    if (stats_iso_week_monday(year, week, &last_monday) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no ISO week %d-W%02d", year, week);
    long first_monday = last_monday - 7L * (long)(weeks - 1);
    *first_day = first_monday - 7L * (long)baseline_weeks;
    *last_day = last_monday + 6;
    *iso_year = year;
    *iso_week = week;
    return MITILOG_OK;
}

mitilog_status report_drift(store *st, const report_drift_request *request, char **out,
                            mitilog_error *error)
{
    *out = NULL;
    report_drift_request defaults = report_drift_default_request();
    if (request == NULL)
        request = &defaults;
    size_t weeks = request->weeks ? request->weeks : 12;
    size_t baseline_weeks = request->baseline_weeks ? request->baseline_weeks : 12;
    int year, week;
    long first_day, last_day;
    mitilog_status span =
        report_drift_span(st, request, &year, &week, &first_day, &last_day, error);
    if (span != MITILOG_OK)
        return span;
    long first_monday = first_day + 7L * (long)baseline_weeks;
    char from[11], to[11], shown_from[11];
    stats_day_text(first_day, from);
    stats_day_text(last_day, to);
    stats_day_text(first_monday, shown_from);
    report_data data;
    stats_drift_result result;
    memset(&result, 0, sizeof result);
    mitilog_status status = report_data_load(st, from, to, request->sites,
                                             STORE_EXAM_DAY | STORE_EXAM_ROOM | STORE_EXAM_PRESET,
                                             REPORT_LOAD_INFO, &data, error);
    if (status != MITILOG_OK)
        return status;
    status = stats_drift(data.rows, data.row_count, first_monday, weeks, baseline_weeks,
                         request->minimum_baseline ? request->minimum_baseline : 10,
                         request->z_limit > 0 ? request->z_limit : 3.0, &result, error);
    json_writer json;
    json_writer_init(&json);
    json_writer *w = &json;
    if (status == MITILOG_OK) {
        char week_text[9];
        json_object_begin(w);
        report_meta meta = {w};
        report_meta_text(&meta, "report", "preset_drift");
        stats_iso_week_text(year, week, week_text);
        report_meta_text(&meta, "last_week", week_text);
        report_meta_text(&meta, "from", shown_from);
        report_meta_text(&meta, "to", to);
        report_meta_int(&meta, "weeks", (long long)weeks);
        report_meta_int(&meta, "baseline_weeks", (long long)baseline_weeks);
        report_meta_int(&meta, "minimum_baseline",
                        (long long)(request->minimum_baseline ? request->minimum_baseline : 10));
        report_meta_number(&meta, "z_limit", 1, request->z_limit > 0 ? request->z_limit : 3.0);
        report_meta_int(&meta, "minimum_week_exams", (long long)STATS_DRIFT_WEEK_MINIMUM);
        report_meta_text(&meta, "method",
                         "weekly median of each exam's highest governing TI per preset and "
                         "room; z = (median - baseline median) / (1.4826 MAD x 1.2533 / "
                         "sqrt(n)) against the same series' exams of the baseline weeks");
        report_meta_sites(&meta, request->sites);
        report_meta_common(&meta, &data.info, data.capture_count, data.indexed_count);
        json_key(w, "series");
        json_array_begin(w);
    }
    for (size_t s = 0; status == MITILOG_OK && s < result.series_count; s++) {
        const stats_drift_series *series = &result.series[s];
        json_object_begin(w);
        json_key(w, "preset");
        json_string(w, series->preset);
        json_key(w, "room");
        json_string(w, series->room);
        json_key(w, "exam_type");
        json_string(w, series->exam_type);
        json_key(w, "flagged_weeks");
        json_integer(w, (long long)series->flagged_count);
        json_key(w, "max_abs_z");
        json_number(w, 1, series->max_abs_z);
        json_key(w, "points");
        json_array_begin(w);
        for (size_t p = 0; p < weeks; p++) {
            const stats_drift_point *point = &series->points[p];
            char week_text[9], monday[11];
            stats_iso_week_text(point->iso_year, point->iso_week, week_text);
            stats_day_text(first_monday + 7L * (long)p, monday);
            json_object_begin(w);
            json_key(w, "week");
            json_string(w, week_text);
            json_key(w, "monday");
            json_string(w, monday);
            json_key(w, "count");
            json_integer(w, (long long)point->count);
            json_key(w, "median");
            json_number(w, point->has_median, point->median);
            json_key(w, "baseline_count");
            json_integer(w, (long long)point->baseline_count);
            json_key(w, "baseline_median");
            json_number(w, point->baseline_count > 0, point->baseline_median);
            json_key(w, "baseline_mad");
            json_number(w, point->baseline_count > 0, point->baseline_mad);
            json_key(w, "z");
            json_number(w, point->has_z, point->z);
            json_key(w, "flagged");
            json_boolean(w, point->flagged);
            json_object_end(w);
        }
        json_array_end(w);
        json_object_end(w);
    }
    if (status == MITILOG_OK) {
        json_array_end(w);
        json_object_end(w);
        status = json_writer_take(w, out, error);
    }
    json_writer_free(w);
    stats_drift_result_free(&result);
    report_data_free(&data);
    return status;
}

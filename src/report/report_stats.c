/*
 * report_stats.c - statistics for a period by exam type (or room, preset,
 * shift, transducer) as JSON, CSV or HTML (the accreditation table), and
 * preset drift as JSON.
 */
#include "report/report_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define BIND_TEXT(statement, name, value) store_scratch_bind_text(statement, ":" name, value)
#define BIND_NUMBER(statement, name, present, value)                                  \
    store_scratch_bind_double(statement, ":" name, present, value)
#define BIND_INT(statement, name, value) store_scratch_bind_int(statement, ":" name, value)

typedef struct stats_document {
    char from[11], to[11];
    stats_dimension by;
    const char *institution;
    report_data data;
    stats_period_result result;
} stats_document;

static mitilog_status stats_compute(store *st, const report_stats_request *request,
                                    stats_document *doc, mitilog_error *error)
{
    memset(doc, 0, sizeof *doc);
    doc->by = request->by;
    doc->institution = request->institution;
    long from_day, to_day;
    if (request->to == NULL || request->to[0] == '\0')
        to_day = report_latest_day(st);
    else if (stats_day_number(request->to, &to_day) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "to: not a date YYYY-MM-DD");
    if (request->from == NULL || request->from[0] == '\0') {
        char *first_day = NULL, *last_day = NULL;
        from_day = to_day - 27;
        if (store_load_day_range(st, &first_day, &last_day, error) == MITILOG_OK) {
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
    mitilog_status status = report_data_load(st, doc->from, doc->to,
                                             report_dimension_column(doc->by) |
                                                 STORE_EXAM_DETAIL,
                                             REPORT_LOAD_INFO,
                                             &doc->data, error);
    if (status == MITILOG_OK)
        status = stats_period_table(doc->data.rows, doc->data.row_count, doc->by, &doc->result,
                                    error);
    return status;
}

static void stats_document_free(stats_document *doc)
{
    stats_period_result_free(&doc->result);
    report_data_free(&doc->data);
}

static mitilog_status insert_row(store_scratch_statement *row_insert,
                                 store_scratch_statement *threshold_insert, long long position,
                                 const stats_period_row *row, int is_total,
                                 mitilog_error *error)
{
    double completeness = report_completeness(row->capture_count, row->indexed_count);
    BIND_INT(row_insert, "position", position);
    BIND_TEXT(row_insert, "key", is_total ? "(all)" : row->key);
    BIND_INT(row_insert, "is_total", is_total);
    BIND_INT(row_insert, "exam_count", (long long)row->exam_count);
    BIND_INT(row_insert, "with_findings_count", (long long)row->with_findings_count);
    BIND_NUMBER(row_insert, "share_with_findings", 1, row->share_with_findings);
    BIND_INT(row_insert, "capture_count", (long long)row->capture_count);
    BIND_INT(row_insert, "indexed_count", (long long)row->indexed_count);
    BIND_NUMBER(row_insert, "completeness", 1, completeness);
    const stats_distribution *g = &row->governing, *mi = &row->mi;
    int hg = g->count > 0, hm = mi->count > 0;
    BIND_INT(row_insert, "g_count", (long long)g->count);
    BIND_NUMBER(row_insert, "g_min", hg, g->minimum);
    BIND_NUMBER(row_insert, "g_p05", hg, g->p05);
    BIND_NUMBER(row_insert, "g_p25", hg, g->p25);
    BIND_NUMBER(row_insert, "g_median", hg, g->median);
    BIND_NUMBER(row_insert, "g_p75", hg, g->p75);
    BIND_NUMBER(row_insert, "g_p95", hg, g->p95);
    BIND_NUMBER(row_insert, "g_max", hg, g->maximum);
    BIND_INT(row_insert, "mi_count", (long long)mi->count);
    BIND_NUMBER(row_insert, "mi_min", hm, mi->minimum);
    BIND_NUMBER(row_insert, "mi_p05", hm, mi->p05);
    BIND_NUMBER(row_insert, "mi_p25", hm, mi->p25);
    BIND_NUMBER(row_insert, "mi_median", hm, mi->median);
    BIND_NUMBER(row_insert, "mi_p75", hm, mi->p75);
    BIND_NUMBER(row_insert, "mi_p95", hm, mi->p95);
    BIND_NUMBER(row_insert, "mi_max", hm, mi->maximum);
    const stats_distribution *est = &row->estimated_seconds;
    BIND_INT(row_insert, "est_count", (long long)est->count);
    BIND_NUMBER(row_insert, "est_median", est->count > 0, est->median);
    BIND_NUMBER(row_insert, "est_p75", est->count > 0, est->p75);
    BIND_NUMBER(row_insert, "est_p95", est->count > 0, est->p95);
    mitilog_status status = store_scratch_run(row_insert, error);
    for (int t = 0; status == MITILOG_OK && t < EXAM_TI_STATISTICS_STEPS; t++) {
        const stats_threshold_time *time = &row->thresholds[t];
        int valued = g->count > 0;
        BIND_INT(threshold_insert, "row_position", position);
        BIND_NUMBER(threshold_insert, "threshold", 1, time->threshold);
        BIND_INT(threshold_insert, "exam_count", (long long)time->exam_count);
        BIND_NUMBER(threshold_insert, "median_seconds", valued, time->median_seconds);
        BIND_NUMBER(threshold_insert, "p95_seconds", valued, time->p95_seconds);
        BIND_NUMBER(threshold_insert, "total_seconds", 1, time->total_seconds);
        status = store_scratch_run(threshold_insert, error);
    }
    return status;
}

static mitilog_status stats_json(const stats_document *doc, char **out, mitilog_error *error)
{
    store_scratch *scratch = NULL;
    store_scratch_statement *meta_insert, *row_insert, *threshold_insert, *query;
    mitilog_status status = store_scratch_open("queries/report_schema.sql", &scratch, error);
    if (status == MITILOG_OK)
        status = store_scratch_prepare(scratch, "queries/report_insert_meta.sql", &meta_insert,
                                       error);
    if (status == MITILOG_OK)
        status = store_scratch_prepare(scratch, "queries/report_insert_stat_row.sql",
                                       &row_insert, error);
    if (status == MITILOG_OK)
        status = store_scratch_prepare(scratch, "queries/report_insert_stat_threshold.sql",
                                       &threshold_insert, error);
    if (status == MITILOG_OK)
        status = store_scratch_prepare(scratch, "queries/report_stats_json.sql", &query, error);
    if (status != MITILOG_OK)
        goto done;
    report_meta meta = {meta_insert, MITILOG_OK, error};
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
    report_meta_common(&meta, &doc->data.info, doc->data.capture_count,
                       doc->data.indexed_count);
    status = meta.status;
    for (size_t r = 0; status == MITILOG_OK && r < doc->result.row_count; r++)
        status = insert_row(row_insert, threshold_insert, (long long)r + 1,
                            &doc->result.rows[r], 0, error);
    if (status == MITILOG_OK)
        status = insert_row(row_insert, threshold_insert, (long long)doc->result.row_count + 1,
                            &doc->result.total, 1, error);
    if (status == MITILOG_OK)
        status = store_scratch_text(query, out, error);
done:
    store_scratch_close(scratch);
    return status;
}

static const char *const stats_csv_columns[] = {
    "record", "from", "to", "by", "key", "exams", "exams_with_findings",
    "share_with_findings", "governing_n", "governing_median", "governing_p75",
    "governing_p95", "governing_max", "mi_n", "mi_median", "mi_p75", "mi_p95", "mi_max",
    "estimated_minutes_median", "estimated_minutes_p95",
    "exams_at_or_above_0_7", "minutes_at_or_above_0_7_median", "minutes_at_or_above_0_7_p95",
    "exams_at_or_above_1_0", "minutes_at_or_above_1_0_median", "minutes_at_or_above_1_0_p95",
    "exams_at_or_above_1_5", "minutes_at_or_above_1_5_median", "minutes_at_or_above_1_5_p95",
    "exams_at_or_above_2_0", "minutes_at_or_above_2_0_median", "minutes_at_or_above_2_0_p95",
    "data_completeness", "policy_version", "note", "label", "governing_index",
    "governing_without_value", "institution"};
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
    for (int c = 6; c < STATS_CSV_COLUMNS - 7; c++)
        fputc(',', out);
    report_csv_number(out, isfinite(completeness), completeness);
    report_csv_field(out, 0, report_policy_text(&doc->data.info, policy, sizeof policy));
    report_csv_field(out, 0, note);
    report_csv_field(out, 0, "");
    report_csv_field(out, 0, "");
    report_csv_field(out, 0, "");
    report_csv_field(out, 0, doc->institution != NULL ? doc->institution : "");
    report_csv_end(out);
    for (size_t r = 0; r < doc->result.row_count; r++) {
        const stats_period_row *row = &doc->result.rows[r];
        stats_csv_row(doc, out, row, "row", row->key != NULL ? row->key : "(not recorded)", 0);
    }
    stats_csv_row(doc, out, &doc->result.total, "total", "(all)", 1);
}

static void stats_html(const stats_document *doc, FILE *out)
{
    report_pack_input in = {doc->from, doc->to, doc->by, doc->institution, &doc->data,
                            &doc->result};
    report_pack_html(&in, out);
}

mitilog_status report_stats(store *st, const report_stats_request *request,
                            report_format format, char **out, mitilog_error *error)
{
    *out = NULL;
    report_stats_request defaults = {NULL, NULL, STATS_BY_EXAM_TYPE, NULL};
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

mitilog_status report_drift(store *st, const report_drift_request *request, char **out,
                            mitilog_error *error)
{
    *out = NULL;
    report_drift_request defaults = report_drift_default_request();
    if (request == NULL)
        request = &defaults;
    size_t weeks = request->weeks ? request->weeks : 12;
    size_t baseline_weeks = request->baseline_weeks ? request->baseline_weeks : 12;
    int year = request->iso_year, week = request->iso_week;
    if (!request->has_week)
        stats_iso_week_of_day(report_latest_day(st), &year, &week);
    long last_monday;
    if (stats_iso_week_monday(year, week, &last_monday) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no ISO week %d-W%02d", year,
                                 week);
    long first_monday = last_monday - 7L * (long)(weeks - 1);
    char from[11], to[11], shown_from[11];
    stats_day_text(first_monday - 7L * (long)baseline_weeks, from);
    stats_day_text(last_monday + 6, to);
    stats_day_text(first_monday, shown_from);
    report_data data;
    stats_drift_result result;
    memset(&result, 0, sizeof result);
    store_scratch *scratch = NULL;
    mitilog_status status = report_data_load(st, from, to,
                                             STORE_EXAM_DAY | STORE_EXAM_ROOM |
                                                 STORE_EXAM_PRESET,
                                             REPORT_LOAD_INFO, &data, error);
    if (status != MITILOG_OK)
        return status;
    status = stats_drift(data.rows, data.row_count, first_monday, weeks, baseline_weeks,
                         request->minimum_baseline ? request->minimum_baseline : 10,
                         request->z_limit > 0 ? request->z_limit : 3.0, &result, error);
    store_scratch_statement *meta_insert, *series_insert, *point_insert, *query;
    if (status == MITILOG_OK)
        status = store_scratch_open("queries/report_schema.sql", &scratch, error);
    if (status == MITILOG_OK)
        status = store_scratch_prepare(scratch, "queries/report_insert_meta.sql", &meta_insert,
                                       error);
    if (status == MITILOG_OK)
        status = store_scratch_prepare(scratch, "queries/report_insert_drift_series.sql",
                                       &series_insert, error);
    if (status == MITILOG_OK)
        status = store_scratch_prepare(scratch, "queries/report_insert_drift_point.sql",
                                       &point_insert, error);
    if (status == MITILOG_OK)
        status = store_scratch_prepare(scratch, "queries/report_drift_json.sql", &query, error);
    if (status == MITILOG_OK) {
        char week_text[9];
        report_meta meta = {meta_insert, MITILOG_OK, error};
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
        report_meta_text(&meta, "method",
                         "weekly median of each exam's highest governing TI per preset and "
                         "room; z = (median - baseline median) / (1.4826 MAD x 1.2533 / "
                         "sqrt(n)) against the same series' exams of the baseline weeks");
        report_meta_common(&meta, &data.info, data.capture_count, data.indexed_count);
        status = meta.status;
    }
    for (size_t s = 0; status == MITILOG_OK && s < result.series_count; s++) {
        const stats_drift_series *series = &result.series[s];
        BIND_INT(series_insert, "position", (long long)s + 1);
        BIND_TEXT(series_insert, "preset", series->preset);
        BIND_TEXT(series_insert, "room", series->room);
        BIND_TEXT(series_insert, "exam_type", series->exam_type);
        BIND_INT(series_insert, "flagged_count", (long long)series->flagged_count);
        BIND_NUMBER(series_insert, "max_abs_z", 1, series->max_abs_z);
        status = store_scratch_run(series_insert, error);
        for (size_t w = 0; status == MITILOG_OK && w < weeks; w++) {
            const stats_drift_point *point = &series->points[w];
            char week_text[9], monday[11];
            stats_iso_week_text(point->iso_year, point->iso_week, week_text);
            stats_day_text(first_monday + 7L * (long)w, monday);
            BIND_INT(point_insert, "series_position", (long long)s + 1);
            BIND_INT(point_insert, "position", (long long)w + 1);
            BIND_TEXT(point_insert, "week", week_text);
            BIND_TEXT(point_insert, "monday", monday);
            BIND_INT(point_insert, "count", (long long)point->count);
            BIND_NUMBER(point_insert, "median", point->has_median, point->median);
            BIND_INT(point_insert, "baseline_count", (long long)point->baseline_count);
            BIND_NUMBER(point_insert, "baseline_median", point->baseline_count > 0,
                        point->baseline_median);
            BIND_NUMBER(point_insert, "baseline_mad", point->baseline_count > 0,
                        point->baseline_mad);
            BIND_NUMBER(point_insert, "z", point->has_z, point->z);
            BIND_INT(point_insert, "flagged", point->flagged);
            status = store_scratch_run(point_insert, error);
        }
    }
    if (status == MITILOG_OK)
        status = store_scratch_text(query, out, error);
    store_scratch_close(scratch);
    stats_drift_result_free(&result);
    report_data_free(&data);
    return status;
}

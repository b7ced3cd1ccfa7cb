/*
 * report_week.c - the weekly outlier list: the chosen ISO week's exams
 * against a trailing baseline per exam type (stats_week_outliers), grouped
 * by room, preset, shift, transducer or exam type; as JSON, CSV or HTML.
 */
#include "report/report_internal.h"
#include "store/store_reports.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

report_week_request report_week_default_request(void)
{
    report_week_request request;
    memset(&request, 0, sizeof request);
    request.group = STATS_BY_PRESET;
    request.settings = stats_week_default_settings();
    return request;
}

/* Everything the three formats write. */
typedef struct week_document {
    char week[9], monday[11], sunday[11], baseline_from[11], baseline_to[11];
    const report_week_request *request;
    report_data data;                            /* the week's exams */
    store_exam_list baseline;                    /* the baseline weeks' exam types and values */
    store_period_info week_info;                 /* policy facts for the week itself */
    const exam_row *week_exams, *baseline_exams; /* data.rows, baseline.rows */
    size_t *week_rows;                           /* week exam -> data row */
    size_t week_count, baseline_count;
    stats_week_result result;
    size_t captures, indexed, outliers;
    store_span baseline_span; /* what the baseline weeks hold */
} week_document;

static void week_document_free(week_document *doc)
{
    stats_week_result_free(&doc->result);
    free(doc->week_rows);
    store_period_info_free(&doc->week_info);
    store_exam_list_free(&doc->baseline);
    report_data_free(&doc->data);
}

/* Listed in a group: an outlier or an exam with findings (all with
 * request->all_exams). */
static int week_listed(const week_document *doc, size_t exam)
{
    return doc->request->all_exams || doc->result.flags[exam].is_outlier ||
           doc->week_exams[exam].finding_count > 0;
}

mitilog_status report_week_span(store *st, const report_week_request *request, int *iso_year,
                                int *iso_week, long *first_day, long *last_day,
                                mitilog_error *error)
{
    int year = request->iso_year, week = request->iso_week;
    if (!request->has_week)
        report_default_week(st, request->sites, &year, &week);
    long monday;
    if (stats_iso_week_monday(year, week, &monday) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no ISO week %d-W%02d", year, week);
    size_t baseline_weeks = request->settings.baseline_weeks;
    if (baseline_weeks == 0)
        baseline_weeks = stats_week_default_settings().baseline_weeks;
    stats_week_days(monday, baseline_weeks, first_day, last_day);
    *iso_year = year;
    *iso_week = week;
    return MITILOG_OK;
}

static mitilog_status week_compute(store *st, const report_week_request *request,
                                   week_document *doc, mitilog_error *error)
{
    memset(doc, 0, sizeof *doc);
    doc->request = request;
    int year, week;
    long first, last;
    mitilog_status span = report_week_span(st, request, &year, &week, &first, &last, error);
    if (span != MITILOG_OK)
        return span;
    long monday = last - 6;
    stats_week_settings settings = request->settings;
    if (settings.baseline_weeks == 0)
        settings.baseline_weeks = stats_week_default_settings().baseline_weeks;
    stats_iso_week_text(year, week, doc->week);
    stats_day_text(monday, doc->monday);
    stats_day_text(last, doc->sunday);
    stats_day_text(first, doc->baseline_from);
    stats_day_text(monday - 1, doc->baseline_to);

    /* The week's exams in full; of the baseline weeks only what the
     * baselines use (exam type, group, governing value). */
    mitilog_status status =
        report_data_load(st, doc->monday, doc->sunday, request->sites, STORE_EXAM_ALL,
                         REPORT_LOAD_RULES | REPORT_LOAD_INFO, &doc->data, error);
    char baseline_last[11]; /* the Sunday before the week: the rows' period is inclusive */
    stats_day_text(monday - 1, baseline_last);
    if (status == MITILOG_OK)
        status =
            store_load_exam_rows(st, doc->baseline_from, baseline_last, request->sites,
                                 report_dimension_column(request->group), &doc->baseline, error);
    if (status == MITILOG_OK)
        status = store_load_baseline_span(st, doc->baseline_from, doc->monday, request->sites,
                                          &doc->baseline_span, error);
    if (status != MITILOG_OK)
        return status;
    doc->week_info = doc->data.info;
    memset(&doc->data.info, 0, sizeof doc->data.info);
    /* The statistics read the store's rows as they are. */
    doc->week_exams = doc->data.rows;
    doc->week_count = doc->data.row_count;
    doc->week_rows = calloc(doc->week_count + 1, sizeof *doc->week_rows);
    if (doc->week_rows == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "weekly report: out of memory");
    for (size_t i = 0; i < doc->week_count; i++) {
        doc->week_rows[i] = i;
        doc->captures += doc->week_exams[i].capture_count;
        doc->indexed += doc->week_exams[i].indexed_count;
    }
    doc->baseline_exams = doc->baseline.rows;
    doc->baseline_count = doc->baseline.count;
    status =
        stats_week_outliers(doc->week_exams, doc->week_count, doc->baseline_exams,
                            doc->baseline_count, &settings, request->group, &doc->result, error);
    for (size_t i = 0; status == MITILOG_OK && i < doc->result.flag_count; i++)
        doc->outliers += doc->result.flags[i].is_outlier != 0;
    return status;
}

static double ratio(const stats_group *group)
{
    return group->has_median && group->department_median > 0
               ? group->median_governing / group->department_median
               : NAN;
}

/* The baseline remark: which exam types had a thin baseline. */
static void week_thin_types(const week_document *doc, FILE *out, int html)
{
    int first = 1;
    for (size_t b = 0; b < doc->result.baseline_count; b++) {
        const stats_baseline *base = &doc->result.baselines[b];
        if (!base->thin)
            continue;
        fputs(first ? "" : ", ", out);
        const char *name = base->exam_type != NULL ? base->exam_type : "(unclassified)";
        if (html)
            report_html_text(out, name);
        else
            fputs(name, out);
        fprintf(out, " (%zu)", base->trailing_count);
        first = 0;
    }
}

/* ---- JSON ---- */

/* The rules of a group by rule id, in byte order. */
static int rule_count_compare(const void *left, const void *right)
{
    const stats_rule_tally *a = left, *b = right;
    if (a->rule_id == NULL || b->rule_id == NULL)
        return (a->rule_id != NULL) - (b->rule_id != NULL);
    return strcmp(a->rule_id, b->rule_id);
}

static mitilog_status week_json(const week_document *doc, char **out, mitilog_error *error)
{
    json_writer json;
    json_writer_init(&json);
    json_writer *w = &json;
    const stats_week_settings *settings = &doc->request->settings;
    json_object_begin(w);
    report_meta meta = {w};
    report_meta_text(&meta, "report", "weekly_outliers");
    report_meta_text(&meta, "week", doc->week);
    report_meta_text(&meta, "from", doc->monday);
    report_meta_text(&meta, "to", doc->sunday);
    report_meta_text(&meta, "group_by", stats_dimension_name(doc->request->group));
    report_meta_int(&meta, "baseline_weeks",
                    (long long)(settings->baseline_weeks ? settings->baseline_weeks : 12));
    report_meta_text(&meta, "baseline_from", doc->baseline_from);
    report_meta_text(&meta, "baseline_to", doc->baseline_to);
    report_meta_int(&meta, "minimum_baseline", (long long)settings->minimum_baseline);
    report_meta_number(&meta, "z_limit", 1, settings->z_limit > 0 ? settings->z_limit : 3.0);
    report_meta_bool(&meta, "baseline_thin", doc->result.any_thin);
    report_meta_int(&meta, "exam_count", (long long)doc->week_count);
    report_meta_int(&meta, "baseline_exam_count", (long long)doc->baseline_count);
    /* what the baseline really holds: weeks without data are not counted */
    report_meta_text(&meta, "baseline_data_from", doc->baseline_span.first_day);
    report_meta_text(&meta, "baseline_data_to", doc->baseline_span.last_day);
    report_meta_int(&meta, "baseline_weeks_with_data", (long long)doc->baseline_span.weeks);
    report_meta_int(&meta, "outlier_count", (long long)doc->outliers);
    report_meta_sites(&meta, doc->request->sites);
    report_meta_common(&meta, &doc->week_info, doc->captures, doc->indexed);

    json_key(w, "baselines");
    json_array_begin(w);
    for (size_t b = 0; b < doc->result.baseline_count; b++) {
        const stats_baseline *base = &doc->result.baselines[b];
        json_object_begin(w);
        json_key(w, "exam_type");
        json_string(w, base->exam_type);
        json_key(w, "count");
        json_integer(w, (long long)base->count);
        json_key(w, "trailing_count");
        json_integer(w, (long long)base->trailing_count);
        json_key(w, "thin");
        json_boolean(w, base->thin);
        json_key(w, "median");
        json_number(w, base->count > 0, base->median);
        json_key(w, "mad");
        json_number(w, base->count > 0, base->mad);
        json_key(w, "p95");
        json_number(w, base->count > 0, base->p95);
        json_object_end(w);
    }
    json_array_end(w);

    mitilog_status status = MITILOG_OK;
    json_key(w, "groups");
    json_array_begin(w);
    for (size_t g = 0; status == MITILOG_OK && g < doc->result.group_count; g++) {
        const stats_group *group = &doc->result.groups[g];
        double completeness = report_completeness(group->capture_count, group->indexed_count);
        json_object_begin(w);
        json_key(w, "rank");
        json_integer(w, (long long)g + 1);
        json_key(w, "key");
        json_string(w, group->key);
        json_key(w, "exam_count");
        json_integer(w, (long long)group->exam_count);
        json_key(w, "valued_count");
        json_integer(w, (long long)group->valued_count);
        json_key(w, "outlier_count");
        json_integer(w, (long long)group->outlier_count);
        json_key(w, "outlier_rate");
        json_number(w, 1, group->outlier_rate);
        json_key(w, "median_governing");
        json_number(w, group->has_median, group->median_governing);
        json_key(w, "department_median");
        json_number(w, group->has_median, group->department_median);
        json_key(w, "median_ratio");
        json_number(w, 1, ratio(group));
        json_key(w, "median_mi");
        json_number(w, 1, group->median_mi);
        json_key(w, "captures");
        json_integer(w, (long long)group->capture_count);
        json_key(w, "captures_with_indices");
        json_integer(w, (long long)group->indexed_count);
        json_key(w, "data_completeness");
        json_number(w, 1, completeness);
        json_key(w, "finding_count");
        json_integer(w, (long long)group->finding_count);
        json_key(w, "worst_severity");
        json_string(w, report_severity_name(group->worst_severity));

        json_key(w, "findings_by_rule");
        json_array_begin(w);
        stats_rule_tally *rules = NULL;
        if (group->rule_count > 0) {
            rules = malloc(group->rule_count * sizeof *rules);
            if (rules == NULL) {
                status =
                    mitilog_error_set(error, MITILOG_ERROR_MEMORY, "weekly report: out of memory");
                break;
            }
            memcpy(rules, group->rules, group->rule_count * sizeof *rules);
            qsort(rules, group->rule_count, sizeof *rules, rule_count_compare);
        }
        for (size_t r = 0; r < group->rule_count; r++) {
            json_object_begin(w);
            json_key(w, "rule_id");
            json_string(w, rules[r].rule_id);
            json_key(w, "count");
            json_integer(w, (long long)rules[r].count);
            json_object_end(w);
        }
        free(rules);
        json_array_end(w);

        json_key(w, "exams");
        json_array_begin(w);
        for (size_t m = 0; m < group->member_count; m++) {
            size_t e = group->members[m];
            if (!week_listed(doc, e))
                continue;
            const stats_exam_flag *flag = &doc->result.flags[e];
            const stats_baseline *base = &doc->result.baselines[flag->baseline];
            const exam_row *row = &doc->data.rows[doc->week_rows[e]];
            char study_key[9];
            report_study_key(row->study_instance_uid, study_key);
            json_object_begin(w);
            json_key(w, "study_instance_uid");
            json_string(w, row->study_instance_uid);
            json_key(w, "study_key");
            json_string(w, study_key);
            json_key(w, "day");
            json_string(w, row->day);
            json_key(w, "first_acquired_at");
            json_string(w, row->first_acquired_at);
            json_key(w, "exam_type");
            json_string(w, row->exam_type);
            json_key(w, "exam_type_label");
            json_string(w, row->exam_type_label);
            json_key(w, "study_description");
            json_string(w, row->study_description);
            json_key(w, "room");
            json_string(w, row->room);
            json_key(w, "preset");
            json_string(w, row->preset);
            json_key(w, "shift");
            json_string(w, row->shift);
            json_key(w, "transducer");
            json_string(w, row->transducer);
            json_key(w, "site");
            json_string(w, row->site);
            json_key(w, "governing_index");
            json_string(w, row->governing_index);
            json_key(w, "max_governing");
            json_number(w, row->has_governing, row->max_governing);
            json_key(w, "max_mi");
            json_number(w, row->has_mi, row->max_mi);
            json_key(w, "robust_z");
            json_number(w, 1, flag->robust_z);
            json_key(w, "above_robust_z");
            json_boolean(w, flag->above_robust_z);
            json_key(w, "above_p95");
            json_boolean(w, flag->above_p95);
            json_key(w, "outlier");
            json_boolean(w, flag->is_outlier);
            json_key(w, "finding_count");
            json_integer(w, (long long)doc->week_exams[e].finding_count);
            json_key(w, "baseline_thin");
            json_boolean(w, base->thin);
            json_key(w, "baseline_without_group");
            json_boolean(w, flag->without_group);
            json_key(w, "baseline_median");
            json_number(w, flag->compared_count > 0, flag->compared_median);
            json_key(w, "baseline_p95");
            json_number(w, flag->compared_count > 0, flag->compared_p95);
            json_key(w, "estimated_seconds");
            json_number(w, 1, row->estimated_seconds);
            json_object_end(w);
        }
        json_array_end(w);
        json_object_end(w);
    }
    json_array_end(w);
    json_object_end(w);
    if (status == MITILOG_OK)
        status = json_writer_take(w, out, error);
    json_writer_free(w);
    return status;
}

/* ---- CSV ---- */

static const char *const week_csv_columns[] = {"record",
                                               "week",
                                               "group_by",
                                               "group",
                                               "rank",
                                               "exams",
                                               "outliers",
                                               "outlier_rate",
                                               "median_governing",
                                               "department_median",
                                               "median_mi",
                                               "findings",
                                               "data_completeness",
                                               "study_key",
                                               "day",
                                               "exam_type",
                                               "room",
                                               "preset",
                                               "shift",
                                               "transducer",
                                               "governing_index",
                                               "max_governing",
                                               "max_mi",
                                               "robust_z",
                                               "reason",
                                               "policy_version",
                                               "note"};
enum { WEEK_CSV_COLUMNS = sizeof week_csv_columns / sizeof week_csv_columns[0] };

static void csv_empty(FILE *out, int count)
{
    for (int i = 0; i < count; i++)
        fputc(',', out);
}

static void week_csv(const week_document *doc, FILE *out)
{
    const char *group_by = stats_dimension_name(doc->request->group);
    for (int c = 0; c < WEEK_CSV_COLUMNS; c++)
        report_csv_field(out, c == 0, week_csv_columns[c]);
    report_csv_end(out);
    char policy[256], note[1024];
    double completeness = report_completeness(doc->captures, doc->indexed);
    /* record "report": the facts of the whole list */
    snprintf(note, sizeof note, "%s Period %s to %s; baseline %s to %s%s.", report_caution,
             doc->monday, doc->sunday, doc->baseline_from, doc->baseline_to,
             doc->result.any_thin ? " (thin for some exam types: the week's own exams added)" : "");
    report_csv_field(out, 1, "report");
    report_csv_field(out, 0, doc->week);
    report_csv_field(out, 0, group_by);
    csv_empty(out, 2);
    report_csv_count(out, doc->week_count);
    report_csv_count(out, doc->outliers);
    csv_empty(out, 5);
    report_csv_number(out, isfinite(completeness), completeness);
    csv_empty(out, 12);
    report_csv_field(out, 0, report_policy_text(&doc->week_info, policy, sizeof policy));
    report_csv_field(out, 0, note);
    report_csv_end(out);
    for (size_t g = 0; g < doc->result.group_count; g++) {
        const stats_group *group = &doc->result.groups[g];
        double group_completeness = report_completeness(group->capture_count, group->indexed_count);
        report_csv_field(out, 1, "group");
        report_csv_field(out, 0, doc->week);
        report_csv_field(out, 0, group_by);
        report_csv_field(out, 0, group->key != NULL ? group->key : "");
        report_csv_count(out, g + 1);
        report_csv_count(out, group->exam_count);
        report_csv_count(out, group->outlier_count);
        report_csv_number(out, 1, group->outlier_rate);
        report_csv_number(out, group->has_median, group->median_governing);
        report_csv_number(out, group->has_median, group->department_median);
        report_csv_number(out, 1, group->median_mi);
        report_csv_count(out, group->finding_count);
        report_csv_number(out, isfinite(group_completeness), group_completeness);
        csv_empty(out, 12);
        report_csv_field(out, 0, doc->week_info.policy_version);
        report_csv_field(out, 0, "");
        report_csv_end(out);
        for (size_t m = 0; m < group->member_count; m++) {
            size_t e = group->members[m];
            if (!week_listed(doc, e))
                continue;
            const stats_exam_flag *flag = &doc->result.flags[e];
            const exam_row *row = &doc->data.rows[doc->week_rows[e]];
            char reason[128];
            snprintf(reason, sizeof reason, "%s%s%s%s",
                     flag->above_robust_z ? "robust z > limit" : "",
                     flag->above_robust_z && flag->above_p95 ? "; " : "",
                     flag->above_p95 ? "above baseline P95" : "",
                     row->finding_count > 0 ? (flag->is_outlier ? "; findings" : "findings") : "");
            report_csv_field(out, 1, "exam");
            report_csv_field(out, 0, doc->week);
            report_csv_field(out, 0, group_by);
            report_csv_field(out, 0, group->key != NULL ? group->key : "");
            report_csv_count(out, g + 1);
            csv_empty(out, 6);
            report_csv_count(out, (size_t)(row->finding_count > 0 ? row->finding_count : 0));
            csv_empty(out, 1);
            char study_key[9];
            report_study_key(row->study_instance_uid, study_key);
            report_csv_field(out, 0, study_key);
            report_csv_field(out, 0, row->day);
            report_csv_field(out, 0, row->exam_type);
            report_csv_field(out, 0, row->room);
            report_csv_field(out, 0, row->preset);
            report_csv_field(out, 0, row->shift);
            report_csv_field(out, 0, row->transducer);
            report_csv_field(out, 0, row->governing_index);
            report_csv_number(out, row->has_governing, row->max_governing);
            report_csv_number(out, row->has_mi, row->max_mi);
            report_csv_number(out, 1, flag->robust_z);
            report_csv_field(out, 0, reason);
            report_csv_field(out, 0, doc->week_info.policy_version);
            report_csv_field(out, 0, "");
            report_csv_end(out);
        }
    }
}

/* ---- HTML ---- */

static void html_cell_text(FILE *out, const char *text)
{
    fputs("<td>", out);
    report_html_text(out, text != NULL ? text : "(not recorded)");
    fputs("</td>", out);
}

/* A number with fixed decimals ("—" when absent). */
static void html_cell_fixed(FILE *out, int present, double value, int decimals)
{
    fputs("<td class=\"n\">", out);
    if (present && isfinite(value))
        fprintf(out, "%.*f", decimals, value);
    else
        fputs("&mdash;", out);
    fputs("</td>", out);
}

static const char week_css[] =
    "table.exams{font-size:8pt}table.exams td,table.exams th{padding:.05em .3em}\n"
    "table.exams td{white-space:nowrap}\n"
    "table.exams tr.group th{background:#f3f6f6;text-align:left}\n"
    "table.groups{font-size:8.5pt}table.groups td,table.groups th{padding:.05em .3em}\n"
    "@media print{body{font-size:8.5pt}h2{margin:.6em 0 .2em}}\n";

static void week_html(const week_document *doc, FILE *out)
{
    const char *group_by = stats_dimension_name(doc->request->group);
    char title[128], period[160];
    snprintf(title, sizeof title, "Weekly outlier list %s, by %s", doc->week, group_by);
    snprintf(period, sizeof period, "ISO week %s: %s to %s (local dates)", doc->week, doc->monday,
             doc->sunday);
    report_html_begin(out, title, period, &doc->week_info,
                      report_completeness(doc->captures, doc->indexed), doc->captures,
                      doc->indexed);
    if (doc->baseline_span.exams > 0)
        fprintf(out,
                "<p>%zu exams this week, %zu outliers. Baseline: each exam type's exams "
                "of the weeks before; the data held runs from %s to %s (%ld weeks with "
                "data; %ld exams). An exam is an outlier when its highest governing "
                "thermal index is high: robust z above ",
                doc->week_count, doc->outliers, doc->baseline_span.first_day,
                doc->baseline_span.last_day, doc->baseline_span.weeks, doc->baseline_span.exams);
    else
        fprintf(out,
                "<p>%zu exams this week, %zu outliers. Baseline: no exam before this "
                "week, so each exam type is compared with the week's own exams. An exam "
                "is an outlier when its highest governing thermal index is high: robust "
                "z above ",
                doc->week_count, doc->outliers);
    report_html_number(
        out, 1, doc->request->settings.z_limit > 0 ? doc->request->settings.z_limit : 3.0, 3);
    fputs(" (a rise; a low value is never flagged) or above the baseline's 95th percentile.", out);
    if (doc->result.any_thin) {
        fputs(" <strong>Baseline thin</strong> (fewer than ", out);
        fprintf(out, "%zu exams; the week's own exams were added) for: ",
                doc->request->settings.minimum_baseline);
        week_thin_types(doc, out, 1);
        fputs(".", out);
    }
    fputs("</p>\n<style>", out);
    fputs(week_css, out);
    fputs("</style>\n<h2>Groups</h2>\n<table class=\"groups\"><thead><tr><th>Rank</th><th>", out);
    report_html_text(out, group_by);
    fputs("</th><th>Exams</th><th>Outliers</th><th>Rate</th><th>Median governing TI</th>"
          "<th>Department median (same exam types)</th><th>Median MI</th><th>Findings (most "
          "severe)</th>"
          "<th>Captures with indices</th></tr></thead><tbody>\n",
          out);
    for (size_t g = 0; g < doc->result.group_count; g++) {
        const stats_group *group = &doc->result.groups[g];
        double completeness = report_completeness(group->capture_count, group->indexed_count);
        fprintf(out, "<tr><td class=\"n\">%zu</td>", g + 1);
        html_cell_text(out, group->key);
        fprintf(out, "<td class=\"n\">%zu</td><td class=\"n\">%zu</td>", group->exam_count,
                group->outlier_count);
        fprintf(out, "<td class=\"n\">%.0f %%</td>", 100.0 * group->outlier_rate);
        html_cell_fixed(out, group->has_median, group->median_governing, 2);
        html_cell_fixed(out, group->has_median, group->department_median, 2);
        html_cell_fixed(out, 1, group->median_mi, 2);
        const char *severity = report_severity_name(group->worst_severity);
        fprintf(out, "<td class=\"n\">%zu%s%s%s</td>", group->finding_count,
                severity != NULL ? " (" : "", severity != NULL ? severity : "",
                severity != NULL ? ")" : "");
        fputs("<td class=\"n\">", out);
        if (isfinite(completeness))
            fprintf(out, "%.0f %%", 100.0 * completeness);
        else
            fputs("&mdash;", out);
        fputs("</td></tr>\n", out);
    }
    fputs("</tbody></table>\n", out);
    /* The listed exams in one table, a heading row per group, one line per
     * exam: the grouping column is left out (the heading says it), the
     * reason is short words that do not wrap, numbers have fixed decimals,
     * so that the busiest week prints on two A4 pages. */
    int any_listed = 0;
    for (size_t g = 0; g < doc->result.group_count; g++) {
        const stats_group *group = &doc->result.groups[g];
        size_t listed = 0;
        for (size_t m = 0; m < group->member_count; m++)
            listed += week_listed(doc, group->members[m]) != 0;
        if (listed == 0)
            continue;
        stats_dimension by = doc->request->group;
        if (!any_listed) {
            fputs("<h2>Listed exams</h2>\n<table class=\"exams\"><thead><tr><th>Study key</th>"
                  "<th>Day</th><th>Exam type</th>",
                  out);
            if (by != STATS_BY_ROOM)
                fputs("<th>Room</th>", out);
            if (by != STATS_BY_PRESET)
                fputs("<th>Preset</th>", out);
            if (by != STATS_BY_SHIFT)
                fputs("<th>Shift</th>", out);
            if (by != STATS_BY_TRANSDUCER)
                fputs("<th>Transducer</th>", out);
            fputs("<th>Index</th><th>Max</th><th>Max MI</th><th>Robust z</th>"
                  "<th>Why listed</th></tr></thead><tbody>\n",
                  out);
            any_listed = 1;
        }
        int columns = 8 + (by != STATS_BY_ROOM) + (by != STATS_BY_PRESET) + (by != STATS_BY_SHIFT) +
                      (by != STATS_BY_TRANSDUCER);
        fprintf(out, "<tr class=\"group\"><th colspan=\"%d\">", columns);
        report_html_text(out, group->key != NULL ? group->key : "(not recorded)");
        fprintf(out, ": %zu exam%s listed</th></tr>\n", listed, listed == 1 ? "" : "s");
        for (size_t m = 0; m < group->member_count; m++) {
            size_t e = group->members[m];
            if (!week_listed(doc, e))
                continue;
            const stats_exam_flag *flag = &doc->result.flags[e];
            const exam_row *row = &doc->data.rows[doc->week_rows[e]];
            fputs("<tr>", out);
            char study_key[9];
            report_study_key(row->study_instance_uid, study_key);
            html_cell_text(out, study_key);
            html_cell_text(out, row->day);
            html_cell_text(out,
                           row->exam_type_label != NULL ? row->exam_type_label : row->exam_type);
            if (by != STATS_BY_ROOM)
                html_cell_text(out, row->room);
            if (by != STATS_BY_PRESET)
                html_cell_text(out, row->preset);
            if (by != STATS_BY_SHIFT)
                html_cell_text(out, row->shift);
            if (by != STATS_BY_TRANSDUCER)
                html_cell_text(out, row->transducer);
            fputs("<td>", out);
            for (const char *c = row->governing_index; c != NULL && *c != '\0'; c++)
                fputc(*c >= 'a' && *c <= 'z' ? *c - 'a' + 'A' : *c, out);
            if (row->governing_index == NULL)
                fputs("(not recorded)", out);
            fputs("</td>", out);
            html_cell_fixed(out, row->has_governing, row->max_governing, 2);
            html_cell_fixed(out, row->has_mi, row->max_mi, 2);
            html_cell_fixed(out, 1, flag->robust_z, 1);
            fputs("<td class=\"why\">", out);
            const char *separator = "";
            if (flag->above_robust_z) {
                fputs("z above limit", out);
                separator = "; ";
            }
            if (flag->above_p95) {
                fprintf(out, "%sabove P95", separator);
                separator = "; ";
            }
            if (row->finding_count > 0)
                fprintf(out, "%s%zu finding%s", separator, row->finding_count,
                        row->finding_count == 1 ? "" : "s");
            fputs("</td></tr>\n", out);
        }
    }
    if (any_listed)
        fputs("</tbody></table>\n", out);
    report_html_end(out);
}

mitilog_status report_week(store *st, const report_week_request *request, report_format format,
                           char **out, mitilog_error *error)
{
    *out = NULL;
    report_week_request defaults = report_week_default_request();
    if (request == NULL)
        request = &defaults;
    week_document doc;
    mitilog_status status = week_compute(st, request, &doc, error);
    if (status == MITILOG_OK) {
        if (format == REPORT_JSON) {
            status = week_json(&doc, out, error);
        } else {
            report_buffer buffer;
            status = report_buffer_open(&buffer, error);
            if (status == MITILOG_OK) {
                if (format == REPORT_CSV)
                    week_csv(&doc, buffer.file);
                else
                    week_html(&doc, buffer.file);
                status = report_buffer_finish(&buffer, out, error);
            }
        }
    }
    week_document_free(&doc);
    return status;
}

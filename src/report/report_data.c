/* report_data.c - loading a period and the CSV/HTML helpers. */
#include "report/report_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "util/hash.h"
#include "store/store_reports.h"

const char report_caution[] =
    "Advisory: these figures are estimates from the indices the equipment displayed. "
    "They do not replace the department's safety policy, its medical physicist or "
    "local regulation, which decide.";

int report_format_parse(const char *name, report_format *format)
{
    static const char *const names[] = {"json", "csv", "html"};
    for (int i = 0; name != NULL && i < 3; i++) {
        if (strcmp(name, names[i]) == 0) {
            *format = (report_format)i;
            return 0;
        }
    }
    return -1;
}

void report_data_free(report_data *data)
{
    store_exam_list_free(&data->list);
    store_finding_counts_free(&data->findings);
    store_period_info_free(&data->info);
    memset(data, 0, sizeof *data);
}

unsigned report_dimension_column(stats_dimension dimension)
{
    switch (dimension) {
    case STATS_BY_ROOM: return STORE_EXAM_ROOM;
    case STATS_BY_PRESET: return STORE_EXAM_PRESET;
    case STATS_BY_SHIFT: return STORE_EXAM_SHIFT;
    case STATS_BY_TRANSDUCER: return STORE_EXAM_TRANSDUCER;
    case STATS_BY_EXAM_TYPE: break;
    }
    return 0;
}

void report_study_key(const char *study_instance_uid, char key[9])
{
    char hex[HASH_HEX_SIZE];
    key[0] = '\0';
    if (study_instance_uid != NULL && hash_text_hex(study_instance_uid, hex) == MITILOG_OK) {
        memcpy(key, hex, 8);
        key[8] = '\0';
    }
}

mitilog_status report_data_load(store *st, const char *from, const char *to, unsigned columns,
                                unsigned load, report_data *data, mitilog_error *error)
{
    memset(data, 0, sizeof *data);
    if (load & REPORT_LOAD_RULES)
        columns |= STORE_EXAM_IDENTITY;
    mitilog_status status = store_load_exam_rows(st, from, to, columns, &data->list, error);
    data->rows = data->list.rows;
    data->row_count = data->list.count;
    if (status == MITILOG_OK && (load & REPORT_LOAD_RULES))
        status = store_load_finding_counts(st, from, to, &data->findings, error);
    if (status == MITILOG_OK && (load & REPORT_LOAD_INFO))
        status = store_load_period_info(st, from, to, &data->info, error);
    if (status != MITILOG_OK) {
        report_data_free(data);
        return status;
    }
    size_t f = 0;
    for (size_t i = 0; i < data->row_count; i++) {
        exam_row *row = &data->rows[i];
        data->capture_count += row->capture_count;
        data->indexed_count += row->indexed_count;
        /* Both lists are ordered by Study Instance UID (SQLite's BINARY
         * collation is strcmp order). */
        const store_finding_counts *findings = &data->findings;
        while (f < findings->count && row->study_instance_uid != NULL &&
               strcmp(findings->study_instance_uids[f], row->study_instance_uid) < 0)
            f++;
        size_t first = f;
        while (f < findings->count && row->study_instance_uid != NULL &&
               strcmp(findings->study_instance_uids[f], row->study_instance_uid) == 0)
            f++;
        row->rules = f > first ? &findings->counts[first] : NULL;
        row->rule_count = f - first;
    }
    return MITILOG_OK;
}

long report_last_complete_day(store *st)
{
    /* The latest exam day, on the same days the weeks are counted on
     * (exam_summaries.day); the first acquisition's day when none. */
    store_span all;
    mitilog_error ignored;
    long latest = -1;
    if (store_load_baseline_span(st, "0000-01-01", "9999-12-31", &all, &ignored) != MITILOG_OK ||
        all.last_day[0] == '\0' || stats_day_number(all.last_day, &latest) != MITILOG_OK)
        latest = report_latest_day(st);
    /* day 0 (1970-01-01) was a Thursday: Monday is 0 in (day + 3) mod 7 */
    long weekday = ((latest + 3) % 7 + 7) % 7;
    if (weekday == 6)
        return latest; /* a Sunday: its week is complete */
    char monday[11];
    stats_day_text(latest - weekday, monday);
    store_span span;
    long day = latest;
    if (store_load_baseline_span(st, "0000-01-01", monday, &span, &ignored) == MITILOG_OK &&
        span.last_day[0] != '\0' && stats_day_number(span.last_day, &day) != MITILOG_OK)
        day = latest;
    return day;
}

const char *report_severity_name(int rank)
{
    switch (rank) {
    case EXAM_SEVERITY_RANK_VIOLATION: return "violation";
    case EXAM_SEVERITY_RANK_WARNING: return "warning";
    case EXAM_SEVERITY_RANK_ADVISORY: return "advisory";
    default: return NULL;
    }
}

void report_default_week(store *st, int *iso_year, int *iso_week)
{
    stats_iso_week_of_day(report_last_complete_day(st), iso_year, iso_week);
}

long report_latest_day(store *st)
{
    char *first = NULL, *last = NULL;
    mitilog_error ignored;
    long day = -1;
    if (store_load_day_range(st, &first, &last, &ignored) == MITILOG_OK) {
        if (last == NULL || stats_day_number(last, &day) != MITILOG_OK)
            day = -1;
    }
    free(first);
    free(last);
    if (day < 0) {
        time_t now = time(NULL);
        struct tm local;
        char text[16];
        localtime_r(&now, &local);
        strftime(text, sizeof text, "%Y-%m-%d", &local);
        if (stats_day_number(text, &day) != MITILOG_OK)
            day = 0;
    }
    return day;
}

double report_completeness(size_t captures, size_t indexed)
{
    return captures > 0 ? (double)indexed / (double)captures : NAN;
}

mitilog_status report_buffer_open(report_buffer *buffer, mitilog_error *error)
{
    buffer->text = NULL;
    buffer->length = 0;
    buffer->file = open_memstream(&buffer->text, &buffer->length);
    if (buffer->file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "report: no memory stream");
    return MITILOG_OK;
}

mitilog_status report_buffer_finish(report_buffer *buffer, char **out, mitilog_error *error)
{
    int failed = ferror(buffer->file);
    if (fclose(buffer->file) != 0)
        failed = 1;
    buffer->file = NULL;
    if (failed || buffer->text == NULL) {
        free(buffer->text);
        buffer->text = NULL;
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "report: writing failed");
    }
    *out = buffer->text;
    buffer->text = NULL;
    return MITILOG_OK;
}

void report_csv_field(FILE *out, int first, const char *text)
{
    if (!first)
        fputc(',', out);
    if (text == NULL)
        return;
    if (strpbrk(text, ",\"\r\n") == NULL) {
        fputs(text, out);
        return;
    }
    fputc('"', out);
    for (const char *c = text; *c != '\0'; c++) {
        if (*c == '"')
            fputc('"', out);
        fputc(*c, out);
    }
    fputc('"', out);
}

void report_csv_number(FILE *out, int present, double value)
{
    fputc(',', out);
    if (present && isfinite(value))
        fprintf(out, "%.6g", value);
}

void report_csv_count(FILE *out, size_t value) { fprintf(out, ",%zu", value); }

void report_csv_end(FILE *out) { fputs("\r\n", out); }

void report_html_text(FILE *out, const char *text)
{
    if (text == NULL)
        return;
    for (const char *c = text; *c != '\0'; c++) {
        switch (*c) {
        case '&': fputs("&amp;", out); break;
        case '<': fputs("&lt;", out); break;
        case '>': fputs("&gt;", out); break;
        case '"': fputs("&quot;", out); break;
        case '\'': fputs("&#39;", out); break;
        default: fputc(*c, out);
        }
    }
}

void report_html_number(FILE *out, int present, double value, int digits)
{
    if (present && isfinite(value))
        fprintf(out, "%.*g", digits, value);
    else
        fputs("&mdash;", out);
}

const char *report_policy_text(const store_period_info *info, char *buffer, size_t size)
{
    if (info->policy_version == NULL)
        snprintf(buffer, size,
                 "none recorded (no exam of this period has been evaluated "
                 "by the policy engine)");
    else
        snprintf(buffer, size, "%s%s%s%s", info->policy_version,
                 info->policy_name != NULL ? " (" : "",
                 info->policy_name != NULL ? info->policy_name : "",
                 info->policy_name != NULL ? ")" : "");
    return buffer;
}

static const char report_css[] =
    "body{font-family:'DejaVu Sans',Arial,sans-serif;color:#1d2a2f;margin:1.5em;"
    "font-size:10.5pt;line-height:1.35}\n"
    "h1{font-size:16pt;margin:0 0 .2em}h2{font-size:12.5pt;margin:1.2em 0 .3em;"
    "border-bottom:1px solid #8aa3a8}h3{font-size:11pt;margin:.8em 0 .2em}\n"
    ".caution{border:1px solid #7a6a2f;background:#fbf6e4;padding:.4em .6em;margin:.6em 0}\n"
    "dl.facts{display:grid;grid-template-columns:max-content auto;gap:.1em 1em;margin:.5em 0}\n"
    "dl.facts dt{font-weight:bold}dl.facts dd{margin:0;word-break:break-all}\n"
    "table{border-collapse:collapse;margin:.3em 0 .8em;width:100%}\n"
    "th,td{border:1px solid #b7c6c9;padding:.15em .4em;text-align:left;vertical-align:top}\n"
    "th{background:#e8eff0}td.n{text-align:right;font-variant-numeric:tabular-nums}\n"
    ".flag{font-weight:bold}.note{color:#44565b}\n"
    "@media print{body{margin:0;font-size:9pt}.caution{background:none}"
    "h2{break-after:avoid}tr{break-inside:avoid}}\n"
    "@page{size:A4;margin:14mm}\n";

void report_html_begin(FILE *out, const char *title, const char *period,
                       const store_period_info *info, double completeness, size_t captures,
                       size_t indexed)
{
    char policy[256];
    fputs("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n<title>", out);
    report_html_text(out, title);
    fputs("</title>\n<style>\n", out);
    fputs(report_css, out);
    fputs("</style></head><body>\n<h1>", out);
    report_html_text(out, title);
    fputs("</h1>\n<p class=\"caution\">", out);
    report_html_text(out, report_caution);
    fputs("</p>\n<dl class=\"facts\"><dt>Period</dt><dd>", out);
    report_html_text(out, period);
    fputs("</dd><dt>Policy version</dt><dd>", out);
    report_html_text(out, report_policy_text(info, policy, sizeof policy));
    if (info->finding_policy_versions != NULL) {
        fputs("; findings shown from: ", out);
        report_html_text(out, info->finding_policy_versions);
    }
    fputs("</dd><dt>Data completeness</dt><dd>", out);
    if (isfinite(completeness))
        fprintf(out, "%.1f %% of captures carry indices (%zu of %zu)", 100.0 * completeness,
                indexed, captures);
    else
        fputs("no captures in this period", out);
    fputs("</dd><dt>Produced by</dt><dd>mitilog " MITILOG_VERSION "</dd></dl>\n", out);
}

void report_html_end(FILE *out)
{
    fputs("<p class=\"note\">Times are estimates from the exam timeline (docs/extraction.md); "
          "percentiles use the inclusive method (Hyndman &amp; Fan type 7).</p>\n"
          "</body></html>\n",
          out);
}

void report_meta_text(report_meta *meta, const char *name, const char *text)
{
    json_key(meta->writer, name);
    json_string(meta->writer, text);
}

void report_meta_number(report_meta *meta, const char *name, int present, double value)
{
    json_key(meta->writer, name);
    /* integral values as integers: 3 for 3.0, as these members always read */
    if (present && isfinite(value) && value == floor(value) && value > -9.2e18 && value < 9.2e18)
        json_integer(meta->writer, (long long)value);
    else
        json_number(meta->writer, present, value);
}

void report_meta_int(report_meta *meta, const char *name, long long value)
{
    json_key(meta->writer, name);
    json_integer(meta->writer, value);
}

void report_meta_bool(report_meta *meta, const char *name, int value)
{
    json_key(meta->writer, name);
    json_boolean(meta->writer, value);
}

void report_meta_common(report_meta *meta, const store_period_info *info, size_t captures,
                        size_t indexed)
{
    report_meta_text(meta, "policy_version", info->policy_version);
    report_meta_text(meta, "policy_name", info->policy_name);
    report_meta_text(meta, "finding_policy_versions", info->finding_policy_versions);
    double completeness = report_completeness(captures, indexed);
    report_meta_number(meta, "data_completeness", isfinite(completeness), completeness);
    report_meta_int(meta, "captures", (long long)captures);
    report_meta_int(meta, "captures_with_indices", (long long)indexed);
    report_meta_text(meta, "data_first_day", info->first_day);
    report_meta_text(meta, "data_last_day", info->last_day);
    report_meta_text(meta, "caution", report_caution);
}

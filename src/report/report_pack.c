/*
 * report_pack.c - the statistics of a period as a printable document
 * (`mitilog report stats --format html`): institution, period, policy
 * version, one row per exam type with its label and governing index, the
 * exams with and without a value, percentiles saying over how many exams,
 * time at or above each TI threshold, the share with findings, one chart
 * per row (a histogram of each exam's highest governing index drawn here
 * as inline SVG), the caution once and a sign-off block.
 *
 * Numbers are printed with fixed decimals: indices 2, minutes 1, shares
 * as whole percentages; the CSV and JSON carry the same values unrounded.
 * Every cell holding a number carries data-field (the CSV column name) so
 * that the document can be checked against the CSV.
 */
#include "report/report_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

enum { PACK_INDEX_DECIMALS = 2, PACK_MINUTE_DECIMALS = 1 };

/* What the document says of one row of the table: the exam type's label
 * and governing index as the exams of that type recorded them. */
typedef struct pack_row_facts {
    const char *label;     /* NULL: none recorded */
    const char *governing; /* NULL: none recorded; "mixed" when they differ */
} pack_row_facts;

static int pack_same(const char *a, const char *b)
{
    return a != NULL && b != NULL && strcmp(a, b) == 0;
}

static int pack_key_matches(const exam_row *exam, stats_dimension by, const char *key)
{
    const char *value = stats_exam_key(exam, by);
    return key == NULL ? value == NULL : pack_same(value, key);
}

/* The index name as the trade writes it: "tis" -> "TIS". */
static void pack_index_text(FILE *out, const char *name)
{
    if (name == NULL || strcmp(name, "mixed") == 0) {
        report_html_text(out, name != NULL ? "mixed" : "not recorded");
        return;
    }
    for (const char *c = name; *c != '\0'; c++)
        fputc(*c >= 'a' && *c <= 'z'
                  ? *c - 'a' + 'A'
                  : (*c == '<' || *c == '>' || *c == '&' || *c == '"' || *c == '\'' ? '?' : *c),
              out);
}

static pack_row_facts pack_facts(const report_pack_input *in, const char *key)
{
    pack_row_facts facts = {NULL, NULL};
    int mixed = 0;
    for (size_t i = 0; i < in->data->row_count; i++) {
        const exam_row *row = &in->data->rows[i];
        if (!pack_key_matches(row, in->by, key))
            continue;
        if (facts.label == NULL)
            facts.label = row->exam_type_label;
        if (row->governing_index != NULL) {
            if (facts.governing == NULL)
                facts.governing = row->governing_index;
            else if (!pack_same(facts.governing, row->governing_index))
                mixed = 1;
        }
    }
    if (mixed)
        facts.governing = "mixed";
    return facts;
}

void report_pack_row_facts(const report_data *data, stats_dimension by, const char *key,
                           const char **label, const char **governing)
{
    report_pack_input in = {NULL, NULL, by, NULL, data, NULL};
    pack_row_facts facts = pack_facts(&in, key);
    *label = facts.label;
    *governing = facts.governing;
}

static void pack_fixed(FILE *out, int present, double value, int decimals)
{
    if (present && isfinite(value))
        fprintf(out, "%.*f", decimals, value);
    else
        fputs("&mdash;", out);
}

static void pack_cell(FILE *out, const char *field, int present, double value, int decimals)
{
    fprintf(out, "<td class=\"n\" data-field=\"%s\">", field);
    pack_fixed(out, present, value, decimals);
    fputs("</td>", out);
}

static void pack_count_cell(FILE *out, const char *field, size_t value)
{
    fprintf(out, "<td class=\"n\" data-field=\"%s\">%zu</td>", field, value);
}

/* The threshold as the CSV column names write it: 0.7 -> "0_7". */
static void pack_threshold_name(double threshold, char *name, size_t size)
{
    snprintf(name, size, "%.1f", threshold);
    for (char *c = name; *c != '\0'; c++)
        if (*c == '.')
            *c = '_';
}

static const char *pack_key_text(const report_pack_input *in, const char *key,
                                 const pack_row_facts *facts)
{
    if (in->by == STATS_BY_EXAM_TYPE) {
        if (facts->label != NULL && facts->label[0] != '\0')
            return facts->label;
        return key != NULL ? key : "Not classified";
    }
    return key != NULL ? key : "Not recorded";
}

static void pack_distribution_row(const report_pack_input *in, FILE *out,
                                  const stats_period_row *row, const char *key, int total)
{
    pack_row_facts facts = total ? (pack_row_facts){NULL, NULL} : pack_facts(in, key);
    const stats_distribution *g = &row->governing, *mi = &row->mi;
    fputs(total ? "<tr class=\"total\" data-key=\"(all)\"><th scope=\"row\">All exams"
                : "<tr data-key=\"",
          out);
    if (!total) {
        report_html_text(out, key != NULL ? key : "(not recorded)");
        fputs("\"><th scope=\"row\">", out);
        report_html_text(out, pack_key_text(in, key, &facts));
    }
    fputs("</th>", out);
    if (in->by == STATS_BY_EXAM_TYPE) {
        fputs("<td>", out);
        if (total)
            fputs("per exam type", out);
        else
            pack_index_text(out, facts.governing);
        fputs("</td>", out);
    }
    pack_count_cell(out, "exams", row->exam_count);
    pack_count_cell(out, "governing_n", g->count);
    pack_count_cell(out, "governing_without_value", row->exam_count - g->count);
    pack_cell(out, "governing_median", g->count > 0, g->median, PACK_INDEX_DECIMALS);
    pack_cell(out, "governing_p75", g->count > 0, g->p75, PACK_INDEX_DECIMALS);
    pack_cell(out, "governing_p95", g->count > 0, g->p95, PACK_INDEX_DECIMALS);
    pack_cell(out, "governing_max", g->count > 0, g->maximum, PACK_INDEX_DECIMALS);
    pack_count_cell(out, "mi_n", mi->count);
    pack_cell(out, "mi_median", mi->count > 0, mi->median, PACK_INDEX_DECIMALS);
    pack_cell(out, "mi_p75", mi->count > 0, mi->p75, PACK_INDEX_DECIMALS);
    pack_cell(out, "mi_p95", mi->count > 0, mi->p95, PACK_INDEX_DECIMALS);
    fputs("</tr>\n", out);
}

static void pack_time_row(const report_pack_input *in, FILE *out, const stats_period_row *row,
                          const char *key, int total)
{
    pack_row_facts facts = total ? (pack_row_facts){NULL, NULL} : pack_facts(in, key);
    fputs(total ? "<tr class=\"total\" data-key=\"(all)\"><th scope=\"row\">All exams"
                : "<tr data-key=\"",
          out);
    if (!total) {
        report_html_text(out, key != NULL ? key : "(not recorded)");
        fputs("\"><th scope=\"row\">", out);
        report_html_text(out, pack_key_text(in, key, &facts));
    }
    fputs("</th>", out);
    pack_count_cell(out, "exams_with_findings", row->with_findings_count);
    fputs("<td class=\"n\" data-field=\"share_with_findings_percent\">", out);
    pack_fixed(out, row->exam_count > 0, 100.0 * row->share_with_findings, 0);
    fputs("&nbsp;%</td>", out);
    pack_count_cell(out, "exams_informational_only", row->informational_only_count);
    const stats_distribution *est = &row->estimated_seconds;
    pack_cell(out, "estimated_minutes_median", est->count > 0, est->median / 60.0,
              PACK_MINUTE_DECIMALS);
    for (int t = 0; t < EXAM_TI_STATISTICS_STEPS; t++) {
        const stats_threshold_time *time = &row->thresholds[t];
        char name[16], field[64];
        pack_threshold_name(time->threshold, name, sizeof name);
        snprintf(field, sizeof field, "exams_at_or_above_%s", name);
        pack_count_cell(out, field, time->exam_count);
        snprintf(field, sizeof field, "minutes_at_or_above_%s_p95", name);
        pack_cell(out, field, row->governing.count > 0, time->p95_seconds / 60.0,
                  PACK_MINUTE_DECIMALS);
    }
    fputs("</tr>\n", out);
}

/* A round step (1, 2 or 5 x 10^n) giving at most about `ticks` intervals
 * over span (common practice, no source). */
static double pack_round_step(double span, int ticks)
{
    if (!(span > 0))
        return 1.0;
    double raw = span / ticks;
    double power = pow(10.0, floor(log10(raw)));
    double fraction = raw / power;
    double step = fraction <= 1.0 ? 1.0 : fraction <= 2.0 ? 2.0 : fraction <= 5.0 ? 5.0 : 10.0;
    return step * power;
}

/* The chart's scale, common to every chart of the document so that they
 * compare: 0 to the highest value held, rounded up to a tick. */
typedef struct pack_scale {
    double top, tick, bin;
    int bins;
} pack_scale;

static pack_scale pack_scale_of(const report_pack_input *in)
{
    double highest = 0.0;
    for (size_t i = 0; i < in->data->row_count; i++)
        if (in->data->rows[i].has_governing && in->data->rows[i].max_governing > highest)
            highest = in->data->rows[i].max_governing;
    pack_scale scale;
    scale.tick = pack_round_step(highest > 0 ? highest : 1.0, 5);
    scale.top = ceil((highest > 0 ? highest : 1.0) / scale.tick - 1e-9) * scale.tick;
    if (scale.top <= highest)
        scale.top += scale.tick;
    scale.bin = pack_round_step(scale.top, 40);
    scale.bins = (int)lround(scale.top / scale.bin);
    if (scale.bins < 1)
        scale.bins = 1;
    return scale;
}

enum {
    CHART_WIDTH = 300,
    CHART_HEIGHT = 130,
    CHART_LEFT = 30,
    CHART_RIGHT = 8,
    CHART_TOP = 8,
    CHART_BOTTOM = 30
};

static double pack_x(const pack_scale *scale, double value)
{
    return CHART_LEFT + (CHART_WIDTH - CHART_LEFT - CHART_RIGHT) * value / scale->top;
}

/* One histogram of the highest governing index of each exam of the row,
 * with the median and the 95th percentile marked; the legend under the
 * axis names them, so that no label sits on a bar or another label. */
static void pack_chart(const report_pack_input *in, FILE *out, const pack_scale *scale,
                       const stats_period_row *row, const char *key, const char *governing)
{
    size_t *counts = calloc((size_t)scale->bins, sizeof *counts);
    if (counts == NULL) {
        fputs("<p>Chart not drawn: out of memory.</p>", out);
        return;
    }
    size_t highest = 0;
    for (size_t i = 0; i < in->data->row_count; i++) {
        const exam_row *exam = &in->data->rows[i];
        if (!exam->has_governing || !pack_key_matches(exam, in->by, key))
            continue;
        int bin = (int)floor(exam->max_governing / scale->bin + 1e-9);
        if (bin < 0)
            bin = 0;
        if (bin >= scale->bins)
            bin = scale->bins - 1;
        if (++counts[bin] > highest)
            highest = counts[bin];
    }
    double count_step = pack_round_step((double)(highest ? highest : 1), 3);
    double count_top = ceil((double)(highest ? highest : 1) / count_step) * count_step;
    double plot_height = CHART_HEIGHT - CHART_TOP - CHART_BOTTOM;
    double base = CHART_TOP + plot_height;
    fprintf(out,
            "<svg class=\"chart\" viewBox=\"0 0 %d %d\" role=\"img\" aria-label=\"Distribution "
            "of the highest governing index per exam\">",
            CHART_WIDTH, CHART_HEIGHT);
    /* count ticks and grid */
    for (double c = 0; c <= count_top + 1e-9; c += count_step) {
        double y = base - plot_height * c / count_top;
        fprintf(out,
                "<line class=\"grid\" x1=\"%d\" x2=\"%d\" y1=\"%.1f\" y2=\"%.1f\"/>"
                "<text class=\"tick\" x=\"%d\" y=\"%.1f\" text-anchor=\"end\">%.0f</text>",
                CHART_LEFT, CHART_WIDTH - CHART_RIGHT, y, y, CHART_LEFT - 3, y + 3, c);
    }
    double bar_width = pack_x(scale, scale->bin) - pack_x(scale, 0);
    for (int b = 0; b < scale->bins; b++) {
        if (counts[b] == 0)
            continue;
        double h = plot_height * (double)counts[b] / count_top;
        fprintf(out,
                "<rect class=\"bar\" x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\">"
                "<title>%.2f to %.2f: %zu</title></rect>",
                pack_x(scale, b * scale->bin) + 0.5, base - h, bar_width - 1.0, h, b * scale->bin,
                (b + 1) * scale->bin, counts[b]);
    }
    const stats_distribution *g = &row->governing;
    if (g->count > 0) {
        fprintf(out,
                "<line class=\"median\" x1=\"%.1f\" x2=\"%.1f\" y1=\"%d\" y2=\"%.1f\"/>"
                "<line class=\"p95\" x1=\"%.1f\" x2=\"%.1f\" y1=\"%d\" y2=\"%.1f\"/>",
                pack_x(scale, g->median), pack_x(scale, g->median), CHART_TOP, base,
                pack_x(scale, g->p95), pack_x(scale, g->p95), CHART_TOP, base);
    }
    fprintf(out, "<line class=\"axis\" x1=\"%d\" x2=\"%d\" y1=\"%.1f\" y2=\"%.1f\"/>", CHART_LEFT,
            CHART_WIDTH - CHART_RIGHT, base, base);
    int tick_count = (int)lround(scale->top / scale->tick);
    int decimals = scale->tick >= 1.0 ? 0 : scale->tick >= 0.1 ? 1 : 2;
    for (int t = 0; t <= tick_count; t++) {
        double value = t * scale->tick;
        fprintf(out,
                "<line class=\"axis\" x1=\"%.1f\" x2=\"%.1f\" y1=\"%.1f\" y2=\"%.1f\"/>"
                "<text class=\"tick\" x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">%.*f</text>",
                pack_x(scale, value), pack_x(scale, value), base, base + 3, pack_x(scale, value),
                base + 12, decimals, value);
    }
    fprintf(out, "<text class=\"axis-title\" x=\"%d\" y=\"%d\" text-anchor=\"middle\">highest ",
            (CHART_LEFT + CHART_WIDTH - CHART_RIGHT) / 2, CHART_HEIGHT - 4);
    if (governing != NULL && strcmp(governing, "mixed") != 0)
        pack_index_text(out, governing);
    else
        fputs("governing index", out);
    fputs(" of each exam</text></svg>\n", out);
    fputs("<p class=\"legend\">", out);
    if (g->count > 0) {
        fputs("<span class=\"key-median\"></span>median ", out);
        pack_fixed(out, 1, g->median, PACK_INDEX_DECIMALS);
        fputs(" <span class=\"key-p95\"></span>P95 ", out);
        pack_fixed(out, 1, g->p95, PACK_INDEX_DECIMALS);
        fprintf(out, "; %zu of %zu exams with a value", g->count, row->exam_count);
    } else {
        fprintf(out, "no value in any of %zu exams", row->exam_count);
    }
    fputs("</p>\n", out);
    free(counts);
}

static const char pack_css[] =
    "@page{size:A4;margin:12mm}\n"
    "table.pack th[scope=row]{font-weight:normal;text-align:left;background:none}\n"
    "table.pack tr.total th,table.pack tr.total td{font-weight:bold}\n"
    "table.pack td.n{white-space:nowrap}table.pack thead th{font-size:8.5pt}\n"
    ".charts{display:grid;grid-template-columns:repeat(3,1fr);gap:.4em .8em}\n"
    ".charts figure{margin:0;break-inside:avoid}\n"
    ".charts figcaption{font-weight:bold;font-size:9pt}\n"
    "svg.chart{width:100%;height:auto;display:block}\n"
    "svg.chart .bar{fill:#5b8a96}svg.chart .grid{stroke:#e1e8ea;stroke-width:.6}\n"
    "svg.chart .axis{stroke:#1d2a2f;stroke-width:.8}\n"
    "svg.chart .median{stroke:#1d2a2f;stroke-width:1.4}\n"
    "svg.chart .p95{stroke:#9c3d1c;stroke-width:1.4;stroke-dasharray:4 2}\n"
    "svg.chart text{font-size:9px;fill:#1d2a2f}\n"
    ".legend{font-size:8pt;margin:.1em 0 .3em}\n"
    ".legend span{display:inline-block;width:1.4em;height:0;vertical-align:middle;"
    "margin-right:.2em}\n"
    ".key-median{border-top:2px solid #1d2a2f}.key-p95{border-top:2px dashed #9c3d1c;"
    "margin-left:.6em}\n"
    ".signoff{display:grid;grid-template-columns:1fr 1fr;gap:1em 2em;break-inside:avoid;"
    "margin-top:.6em}\n"
    ".signoff section{break-inside:avoid}\n"
    ".signoff dl{display:grid;grid-template-columns:6em 1fr;gap:1.1em .5em;margin:.4em 0}\n"
    ".signoff dt{font-weight:bold}.signoff dd{margin:0;border-bottom:1px solid #1d2a2f;"
    "min-height:1.2em}\n"
    ".signoff dd.signature{min-height:2.6em}\n"
    "@media print{h2{break-after:avoid}.charts{gap:.2em .6em}}\n";

static void pack_signoff(FILE *out)
{
    static const char *const roles[] = {"Prepared by", "Approved by"};
    fputs("<h2>Sign-off</h2>\n<div class=\"signoff\">", out);
    for (int i = 0; i < 2; i++) {
        fprintf(out,
                "<section><h3>%s</h3><dl><dt>Name</dt><dd></dd><dt>Role</dt><dd></dd>"
                "<dt>Date</dt><dd></dd><dt>Signature</dt><dd class=\"signature\"></dd>"
                "</dl></section>",
                roles[i]);
    }
    fputs("</div>\n", out);
}

void report_pack_html(const report_pack_input *in, FILE *out)
{
    char title[256], period[128];
    const char *by = stats_dimension_name(in->by);
    int have_institution = in->institution != NULL && in->institution[0] != '\0';
    snprintf(title, sizeof title, "Acoustic output statistics%s%s", have_institution ? ", " : "",
             have_institution ? in->institution : "");
    snprintf(period, sizeof period, "%s to %s (local date of each exam's first capture)", in->from,
             in->to);
    report_html_begin(out, title, period, &in->data->info,
                      report_completeness(in->data->capture_count, in->data->indexed_count),
                      in->data->capture_count, in->data->indexed_count);
    fputs("<style>\n", out);
    fputs(pack_css, out);
    fputs("</style>\n<p class=\"institution\"><strong>Institution:</strong> ", out);
    if (have_institution)
        report_html_text(out, in->institution);
    else
        fputs("not configured (set <code>[site] institution</code> in the configuration)", out);
    fputs("</p>\n", out);

    const char *row_heading = in->by == STATS_BY_EXAM_TYPE ? "Exam type" : by;
    fputs("<h2>Highest index of each exam</h2>\n<p>Per exam, the highest governing thermal "
          "index (the TI the exam type calls for) and the highest MI. Percentiles (median, P75, "
          "P95: inclusive method, Hyndman &amp; Fan type 7) are over the exams that carried a "
          "value, counted in the column &ldquo;with value&rdquo;; an exam without any value is "
          "counted apart and never as 0.</p>\n"
          "<table class=\"pack\" id=\"distribution\"><thead><tr><th rowspan=\"2\">",
          out);
    report_html_text(out, row_heading);
    fputs("</th>", out);
    if (in->by == STATS_BY_EXAM_TYPE)
        fputs("<th rowspan=\"2\">Governing index</th>", out);
    fputs("<th rowspan=\"2\">Exams</th><th colspan=\"6\">Governing index</th>"
          "<th colspan=\"4\">MI</th></tr>\n<tr><th>with value</th><th>without</th>"
          "<th>median</th><th>P75</th><th>P95</th><th>max</th>"
          "<th>with value</th><th>median</th><th>P75</th><th>P95</th></tr></thead><tbody>\n",
          out);
    for (size_t r = 0; r < in->result->row_count; r++)
        pack_distribution_row(in, out, &in->result->rows[r], in->result->rows[r].key, 0);
    pack_distribution_row(in, out, &in->result->total, NULL, 1);
    fputs("</tbody></table>\n", out);

    fputs("<h2>Findings and time at or above each TI threshold</h2>\n<p>With findings: exams "
          "with at least one violation, warning or advisory above its own limit. "
          "Informational only: exams whose only findings are advisories below their own "
          "limit (e.g. first-trimester Doppler used below its TI limit), counted apart. Time: "
          "estimated from each exam's timeline "
          "(docs/extraction.md); for each threshold of the governing index, the exams with "
          "any time at or above it and the 95th percentile of that time, in minutes, over the "
          "exams with a value.</p>\n<table class=\"pack\" id=\"time\"><thead><tr>"
          "<th rowspan=\"2\">",
          out);
    report_html_text(out, row_heading);
    fputs("</th><th colspan=\"2\">With findings (violations, warnings, advisories above "
          "limit)</th><th rowspan=\"2\">Informational only (exams)</th><th "
          "rowspan=\"2\">Scan minutes "
          "(median)</th>",
          out);
    for (int t = 0; t < EXAM_TI_STATISTICS_STEPS; t++)
        fprintf(out, "<th colspan=\"2\">TI &ge; %.1f</th>", exam_ti_ladder[t]);
    fputs("</tr>\n<tr><th>exams</th><th>share</th>", out);
    for (int t = 0; t < EXAM_TI_STATISTICS_STEPS; t++)
        fputs("<th>exams</th><th>P95 min</th>", out);
    fputs("</tr></thead><tbody>\n", out);
    for (size_t r = 0; r < in->result->row_count; r++)
        pack_time_row(in, out, &in->result->rows[r], in->result->rows[r].key, 0);
    pack_time_row(in, out, &in->result->total, NULL, 1);
    fputs("</tbody></table>\n", out);

    pack_scale scale = pack_scale_of(in);
    fputs("<h2>Distribution of the governing index</h2>\n<p>Exams per interval of ", out);
    pack_fixed(out, 1, scale.bin, scale.bin >= 0.1 ? 1 : 2);
    fputs(" of each exam's highest governing index; every chart has the same scale.</p>\n"
          "<div class=\"charts\">\n",
          out);
    for (size_t r = 0; r < in->result->row_count; r++) {
        const stats_period_row *row = &in->result->rows[r];
        pack_row_facts facts = pack_facts(in, row->key);
        fputs("<figure><figcaption>", out);
        report_html_text(out, pack_key_text(in, row->key, &facts));
        if (in->by == STATS_BY_EXAM_TYPE && facts.governing != NULL) {
            fputs(" (", out);
            pack_index_text(out, facts.governing);
            fputs(")", out);
        }
        fputs("</figcaption>", out);
        pack_chart(in, out, &scale, row, row->key,
                   in->by == STATS_BY_EXAM_TYPE ? facts.governing : NULL);
        fputs("</figure>\n", out);
    }
    fputs("</div>\n", out);
    pack_signoff(out);
    report_html_end(out);
}

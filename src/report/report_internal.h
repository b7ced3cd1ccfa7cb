/*
 * report_internal.h - what the files of src/report/ share; not API.
 *
 * report_data.c   loads a period's exams and findings and turns them into
 *                 exam_row rows; CSV and HTML writing helpers;
 * report_week.c   the weekly outlier list;
 * report_stats.c  statistics for a period and preset drift;
 * report_pack.c   the statistics as a printable document.
 */
#ifndef MITILOG_REPORT_INTERNAL_H
#define MITILOG_REPORT_INTERNAL_H

#include <stdio.h>

#include "report/report.h"
#include "json/json.h"
#include "store/store_reports.h"

typedef struct report_data {
    store_exam_list list; /* the rows and their strings */
    exam_row *rows;       /* list.rows, ordered by Study Instance UID;
                                       the statistics read them as they are */
    size_t row_count;
    store_finding_counts findings;       /* with REPORT_LOAD_RULES; the rows'
                                       rules point into findings.counts */
    store_period_info info;              /* with REPORT_LOAD_INFO */
    size_t capture_count, indexed_count; /* over all rows */
} report_data;

/* What report_data_load reads besides the exam rows. */
enum {
    REPORT_LOAD_RULES = 1 << 0, /* findings by rule of each exam (needs
                                       STORE_EXAM_IDENTITY) */
    REPORT_LOAD_INFO = 1 << 1   /* the period's policy facts */
};

/* The exams of [from, to] with the text columns a report uses
 * (STORE_EXAM_* bits) and what load asks for (REPORT_LOAD_* bits). */
mitilog_status report_data_load(store *store, const char *from, const char *to,
                                const store_sites *sites, unsigned columns, unsigned load,
                                report_data *data, mitilog_error *error);
void report_data_free(report_data *data);

/* The ISO week a weekly or drift request is for (its own, else
 * report_default_week) and the first and last day numbers its document
 * reads (the baseline weeks included): one rule for the document and for
 * its snapshot. */
mitilog_status report_week_span(store *store, const report_week_request *request, int *iso_year,
                                int *iso_week, long *first_day, long *last_day,
                                mitilog_error *error);
mitilog_status report_drift_span(store *store, const report_drift_request *request, int *iso_year,
                                 int *iso_week, long *first_day, long *last_day,
                                 mitilog_error *error);

/* The text column a dimension groups by (STORE_EXAM_ROOM, ...; 0 for the
 * exam type, always read). */
unsigned report_dimension_column(stats_dimension dimension);

/* The short key of a study shown in reports: the first 8 hex digits of the
 * SHA-256 of its UID ("" when it has none). */
void report_study_key(const char *study_instance_uid, char key[9]);

/* The day number of the latest exam held, else of today (local). */
long report_latest_day(store *store, const store_sites *sites);
/* The latest exam day of the last complete ISO week that holds exams: the
 * latest day when it is a Sunday, else the latest exam day before its
 * week; when every exam is in that week, the latest day. */
long report_last_complete_day(store *store, const store_sites *sites);

/* "violation", "warning", "advisory" for an EXAM_SEVERITY_RANK_ (exam.h);
 * NULL for none (static strings). */
const char *report_severity_name(int rank);

/* Share of captures with indices, NAN when there are none. */
double report_completeness(size_t captures, size_t indexed);

/* Output through open_memstream. */
typedef struct report_buffer {
    FILE *file;
    char *text;
    size_t length;
} report_buffer;
mitilog_status report_buffer_open(report_buffer *buffer, mitilog_error *error);
/* Closes the stream; on success *out takes the text. */
mitilog_status report_buffer_finish(report_buffer *buffer, char **out, mitilog_error *error);

/* CSV (RFC 4180): a field, quoted when it holds a comma, quote, CR or LF
 * (quotes doubled); separators are written by report_csv_field itself
 * (first != 0 for the first field of a record); records end in CRLF. */
void report_csv_field(FILE *out, int first, const char *text);
void report_csv_number(FILE *out, int present, double value);
void report_csv_count(FILE *out, size_t value);
void report_csv_end(FILE *out);

/* HTML: text with & < > " ' escaped. */
void report_html_text(FILE *out, const char *text);
/* A number as text ("—" when absent), digits significant. */
void report_html_number(FILE *out, int present, double value, int digits);
/* The page head with printable CSS, the title, the caution and the facts
 * every report states. */
void report_html_begin(FILE *out, const char *title, const char *period,
                       const store_period_info *info, double completeness, size_t captures,
                       size_t indexed);
void report_html_end(FILE *out);

/* The policy statement: "VERSION (name)" or "none recorded ...". */
const char *report_policy_text(const store_period_info *info, char *buffer, size_t size);

/* Typed key/value pairs of a document's top level, written as members of
 * the object open in writer. A number with an integral value is written as
 * an integer (3, not 3.0), as the documents have always shown them. */
typedef struct report_meta {
    json_writer *writer;
} report_meta;
void report_meta_text(report_meta *meta, const char *name, const char *text);
void report_meta_number(report_meta *meta, const char *name, int present, double value);
void report_meta_int(report_meta *meta, const char *name, long long value);
void report_meta_bool(report_meta *meta, const char *name, int value);
/* The facts every document states: policy, completeness, caution. */
/* "sites": the sites asked for, or null for every site. */
void report_meta_sites(report_meta *meta, const store_sites *sites);
void report_meta_common(report_meta *meta, const store_period_info *info, size_t captures,
                        size_t indexed);

/* The statistics document (report_pack.c): what it prints, all borrowed. */
typedef struct report_pack_input {
    const char *from, *to; /* YYYY-MM-DD */
    stats_dimension by;
    const char *institution; /* NULL or "": not configured */
    const report_data *data; /* rows loaded with STORE_EXAM_DETAIL */
    const stats_period_result *result;
} report_pack_input;
void report_pack_html(const report_pack_input *in, FILE *out);
/* The label and governing index the exams of one row recorded (NULL when
 * none; governing "mixed" when they differ). */
void report_pack_row_facts(const report_data *data, stats_dimension by, const char *key,
                           const char **label, const char **governing);

#endif

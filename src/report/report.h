/*
 * report.h - the weekly outlier list, statistics for a period and preset
 * drift as documents: loads exam rows through store_reports.h, computes with
 * src/stats/ (stats_calendar.h, stats_outliers.h, stats_period.h,
 * stats_drift.h), and writes JSON (the writer of json/json.h), CSV
 * (RFC 4180, UTF-8, CRLF) or printable HTML
 * (every text escaped). Used by the HTTP API (/api/v1/outliers,
 * /api/v1/stats, /api/v1/drift) and by `mitilog report`.
 *
 * Every document states the period, the policy version, the data
 * completeness (share of captures carrying indices) and the caution.
 * Ownership: *out is malloc'ed; the caller frees it.
 */
#ifndef MITILOG_REPORT_H
#define MITILOG_REPORT_H

#include "stats/stats_calendar.h"
#include "stats/stats_drift.h"
#include "stats/stats_exam.h"
#include "stats/stats_outliers.h"
#include "stats/stats_period.h"
#include "store/store.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The advisory caution every page, report and file carries. */
extern const char report_caution[];

typedef enum report_format { REPORT_JSON = 0, REPORT_CSV, REPORT_HTML } report_format;

/* 0 and *format set for "json", "csv", "html"; -1 otherwise. */
int report_format_parse(const char *name, report_format *format);

typedef struct report_week_request {
    int has_week; /* 0: the week of the latest exam held */
    int iso_year, iso_week;
    stats_dimension group; /* room, preset, shift, transducer, exam_type */
    stats_week_settings settings;
    int all_exams; /* list every exam of each group, not only
                                   outliers and exams with findings */
} report_week_request;

/* Defaults: latest week, by preset, stats_week_default_settings(). */
/* The week every report, page and the worklist open on when none is
 * asked for: the last complete ISO week that holds exams (the week of the
 * latest exam day when that day is a Sunday, else the latest week with
 * exams that ended before the latest day's week; when every exam is in
 * that week, that week). Exam days are those of exam_summaries.day. One
 * rule, here only. */
void report_default_week(store *store, int *iso_year, int *iso_week);

report_week_request report_week_default_request(void);

mitilog_status report_week(store *store, const report_week_request *request, report_format format,
                           char **out, mitilog_error *error);

typedef struct report_stats_request {
    const char *from, *to; /* YYYY-MM-DD inclusive; NULL: all held */
    stats_dimension by;
    const char *institution; /* printed on the document; NULL: not configured */
} report_stats_request;

mitilog_status report_stats(store *store, const report_stats_request *request, report_format format,
                            char **out, mitilog_error *error);

typedef struct report_drift_request {
    int has_week; /* last week shown; 0: the latest held */
    int iso_year, iso_week;
    size_t weeks;            /* weeks shown, default 12 */
    size_t baseline_weeks;   /* default 12 */
    size_t minimum_baseline; /* default 10 */
    double z_limit;          /* default 3 */
} report_drift_request;

report_drift_request report_drift_default_request(void);

/* JSON only. */
mitilog_status report_drift(store *store, const report_drift_request *request, char **out,
                            mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

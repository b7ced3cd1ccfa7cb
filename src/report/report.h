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
#include "store/store_findings.h"
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
    int all_exams;            /* list every exam of each group, not only
                                   outliers and exams with findings */
    const store_sites *sites; /* NULL: every site; else the week, its
                                 baseline and its default week are theirs */
} report_week_request;

/* Defaults: latest week, by preset, stats_week_default_settings(). */
/* The week every report, page and the worklist open on when none is
 * asked for: the last complete ISO week that holds exams (the week of the
 * latest exam day when that day is a Sunday, else the latest week with
 * exams that ended before the latest day's week; when every exam is in
 * that week, that week). Exam days are those of exam_summaries.day. One
 * rule, here only. */
void report_default_week(store *store, const store_sites *sites, int *iso_year, int *iso_week);

report_week_request report_week_default_request(void);

mitilog_status report_week(store *store, const report_week_request *request, report_format format,
                           char **out, mitilog_error *error);

typedef struct report_stats_request {
    const char *from, *to; /* YYYY-MM-DD inclusive; NULL: all held */
    stats_dimension by;
    const char *institution;  /* printed on the document; NULL: not configured */
    const store_sites *sites; /* NULL: every site */
} report_stats_request;

mitilog_status report_stats(store *store, const report_stats_request *request, report_format format,
                            char **out, mitilog_error *error);

typedef struct report_drift_request {
    int has_week; /* last week shown; 0: the latest held */
    int iso_year, iso_week;
    size_t weeks;             /* weeks shown, default 12 */
    size_t baseline_weeks;    /* default 12 */
    size_t minimum_baseline;  /* default 10 */
    double z_limit;           /* default 3 */
    const store_sites *sites; /* NULL: every site */
} report_drift_request;

report_drift_request report_drift_default_request(void);

/* JSON only. */
mitilog_status report_drift(store *store, const report_drift_request *request, char **out,
                            mitilog_error *error);

/* ---- Kept documents (report_snapshot.c) ----
 * A period view's document is kept in the store (store_snapshots.h) with
 * the signature of the data it was made from: the change counts of the
 * days it reads (its week and baseline weeks, its period, its drift weeks
 * and their baselines), the policies held and the span of exams held. A
 * request whose document was kept and whose signature is unchanged is
 * answered with the kept document; otherwise it is made, kept and
 * answered. The document is the same either way: only the time it was
 * made ("made_at") tells them apart. Statistics without both from and to
 * are always made afresh (their default period moves with the data). The
 * findings list is kept the same way, over the days of its from and to
 * (every day when either is not given). */
typedef enum report_view {
    REPORT_VIEW_OUTLIERS = 0, /* report_week */
    REPORT_VIEW_STATISTICS,   /* report_stats */
    REPORT_VIEW_DRIFT,        /* report_drift, JSON only */
    REPORT_VIEW_FINDINGS      /* store_findings_json, JSON only */
} report_view;

typedef struct report_view_request {
    report_view view;
    report_format format;
    report_week_request outliers;
    report_stats_request statistics;
    report_drift_request drift;
    store_finding_filter findings;
} report_view_request;

typedef struct report_served {
    int from_snapshot; /* 1: the kept document was still true */
    char made_at[32];  /* when a kept document was made (ISO 8601 UTC) */
    double made_ms;    /* when made now: how long it took */
} report_served;

/* The document of request->view into *out (malloc'd), from a kept one
 * when it is still true, else made now and kept; version names the build
 * (a document kept by another build is never served). A document that
 * could not be kept is still answered (the failure is logged). */
mitilog_status report_view_serve(store *store, const report_view_request *request,
                                 const char *version, char **out, report_served *served,
                                 mitilog_error *error);

/* Makes again every kept document asked for in the last 14 days whose
 * data has changed (at most 200, the most recently asked first), and
 * forgets those not asked for in 30 days; *remade gets how many were
 * made. For the daemon's refresher (report_refresher.h), so that the
 * views people look at are ready before they are asked for again. */
mitilog_status report_snapshots_refresh(store *store, const char *version, size_t *remade,
                                        mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

/*
 * report_snapshot.c - kept documents of the period views (report.h,
 * "Kept documents"): the canonical text of a request (its key in the
 * store, and how the refresher makes it again), the days each view reads,
 * and serving a kept document while the signature of those days is
 * unchanged.
 *
 * The request text is "name=value" pairs joined by ';', every value with
 * '%', ';', '=' and ',' written as %XX (a list of sites is joined by ',').
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "report/report_internal.h"
#include "stats/stats_calendar.h"
#include "store/store_snapshots.h"
#include "util/log.h"

enum {
    REPORT_SNAPSHOT_REQUEST_MAX = 4096,
    REPORT_SNAPSHOT_REFRESH_MAX = 200,   /* documents made again per refresh, at most */
    REPORT_SNAPSHOT_REFRESH_DAYS = 14,   /* asked for within: kept ready */
    REPORT_SNAPSHOT_FORGET_DAYS = 30,    /* not asked for within: forgotten */
    REPORT_SNAPSHOT_ASKED_SECONDS = 3600 /* "asked for" is written at most this often */
};

static const char *const report_view_names[] = {"outliers", "statistics", "drift", "findings"};
enum { REPORT_VIEW_COUNT = sizeof report_view_names / sizeof report_view_names[0] };
static const char *const report_format_names[] = {"json", "csv", "html"};

/* ---- the request as text ---- */

typedef struct snapshot_text {
    char text[REPORT_SNAPSHOT_REQUEST_MAX];
    size_t length;
    int overflow;
} snapshot_text;

static void text_raw(snapshot_text *out, const char *raw)
{
    size_t length = strlen(raw);
    if (out->length + length >= sizeof out->text) {
        out->overflow = 1;
        return;
    }
    memcpy(out->text + out->length, raw, length + 1);
    out->length += length;
}

static void text_escaped(snapshot_text *out, const char *value)
{
    for (const char *c = value; *c != '\0'; c++) {
        char piece[4] = {*c, '\0'};
        if (*c == '%' || *c == ';' || *c == '=' || *c == ',')
            snprintf(piece, sizeof piece, "%%%02X", (unsigned char)*c);
        text_raw(out, piece);
    }
}

static void text_pair(snapshot_text *out, const char *name, const char *value)
{
    if (out->length > 0)
        text_raw(out, ";");
    text_raw(out, name);
    text_raw(out, "=");
    text_escaped(out, value != NULL ? value : "");
}

static void text_number(snapshot_text *out, const char *name, double value)
{
    char number[40];
    snprintf(number, sizeof number, "%.17g", value);
    text_pair(out, name, number);
}

static void text_sites(snapshot_text *out, const store_sites *sites)
{
    text_pair(out, "sites", "");
    for (size_t i = 0; sites != NULL && i < sites->count; i++) {
        if (i > 0)
            text_raw(out, ",");
        text_escaped(out, sites->names[i]);
    }
}

/* The resolved ISO week: into the request (so that it is made for that
 * week) and into the text. */
static void text_week(snapshot_text *out, int year, int week, int *has_week, int *iso_year,
                      int *iso_week)
{
    char week_text[9];
    *has_week = 1;
    *iso_year = year;
    *iso_week = week;
    stats_iso_week_text(year, week, week_text);
    text_pair(out, "week", week_text);
}

/* What a request text decodes into: the request structs point into it. */
typedef struct snapshot_decoded {
    char buffer[REPORT_SNAPSHOT_REQUEST_MAX];
    store_sites sites;
    report_view_request request;
} snapshot_decoded;

/* Undoes text_escaped in place. */
static void text_unescape(char *value)
{
    char *to = value;
    for (const char *from = value; *from != '\0'; from++) {
        unsigned code;
        if (*from == '%' && sscanf(from + 1, "%2x", &code) == 1) {
            *to++ = (char)code;
            from += 2;
        } else {
            *to++ = *from;
        }
    }
    *to = '\0';
}

static int parse_format(const char *text, report_format *format)
{
    for (size_t i = 0; i < sizeof report_format_names / sizeof report_format_names[0]; i++)
        if (strcmp(text, report_format_names[i]) == 0) {
            *format = (report_format)i;
            return 1;
        }
    return 0;
}

static int parse_week(const char *text, int *year, int *week)
{
    return sscanf(text, "%d-W%d", year, week) == 2;
}

static int parse_size(const char *text, size_t *out)
{
    char *end = NULL;
    unsigned long long value = strtoull(text, &end, 10);
    if (end == text || *end != '\0')
        return 0;
    *out = (size_t)value;
    return 1;
}

/* A request text of view back into decoded; 0 when it is not one this
 * build writes (the refresher then leaves it alone). */
static int request_decode(const char *view, const char *text, snapshot_decoded *decoded)
{
    memset(decoded, 0, sizeof *decoded);
    report_view_request *request = &decoded->request;
    request->outliers = report_week_default_request();
    request->drift = report_drift_default_request();
    request->statistics.by = STATS_BY_EXAM_TYPE;
    size_t v = 0;
    while (v < REPORT_VIEW_COUNT && strcmp(view, report_view_names[v]) != 0)
        v++;
    if (v == REPORT_VIEW_COUNT || strlen(text) >= sizeof decoded->buffer)
        return 0;
    request->view = (report_view)v;
    memcpy(decoded->buffer, text, strlen(text) + 1);
    int ok = 1;
    char *save = NULL;
    for (char *pair = strtok_r(decoded->buffer, ";", &save); ok && pair != NULL;
         pair = strtok_r(NULL, ";", &save)) {
        char *value = strchr(pair, '=');
        if (value == NULL)
            return 0;
        *value++ = '\0';
        if (strcmp(pair, "sites") == 0) {
            char *site_save = NULL;
            for (char *site = strtok_r(value, ",", &site_save); site != NULL;
                 site = strtok_r(NULL, ",", &site_save)) {
                if (decoded->sites.count >= EXAM_SITES_MAX)
                    return 0;
                text_unescape(site);
                decoded->sites.names[decoded->sites.count++] = site;
            }
            continue;
        }
        text_unescape(value);
        report_week_request *week = &request->outliers;
        report_stats_request *statistics = &request->statistics;
        report_drift_request *drift = &request->drift;
        store_finding_filter *findings = &request->findings;
        const char *optional = value[0] != '\0' ? value : NULL;
        if (request->view == REPORT_VIEW_FINDINGS) {
            if (strcmp(pair, "from") == 0)
                findings->from = optional;
            else if (strcmp(pair, "to") == 0)
                findings->to = optional;
            else if (strcmp(pair, "severity") == 0)
                findings->severity = optional;
            else if (strcmp(pair, "rule") == 0)
                findings->rule = optional;
            else if (strcmp(pair, "room") == 0)
                findings->room = optional;
            else if (strcmp(pair, "preset") == 0)
                findings->preset = optional;
            else if (strcmp(pair, "shift") == 0)
                findings->shift = optional;
            else if (strcmp(pair, "superseded") == 0)
                findings->include_superseded = strcmp(value, "1") == 0;
            else if (strcmp(pair, "limit") == 0) {
                size_t limit = 0;
                ok = parse_size(value, &limit);
                findings->limit = (long)limit;
            } else if (strcmp(pair, "format") != 0)
                ok = 0;
            continue;
        }
        if (strcmp(pair, "format") == 0)
            ok = parse_format(value, &request->format);
        else if (strcmp(pair, "week") == 0 && request->view == REPORT_VIEW_OUTLIERS)
            ok = (week->has_week = parse_week(value, &week->iso_year, &week->iso_week));
        else if (strcmp(pair, "week") == 0 && request->view == REPORT_VIEW_DRIFT)
            ok = (drift->has_week = parse_week(value, &drift->iso_year, &drift->iso_week));
        else if (strcmp(pair, "group") == 0)
            ok = stats_dimension_parse(value, &week->group) == 0;
        else if (strcmp(pair, "by") == 0)
            ok = stats_dimension_parse(value, &statistics->by) == 0;
        else if (strcmp(pair, "baseline_weeks") == 0)
            ok = parse_size(value, request->view == REPORT_VIEW_DRIFT
                                       ? &drift->baseline_weeks
                                       : &week->settings.baseline_weeks);
        else if (strcmp(pair, "minimum") == 0)
            ok = parse_size(value, request->view == REPORT_VIEW_DRIFT
                                       ? &drift->minimum_baseline
                                       : &week->settings.minimum_baseline);
        else if (strcmp(pair, "weeks") == 0)
            ok = parse_size(value, &drift->weeks);
        else if (strcmp(pair, "z") == 0) {
            char *end = NULL;
            double z = strtod(value, &end);
            ok = end != value && *end == '\0' && isfinite(z);
            if (request->view == REPORT_VIEW_DRIFT)
                drift->z_limit = z;
            else
                week->settings.z_limit = z;
        } else if (strcmp(pair, "all") == 0)
            week->all_exams = strcmp(value, "1") == 0;
        else if (strcmp(pair, "from") == 0)
            statistics->from = value;
        else if (strcmp(pair, "to") == 0)
            statistics->to = value;
        else if (strcmp(pair, "institution") == 0)
            statistics->institution = value[0] != '\0' ? value : NULL;
        else
            ok = 0;
    }
    /* as the HTTP API passes them: an empty list is every site */
    request->outliers.sites = request->statistics.sites = request->drift.sites =
        request->findings.sites = &decoded->sites;
    return ok;
}

/* The canonical text of a request whose week is resolved (has_week set),
 * and the first and last day it reads; 0 when the view is not kept
 * (statistics without a whole period). */
static int request_encode(store *st, const report_view_request *request,
                          report_view_request *resolved, snapshot_text *out, char first_day[11],
                          char last_day[11], mitilog_error *error, mitilog_status *status)
{
    memset(out, 0, sizeof *out);
    *resolved = *request;
    *status = MITILOG_OK;
    long first = 0, last = 0;
    int year = 0, week = 0;
    switch (request->view) {
    case REPORT_VIEW_OUTLIERS: {
        report_week_request *r = &resolved->outliers;
        *status = report_week_span(st, r, &year, &week, &first, &last, error);
        if (*status != MITILOG_OK)
            return 0;
        text_week(out, year, week, &r->has_week, &r->iso_year, &r->iso_week);
        text_pair(out, "group", stats_dimension_name(r->group));
        text_number(out, "baseline_weeks", (double)r->settings.baseline_weeks);
        text_number(out, "minimum", (double)r->settings.minimum_baseline);
        text_number(out, "z", r->settings.z_limit);
        text_pair(out, "all", r->all_exams ? "1" : "0");
        text_pair(out, "format", report_format_names[request->format]);
        text_sites(out, r->sites);
        break;
    }
    case REPORT_VIEW_STATISTICS: {
        const report_stats_request *r = &request->statistics;
        if (r->from == NULL || r->from[0] == '\0' || r->to == NULL || r->to[0] == '\0' ||
            stats_day_number(r->from, &first) != MITILOG_OK ||
            stats_day_number(r->to, &last) != MITILOG_OK)
            return 0;
        text_pair(out, "from", r->from);
        text_pair(out, "to", r->to);
        text_pair(out, "by", stats_dimension_name(r->by));
        text_pair(out, "institution", r->institution);
        text_pair(out, "format", report_format_names[request->format]);
        text_sites(out, r->sites);
        break;
    }
    case REPORT_VIEW_DRIFT: {
        report_drift_request *r = &resolved->drift;
        *status = report_drift_span(st, r, &year, &week, &first, &last, error);
        if (*status != MITILOG_OK)
            return 0;
        text_week(out, year, week, &r->has_week, &r->iso_year, &r->iso_week);
        text_number(out, "weeks", (double)r->weeks);
        text_number(out, "baseline_weeks", (double)r->baseline_weeks);
        text_number(out, "minimum", (double)r->minimum_baseline);
        text_number(out, "z", r->z_limit);
        text_pair(out, "format", "json");
        text_sites(out, r->sites);
        break;
    }
    case REPORT_VIEW_FINDINGS: {
        /* every day when a bound is not given: '' sorts before any day */
        const store_finding_filter *r = &request->findings;
        int has_from = r->from != NULL && r->from[0] != '\0';
        int has_to = r->to != NULL && r->to[0] != '\0';
        if ((has_from && stats_day_number(r->from, &first) != MITILOG_OK) ||
            (has_to && stats_day_number(r->to, &last) != MITILOG_OK))
            return 0;
        char limit[24];
        snprintf(limit, sizeof limit, "%ld", r->limit);
        text_pair(out, "from", r->from);
        text_pair(out, "to", r->to);
        text_pair(out, "severity", r->severity);
        text_pair(out, "rule", r->rule);
        text_pair(out, "room", r->room);
        text_pair(out, "preset", r->preset);
        text_pair(out, "shift", r->shift);
        text_pair(out, "superseded", r->include_superseded ? "1" : "0");
        text_pair(out, "limit", limit);
        text_pair(out, "format", "json");
        text_sites(out, r->sites);
        if (out->overflow || (has_from && has_to && first > last))
            return 0;
        if (has_from)
            stats_day_text(first, first_day);
        else
            first_day[0] = '\0';
        if (has_to)
            stats_day_text(last, last_day);
        else
            snprintf(last_day, 11, "9999-12-31");
        return 1;
    }
    default: return 0;
    }
    if (out->overflow || first > last)
        return 0;
    stats_day_text(first, first_day);
    stats_day_text(last, last_day);
    return 1;
}

/* ---- making and serving ---- */

/* A UTC time seconds_ago seconds before now, as the store writes times
 * (strftime('%Y-%m-%dT%H:%M:%fZ'), which sort as text). */
static void utc_text(long seconds_ago, char out[32])
{
    time_t at = time(NULL) - seconds_ago;
    struct tm parts;
    gmtime_r(&at, &parts);
    strftime(out, 32, "%Y-%m-%dT%H:%M:%S.000Z", &parts);
}

static double now_ms(void)
{
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    return (double)now.tv_sec * 1000.0 + (double)now.tv_nsec / 1e6;
}

static mitilog_status view_make(store *st, const report_view_request *request, char **out,
                                mitilog_error *error)
{
    switch (request->view) {
    case REPORT_VIEW_OUTLIERS:
        return report_week(st, &request->outliers, request->format, out, error);
    case REPORT_VIEW_STATISTICS:
        return report_stats(st, &request->statistics, request->format, out, error);
    case REPORT_VIEW_DRIFT: return report_drift(st, &request->drift, out, error);
    case REPORT_VIEW_FINDINGS: return store_findings_json(st, &request->findings, out, error);
    }
    return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no such view");
}

/* The signature of the days, with the build that makes the documents. */
static mitilog_status view_signature(store *st, const char *version, const char *first_day,
                                     const char *last_day,
                                     char signature[STORE_SNAPSHOT_SIGNATURE_MAX + 1],
                                     mitilog_error *error)
{
    char days[STORE_SNAPSHOT_SIGNATURE_MAX + 1];
    mitilog_status status = store_snapshot_signature(st, first_day, last_day, days, error);
    if (status == MITILOG_OK)
        snprintf(signature, STORE_SNAPSHOT_SIGNATURE_MAX + 1, "%.40s|%.200s",
                 version != NULL ? version : "", days);
    return status;
}

/* Makes the document and keeps it under signature; a failure to keep it
 * is logged, not returned. */
static mitilog_status view_make_and_keep(store *st, const report_view_request *resolved,
                                         const char *request_text, const char *signature, int asked,
                                         char **out, double *made_ms, mitilog_error *error)
{
    double started = now_ms();
    mitilog_status status = view_make(st, resolved, out, error);
    *made_ms = now_ms() - started;
    if (status != MITILOG_OK)
        return status;
    mitilog_error keep_error = {{0}};
    if (store_snapshot_put(st, report_view_names[resolved->view], request_text, signature, *out,
                           *made_ms, asked, &keep_error) != MITILOG_OK)
        log_warning("report: the %s document was answered but not kept (%s); it will be made "
                    "again when asked for",
                    report_view_names[resolved->view], keep_error.text);
    return MITILOG_OK;
}

mitilog_status report_view_serve(store *st, const report_view_request *request, const char *version,
                                 char **out, report_served *served, mitilog_error *error)
{
    *out = NULL;
    memset(served, 0, sizeof *served);
    if (st == NULL || request == NULL || (unsigned)request->view >= REPORT_VIEW_COUNT ||
        (unsigned)request->format > REPORT_HTML)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "report: no store or view");
    report_view_request resolved;
    snapshot_text text;
    char first_day[11], last_day[11];
    mitilog_status status = MITILOG_OK;
    if (!request_encode(st, request, &resolved, &text, first_day, last_day, error, &status)) {
        if (status != MITILOG_OK)
            return status;
        double started = now_ms();
        status = view_make(st, request, out, error);
        served->made_ms = now_ms() - started;
        return status;
    }
    /* The signature is read before the document is made: a write that
     * lands meanwhile changes it, so the document kept under it can only
     * be newer than it, never older. */
    char signature[STORE_SNAPSHOT_SIGNATURE_MAX + 1], asked_at[32];
    mitilog_error read_error = {{0}};
    const char *view = report_view_names[request->view];
    int kept =
        view_signature(st, version, first_day, last_day, signature, &read_error) == MITILOG_OK;
    if (kept && store_snapshot_get(st, view, text.text, signature, out, served->made_at, asked_at,
                                   &read_error) != MITILOG_OK)
        kept = 0;
    if (!kept)
        log_warning("report: kept documents not read (%s); making the %s document", read_error.text,
                    view);
    if (*out != NULL) {
        served->from_snapshot = 1;
        char hour_ago[32];
        utc_text(REPORT_SNAPSHOT_ASKED_SECONDS, hour_ago);
        mitilog_error asked_error = {{0}};
        if (strcmp(asked_at, hour_ago) < 0 &&
            store_snapshot_asked(st, view, text.text, &asked_error) != MITILOG_OK)
            log_warning("report: could not record that the %s document was asked for (%s)", view,
                        asked_error.text);
        return MITILOG_OK;
    }
    if (!kept) {
        double started = now_ms();
        status = view_make(st, &resolved, out, error);
        served->made_ms = now_ms() - started;
        return status;
    }
    return view_make_and_keep(st, &resolved, text.text, signature, 1, out, &served->made_ms, error);
}

mitilog_status report_snapshots_refresh(store *st, const char *version, size_t *remade,
                                        mitilog_error *error)
{
    *remade = 0;
    char since[32], forget_before[32];
    utc_text(REPORT_SNAPSHOT_REFRESH_DAYS * 86400L, since);
    utc_text(REPORT_SNAPSHOT_FORGET_DAYS * 86400L, forget_before);
    mitilog_status status = store_snapshots_prune(st, forget_before, error);
    store_snapshot_key *keys = NULL;
    size_t count = 0;
    if (status == MITILOG_OK)
        status = store_snapshot_keys(st, since, REPORT_SNAPSHOT_REFRESH_MAX, &keys, &count, error);
    snapshot_decoded *decoded = malloc(sizeof *decoded);
    if (status == MITILOG_OK && decoded == NULL)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "refresh: out of memory");
    for (size_t i = 0; status == MITILOG_OK && i < count; i++) {
        if (!request_decode(keys[i].view, keys[i].request, decoded))
            continue;
        report_view_request resolved;
        snapshot_text text;
        char first_day[11], last_day[11];
        mitilog_status encoded = MITILOG_OK;
        mitilog_error skip = {{0}};
        if (!request_encode(st, &decoded->request, &resolved, &text, first_day, last_day, &skip,
                            &encoded) ||
            strcmp(text.text, keys[i].request) != 0)
            continue; /* not this build's text, or a week no longer held */
        char signature[STORE_SNAPSHOT_SIGNATURE_MAX + 1];
        status = view_signature(st, version, first_day, last_day, signature, error);
        if (status != MITILOG_OK || strcmp(signature, keys[i].signature) == 0)
            continue;
        /* Another receiver on the same database may have made it since. */
        char *already = NULL, made_at[32], asked_at[32];
        status = store_snapshot_get(st, keys[i].view, text.text, signature, &already, made_at,
                                    asked_at, error);
        if (already != NULL) {
            free(already);
            continue;
        }
        if (status != MITILOG_OK)
            continue;
        char *body = NULL;
        double made_ms = 0;
        mitilog_error failed = {{0}};
        if (view_make_and_keep(st, &resolved, text.text, signature, 0, &body, &made_ms, &failed) ==
            MITILOG_OK)
            (*remade)++;
        else
            log_warning("report: the kept %s document (%s) could not be made again: %s",
                        keys[i].view, keys[i].request, failed.text);
        free(body);
    }
    free(decoded);
    store_snapshot_keys_free(keys, count);
    return status;
}

/*
 * http_routes_stats.c - the audit views of the API (docs/api.md):
 * GET /api/v1/outliers, /api/v1/stats, /api/v1/drift, /api/v1/ingest.
 * Parameters are checked here; the documents come from src/report/ (store
 * and stats) and store.h, never from SQL in this layer.
 */
#include "http/http_internal.h"

#include <stdlib.h>
#include <string.h>

#include "report/report.h"

static const char *http_stats_parameter(struct MHD_Connection *connection, const char *name)
{
    return MHD_lookup_connection_value(connection, MHD_GET_ARGUMENT_KIND, name);
}

/* A decimal integer in [minimum, maximum], at most 6 digits. */
static int http_stats_integer(const char *text, long minimum, long maximum, long *value)
{
    size_t length = strlen(text);
    if (length == 0 || length > 6 || text[strspn(text, "0123456789")] != '\0')
        return 0;
    *value = strtol(text, NULL, 10);
    return *value >= minimum && *value <= maximum;
}

/* The reply to a report call: 200, 400 for a bad request the report
 * found (e.g. from after to), 503 database, 500 otherwise. */
static http_reply http_report_reply(http_server *server, mitilog_status status, char *body,
                                    const mitilog_error *error, report_format format)
{
    if (status == MITILOG_OK) {
        http_reply reply = http_json_reply(MHD_HTTP_OK, body);
        if (format == REPORT_CSV && reply.status == MHD_HTTP_OK && reply.response != NULL) {
            MHD_del_response_header(reply.response, "Content-Type",
                                    "application/json; charset=utf-8");
            MHD_add_response_header(reply.response, "Content-Type", "text/csv; charset=utf-8");
        }
        return reply;
    }
    free(body);
    unsigned code = status == MITILOG_ERROR_INVALID    ? MHD_HTTP_BAD_REQUEST
                    : status == MITILOG_ERROR_DATABASE ? MHD_HTTP_SERVICE_UNAVAILABLE
                                                       : MHD_HTTP_INTERNAL_SERVER_ERROR;
    return http_error_reply(server, code, "%s", error->text);
}

/* format=json (default) or csv; html is for `mitilog report` only. */
static int http_stats_format(struct MHD_Connection *connection, report_format *format)
{
    const char *text = http_stats_parameter(connection, "format");
    *format = REPORT_JSON;
    if (text == NULL)
        return 1;
    return report_format_parse(text, format) == 0 && *format != REPORT_HTML;
}

/* GET /api/v1/outliers?week=YYYY-Www&group=...&baseline_weeks=N&minimum=N
 *                     &exams=all&format=json|csv */
static http_reply http_outliers(http_server *server, struct MHD_Connection *connection)
{
    report_week_request request = report_week_default_request();
    const char *week = http_stats_parameter(connection, "week");
    const char *group = http_stats_parameter(connection, "group");
    const char *baseline = http_stats_parameter(connection, "baseline_weeks");
    const char *minimum = http_stats_parameter(connection, "minimum");
    const char *exams = http_stats_parameter(connection, "exams");
    report_format format;
    long value;
    if (week != NULL) {
        if (stats_iso_week_parse(week, &request.iso_year, &request.iso_week) != MITILOG_OK)
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter week: not an ISO week YYYY-Www that exists");
        request.has_week = 1;
    }
    if (group != NULL && stats_dimension_parse(group, &request.group) != 0)
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "parameter group: room, preset, shift, transducer or "
                                "exam_type");
    if (baseline != NULL) {
        if (!http_stats_integer(baseline, 1, 104, &value))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter baseline_weeks: an integer from 1 to 104");
        request.settings.baseline_weeks = (size_t)value;
    }
    if (minimum != NULL) {
        if (!http_stats_integer(minimum, 1, 100000, &value))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter minimum: an integer from 1 to 100000");
        request.settings.minimum_baseline = (size_t)value;
    }
    if (exams != NULL) {
        if (strcmp(exams, "all") != 0 && strcmp(exams, "listed") != 0)
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter exams: all or listed");
        request.all_exams = strcmp(exams, "all") == 0;
    }
    if (!http_stats_format(connection, &format))
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST, "parameter format: json or csv");
    char *body = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = report_week(server->store, &request, format, &body, &error);
    return http_report_reply(server, status, body, &error, format);
}

/* GET /api/v1/stats?from=YYYY-MM-DD&to=YYYY-MM-DD&by=...&format=json|csv */
static http_reply http_stats(http_server *server, struct MHD_Connection *connection)
{
    report_stats_request request = {NULL, NULL, STATS_BY_EXAM_TYPE, NULL};
    const char *names[] = {"from", "to"};
    const char *values[2];
    for (int i = 0; i < 2; i++) {
        values[i] = http_stats_parameter(connection, names[i]);
        long day;
        if (values[i] != NULL &&
            (strlen(values[i]) != 10 || stats_day_number(values[i], &day) != MITILOG_OK))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter %s: not a date YYYY-MM-DD", names[i]);
    }
    request.from = values[0];
    request.to = values[1];
    const char *by = http_stats_parameter(connection, "by");
    if (by != NULL && stats_dimension_parse(by, &request.by) != 0)
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "parameter by: exam_type, room, preset, shift or transducer");
    report_format format;
    if (!http_stats_format(connection, &format))
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST, "parameter format: json or csv");
    char *body = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = report_stats(server->store, &request, format, &body, &error);
    return http_report_reply(server, status, body, &error, format);
}

/* GET /api/v1/drift?week=YYYY-Www&weeks=N&baseline_weeks=N */
static http_reply http_drift(http_server *server, struct MHD_Connection *connection)
{
    report_drift_request request = report_drift_default_request();
    const char *week = http_stats_parameter(connection, "week");
    const char *weeks = http_stats_parameter(connection, "weeks");
    const char *baseline = http_stats_parameter(connection, "baseline_weeks");
    long value;
    if (week != NULL) {
        if (stats_iso_week_parse(week, &request.iso_year, &request.iso_week) != MITILOG_OK)
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter week: not an ISO week YYYY-Www that exists");
        request.has_week = 1;
    }
    if (weeks != NULL) {
        if (!http_stats_integer(weeks, 1, 104, &value))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter weeks: an integer from 1 to 104");
        request.weeks = (size_t)value;
    }
    if (baseline != NULL) {
        if (!http_stats_integer(baseline, 1, 104, &value))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter baseline_weeks: an integer from 1 to 104");
        request.baseline_weeks = (size_t)value;
    }
    char *body = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = report_drift(server->store, &request, &body, &error);
    return http_report_reply(server, status, body, &error, REPORT_JSON);
}

/* GET /api/v1/ingest?hours=N&silent_hours=N&days=N */
static http_reply http_ingest(http_server *server, struct MHD_Connection *connection)
{
    const char *names[] = {"hours", "silent_hours", "days"};
    const long maxima[] = {720, 720, 90};
    long values[] = {48, 24, 7};
    for (int i = 0; i < 3; i++) {
        const char *text = http_stats_parameter(connection, names[i]);
        if (text != NULL && !http_stats_integer(text, 1, maxima[i], &values[i]))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter %s: an integer from 1 to %ld", names[i],
                                    maxima[i]);
    }
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_ingest_json(server->store, (int)values[0], (int)values[1],
                                              (int)values[2], &json, &error);
    return http_report_reply(server, status, json, &error, REPORT_JSON);
}

int http_route_stats(http_server *server, struct MHD_Connection *connection, const char *url,
                     http_reply *reply)
{
    if (strcmp(url, "/api/v1/outliers") == 0)
        *reply = http_outliers(server, connection);
    else if (strcmp(url, "/api/v1/stats") == 0)
        *reply = http_stats(server, connection);
    else if (strcmp(url, "/api/v1/drift") == 0)
        *reply = http_drift(server, connection);
    else if (strcmp(url, "/api/v1/ingest") == 0)
        *reply = http_ingest(server, connection);
    else
        return 0;
    return 1;
}

/*
 * http_routes_stats.c - the audit views of the API (docs/api.md):
 * GET /api/v1/outliers, /api/v1/stats, /api/v1/drift, /api/v1/ingest.
 * Parameters are checked by http_parameters.c; the documents come from src/report/ (store
 * and stats) and the store's subject headers, never from SQL in this layer.
 */
#include "http/http_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "report/report.h"
#include "store/store_backfill.h"
#include "store/store_instances.h"

#define HTTP_DIMENSIONS "exam_type|room|preset|shift|transducer|site"

/* The reply to a report call: the one mapping of http_server.c, with the
 * CSV content type when CSV was asked for. */
static http_reply http_report_reply(http_server *server, mitilog_status status, char *body,
                                    const mitilog_error *error, report_format format)
{
    return http_status_reply(server, status, body,
                             format == REPORT_CSV ? "text/csv; charset=utf-8" : NULL, error);
}

/* format=json (default) or csv; html is for `mitilog report` only. */
static report_format http_stats_format(const http_parameter_value *value)
{
    report_format format = REPORT_JSON;
    if (value->text != NULL)
        report_format_parse(value->text, &format);
    return format;
}

/* GET /api/v1/outliers?week=YYYY-Www&group=...&baseline_weeks=N&minimum=N
 *                     &exams=all&format=json|csv */
static http_reply http_outliers(http_server *server, struct MHD_Connection *connection)
{
    static const http_parameter_rule rules[] = {
        {"week", HTTP_PARAMETER_WEEK, 0, 0, NULL},
        {"group", HTTP_PARAMETER_CHOICE, 0, 0, HTTP_DIMENSIONS},
        {"baseline_weeks", HTTP_PARAMETER_INTEGER, 1, 104, NULL},
        {"minimum", HTTP_PARAMETER_INTEGER, 1, 100000, NULL},
        {"exams", HTTP_PARAMETER_CHOICE, 0, 0, "all|listed"},
        {"format", HTTP_PARAMETER_CHOICE, 0, 0, "json|csv"},
        {"site", HTTP_PARAMETER_SITES, 0, 0, NULL},
    };
    enum { COUNT = sizeof rules / sizeof rules[0] };
    http_parameter_value values[COUNT];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, COUNT, values, &reply))
        return reply;
    report_week_request request = report_week_default_request();
    request.sites = &values[6].sites;
    if (values[0].text != NULL) {
        request.iso_year = values[0].iso_year;
        request.iso_week = values[0].iso_week;
        request.has_week = 1;
    }
    if (values[1].text != NULL)
        stats_dimension_parse(values[1].text, &request.group);
    if (values[2].text != NULL)
        request.settings.baseline_weeks = (size_t)values[2].number;
    if (values[3].text != NULL)
        request.settings.minimum_baseline = (size_t)values[3].number;
    if (values[4].text != NULL)
        request.all_exams = strcmp(values[4].text, "all") == 0;
    report_view_request view = {
        .view = REPORT_VIEW_OUTLIERS, .format = http_stats_format(&values[5]), .outliers = request};
    return http_view_reply(server, &view);
}

/* GET /api/v1/stats?from=YYYY-MM-DD&to=YYYY-MM-DD&by=...&format=json|csv */
static http_reply http_stats(http_server *server, struct MHD_Connection *connection)
{
    static const http_parameter_rule rules[] = {
        {"from", HTTP_PARAMETER_DATE, 0, 0, NULL},
        {"to", HTTP_PARAMETER_DATE, 0, 0, NULL},
        {"by", HTTP_PARAMETER_CHOICE, 0, 0, HTTP_DIMENSIONS},
        {"format", HTTP_PARAMETER_CHOICE, 0, 0, "json|csv"},
        {"site", HTTP_PARAMETER_SITES, 0, 0, NULL},
    };
    enum { COUNT = sizeof rules / sizeof rules[0] };
    http_parameter_value values[COUNT];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, COUNT, values, &reply) ||
        !http_parameters_period(server, &values[0], &values[1], &reply))
        return reply;
    report_stats_request request = {values[0].text, values[1].text, STATS_BY_EXAM_TYPE,
                                    server->institution, &values[4].sites};
    if (values[2].text != NULL)
        stats_dimension_parse(values[2].text, &request.by);
    report_view_request view = {.view = REPORT_VIEW_STATISTICS,
                                .format = http_stats_format(&values[3]),
                                .statistics = request};
    return http_view_reply(server, &view);
}

/* GET /api/v1/drift?week=YYYY-Www&weeks=N&baseline_weeks=N */
static http_reply http_drift(http_server *server, struct MHD_Connection *connection)
{
    static const http_parameter_rule rules[] = {
        {"week", HTTP_PARAMETER_WEEK, 0, 0, NULL},
        {"weeks", HTTP_PARAMETER_INTEGER, 1, 104, NULL},
        {"baseline_weeks", HTTP_PARAMETER_INTEGER, 1, 104, NULL},
        {"site", HTTP_PARAMETER_SITES, 0, 0, NULL},
    };
    enum { COUNT = sizeof rules / sizeof rules[0] };
    http_parameter_value values[COUNT];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, COUNT, values, &reply))
        return reply;
    report_drift_request request = report_drift_default_request();
    request.sites = &values[3].sites;
    if (values[0].text != NULL) {
        request.iso_year = values[0].iso_year;
        request.iso_week = values[0].iso_week;
        request.has_week = 1;
    }
    if (values[1].text != NULL)
        request.weeks = (size_t)values[1].number;
    if (values[2].text != NULL)
        request.baseline_weeks = (size_t)values[2].number;
    report_view_request view = {.view = REPORT_VIEW_DRIFT, .format = REPORT_JSON, .drift = request};
    return http_view_reply(server, &view);
}

/* The ingest document gets the newest backfill run as its last member,
 * "backfill" (null when there never was one): the run is another process
 * (mitilog backfill), which records its progress in its own table
 * (store_backfill.h). *json is replaced by the longer document. */
static mitilog_status http_ingest_add_backfill(store *store, char **json, mitilog_error *error)
{
    char *backfill = NULL;
    mitilog_status status = store_backfill_status_json(store, &backfill, error);
    if (status != MITILOG_OK)
        return status;
    char *end = strrchr(*json, '}');
    size_t head = end != NULL ? (size_t)(end - *json) : 0;
    static const char key[] = ",\"backfill\":";
    char *joined = end != NULL ? malloc(head + sizeof key + strlen(backfill) + 2) : NULL;
    if (joined == NULL) {
        free(backfill);
        return mitilog_error_set(error, end == NULL ? MITILOG_ERROR_INVALID : MITILOG_ERROR_MEMORY,
                                 "ingest status: cannot add the backfill");
    }
    memcpy(joined, *json, head);
    sprintf(joined + head, "%s%s}", key, backfill);
    free(backfill);
    free(*json);
    *json = joined;
    return MITILOG_OK;
}

/* GET /api/v1/ingest?hours=N&silent_hours=N&days=N */
static http_reply http_ingest(http_server *server, struct MHD_Connection *connection)
{
    static const http_parameter_rule rules[] = {
        {"hours", HTTP_PARAMETER_INTEGER, 1, 720, NULL},
        {"silent_hours", HTTP_PARAMETER_INTEGER, 1, 720, NULL},
        {"days", HTTP_PARAMETER_INTEGER, 1, 90, NULL},
        {"site", HTTP_PARAMETER_SITES, 0, 0, NULL},
    };
    const long defaults[] = {48, 24, 7};
    http_parameter_value values[4];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, 4, values, &reply))
        return reply;
    long chosen[3];
    for (int i = 0; i < 3; i++)
        chosen[i] = values[i].text != NULL ? values[i].number : defaults[i];
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_ingest_json(server->store, (int)chosen[0], (int)chosen[1],
                                              (int)chosen[2], &values[3].sites, &json, &error);
    if (status == MITILOG_OK)
        status = http_ingest_add_backfill(server->store, &json, &error);
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

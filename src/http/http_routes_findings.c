/*
 * http_routes_findings.c - the ALARA policy engine's API:
 * GET /api/v1/findings and GET /api/v1/policy. Parameters are checked by
 * http_parameters.c before the store sees them (400 naming the
 * parameter); JSON comes from the store (sql/queries/findings/findings.sql,
 * policy_json.sql). Choice: the
 * policy reaches HTTP through the store (the policies row holds the rules
 * as JSON, written when the policy is registered, and the store knows
 * which version is active), so this module never includes src/rules.
 */
#include "http/http_internal.h"
#include "report/report.h"
#include "store/store_findings.h"

#include <string.h>

enum { HTTP_FINDINGS_LIMIT_MAX = 10000 };

/* GET /api/v1/findings?from=&to=&severity=&rule=&room=&preset=&shift=
 *                     &include_superseded=1&limit=N
 * Free-text filters (rule, room, preset, shift) are bound as parameters,
 * never spliced. */
static http_reply http_findings(http_server *server, struct MHD_Connection *connection)
{
    static const http_parameter_rule rules[] = {
        {"from", HTTP_PARAMETER_DATE, 0, 0, NULL},
        {"to", HTTP_PARAMETER_DATE, 0, 0, NULL},
        {"severity", HTTP_PARAMETER_CHOICE, 0, 0, "advisory|warning|violation"},
        {"rule", HTTP_PARAMETER_TEXT, 0, 0, NULL},
        {"room", HTTP_PARAMETER_TEXT, 0, 0, NULL},
        {"preset", HTTP_PARAMETER_TEXT, 0, 0, NULL},
        {"shift", HTTP_PARAMETER_TEXT, 0, 0, NULL},
        {"include_superseded", HTTP_PARAMETER_CHOICE, 0, 0, "0|1"},
        {"limit", HTTP_PARAMETER_INTEGER, 1, HTTP_FINDINGS_LIMIT_MAX, NULL},
        {"site", HTTP_PARAMETER_SITES, 0, 0, NULL},
    };
    enum { COUNT = sizeof rules / sizeof rules[0] };
    http_parameter_value values[COUNT];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, COUNT, values, &reply) ||
        !http_parameters_period(server, &values[0], &values[1], &reply))
        return reply;
    store_finding_filter filter = {0};
    filter.from = values[0].text;
    filter.to = values[1].text;
    filter.severity = values[2].text;
    filter.rule = values[3].text;
    filter.room = values[4].text;
    filter.preset = values[5].text;
    filter.shift = values[6].text;
    filter.include_superseded = values[7].text != NULL && values[7].text[0] == '1';
    filter.limit = values[8].text != NULL ? values[8].number : 0;
    filter.sites = &values[9].sites;
    report_view_request view = {
        .view = REPORT_VIEW_FINDINGS, .format = REPORT_JSON, .findings = filter};
    return http_view_reply(server, &view);
}

/* GET /api/v1/policy: the active policy; 404 when none is loaded. */
static http_reply http_policy(http_server *server)
{
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_policy_json(server->store, &json, &error);
    return http_status_reply(server, status, json, NULL, &error);
}

int http_route_findings(http_server *server, struct MHD_Connection *connection, const char *url,
                        http_reply *reply)
{
    if (strcmp(url, "/api/v1/findings") == 0)
        *reply = http_findings(server, connection);
    else if (strcmp(url, "/api/v1/policy") == 0)
        *reply = http_policy(server);
    else
        return 0;
    return 1;
}

/*
 * http_routes_findings.c - the ALARA policy engine's API:
 * GET /api/v1/findings and GET /api/v1/policy. Parameters are checked
 * before the store sees them (400 naming the parameter); JSON comes from
 * the store (sql/queries/findings/findings.sql, policy_json.sql). Choice: the
 * policy reaches HTTP through the store (the policies row holds the rules
 * as JSON, written when the policy is registered, and the store knows
 * which version is active), so this module never includes src/rules.
 */
#include "http/http_internal.h"

#include <stdlib.h>
#include <string.h>

enum { HTTP_FINDINGS_LIMIT_MAX = 10000, HTTP_FILTER_MAX = 128 };

static const char *http_value(struct MHD_Connection *connection, const char *name)
{
    return MHD_lookup_connection_value(connection, MHD_GET_ARGUMENT_KIND, name);
}

static int http_findings_date(const char *text)
{
    if (strlen(text) != 10 || text[4] != '-' || text[7] != '-')
        return 0;
    for (int i = 0; i < 10; i++)
        if (i != 4 && i != 7 && (text[i] < '0' || text[i] > '9'))
            return 0;
    int month = (text[5] - '0') * 10 + (text[6] - '0');
    int day = (text[8] - '0') * 10 + (text[9] - '0');
    return month >= 1 && month <= 12 && day >= 1 && day <= 31;
}

/* Free-text filters (room, preset, shift, rule): 1 to 128 bytes, no
 * control characters; they are bound as parameters, never spliced. */
static int http_findings_text(const char *text)
{
    size_t length = strlen(text);
    if (length == 0 || length > HTTP_FILTER_MAX)
        return 0;
    for (size_t i = 0; i < length; i++)
        if ((unsigned char)text[i] < 0x20 || text[i] == 0x7f)
            return 0;
    return 1;
}

static http_reply http_findings_store_reply(http_server *server, mitilog_status status,
                                            char *json, const mitilog_error *error)
{
    if (status == MITILOG_OK)
        return http_json_reply(MHD_HTTP_OK, json);
    free(json);
    if (status == MITILOG_ERROR_NOT_FOUND)
        return http_error_reply(server, MHD_HTTP_NOT_FOUND, "%s", error->text);
    return http_error_reply(server,
                            status == MITILOG_ERROR_DATABASE ? MHD_HTTP_SERVICE_UNAVAILABLE
                                                             : MHD_HTTP_INTERNAL_SERVER_ERROR,
                            "%s", error->text);
}

/* GET /api/v1/findings?from=&to=&severity=&rule=&room=&preset=&shift=
 *                     &include_superseded=1&limit=N */
static http_reply http_findings(http_server *server, struct MHD_Connection *connection)
{
    store_finding_filter filter = {0};
    const char *dates[] = {"from", "to"};
    const char **date_targets[] = {&filter.from, &filter.to};
    for (int i = 0; i < 2; i++) {
        const char *value = http_value(connection, dates[i]);
        if (value != NULL && !http_findings_date(value))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter %s: not a date YYYY-MM-DD", dates[i]);
        *date_targets[i] = value;
    }
    const char *severity = http_value(connection, "severity");
    if (severity != NULL && strcmp(severity, "advisory") != 0 &&
        strcmp(severity, "warning") != 0 && strcmp(severity, "violation") != 0)
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "parameter severity: not advisory, warning or violation");
    filter.severity = severity;
    const char *texts[] = {"rule", "room", "preset", "shift"};
    const char **text_targets[] = {&filter.rule, &filter.room, &filter.preset, &filter.shift};
    for (int i = 0; i < 4; i++) {
        const char *value = http_value(connection, texts[i]);
        if (value != NULL && !http_findings_text(value))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter %s: 1 to %d characters, no control characters",
                                    texts[i], HTTP_FILTER_MAX);
        *text_targets[i] = value;
    }
    const char *superseded = http_value(connection, "include_superseded");
    if (superseded != NULL && strcmp(superseded, "0") != 0 && strcmp(superseded, "1") != 0)
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "parameter include_superseded: not 0 or 1");
    filter.include_superseded = superseded != NULL && superseded[0] == '1';
    const char *limit = http_value(connection, "limit");
    if (limit != NULL) {
        size_t length = strlen(limit);
        long parsed = length > 0 && length <= 5 && strspn(limit, "0123456789") == length
                          ? strtol(limit, NULL, 10)
                          : 0;
        if (parsed < 1 || parsed > HTTP_FINDINGS_LIMIT_MAX)
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter limit: not an integer from 1 to %d",
                                    HTTP_FINDINGS_LIMIT_MAX);
        filter.limit = parsed;
    }
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_findings_json(server->store, &filter, &json, &error);
    return http_findings_store_reply(server, status, json, &error);
}

/* GET /api/v1/policy: the active policy; 404 when none is loaded. */
static http_reply http_policy(http_server *server)
{
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_policy_json(server->store, &json, &error);
    return http_findings_store_reply(server, status, json, &error);
}

int http_route_findings(http_server *server, struct MHD_Connection *connection,
                        const char *url, http_reply *reply)
{
    if (strcmp(url, "/api/v1/findings") == 0)
        *reply = http_findings(server, connection);
    else if (strcmp(url, "/api/v1/policy") == 0)
        *reply = http_policy(server);
    else
        return 0;
    return 1;
}

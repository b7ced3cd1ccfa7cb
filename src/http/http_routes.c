/*
 * http_routes.c - the JSON API: /healthz, /api/v1/instances,
 * /api/v1/studies and /api/v1/studies/{study_uid}. Every parameter is
 * checked by http_parameters.c before the store sees it; a bad one
 * answers 400 naming the parameter. Unknown parameters are ignored.
 */
#include "http/http_internal.h"
#include "store/store_exams.h"
#include "store/store_instances.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

enum { HTTP_LIMIT_MAX = 10000 };

/* GET /healthz: 200 with the store's health, 503 when the database fails
 * (the body then says "database": "error" and why). */
static http_reply http_health(http_server *server)
{
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_health_json(server->store, &json, &error);
    if (status != MITILOG_OK && json != NULL)
        return http_json_reply(MHD_HTTP_SERVICE_UNAVAILABLE, json);
    return http_status_reply(server, status, json, NULL, &error);
}

/* GET /api/v1/instances?study=UID | ?since=ISO8601 [&limit=N] */
static http_reply http_instances(http_server *server, struct MHD_Connection *connection)
{
    static const http_parameter_rule rules[] = {
        {"study", HTTP_PARAMETER_UID, 0, 0, NULL},
        {"since", HTTP_PARAMETER_INSTANT, 0, 0, NULL},
        {"limit", HTTP_PARAMETER_INTEGER, 1, HTTP_LIMIT_MAX, NULL},
    };
    http_parameter_value values[3];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, 3, values, &reply))
        return reply;
    store_instance_filter filter = {values[0].text,
                                    values[1].text != NULL ? values[1].instant : NULL,
                                    values[2].text != NULL ? values[2].number : 0};
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_instances_json(server->store, &filter, &json, &error);
    return http_status_reply(server, status, json, NULL, &error);
}

/* GET /api/v1/studies[?from=YYYY-MM-DD][&to=YYYY-MM-DD] */
static http_reply http_studies(http_server *server, struct MHD_Connection *connection)
{
    static const http_parameter_rule rules[] = {
        {"from", HTTP_PARAMETER_DATE, 0, 0, NULL},
        {"to", HTTP_PARAMETER_DATE, 0, 0, NULL},
    };
    http_parameter_value values[2];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, 2, values, &reply) ||
        !http_parameters_period(server, &values[0], &values[1], &reply))
        return reply;
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status =
        store_studies_json(server->store, values[0].text, values[1].text, &json, &error);
    return http_status_reply(server, status, json, NULL, &error);
}

/* GET /api/v1/studies/{study_uid}: one exam with its instances and
 * timeline; 400 for a malformed UID, 404 for an unknown one. */
static http_reply http_study(http_server *server, const char *uid)
{
    size_t length = strlen(uid);
    if (length == 0 || length > 64 || strspn(uid, "0123456789.") != length)
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "study UID: not a UID (digits and dots, at "
                                "most 64)");
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_study_json(server->store, uid, &json, &error);
    if (status == MITILOG_ERROR_NOT_FOUND)
        mitilog_error_set(&error, status, "no study %s", uid);
    return http_status_reply(server, status, json, NULL, &error);
}

int http_route_api(http_server *server, struct MHD_Connection *connection, const char *url,
                   http_reply *reply)
{
    if (strcmp(url, "/healthz") == 0)
        *reply = http_health(server);
    else if (strcmp(url, "/api/v1/instances") == 0)
        *reply = http_instances(server, connection);
    else if (strcmp(url, "/api/v1/studies") == 0)
        *reply = http_studies(server, connection);
    else if (strncmp(url, "/api/v1/studies/", 16) == 0)
        *reply = http_study(server, url + 16);
    else if (http_route_findings(server, connection, url, reply))
        return 1;
    else if (http_route_stats(server, connection, url, reply))
        return 1;
    else if (http_route_devices(server, connection, url, reply))
        return 1;
    else if (strncmp(url, "/api/", 5) == 0 || strcmp(url, "/api") == 0)
        *reply = http_error_reply(server, MHD_HTTP_NOT_FOUND, "not found: %s", url);
    else
        return 0;
    return 1;
}

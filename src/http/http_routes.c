/*
 * http_routes.c - the JSON API: /healthz, /api/v1/instances,
 * /api/v1/studies and /api/v1/studies/{study_uid}. Checks every parameter before the store sees it; a bad
 * one answers 400 naming the parameter. Unknown parameters are ignored.
 */
#include "http/http_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

enum { HTTP_LIMIT_MAX = 10000, HTTP_UID_MAX = 64, HTTP_TIME_MAX = 40 };

/* A query parameter's value, NULL when absent (or given without '='). */
static const char *http_parameter(struct MHD_Connection *connection,
                                  const char *name)
{
    return MHD_lookup_connection_value(connection, MHD_GET_ARGUMENT_KIND,
                                       name);
}

/* 1 if text consists only of characters from allowed. */
static int http_only(const char *text, const char *allowed)
{
    return text[strspn(text, allowed)] == '\0';
}

/* A DICOM UID: digits and dots, 1 to 64 characters (PS3.5 9.1). */
static int http_is_uid(const char *text)
{
    size_t length = strlen(text);
    return length > 0 && length <= HTTP_UID_MAX &&
           http_only(text, "0123456789.");
}

/* A plausible ISO 8601 date or date-time: 4 to 40 characters of digits and
 * "-:T.+Z", starting with a four-digit year. Copies it into out, turning a
 * space back into '+' (a '+' not written as %2B decodes as a space). */
static int http_is_time(const char *text, char out[HTTP_TIME_MAX + 1])
{
    size_t length = strlen(text);
    if (length < 4 || length > HTTP_TIME_MAX)
        return 0;
    for (size_t i = 0; i <= length; i++)
        out[i] = text[i] == ' ' ? '+' : text[i];
    return http_only(out, "0123456789-:T.+Z") &&
           strspn(out, "0123456789") >= 4;
}

/* A calendar date YYYY-MM-DD (month 01-12, day 01-31). */
static int http_is_date(const char *text)
{
    if (strlen(text) != 10 || text[4] != '-' || text[7] != '-')
        return 0;
    for (int i = 0; i < 10; i++) {
        if (i != 4 && i != 7 && (text[i] < '0' || text[i] > '9'))
            return 0;
    }
    int month = (text[5] - '0') * 10 + (text[6] - '0');
    int day = (text[8] - '0') * 10 + (text[9] - '0');
    return month >= 1 && month <= 12 && day >= 1 && day <= 31;
}

/* A row limit: a positive decimal integer up to HTTP_LIMIT_MAX. */
static int http_parse_limit(const char *text, long *limit)
{
    size_t length = strlen(text);
    if (length == 0 || length > 5 || !http_only(text, "0123456789"))
        return 0;
    *limit = strtol(text, NULL, 10);
    return *limit >= 1 && *limit <= HTTP_LIMIT_MAX;
}

/* The reply to a store call: its JSON, or 503 for a database failure and
 * 500 for anything else. */
static http_reply http_store_reply(http_server *server, mitilog_status status,
                                   char *json, const mitilog_error *error)
{
    if (status == MITILOG_OK)
        return http_json_reply(MHD_HTTP_OK, json);
    free(json);
    return http_error_reply(server,
                            status == MITILOG_ERROR_DATABASE
                                ? MHD_HTTP_SERVICE_UNAVAILABLE
                                : MHD_HTTP_INTERNAL_SERVER_ERROR,
                            "%s", error->text);
}

/* GET /healthz: 200 with the store's health, 503 when the database fails
 * (the body then says "database": "error" and why). */
static http_reply http_health(http_server *server)
{
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_health_json(server->store, &json, &error);
    if (status != MITILOG_OK && json != NULL)
        return http_json_reply(MHD_HTTP_SERVICE_UNAVAILABLE, json);
    return http_store_reply(server, status, json, &error);
}

/* GET /api/v1/instances?study=UID | ?since=ISO8601 [&limit=N] */
static http_reply http_instances(http_server *server,
                                 struct MHD_Connection *connection)
{
    const char *study = http_parameter(connection, "study");
    const char *since = http_parameter(connection, "since");
    const char *limit = http_parameter(connection, "limit");
    char since_text[HTTP_TIME_MAX + 1];
    store_instance_filter filter = {NULL, NULL, 0};
    if (study != NULL) {
        if (!http_is_uid(study))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter study: not a UID (digits "
                                    "and dots, at most 64)");
        filter.study_instance_uid = study;
    }
    if (since != NULL) {
        if (!http_is_time(since, since_text))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter since: not an ISO 8601 date "
                                    "or date-time");
        filter.since = since_text;
    }
    if (limit != NULL && !http_parse_limit(limit, &filter.limit))
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "parameter limit: not an integer from 1 "
                                "to %d", HTTP_LIMIT_MAX);
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status =
        store_instances_json(server->store, &filter, &json, &error);
    return http_store_reply(server, status, json, &error);
}

/* GET /api/v1/studies[?from=YYYY-MM-DD][&to=YYYY-MM-DD] */
static http_reply http_studies(http_server *server,
                               struct MHD_Connection *connection)
{
    const char *names[] = {"from", "to"};
    const char *values[2];
    for (int i = 0; i < 2; i++) {
        values[i] = http_parameter(connection, names[i]);
        if (values[i] != NULL && !http_is_date(values[i]))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter %s: not a date YYYY-MM-DD",
                                    names[i]);
    }
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_studies_json(server->store, values[0],
                                               values[1], &json, &error);
    return http_store_reply(server, status, json, &error);
}

/* GET /api/v1/studies/{study_uid}: one exam with its instances and
 * timeline; 400 for a malformed UID, 404 for an unknown one. */
static http_reply http_study(http_server *server, const char *uid)
{
    if (!http_is_uid(uid))
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "study UID: not a UID (digits and dots, at "
                                "most 64)");
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_study_json(server->store, uid, &json,
                                             &error);
    if (status == MITILOG_ERROR_NOT_FOUND)
        return http_error_reply(server, MHD_HTTP_NOT_FOUND, "no study %s",
                                uid);
    return http_store_reply(server, status, json, &error);
}

int http_route_api(http_server *server, struct MHD_Connection *connection,
                   const char *url, http_reply *reply)
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
        *reply = http_error_reply(server, MHD_HTTP_NOT_FOUND,
                                  "not found: %s", url);
    else
        return 0;
    return 1;
}

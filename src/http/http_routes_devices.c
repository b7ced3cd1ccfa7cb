/*
 * http_routes_devices.c - the device screen profiles for the dashboard's
 * Devices page: GET /api/v1/devices (every profile version, JSON from
 * sql/queries/devices/screen_profiles_json.sql) and
 * GET /api/v1/devices/example?key=KEY[&version=N], the frame the profile
 * was learned from as binary PGM (image/x-portable-graymap), on which the
 * page draws the regions named in the profile text. Parameters go through
 * the one checker (http_parameters.c), errors through the one mapping
 * (http_status_reply).
 */
#include "http/http_internal.h"
#include "store/store_devices.h"

#include <string.h>

static http_reply http_devices(http_server *server)
{
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_screen_profiles_json(server->store, &json, &error);
    return http_status_reply(server, status, json, NULL, &error);
}

static http_reply http_device_example(http_server *server, struct MHD_Connection *connection)
{
    enum { KEY, VERSION, COUNT };
    static const http_parameter_rule rules[COUNT] = {
        [KEY] = {"key", HTTP_PARAMETER_TEXT, 0, 0, NULL},
        [VERSION] = {"version", HTTP_PARAMETER_INTEGER, 1, 1000000, NULL},
    };
    http_parameter_value values[COUNT];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, COUNT, values, &reply))
        return reply;
    mitilog_error error = {{0}};
    if (values[KEY].text == NULL) {
        mitilog_error_set(&error, MITILOG_ERROR_INVALID, "parameter key: give the profile key");
        return http_status_reply(server, MITILOG_ERROR_INVALID, NULL, NULL, &error);
    }
    int version = values[VERSION].text != NULL ? (int)values[VERSION].number : 0;
    store_screen_profile_row row;
    mitilog_status status =
        store_screen_profile_get(server->store, values[KEY].text, version, &row, &error);
    if (status == MITILOG_OK && row.example == NULL) {
        store_screen_profile_row_free(&row);
        status = mitilog_error_set(&error, MITILOG_ERROR_NOT_FOUND,
                                   "no example frame is kept for profile %s", values[KEY].text);
    }
    if (status != MITILOG_OK)
        return http_status_reply(server, status, NULL, NULL, &error);
    /* Binary: not through the JSON reply, which measures text. */
    reply.status = MHD_HTTP_OK;
    reply.response =
        MHD_create_response_from_buffer(row.example_size, row.example, MHD_RESPMEM_MUST_FREE);
    if (reply.response == NULL) {
        store_screen_profile_row_free(&row);
        mitilog_error_set(&error, MITILOG_ERROR_MEMORY, "out of memory");
        return http_status_reply(server, MITILOG_ERROR_MEMORY, NULL, NULL, &error);
    }
    row.example = NULL; /* the response owns it now */
    store_screen_profile_row_free(&row);
    MHD_add_response_header(reply.response, "Content-Type", "image/x-portable-graymap");
    MHD_add_response_header(reply.response, "Cache-Control", "no-store");
    return reply;
}

int http_route_devices(http_server *server, struct MHD_Connection *connection, const char *url,
                       http_reply *reply)
{
    if (strcmp(url, "/api/v1/devices") == 0)
        *reply = http_devices(server);
    else if (strcmp(url, "/api/v1/devices/example") == 0)
        *reply = http_device_example(server, connection);
    else
        return 0;
    return 1;
}

/*
 * http_routes_devices.c - the device screen profiles for the dashboard's
 * Devices page: GET /api/v1/devices (every profile version, JSON from
 * sql/queries/screen_profiles_json.sql) and
 * GET /api/v1/devices/example?key=KEY[&version=N], the frame the profile
 * was learned from as binary PGM (image/x-portable-graymap), on which the
 * page draws the regions named in the profile text.
 */
#include "http/http_internal.h"

#include <stdlib.h>
#include <string.h>

enum { HTTP_DEVICE_KEY_MAX = 127 };

static http_reply http_devices(http_server *server)
{
    char *json = NULL;
    mitilog_error error = {{0}};
    if (store_screen_profiles_json(server->store, &json, &error) != MITILOG_OK)
        return http_error_reply(server, MHD_HTTP_SERVICE_UNAVAILABLE, "%s", error.text);
    return http_json_reply(MHD_HTTP_OK, json);
}

static http_reply http_device_example(http_server *server, struct MHD_Connection *connection)
{
    const char *key = MHD_lookup_connection_value(connection, MHD_GET_ARGUMENT_KIND, "key");
    const char *version_text =
        MHD_lookup_connection_value(connection, MHD_GET_ARGUMENT_KIND, "version");
    if (key == NULL || key[0] == '\0' || strlen(key) > HTTP_DEVICE_KEY_MAX)
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "parameter key: give the profile key, 1 to 127 characters");
    for (const char *c = key; *c; c++) {
        if ((unsigned char)*c < 0x20)
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter key: control characters are not allowed");
    }
    long version = 0;
    if (version_text != NULL) {
        char *end = NULL;
        version = strtol(version_text, &end, 10);
        if (version_text[0] == '\0' || *end != '\0' || version < 1 || version > 1000000)
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "parameter version: a positive whole number");
    }
    store_screen_profile_row row;
    mitilog_error error = {{0}};
    mitilog_status status =
        store_screen_profile_get(server->store, key, (int)version, &row, &error);
    if (status == MITILOG_ERROR_NOT_FOUND)
        return http_error_reply(server, MHD_HTTP_NOT_FOUND, "%s", error.text);
    if (status != MITILOG_OK)
        return http_error_reply(server, MHD_HTTP_SERVICE_UNAVAILABLE, "%s", error.text);
    if (row.example == NULL) {
        store_screen_profile_row_free(&row);
        return http_error_reply(server, MHD_HTTP_NOT_FOUND,
                                "no example frame is kept for profile %s", key);
    }
    http_reply reply = {MHD_HTTP_OK, NULL};
    reply.response = MHD_create_response_from_buffer(row.example_size, row.example,
                                                     MHD_RESPMEM_MUST_FREE);
    if (reply.response == NULL) {
        store_screen_profile_row_free(&row);
        return http_error_reply(server, MHD_HTTP_INTERNAL_SERVER_ERROR, "out of memory");
    }
    row.example = NULL; /* the response owns it now */
    store_screen_profile_row_free(&row);
    MHD_add_response_header(reply.response, "Content-Type", "image/x-portable-graymap");
    MHD_add_response_header(reply.response, "Cache-Control", "no-store");
    return reply;
}

int http_route_devices(http_server *server, struct MHD_Connection *connection,
                       const char *url, http_reply *reply)
{
    if (strcmp(url, "/api/v1/devices") == 0)
        *reply = http_devices(server);
    else if (strcmp(url, "/api/v1/devices/example") == 0)
        *reply = http_device_example(server, connection);
    else
        return 0;
    return 1;
}

/*
 * http_server.c - the libmicrohttpd daemon: start and stop, dispatch of a
 * request by method and path, the headers every response carries, and
 * JSON and error responses.
 */
#include "http/http_internal.h"

#include <arpa/inet.h>
#include <errno.h>
#include <netinet/in.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <unistd.h>

#include "json/json.h"
#include "util/log.h"

enum {
    HTTP_THREAD_POOL_SIZE = 4,
    HTTP_CONNECTION_LIMIT = 64,
    HTTP_CONNECTION_TIMEOUT_S = 30,
    HTTP_ERROR_MESSAGE_MAX = 300
};

/* The last resort when SQLite cannot build an error body: a constant. */
static const char http_fallback_error[] = "{\"error\":\"internal error\"}";

/* Headers of every response: no MIME sniffing, no framing, own origin. */
static void http_add_common_headers(struct MHD_Response *response)
{
    MHD_add_response_header(response, "Referrer-Policy", "no-referrer");
    MHD_add_response_header(response, "X-Content-Type-Options", "nosniff");
    MHD_add_response_header(response, "X-Frame-Options", "DENY");
    MHD_add_response_header(response, "Content-Security-Policy",
                            "default-src 'self'; frame-ancestors 'none'");
}

http_reply http_json_reply(unsigned status, char *json)
{
    http_reply reply = {status, NULL};
    if (json != NULL)
        reply.response = MHD_create_response_from_buffer(
            strlen(json), json, MHD_RESPMEM_MUST_FREE);
    if (reply.response == NULL) {
        free(json);
        reply.status = MHD_HTTP_INTERNAL_SERVER_ERROR;
        reply.response = MHD_create_response_from_buffer(
            sizeof http_fallback_error - 1, (void *)http_fallback_error,
            MHD_RESPMEM_PERSISTENT);
        if (reply.response == NULL)
            return reply;
    }
    MHD_add_response_header(reply.response, "Content-Type",
                            "application/json; charset=utf-8");
    MHD_add_response_header(reply.response, "Cache-Control", "no-store");
    return reply;
}

/* Copies message for a JSON string: at most HTTP_ERROR_MESSAGE_MAX bytes,
 * bytes outside ASCII replaced by '?' (a request path may hold any bytes,
 * JSON text must be UTF-8). SQLite escapes quotes and control characters. */
static void http_clean_message(char *message)
{
    message[HTTP_ERROR_MESSAGE_MAX] = '\0';
    for (unsigned char *byte = (unsigned char *)message; *byte != 0; byte++) {
        if (*byte >= 0x80)
            *byte = '?';
    }
}

http_reply http_error_reply(http_server *server, unsigned status,
                            const char *format, ...)
{
    char message[HTTP_ERROR_MESSAGE_MAX + 1];
    va_list arguments;
    va_start(arguments, format);
    vsnprintf(message, sizeof message, format, arguments);
    va_end(arguments);
    http_clean_message(message);

    (void)server;
    char *json = NULL;
    json_writer writer;
    json_writer_init(&writer);
    json_object_begin(&writer);
    json_key(&writer, "error");
    json_string(&writer, message);
    json_object_end(&writer);
    if (json_writer_take(&writer, &json, NULL) != MITILOG_OK)
        json = strdup(http_fallback_error);
    return http_json_reply(status, json);
}

/* Queues reply on connection with the common headers; frees it. */
static enum MHD_Result http_queue(struct MHD_Connection *connection,
                                  http_reply reply)
{
    if (reply.response == NULL)
        return MHD_NO; /* out of memory: MHD closes the connection */
    http_add_common_headers(reply.response);
    enum MHD_Result result =
        MHD_queue_response(connection, reply.status, reply.response);
    MHD_destroy_response(reply.response);
    return result;
}

/* 1 when the request carries a user and password of the password file. */
static int http_login_accepted(http_server *server, struct MHD_Connection *connection)
{
    char *password = NULL;
    char *user = MHD_basic_auth_get_username_password(connection, &password);
    int accepted = http_auth_check(server->auth, user, password);
    if (user != NULL)
        MHD_free(user);
    if (password != NULL)
        MHD_free(password);
    return accepted;
}

/* 401 with a Basic challenge and a JSON body. */
static enum MHD_Result http_queue_login_request(http_server *server,
                                                struct MHD_Connection *connection)
{
    http_reply reply = http_error_reply(server, MHD_HTTP_UNAUTHORIZED,
                                        "a login is required");
    if (reply.response == NULL)
        return MHD_NO;
    http_add_common_headers(reply.response);
    enum MHD_Result result =
        MHD_queue_basic_auth_fail_response(connection, "mitilog", reply.response);
    MHD_destroy_response(reply.response);
    return result;
}

/* MHD access handler: GET and HEAD only (MHD leaves out the body of a
 * HEAD reply), then the API, then static files, else 404. Answers on the
 * first call: no request body is ever needed. */
static enum MHD_Result http_handle(void *context,
                                   struct MHD_Connection *connection,
                                   const char *url, const char *method,
                                   const char *version,
                                   const char *upload_data,
                                   size_t *upload_data_size, void **state)
{
    (void)version;
    (void)upload_data;
    (void)upload_data_size;
    (void)state;
    http_server *server = context;
    http_reply reply;
    if (server->auth != NULL && strcmp(url, "/healthz") != 0 &&
        !http_login_accepted(server, connection))
        return http_queue_login_request(server, connection);
    if (strcmp(method, MHD_HTTP_METHOD_GET) != 0 &&
        strcmp(method, MHD_HTTP_METHOD_HEAD) != 0) {
        reply = http_error_reply(server, MHD_HTTP_METHOD_NOT_ALLOWED,
                                 "method not allowed: %s", method);
        if (reply.response != NULL)
            MHD_add_response_header(reply.response, "Allow", "GET, HEAD");
        return http_queue(connection, reply);
    }
    if (http_route_api(server, connection, url, &reply) ||
        http_route_static(server, url, &reply))
        return http_queue(connection, reply);
    return http_queue(connection, http_error_reply(server, MHD_HTTP_NOT_FOUND,
                                                   "not found: %s", url));
}

/* Routes libmicrohttpd's own messages into the log. */
static void http_log_library(void *context, const char *format,
                             va_list arguments)
{
    (void)context;
    char line[512];
    vsnprintf(line, sizeof line, format, arguments);
    size_t length = strlen(line);
    if (length > 0 && line[length - 1] == '\n')
        line[length - 1] = '\0';
    log_warning("http: %s", line);
}

/* After MHD failed to start: why (binding the same address tells). */
static mitilog_status http_start_error(const struct sockaddr_in *address,
                                       const char *text, unsigned port,
                                       mitilog_error *error)
{
    int probe = socket(AF_INET, SOCK_STREAM, 0);
    int reason = 0;
    if (probe >= 0) {
        int yes = 1;
        setsockopt(probe, SOL_SOCKET, SO_REUSEADDR, &yes, sizeof yes);
        if (bind(probe, (const struct sockaddr *)address, sizeof *address) != 0)
            reason = errno;
        close(probe);
    }
    if (reason == EADDRINUSE)
        return mitilog_error_set(error, MITILOG_ERROR_IO,
                                 "HTTP: cannot listen on %s:%u: the port is "
                                 "already in use", text, port);
    if (reason != 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO,
                                 "HTTP: cannot listen on %s:%u: %s", text,
                                 port, strerror(reason));
    return mitilog_error_set(error, MITILOG_ERROR_IO,
                             "HTTP: cannot start the server on %s:%u", text,
                             port);
}

/* Reads a whole PEM file into a malloc'ed string. */
static mitilog_status http_read_pem(const char *path, char **out, mitilog_error *error)
{
    FILE *file = fopen(path, "rb");
    if (file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "HTTPS: %s: %s", path,
                                 strerror(errno));
    char *text = NULL;
    size_t used = 0, size = 0;
    mitilog_status status = MITILOG_OK;
    for (;;) {
        if (used + 4096 + 1 > size) {
            size = size ? size * 2 : 8192;
            char *grown = size <= (1u << 20) ? realloc(text, size) : NULL;
            if (grown == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                           "HTTPS: %s is too large for a PEM file", path);
                break;
            }
            text = grown;
        }
        size_t count = fread(text + used, 1, 4096, file);
        used += count;
        if (count < 4096)
            break;
    }
    fclose(file);
    if (status != MITILOG_OK) {
        free(text);
        return status;
    }
    text[used] = '\0';
    *out = text;
    return MITILOG_OK;
}

/* Loads the TLS key and certificate and the password file, if set. */
static mitilog_status http_prepare_security(http_server *server, const http_settings *settings,
                                            mitilog_error *error)
{
    if (settings->tls_certificate_file != NULL && settings->tls_certificate_file[0] != '\0') {
        mitilog_status status =
            http_read_pem(settings->tls_certificate_file, &server->tls_certificate, error);
        if (status == MITILOG_OK)
            status = http_read_pem(settings->tls_private_key_file, &server->tls_private_key,
                                   error);
        if (status != MITILOG_OK)
            return status;
    }
    if (settings->password_file != NULL && settings->password_file[0] != '\0') {
        if (server->tls_certificate == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "HTTP login without HTTPS would send passwords in clear");
        return http_auth_load(settings->password_file, &server->auth, error);
    }
    return MITILOG_OK;
}

/* The resolved web_root, or NULL (with a warning) when it is unusable. */
static char *http_resolve_web_root(const char *web_root)
{
    if (web_root == NULL || web_root[0] == '\0')
        return NULL;
    char *resolved = realpath(web_root, NULL);
    struct stat info;
    if (resolved == NULL || stat(resolved, &info) != 0 ||
        !S_ISDIR(info.st_mode)) {
        log_warning("http: web root %s is not a folder; serving the API "
                    "only", web_root);
        free(resolved);
        return NULL;
    }
    return resolved;
}

mitilog_status http_server_start(const http_settings *settings, store *st,
                                 http_server **out, mitilog_error *error)
{
    if (out == NULL || settings == NULL || st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "http_server_start: missing argument");
    *out = NULL;
    const char *text = settings->address != NULL && settings->address[0] != 0
                           ? settings->address
                           : "127.0.0.1";
    struct sockaddr_in address;
    memset(&address, 0, sizeof address);
    address.sin_family = AF_INET;
    if (inet_pton(AF_INET, text, &address.sin_addr) != 1)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "HTTP address %s is not an IPv4 address",
                                 text);
    if (settings->port > 65535)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "HTTP port %u out of range", settings->port);
    address.sin_port = htons((uint16_t)settings->port);

    http_server *server = calloc(1, sizeof *server);
    if (server == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                 "out of memory starting HTTP");
    server->store = st;
    server->web_root = http_resolve_web_root(settings->web_root);
    unsigned flags = MHD_USE_AUTO_INTERNAL_THREAD | MHD_USE_ERROR_LOG;
    if (http_prepare_security(server, settings, error) != MITILOG_OK) {
        http_server_stop(server);
        return MITILOG_ERROR_INVALID;
    }
    if (server->tls_certificate != NULL)
        flags |= MHD_USE_TLS;

    /* The HTTPS options only when TLS is on: MHD refuses them otherwise. */
    struct MHD_OptionItem tls_options[] = {
        {MHD_OPTION_HTTPS_MEM_CERT, 0, server->tls_certificate},
        {MHD_OPTION_HTTPS_MEM_KEY, 0, server->tls_private_key},
        {MHD_OPTION_END, 0, NULL}};
    if (server->tls_certificate == NULL)
        tls_options[0].option = MHD_OPTION_END;
    server->daemon = MHD_start_daemon(
        flags, (uint16_t)settings->port, NULL, NULL, &http_handle, server,
        MHD_OPTION_ARRAY, tls_options,
        MHD_OPTION_EXTERNAL_LOGGER, &http_log_library, NULL,
        MHD_OPTION_SOCK_ADDR, (struct sockaddr *)&address,
        MHD_OPTION_THREAD_POOL_SIZE, (unsigned)HTTP_THREAD_POOL_SIZE,
        MHD_OPTION_CONNECTION_LIMIT, (unsigned)HTTP_CONNECTION_LIMIT,
        MHD_OPTION_CONNECTION_TIMEOUT, (unsigned)HTTP_CONNECTION_TIMEOUT_S,
        MHD_OPTION_END);
    if (server->daemon == NULL) {
        mitilog_status status =
            http_start_error(&address, text, settings->port, error);
        http_server_stop(server);
        return status;
    }
    const union MHD_DaemonInfo *info =
        MHD_get_daemon_info(server->daemon, MHD_DAEMON_INFO_BIND_PORT);
    server->port = info != NULL ? info->port : settings->port;
    log_info("http: listening on %s://%s:%u%s%s%s",
             server->tls_certificate != NULL ? "https" : "http", text, server->port,
             server->auth != NULL ? " (login required)" : "",
             server->web_root != NULL ? ", files from " : "",
             server->web_root != NULL ? server->web_root : "");
    *out = server;
    return MITILOG_OK;
}

void http_server_stop(http_server *server)
{
    if (server == NULL)
        return;
    if (server->daemon != NULL)
        MHD_stop_daemon(server->daemon);
    free(server->web_root);
    http_auth_free(server->auth);
    free(server->tls_certificate);
    free(server->tls_private_key);
    free(server);
}

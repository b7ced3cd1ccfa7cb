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
#include <sys/random.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include <gmime/gmime.h>

#include "json/json.h"
#include "util/log.h"

enum {
    HTTP_THREAD_POOL_SIZE = 4,
    HTTP_DEFAULT_CONNECTIONS = 256,
    HTTP_DEFAULT_CONNECTIONS_PER_ADDRESS = 32,
    HTTP_DEFAULT_REQUEST_TIMEOUT_S = 10,
    HTTP_IDLE_TIMEOUT_S = 30,
    HTTP_ERROR_MESSAGE_MAX = 300,
    /* Request target (path and query) and header fields this server
     * reads; longer ones answer 414 and 431 (RFC 9110 4.1 recommends
     * supporting targets of at least 8000 octets). */
    HTTP_TARGET_MAX = 8192,
    HTTP_HEADERS_MAX = 16384,
    HTTP_PARAMETERS_MAX = 6000 /* see http_target_seen() */
};

/* Memory of one connection for its request head and libmicrohttpd's
 * records of each parameter and header (about 64 bytes each): large
 * enough that a target of HTTP_TARGET_MAX bytes, split into as many
 * parameters as it can hold, still reaches the access handler (which then
 * answers), instead of libmicrohttpd running out of memory half-way. The
 * pages are mapped on demand: an ordinary request touches a few. */
static const size_t http_connection_memory = 1024 * 1024;

/* GnuTLS priorities for HTTPS: TLS 1.3 and 1.2 only, key exchange by
 * ephemeral elliptic-curve Diffie-Hellman (forward secrecy), AEAD ciphers
 * only (AES-GCM, ChaCha20-Poly1305): the recommendations of BCP 195
 * (RFC 9325 4.1 and 4.2), as on the DICOM side. */
static const char http_tls_priorities[] =
    "NORMAL:-VERS-ALL:+VERS-TLS1.3:+VERS-TLS1.2:-KX-ALL:+ECDHE-RSA:+ECDHE-ECDSA:"
    "-CIPHER-ALL:+AES-256-GCM:+AES-128-GCM:+CHACHA20-POLY1305:-MAC-ALL:+AEAD:%SERVER_PRECEDENCE";

/* The last resort when SQLite cannot build an error body: a constant. */
static const char http_fallback_error[] = "{\"error\":\"internal error\"}";

/* Headers of every response: no MIME sniffing, no framing, own origin;
 * over HTTPS, HTTPS only for a year (RFC 6797 6.1). */
static void http_add_common_headers(const http_server *server, struct MHD_Response *response)
{
    if (server->tls_certificate != NULL)
        MHD_add_response_header(response, "Strict-Transport-Security", "max-age=31536000");
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
        reply.response = MHD_create_response_from_buffer(strlen(json), json, MHD_RESPMEM_MUST_FREE);
    if (reply.response == NULL) {
        free(json);
        reply.status = MHD_HTTP_INTERNAL_SERVER_ERROR;
        reply.response = MHD_create_response_from_buffer(
            sizeof http_fallback_error - 1, (void *)http_fallback_error, MHD_RESPMEM_PERSISTENT);
        if (reply.response == NULL)
            return reply;
    }
    MHD_add_response_header(reply.response, "Content-Type", "application/json; charset=utf-8");
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

http_reply http_error_reply(http_server *server, unsigned status, const char *format, ...)
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

http_reply http_status_reply(http_server *server, mitilog_status status, char *body,
                             const char *content_type, const mitilog_error *error)
{
    if (status == MITILOG_OK) {
        http_reply reply = http_json_reply(MHD_HTTP_OK, body);
        if (content_type != NULL && reply.status == MHD_HTTP_OK && reply.response != NULL) {
            MHD_del_response_header(reply.response, "Content-Type",
                                    "application/json; charset=utf-8");
            MHD_add_response_header(reply.response, "Content-Type", content_type);
        }
        return reply;
    }
    free(body);
    unsigned code;
    switch (status) {
    case MITILOG_ERROR_INVALID: code = MHD_HTTP_BAD_REQUEST; break;
    case MITILOG_ERROR_NOT_FOUND: code = MHD_HTTP_NOT_FOUND; break;
    case MITILOG_ERROR_DATABASE: code = MHD_HTTP_SERVICE_UNAVAILABLE; break;
    default: code = MHD_HTTP_INTERNAL_SERVER_ERROR; break;
    }
    return http_error_reply(server, code, "%s",
                            error != NULL && error->text[0] != '\0' ? error->text
                                                                    : mitilog_status_name(status));
}

/* Queues reply on connection with the common headers; frees it. */
static enum MHD_Result http_queue(const http_server *server, struct MHD_Connection *connection,
                                  http_reply reply)
{
    if (reply.response == NULL)
        return MHD_NO; /* out of memory: MHD closes the connection */
    http_add_common_headers(server, reply.response);
    enum MHD_Result result = MHD_queue_response(connection, reply.status, reply.response);
    MHD_destroy_response(reply.response);
    return result;
}

/* Copies text for a log line: at most 64 bytes of it, quotes, backslashes,
 * control characters and bytes outside ASCII written as \xNN, so that a
 * user name cannot forge a line. */
static void http_escape_for_log(const char *text, char *out, size_t size)
{
    size_t used = 0;
    for (size_t i = 0; text[i] != '\0' && i < 64 && used + 5 < size; i++) {
        unsigned char byte = (unsigned char)text[i];
        if (byte < 0x20 || byte >= 0x7f || byte == '"' || byte == '\\')
            used += (size_t)snprintf(out + used, size - used, "\\x%02x", byte);
        else
            out[used++] = (char)byte;
    }
    out[used] = '\0';
}

static double http_monotonic_seconds(void)
{
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    return (double)now.tv_sec + (double)now.tv_nsec / 1e9;
}

/* 401 with a Basic challenge and a JSON body. */
static enum MHD_Result http_queue_login_request(http_server *server,
                                                struct MHD_Connection *connection)
{
    http_reply reply = http_error_reply(server, MHD_HTTP_UNAUTHORIZED, "a login is required");
    if (reply.response == NULL)
        return MHD_NO;
    http_add_common_headers(server, reply.response);
    enum MHD_Result result =
        MHD_queue_basic_auth_fail_response(connection, "mitilog", reply.response);
    MHD_destroy_response(reply.response);
    return result;
}

/* Checks the login of a request: 1 when accepted; else 0 with the reply
 * queued in *result (401 with a challenge, or 429 while this address or
 * user must wait after repeated failures: http_throttle.h). Every failure
 * is logged with the address and the escaped user name, never the
 * password. */
static int http_login_accepted(http_server *server, struct MHD_Connection *connection,
                               enum MHD_Result *result, http_identity *identity)
{
    char *password = NULL;
    char *user = MHD_basic_auth_get_username_password(connection, &password);
    char address[INET6_ADDRSTRLEN + 32];
    http_client_address(connection, address, sizeof address);
    char shown[64 * 4 + 1];
    http_escape_for_log(user != NULL ? user : "", shown, sizeof shown);
    double now = http_monotonic_seconds();
    unsigned wait = http_throttle_wait(server->throttle, address, user, now);
    int accepted = 0;
    if (user == NULL || password == NULL) {
        *result = http_queue_login_request(server, connection);
    } else if (wait > 0) {
        log_warning("http: login refused for user \"%s\" from %s: too many failed logins, "
                    "next try in %u s",
                    shown, address, wait);
        http_reply reply = http_error_reply(server, MHD_HTTP_TOO_MANY_REQUESTS,
                                            "too many failed logins from this address or for "
                                            "this user: try again in %u seconds",
                                            wait);
        char seconds[16];
        snprintf(seconds, sizeof seconds, "%u", wait);
        if (reply.response != NULL)
            MHD_add_response_header(reply.response, "Retry-After", seconds); /* RFC 6585 4 */
        *result = http_queue(server, connection, reply);
    } else if (http_auth_check(server->auth, user, password)) {
        http_throttle_succeeded(server->throttle, address, user);
        if (strlen(user) < sizeof identity->user) {
            snprintf(identity->user, sizeof identity->user, "%s", user);
            identity->role = http_auth_role(server->auth, user);
            accepted = 1;
        } else {
            *result = http_queue_login_request(server, connection);
        }
    } else {
        unsigned address_failures, user_failures;
        http_throttle_failed(server->throttle, address, user, http_monotonic_seconds(),
                             &address_failures, &user_failures);
        log_warning("http: login failed for user \"%s\" from %s (%u failures from this "
                    "address, %u for this user)",
                    shown, address, address_failures, user_failures);
        *result = http_queue_login_request(server, connection);
    }
    if (user != NULL)
        MHD_free(user);
    if (password != NULL)
        MHD_free(password);
    return accepted;
}

/* Adds the bytes of one header field ("name: value" and CRLF). */
static enum MHD_Result http_count_header(void *context, enum MHD_ValueKind kind, const char *key,
                                         const char *value)
{
    (void)kind;
    size_t *total = context;
    *total += strlen(key) + (value != NULL ? strlen(value) : 0) + 4;
    return MHD_YES;
}

/* The body of a POST being read: a review form or a STOW-RS request. */
typedef struct http_upload {
    http_post *post;
    http_stow *stow;
} http_upload;

static const char HTTP_STOW_PATH[] = "/dicomweb/studies";

/* One call with a piece of a STOW-RS body, or its end. A declared
 * length past the limit was answered 413 before the body (see
 * http_stow_refused); past it without one, the connection is closed. */
static enum MHD_Result http_stow_body(http_server *server, struct MHD_Connection *connection,
                                      http_stow *stow, const char *data, size_t *size)
{
    if (*size != 0) {
        size_t piece = *size;
        *size = 0;
        if (http_stow_answered(stow))
            return MHD_YES;
        if (!http_stow_feed(server, stow, data, piece)) {
            /* libmicrohttpd 0.9.75 takes a reply only before the body
             * or after its end: a body past the limit without a declared
             * length (chunked) is cut instead, its rest never read. */
            http_stow_set_answered(stow);
            http_guard_close(server->guard, connection,
                             "the STOW-RS body passed [dicomweb] max_request_megabytes; "
                             "the rest is not read (a client that declares Content-Length "
                             "is answered 413 before it sends the body)");
        }
        return MHD_YES;
    }
    if (http_stow_answered(stow))
        return MHD_YES;
    return http_queue(server, connection, http_stow_finish(server, connection, stow));
}

/* MHD access handler: GET and HEAD (MHD leaves out the body of a HEAD
 * reply) to the API, then static files, else 404; answered on the first
 * call. POST only to /api/v1/reviews: checked on the first call, its body
 * read by the following ones (*state holds it), answered on the last. */
static enum MHD_Result http_handle(void *context, struct MHD_Connection *connection,
                                   const char *url, const char *method, const char *version,
                                   const char *upload_data, size_t *upload_data_size, void **state)
{
    (void)version;
    http_server *server = context;
    http_reply reply;
    if (*state != NULL) { /* a POST whose checks passed: its body */
        http_upload *upload = *state;
        if (upload->stow != NULL)
            return http_stow_body(server, connection, upload->stow, upload_data, upload_data_size);
        if (*upload_data_size != 0) {
            http_post_feed(upload->post, upload_data, *upload_data_size);
            *upload_data_size = 0;
            return MHD_YES;
        }
        return http_queue(server, connection, http_post_finish(server, connection, upload->post));
    }
    size_t target = http_guard_received(server->guard, connection);
    if (target > HTTP_TARGET_MAX)
        return http_queue(server, connection,
                          http_error_reply(server, MHD_HTTP_URI_TOO_LONG,
                                           "the request target (path and query) has %zu bytes; "
                                           "at most %d are read",
                                           target, HTTP_TARGET_MAX));
    size_t header_bytes = 0;
    MHD_get_connection_values(connection, MHD_HEADER_KIND, http_count_header, &header_bytes);
    if (header_bytes > HTTP_HEADERS_MAX)
        return http_queue(server, connection,
                          http_error_reply(server, MHD_HTTP_REQUEST_HEADER_FIELDS_TOO_LARGE,
                                           "the header fields have %zu bytes; at most %d are read",
                                           header_bytes, HTTP_HEADERS_MAX));
    enum MHD_Result result = MHD_NO;
    http_identity identity = {"", NULL};
    /* The monitoring paths stay open, as documented in docs/security.md:
     * they show counts, never patient data. */
    if (server->auth != NULL && strcmp(url, "/healthz") != 0 && strcmp(url, "/metrics") != 0 &&
        !http_login_accepted(server, connection, &result, &identity))
        return result;
    if (strcmp(method, MHD_HTTP_METHOD_POST) == 0 &&
        strcmp(url, HTTP_STOW_PATH) == 0) { /* DICOMweb STOW-RS */
        if (http_stow_refused(server, connection, &identity, &reply))
            return http_queue(server, connection, reply);
        http_upload *upload = calloc(1, sizeof *upload);
        if (upload != NULL && (upload->stow = http_stow_create(connection, &identity)) == NULL) {
            free(upload);
            upload = NULL;
        }
        if (upload == NULL)
            return http_queue(server, connection,
                              http_error_reply(server, MHD_HTTP_SERVICE_UNAVAILABLE,
                                               "out of memory receiving objects: try again later"));
        *state = upload;
        return MHD_YES;
    }
    /* A sender is a machine client that stores objects: it reads nothing. */
    if (identity.role != NULL && strcmp(identity.role, "sender") == 0)
        return http_queue(server, connection,
                          http_error_reply(server, MHD_HTTP_FORBIDDEN,
                                           "user %s has the role sender: it may only store "
                                           "objects (POST %s)",
                                           identity.user, HTTP_STOW_PATH));
    if (strcmp(method, MHD_HTTP_METHOD_POST) == 0) {
        if (http_post_refused(server, connection, url, &identity, &reply))
            return http_queue(server, connection, reply);
        http_upload *upload = calloc(1, sizeof *upload);
        if (upload != NULL && (upload->post = http_post_create(connection, &identity)) == NULL) {
            free(upload);
            upload = NULL;
        }
        if (upload == NULL)
            return http_queue(server, connection,
                              http_error_reply(server, MHD_HTTP_INTERNAL_SERVER_ERROR,
                                               "out of memory reading a review"));
        *state = upload;
        return MHD_YES;
    }
    if (strcmp(method, MHD_HTTP_METHOD_GET) != 0 && strcmp(method, MHD_HTTP_METHOD_HEAD) != 0) {
        reply =
            http_error_reply(server, MHD_HTTP_METHOD_NOT_ALLOWED, "method not allowed: %s", method);
        if (reply.response != NULL)
            MHD_add_response_header(reply.response, "Allow", "GET, HEAD");
        return http_queue(server, connection, reply);
    }
    if (http_route_metrics(server, url, &reply) ||
        http_route_reviews(server, connection, url, &identity, &reply) ||
        http_route_api(server, connection, url, &reply) || http_route_static(server, url, &reply))
        return http_queue(server, connection, reply);
    return http_queue(server, connection,
                      http_error_reply(server, MHD_HTTP_NOT_FOUND, "not found: %s", url));
}

/* MHD_OPTION_URI_LOG_CALLBACK: sees the request target before MHD splits
 * off its parameters; keeps its length. Past about 8000 parameters MHD
 * 0.9.75 runs out of the connection's memory while recording them and
 * then neither answers nor closes (until the request deadline): a target
 * with more than HTTP_PARAMETERS_MAX is closed at once instead. Fewer
 * reach the handler, which answers 414 for a target over
 * HTTP_TARGET_MAX. */
static void *http_target_seen(void *context, const char *uri, struct MHD_Connection *connection)
{
    http_server *server = context;
    size_t separators = 0;
    for (const char *at = strchr(uri, '?'); at != NULL && *at != '\0'; at++)
        separators += *at == '&';
    http_guard_target(server->guard, connection, strlen(uri));
    if (separators >= HTTP_PARAMETERS_MAX)
        http_guard_close(server->guard, connection,
                         "the request target has more than 6000 parameters");
    return NULL;
}

/* MHD_OPTION_NOTIFY_COMPLETED: a reply is done. */
static void http_request_completed(void *context, struct MHD_Connection *connection, void **state,
                                   enum MHD_RequestTerminationCode code)
{
    (void)code;
    http_server *server = context;
    if (state != NULL && *state != NULL) { /* a POST's body state */
        http_upload *upload = *state;
        http_post_free(upload->post);
        http_stow_free(upload->stow);
        free(upload);
        *state = NULL;
    }
    http_guard_completed(server->guard, connection);
}

/* Routes libmicrohttpd's own messages into the log. */
static void http_log_library(void *context, const char *format, va_list arguments)
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
static mitilog_status http_start_error(const struct sockaddr_in *address, const char *text,
                                       unsigned port, mitilog_error *error)
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
                                 "already in use",
                                 text, port);
    if (reason != 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "HTTP: cannot listen on %s:%u: %s", text,
                                 port, strerror(reason));
    return mitilog_error_set(error, MITILOG_ERROR_IO, "HTTP: cannot start the server on %s:%u",
                             text, port);
}

/* Reads a whole PEM file into a malloc'ed string. */
static mitilog_status http_read_pem(const char *path, char **out, mitilog_error *error)
{
    FILE *file = fopen(path, "rb");
    if (file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "HTTPS: %s: %s", path, strerror(errno));
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
            status = http_read_pem(settings->tls_private_key_file, &server->tls_private_key, error);
        if (status != MITILOG_OK)
            return status;
    }
    if (settings->password_file != NULL && settings->password_file[0] != '\0') {
        if (server->tls_certificate == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "HTTP login without HTTPS would send passwords in clear");
        mitilog_status status = http_auth_load(settings->password_file, &server->auth, error);
        if (status == MITILOG_OK)
            status = http_throttle_create(&server->throttle, error);
        return status;
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
    if (resolved == NULL || stat(resolved, &info) != 0 || !S_ISDIR(info.st_mode)) {
        log_warning("http: web root %s is not a folder; serving the API "
                    "only",
                    web_root);
        free(resolved);
        return NULL;
    }
    return resolved;
}

mitilog_status http_server_start(const http_settings *settings, store *st, http_server **out,
                                 mitilog_error *error)
{
    if (out == NULL || settings == NULL || st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "http_server_start: missing argument");
    *out = NULL;
    const char *text =
        settings->address != NULL && settings->address[0] != 0 ? settings->address : "127.0.0.1";
    struct sockaddr_in address;
    memset(&address, 0, sizeof address);
    address.sin_family = AF_INET;
    if (inet_pton(AF_INET, text, &address.sin_addr) != 1)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "HTTP address %s is not an IPv4 address", text);
    if (settings->port > 65535)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "HTTP port %u out of range",
                                 settings->port);
    address.sin_port = htons((uint16_t)settings->port);

    http_server *server = calloc(1, sizeof *server);
    if (server == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory starting HTTP");
    server->store = st;
    server->metrics = settings->metrics;
    server->ingest = settings->ingest;
    server->stow_max_bytes =
        settings->stow_max_bytes != 0 ? settings->stow_max_bytes : 256ull * 1024ull * 1024ull;
    server->stow_max_parts = settings->stow_max_parts != 0 ? settings->stow_max_parts : 1000;
    if (server->ingest != NULL)
        g_mime_init(); /* before the daemon's threads; GMime parses STOW-RS bodies */
    if (settings->institution != NULL && settings->institution[0] != '\0' &&
        (server->institution = strdup(settings->institution)) == NULL) {
        http_server_stop(server);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory starting HTTP");
    }
    unsigned char key[32];
    if (getrandom(key, sizeof key, 0) != (ssize_t)sizeof key) {
        http_server_stop(server);
        return mitilog_error_set(error, MITILOG_ERROR_IO,
                                 "HTTP: cannot read random bytes for the review tokens: %s",
                                 strerror(errno));
    }
    for (size_t i = 0; i < sizeof key; i++)
        snprintf(server->csrf_key + 2 * i, 3, "%02x", key[i]);
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
        {MHD_OPTION_HTTPS_PRIORITIES, 0, (void *)http_tls_priorities},
        {MHD_OPTION_END, 0, NULL}};
    unsigned connections =
        settings->max_connections != 0 ? settings->max_connections : HTTP_DEFAULT_CONNECTIONS;
    unsigned per_address = settings->max_connections_per_address == 0
                               ? HTTP_DEFAULT_CONNECTIONS_PER_ADDRESS
                           : settings->max_connections_per_address == HTTP_SETTINGS_UNLIMITED
                               ? 0 /* MHD: no limit */
                               : settings->max_connections_per_address;
    unsigned deadline = settings->request_timeout_seconds != 0 ? settings->request_timeout_seconds
                                                               : HTTP_DEFAULT_REQUEST_TIMEOUT_S;
    if (http_guard_start(deadline, &server->guard, error) != MITILOG_OK) {
        http_server_stop(server);
        return MITILOG_ERROR_IO;
    }
    if (server->tls_certificate == NULL)
        tls_options[0].option = MHD_OPTION_END;
    server->daemon = MHD_start_daemon(
        flags, (uint16_t)settings->port, NULL, NULL, &http_handle, server,
        MHD_OPTION_EXTERNAL_LOGGER, &http_log_library, NULL, /* first: MHD asks for it */
        MHD_OPTION_ARRAY, tls_options, MHD_OPTION_SOCK_ADDR, (struct sockaddr *)&address,
        MHD_OPTION_THREAD_POOL_SIZE, (unsigned)HTTP_THREAD_POOL_SIZE, MHD_OPTION_CONNECTION_LIMIT,
        connections, MHD_OPTION_PER_IP_CONNECTION_LIMIT, per_address, MHD_OPTION_CONNECTION_TIMEOUT,
        (unsigned)HTTP_IDLE_TIMEOUT_S, MHD_OPTION_CONNECTION_MEMORY_LIMIT, http_connection_memory,
        MHD_OPTION_NOTIFY_CONNECTION, &http_guard_notify, server->guard,
        MHD_OPTION_NOTIFY_COMPLETED, &http_request_completed, server, MHD_OPTION_URI_LOG_CALLBACK,
        &http_target_seen, server, MHD_OPTION_END);
    if (server->daemon == NULL) {
        mitilog_status status = http_start_error(&address, text, settings->port, error);
        http_server_stop(server);
        return status;
    }
    const union MHD_DaemonInfo *info =
        MHD_get_daemon_info(server->daemon, MHD_DAEMON_INFO_BIND_PORT);
    server->port = info != NULL ? info->port : settings->port;
    char per_address_text[32];
    if (per_address == 0)
        snprintf(per_address_text, sizeof per_address_text, "no limit");
    else
        snprintf(per_address_text, sizeof per_address_text, "%u", per_address);
    log_info("http: listening on %s://%s:%u (at most %u connections, per address %s, "
             "%u s to send a request)%s%s%s",
             server->tls_certificate != NULL ? "https" : "http", text, server->port, connections,
             per_address_text, deadline, server->auth != NULL ? " (login required)" : "",
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
    http_guard_stop(server->guard);
    free(server->web_root);
    http_auth_free(server->auth);
    http_throttle_free(server->throttle);
    free(server->tls_certificate);
    free(server->tls_private_key);
    free(server->institution);
    free(server);
}

/* A period view's document, kept or made now (report_view_serve), with
 * the header that says which: "Mitilog-Document: kept; made-at=TIME" or
 * "Mitilog-Document: made; milliseconds=N". */
http_reply http_view_reply(http_server *server, const report_view_request *request)
{
    char *body = NULL;
    mitilog_error error = {{0}};
    report_served served;
    mitilog_status status =
        report_view_serve(server->store, request, MITILOG_VERSION, &body, &served, &error);
    http_reply reply =
        http_status_reply(server, status, body,
                          request->format == REPORT_CSV ? "text/csv; charset=utf-8" : NULL, &error);
    if (status == MITILOG_OK)
        metrics_document_served(server->metrics, served.from_snapshot);
    if (status == MITILOG_OK && reply.response != NULL) {
        char header[96];
        if (served.from_snapshot)
            snprintf(header, sizeof header, "kept; made-at=%s", served.made_at);
        else
            snprintf(header, sizeof header, "made; milliseconds=%.0f", served.made_ms);
        MHD_add_response_header(reply.response, "Mitilog-Document", header);
    }
    return reply;
}

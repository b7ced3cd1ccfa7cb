/* Unit tests of the HTTP server: a real store in a temporary directory and
 * a real server on 127.0.0.1, spoken to by a minimal HTTP/1.1 client over
 * a socket. Status codes, headers and JSON values (read back with SQLite's
 * json_extract) are asserted. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include <arpa/inet.h>
#include <netinet/in.h>
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <sys/time.h>
#include <unistd.h>

#include "http/http.h"
#include "store/sql_files.h"
#include "store/store.h"
#include "store/store_instances.h"

typedef struct fixture {
    char directory[64];
    char path[128];
    char web_root[128];
    unsigned port;
    store *store;
    http_server *server;
} fixture;

typedef struct response {
    int status;
    char *head; /* status line and headers */
    char *body;
} response;

/* --- helpers ------------------------------------------------------------ */

/* A TCP port on 127.0.0.1 that was free a moment ago. */
static unsigned free_port(void)
{
    int s = socket(AF_INET, SOCK_STREAM, 0);
    struct sockaddr_in address = {0};
    address.sin_family = AF_INET;
    address.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    assert_int_equal(bind(s, (struct sockaddr *)&address, sizeof address), 0);
    socklen_t length = sizeof address;
    getsockname(s, (struct sockaddr *)&address, &length);
    close(s);
    return ntohs(address.sin_port);
}

static void write_file(const char *path, const char *text)
{
    FILE *file = fopen(path, "w");
    assert_non_null(file);
    fputs(text, file);
    fclose(file);
}

/* Stores one ultrasound instance with MI ok and TIB missing. */
static void put_instance(store *st, const char *uid, const char *study, const char *received_at,
                         double mi)
{
    ext_record record;
    memset(&record, 0, sizeof record);
    record.sop_class_uid = strdup("1.2.840.10008.5.1.4.1.1.6.1");
    record.sop_instance_uid = strdup(uid);
    record.study_instance_uid = strdup(study);
    record.station_name = strdup("US \"ROOM\" 1");
    record.modality = strdup("US");
    record.is_ultrasound = 1;
    snprintf(record.acquired_at, sizeof record.acquired_at, "2024-03-01T10:00:00");
    record.acquired_at_source = EXT_TIME_ACQUISITION;
    snprintf(record.received_at, sizeof record.received_at, "%s", received_at);
    record.indices[EXAM_INDEX_MI] = (exam_number){EXAM_VALUE_OK, mi};
    record.index_raw[EXAM_INDEX_MI] = strdup("0.9");
    mitilog_error error = {{0}};
    if (store_put_instance(st, &record, NULL, NULL, &error) != MITILOG_OK)
        fail_msg("put: %s", error.text);
    free(record.sop_class_uid);
    free(record.sop_instance_uid);
    free(record.study_instance_uid);
    free(record.station_name);
    free(record.modality);
    free(record.index_raw[EXAM_INDEX_MI]);
}

/* Store with two instances, a web root with three files, a secret file
 * beside it and a symbolic link from inside the web root to the secret. */
static int fixture_setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    assert_non_null(f);
    snprintf(f->directory, sizeof f->directory, "/tmp/mitilog-http-XXXXXX");
    assert_non_null(mkdtemp(f->directory));
    snprintf(f->path, sizeof f->path, "%s/mitilog.db", f->directory);
    snprintf(f->web_root, sizeof f->web_root, "%s/web", f->directory);
    assert_int_equal(mkdir(f->web_root, 0755), 0);
    char name[256];
    snprintf(name, sizeof name, "%s/index.html", f->web_root);
    write_file(name, "<!doctype html><title>mitilog</title>\n");
    snprintf(name, sizeof name, "%s/review.html", f->web_root);
    write_file(name, "<!doctype html><title>review</title>\n");
    snprintf(name, sizeof name, "%s/app.js", f->web_root);
    write_file(name, "console.log('mitilog');\n");
    snprintf(name, sizeof name, "%s/style.css", f->web_root);
    write_file(name, "body { margin: 0; }\n");
    snprintf(name, sizeof name, "%s/secret.txt", f->directory);
    write_file(name, "secret\n");
    char link[256];
    snprintf(link, sizeof link, "%s/link.txt", f->web_root);
    assert_int_equal(symlink(name, link), 0);

    mitilog_error error = {{0}};
    if (store_open(f->path, 5000, &f->store, &error) != MITILOG_OK)
        fail_msg("store_open: %s", error.text);
    put_instance(f->store, "1.2.3.1", "1.2.3", "2024-03-01T09:00:00.000Z", 0.9);
    put_instance(f->store, "1.2.3.2", "1.2.3", "2024-03-01T09:05:00.000Z", 1.3);
    f->port = free_port();
    http_settings settings = {"127.0.0.1", f->port, f->web_root, NULL, NULL, NULL, 0,
                              0,           0,       NULL,        NULL, NULL, 0,    0};
    if (http_server_start(&settings, f->store, &f->server, &error) != MITILOG_OK)
        fail_msg("http_server_start: %s", error.text);
    *state = f;
    return 0;
}

static int fixture_teardown(void **state)
{
    fixture *f = *state;
    http_server_stop(f->server);
    store_close(f->store);
    char command[200];
    snprintf(command, sizeof command, "rm -rf '%s'", f->directory);
    assert_int_equal(system(command), 0);
    free(f);
    return 0;
}

/* Sends "method target" over a new connection and reads the whole
 * response (the request asks the server to close the connection). */
static response http_request(unsigned port, const char *method, const char *target)
{
    response result = {0, NULL, NULL};
    int s = socket(AF_INET, SOCK_STREAM, 0);
    struct timeval timeout = {5, 0};
    setsockopt(s, SOL_SOCKET, SO_RCVTIMEO, &timeout, sizeof timeout);
    struct sockaddr_in address = {0};
    address.sin_family = AF_INET;
    address.sin_port = htons((uint16_t)port);
    address.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    assert_int_equal(connect(s, (struct sockaddr *)&address, sizeof address), 0);
    char request[1024];
    int length = snprintf(request, sizeof request,
                          "%s %s HTTP/1.1\r\nHost: 127.0.0.1\r\n"
                          "Connection: close\r\n\r\n",
                          method, target);
    assert_int_equal(send(s, request, (size_t)length, 0), length);
    size_t size = 0, capacity = 65536;
    char *data = malloc(capacity + 1);
    ssize_t got;
    while ((got = recv(s, data + size, capacity - size, 0)) > 0) {
        size += (size_t)got;
        if (size == capacity) {
            capacity *= 2;
            data = realloc(data, capacity + 1);
        }
    }
    close(s);
    data[size] = '\0';
    char *end = strstr(data, "\r\n\r\n");
    if (end == NULL)
        fail_msg("no HTTP response head: %s", data);
    *end = '\0';
    result.head = strdup(data);
    result.body = strdup(end + 4);
    free(data);
    if (sscanf(result.head, "HTTP/1.%*d %d", &result.status) != 1)
        fail_msg("bad status line: %s", result.head);
    return result;
}

static void response_free(response *r)
{
    free(r->head);
    free(r->body);
}

/* The value of header name (case-insensitive), or NULL; static buffer. */
static const char *header(const response *r, const char *name)
{
    static char value[512];
    size_t length = strlen(name);
    for (const char *line = strstr(r->head, "\r\n"); line != NULL;
         line = strstr(line + 2, "\r\n")) {
        if (strncasecmp(line + 2, name, length) == 0 && line[2 + length] == ':') {
            const char *start = line + 3 + length;
            while (*start == ' ')
                start++;
            size_t n = strcspn(start, "\r");
            snprintf(value, sizeof value, "%.*s", (int)n, start);
            return value;
        }
    }
    return NULL;
}

static void assert_header(const response *r, const char *name, const char *expected)
{
    const char *value = header(r, name);
    if (value == NULL || strcmp(value, expected) != 0)
        fail_msg("header %s: '%s', expected '%s'", name, value != NULL ? value : "(absent)",
                 expected);
}

/* The headers every response carries. */
static void assert_common_headers(const response *r)
{
    assert_header(r, "X-Content-Type-Options", "nosniff");
    assert_header(r, "X-Frame-Options", "DENY");
    assert_header(r, "Content-Security-Policy", "default-src 'self'; frame-ancestors 'none'");
}

static void assert_json_headers(const response *r)
{
    assert_common_headers(r);
    assert_header(r, "Content-Type", "application/json; charset=utf-8");
    assert_header(r, "Cache-Control", "no-store");
}

/* json_extract(json, path) as text, "(null)" for null; "(invalid)" when
 * json is not valid JSON. Static buffer. */
static const char *json_value(const char *json, const char *path)
{
    static char value[1024];
    sqlite3 *db = NULL;
    sqlite3_open(":memory:", &db);
    sqlite3_stmt *statement = NULL;
    sqlite3_prepare_v2(db,
                       "SELECT iif(json_valid(?1), "
                       "coalesce(json_extract(?1, ?2), '(null)'), "
                       "'(invalid)')",
                       -1, &statement, NULL);
    sqlite3_bind_text(statement, 1, json, -1, SQLITE_STATIC);
    sqlite3_bind_text(statement, 2, path, -1, SQLITE_STATIC);
    assert_int_equal(sqlite3_step(statement), SQLITE_ROW);
    snprintf(value, sizeof value, "%s", sqlite3_column_text(statement, 0));
    sqlite3_finalize(statement);
    sqlite3_close(db);
    return value;
}

static void assert_json(const char *json, const char *path, const char *expected)
{
    const char *value = json_value(json, path);
    if (strcmp(value, expected) != 0)
        fail_msg("%s: '%s', expected '%s' in %s", path, value, expected, json);
}

/* GET target answers status with a JSON body; returns the response. */
static response get_json(const fixture *f, const char *target, int status)
{
    response r = http_request(f->port, "GET", target);
    if (r.status != status)
        fail_msg("GET %s: status %d, expected %d: %s", target, r.status, status, r.body);
    assert_json_headers(&r);
    if (strcmp(json_value(r.body, "$"), "(invalid)") == 0)
        fail_msg("GET %s: body is not JSON: %s", target, r.body);
    return r;
}

/* GET target is a 400 whose error message names parameter. */
static void assert_bad_parameter(const fixture *f, const char *target, const char *parameter)
{
    response r = get_json(f, target, 400);
    const char *message = json_value(r.body, "$.error");
    char expected[64];
    snprintf(expected, sizeof expected, "parameter %s:", parameter);
    if (strncmp(message, expected, strlen(expected)) != 0)
        fail_msg("GET %s: error '%s' does not name %s", target, message, parameter);
    response_free(&r);
}

/* --- tests -------------------------------------------------------------- */

static void health(void **state)
{
    fixture *f = *state;
    response r = get_json(f, "/healthz", 200);
    assert_json(r.body, "$.status", "ok");
    assert_json(r.body, "$.database", "ok");
    /* the newest built-in migration (sql/migrations/NNN_*.sql) */
    int newest = 0;
    for (const sql_file *file = sql_files; file->name != NULL; file++)
        if (strncmp(file->name, "migrations/", 11) == 0 && atoi(file->name + 11) > newest)
            newest = atoi(file->name + 11);
    char newest_text[16];
    snprintf(newest_text, sizeof newest_text, "%d", newest);
    assert_json(r.body, "$.schema_version", newest_text);
    assert_json(r.body, "$.instances", "2");
    assert_json(r.body, "$.studies", "1");
    assert_json(r.body, "$.rejections", "0");
    assert_json(r.body, "$.last_received_at", "2024-03-01T09:05:00.000Z");
    response_free(&r);
}

static void instances(void **state)
{
    fixture *f = *state;
    response r = get_json(f, "/api/v1/instances?study=1.2.3", 200);
    assert_json(r.body, "$[0].sop_instance_uid", "1.2.3.1");
    assert_json(r.body, "$[1].sop_instance_uid", "1.2.3.2");
    assert_json(r.body, "$[1].mi", "1.3");
    assert_json(r.body, "$[1].tib", "(null)");
    assert_json(r.body, "$[1].index_status.tib", "missing");
    assert_json(r.body, "$[0].station_name", "US \"ROOM\" 1");
    assert_json(r.body, "$[2]", "(null)");
    response_free(&r);

    /* since (with a '+' sent as %2B and as a bare '+'), limit, and unknown
     * parameters ignored. */
    r = get_json(f,
                 "/api/v1/instances?since=2024-03-01T09:01:00Z&limit=5"
                 "&colour=blue",
                 200);
    assert_json(r.body, "$[0].sop_instance_uid", "1.2.3.2");
    assert_json(r.body, "$[1]", "(null)");
    response_free(&r);
    r = get_json(f, "/api/v1/instances?since=2024-03-01&limit=1", 200);
    assert_json(r.body, "$[0].sop_instance_uid", "1.2.3.1");
    assert_json(r.body, "$[1]", "(null)");
    response_free(&r);
    r = get_json(f, "/api/v1/instances?since=2024-03-01T00:00:00%2B00:00", 200);
    assert_json(r.body, "$[1].sop_instance_uid", "1.2.3.2");
    response_free(&r);
    r = get_json(f, "/api/v1/instances?since=2024-03-01T00:00:00+00:00", 200);
    assert_json(r.body, "$[1].sop_instance_uid", "1.2.3.2");
    response_free(&r);
    r = get_json(f, "/api/v1/instances?study=9.9", 200);
    assert_string_equal(r.body, "[]");
    response_free(&r);

    /* HEAD: the same headers, no body. */
    r = http_request(f->port, "HEAD", "/api/v1/instances?study=1.2.3");
    assert_int_equal(r.status, 200);
    assert_json_headers(&r);
    assert_string_equal(r.body, "");
    response_free(&r);
}

static void bad_parameters(void **state)
{
    fixture *f = *state;
    assert_bad_parameter(f, "/api/v1/instances?limit=0", "limit");
    assert_bad_parameter(f, "/api/v1/instances?limit=10001", "limit");
    assert_bad_parameter(f, "/api/v1/instances?limit=-5", "limit");
    assert_bad_parameter(f, "/api/v1/instances?limit=12abc", "limit");
    assert_bad_parameter(f, "/api/v1/instances?limit=", "limit");
    assert_bad_parameter(f, "/api/v1/instances?since=yesterday", "since");
    assert_bad_parameter(f, "/api/v1/instances?since=202", "since");
    assert_bad_parameter(f, "/api/v1/instances?since=2024'%20OR%201=1", "since");
    assert_bad_parameter(f, "/api/v1/instances?study=1.2.x", "study");
    assert_bad_parameter(f, "/api/v1/instances?study=", "study");
    assert_bad_parameter(f,
                         "/api/v1/instances?study=1234567890123456789012"
                         "3456789012345678901234567890123456789012345",
                         "study");
    assert_bad_parameter(f, "/api/v1/studies?from=2024-13-01", "from");
    assert_bad_parameter(f, "/api/v1/studies?to=2024-3-1", "to");
    response r = get_json(f, "/api/v1/instances?limit=10000", 200);
    response_free(&r);
}

static void studies(void **state)
{
    fixture *f = *state;
    response r = get_json(f, "/api/v1/studies?from=2024-03-01&to=2024-03-01", 200);
    assert_json(r.body, "$[0].study_instance_uid", "1.2.3");
    assert_json(r.body, "$[0].instance_count", "2");
    assert_json(r.body, "$[0].max_mi", "1.3"); /* max(0.9, 1.3) */
    assert_json(r.body, "$[0].max_tib", "(null)");
    response_free(&r);
    r = get_json(f, "/api/v1/studies?from=2024-03-02", 200);
    assert_string_equal(r.body, "[]");
    response_free(&r);
    r = get_json(f, "/api/v1/studies", 200);
    assert_json(r.body, "$[0].study_instance_uid", "1.2.3");
    response_free(&r);
}

static void not_found_and_method(void **state)
{
    fixture *f = *state;
    response r = get_json(f, "/nope", 404);
    assert_json(r.body, "$.error", "not found: /nope");
    response_free(&r);
    /* A quote and a backslash in the path: still valid JSON. */
    r = get_json(f, "/a%22b%5Cc", 404);
    assert_json(r.body, "$.error", "not found: /a\"b\\c");
    response_free(&r);
    /* Bytes that are not UTF-8 come back as '?'. */
    r = get_json(f, "/caf%E9", 404);
    assert_json(r.body, "$.error", "not found: /caf?");
    response_free(&r);
    r = get_json(f, "/api/v2/instances", 404);
    response_free(&r);

    const char *methods[] = {"POST", "PUT", "DELETE", "OPTIONS"};
    for (int i = 0; i < 4; i++) {
        r = http_request(f->port, methods[i], "/healthz");
        assert_int_equal(r.status, 405);
        assert_json_headers(&r);
        assert_header(&r, "Allow", "GET, HEAD");
        char expected[64];
        snprintf(expected, sizeof expected, "method not allowed: %s", methods[i]);
        assert_json(r.body, "$.error", expected);
        response_free(&r);
    }
}

static void static_files(void **state)
{
    fixture *f = *state;
    response r = http_request(f->port, "GET", "/");
    assert_int_equal(r.status, 200);
    assert_common_headers(&r);
    assert_header(&r, "Content-Type", "text/html; charset=utf-8");
    /* "/" is the review worklist (review.html), the landing page */
    assert_string_equal(r.body, "<!doctype html><title>review</title>\n");
    response_free(&r);
    r = http_request(f->port, "GET", "/index.html");
    assert_int_equal(r.status, 200);
    assert_string_equal(r.body, "<!doctype html><title>mitilog</title>\n");
    response_free(&r);
    r = http_request(f->port, "GET", "/app.js");
    assert_int_equal(r.status, 200);
    assert_header(&r, "Content-Type", "text/javascript; charset=utf-8");
    response_free(&r);
    r = http_request(f->port, "GET", "/style.css");
    assert_header(&r, "Content-Type", "text/css; charset=utf-8");
    assert_common_headers(&r);
    response_free(&r);

    /* Traversal, hidden parts, links out of the root, folders: 404. */
    const char *refused[] = {"/../secret.txt",  "/%2e%2e/secret.txt", "/web/../../secret.txt",
                             "/link.txt",       "/.hidden",           "/missing.css",
                             "/..%5csecret.txt"};
    for (size_t i = 0; i < sizeof refused / sizeof refused[0]; i++) {
        r = http_request(f->port, "GET", refused[i]);
        if (r.status != 404)
            fail_msg("GET %s: %d, expected 404", refused[i], r.status);
        assert_json_headers(&r);
        assert_null(strstr(r.body, "secret\n"));
        response_free(&r);
    }
}

static void port_taken_and_bad_settings(void **state)
{
    fixture *f = *state;
    http_settings same = {"127.0.0.1", f->port, NULL, NULL, NULL, NULL, 0,
                          0,           0,       NULL, NULL, NULL, 0,    0};
    http_server *second = NULL;
    mitilog_error error = {{0}};
    assert_int_equal(http_server_start(&same, f->store, &second, &error), MITILOG_ERROR_IO);
    assert_null(second);
    assert_non_null(strstr(error.text, "in use"));

    http_settings bad_address = {"localhost:80", 0,    NULL, NULL, NULL, NULL, 0, 0, 0,
                                 NULL,           NULL, NULL, 0,    0};
    assert_int_equal(http_server_start(&bad_address, f->store, &second, &error),
                     MITILOG_ERROR_INVALID);
    http_settings bad_port = {"127.0.0.1", 70000, NULL, NULL, NULL, NULL, 0,
                              0,           0,     NULL, NULL, NULL, 0,    0};
    assert_int_equal(http_server_start(&bad_port, f->store, &second, &error),
                     MITILOG_ERROR_INVALID);

    /* No web root: "/" is a JSON 404. */
    http_settings api_only = {
        NULL, free_port(), "/nonexistent/web", NULL, NULL, NULL, 0, 0, 0, NULL, NULL, NULL, 0, 0};
    assert_int_equal(http_server_start(&api_only, f->store, &second, &error), MITILOG_OK);
    response r = http_request(api_only.port, "GET", "/");
    assert_int_equal(r.status, 404);
    assert_json(r.body, "$.error", "not found: /");
    response_free(&r);
    http_server_stop(second);
    http_server_stop(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(health),
        cmocka_unit_test(instances),
        cmocka_unit_test(bad_parameters),
        cmocka_unit_test(studies),
        cmocka_unit_test(not_found_and_method),
        cmocka_unit_test(static_files),
        cmocka_unit_test(port_taken_and_bad_settings),
    };
    return cmocka_run_group_tests(tests, fixture_setup, fixture_teardown);
}

/*
 * http_routes_reviews.c - the review worklist and acting on it:
 * GET /api/v1/session, /api/v1/worklist, /api/v1/operators,
 * /api/v1/reviews and POST /api/v1/reviews.
 *
 * Writes need a login (the password file, http_auth.h) with the role
 * "reviewer", and are protected against cross-site request forgery three
 * ways: a token bound to the user (HMAC-SHA-256 of the user name under a
 * key drawn at start, so it changes with every start of the server)
 * that the page reads from /api/v1/session and sends back in the form;
 * the same token in a SameSite=Strict, HttpOnly cookie set by
 * /api/v1/session, which a browser does not send with a request started
 * by another site; and the Origin and Sec-Fetch-Site headers, which must
 * name this origin when the browser sends them (the Fetch standard's
 * request metadata). The body is application/x-www-form-urlencoded,
 * read by libmicrohttpd's post processor.
 *
 * Ownership: an http_post lives from the first call of the access
 * handler for a POST to the request's completion (http_post_free).
 */
#include "http/http_internal.h"
#include "report/report.h"
#include "json/json.h"

#include <netinet/in.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/sql_files.h"
#include "store/store_reviews.h"
#include "util/hash.h"
#include "util/log.h"

enum {
    HTTP_POST_BUFFER = 4096, /* post processor's buffer              */
    HTTP_COMMENT_MAX = 2000, /* bytes, as the reviews table allows   */
    HTTP_FIELD_MAX = 128,    /* the other fields                     */
    HTTP_BODY_MAX = 16384    /* a larger body is refused (413)        */
};

static const char http_outcomes[] =
    "acceptable|discussed_with_operator|referred_to_physics|preset_to_change|reopened";

struct http_post {
    struct MHD_PostProcessor *processor;
    http_identity identity;
    size_t received;
    int too_large;
    char study[HTTP_FIELD_MAX + 1];
    char finding[HTTP_FIELD_MAX + 1];
    char outcome[HTTP_FIELD_MAX + 1];
    char token[HTTP_FIELD_MAX + 1];
    char comment[HTTP_COMMENT_MAX + 1];
};

mitilog_status http_csrf_token(const http_server *server, const char *user, char out[HASH_HEX_SIZE])
{
    char message[200];
    snprintf(message, sizeof message, "mitilog review token for %s", user);
    return hash_hmac_hex(server->csrf_key, message, out);
}

/* Constant-time comparison of two tokens (never stops at the first
 * difference, so timing does not tell how much matched). */
static int http_same_token(const char *left, const char *right)
{
    size_t left_length = strlen(left), right_length = strlen(right);
    unsigned char difference = (unsigned char)(left_length != right_length || left_length == 0);
    size_t length = left_length < right_length ? left_length : right_length;
    for (size_t i = 0; i < length; i++)
        difference |= (unsigned char)(left[i] ^ right[i]);
    return difference == 0;
}

/* 1 when text is UTF-8 without control characters other than tab, line
 * feed and carriage return [std: RFC 3629 section 4]. */
static int http_plain_text(const char *text)
{
    const unsigned char *byte = (const unsigned char *)text;
    while (*byte != 0) {
        unsigned char first = *byte;
        int extra;
        if (first < 0x80) {
            if ((first < 0x20 && first != '\t' && first != '\n' && first != '\r') || first == 0x7f)
                return 0;
            byte++;
            continue;
        } else if (first >= 0xc2 && first <= 0xdf) {
            extra = 1;
        } else if (first >= 0xe0 && first <= 0xef) {
            extra = 2;
        } else if (first >= 0xf0 && first <= 0xf4) {
            extra = 3;
        } else {
            return 0;
        }
        unsigned long code = first & (0x3f >> extra);
        for (int i = 1; i <= extra; i++) {
            if ((byte[i] & 0xc0) != 0x80)
                return 0;
            code = (code << 6) | (byte[i] & 0x3f);
        }
        if ((extra == 2 && (code < 0x800 || (code >= 0xd800 && code <= 0xdfff))) ||
            (extra == 3 && (code < 0x10000 || code > 0x10ffff)))
            return 0;
        byte += extra + 1;
    }
    return 1;
}

/* GET /api/v1/session: who is signed in, the token every write must
 * carry, and whether a login is required. */
static http_reply http_session_reply(http_server *server, const http_identity *identity)
{
    char token[HASH_HEX_SIZE] = "";
    int signed_in = identity->user[0] != '\0';
    if (signed_in && http_csrf_token(server, identity->user, token) != MITILOG_OK)
        return http_error_reply(server, MHD_HTTP_INTERNAL_SERVER_ERROR,
                                "cannot make the review token");
    /* A computed document: the JSON writer (src/json). */
    json_writer writer;
    json_writer_init(&writer);
    json_object_begin(&writer);
    json_key(&writer, "user");
    json_string(&writer, signed_in ? identity->user : NULL);
    json_key(&writer, "role");
    json_string(&writer, signed_in ? identity->role : NULL);
    json_key(&writer, "csrf_token");
    json_string(&writer, signed_in ? token : NULL);
    json_key(&writer, "login_required");
    json_boolean(&writer, server->auth != NULL);
    json_key(&writer, "can_review");
    json_boolean(&writer, signed_in && strcmp(identity->role, "reviewer") == 0);
    json_object_end(&writer);
    char *json = NULL;
    mitilog_error error;
    if (json_writer_take(&writer, &json, &error) != MITILOG_OK)
        json = NULL;
    json_writer_free(&writer);
    if (json == NULL)
        return http_error_reply(server, MHD_HTTP_INTERNAL_SERVER_ERROR,
                                "cannot describe the session");
    http_reply reply = http_json_reply(MHD_HTTP_OK, json);
    if (signed_in && reply.response != NULL) {
        char cookie[200];
        snprintf(cookie, sizeof cookie, "mitilog_review=%s; Path=/; HttpOnly; SameSite=Strict%s",
                 token, server->tls_certificate != NULL ? "; Secure" : "");
        MHD_add_response_header(reply.response, "Set-Cookie", cookie);
    }
    return reply;
}

/* GET /api/v1/worklist?week=YYYY-Www */
static http_reply http_worklist(http_server *server, struct MHD_Connection *connection)
{
    static const http_parameter_rule rules[] = {
        {"week", HTTP_PARAMETER_WEEK, 0, 0, NULL},
    };
    http_parameter_value values[1];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, 1, values, &reply))
        return reply;
    char monday[11];
    int year = values[0].iso_year, week = values[0].iso_week;
    if (values[0].text == NULL)
        report_default_week(server->store, &year, &week); /* one rule: report.h */
    long day = 0;
    stats_iso_week_monday(year, week, &day);
    stats_day_text(day, monday);
    char *json = NULL;
    mitilog_error error = {{0}};
    mitilog_status status =
        store_worklist_json(server->store, monday, values[0].text == NULL, &json, &error);
    return http_status_reply(server, status, json, NULL, &error);
}

/* GET /api/v1/reviews?study=&from=&to=&format=json|csv */
static http_reply http_reviews(http_server *server, struct MHD_Connection *connection)
{
    static const http_parameter_rule rules[] = {
        {"study", HTTP_PARAMETER_UID, 0, 0, NULL},
        {"from", HTTP_PARAMETER_DATE, 0, 0, NULL},
        {"to", HTTP_PARAMETER_DATE, 0, 0, NULL},
        {"format", HTTP_PARAMETER_CHOICE, 0, 0, "json|csv"},
    };
    http_parameter_value values[4];
    http_reply reply;
    if (!http_parameters_read(server, connection, rules, 4, values, &reply) ||
        !http_parameters_period(server, &values[1], &values[2], &reply))
        return reply;
    int csv = values[3].text != NULL && strcmp(values[3].text, "csv") == 0;
    char *text = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = store_reviews_text(server->store, values[0].text, values[1].text,
                                               values[2].text, csv, &text, &error);
    reply = http_status_reply(server, status, text, csv ? "text/csv; charset=utf-8" : NULL, &error);
    if (csv && status == MITILOG_OK && reply.response != NULL)
        MHD_add_response_header(reply.response, "Content-Disposition",
                                "attachment; filename=\"mitilog-reviews.csv\"");
    return reply;
}

/* GET /api/v1/operators?from=&to= */
static http_reply http_operators(http_server *server, struct MHD_Connection *connection)
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
        store_operators_json(server->store, values[0].text, values[1].text, &json, &error);
    return http_status_reply(server, status, json, NULL, &error);
}

int http_route_reviews(http_server *server, struct MHD_Connection *connection, const char *url,
                       const http_identity *identity, http_reply *reply)
{
    if (strcmp(url, "/api/v1/session") == 0)
        *reply = http_session_reply(server, identity);
    else if (strcmp(url, "/api/v1/worklist") == 0)
        *reply = http_worklist(server, connection);
    else if (strcmp(url, "/api/v1/reviews") == 0)
        *reply = http_reviews(server, connection);
    else if (strcmp(url, "/api/v1/operators") == 0)
        *reply = http_operators(server, connection);
    else
        return 0;
    return 1;
}

/* Why a write may not go on before its body is read: login, role, origin,
 * content type. 1 with *reply set when refused. */
int http_post_refused(http_server *server, struct MHD_Connection *connection, const char *url,
                      const http_identity *identity, http_reply *reply)
{
    if (strcmp(url, "/api/v1/reviews") != 0) {
        *reply = http_error_reply(server, MHD_HTTP_METHOD_NOT_ALLOWED, "method not allowed: POST");
        if (reply->response != NULL)
            MHD_add_response_header(reply->response, "Allow", "GET, HEAD");
        return 1;
    }
    if (server->auth == NULL) {
        *reply = http_error_reply(server, MHD_HTTP_FORBIDDEN,
                                  "recording a review needs a login: set [http] password_file "
                                  "(with HTTPS) and sign in as a user with the role reviewer");
        return 1;
    }
    if (identity->role == NULL || strcmp(identity->role, "reviewer") != 0) {
        *reply = http_error_reply(server, MHD_HTTP_FORBIDDEN,
                                  "user %s has the role viewer: only a reviewer may record "
                                  "reviews (mitilog passwd --role reviewer)",
                                  identity->user);
        return 1;
    }
    const char *site = MHD_lookup_connection_value(connection, MHD_HEADER_KIND, "Sec-Fetch-Site");
    if (site != NULL && strcmp(site, "same-origin") != 0) {
        *reply = http_error_reply(server, MHD_HTTP_FORBIDDEN,
                                  "refused: the request was started by another site "
                                  "(Sec-Fetch-Site: %s); record reviews from mitilog's own pages",
                                  site);
        return 1;
    }
    const char *origin = MHD_lookup_connection_value(connection, MHD_HEADER_KIND, "Origin");
    const char *host = MHD_lookup_connection_value(connection, MHD_HEADER_KIND, "Host");
    if (origin != NULL) {
        /* Host as the browser named it; either scheme, since a reverse
         * proxy may end HTTPS in front of plain HTTP here (it must pass
         * Host on: deploy/nginx-mitilog.conf). */
        const char *rest = strncmp(origin, "https://", 8) == 0  ? origin + 8
                           : strncmp(origin, "http://", 7) == 0 ? origin + 7
                                                                : NULL;
        if (host == NULL || rest == NULL || strcmp(rest, host) != 0) {
            *reply = http_error_reply(server, MHD_HTTP_FORBIDDEN,
                                      "refused: the request came from %.100s, not from this "
                                      "server's pages",
                                      origin);
            return 1;
        }
    }
    const char *type = MHD_lookup_connection_value(connection, MHD_HEADER_KIND, "Content-Type");
    if (type == NULL || strncmp(type, "application/x-www-form-urlencoded", 33) != 0) {
        *reply = http_error_reply(server, MHD_HTTP_UNSUPPORTED_MEDIA_TYPE,
                                  "send the review as application/x-www-form-urlencoded "
                                  "(fields study, finding, outcome, comment, csrf_token)");
        return 1;
    }
    return 0;
}

/* Appends a chunk of one form field into its buffer; too long: flagged. */
static enum MHD_Result http_post_field(void *context, enum MHD_ValueKind kind, const char *key,
                                       const char *filename, const char *content_type,
                                       const char *transfer_encoding, const char *data,
                                       uint64_t offset, size_t size)
{
    (void)kind;
    (void)filename;
    (void)content_type;
    (void)transfer_encoding;
    http_post *post = context;
    char *target = NULL;
    size_t capacity = HTTP_FIELD_MAX;
    if (strcmp(key, "study") == 0)
        target = post->study;
    else if (strcmp(key, "finding") == 0)
        target = post->finding;
    else if (strcmp(key, "outcome") == 0)
        target = post->outcome;
    else if (strcmp(key, "csrf_token") == 0)
        target = post->token;
    else if (strcmp(key, "comment") == 0) {
        target = post->comment;
        capacity = HTTP_COMMENT_MAX;
    }
    if (target == NULL)
        return MHD_YES; /* unknown fields are ignored, as unknown parameters */
    if (offset + size > capacity) {
        post->too_large = 1;
        return MHD_YES;
    }
    memcpy(target + offset, data, size);
    target[offset + size] = '\0';
    return MHD_YES;
}

http_post *http_post_create(struct MHD_Connection *connection, const http_identity *identity)
{
    http_post *post = calloc(1, sizeof *post);
    if (post == NULL)
        return NULL;
    post->identity = *identity;
    post->processor =
        MHD_create_post_processor(connection, HTTP_POST_BUFFER, http_post_field, post);
    if (post->processor == NULL) {
        free(post);
        return NULL;
    }
    return post;
}

void http_post_feed(http_post *post, const char *data, size_t size)
{
    post->received += size;
    if (post->received > HTTP_BODY_MAX) {
        post->too_large = 1;
        return;
    }
    if (MHD_post_process(post->processor, data, size) != MHD_YES)
        post->too_large = 1;
}

void http_post_free(http_post *post)
{
    if (post == NULL)
        return;
    if (post->processor != NULL)
        MHD_destroy_post_processor(post->processor);
    free(post);
}

/* The body has been read: checks the token and the fields, records. */
http_reply http_post_finish(http_server *server, struct MHD_Connection *connection, http_post *post)
{
    if (post->too_large)
        return http_error_reply(server, MHD_HTTP_CONTENT_TOO_LARGE,
                                "the review is too large: at most %d bytes of comment and %d "
                                "of the whole form",
                                HTTP_COMMENT_MAX, HTTP_BODY_MAX);
    char expected[HASH_HEX_SIZE];
    const char *cookie = MHD_lookup_connection_value(connection, MHD_COOKIE_KIND, "mitilog_review");
    if (http_csrf_token(server, post->identity.user, expected) != MITILOG_OK ||
        !http_same_token(post->token, expected) || cookie == NULL ||
        !http_same_token(cookie, expected)) {
        char address[INET6_ADDRSTRLEN + 32];
        http_client_address(connection, address, sizeof address);
        log_warning("http: review refused from %s: missing or wrong review token", address);
        return http_error_reply(server, MHD_HTTP_FORBIDDEN,
                                "refused: the review token is missing or wrong; reload the page "
                                "and try again");
    }
    size_t study_length = strlen(post->study);
    if (study_length > 64 || strspn(post->study, "0123456789.") != study_length)
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "study: not a UID (digits and dots, at most 64)");
    long long finding = 0;
    if (post->finding[0] != '\0') {
        char *end = NULL;
        finding = strtoll(post->finding, &end, 10);
        if (end == post->finding || *end != '\0' || finding <= 0 ||
            strspn(post->finding, "0123456789") != strlen(post->finding))
            return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                    "finding: not a finding id (a positive whole number)");
    }
    if (finding == 0 && study_length == 0)
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "name a finding (finding=ID) or a whole exam (study=UID)");
    int known = 0;
    size_t outcome_length = strlen(post->outcome);
    for (const char *choice = http_outcomes; outcome_length > 0 && *choice != '\0';) {
        size_t length = strcspn(choice, "|");
        if (length == outcome_length && strncmp(choice, post->outcome, length) == 0)
            known = 1;
        choice += length + (choice[length] == '|');
    }
    if (!known)
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST, "outcome: one of %s", http_outcomes);
    if (!http_plain_text(post->comment))
        return http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                "comment: UTF-8 text without control characters, please");
    store_review review = {study_length > 0 ? post->study : NULL,
                           finding,
                           post->outcome,
                           post->comment,
                           post->identity.user,
                           post->identity.role};
    mitilog_error error = {{0}};
    mitilog_status status = store_put_review(server->store, &review, &error);
    if (status != MITILOG_OK)
        return http_status_reply(server, status, NULL, NULL, &error);
    log_info("http: %s recorded %s on %s %s", post->identity.user, post->outcome,
             finding > 0 ? "finding" : "study", finding > 0 ? post->finding : post->study);
    char *json = NULL;
    status = store_reviews_text(server->store, study_length > 0 ? post->study : NULL, NULL, NULL, 0,
                                &json, &error);
    return http_status_reply(server, status, json, NULL, &error);
}

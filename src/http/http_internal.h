/*
 * http_internal.h - what the files of src/http/ share; not API.
 *
 * http_server.c  the daemon, dispatch by method and path, common headers,
 *                JSON and error responses;
 * http_parameters.c  the one checker of query parameters;
 * http_routes*.c  the JSON API (/healthz, /api/v1/...) and /metrics;
 * http_guard.c   connection deadlines (slow clients);
 * http_throttle.c  login failures per address and per user;
 * http_routes_reviews.c  the review worklist, the review history and
 *                recording a review (POST, login and forgery checks);
 * http_dicomweb.c  DICOMweb STOW-RS (POST /dicomweb/studies, login with
 *                the role sender);
 * http_static.c  the dashboard's files under web_root.
 */
#ifndef MITILOG_HTTP_INTERNAL_H
#define MITILOG_HTTP_INTERNAL_H

#include <microhttpd.h>
#include <pthread.h>
#include <sqlite3.h>

#include "report/report.h"
#include "http/http.h"
#include "http/http_auth.h"
#include "http/http_throttle.h"
#include "stats/stats_calendar.h"
#include "util/hash.h"

/* http_guard.c: the deadline for receiving each request (see there). */
typedef struct http_guard http_guard;
mitilog_status http_guard_start(unsigned deadline_seconds, http_guard **out, mitilog_error *error);
void http_guard_stop(http_guard *guard);
/* MHD_OPTION_NOTIFY_CONNECTION callback; context is the guard. */
void http_guard_notify(void *context, struct MHD_Connection *connection, void **socket_context,
                       enum MHD_ConnectionNotificationCode code);
/* Notes the length of the request target (URI log callback). */
void http_guard_target(http_guard *guard, struct MHD_Connection *connection, size_t length);
/* Closes the connection without a reply (its socket is shut down; MHD
 * then drops it), logging reason. */
void http_guard_close(http_guard *guard, struct MHD_Connection *connection, const char *reason);
/* The request has arrived whole: stops its clock; gives the target length. */
size_t http_guard_received(http_guard *guard, struct MHD_Connection *connection);
/* The reply is done: the next request on this connection starts now. */
void http_guard_completed(http_guard *guard, struct MHD_Connection *connection);
/* The printable address of the connection's peer ("an unknown address"
 * when MHD does not say); out holds at least INET6_ADDRSTRLEN bytes. */
void http_client_address(struct MHD_Connection *connection, char *out, size_t size);

struct http_server {
    struct MHD_Daemon *daemon;
    store *store;
    char *web_root;          /* resolved real path, NULL: no files   */
    unsigned port;           /* the bound port                       */
    http_auth *auth;         /* NULL: no login required              */
    http_throttle *throttle; /* failed logins; with auth only        */
    char *tls_certificate;   /* PEM text kept for MHD, NULL: HTTP    */
    char *tls_private_key;
    http_guard *guard;                 /* request deadlines                    */
    char csrf_key[65];                 /* random, drawn at start: review tokens */
    char *institution;                 /* [site] institution, NULL: not set    */
    metrics *metrics;                  /* GET /metrics, and what it counts here; NULL: none */
    struct ingest *ingest;             /* STOW-RS; NULL: not enabled  */
    unsigned long long stow_max_bytes; /* body of one STOW-RS request */
    unsigned stow_max_parts;           /* objects of one request      */
};

/* Who sent a request: user "" and role NULL when no login is set. */
typedef struct http_identity {
    char user[128];
    const char *role; /* "viewer", "reviewer" or "sender" (static) */
} http_identity;

/* A response to queue: status code and the response (owned). */
typedef struct http_reply {
    unsigned status;
    struct MHD_Response *response;
} http_reply;

/* http_server.c */
/* JSON body (malloc'ed, taken over) with the API headers. */
http_reply http_json_reply(unsigned status, char *json);
/* The one mapping of a result to a reply: MITILOG_OK -> 200 with body
 * (taken over; content_type NULL: JSON); MITILOG_ERROR_INVALID -> 400,
 * MITILOG_ERROR_NOT_FOUND -> 404, MITILOG_ERROR_DATABASE -> 503 (the
 * database is busy or unavailable: try again), anything else -> 500; the
 * error replies are {"error": error->text}. */
http_reply http_status_reply(http_server *server, mitilog_status status, char *body,
                             const char *content_type, const mitilog_error *error);
/* A period view's or the findings list's document, kept or made now
 * (report.h, report_view_serve), with the header that says which:
 * "Mitilog-Document: kept; made-at=TIME" or "Mitilog-Document: made;
 * milliseconds=N". CSV is served as text/csv. */
http_reply http_view_reply(http_server *server, const report_view_request *request);
/* {"error": message} written by json/json.h (valid JSON for any message). */
http_reply http_error_reply(http_server *server, unsigned status, const char *format, ...)
    __attribute__((format(printf, 3, 4)));

/* http_parameters.c: the checker of query parameters. Years outside
 * [HTTP_YEAR_MINIMUM, HTTP_YEAR_MAXIMUM] are refused, so that every period
 * computed from a date (weeks, baselines) stays within four-digit years. */
enum {
    HTTP_YEAR_MINIMUM = 1900,
    HTTP_YEAR_MAXIMUM = 9998,
    HTTP_INSTANT_INPUT_MAX = 64,
    HTTP_INSTANT_SIZE = 32 /* "YYYY-MM-DDThh:mm:ss.sssZ" */
};

typedef enum http_parameter_kind {
    HTTP_PARAMETER_DATE,    /* YYYY-MM-DD that exists; number = day number   */
    HTTP_PARAMETER_INSTANT, /* ISO 8601 date or date-time; instant = UTC text */
    HTTP_PARAMETER_WEEK,    /* YYYY-Www that exists; iso_year, iso_week      */
    HTTP_PARAMETER_INTEGER, /* decimal in [minimum, maximum]; number         */
    HTTP_PARAMETER_UID,     /* digits and dots, 1 to 64 (PS3.5 9.1)          */
    HTTP_PARAMETER_TEXT,    /* 1 to 128 bytes, no control characters        */
    HTTP_PARAMETER_CHOICE,  /* one of choices, "a|b|c"                       */
    HTTP_PARAMETER_SITES    /* site names (exam.h), the parameter repeated or
                               names separated by commas; sites          */
} http_parameter_kind;

typedef struct http_parameter_rule {
    const char *name;
    http_parameter_kind kind;
    long minimum, maximum; /* INTEGER only */
    const char *choices;   /* CHOICE only   */
} http_parameter_rule;

typedef struct http_parameter_value {
    const char *text; /* as sent, borrowed from MHD; NULL: absent */
    long number;      /* INTEGER: the value; DATE: days since 1970-01-01 */
    int iso_year, iso_week;
    char instant[HTTP_INSTANT_SIZE]; /* INSTANT: "YYYY-MM-DDThh:mm:ss.sssZ", UTC */
    store_sites sites;               /* SITES: names point into site_text */
    char site_text[EXAM_SITES_MAX * (EXAM_SITE_MAX + 1)];
} http_parameter_value;

/* Reads rules[i].name into values[i] for each rule; 1 when all present
 * ones are good, else 0 with a 400 reply naming the first bad one. */
int http_parameters_read(http_server *server, struct MHD_Connection *connection,
                         const http_parameter_rule *rules, size_t count,
                         http_parameter_value *values, http_reply *reply);
/* 1 unless both dates are present and from is after to (then 0, 400). */
int http_parameters_period(http_server *server, const http_parameter_value *from,
                           const http_parameter_value *to, http_reply *reply);
/* The parsers behind the rules, for tests: 1 if good. */
int http_parse_date(const char *text, long *day);
int http_parse_instant(const char *text, char out[HTTP_INSTANT_SIZE]);

/* http_routes.c: handles /healthz and /api/...; 0 if url is neither. */
int http_route_api(http_server *server, struct MHD_Connection *connection, const char *url,
                   http_reply *reply);

/* http_routes_metrics.c: GET /metrics; 0 if url is not it. */
int http_route_metrics(http_server *server, const char *url, http_reply *reply);

/* http_routes_findings.c: /api/v1/findings and /api/v1/policy; 0 if url
 * is neither. */
int http_route_findings(http_server *server, struct MHD_Connection *connection, const char *url,
                        http_reply *reply);

/* http_routes_stats.c: /api/v1/outliers, /api/v1/stats, /api/v1/drift and
 * /api/v1/ingest; 0 if url is none of them. */
int http_route_stats(http_server *server, struct MHD_Connection *connection, const char *url,
                     http_reply *reply);

/* http_routes_devices.c: /api/v1/devices and /api/v1/devices/example;
 * 0 if url is neither. */
int http_route_devices(http_server *server, struct MHD_Connection *connection, const char *url,
                       http_reply *reply);
/* http_routes_reviews.c: GET /api/v1/session, /api/v1/worklist, operators and
 * /api/v1/reviews; 0 if url is none of them. */
int http_route_reviews(http_server *server, struct MHD_Connection *connection, const char *url,
                       const http_identity *identity, http_reply *reply);
/* The token a write of user must carry (HMAC of the name under csrf_key). */
mitilog_status http_csrf_token(const http_server *server, const char *user,
                               char out[HASH_HEX_SIZE]);
/* A POST being read (see http_routes_reviews.c). */
typedef struct http_post http_post;
/* First call of a POST: 1 with *reply when it is refused before its body
 * is read (path, login, role, origin, content type). */
int http_post_refused(http_server *server, struct MHD_Connection *connection, const char *url,
                      const http_identity *identity, http_reply *reply);
/* NULL when out of memory. Freed by http_post_free(). */
http_post *http_post_create(struct MHD_Connection *connection, const http_identity *identity);
void http_post_feed(http_post *post, const char *data, size_t size);
http_reply http_post_finish(http_server *server, struct MHD_Connection *connection,
                            http_post *post);
void http_post_free(http_post *post);

/* http_dicomweb.c: DICOMweb STOW-RS, POST /dicomweb/studies. */
typedef struct http_stow http_stow;
/* First call: 1 with *reply when refused before the body is read (not
 * enabled, login, role, origin, media type, declared length). */
int http_stow_refused(http_server *server, struct MHD_Connection *connection,
                      const http_identity *identity, http_reply *reply);
/* NULL when out of memory. Freed by http_stow_free(). */
http_stow *http_stow_create(struct MHD_Connection *connection, const http_identity *identity);
/* Keeps a piece of the body; 0 once the body is past the limit (the rest
 * is not kept: answer http_stow_too_large()). */
int http_stow_feed(http_server *server, http_stow *stow, const char *data, size_t size);
/* Whether the 413 was already queued while the body was arriving. */
int http_stow_answered(http_stow *stow);
void http_stow_set_answered(http_stow *stow);
http_reply http_stow_too_large(http_server *server);
/* The body has arrived: stores each part, answers per PS3.18 10.5.3. */
http_reply http_stow_finish(http_server *server, struct MHD_Connection *connection,
                            http_stow *stow);
void http_stow_free(http_stow *stow);

/* http_static.c: serves url from web_root; 0 if there is no such file. */
int http_route_static(const http_server *server, const char *url, http_reply *reply);

#endif

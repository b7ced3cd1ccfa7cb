/*
 * http_internal.h - what the files of src/http/ share; not API.
 *
 * http_server.c  the daemon, dispatch by method and path, common headers,
 *                JSON and error responses;
 * http_routes.c  the JSON API (/healthz, /api/v1/...): parameter checks;
 * http_static.c  the dashboard's files under web_root.
 */
#ifndef MITILOG_HTTP_INTERNAL_H
#define MITILOG_HTTP_INTERNAL_H

#include <microhttpd.h>
#include <pthread.h>
#include <sqlite3.h>

#include "http/http.h"
#include "http/http_auth.h"

struct http_server {
    struct MHD_Daemon *daemon;
    store *store;
    char *web_root;              /* resolved real path, NULL: no files   */
    unsigned port;               /* the bound port                       */
    http_auth *auth;             /* NULL: no login required              */
    char *tls_certificate;       /* PEM text kept for MHD, NULL: HTTP    */
    char *tls_private_key;
};

/* A response to queue: status code and the response (owned). */
typedef struct http_reply {
    unsigned status;
    struct MHD_Response *response;
} http_reply;

/* http_server.c */
/* JSON body (malloc'ed, taken over) with the API headers. */
http_reply http_json_reply(unsigned status, char *json);
/* {"error": message} written by json/json.h (valid JSON for any message). */
http_reply http_error_reply(http_server *server, unsigned status,
                            const char *format, ...)
    __attribute__((format(printf, 3, 4)));

/* http_routes.c: handles /healthz and /api/...; 0 if url is neither. */
int http_route_api(http_server *server, struct MHD_Connection *connection,
                   const char *url, http_reply *reply);

/* http_routes_findings.c: /api/v1/findings and /api/v1/policy; 0 if url
 * is neither. */
int http_route_findings(http_server *server, struct MHD_Connection *connection,
                        const char *url, http_reply *reply);

/* http_routes_stats.c: /api/v1/outliers, /api/v1/stats, /api/v1/drift and
 * /api/v1/ingest; 0 if url is none of them. */
int http_route_stats(http_server *server, struct MHD_Connection *connection,
                     const char *url, http_reply *reply);

/* http_static.c: serves url from web_root; 0 if there is no such file. */
int http_route_static(const http_server *server, const char *url,
                      http_reply *reply);

#endif

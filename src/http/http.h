/*
 * http.h - the HTTP server (libmicrohttpd): JSON API and the dashboard's
 * static files from web/, and DICOMweb STOW-RS (http_dicomweb.c).
 *
 * Owns the libmicrohttpd daemon and its threads. Reads the database only
 * through the store's subject headers, stores received objects only
 * through ingest.h. GET and HEAD are served, POST for reviews and
 * STOW-RS; unknown paths answer 404
 * and bad parameters 400, both with a JSON error object. Each request
 * must arrive whole within request_timeout_seconds (http_guard.c);
 * connections are limited in total and per client address.
 *
 * Ownership: http_server_start() gives a server freed by http_server_stop().
 * The store must outlive the server.
 */
#ifndef MITILOG_HTTP_H
#define MITILOG_HTTP_H

#include "metrics/metrics.h"
#include "store/store.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct http_settings {
    const char *address; /* IPv4 literal, e.g. "127.0.0.1" */
    unsigned port;
    const char *web_root;             /* folder with the dashboard's files; may be NULL */
    const char *tls_certificate_file; /* PEM; NULL or "" = plain HTTP   */
    const char *tls_private_key_file; /* PEM                             */
    const char *password_file;        /* NULL or "": no login (see http_auth.h) */
    /* Slow and greedy clients; 0 takes the default in brackets. */
    unsigned max_connections;             /* all clients together [256]     */
    unsigned max_connections_per_address; /* one client address [32]; see
                                             HTTP_SETTINGS_UNLIMITED        */
    unsigned request_timeout_seconds;     /* to send a whole request [10]   */
    /* [site] institution, answered in /api/v1/stats; NULL or "": not set.
     * Copied at start. */
    const char *institution;
    /* Served at GET /metrics with the store's figures, and counting the
     * documents the server answers (borrowed; it must outlive the server);
     * NULL: /metrics answers 404. */
    metrics *metrics;
    /* DICOMweb STOW-RS (POST /dicomweb/studies): the pipeline objects go
     * through (borrowed, must outlive the server); NULL: not served. */
    struct ingest *ingest;
    unsigned long long stow_max_bytes; /* one request's body; 0: 256 MiB */
    unsigned stow_max_parts;           /* objects in one request; 0: 1000 */
} http_settings;

/* max_connections_per_address value meaning "no per-address limit" (a
 * reverse proxy on the same host connects from one address). */
enum { HTTP_SETTINGS_UNLIMITED = 0xFFFFFFFFu };

typedef struct http_server http_server;

mitilog_status http_server_start(const http_settings *settings, store *store, http_server **out,
                                 mitilog_error *error);
void http_server_stop(http_server *server);

#ifdef __cplusplus
}
#endif

#endif

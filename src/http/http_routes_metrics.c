/*
 * http_routes_metrics.c - GET /metrics: the metrics context's counters
 * and the store's figures in the Prometheus text exposition format 0.0.4
 * (metrics/metrics.h). Open without a login, like /healthz: counts only,
 * no patient data (docs/security.md).
 */
#include "http/http_internal.h"

#include <stdlib.h>
#include <string.h>

#include "store/store_metrics.h"
#include "util/log.h"

/* 200 with the text; a database that does not answer is reported in the
 * text (mitilog_database_up 0), not as a failed scrape: the counters
 * matter most when the database fails. */
static http_reply http_metrics(http_server *server)
{
    metrics_database database;
    mitilog_error error = {{0}};
    if (store_metrics_read(server->store, &database, &error) != MITILOG_OK)
        log_warning("http: /metrics: the database's figures are left out: %s", error.text);
    char *text = NULL;
    mitilog_status status = metrics_exposition(server->metrics, &database, MITILOG_VERSION,
                                               store_site(server->store), &text, &error);
    metrics_database_free(&database);
    if (status != MITILOG_OK)
        return http_status_reply(server, status, NULL, NULL, &error);
    http_reply reply = {MHD_HTTP_OK,
                        MHD_create_response_from_buffer(strlen(text), text, MHD_RESPMEM_MUST_FREE)};
    if (reply.response == NULL) {
        free(text);
        return http_error_reply(server, MHD_HTTP_INTERNAL_SERVER_ERROR,
                                "out of memory answering /metrics");
    }
    MHD_add_response_header(reply.response, "Content-Type", METRICS_CONTENT_TYPE);
    MHD_add_response_header(reply.response, "Cache-Control", "no-store");
    return reply;
}

int http_route_metrics(http_server *server, const char *url, http_reply *reply)
{
    if (strcmp(url, "/metrics") != 0 || server->metrics == NULL)
        return 0;
    *reply = http_metrics(server);
    return 1;
}

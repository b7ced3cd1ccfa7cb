/* mitilog serve --config FILE: the Storage SCP and the HTTP dashboard,
 * until SIGTERM or SIGINT. */
#include <pthread.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "report/report_refresher.h"
#include "cli/cli_options.h"
#include "cli/cli_privileges.h"
#include "cli/commands.h"
#include "config/config_peers.h"
#include "dicom/dcm.h"
#include "http/http.h"
#include "ingest/ingest.h"
#include "metrics/metrics.h"
#include "notify/notify.h"
#include "store/store.h"
#include "store/store_findings.h"
#include "util/log.h"

static void print_serve_usage(FILE *out)
{
    fprintf(out, "usage: mitilog serve [--config FILE]\n"
                 "Receives DICOM objects (C-STORE, C-ECHO) and serves the HTTP API and\n"
                 "dashboard. Without --config the built-in defaults are used (see\n"
                 "conf/mitilog.ini). Stops cleanly on SIGTERM or SIGINT: no new\n"
                 "associations, objects in flight are answered, the database is closed.\n");
}

/* Holds everything serve starts, so one function can stop it in order. */
typedef struct serve_state {
    config config;
    store *store;
    ingest *ingest;
    dcm_server *dicom;
    http_server *http;
    notify *notify;
    report_refresher *refresher; /* kept documents made again; NULL: off */
    config_peer *peers;
    dcm_allowed_peer *allowed;
    metrics *metrics; /* what every stage reports into; GET /metrics */
} serve_state;

static void serve_stop(serve_state *state)
{
    report_refresher_stop(state->refresher);
    if (state->dicom != NULL) {
        dcm_server_stop(state->dicom);
        dcm_server_free(state->dicom);
    }
    if (state->http != NULL)
        http_server_stop(state->http);
    ingest_free(state->ingest);
    notify_stop(state->notify);
    store_close(state->store);
    metrics_free(state->metrics); /* after every stage reporting into it */
    free(state->allowed);
    free(state->peers);
    config_free(&state->config);
}

/* NULL for an empty setting (the shim's "not set"). */
static const char *serve_optional(const char *value)
{
    return value != NULL && value[0] != '\0' ? value : NULL;
}

static int serve_start(serve_state *state, mitilog_error *error)
{
    const config *config = &state->config;
    cli_identity identity;
    if (cli_identity_resolve(config->service_user, &identity, error) != MITILOG_OK)
        return -1;
    if (cli_prepare_data_directory(config, error) != 0)
        return -1;
    if (cli_open_store(config, &state->store, error) != MITILOG_OK)
        return -1;
    if (store_set_durability(state->store,
                             strcmp(config->durability, "process") == 0
                                 ? STORE_DURABILITY_PROCESS
                                 : STORE_DURABILITY_POWER_LOSS,
                             error) != MITILOG_OK)
        return -1;
    /* Before the ingest: its exam worker writes the findings it queues. */
    if (notify_start(config, state->store, &state->notify, error) != MITILOG_OK)
        return -1;
    if (metrics_create(&state->metrics, error) != MITILOG_OK ||
        ingest_create(config, state->store, state->metrics, &state->ingest, error) != MITILOG_OK)
        return -1;
    /* After the store and ingest made their files and folders. */
    if (cli_identity_give(&identity, config->data_directory, error) != MITILOG_OK)
        return -1;
    size_t peer_count = 0;
    if (config_peers_parse(config->allowed_calling_ae_titles, &state->peers, &peer_count, error) !=
        MITILOG_OK)
        return -1;
    if (peer_count > 0) {
        state->allowed = calloc(peer_count, sizeof *state->allowed);
        if (state->allowed == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory"), -1;
        for (size_t i = 0; i < peer_count; i++) {
            state->allowed[i].ae_title = state->peers[i].ae_title;
            state->allowed[i].address = state->peers[i].address;
        }
    }
    dcm_server_settings settings = {
        .ae_title = config->ae_title,
        .port = config->port,
        .allowed_peers = state->allowed,
        .allowed_peer_count = peer_count,
        .max_associations = config->max_associations,
        .max_negotiations = config->max_negotiations,
        .max_negotiations_per_address = config->max_negotiations_per_address,
        .acse_timeout_seconds = config->acse_timeout_seconds,
        .dimse_timeout_seconds = config->dimse_timeout_seconds,
        .max_pdu = config->max_pdu_bytes,
        .tls_certificate_file = serve_optional(config->dicom_tls_certificate),
        .tls_private_key_file = serve_optional(config->dicom_tls_private_key),
        .tls_ca_file = serve_optional(config->dicom_tls_ca_certificates),
        .max_object_bytes = config->max_object_bytes,
        .max_memory_in_flight_bytes = config->max_memory_in_flight_bytes,
        .metrics = state->metrics,
    };
    if (dcm_server_create(&settings, ingest_store_handler, state->ingest, &state->dicom, error) !=
            MITILOG_OK ||
        dcm_server_start(state->dicom, error) != MITILOG_OK)
        return -1;
    http_settings web = {
        .address = config->http_address,
        .port = config->http_port,
        .web_root = config->web_root,
        .tls_certificate_file = config->http_tls_certificate,
        .tls_private_key_file = config->http_tls_private_key,
        .password_file = config->http_password_file,
        .max_connections = config->http_max_connections,
        .max_connections_per_address = config->http_max_connections_per_address != 0
                                           ? config->http_max_connections_per_address
                                           : HTTP_SETTINGS_UNLIMITED,
        .request_timeout_seconds = config->http_request_timeout_seconds,
        .institution = config->site_institution,
        .ingest = strcmp(config->dicomweb_enabled, "yes") == 0 ? state->ingest : NULL,
        .stow_max_bytes =
            (unsigned long long)config->dicomweb_max_request_megabytes * 1024ull * 1024ull,
        .stow_max_parts = config->dicomweb_max_parts,
        .metrics = state->metrics};
    if (http_server_start(&web, state->store, &state->http, error) != MITILOG_OK)
        return -1;
    if (config->http_refresh_seconds > 0 &&
        report_refresher_start(state->store, config->http_refresh_seconds, MITILOG_VERSION,
                               &state->refresher, error) != MITILOG_OK)
        return -1;
    /* Both ports are bound: root is no longer needed. */
    if (cli_identity_become(&identity, error) != MITILOG_OK)
        return -1;
    if (identity.change)
        log_info("running as user %s (uid %u)", identity.name, (unsigned)identity.uid);
    else if (geteuid() == 0)
        log_warning("running as root: set [service] user to drop privileges after binding");
    return 0;
}

/* SIGHUP: re-reads the ALARA policy ([rules] policy); the rest of the
 * configuration is read at start only. On an error the old policy stays
 * (the message names file:line). Exams are re-evaluated under the new
 * policy as they are touched; `mitilog rescore` re-evaluates all. */
static void serve_reload_policy(serve_state *state)
{
    const char *path = state->config.rules_policy_path;
    if (path == NULL || path[0] == '\0') {
        log_info("SIGHUP: no [rules] policy configured; the rest of the configuration is "
                 "read at start only");
        return;
    }
    rules_policy *policy = NULL;
    mitilog_error error;
    if (rules_policy_load(path, &policy, &error) != MITILOG_OK ||
        ingest_set_policy(state->ingest, policy, &error) != MITILOG_OK) {
        log_error("SIGHUP: policy not reloaded, the previous one stays: %s", error.text);
        return;
    }
    char version[65];
    store_active_policy_version(state->store, version);
    log_info("SIGHUP: policy %s reloaded: version %s (other settings are read at start only)", path,
             version);
}

int command_serve(int argc, char **argv)
{
    const char *config_path = NULL;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            print_serve_usage(stdout);
            return EXIT_STATUS_SUCCESS;
        } else if (strcmp(argv[i], "--config") == 0 && i + 1 < argc) {
            config_path = argv[++i];
        } else {
            print_serve_usage(stderr);
            return EXIT_STATUS_USAGE;
        }
    }
    /* Signals are blocked before any thread exists, so every thread
     * inherits the mask and only sigwait() below sees them. */
    sigset_t signals;
    sigemptyset(&signals);
    sigaddset(&signals, SIGINT);
    sigaddset(&signals, SIGTERM);
    sigaddset(&signals, SIGHUP);
    pthread_sigmask(SIG_BLOCK, &signals, NULL);

    /* Files and folders the daemon creates are its own alone. */
    umask(0077);
    serve_state state;
    memset(&state, 0, sizeof state);
    if (cli_load_config(config_path, &state.config) != 0) {
        config_free(&state.config);
        return EXIT_STATUS_USAGE;
    }
    mitilog_error error;
    log_level level = LOG_LEVEL_INFO;
    log_parse_level(state.config.log_level, &level);
    if (dcm_initialise((int)level, &error) != MITILOG_OK || serve_start(&state, &error) != 0) {
        log_error("cannot start: %s", error.text);
        serve_stop(&state);
        return EXIT_STATUS_FAILURE;
    }
    log_info("mitilog %s: DICOM AE '%s' on port %u (all interfaces%s); HTTP on %s://%s:%u/%s; "
             "database %s",
             MITILOG_VERSION, state.config.ae_title, state.config.port,
             state.config.dicom_tls_certificate[0] != '\0' ? ", TLS" : "",
             state.config.http_tls_certificate[0] != '\0' ? "https" : "http",
             state.config.http_address, state.config.http_port,
             state.config.http_password_file[0] != '\0' ? " (login required)" : "",
             /* Not the conninfo itself: it may hold a password. */
             strcmp(state.config.storage_engine, "postgresql") == 0
                 ? "PostgreSQL (the server of [storage] connection)"
                 : state.config.database_path);
    for (;;) {
        int received = 0;
        if (sigwait(&signals, &received) != 0)
            continue;
        if (received == SIGHUP) {
            serve_reload_policy(&state);
            continue;
        }
        log_info("signal %d: stopping (no new associations; objects in flight are answered)",
                 received);
        break;
    }
    serve_stop(&state);
    log_info("stopped cleanly");
    return EXIT_STATUS_SUCCESS;
}

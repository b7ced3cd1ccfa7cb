#include "config/config.h"

#include <arpa/inet.h>
#include <errno.h>
#include <ini.h>
#include <libpq-fe.h>
#include <limits.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "config/config_paths.h"
#include "config/config_peers.h"
#include "exam/exam.h"

/* One row per key: the single description of the configuration. It parses
 * the file, checks bounds, prints the effective values, and is what
 * docs/configuration.md documents. */
typedef enum option_type { OPTION_STRING, OPTION_UNSIGNED, OPTION_CHOICE } option_type;

typedef struct option {
    const char *section;
    const char *key;
    option_type type;
    size_t offset;
    const char *default_value;
    unsigned long minimum; /* OPTION_UNSIGNED */
    unsigned long maximum;
    const char *choices; /* OPTION_CHOICE: "|a|b|c|" */
    int is_path;         /* resolved against the config's folder */
    const char *description;
} option;

#define FIELD(name) offsetof(config, name)

static const option options[] = {
    {"dicom", "ae_title", OPTION_STRING, FIELD(ae_title), "MITILOG", 0, 0, NULL, 0,
     "Called AE title this Storage SCP answers to (1-16 characters)."},
    {"dicom", "port", OPTION_UNSIGNED, FIELD(port), "11112", 1, 65535, NULL, 0,
     "TCP port of the Storage SCP. DCMTK 3.6.7 listens on every interface."},
    {"dicom", "allowed_calling_ae_titles", OPTION_STRING, FIELD(allowed_calling_ae_titles), "", 0,
     0, NULL, 0, "Comma-separated calling AE titles, each optionally AE@IPv4; empty accepts any."},
    {"dicom", "max_associations", OPTION_UNSIGNED, FIELD(max_associations), "16", 1, 256, NULL, 0,
     "Concurrent associations; further ones are refused (local limit exceeded)."},
    {"dicom", "max_negotiations", OPTION_UNSIGNED, FIELD(max_negotiations), "128", 1, 1024, NULL, 0,
     "Connections still negotiating (TLS handshake, association request) at once; further ones "
     "are closed unread."},
    {"dicom", "max_negotiations_per_address", OPTION_UNSIGNED, FIELD(max_negotiations_per_address),
     "8", 1, 1024, NULL, 0,
     "Connections from one IP address still negotiating at once; further ones are closed unread."},
    {"dicom", "acse_timeout_seconds", OPTION_UNSIGNED, FIELD(acse_timeout_seconds), "5", 1, 600,
     NULL, 0,
     "Total time from connection to complete association request (TLS handshake included); "
     "then the connection is closed."},
    {"dicom", "dimse_timeout_seconds", OPTION_UNSIGNED, FIELD(dimse_timeout_seconds), "60", 1, 3600,
     NULL, 0, "Idle time allowed between DIMSE messages within an association."},
    {"dicom", "max_pdu_bytes", OPTION_UNSIGNED, FIELD(max_pdu_bytes), "65536", 4096, 131072, NULL,
     0, "Largest PDU this receiver accepts."},
    {"dicom", "max_object_bytes", OPTION_UNSIGNED, FIELD(max_object_bytes), "2147483648", 0,
     4294967295UL, NULL, 0,
     "Largest object accepted (data set bytes received); past it the rest is discarded as it "
     "arrives and the object gets C001; 0 = no limit."},
    {"dicom", "max_memory_in_flight_bytes", OPTION_UNSIGNED, FIELD(max_memory_in_flight_bytes),
     "1073741824", 0, 4294967295UL, NULL, 0,
     "Objects being received, all associations together; one that passes it while others are in "
     "flight is discarded and gets A700 (retry); 0 = no limit."},
    {"dicom", "tls_certificate", OPTION_STRING, FIELD(dicom_tls_certificate), "", 0, 0, NULL, 1,
     "PEM certificate for DICOM TLS; with tls_private_key: TLS only, no plain TCP. Empty: plain "
     "TCP."},
    {"dicom", "tls_private_key", OPTION_STRING, FIELD(dicom_tls_private_key), "", 0, 0, NULL, 1,
     "PEM private key matching tls_certificate (unencrypted; keep it mode 0640)."},
    {"dicom", "tls_ca_certificates", OPTION_STRING, FIELD(dicom_tls_ca_certificates), "", 0, 0,
     NULL, 1,
     "PEM CA certificate(s); non-empty: senders must present a certificate signed by one."},
    {"http", "address", OPTION_STRING, FIELD(http_address), "127.0.0.1", 0, 0, NULL, 0,
     "IPv4 address of the HTTP API and dashboard."},
    {"http", "port", OPTION_UNSIGNED, FIELD(http_port), "8080", 1, 65535, NULL, 0,
     "TCP port of the HTTP API and dashboard."},
    {"http", "web_root", OPTION_STRING, FIELD(web_root), MITILOG_SOURCE_DIR "/web", 0, 0, NULL, 1,
     "Folder holding the dashboard's files."},
    {"http", "allow_insecure_non_loopback", OPTION_CHOICE, FIELD(http_allow_insecure_non_loopback),
     "no", 0, 0, "|yes|no|", 0,
     "yes: serve a non-loopback address over plain HTTP or without a login (not advised); no: "
     "such an address needs tls_certificate, tls_private_key and password_file."},
    {"http", "tls_certificate", OPTION_STRING, FIELD(http_tls_certificate), "", 0, 0, NULL, 1,
     "PEM certificate for HTTPS; with tls_private_key the API and dashboard use TLS."},
    {"http", "tls_private_key", OPTION_STRING, FIELD(http_tls_private_key), "", 0, 0, NULL, 1,
     "PEM private key for HTTPS."},
    {"http", "password_file", OPTION_STRING, FIELD(http_password_file), "", 0, 0, NULL, 1,
     "File of user:crypt-hash lines (mitilog passwd); set: every request but /healthz and "
     "/metrics needs a login. Needs HTTPS."},
    {"http", "max_connections", OPTION_UNSIGNED, FIELD(http_max_connections), "256", 8, 4096, NULL,
     0, "Open HTTP connections of all clients together; more are closed at once."},
    {"http", "max_connections_per_address", OPTION_UNSIGNED,
     FIELD(http_max_connections_per_address), "32", 0, 4096, NULL, 0,
     "Open HTTP connections from one client address; 0 = no limit (e.g. behind a reverse proxy "
     "on this host, which then limits clients itself)."},
    {"http", "request_timeout_seconds", OPTION_UNSIGNED, FIELD(http_request_timeout_seconds), "10",
     1, 600, NULL, 0,
     "Seconds a client has to send a whole request (TLS handshake, request line and headers), "
     "however slowly it sends each byte; then the connection is closed."},
    {"http", "refresh_seconds", OPTION_UNSIGNED, FIELD(http_refresh_seconds), "60", 0, 86400, NULL,
     0,
     "Every this many seconds, the kept documents of the period views (outliers, statistics, "
     "drift) asked for in the last 14 days whose data has changed are made again, so that they "
     "are ready when asked for; 0 = only when asked for."},
    {"dicomweb", "enabled", OPTION_CHOICE, FIELD(dicomweb_enabled), "no", 0, 0, "|yes|no|", 0,
     "yes: accept objects by DICOMweb STOW-RS at POST /dicomweb/studies (needs [http] "
     "password_file and a user with the role sender)."},
    {"dicomweb", "max_request_megabytes", OPTION_UNSIGNED, FIELD(dicomweb_max_request_megabytes),
     "256", 1, 4096, NULL, 0,
     "Largest STOW-RS request body (MiB); a larger one is answered 413 without reading the rest."},
    {"dicomweb", "max_parts", OPTION_UNSIGNED, FIELD(dicomweb_max_parts), "1000", 1, 100000, NULL,
     0, "Objects in one STOW-RS request at most; more are answered 413, none stored."},
    {"notifications", "severity", OPTION_CHOICE, FIELD(notify_severity), "violation", 0, 0,
     "|advisory|warning|violation|", 0,
     "Findings of this severity or above are notified (webhook_url, syslog)."},
    {"notifications", "webhook_url", OPTION_STRING, FIELD(notify_webhook_url), "", 0, 0, NULL, 0,
     "http(s) URL each finding to notify is posted to as JSON; empty: no webhook."},
    {"notifications", "webhook_ca_certificates", OPTION_STRING, FIELD(notify_webhook_ca), "", 0, 0,
     NULL, 1,
     "PEM CA certificate(s) the webhook's HTTPS certificate is checked against; empty: "
     "the system's."},
    {"notifications", "syslog", OPTION_CHOICE, FIELD(notify_syslog), "no", 0, 0, "|yes|no|", 0,
     "yes: write one syslog line per finding to notify."},
    {"notifications", "syslog_facility", OPTION_CHOICE, FIELD(notify_syslog_facility), "daemon", 0,
     0, "|daemon|user|local0|local1|local2|local3|local4|local5|local6|local7|", 0,
     "Syslog facility of those lines."},
    {"notifications", "syslog_socket", OPTION_STRING, FIELD(notify_syslog_socket), "/dev/log", 0, 0,
     NULL, 1, "Unix datagram socket of the syslog daemon."},
    {"notifications", "dashboard_url", OPTION_STRING, FIELD(notify_dashboard_url), "", 0, 0, NULL,
     0,
     "Base URL of the dashboard as readers reach it (https://mitilog.example.org); each "
     "notification links to the exam's page there. Empty: no link."},
    {"notifications", "timeout_seconds", OPTION_UNSIGNED, FIELD(notify_timeout_seconds), "10", 1,
     300, NULL, 0, "Seconds one webhook post may take (connection included)."},
    {"notifications", "retry_initial_seconds", OPTION_UNSIGNED, FIELD(notify_retry_initial_seconds),
     "30", 1, 86400, NULL, 0,
     "Wait before the first retry of a failed notification; doubled at each further failure."},
    {"notifications", "retry_max_seconds", OPTION_UNSIGNED, FIELD(notify_retry_max_seconds), "3600",
     1, 604800, NULL, 0, "Longest wait between two attempts."},
    {"notifications", "max_attempts", OPTION_UNSIGNED, FIELD(notify_max_attempts), "20", 1, 1000,
     NULL, 0, "Attempts before a notification is given up (and recorded as failed)."},
    {"storage", "data_directory", OPTION_STRING, FIELD(data_directory), "var", 0, 0, NULL, 1,
     "Folder for the database, quarantine/, objects/ (full copies) and reading/ (objects waiting "
     "to be read)."},
    {"storage", "engine", OPTION_CHOICE, FIELD(storage_engine), "sqlite", 0, 0,
     "|sqlite|postgresql|", 0,
     "sqlite: one file in data_directory, for one receiver; postgresql: a server that several "
     "receivers (sites) share, named by connection."},
    {"storage", "database", OPTION_STRING, FIELD(database_path), "mitilog.sqlite3", 0, 0, NULL, 0,
     "SQLite database file; relative to data_directory."},
    {"storage", "connection", OPTION_STRING, FIELD(storage_connection), "", 0, 0, NULL, 0,
     "PostgreSQL (engine = postgresql): libpq connection string, key=value "
     "('host=db.example port=5432 dbname=mitilog user=mitilog') or URI "
     "('postgresql://mitilog@db.example/mitilog'); a password is better kept in ~/.pgpass."},
    {"storage", "read_connection", OPTION_STRING, FIELD(storage_read_connection), "", 0, 0, NULL, 0,
     "PostgreSQL: connection string of a replica the dashboard and API read from (read-only); "
     "empty = read through connection."},
    {"storage", "retention", OPTION_CHOICE, FIELD(retention), "header", 0, 0, "|none|header|full|",
     0, "What is kept of each object: none, header (pixel data dropped) or full."},
    {"storage", "durability", OPTION_CHOICE, FIELD(durability), "power_loss", 0, 0,
     "|power_loss|process|", 0,
     "power_loss: each commit is synced before Success is sent; process: survives the daemon "
     "being killed, not a power loss (faster on slow disks)."},
    {"storage", "busy_timeout_ms", OPTION_UNSIGNED, FIELD(busy_timeout_ms), "5000", 0, 600000, NULL,
     0, "How long a write waits for a locked database before answering A700."},
    {"storage", "sr_depth_limit", OPTION_UNSIGNED, FIELD(sr_depth_limit), "64", 1, 1024, NULL, 0,
     "Levels of an SR content tree read; deeper items are skipped (and logged)."},
    {"storage", "quarantine_max_bytes", OPTION_UNSIGNED, FIELD(quarantine_max_bytes), "1073741824",
     0, 4294967295UL, NULL, 0,
     "Quota of quarantine/ in bytes; the oldest files are removed to make room (0 = keep "
     "nothing)."},
    {"storage", "quarantine_max_files", OPTION_UNSIGNED, FIELD(quarantine_max_files), "1000", 0,
     1000000, NULL, 0,
     "Quota of quarantine/ in files; the oldest are removed to make room (0 = keep nothing)."},
    {"reading", "workers", OPTION_UNSIGNED, FIELD(reading_workers), "1", 0, 16, NULL, 0,
     "Threads reading the indices drawn in the pixels, after the C-STORE is answered; 0 "
     "queues objects without reading them until a restart with workers (maintenance)."},
    {"reading", "queue_objects", OPTION_UNSIGNED, FIELD(reading_queue_objects), "10000", 1,
     10000000, NULL, 0,
     "Objects waiting to be read at most; beyond it an object is stored with its pixel values "
     "'not read: reading queue full'."},
    {"reading", "queue_megabytes", OPTION_UNSIGNED, FIELD(reading_queue_megabytes), "4096", 1,
     1048576, NULL, 0,
     "Spooled bytes (MiB) of the objects waiting to be read at most; beyond it as queue_objects."},
    {"reading", "cine_frames", OPTION_UNSIGNED, FIELD(reading_cine_frames), "3", 1, 64, NULL, 0,
     "Frames of a cine read (first, last and evenly between); a value is kept only when they "
     "agree."},
    {"receiver", "site", OPTION_STRING, FIELD(receiver_site), EXAM_SITE_DEFAULT, 0, 0, NULL, 0,
     "Site name this receiver records on every object and rejection it takes (1-64 "
     "characters, no comma); receivers of several sites writing one database tell their "
     "objects apart by it, and every document can be filtered and grouped by it."},
    {"receiver", "exam_settle_ms", OPTION_UNSIGNED, FIELD(exam_settle_ms), "500", 0, 600000, NULL,
     0,
     "Milliseconds without a new object of a study before its exam record is rebuilt (one "
     "rebuild per burst; the queue is in the database, shared by the receivers)."},
    {"receiver", "exam_max_wait_ms", OPTION_UNSIGNED, FIELD(exam_max_wait_ms), "5000", 0, 3600000,
     NULL, 0,
     "Milliseconds after a study's first waiting object by which its exam record is rebuilt even "
     "while objects keep arriving."},
    {"site", "rules", OPTION_STRING, FIELD(site_rules_path), MITILOG_SOURCE_DIR "/conf/site.ini", 0,
     0, NULL, 1,
     "Site file: exam types, rooms, shifts, age groups, SR codes (docs/configuration.md); "
     "empty for none."},
    {"site", "institution", OPTION_STRING, FIELD(site_institution), "", 0, 0, NULL, 0,
     "Name of the institution printed on the statistics document and reports; empty: the "
     "documents say it is not configured."},
    {"rules", "policy", OPTION_STRING, FIELD(rules_policy_path),
     MITILOG_SOURCE_DIR "/conf/policy.ini", 0, 0, NULL, 1,
     "ALARA policy file: rules, limits and their sources (docs/policy.md)."},
    {"backfill", "source", OPTION_STRING, FIELD(backfill_source), "", 0, 0, NULL, 0,
     "PACS to backfill from, AE@HOST:PORT (mitilog backfill --from overrides it)."},
    {"backfill", "calling_ae_title", OPTION_STRING, FIELD(backfill_calling_ae_title), "", 0, 0,
     NULL, 0, "AE title mitilog calls the PACS with; empty: [dicom] ae_title."},
    {"backfill", "retrieve", OPTION_CHOICE, FIELD(backfill_retrieve), "get", 0, 0, "|get|move|", 0,
     "get: C-GET, objects come back on the same association; move: C-MOVE to move_destination."},
    {"backfill", "move_destination", OPTION_STRING, FIELD(backfill_move_destination), "", 0, 0,
     NULL, 0, "AE title the PACS sends C-MOVE objects to; empty: [dicom] ae_title."},
    {"backfill", "move_listen_port", OPTION_UNSIGNED, FIELD(backfill_move_listen_port), "0", 0,
     65535, NULL, 0,
     "With retrieve = move: port of a listener the command opens for the moved objects; 0: the "
     "running daemon's receiver gets them."},
    {"backfill", "rate_per_minute", OPTION_UNSIGNED, FIELD(backfill_rate_per_minute), "120", 0,
     1000000, NULL, 0, "Objects fetched per minute at most, all studies together; 0 = no limit."},
    {"backfill", "concurrency", OPTION_UNSIGNED, FIELD(backfill_concurrency), "1", 1, 8, NULL, 0,
     "Studies retrieved at once, one association each."},
    {"backfill", "window", OPTION_STRING, FIELD(backfill_window), "", 0, 0, NULL, 0,
     "Local time when the backfill may run, HH:MM-HH:MM (may cross midnight); outside it the "
     "command waits. Empty: any time."},
    {"backfill", "station", OPTION_STRING, FIELD(backfill_station), "", 0, 0, NULL, 0,
     "Only objects of this Station Name (wildcards * and ?); empty: any."},
    {"backfill", "description", OPTION_STRING, FIELD(backfill_description), "", 0, 0, NULL, 0,
     "Only studies of this Study Description (wildcards * and ?); empty: any."},
    {"backfill", "progress_seconds", OPTION_UNSIGNED, FIELD(backfill_progress_seconds), "10", 1,
     3600, NULL, 0, "Seconds between two progress lines on the terminal."},
    {"backfill", "connect_timeout_seconds", OPTION_UNSIGNED,
     FIELD(backfill_connect_timeout_seconds), "30", 1, 600, NULL, 0,
     "Seconds to connect to the PACS and negotiate an association."},
    {"service", "user", OPTION_STRING, FIELD(service_user), "", 0, 0, NULL, 0,
     "Started as root: after binding, switch to this user (and its groups); empty: stay."},
    {"log", "level", OPTION_CHOICE, FIELD(log_level), "info", 0, 0, "|debug|info|warning|error|", 0,
     "Lowest level written to stderr."},
};

enum { OPTION_COUNT = sizeof options / sizeof options[0] };

typedef struct load_state {
    config *config;
    const char *path;
    char *base_directory;
    mitilog_status status;
    mitilog_error *error;
    int lines[sizeof options / sizeof options[0]]; /* where each key was set */
    FILE *file;
    int line_number;       /* line of the text inih is looking at */
    int previous_complete; /* the last chunk read ended a line */
    int error_line;        /* line of the first bad key, 0 if none */
} load_state;

/* Debian's inih does not pass line numbers to handlers, so the reader
 * counts them: inih asks for one line per call. */
static char *read_line(char *buffer, int size, void *stream)
{
    load_state *state = stream;
    char *line = fgets(buffer, size, state->file);
    if (line != NULL) {
        state->line_number += state->previous_complete;
        state->previous_complete = strchr(line, '\n') != NULL;
    }
    return line;
}

static char **string_field(config *config, const option *option)
{
    return (char **)((char *)config + option->offset);
}

static unsigned *unsigned_field(config *config, const option *option)
{
    return (unsigned *)((char *)config + option->offset);
}

/* Stores value into the option's field; on a bad value writes the reason
 * (without location) into reason and returns -1. */
static int option_assign(config *config, const option *option, const char *value,
                         const char *base_directory, char *reason, size_t reason_size)
{
    if (option->type == OPTION_UNSIGNED) {
        char *end = NULL;
        errno = 0;
        unsigned long number = strtoul(value, &end, 10);
        if (value[0] == '\0' || value[0] == '-' || value[0] == '+' || *end != '\0' || errno != 0) {
            snprintf(reason, reason_size, "'%s' is not a whole number", value);
            return -1;
        }
        if (number < option->minimum || number > option->maximum) {
            snprintf(reason, reason_size, "%lu is outside %lu..%lu", number, option->minimum,
                     option->maximum);
            return -1;
        }
        *unsigned_field(config, option) = (unsigned)number;
        return 0;
    }
    if (option->type == OPTION_CHOICE) {
        char needle[64];
        snprintf(needle, sizeof needle, "|%s|", value);
        if (value[0] == '\0' || strchr(value, '|') != NULL ||
            strstr(option->choices, needle) == NULL) {
            /* "|none|header|full|" reads "none, header or full" */
            char allowed[256];
            size_t used = 0;
            const char *choice = option->choices + 1;
            while (*choice != '\0' && used < sizeof allowed - 1) {
                const char *end = strchr(choice, '|');
                size_t length = end != NULL ? (size_t)(end - choice) : strlen(choice);
                int last = end == NULL || end[1] == '\0';
                int n = snprintf(allowed + used, sizeof allowed - used, "%s%.*s",
                                 used == 0 ? ""
                                 : last    ? " or "
                                           : ", ",
                                 (int)length, choice);
                if (n < 0 || (size_t)n >= sizeof allowed - used)
                    break;
                used += (size_t)n;
                choice = end != NULL ? end + 1 : choice + length;
            }
            snprintf(reason, reason_size, "'%s' is not one of %s", value, allowed);
            return -1;
        }
    }
    char *copy = option->is_path ? config_resolve_path(base_directory, value) : strdup(value);
    if (copy == NULL) {
        snprintf(reason, reason_size, "out of memory");
        return -1;
    }
    char **field = string_field(config, option);
    free(*field);
    *field = copy;
    return 0;
}

static const option *option_find(const char *section, const char *key)
{
    for (size_t i = 0; i < OPTION_COUNT; i++) {
        if (strcasecmp(options[i].section, section) == 0 && strcasecmp(options[i].key, key) == 0)
            return &options[i];
    }
    return NULL;
}

/* 1 for an IPv4 literal in 127.0.0.0/8 (RFC 1122 3.2.1.3: loopback). */
static int config_address_is_loopback(const char *address)
{
    struct in_addr parsed;
    if (inet_pton(AF_INET, address, &parsed) != 1)
        return 0;
    return (ntohl(parsed.s_addr) >> 24) == 127;
}

/* Checks that only make sense across keys or need more than a bound. */
static void config_report(load_state *state, int line, const char *section, const char *key,
                          const char *reason);

static void config_problem(load_state *state, const char *section, const char *key,
                           const char *reason)
{
    const option *option = option_find(section, key);
    config_report(state, option ? state->lines[option - options] : 0, section, key, reason);
}

static void config_validate(load_state *state)
{
    const config *config = state->config;
    char reason[512];
    const size_t reason_size = sizeof reason;
    size_t length = strlen(config->ae_title);
    if (length == 0 || length > 16 || strchr(config->ae_title, '\\') != NULL) {
        snprintf(reason, reason_size, "an AE title has 1 to 16 characters and no backslash");
        config_problem(state, "dicom", "ae_title", reason);
    }
    if (!exam_site_name_check(config->receiver_site, reason, reason_size))
        config_problem(state, "receiver", "site", reason);
    config_peer *peers = NULL;
    size_t peer_count = 0;
    mitilog_error peer_error;
    if (config_peers_parse(config->allowed_calling_ae_titles, &peers, &peer_count, &peer_error) !=
        MITILOG_OK) {
        snprintf(reason, reason_size, "%.200s", peer_error.text);
        config_problem(state, "dicom", "allowed_calling_ae_titles", reason);
    }
    free(peers);
    int certificate = config->dicom_tls_certificate[0] != '\0';
    if (certificate != (config->dicom_tls_private_key[0] != '\0') ||
        (config->dicom_tls_ca_certificates[0] != '\0' && !certificate)) {
        snprintf(reason, reason_size,
                 "DICOM TLS needs both tls_certificate and tls_private_key "
                 "(tls_ca_certificates only with them)");
        config_problem(state, "dicom", certificate ? "tls_private_key" : "tls_certificate", reason);
    }
    int https = config->http_tls_certificate[0] != '\0';
    if (https != (config->http_tls_private_key[0] != '\0')) {
        snprintf(reason, reason_size, "HTTPS needs both tls_certificate and tls_private_key");
        config_problem(state, "http", https ? "tls_private_key" : "tls_certificate", reason);
    }
    int login = config->http_password_file[0] != '\0';
    if (login && !https) {
        snprintf(reason, reason_size,
                 "a login over plain HTTP would send passwords in clear: set tls_certificate "
                 "and tls_private_key too");
        config_problem(state, "http", "password_file", reason);
    }
    if (!config_address_is_loopback(config->http_address) && !(https && login) &&
        strcmp(config->http_allow_insecure_non_loopback, "yes") != 0) {
        snprintf(reason, reason_size,
                 "%.64s is not a loopback address: set tls_certificate, tls_private_key and "
                 "password_file (HTTPS with a login), or use 127.0.0.1 behind a reverse "
                 "proxy, or set allow_insecure_non_loopback = yes",
                 config->http_address);
        config_problem(state, "http", "address", reason);
    }
    int postgresql = strcmp(config->storage_engine, "postgresql") == 0;
    if (postgresql && config->storage_connection[0] == '\0') {
        snprintf(reason, reason_size,
                 "engine = postgresql needs connection, e.g. 'host=127.0.0.1 port=5432 "
                 "dbname=mitilog user=mitilog'");
        config_problem(state, "storage", "engine", reason);
    }
    /* The connection strings' syntax, by libpq itself (the server is
     * asked only by check-config and at start). */
    const char *connections[][2] = {{"connection", config->storage_connection},
                                    {"read_connection", config->storage_read_connection}};
    for (size_t i = 0; postgresql && i < 2; i++) {
        if (connections[i][1][0] == '\0')
            continue;
        char *message = NULL;
        PQconninfoOption *parsed = PQconninfoParse(connections[i][1], &message);
        if (parsed == NULL) {
            size_t message_length = message != NULL ? strlen(message) : 0;
            while (message_length > 0 && message[message_length - 1] == '\n')
                message_length--;
            snprintf(reason, reason_size,
                     "not a libpq connection string (%.*s); write key=value pairs "
                     "('host=db.example port=5432 dbname=mitilog user=mitilog') or a URI "
                     "('postgresql://mitilog@db.example/mitilog')",
                     (int)(message_length < 200 ? message_length : 200),
                     message != NULL ? message : "");
            config_problem(state, "storage", connections[i][0], reason);
        }
        PQfreemem(message);
        PQconninfoFree(parsed);
    }
    if (!postgresql && config->storage_connection[0] != '\0') {
        snprintf(reason, reason_size,
                 "connection is used only with engine = postgresql (engine is %.32s): set "
                 "engine = postgresql, or remove connection",
                 config->storage_engine);
        config_problem(state, "storage", "connection", reason);
    }
    if (!postgresql && config->storage_read_connection[0] != '\0') {
        snprintf(reason, reason_size,
                 "read_connection is used only with engine = postgresql: set engine = "
                 "postgresql, or remove read_connection");
        config_problem(state, "storage", "read_connection", reason);
    }
    if (strcmp(config->dicomweb_enabled, "yes") == 0 && !login) {
        snprintf(reason, reason_size,
                 "STOW-RS stores objects only for a signed-in sender: set [http] password_file "
                 "(with HTTPS) and add a user with mitilog passwd --role sender");
        config_problem(state, "dicomweb", "enabled", reason);
    }
    const char *url = config->notify_webhook_url;
    if (url[0] != '\0' && strncmp(url, "http://", 7) != 0 && strncmp(url, "https://", 8) != 0) {
        snprintf(reason, reason_size, "the webhook URL must start with https:// (or http://)");
        config_problem(state, "notifications", "webhook_url", reason);
    }
    if (config->http_port == config->port) {
        snprintf(reason, reason_size, "the HTTP port equals the DICOM port %u", config->port);
        config_problem(state, "http", "port", reason);
    }
}

static void config_report(load_state *state, int line, const char *section, const char *key,
                          const char *reason)
{
    if (state->error_line == 0 || line < state->error_line)
        state->error_line = line;
    state->status = MITILOG_ERROR_INVALID;
    if (line > 0)
        mitilog_error_append(state->error, state->status, "%s:%d: [%s] %s: %s", state->path, line,
                             section, key, reason);
    else
        mitilog_error_append(state->error, state->status, "%s: [%s] %s (default): %s", state->path,
                             section, key, reason);
}

/* Every problem of the file is reported, each on its own line. */
static int handle_entry(void *user, const char *section, const char *key, const char *value)
{
    load_state *state = user;
    int line = state->line_number;
    const option *option = option_find(section, key);
    if (option == NULL && section[0] == '\0') {
        char sections[128] = "";
        for (size_t i = 0; i < OPTION_COUNT; i++) {
            if (strcasecmp(options[i].key, key) != 0)
                continue;
            size_t used = strlen(sections);
            snprintf(sections + used, sizeof sections - used, "%s[%s]", used ? " or " : "",
                     options[i].section);
        }
        state->error_line = state->error_line == 0 ? line : state->error_line;
        state->status = MITILOG_ERROR_INVALID;
        if (sections[0] != '\0')
            mitilog_error_append(state->error, state->status,
                                 "%s:%d: %s: this key comes before any [section]; put it under "
                                 "%s",
                                 state->path, line, key, sections);
        else
            mitilog_error_append(state->error, state->status,
                                 "%s:%d: %s: unknown key, and it comes before any [section]",
                                 state->path, line, key);
        return 1;
    }
    if (option == NULL) {
        config_report(state, line, section, key, "unknown key");
        return 1;
    }
    state->lines[option - options] = line;
    char reason[512];
    if (option_assign(state->config, option, value, state->base_directory, reason, sizeof reason) !=
        0)
        config_report(state, line, option->section, option->key, reason);
    return 1;
}

static mitilog_status config_finish(config *config, mitilog_error *error)
{
    /* The database path is relative to the data folder unless absolute. */
    char *database = config_resolve_path(config->data_directory, config->database_path);
    if (database == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    free(config->database_path);
    config->database_path = database;
    return MITILOG_OK;
}

static mitilog_status assign_defaults(config *config, mitilog_error *error)
{
    memset(config, 0, sizeof *config);
    config->source_path = strdup("(defaults)");
    char *base = config_current_directory();
    if (config->source_path == NULL || base == NULL) {
        free(base);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    for (size_t i = 0; i < OPTION_COUNT; i++) {
        char reason[256];
        if (option_assign(config, &options[i], options[i].default_value, base, reason,
                          sizeof reason) != 0) {
            free(base);
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "default of %s: %s",
                                     options[i].key, reason);
        }
    }
    free(base);
    return MITILOG_OK;
}

/* The defaults alone, database path resolved like a loaded file's: the
 * database is var/mitilog.sqlite3, as documented, not ./mitilog.sqlite3. */
mitilog_status config_set_defaults(config *config, mitilog_error *error)
{
    mitilog_status status = assign_defaults(config, error);
    return status == MITILOG_OK ? config_finish(config, error) : status;
}

mitilog_status config_load(const char *path, config *config, mitilog_error *error)
{
    mitilog_status status = assign_defaults(config, error);
    if (status != MITILOG_OK)
        return status;
    FILE *file = fopen(path, "r");
    if (file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", path, strerror(errno));
    load_state state = {
        config, path, config_parent_directory(path), MITILOG_OK, error, {0}, file, 0, 1, 0};
    if (state.base_directory == NULL) {
        fclose(file);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    /* Paths given as defaults are relative to the working directory; those
     * in the file are relative to the file. Re-resolve the defaults of path
     * options against the file's folder so a config is self-contained. */
    for (size_t i = 0; i < OPTION_COUNT; i++) {
        char reason[256];
        if (options[i].is_path && options[i].default_value[0] != '/')
            option_assign(config, &options[i], options[i].default_value, state.base_directory,
                          reason, sizeof reason);
    }
    if (error != NULL)
        error->text[0] = '\0';
    int result = ini_parse_stream(read_line, &state, handle_entry, &state);
    fclose(file);
    if (result > 0) {
        state.status = MITILOG_ERROR_PARSE;
        mitilog_error_append(error, state.status,
                             "%s:%d: syntax error (expected [section] or key = value)", path,
                             result);
    } else if (result < 0) {
        state.status = MITILOG_ERROR_IO;
        mitilog_error_append(error, state.status, "%s: cannot be read", path);
    }
    free(state.base_directory);
    free(config->source_path);
    config->source_path = strdup(path);
    if (config->source_path == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    config_validate(&state);
    if (state.status != MITILOG_OK)
        return state.status;
    return config_finish(config, error);
}

/* A connection string with its password (key=value "password=...", or
 * a URI's "user:password@") replaced by ********, so that printing the
 * effective configuration does not show it. */
static void config_print_connection(FILE *out, const char *key, const char *value)
{
    fprintf(out, "%s = ", key);
    const char *uri_password = NULL;
    if (strncmp(value, "postgresql://", 13) == 0 || strncmp(value, "postgres://", 11) == 0) {
        const char *authority = strstr(value, "://") + 3;
        const char *at = strchr(authority, '@');
        const char *colon = strchr(authority, ':');
        if (at != NULL && colon != NULL && colon < at)
            uri_password = colon;
        if (uri_password != NULL) {
            fprintf(out, "%.*s:********%s\n", (int)(uri_password - value), value, at);
            return;
        }
        fprintf(out, "%s\n", value);
        return;
    }
    const char *p = value;
    while (*p != '\0') {
        if (strncasecmp(p, "password", 8) == 0 && (p == value || p[-1] == ' ' || p[-1] == '\t')) {
            const char *q = p + 8;
            while (*q == ' ')
                q++;
            if (*q == '=') {
                q++;
                while (*q == ' ')
                    q++;
                fprintf(out, "password=********");
                if (*q == '\'') {
                    for (q++; *q != '\0' && *q != '\''; q++)
                        if (*q == '\\' && q[1] != '\0')
                            q++;
                    if (*q == '\'')
                        q++;
                } else {
                    while (*q != '\0' && *q != ' ' && *q != '\t')
                        q++;
                }
                p = q;
                continue;
            }
        }
        fputc(*p++, out);
    }
    fputc('\n', out);
}

void config_print(const config *config, FILE *out)
{
    const char *section = "";
    fprintf(out, "; effective configuration (from %s)\n", config->source_path);
    for (size_t i = 0; i < OPTION_COUNT; i++) {
        const option *option = &options[i];
        if (strcmp(section, option->section) != 0) {
            section = option->section;
            fprintf(out, "\n[%s]\n", section);
        }
        fprintf(out, "; %s\n", option->description);
        struct config *mutable_config = (struct config *)config;
        if (option->type == OPTION_UNSIGNED)
            fprintf(out, "%s = %u\n", option->key, *unsigned_field(mutable_config, option));
        else if (option->offset == offsetof(struct config, storage_connection) ||
                 option->offset == offsetof(struct config, storage_read_connection))
            config_print_connection(out, option->key, *string_field(mutable_config, option));
        else
            fprintf(out, "%s = %s\n", option->key, *string_field(mutable_config, option));
    }
}

void config_free(config *config)
{
    if (config == NULL)
        return;
    for (size_t i = 0; i < OPTION_COUNT; i++) {
        if (options[i].type != OPTION_UNSIGNED) {
            char **field = string_field(config, &options[i]);
            free(*field);
            *field = NULL;
        }
    }
    free(config->source_path);
    config->source_path = NULL;
}

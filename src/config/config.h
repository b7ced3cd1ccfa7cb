/*
 * config.h - the daemon's configuration: one INI file parsed with inih,
 * described by one declarative table (config.c) that parses the file,
 * validates bounds, prints the effective configuration and documents each
 * key. A bad value is reported as "FILE:LINE: [section] key: reason".
 *
 * Ownership: config_load() fills a caller-supplied config whose strings
 * are heap copies; config_free() releases them. Relative paths in the file
 * are resolved against the folder holding the file.
 */
#ifndef MITILOG_CONFIG_H
#define MITILOG_CONFIG_H

#include <stdio.h>

#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct config {
    char *source_path; /* the file loaded, or "(defaults)" */

    /* [dicom] */
    char *ae_title;
    unsigned port;
    char *allowed_calling_ae_titles; /* "AE[@address], ..." or "" = any */
    unsigned max_associations;
    unsigned max_negotiations; /* connections not yet associated */
    unsigned max_negotiations_per_address;
    unsigned acse_timeout_seconds;
    unsigned dimse_timeout_seconds;
    unsigned max_pdu_bytes;
    unsigned max_object_bytes;           /* 0 = no limit */
    unsigned max_memory_in_flight_bytes; /* all objects in memory; 0 = none */
    char *dicom_tls_certificate;         /* "" = plain TCP */
    char *dicom_tls_private_key;
    char *dicom_tls_ca_certificates; /* non-empty: client certificates required */

    /* [http] */
    char *http_address;
    unsigned http_port;
    char *web_root;
    char *http_allow_insecure_non_loopback; /* "yes" or "no" */
    char *http_tls_certificate;             /* PEM; "" = plain HTTP */
    char *http_tls_private_key;             /* PEM */
    char *http_password_file;               /* "user:crypt-hash" lines; "" = no login */
    unsigned http_max_connections;
    unsigned http_max_connections_per_address; /* 0 = no per-address limit */
    unsigned http_request_timeout_seconds;
    unsigned http_refresh_seconds; /* kept documents made again; 0 = off */

    /* [dicomweb] STOW-RS (src/http/http_dicomweb.c) */
    char *dicomweb_enabled; /* "yes" or "no" */
    unsigned dicomweb_max_request_megabytes;
    unsigned dicomweb_max_parts;

    /* [notifications] findings sent out (src/notify) */
    char *notify_severity;        /* advisory, warning or violation */
    char *notify_webhook_url;     /* "" = no webhook */
    char *notify_webhook_ca;      /* PEM CA file; "" = the system's */
    char *notify_syslog;          /* "yes" or "no" */
    char *notify_syslog_facility; /* daemon, user, local0 ... local7 */
    char *notify_syslog_socket;   /* Unix datagram socket, /dev/log */
    char *notify_dashboard_url;   /* base of the exam page links; "" = none */
    unsigned notify_timeout_seconds;
    unsigned notify_retry_initial_seconds;
    unsigned notify_retry_max_seconds;
    unsigned notify_max_attempts;

    /* [storage] */
    char *data_directory;
    char *storage_engine;          /* "sqlite" or "postgresql" */
    char *database_path;           /* SQLite; default: data_directory/mitilog.sqlite3 */
    char *storage_connection;      /* PostgreSQL conninfo (key=value or URI); "" = none */
    char *storage_read_connection; /* PostgreSQL conninfo of the dashboard's reads; "" = same */
    char *retention;               /* "none", "header" or "full" */
    char *durability;              /* "power_loss" or "process" */
    unsigned busy_timeout_ms;
    unsigned sr_depth_limit;       /* SR content tree levels read */
    unsigned quarantine_max_bytes; /* quarantine/ quota; oldest removed */
    unsigned quarantine_max_files;

    /* [reading] the pixel reader's queue (src/ingest/ingest_reading.c) */
    unsigned reading_workers;         /* threads reading frames */
    unsigned reading_queue_objects;   /* objects waiting at most */
    unsigned reading_queue_megabytes; /* their spooled bytes at most */
    unsigned reading_cine_frames;     /* frames of a cine read and compared */

    /* [receiver] */
    char *receiver_site;       /* the site recorded on every object received (exam.h) */
    unsigned exam_settle_ms;   /* an exam is rebuilt this long after its last object */
    unsigned exam_max_wait_ms; /* ... at most this long after its first */

    /* [site] */
    char *site_rules_path;  /* the site file (conf/site.ini); "" = none */
    char *site_institution; /* name printed on reports; "" = not set */

    /* [rules] */
    char *rules_policy_path; /* the ALARA policy file (conf/policy.ini) */

    /* [backfill] `mitilog backfill` (docs/backfill.md); the command line
     * overrides each */
    char *backfill_source;              /* "AE@HOST:PORT" or "" */
    char *backfill_calling_ae_title;    /* "" = [dicom] ae_title */
    char *backfill_retrieve;            /* "get" or "move" */
    char *backfill_move_destination;    /* "" = [dicom] ae_title */
    unsigned backfill_move_listen_port; /* 0 = the daemon receives */
    unsigned backfill_rate_per_minute;  /* objects; 0 = no limit */
    unsigned backfill_concurrency;      /* studies at once */
    char *backfill_window;              /* "HH:MM-HH:MM" local, "" = any time */
    char *backfill_station;             /* Station Name filter, "" = any */
    char *backfill_description;         /* Study Description filter, "" = any */
    unsigned backfill_progress_seconds;
    unsigned backfill_connect_timeout_seconds;

    /* [service] */
    char *service_user; /* "" = keep the starting user */

    /* [log] */
    char *log_level; /* debug, info, warning, error */
} config;

/* Fills config with the built-in defaults. */
mitilog_status config_set_defaults(config *config, mitilog_error *error);

/* Defaults, then the file. */
mitilog_status config_load(const char *path, config *config, mitilog_error *error);

/* Writes the effective configuration as a valid INI file; a password in a
 * PostgreSQL connection string is printed as "********". */
void config_print(const config *config, FILE *out);

void config_free(config *config);

#ifdef __cplusplus
}
#endif

#endif

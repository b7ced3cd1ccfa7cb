/*
 * backfill.h - fetching past studies from a PACS through the ingest
 * pipeline (`mitilog backfill`, docs/backfill.md): C-FIND of the
 * ultrasound studies of a date range, then C-GET (or C-MOVE) of each
 * study not yet done, at a limited rate, inside an optional time window,
 * recording in the database (store_backfill.h) how far each study got so
 * that a stopped or killed run resumes without fetching an object twice.
 *
 * Ownership: the settings' strings are borrowed for backfill_run(); the
 * store and ingest are borrowed (the caller creates and frees them).
 */
#ifndef MITILOG_BACKFILL_H
#define MITILOG_BACKFILL_H

#include <stdio.h>

#include "dicom/dcm_retrieve.h"
#include "ingest/ingest.h"
#include "store/store.h"
#include "util/status.h"

enum { BACKFILL_AE_SIZE = 17, BACKFILL_HOST_SIZE = 256, BACKFILL_CONCURRENCY_MAX = 8 };

typedef struct backfill_settings {
    char source_ae_title[BACKFILL_AE_SIZE];
    char source_host[BACKFILL_HOST_SIZE];
    unsigned source_port;
    const char *calling_ae_title;
    dcm_retrieve_method method;
    const char *move_destination; /* C-MOVE destination AE title */
    unsigned move_listen_port;    /* 0: the daemon receives moved objects */
    unsigned dicom_max_pdu;       /* PDU size of the listener and association */
    /* the listener's limits, as [dicom]'s for the daemon (0 = none) */
    unsigned long long max_object_bytes;
    unsigned long long max_memory_in_flight_bytes;
    unsigned dimse_timeout_seconds;
    unsigned connect_timeout_seconds;
    char date_from[9]; /* YYYYMMDD */
    char date_to[9];
    const char *station;      /* "" = any */
    const char *description;  /* "" = any */
    unsigned rate_per_minute; /* objects, 0 = no limit */
    unsigned concurrency;
    int window_start_minute; /* minutes after local midnight; -1 no window */
    int window_end_minute;
    char window_text[16];
    unsigned progress_seconds;
} backfill_settings;

/* "AE@HOST:PORT" into the settings; a plain-words error otherwise. */
mitilog_status backfill_parse_source(const char *text, backfill_settings *settings,
                                     mitilog_error *error);
/* "HH:MM-HH:MM" (may cross midnight; "" = no window). */
mitilog_status backfill_parse_window(const char *text, backfill_settings *settings,
                                     mitilog_error *error);
/* YYYY-MM-DD or YYYYMMDD into out (YYYYMMDD). */
mitilog_status backfill_parse_date(const char *text, char out[9], mitilog_error *error);

/* Seconds from now (local time, minutes since midnight now_minute) until
 * the window opens; 0 when inside it (or no window). */
long backfill_window_wait_seconds(int start_minute, int end_minute, int now_minute);

typedef struct backfill_totals {
    long studies_found, studies_done, studies_failed, studies_already_done;
    long objects_stored, objects_failed, objects_skipped;
} backfill_totals;

/* Runs the backfill to the end, printing progress lines to terminal.
 * Returns an error when the PACS cannot be queried at all (unreachable,
 * refusing, a C-FIND failure); studies that fail are counted in totals
 * (and retried by the next run). */
mitilog_status backfill_run(const backfill_settings *settings, store *store, ingest *pipeline,
                            FILE *terminal, backfill_totals *totals, mitilog_error *error);

#endif

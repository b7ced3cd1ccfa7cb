/*
 * backfill.c - `mitilog backfill` (backfill.h): the study list, the
 * workers (one association each), the gentle parts (rate, window) and
 * the progress line.
 *
 * Resuming: a study is "done" only once its objects have committed and
 * its exam has been rebuilt. A study found again that is not done, and
 * has instances stored already (an earlier run was stopped inside it, or
 * the PACS had forwarded some of it), is listed instance by instance
 * (C-FIND at SERIES then IMAGE level) and only the instances not stored
 * are fetched: nothing is fetched twice. An object fetched again anyway
 * (stopped after its commit, before its C-STORE answer) replaces its
 * row under the store's own rule, never duplicates it.
 */
#include "backfill/backfill.h"

#include <ctype.h>
#include <errno.h>
#include <fnmatch.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "dicom/dcm.h"
#include "store/store_backfill.h"
#include "util/log.h"

/* ---- parsing ------------------------------------------------------------ */

mitilog_status backfill_parse_source(const char *text, backfill_settings *settings,
                                     mitilog_error *error)
{
    const char *at = text != NULL ? strchr(text, '@') : NULL;
    const char *colon = at != NULL ? strrchr(at, ':') : NULL;
    if (at == NULL || colon == NULL || at == text || colon == at + 1)
        return mitilog_error_set(
            error, MITILOG_ERROR_INVALID,
            "PACS '%s' is not AE@HOST:PORT (e.g. ARCHIVE@pacs.example.org:104)",
            text != NULL ? text : "");
    size_t ae_length = (size_t)(at - text);
    size_t host_length = (size_t)(colon - at - 1);
    if (ae_length >= BACKFILL_AE_SIZE)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "PACS AE title '%.*s' is longer than 16 characters",
                                 (int)ae_length, text);
    if (host_length >= BACKFILL_HOST_SIZE)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "PACS host name is too long");
    char *end = NULL;
    errno = 0;
    unsigned long port = strtoul(colon + 1, &end, 10);
    if (colon[1] == '\0' || *end != '\0' || errno != 0 || port < 1 || port > 65535)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "PACS port '%s' is not a number from 1 to 65535", colon + 1);
    memcpy(settings->source_ae_title, text, ae_length);
    settings->source_ae_title[ae_length] = '\0';
    memcpy(settings->source_host, at + 1, host_length);
    settings->source_host[host_length] = '\0';
    settings->source_port = (unsigned)port;
    return MITILOG_OK;
}

/* "HH:MM" into minutes after midnight, or -1. */
static int backfill_parse_clock(const char *text, size_t length)
{
    if (length != 5 || !isdigit((unsigned char)text[0]) || !isdigit((unsigned char)text[1]) ||
        text[2] != ':' || !isdigit((unsigned char)text[3]) || !isdigit((unsigned char)text[4]))
        return -1;
    int hours = (text[0] - '0') * 10 + (text[1] - '0');
    int minutes = (text[3] - '0') * 10 + (text[4] - '0');
    if (hours > 23 || minutes > 59)
        return -1;
    return hours * 60 + minutes;
}

mitilog_status backfill_parse_window(const char *text, backfill_settings *settings,
                                     mitilog_error *error)
{
    settings->window_start_minute = settings->window_end_minute = -1;
    settings->window_text[0] = '\0';
    if (text == NULL || text[0] == '\0')
        return MITILOG_OK;
    const char *dash = strchr(text, '-');
    int start = dash != NULL ? backfill_parse_clock(text, (size_t)(dash - text)) : -1;
    int end = dash != NULL ? backfill_parse_clock(dash + 1, strlen(dash + 1)) : -1;
    if (start < 0 || end < 0 || start == end)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "time window '%s' is not HH:MM-HH:MM with two different times "
                                 "(e.g. 20:00-06:00 for nights)",
                                 text);
    settings->window_start_minute = start;
    settings->window_end_minute = end;
    snprintf(settings->window_text, sizeof settings->window_text, "%s", text);
    return MITILOG_OK;
}

mitilog_status backfill_parse_date(const char *text, char out[9], mitilog_error *error)
{
    char digits[9];
    size_t n = 0;
    for (const char *p = text; p != NULL && *p != '\0'; p++) {
        if (isdigit((unsigned char)*p) && n < 8)
            digits[n++] = *p;
        else if (*p != '-' || n > 8)
            n = 99;
    }
    struct tm check = {0};
    if (n == 8) {
        digits[8] = '\0';
        check.tm_year = atoi((char[5]){digits[0], digits[1], digits[2], digits[3], 0}) - 1900;
        check.tm_mon = atoi((char[3]){digits[4], digits[5], 0}) - 1;
        check.tm_mday = atoi((char[3]){digits[6], digits[7], 0});
        check.tm_hour = 12;
        int month = check.tm_mon, day = check.tm_mday;
        if (timegm(&check) != (time_t)-1 && check.tm_mon == month && check.tm_mday == day) {
            memcpy(out, digits, 9);
            return MITILOG_OK;
        }
    }
    return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                             "date '%s' is not a date as YYYY-MM-DD (or YYYYMMDD)",
                             text != NULL ? text : "");
}

long backfill_window_wait_seconds(int start_minute, int end_minute, int now_minute)
{
    if (start_minute < 0 || end_minute < 0)
        return 0;
    int inside = start_minute < end_minute ? now_minute >= start_minute && now_minute < end_minute
                                           : now_minute >= start_minute || now_minute < end_minute;
    if (inside)
        return 0;
    int minutes = start_minute - now_minute;
    if (minutes < 0)
        minutes += 24 * 60;
    return (long)minutes * 60;
}

/* ---- the run ------------------------------------------------------------ */

typedef struct backfill_run_state {
    const backfill_settings *settings;
    store *store;
    ingest *pipeline;
    FILE *terminal;
    char source[BACKFILL_AE_SIZE + BACKFILL_HOST_SIZE + 96];
    long long run_id;

    pthread_mutex_t lock;
    pthread_cond_t changed;
    dcm_study_match *studies; /* the studies to do, in the PACS's order */
    size_t study_count;
    size_t next_study;
    backfill_totals totals;                   /* under lock */
    long objects_this_run;                    /* under lock */
    long studies_this_run;                    /* done or failed in this run, under lock */
    double started;                           /* monotonic seconds */
    double waiting_since;                     /* > 0 while waiting for the window */
    double waited;                            /* seconds spent outside the window */
    double next_slot;                         /* rate limit: when the next object may come */
    int finished;                             /* the progress thread stops */
    char error_text[MITILOG_ERROR_TEXT_SIZE]; /* first association error */
} backfill_run_state;

typedef struct backfill_worker {
    backfill_run_state *run;
    unsigned index;
    dcm_association *association;
    /* this study's objects as handled here (C-GET, listener) */
    long stored, failed, skipped;
    int reconnect; /* the association failed: open another */
} backfill_worker;

static double backfill_clock(void)
{
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    return (double)now.tv_sec + (double)now.tv_nsec / 1e9;
}

static void backfill_sleep(double seconds)
{
    if (seconds <= 0)
        return;
    struct timespec wait = {(time_t)seconds, (long)((seconds - (double)(time_t)seconds) * 1e9)};
    while (nanosleep(&wait, &wait) != 0 && errno == EINTR) {
    }
}

/* Waits for the object's turn under the rate limit (all workers share
 * it: the PACS sees at most rate_per_minute objects a minute). */
static void backfill_pace(backfill_run_state *run)
{
    unsigned rate = run->settings->rate_per_minute;
    if (rate == 0)
        return;
    pthread_mutex_lock(&run->lock);
    double now = backfill_clock();
    double slot = run->next_slot > now ? run->next_slot : now;
    run->next_slot = slot + 60.0 / rate;
    pthread_mutex_unlock(&run->lock);
    backfill_sleep(slot - now);
}

/* DICOM matching of a single value with wildcards * and ? (PS3.4
 * C.2.2.2.4), on the value without its padding. */
static int backfill_matches(const char *pattern, const char *value)
{
    if (pattern == NULL || pattern[0] == '\0')
        return 1;
    if (value == NULL)
        return 0;
    char trimmed[256];
    snprintf(trimmed, sizeof trimmed, "%s", value);
    size_t n = strlen(trimmed);
    while (n > 0 && trimmed[n - 1] == ' ')
        trimmed[--n] = '\0';
    const char *start = trimmed;
    while (*start == ' ')
        start++;
    return fnmatch(pattern, start, FNM_NOESCAPE) == 0;
}

/* Counts what ingest did with one object and gives the C-STORE status. */
static uint16_t backfill_count(backfill_run_state *run, backfill_worker *worker,
                               ingest_outcome outcome)
{
    uint16_t status = DCM_STATUS_OUT_OF_RESOURCES;
    int stored = 0;
    switch (outcome) {
    case INGEST_OUTCOME_STORED:
    case INGEST_OUTCOME_REPLACED:
        status = DCM_STATUS_SUCCESS;
        stored = 1;
        break;
    case INGEST_OUTCOME_REJECTED: status = DCM_STATUS_CANNOT_UNDERSTAND; break;
    case INGEST_OUTCOME_MISMATCHED: status = DCM_STATUS_DATA_SET_MISMATCH; break;
    case INGEST_OUTCOME_NOT_STORED: break;
    }
    pthread_mutex_lock(&run->lock);
    run->objects_this_run++;
    if (stored)
        run->totals.objects_stored++;
    else
        run->totals.objects_failed++;
    pthread_mutex_unlock(&run->lock);
    if (worker != NULL) {
        if (stored)
            worker->stored++;
        else
            worker->failed++;
    }
    return status;
}

/* Whether the object in the file at path belongs to the station filter:
 * its Station Name as extraction reads it (UTF-8 after Specific
 * Character Set), so that a pattern matches what the dashboard shows. An
 * object that cannot be read is kept (the ingest then says why). */
static int backfill_station_kept(const backfill_run_state *run, const char *path)
{
    if (run->settings->station[0] == '\0')
        return 1;
    dcm_object *loaded = NULL;
    dcm_facts facts;
    memset(&facts, 0, sizeof facts);
    mitilog_error error;
    int keep = 1;
    if (dcm_object_load(path, &loaded, &error) == MITILOG_OK &&
        dcm_object_facts(loaded, 1, &facts, &error) == MITILOG_OK) {
        const char *station = facts.values[DCM_ATTRIBUTE_STATION_NAME];
        keep = backfill_matches(run->settings->station, station != NULL ? station : "");
    }
    dcm_facts_free(&facts);
    dcm_object_free(loaded);
    return keep;
}

/* Objects of a C-GET (dcm_retrieved_handler): the same pipeline as a
 * received object. An object of another station is answered Success and
 * not kept (the filter the user asked for). */
static uint16_t backfill_on_retrieved(void *context, const dcm_retrieved *object)
{
    backfill_worker *worker = context;
    backfill_run_state *run = worker->run;
    if (!backfill_station_kept(run, object->spool_path)) {
        worker->skipped++;
        pthread_mutex_lock(&run->lock);
        run->totals.objects_skipped++;
        pthread_mutex_unlock(&run->lock);
        backfill_pace(run); /* not kept, but sent by the PACS all the same */
        return DCM_STATUS_SUCCESS;
    }
    ingest_source source = {object->spool_path,
                            1,
                            run->settings->source_ae_title,
                            run->settings->source_host,
                            object->sop_class_uid,
                            object->sop_instance_uid,
                            worker->index + 1,
                            NULL};
    mitilog_error reason;
    uint16_t status = backfill_count(run, worker, ingest_object(run->pipeline, &source, &reason));
    /* The wait comes after the commit, before the answer: the PACS sends
     * the next object only then, and a run stopped while it waits has
     * committed every object the PACS sent. */
    backfill_pace(run);
    return status;
}

/* Objects of a C-MOVE to the command's own listener (dcm_store_handler). */
static uint16_t backfill_on_moved(void *context, const dcm_received *object)
{
    backfill_run_state *run = context;
    if (!backfill_station_kept(run, object->spool_path)) {
        pthread_mutex_lock(&run->lock);
        run->totals.objects_skipped++;
        pthread_mutex_unlock(&run->lock);
        backfill_pace(run);
        return DCM_STATUS_SUCCESS;
    }
    mitilog_error reason;
    ingest_source source = {object->spool_path,
                            1,
                            object->calling_ae_title ? object->calling_ae_title : "",
                            object->peer_address ? object->peer_address : "",
                            object->affected_sop_class_uid ? object->affected_sop_class_uid : "",
                            object->affected_sop_instance_uid ? object->affected_sop_instance_uid
                                                              : "",
                            object->association_id,
                            NULL};
    uint16_t status = backfill_count(run, NULL, ingest_object(run->pipeline, &source, &reason));
    backfill_pace(run); /* after the commit, as for C-GET */
    return status;
}

/* ---- progress ----------------------------------------------------------- */

static void backfill_progress_locked(backfill_run_state *run, store_backfill_progress *progress,
                                     char *line, size_t size)
{
    double now = backfill_clock();
    double waited = run->waited + (run->waiting_since > 0 ? now - run->waiting_since : 0);
    double active = now - run->started - waited;
    long to_do = (long)run->study_count;
    long done = run->totals.studies_done + run->totals.studies_already_done;
    progress->studies_found = run->totals.studies_found;
    progress->studies_done = done;
    progress->studies_failed = run->totals.studies_failed;
    progress->objects = run->totals.objects_stored;
    progress->objects_per_minute = active >= 1.0 ? run->objects_this_run * 60.0 / active : -1;
    long remaining = to_do - run->studies_this_run;
    progress->seconds_left = run->studies_this_run > 0 && remaining >= 0
                                 ? (long)(active / run->studies_this_run * remaining + 0.5)
                                 : -1;
    char rate[48] = "rate not known yet";
    if (progress->objects_per_minute >= 0)
        snprintf(rate, sizeof rate, "%.1f objects/min", progress->objects_per_minute);
    char left[48] = "time left not known yet";
    if (progress->finished) {
        snprintf(left, sizeof left, "in %.0f s", now - run->started);
    } else if (progress->seconds_left >= 0) {
        long s = progress->seconds_left;
        if (s < 120)
            snprintf(left, sizeof left, "about %ld s left", s);
        else if (s < 2 * 3600)
            snprintf(left, sizeof left, "about %ld min left", (s + 30) / 60);
        else
            snprintf(left, sizeof left, "about %.1f h left", s / 3600.0);
    }
    if (run->waiting_since > 0)
        snprintf(line, size, "backfill %s: %s (%ld/%ld studies done, %ld objects)", run->source,
                 progress->message, done, progress->studies_found, progress->objects);
    else
        snprintf(line, size,
                 "backfill %s: %s%s%ld/%ld studies done, %ld failed, %ld objects, %s, %s",
                 run->source, progress->message, progress->message[0] != '\0' ? "; " : "", done,
                 progress->studies_found, progress->studies_failed, progress->objects, rate, left);
}

/* Records the progress for the ingest status, then prints its line (so
 * that what the terminal says is already in the database). */
static void backfill_report(backfill_run_state *run, const char *state, const char *message,
                            int finished)
{
    store_backfill_progress progress = {state, message, 0, 0, 0, 0, -1, -1, finished};
    char line[1024];
    pthread_mutex_lock(&run->lock);
    backfill_progress_locked(run, &progress, line, sizeof line);
    pthread_mutex_unlock(&run->lock);
    mitilog_error error;
    if (run->run_id > 0 &&
        store_backfill_run_update(run->store, run->run_id, &progress, &error) != MITILOG_OK)
        log_warning("backfill: progress not recorded: %s", error.text);
    fprintf(run->terminal, "%s\n", line);
    fflush(run->terminal);
}

static void *backfill_progress_thread(void *argument)
{
    backfill_run_state *run = argument;
    pthread_mutex_lock(&run->lock);
    while (!run->finished) {
        struct timespec until;
        clock_gettime(CLOCK_REALTIME, &until);
        until.tv_sec += run->settings->progress_seconds;
        while (!run->finished &&
               pthread_cond_timedwait(&run->changed, &run->lock, &until) != ETIMEDOUT) {
        }
        if (run->finished)
            break;
        int waiting = run->waiting_since > 0;
        pthread_mutex_unlock(&run->lock);
        char message[160] = "";
        if (waiting)
            snprintf(message, sizeof message,
                     "outside the backfill window %s (local time): waiting",
                     run->settings->window_text);
        backfill_report(run, waiting ? "waiting" : "running", message, 0);
        pthread_mutex_lock(&run->lock);
    }
    pthread_mutex_unlock(&run->lock);
    return NULL;
}

/* Waits until the time window is open (at once without a window). The
 * first worker to wait says so on the terminal. */
static void backfill_wait_window(backfill_run_state *run)
{
    const backfill_settings *s = run->settings;
    for (;;) {
        time_t now = time(NULL);
        struct tm local;
        localtime_r(&now, &local);
        long wait = backfill_window_wait_seconds(s->window_start_minute, s->window_end_minute,
                                                 local.tm_hour * 60 + local.tm_min);
        if (wait > 0)
            wait -= local.tm_sec;
        pthread_mutex_lock(&run->lock);
        if (wait <= 0) {
            if (run->waiting_since > 0) {
                run->waited += backfill_clock() - run->waiting_since;
                run->waiting_since = 0;
            }
            pthread_mutex_unlock(&run->lock);
            return;
        }
        int first = run->waiting_since == 0;
        if (first)
            run->waiting_since = backfill_clock();
        pthread_mutex_unlock(&run->lock);
        if (first) {
            char message[200];
            snprintf(message, sizeof message,
                     "outside the backfill window %s (local time): waiting until %02d:%02d",
                     s->window_text, s->window_start_minute / 60, s->window_start_minute % 60);
            backfill_report(run, "waiting", message, 0);
        }
        backfill_sleep(wait < 30 ? (double)wait : 30.0);
    }
}

/* ---- one study ---------------------------------------------------------- */

static dcm_peer backfill_peer(const backfill_settings *s)
{
    dcm_peer peer = {s->calling_ae_title, s->source_ae_title,         s->source_host,
                     s->source_port,      s->connect_timeout_seconds, s->dimse_timeout_seconds,
                     s->dicom_max_pdu};
    return peer;
}

static mitilog_status backfill_retrieve(backfill_worker *worker, const char *study,
                                        const char *series, const char *instance,
                                        dcm_retrieve_result *result, mitilog_error *error)
{
    const backfill_settings *s = worker->run->settings;
    if (s->method == DCM_RETRIEVE_GET)
        return dcm_association_get(worker->association, study, series, instance, result, error);
    return dcm_association_move(worker->association, s->move_destination, study, series, instance,
                                result, error);
}

/* A final status that ends the retrieve well: Success, or Warning
 * (some sub-operations failed: counted apart), PS3.4 C.4.3.1.4. */
static int backfill_status_ok(uint16_t status) { return status == 0x0000 || status == 0xB000; }

/* The association failed during a study: the study fails with the
 * reason, the worker opens a new association for the next one. */
static mitilog_status backfill_lost(backfill_worker *worker, int *ok, char *message,
                                    size_t message_size, const mitilog_error *error)
{
    *ok = 0;
    worker->reconnect = 1;
    snprintf(message, message_size, "%s", error->text);
    for (char *c = message; *c != '\0'; c++)
        if (*c == '\n' || *c == '\r')
            *c = ' '; /* DCMTK's texts span lines; a message is one */
    return MITILOG_OK;
}

/* Fetches what of study is not stored yet; fills counts and message. An
 * association that fails (lost, timed out, a stream the PACS broke)
 * makes the study fail with the reason in message and sets
 * worker->reconnect; what is returned is a database error. */
static mitilog_status backfill_study(backfill_worker *worker, const dcm_study_match *study, int *ok,
                                     long *pacs_completed, long *pacs_failed, long *already,
                                     char *message, size_t message_size, mitilog_error *error)
{
    backfill_run_state *run = worker->run;
    const char *uid = study->study_instance_uid;
    *ok = 1;
    *pacs_completed = *pacs_failed = *already = 0;
    message[0] = '\0';
    long stored_before = 0;
    mitilog_status status = store_backfill_study_instances(run->store, uid, &stored_before, error);
    if (status != MITILOG_OK)
        return status;
    dcm_retrieve_result result;
    if (stored_before == 0) {
        status = backfill_retrieve(worker, uid, NULL, NULL, &result, error);
        if (status != MITILOG_OK)
            return backfill_lost(worker, ok, message, message_size, error);
        *pacs_completed = result.completed > 0 ? result.completed : 0;
        *pacs_failed = result.failed > 0 ? result.failed : 0;
        if (!backfill_status_ok(result.status)) {
            *ok = 0;
            snprintf(message, message_size, "the PACS ended the %s with status 0x%04X (%s)",
                     run->settings->method == DCM_RETRIEVE_GET ? "C-GET" : "C-MOVE", result.status,
                     result.status_text);
        }
        return MITILOG_OK;
    }
    /* Some of it is here already: list the instances, fetch the others. */
    dcm_instance_match *instances = NULL;
    size_t count = 0;
    status = dcm_association_find_instances(worker->association, uid, &instances, &count, error);
    if (status != MITILOG_OK)
        return backfill_lost(worker, ok, message, message_size, error);
    long missing = 0;
    for (size_t i = 0; status == MITILOG_OK && i < count; i++) {
        int known = 0;
        status =
            store_backfill_instance_known(run->store, instances[i].sop_instance_uid, &known, error);
        if (status != MITILOG_OK)
            break;
        if (known) {
            (*already)++;
            continue;
        }
        missing++;
        status = backfill_retrieve(worker, uid, instances[i].series_instance_uid,
                                   instances[i].sop_instance_uid, &result, error);
        if (status != MITILOG_OK) {
            status = backfill_lost(worker, ok, message, message_size, error);
            missing = -1; /* not all there: no rebuild of its own */
            break;
        }
        *pacs_completed += result.completed > 0 ? result.completed : 0;
        *pacs_failed += result.failed > 0 ? result.failed : 0;
        if (!backfill_status_ok(result.status) && *ok) {
            *ok = 0;
            snprintf(message, message_size,
                     "the PACS ended the %s of instance %s with status 0x%04X (%s)",
                     run->settings->method == DCM_RETRIEVE_GET ? "C-GET" : "C-MOVE",
                     instances[i].sop_instance_uid, result.status, result.status_text);
        }
    }
    dcm_instance_matches_free(instances, count);
    if (status == MITILOG_OK && missing == 0)
        /* All there: the exam is rebuilt in case the earlier run stopped
         * before it was. */
        ingest_mark_study(run->pipeline, uid);
    return status;
}

/* Runs one study from its state to done or failed. An association error
 * leaves it "retrieving" for the next attempt and is returned. */
static mitilog_status backfill_one(backfill_worker *worker, const dcm_study_match *study,
                                   mitilog_error *error)
{
    backfill_run_state *run = worker->run;
    const char *uid = study->study_instance_uid;
    char state[16];
    mitilog_status status = store_backfill_state(run->store, run->source, uid, state, error);
    if (status != MITILOG_OK)
        return status;
    if (strcmp(state, "done") == 0) {
        pthread_mutex_lock(&run->lock);
        run->totals.studies_already_done++;
        run->studies_this_run++;
        pthread_mutex_unlock(&run->lock);
        return MITILOG_OK;
    }
    status = store_backfill_start(run->store, run->source, uid, error);
    if (status != MITILOG_OK)
        return status;
    worker->stored = worker->failed = worker->skipped = 0;
    int ok = 1;
    long completed = 0, pacs_failed = 0, already = 0;
    char message[MITILOG_ERROR_TEXT_SIZE + 400];
    status = backfill_study(worker, study, &ok, &completed, &pacs_failed, &already, message,
                            sizeof message, error);
    if (status != MITILOG_OK)
        return status;
    /* The study's objects are committed; its exam is rebuilt before the
     * study counts as done. */
    ingest_flush(run->pipeline);
    long stored, failed;
    if (run->settings->method == DCM_RETRIEVE_GET) {
        stored = worker->stored;
        failed = pacs_failed > worker->failed ? pacs_failed : worker->failed;
    } else {
        stored = completed;
        failed = pacs_failed;
        if (run->settings->move_listen_port == 0)
            /* The daemon received them: the rate holds between studies. */
            for (long i = 0; i < completed; i++)
                backfill_pace(run);
    }
    if (failed > 0 && ok) {
        ok = 0;
        snprintf(message, sizeof message,
                 "%ld object(s) not stored (%ld the PACS could not send, %ld mitilog could not "
                 "store: see the log and the rejections on the ingest status page)",
                 failed, pacs_failed > worker->failed ? pacs_failed - worker->failed : 0,
                 worker->failed);
    }
    status = store_backfill_finish(run->store, run->source, uid, ok ? "done" : "failed", stored,
                                   failed, already + worker->skipped, message, error);
    pthread_mutex_lock(&run->lock);
    if (ok)
        run->totals.studies_done++;
    else
        run->totals.studies_failed++;
    run->studies_this_run++;
    if (run->settings->method == DCM_RETRIEVE_MOVE && run->settings->move_listen_port == 0) {
        run->totals.objects_stored += completed;
        run->objects_this_run += completed;
    }
    pthread_mutex_unlock(&run->lock);
    if (!ok)
        log_warning("backfill: study %s failed: %s; the next run retries it", uid, message);
    return status;
}

static void *backfill_worker_thread(void *argument)
{
    backfill_worker *worker = argument;
    backfill_run_state *run = worker->run;
    dcm_peer peer = backfill_peer(run->settings);
    for (;;) {
        pthread_mutex_lock(&run->lock);
        int stop = run->next_study >= run->study_count || run->error_text[0] != '\0';
        size_t index = run->next_study;
        if (!stop)
            run->next_study++;
        pthread_mutex_unlock(&run->lock);
        if (stop)
            break;
        backfill_wait_window(run);
        mitilog_error error;
        mitilog_status status = MITILOG_OK;
        if (worker->association == NULL)
            status = dcm_association_open(
                &peer, run->settings->method,
                run->settings->method == DCM_RETRIEVE_GET ? backfill_on_retrieved : NULL, worker,
                &worker->association, &error);
        if (status == MITILOG_OK)
            status = backfill_one(worker, &run->studies[index], &error);
        if (status == MITILOG_OK && worker->reconnect) {
            dcm_association_close(worker->association);
            worker->association = NULL;
            worker->reconnect = 0;
        }
        if (status != MITILOG_OK) {
            /* The association (or the database) failed: stop here; the
             * study stays as it is for the next run. */
            dcm_association_close(worker->association);
            worker->association = NULL;
            pthread_mutex_lock(&run->lock);
            if (run->error_text[0] == '\0')
                snprintf(run->error_text, sizeof run->error_text, "%s", error.text);
            pthread_mutex_unlock(&run->lock);
            break;
        }
    }
    dcm_association_close(worker->association);
    worker->association = NULL;
    return NULL;
}

/* Frees a match's strings and leaves it empty (uid NULL). */
static void backfill_drop(dcm_study_match *match)
{
    free(match->study_instance_uid);
    free(match->study_date);
    free(match->accession_number);
    free(match->study_description);
    free(match->modalities_in_study);
    memset(match, 0, sizeof *match);
}

/* Moves the matches still holding a study to the front; *count. */
static void backfill_compact(dcm_study_match *matches, size_t *count)
{
    size_t kept = 0;
    for (size_t i = 0; i < *count; i++)
        if (matches[i].study_instance_uid != NULL)
            matches[kept++] = matches[i];
    *count = kept;
}

/* Keeps the studies the query asked for: modality US (asked at series
 * level when the PACS does not return Modalities in Study) and the
 * description (when the PACS ignored it as a matching key). */
static mitilog_status backfill_select(backfill_run_state *run, dcm_association *association,
                                      dcm_study_match *matches, size_t *count, mitilog_error *error)
{
    mitilog_status status = MITILOG_OK;
    for (size_t i = 0; status == MITILOG_OK && i < *count; i++) {
        dcm_study_match *m = &matches[i];
        int keep = m->study_instance_uid != NULL && m->study_instance_uid[0] != '\0';
        if (keep && m->study_description != NULL)
            keep = backfill_matches(run->settings->description, m->study_description);
        if (keep) {
            char *series_modalities = NULL;
            const char *modalities = m->modalities_in_study;
            char state[16] = "";
            if (modalities == NULL || modalities[0] == '\0')
                /* a study done by an earlier run was an ultrasound study:
                 * the PACS is not asked again */
                status = store_backfill_state(run->store, run->source, m->study_instance_uid, state,
                                              error);
            if (status == MITILOG_OK && strcmp(state, "done") == 0) {
                modalities = "US";
            } else if (status == MITILOG_OK && (modalities == NULL || modalities[0] == '\0')) {
                status = dcm_association_study_modalities(association, m->study_instance_uid,
                                                          &series_modalities, error);
                modalities = series_modalities != NULL ? series_modalities : "";
            }
            char wrapped[512];
            snprintf(wrapped, sizeof wrapped, "\\%s\\", modalities);
            keep = status == MITILOG_OK && strstr(wrapped, "\\US\\") != NULL;
            free(series_modalities);
        }
        if (!keep)
            backfill_drop(m);
    }
    backfill_compact(matches, count);
    return status;
}

/* C-FIND, selection, and a row per study found. */
static mitilog_status backfill_find(backfill_run_state *run, mitilog_error *error)
{
    const backfill_settings *s = run->settings;
    dcm_peer peer = backfill_peer(s);
    dcm_association *association = NULL;
    mitilog_status status = dcm_association_open(&peer, s->method, NULL, NULL, &association, error);
    if (status != MITILOG_OK)
        return status;
    dcm_study_query query = {s->date_from, s->date_to, "US", s->description};
    dcm_study_match *matches = NULL;
    size_t count = 0;
    status = dcm_association_find_studies(association, &query, &matches, &count, error);
    if (status == MITILOG_OK)
        status = backfill_select(run, association, matches, &count, error);
    dcm_association_close(association);
    /* Recorded once; the studies done by an earlier run leave the list. */
    long already = 0;
    for (size_t i = 0; status == MITILOG_OK && i < count; i++) {
        store_backfill_study study = {run->source,
                                      matches[i].study_instance_uid,
                                      matches[i].study_date,
                                      matches[i].accession_number,
                                      matches[i].study_description,
                                      matches[i].instance_count};
        char state[16] = "";
        status = store_backfill_found(run->store, &study, error);
        if (status == MITILOG_OK)
            status = store_backfill_state(run->store, run->source, matches[i].study_instance_uid,
                                          state, error);
        if (status == MITILOG_OK && strcmp(state, "done") == 0) {
            already++;
            backfill_drop(&matches[i]);
        }
    }
    size_t found = count;
    backfill_compact(matches, &count);
    if (status != MITILOG_OK) {
        dcm_study_matches_free(matches, count);
        return status;
    }
    pthread_mutex_lock(&run->lock); /* the progress thread reads them */
    run->studies = matches;
    run->study_count = count;
    run->totals.studies_found = (long)found;
    run->totals.studies_already_done = already;
    pthread_mutex_unlock(&run->lock);
    return MITILOG_OK;
}

mitilog_status backfill_run(const backfill_settings *settings, store *store, ingest *pipeline,
                            FILE *terminal, backfill_totals *totals, mitilog_error *error)
{
    backfill_run_state run;
    memset(&run, 0, sizeof run);
    memset(totals, 0, sizeof *totals);
    run.settings = settings;
    run.store = store;
    run.pipeline = pipeline;
    run.terminal = terminal;
    /* A study done with a station filter is not done for a run without
     * it (its other objects are still to fetch): the filter is part of
     * the source its rows are recorded under. */
    snprintf(run.source, sizeof run.source, "%s@%s:%u%s%.64s", settings->source_ae_title,
             settings->source_host, settings->source_port,
             settings->station[0] != '\0' ? " station=" : "", settings->station);
    pthread_mutex_init(&run.lock, NULL);
    pthread_condattr_t attributes;
    pthread_condattr_init(&attributes);
    pthread_cond_init(&run.changed, &attributes);
    pthread_condattr_destroy(&attributes);
    run.started = backfill_clock();

    dcm_server *listener = NULL;
    pthread_t progress_thread;
    int progress_started = 0;
    backfill_worker workers[BACKFILL_CONCURRENCY_MAX];
    pthread_t threads[BACKFILL_CONCURRENCY_MAX];
    unsigned started = 0;
    mitilog_status status = store_backfill_run_begin(store, run.source, &run.run_id, error);
    if (status == MITILOG_OK &&
        pthread_create(&progress_thread, NULL, backfill_progress_thread, &run) == 0)
        progress_started = 1;
    if (status == MITILOG_OK && settings->method == DCM_RETRIEVE_MOVE &&
        settings->move_listen_port != 0) {
        dcm_allowed_peer allowed = {settings->source_ae_title, NULL};
        dcm_server_settings server = {0};
        server.ae_title = settings->move_destination;
        server.port = settings->move_listen_port;
        server.allowed_peers = &allowed;
        server.allowed_peer_count = 1;
        server.max_associations = settings->concurrency + 1;
        server.acse_timeout_seconds = settings->connect_timeout_seconds;
        server.dimse_timeout_seconds = settings->dimse_timeout_seconds;
        server.max_pdu = settings->dicom_max_pdu;
        server.max_object_bytes = settings->max_object_bytes;
        server.max_memory_in_flight_bytes = settings->max_memory_in_flight_bytes;
        status = dcm_server_create(&server, backfill_on_moved, &run, &listener, error);
        if (status == MITILOG_OK)
            status = dcm_server_start(listener, error);
        if (status != MITILOG_OK)
            mitilog_error_set(error, status,
                              "cannot listen for the moved objects on port %u: %s (choose "
                              "another --move-listen-port)",
                              settings->move_listen_port, error->text);
    }
    if (status == MITILOG_OK) {
        /* Nothing is asked of the PACS outside the window, not even the
         * query. */
        backfill_wait_window(&run);
        status = backfill_find(&run, error);
    }
    if (status == MITILOG_OK) {
        char line[200];
        snprintf(line, sizeof line,
                 "found %ld ultrasound stud%s from %s to %s, %ld done by an earlier run",
                 run.totals.studies_found, run.totals.studies_found == 1 ? "y" : "ies",
                 settings->date_from, settings->date_to, run.totals.studies_already_done);
        backfill_report(&run, "running", line, 0);
        unsigned wanted = settings->concurrency < 1 ? 1 : settings->concurrency;
        if (wanted > BACKFILL_CONCURRENCY_MAX)
            wanted = BACKFILL_CONCURRENCY_MAX;
        for (; started < wanted; started++) {
            workers[started] = (backfill_worker){&run, started, NULL, 0, 0, 0, 0};
            if (pthread_create(&threads[started], NULL, backfill_worker_thread,
                               &workers[started]) != 0)
                break;
        }
        if (started == 0)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "cannot start a worker thread");
        for (unsigned i = 0; i < started; i++)
            pthread_join(threads[i], NULL);
        ingest_flush(pipeline);
        if (status == MITILOG_OK && run.error_text[0] != '\0')
            status = mitilog_error_set(error, MITILOG_ERROR_IO, "%s", run.error_text);
    }
    if (listener != NULL) {
        dcm_server_stop(listener);
        dcm_server_free(listener);
    }
    pthread_mutex_lock(&run.lock);
    run.finished = 1;
    pthread_cond_broadcast(&run.changed);
    pthread_mutex_unlock(&run.lock);
    if (progress_started)
        pthread_join(progress_thread, NULL);
    if (run.run_id > 0) {
        char message[MITILOG_ERROR_TEXT_SIZE + 16];
        snprintf(message, sizeof message, "%s",
                 status != MITILOG_OK ? error->text
                 : run.totals.studies_failed > 0
                     ? "finished; failed studies are retried by the next run"
                     : "finished");
        backfill_report(&run, status != MITILOG_OK ? "failed" : "finished", message, 1);
    }
    *totals = run.totals;
    dcm_study_matches_free(run.studies, run.study_count);
    pthread_cond_destroy(&run.changed);
    pthread_mutex_destroy(&run.lock);
    return status;
}

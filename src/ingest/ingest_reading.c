/*
 * ingest_reading.c - the reading workers over the durable queue
 * (ingest_reading.h). Each worker takes the oldest queued object, decodes
 * one frame (a still) or up to [reading] cine_frames frames spread over a
 * cine, reads them with the device's profile and, for a cine, keeps a
 * value only when every frame read agrees (screen_combine). Whatever
 * cannot be read certainly is written "not read" with the reason; a
 * number is never made up.
 */
#include "ingest/ingest_reading.h"

#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "ingest/ingest.h"
#include "store/store_readings.h"
#include "store/store_devices.h"
#include "util/files.h"
#include "util/log.h"

/* Profiles are looked up again this often, so that a profile activated
 * with `mitilog device` reaches a running daemon. */
static const double PROFILE_RELOAD_SECONDS = 10.0;

static void free_profiles(screen_profile **profiles, size_t count)
{
    for (size_t i = 0; i < count; i++)
        screen_profile_free(profiles[i]);
    free(profiles);
}

/* Reads the active profiles from the store and swaps them in. A profile
 * whose text does not parse is logged and left out. */
static void reload_profiles(ingest_reading *reading)
{
    char **texts = NULL;
    size_t count = 0;
    mitilog_error error;
    screen_profile **loaded = NULL;
    size_t loaded_count = 0;
    if (store_screen_profiles_active(reading->store, &texts, &count, &error) != MITILOG_OK) {
        log_warning("screen profiles: cannot load them: %s", error.text);
        return;
    }
    if (count > 0)
        loaded = calloc(count, sizeof *loaded);
    for (size_t i = 0; i < count; i++) {
        screen_profile *profile = NULL;
        if (loaded != NULL && screen_profile_from_text(texts[i], &profile, &error) == MITILOG_OK)
            loaded[loaded_count++] = profile;
        else if (loaded != NULL)
            log_warning("screen profile %zu not used: %s", i + 1, error.text);
        free(texts[i]);
    }
    free(texts);
    pthread_rwlock_wrlock(&reading->profiles_lock);
    screen_profile **old = reading->profiles;
    size_t old_count = reading->profile_count;
    reading->profiles = loaded;
    reading->profile_count = loaded_count;
    reading->profiles_loaded_at = ingest_clock_now();
    pthread_rwlock_unlock(&reading->profiles_lock);
    free_profiles(old, old_count);
}

static void maybe_reload_profiles(ingest_reading *reading)
{
    pthread_rwlock_rdlock(&reading->profiles_lock);
    int due = ingest_clock_now() - reading->profiles_loaded_at >= PROFILE_RELOAD_SECONDS;
    pthread_rwlock_unlock(&reading->profiles_lock);
    if (!due)
        return;
    /* One thread reloads; the others go on with the profiles they have. */
    pthread_rwlock_wrlock(&reading->profiles_lock);
    double now = ingest_clock_now();
    due = now - reading->profiles_loaded_at >= PROFILE_RELOAD_SECONDS;
    if (due)
        reading->profiles_loaded_at = now;
    pthread_rwlock_unlock(&reading->profiles_lock);
    if (due)
        reload_profiles(reading);
}

static int parse_int(const char *text)
{
    if (text == NULL)
        return 0;
    char *end = NULL;
    long value = strtol(text, &end, 10);
    return end != text && value > 0 && value < 65536 ? (int)value : 0;
}

static void device_of(const dcm_facts *facts, screen_device *device)
{
    device->manufacturer = facts->values[DCM_ATTRIBUTE_MANUFACTURER];
    device->model_name = facts->values[DCM_ATTRIBUTE_MANUFACTURER_MODEL_NAME];
    device->software_versions = facts->values[DCM_ATTRIBUTE_SOFTWARE_VERSIONS];
    device->rows = parse_int(facts->values[DCM_ATTRIBUTE_ROWS]);
    device->columns = parse_int(facts->values[DCM_ATTRIBUTE_COLUMNS]);
}

/* The matching profile (under profiles_lock held for reading), or NULL. */
static const screen_profile *matching_profile(ingest_reading *reading, const screen_device *device)
{
    for (size_t i = 0; i < reading->profile_count; i++)
        if (screen_profile_matches(reading->profiles[i], device))
            return reading->profiles[i];
    return NULL;
}

/* The length of a DICOM string without its trailing padding spaces. */
static int unpadded_length(const char *text)
{
    size_t length = strlen(text);
    while (length > 0 && text[length - 1] == ' ')
        length--;
    return length < 256 ? (int)length : 256;
}

/* With no matching profile: an active profile of the same device (and
 * frame size) learned on other software, or NULL. Its objects are queued
 * so that they are "not read" with that reason and counted against the
 * profile, never read with it (docs/screen-reading.md). */
static const screen_profile *outdated_profile(ingest_reading *reading, const screen_device *device)
{
    for (size_t i = 0; i < reading->profile_count; i++)
        if (screen_profile_matches_but_software(reading->profiles[i], device))
            return reading->profiles[i];
    return NULL;
}

int ingest_reading_wants(ingest_reading *reading, const dcm_facts *facts, int is_ultrasound_capture)
{
    if (reading == NULL || !reading->started || !is_ultrasound_capture)
        return 0;
    maybe_reload_profiles(reading);
    screen_device device;
    device_of(facts, &device);
    pthread_rwlock_rdlock(&reading->profiles_lock);
    int wanted =
        matching_profile(reading, &device) != NULL || outdated_profile(reading, &device) != NULL;
    pthread_rwlock_unlock(&reading->profiles_lock);
    return wanted;
}

int ingest_reading_reserve(ingest_reading *reading, long long bytes, char *reason,
                           size_t reason_size)
{
    pthread_mutex_lock(&reading->lock);
    int room = reading->held_objects + 1 <= reading->limit_objects &&
               reading->held_bytes + bytes <= reading->limit_bytes;
    if (room) {
        reading->held_objects++;
        reading->held_bytes += bytes;
    } else {
        reading->full_count++;
        snprintf(reason, reason_size,
                 "reading queue full (%zu objects, %lld MiB waiting; [reading] queue_objects "
                 "%zu, queue_megabytes %lld): re-read it with mitilog rescore --read-pixels "
                 "if retention keeps the object",
                 reading->held_objects, reading->held_bytes >> 20, reading->limit_objects,
                 reading->limit_bytes >> 20);
    }
    pthread_mutex_unlock(&reading->lock);
    return room;
}

void ingest_reading_release(ingest_reading *reading, long long bytes)
{
    pthread_mutex_lock(&reading->lock);
    if (reading->held_objects > 0)
        reading->held_objects--;
    reading->held_bytes -= bytes;
    if (reading->held_bytes < 0)
        reading->held_bytes = 0;
    pthread_cond_broadcast(&reading->idle);
    pthread_mutex_unlock(&reading->lock);
}

static void item_free(ingest_reading_item *item)
{
    if (item == NULL)
        return;
    free(item->sop_instance_uid);
    free(item->study_instance_uid);
    free(item->path);
    free(item);
}

/* Appends an item (the reservation is already counted). */
static void enqueue(ingest_reading *reading, ingest_reading_item *item)
{
    pthread_mutex_lock(&reading->lock);
    item->next = NULL;
    if (reading->tail != NULL)
        reading->tail->next = item;
    else
        reading->head = item;
    reading->tail = item;
    reading->waiting++;
    metrics_queue_set(reading->metrics, METRICS_QUEUE_PIXEL_READING, reading->waiting);
    pthread_cond_signal(&reading->changed);
    pthread_mutex_unlock(&reading->lock);
}

static ingest_reading_item *item_new(long long instance_id, const char *sop_instance_uid,
                                     const char *study_instance_uid, const char *path, int owned,
                                     long long bytes)
{
    ingest_reading_item *item = calloc(1, sizeof *item);
    if (item == NULL)
        return NULL;
    item->instance_id = instance_id;
    item->sop_instance_uid = strdup(sop_instance_uid != NULL ? sop_instance_uid : "");
    item->study_instance_uid = study_instance_uid != NULL ? strdup(study_instance_uid) : NULL;
    item->path = strdup(path);
    item->owned = owned;
    item->bytes = bytes;
    if (item->sop_instance_uid == NULL || item->path == NULL ||
        (study_instance_uid != NULL && item->study_instance_uid == NULL)) {
        item_free(item);
        return NULL;
    }
    return item;
}

void ingest_reading_push(ingest_reading *reading, long long instance_id,
                         const char *sop_instance_uid, const char *study_instance_uid,
                         const char *path, int owned, long long bytes)
{
    ingest_reading_item *item =
        item_new(instance_id, sop_instance_uid, study_instance_uid, path, owned, bytes);
    if (item == NULL) {
        /* The queue row is committed: it is read at the next start. */
        log_error("object %s: out of memory queueing it for reading; it is read at the next "
                  "start",
                  sop_instance_uid);
        ingest_reading_release(reading, bytes);
        return;
    }
    enqueue(reading, item);
}

mitilog_status ingest_reading_spool_file(ingest_reading *reading, char *path, size_t size,
                                         mitilog_error *error)
{
    int written = snprintf(path, size, "%s/XXXXXX.dcm", reading->spool);
    if (written < 0 || (size_t)written >= size)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "spool path too long");
    int descriptor = mkstemps(path, 4);
    if (descriptor < 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "cannot create a file in %s: %s",
                                 reading->spool, strerror(errno));
    fchmod(descriptor, 0640);
    close(descriptor);
    return MITILOG_OK;
}

/* ---- One object ------------------------------------------------------ */

static void set_not_read(store_screen_result *result, char *reason, size_t reason_size,
                         const char *format, const char *detail)
{
    snprintf(reason, reason_size, format, detail);
    result->read = 0;
    result->reason = reason;
}

static const char *value_status_name(screen_value_status status)
{
    switch (status) {
    case SCREEN_VALUE_READ: return "read";
    case SCREEN_VALUE_NOT_SHOWN: return "not_shown";
    case SCREEN_VALUE_NOT_READ: break;
    }
    return "not_read";
}

/* The frames of a cine to read: first, last and evenly between. */
static size_t frames_to_read(size_t frame_count, unsigned wanted, size_t *indices)
{
    if (frame_count <= 1 || wanted <= 1) {
        indices[0] = 0;
        return 1;
    }
    size_t count = wanted < frame_count ? wanted : frame_count;
    for (size_t i = 0; i < count; i++)
        indices[i] = i * (frame_count - 1) / (count - 1);
    return count;
}

/* Reads item's object into result (values and reasons point into
 * readings, which must outlive result). When it is not read, *refusal
 * says what kind of reason stopped it. */
static void read_object(ingest_reading *reading, const ingest_reading_item *item,
                        store_screen_result *result, screen_reading *combined, char *reason,
                        size_t reason_size, metrics_pixel_refusal *refusal)
{
    *refusal = METRICS_PIXEL_SCREEN_REFUSED;
    memset(result, 0, sizeof *result);
    memset(combined, 0, sizeof *combined);
    result->instance_id = item->instance_id;
    result->path = item->path;
    dcm_object *object = NULL;
    dcm_facts facts;
    memset(&facts, 0, sizeof facts);
    mitilog_error error;
    if (dcm_object_load(item->path, &object, &error) != MITILOG_OK) {
        *refusal = METRICS_PIXEL_OBJECT_UNREADABLE;
        set_not_read(result, reason, reason_size, "the object kept for reading cannot be read: %s",
                     error.text);
        return;
    }
    if (dcm_object_facts(object, 1, &facts, &error) != MITILOG_OK) {
        *refusal = METRICS_PIXEL_OBJECT_UNREADABLE;
        set_not_read(result, reason, reason_size, "the object kept for reading cannot be read: %s",
                     error.text);
        dcm_object_free(object);
        return;
    }
    screen_device device;
    device_of(&facts, &device);
    maybe_reload_profiles(reading);
    pthread_rwlock_rdlock(&reading->profiles_lock);
    const screen_profile *profile = matching_profile(reading, &device);
    const screen_profile *outdated = profile == NULL ? outdated_profile(reading, &device) : NULL;
    if (outdated != NULL) {
        char detail[512];
        const char *now_running = device.software_versions ? device.software_versions : "";
        const char *learned_on = screen_profile_software(outdated);
        snprintf(detail, sizeof detail,
                 "software changed: the device now runs %.*s, its "
                 "screen profile %s was learned on %.*s",
                 unpadded_length(now_running), now_running, screen_profile_key(outdated),
                 unpadded_length(learned_on), learned_on);
        *refusal = METRICS_PIXEL_SOFTWARE_CHANGED;
        set_not_read(result, reason, reason_size,
                     "%s; the screen may have moved, so it is not read with that profile: "
                     "learn the device again on the new software (mitilog device learn)",
                     detail);
        snprintf(combined->profile_key, sizeof combined->profile_key, "%s",
                 screen_profile_key(outdated));
        combined->profile_version = screen_profile_version(outdated);
        result->profile_key = combined->profile_key;
        result->profile_version = combined->profile_version;
    } else if (profile == NULL) {
        char detail[512];
        snprintf(detail, sizeof detail, "'%s' '%s' software '%s', %dx%d",
                 device.manufacturer ? device.manufacturer : "",
                 device.model_name ? device.model_name : "",
                 device.software_versions ? device.software_versions : "", device.columns,
                 device.rows);
        *refusal = METRICS_PIXEL_NO_PROFILE;
        set_not_read(result, reason, reason_size,
                     "no active screen profile matches this device (%s): set one up with "
                     "mitilog device",
                     detail);
    } else {
        snprintf(combined->profile_key, sizeof combined->profile_key, "%s",
                 screen_profile_key(profile));
        combined->profile_version = screen_profile_version(profile);
        size_t indices[64];
        dcm_frame frame;
        memset(&frame, 0, sizeof frame);
        screen_reading frames_read[64];
        size_t wanted = 1, done = 0;
        int failed = 0;
        for (size_t i = 0; i < wanted && !failed; i++) {
            if (dcm_object_frame(object, i == 0 ? 0 : indices[i], &frame, &error) != MITILOG_OK) {
                *refusal = METRICS_PIXEL_FRAME_NOT_DECODED;
                set_not_read(result, reason, reason_size, "%s", error.text);
                failed = 1;
                break;
            }
            if (i == 0) /* frames_to_read always starts at frame 0 */
                wanted = frames_to_read(frame.frame_count, reading->cine_frames, indices);
            screen_image image = {frame.width, frame.height, (size_t)frame.width, frame.grey};
            if (screen_read(profile, &image, &frames_read[done], &error) != MITILOG_OK) {
                *refusal = METRICS_PIXEL_READER_FAILED;
                set_not_read(result, reason, reason_size, "the reader failed: %s", error.text);
                failed = 1;
            } else {
                done++;
            }
            dcm_frame_free(&frame);
        }
        if (!failed && done > 0) {
            if (done == 1)
                *combined = frames_read[0];
            else
                screen_combine(frames_read, done, combined);
            snprintf(combined->profile_key, sizeof combined->profile_key, "%s",
                     screen_profile_key(profile));
            combined->profile_version = screen_profile_version(profile);
            result->frames_read = (int)done;
            result->read = combined->reason[0] == '\0';
            result->reason = combined->reason[0] != '\0' ? combined->reason : NULL;
            for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
                const screen_value *v = &combined->values[i];
                store_screen_value *out = &result->values[i];
                out->status = value_status_name(v->status);
                out->value = v->value;
                out->decimals = v->decimals;
                out->text = v->text[0] != '\0' ? v->text : NULL;
                out->reason = v->status == SCREEN_VALUE_NOT_READ
                                  ? (v->reason[0] != '\0' ? v->reason : "not read")
                                  : NULL;
            }
        }
        result->profile_key = combined->profile_key;
        result->profile_version = combined->profile_version;
    }
    pthread_rwlock_unlock(&reading->profiles_lock);
    dcm_facts_free(&facts);
    dcm_object_free(object);
}

/* The first reason a reading refused anything, or NULL when all was
 * read (or not shown). An index left blank on this frame ("nothing is
 * drawn where ...": an exam that does not show it) is no refusal, as in
 * the Devices API's count (sql/queries/devices/screen_profiles_json.sql). */
static const char *refusal_of(const store_screen_result *result)
{
    static const char blank[] = "nothing is drawn";
    if (!result->read)
        return result->reason != NULL ? result->reason : "not read";
    for (int i = 0; i < EXAM_INDEX_COUNT; i++)
        if (result->values[i].reason != NULL &&
            strncmp(result->values[i].reason, blank, sizeof blank - 1) != 0)
            return result->values[i].reason;
    return NULL;
}

/* One warning per profile and hour when its frames are refused, not one
 * per frame: the Devices page and GET /api/v1/devices count them all. */
static void warn_refusal(ingest_reading *reading, const ingest_reading_item *item,
                         const store_screen_result *result)
{
    const char *refusal = refusal_of(result);
    const char *key = result->profile_key;
    if (refusal == NULL || key == NULL || key[0] == '\0')
        return;
    uint64_t now = (uint64_t)ingest_clock_now();
    pthread_mutex_lock(&reading->lock);
    const hash_entry *entry = hash_table_find(&reading->refusals_warned, key, strlen(key));
    int due = entry == NULL || now - entry->number >= 3600;
    if (due && hash_table_put(&reading->refusals_warned, key, strlen(key), now, NULL) != MITILOG_OK)
        due = 1; /* out of memory: warn anyway, never drop it silently */
    pthread_mutex_unlock(&reading->lock);
    if (due)
        log_warning("screen profile %s refuses frames (object %s: %s); the Devices page "
                    "counts them; this is said once an hour per profile",
                    key, item->sop_instance_uid, refusal);
}

static void finish_item(ingest_reading *reading, ingest_reading_item *item)
{
    store_screen_result result;
    screen_reading combined;
    char reason[MITILOG_ERROR_TEXT_SIZE + 128];
    metrics_pixel_refusal refusal;
    read_object(reading, item, &result, &combined, reason, sizeof reason, &refusal);
    int stale = 0;
    mitilog_error error;
    for (int attempt = 0;; attempt++) {
        if (store_put_screen_result(reading->store, &result, &stale, &error) == MITILOG_OK)
            break;
        /* The database is busy or failing: the queue row stays, so the
         * object is read again at the next start if this never works. */
        log_warning("object %s: reading not written (attempt %d): %s", item->sop_instance_uid,
                    attempt + 1, error.text);
        pthread_mutex_lock(&reading->lock);
        int stopping = reading->stopping;
        pthread_mutex_unlock(&reading->lock);
        if (stopping || attempt >= 5)
            return;
        sleep(1);
    }
    pthread_mutex_lock(&reading->lock);
    if (result.read)
        reading->read_count++;
    else
        reading->not_read_count++;
    if (!stale && result.read) /* a stale reading was replaced: its copy is read */
        metrics_pixel_read(reading->metrics);
    else if (!stale)
        metrics_pixel_refused(reading->metrics, refusal);
    pthread_mutex_unlock(&reading->lock);
    if (!stale)
        warn_refusal(reading, item, &result);
    if (stale) {
        log_debug("object %s: re-sent while being read; its newer copy is read instead",
                  item->sop_instance_uid);
    } else {
        if (result.read)
            log_debug("object %s: pixels read (profile %s)", item->sop_instance_uid,
                      result.profile_key ? result.profile_key : "");
        else if (result.profile_key != NULL && result.profile_key[0] != '\0')
            /* counted against its profile, with one warning an hour */
            log_debug("object %s: pixel values not read: %s", item->sop_instance_uid,
                      result.reason ? result.reason : "");
        else
            log_info("object %s: pixel values not read: %s", item->sop_instance_uid,
                     result.reason ? result.reason : "");
        if (item->study_instance_uid != NULL)
            ingest_exams_mark(reading->exams, item->study_instance_uid);
    }
    if (item->owned && !stale && unlink(item->path) != 0 && errno != ENOENT)
        log_warning("object %s: cannot delete its spool copy %s: %s", item->sop_instance_uid,
                    item->path, strerror(errno));
}

static void *worker(void *argument)
{
    ingest_reading *reading = argument;
    pthread_mutex_lock(&reading->lock);
    for (;;) {
        while (reading->head == NULL && !reading->stopping)
            pthread_cond_wait(&reading->changed, &reading->lock);
        if (reading->stopping)
            break;
        ingest_reading_item *item = reading->head;
        reading->head = item->next;
        if (reading->head == NULL)
            reading->tail = NULL;
        reading->waiting--;
        metrics_queue_set(reading->metrics, METRICS_QUEUE_PIXEL_READING, reading->waiting);
        reading->busy++;
        pthread_mutex_unlock(&reading->lock);

        finish_item(reading, item);

        pthread_mutex_lock(&reading->lock);
        reading->busy--;
        if (reading->held_objects > 0)
            reading->held_objects--;
        reading->held_bytes -= item->bytes;
        if (reading->held_bytes < 0)
            reading->held_bytes = 0;
        pthread_cond_broadcast(&reading->idle);
        item_free(item);
    }
    pthread_mutex_unlock(&reading->lock);
    return NULL;
}

/* ---- Start and stop -------------------------------------------------- */

static int is_named(const ingest_reading_item *items, const char *path)
{
    for (const ingest_reading_item *item = items; item != NULL; item = item->next)
        if (item->owned && strcmp(item->path, path) == 0)
            return 1;
    return 0;
}

/* Spool files that no queue row names were written for objects whose
 * commit never happened (a crash in between): nobody acknowledged them. */
static void remove_orphans(ingest_reading *reading)
{
    DIR *folder = opendir(reading->spool);
    if (folder == NULL)
        return;
    struct dirent *entry;
    unsigned long removed = 0;
    while ((entry = readdir(folder)) != NULL) {
        if (entry->d_name[0] == '.')
            continue;
        char path[INGEST_READING_FOLDER_SIZE + 300];
        snprintf(path, sizeof path, "%s/%s", reading->spool, entry->d_name);
        if (!is_named(reading->head, path) && unlink(path) == 0)
            removed++;
    }
    closedir(folder);
    if (removed > 0)
        log_info("reading spool: %lu file(s) of objects never committed removed", removed);
}

mitilog_status ingest_reading_start(ingest_reading *reading, const config *config, store *store,
                                    ingest_exams *exams, metrics *metrics, mitilog_error *error)
{
    memset(reading, 0, sizeof *reading);
    reading->store = store;
    reading->metrics = metrics;
    reading->exams = exams;
    reading->cine_frames = config->reading_cine_frames > 0 ? config->reading_cine_frames : 3;
    if (reading->cine_frames > 64)
        reading->cine_frames = 64;
    reading->limit_objects =
        config->reading_queue_objects > 0 ? config->reading_queue_objects : 10000;
    reading->limit_bytes =
        (long long)(config->reading_queue_megabytes > 0 ? config->reading_queue_megabytes : 4096)
        << 20;
    int written =
        snprintf(reading->spool, sizeof reading->spool, "%s/reading", config->data_directory);
    if (written < 0 || (size_t)written >= sizeof reading->spool)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "data_directory path too long");
    mitilog_status status = files_make_directories(reading->spool, error);
    if (status != MITILOG_OK)
        return status;
    pthread_mutex_init(&reading->lock, NULL);
    pthread_cond_init(&reading->changed, NULL);
    pthread_cond_init(&reading->idle, NULL);
    pthread_rwlock_init(&reading->profiles_lock, NULL);
    hash_table_init(&reading->refusals_warned, 4096);
    reload_profiles(reading);

    store_reading_entry *entries = NULL;
    size_t count = 0;
    status = store_reading_queue_load(store, &entries, &count, error);
    for (size_t i = 0; status == MITILOG_OK && i < count; i++) {
        ingest_reading_item *item = item_new(entries[i].instance_id, entries[i].sop_instance_uid,
                                             entries[i].study_instance_uid, entries[i].path,
                                             entries[i].owned, entries[i].bytes);
        if (item == NULL) {
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "reading queue: out of memory");
            break;
        }
        reading->held_objects++;
        reading->held_bytes += item->bytes;
        reading->waiting++;
        if (reading->tail != NULL)
            reading->tail->next = item;
        else
            reading->head = item;
        reading->tail = item;
    }
    store_reading_entries_free(entries, count);
    metrics_queue_set(metrics, METRICS_QUEUE_PIXEL_READING, reading->waiting);
    if (status == MITILOG_OK) {
        remove_orphans(reading);
        if (count > 0)
            log_info("reading queue: %zu object(s) acknowledged earlier and not yet read are "
                     "read now",
                     count);
        unsigned workers = config->reading_workers;
        if (workers == 0)
            log_warning("reading: [reading] workers = 0: objects are queued, not read, until "
                        "a restart with workers");
        reading->threads = calloc(workers ? workers : 1, sizeof *reading->threads);
        if (reading->threads == NULL)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "reading: out of memory");
        for (unsigned i = 0; status == MITILOG_OK && i < workers; i++) {
            if (pthread_create(&reading->threads[i], NULL, worker, reading) != 0)
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                           "reading: cannot start a worker");
            else
                reading->thread_count++;
        }
    }
    reading->started = 1;
    if (status != MITILOG_OK)
        ingest_reading_stop(reading);
    return status;
}

void ingest_reading_flush(ingest_reading *reading)
{
    if (reading == NULL || !reading->started)
        return;
    pthread_mutex_lock(&reading->lock);
    while ((reading->head != NULL || reading->busy > 0) && reading->thread_count > 0 &&
           !reading->stopping)
        pthread_cond_wait(&reading->idle, &reading->lock);
    pthread_mutex_unlock(&reading->lock);
}

void ingest_reading_stop(ingest_reading *reading)
{
    if (reading == NULL || !reading->started)
        return;
    pthread_mutex_lock(&reading->lock);
    reading->stopping = 1;
    pthread_cond_broadcast(&reading->changed);
    pthread_cond_broadcast(&reading->idle);
    pthread_mutex_unlock(&reading->lock);
    for (unsigned i = 0; i < reading->thread_count; i++)
        pthread_join(reading->threads[i], NULL);
    free(reading->threads);
    reading->threads = NULL;
    reading->thread_count = 0;
    while (reading->head != NULL) {
        ingest_reading_item *next = reading->head->next;
        item_free(reading->head);
        reading->head = next;
    }
    reading->tail = NULL;
    free_profiles(reading->profiles, reading->profile_count);
    hash_table_free(&reading->refusals_warned);
    reading->profiles = NULL;
    reading->profile_count = 0;
    if (reading->read_count + reading->not_read_count + reading->full_count > 0)
        log_info("reading: %lu object(s) read, %lu not read, %lu not queued (queue full)",
                 reading->read_count, reading->not_read_count, reading->full_count);
    pthread_rwlock_destroy(&reading->profiles_lock);
    pthread_cond_destroy(&reading->changed);
    pthread_cond_destroy(&reading->idle);
    pthread_mutex_destroy(&reading->lock);
    reading->started = 0;
}

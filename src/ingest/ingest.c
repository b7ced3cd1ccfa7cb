#include "ingest/ingest.h"

#include <dirent.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "config/config_site.h"
#include "extract/ext.h"
#include "extract/ext_sr.h"
#include "ingest/ingest_internal.h"
#include "ingest/ingest_reading.h"
#include "store/store_readings.h"
#include "store/store_findings.h"
#include "store/store_instances.h"
#include "util/files.h"
#include "util/hash.h"
#include "util/log.h"

typedef enum retention { RETENTION_NONE, RETENTION_HEADER, RETENTION_FULL } retention;

/* Data folder paths are bounded by FOLDER_SIZE so every derived path fits
 * in PATH_SIZE (checked in ingest_create). */
enum { SR_DEPTH_LIMIT = 64, FOLDER_SIZE = 3072, PATH_SIZE = 4096 };

struct ingest {
    store *store;
    retention retention;
    char quarantine[FOLDER_SIZE];
    char objects[FOLDER_SIZE];
    ext_site_rules rules; /* the site file, read at start */
    dcm_private_request private_requests[EXT_SITE_PRESET_SOURCES_MAX];
    ingest_exams exams;
    ingest_reading reading; /* the pixel reader's queue and workers */
    ingest_schemes schemes;
    unsigned sr_depth_limit;         /* [storage] sr_depth_limit */
    uint64_t quarantine_max_bytes;   /* [storage] quarantine_max_bytes */
    unsigned quarantine_max_files;   /* [storage] quarantine_max_files */
    pthread_mutex_t quarantine_lock; /* one association trims at a time */
    metrics *metrics;                /* borrowed, set at creation; NULL: none */
};

/* folder/00 .. folder/ff, so that writing a copy needs no mkdir. */
static mitilog_status ingest_make_subfolders(const char *folder, mitilog_error *error)
{
    for (unsigned i = 0; i < 256; i++) {
        char subfolder[FOLDER_SIZE + 4];
        snprintf(subfolder, sizeof subfolder, "%s/%02x", folder, i);
        mitilog_status status = files_make_directories(subfolder, error);
        if (status != MITILOG_OK)
            return status;
    }
    return MITILOG_OK;
}

mitilog_status ingest_create(const config *config, store *store, metrics *metrics, ingest **out,
                             mitilog_error *error)
{
    /* Every object and rejection this ingest writes records its site. */
    mitilog_status site_status = store_set_site(store, config->receiver_site, error);
    if (site_status != MITILOG_OK)
        return site_status;
    store_set_exam_job_timing(store, config->exam_settle_ms, config->exam_max_wait_ms);
    ingest *created = calloc(1, sizeof *created);
    if (created == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    created->store = store;
    created->metrics = metrics;
    created->sr_depth_limit = config->sr_depth_limit > 0 ? config->sr_depth_limit : SR_DEPTH_LIMIT;
    created->quarantine_max_bytes = config->quarantine_max_bytes;
    created->quarantine_max_files = config->quarantine_max_files;
    created->retention = strcmp(config->retention, "none") == 0   ? RETENTION_NONE
                         : strcmp(config->retention, "full") == 0 ? RETENTION_FULL
                                                                  : RETENTION_HEADER;
    const char *base = config->data_directory;
    if (strlen(base) > FOLDER_SIZE - 16) {
        free(created);
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "data_directory path too long");
    }
    snprintf(created->quarantine, FOLDER_SIZE, "%s/quarantine", base);
    snprintf(created->objects, FOLDER_SIZE, "%s/objects", base);
    const char *folders[] = {created->quarantine, created->objects};
    for (size_t i = 0; i < 2; i++) {
        mitilog_status status = files_make_directories(folders[i], error);
        if (status == MITILOG_OK && i == 1 && created->retention == RETENTION_FULL)
            status = ingest_make_subfolders(folders[i], error);
        if (status != MITILOG_OK) {
            free(created);
            return status;
        }
    }
    pthread_mutex_init(&created->schemes.lock, NULL);
    pthread_mutex_init(&created->quarantine_lock, NULL);
    mitilog_status status = config_site_load(config->site_rules_path, &created->rules, error);
    if (status != MITILOG_OK && error != NULL) {
        char reason[sizeof error->text];
        snprintf(reason, sizeof reason, "%s", error->text);
        mitilog_error_set(error, status, "[site] rules: %s", reason);
    }
    for (size_t i = 0; status == MITILOG_OK && i < created->rules.preset_count; i++) {
        const ext_preset_source *preset = &created->rules.presets[i];
        if (preset->is_private)
            created->private_requests[i] =
                (dcm_private_request){preset->group, preset->element, preset->private_creator};
    }
    if (status == MITILOG_OK)
        status = ingest_exams_start(&created->exams, store, &created->rules, config->receiver_site,
                                    metrics, error);
    if (status == MITILOG_OK) {
        status =
            ingest_reading_start(&created->reading, config, store, &created->exams, metrics, error);
        if (status != MITILOG_OK)
            ingest_exams_stop(&created->exams);
    }
    if (status != MITILOG_OK) {
        ext_site_rules_free(&created->rules);
        pthread_mutex_destroy(&created->schemes.lock);
        pthread_mutex_destroy(&created->quarantine_lock);
        free(created);
        return status;
    }
    if (config->rules_policy_path != NULL && config->rules_policy_path[0] != '\0') {
        rules_policy *policy = NULL;
        status = rules_policy_load(config->rules_policy_path, &policy, error);
        if (status != MITILOG_OK && error != NULL) {
            /* Name the key that names the file. */
            char reason[sizeof error->text];
            snprintf(reason, sizeof reason, "%s", error->text);
            mitilog_error_set(error, status, "[rules] policy: %s", reason);
        }
        if (status == MITILOG_OK)
            status = ingest_set_policy(created, policy, error);
        if (status != MITILOG_OK) {
            ingest_free(created);
            return status;
        }
        char version[65];
        store_active_policy_version(store, version);
        log_info("policy %s: version %s", config->rules_policy_path, version);
    }
    log_info("site rules %s: %zu exam types, %zu rooms, %zu shifts, %zu SR codes",
             created->rules.source_path, created->rules.exam_type_count,
             created->rules.room_count + created->rules.room_by_ae_count,
             created->rules.shift_count, created->rules.sr_code_count);
    *out = created;
    return MITILOG_OK;
}

void ingest_flush(ingest *ingest)
{
    if (ingest != NULL) {
        ingest_reading_flush(&ingest->reading);
        ingest_exams_flush(&ingest->exams);
    }
}

void ingest_free(ingest *ingest)
{
    if (ingest == NULL)
        return;
    ingest_reading_stop(&ingest->reading);
    ingest_exams_stop(&ingest->exams);
    ext_site_rules_free(&ingest->rules);
    ingest_schemes_free(&ingest->schemes);
    pthread_mutex_destroy(&ingest->schemes.lock);
    pthread_mutex_destroy(&ingest->quarantine_lock);
    free(ingest);
}

const ext_site_rules *ingest_site_rules(const ingest *ingest) { return &ingest->rules; }

/* A clock for durations: seconds, monotonic. */
static double ingest_monotonic_seconds(void)
{
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    return (double)now.tv_sec + (double)now.tv_nsec / 1e9;
}

mitilog_status ingest_set_policy(ingest *ingest, rules_policy *policy, mitilog_error *error)
{
    if (policy != NULL) {
        mitilog_status status = ingest_register_policy(ingest->store, policy, error);
        if (status != MITILOG_OK) {
            rules_policy_free(policy);
            return status;
        }
    }
    ingest_exams_swap_policy(&ingest->exams, policy);
    return MITILOG_OK;
}

static mitilog_status read_record(dcm_object *object, const ext_site_rules *rules,
                                  const dcm_private_request *requests, const char *calling_ae_title,
                                  const char *received_at, unsigned sr_depth_limit,
                                  dcm_facts *facts, ext_record *record, mitilog_error *error);

mitilog_status ingest_read_record(dcm_object *object, const ext_site_rules *rules,
                                  const dcm_private_request *requests, const char *calling_ae_title,
                                  const char *received_at, dcm_facts *facts, ext_record *record,
                                  mitilog_error *error)
{
    return read_record(object, rules, requests, calling_ae_title, received_at, SR_DEPTH_LIMIT,
                       facts, record, error);
}

static mitilog_status read_record(dcm_object *object, const ext_site_rules *rules,
                                  const dcm_private_request *requests, const char *calling_ae_title,
                                  const char *received_at, unsigned sr_depth_limit,
                                  dcm_facts *facts, ext_record *record, mitilog_error *error)
{
    memset(facts, 0, sizeof *facts);
    memset(record, 0, sizeof *record);
    mitilog_status status = dcm_object_facts(object, sr_depth_limit, facts, error);
    if (status == MITILOG_OK)
        status = ext_record_from_facts(facts, record, error);
    if (status != MITILOG_OK)
        return status;
    record->calling_ae_title = strdup(calling_ae_title != NULL ? calling_ae_title : "");
    if (record->calling_ae_title == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    if (received_at != NULL)
        snprintf(record->received_at, sizeof record->received_at, "%s", received_at);
    dcm_extra extra;
    status = dcm_object_extra(object, requests, rules->preset_count, &extra, error);
    if (status == MITILOG_OK) {
        status = ext_record_enrich(record, facts, &extra, rules, error);
        dcm_extra_free(&extra);
    }
    return status;
}

/* folder/ab/<hash>.dcm for the hash of key. The 256 subfolders are made
 * by ingest_create (ingest_make_subfolders), not once per object. */
static mitilog_status hashed_path(const char *folder, const char *key, char path[PATH_SIZE],
                                  mitilog_error *error)
{
    char hex[HASH_HEX_SIZE];
    if (hash_text_hex(key, hex) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "cannot hash");
    snprintf(path, PATH_SIZE, "%s/%.2s/%s.dcm", folder, hex, hex);
    return MITILOG_OK;
}

typedef struct quarantined_file {
    char name[256];
    off_t size;
    struct timespec modified;
} quarantined_file;

static int quarantined_older_first(const void *left, const void *right)
{
    const quarantined_file *a = left, *b = right;
    if (a->modified.tv_sec != b->modified.tv_sec)
        return a->modified.tv_sec < b->modified.tv_sec ? -1 : 1;
    if (a->modified.tv_nsec != b->modified.tv_nsec)
        return a->modified.tv_nsec < b->modified.tv_nsec ? -1 : 1;
    return strcmp(a->name, b->name);
}

/* Removes the oldest files of quarantine/ until one more of incoming
 * bytes fits the quota ([storage] quarantine_max_files and _bytes).
 * Returns 0 when it cannot fit (larger than the quota, or a zero
 * quota): the object is then not kept. Called with quarantine_lock. */
static int quarantine_make_room(ingest *ingest, uint64_t incoming)
{
    if (ingest->quarantine_max_files == 0 || incoming > ingest->quarantine_max_bytes)
        return 0;
    DIR *folder = opendir(ingest->quarantine);
    if (folder == NULL)
        return 1; /* the copy will fail and say why */
    quarantined_file *files = NULL;
    size_t count = 0, capacity = 0;
    uint64_t total = 0;
    struct dirent *entry;
    while ((entry = readdir(folder)) != NULL) {
        char path[PATH_SIZE];
        struct stat info;
        if (entry->d_name[0] == '.' || strlen(entry->d_name) >= sizeof files->name)
            continue;
        snprintf(path, sizeof path, "%s/%s", ingest->quarantine, entry->d_name);
        if (lstat(path, &info) != 0 || !S_ISREG(info.st_mode))
            continue;
        if (count == capacity) {
            size_t grown = capacity ? capacity * 2 : 64;
            quarantined_file *larger = realloc(files, grown * sizeof *files);
            if (larger == NULL)
                break;
            files = larger;
            capacity = grown;
        }
        snprintf(files[count].name, sizeof files[count].name, "%s", entry->d_name);
        files[count].size = info.st_size;
        files[count].modified = info.st_mtim;
        total += (uint64_t)info.st_size;
        count++;
    }
    closedir(folder);
    if (count > 1)
        qsort(files, count, sizeof *files, quarantined_older_first);
    size_t removed = 0;
    uint64_t freed = 0;
    for (size_t i = 0; i < count && (count - removed + 1 > ingest->quarantine_max_files ||
                                     total - freed + incoming > ingest->quarantine_max_bytes);
         i++) {
        char path[PATH_SIZE];
        snprintf(path, sizeof path, "%s/%s", ingest->quarantine, files[i].name);
        if (unlink(path) == 0) {
            removed++;
            freed += (uint64_t)files[i].size;
        }
    }
    if (removed > 0)
        log_warning("quarantine quota (%u files, %llu bytes): removed the %zu oldest "
                    "file%s (%llu bytes) to keep the newest rejected object",
                    ingest->quarantine_max_files, (unsigned long long)ingest->quarantine_max_bytes,
                    removed, removed == 1 ? "" : "s", (unsigned long long)freed);
    int fits = count - removed + 1 <= ingest->quarantine_max_files &&
               total - freed + incoming <= ingest->quarantine_max_bytes;
    free(files);
    return fits;
}

/* The announced instance UID, or words saying none was announced. */
static const char *record_uid_or_unknown(const ingest_source *source)
{
    return source->announced_sop_instance_uid[0] != '\0' ? source->announced_sop_instance_uid
                                                         : "(UID not read)";
}

/* Keeps the received bytes of a rejected object, within the quarantine
 * quota (oldest removed first), and records the reason. */
static void quarantine(ingest *ingest, const ingest_source *source, const char *reason)
{
    char kept[PATH_SIZE] = "";
    mitilog_error error;
    struct stat info;
    if (source->is_spool && stat(source->path, &info) == 0) {
        char hex[HASH_HEX_SIZE];
        pthread_mutex_lock(&ingest->quarantine_lock);
        if (!quarantine_make_room(ingest, (uint64_t)info.st_size)) {
            log_warning("association %lu: object %s (%lld bytes) not kept: larger than the "
                        "quarantine quota (quarantine_max_bytes %llu, quarantine_max_files %u)",
                        source->association_id, source->announced_sop_instance_uid,
                        (long long)info.st_size, (unsigned long long)ingest->quarantine_max_bytes,
                        ingest->quarantine_max_files);
        } else if (hash_file_hex(source->path, hex, &error) == MITILOG_OK) {
            snprintf(kept, sizeof kept, "%s/%s.dcm", ingest->quarantine, hex);
            if (files_copy(source->path, kept, &error) != MITILOG_OK) {
                log_error("quarantine failed: %s", error.text);
                unlink(kept); /* a partial copy would count against the quota */
                kept[0] = '\0';
            }
        }
        pthread_mutex_unlock(&ingest->quarantine_lock);
    }
    char now[32];
    files_utc_now(now, sizeof now);
    store_rejection rejection = {now,
                                 source->calling_ae_title,
                                 source->peer_address,
                                 source->announced_sop_class_uid,
                                 source->announced_sop_instance_uid,
                                 source->is_spool ? "" : source->path,
                                 kept,
                                 reason};
    if (store_put_rejection(ingest->store, &rejection, &error) != MITILOG_OK)
        log_error("cannot record rejection: %s", error.text);
    if (source->description != NULL)
        log_warning("%s: object %s rejected: %s; bytes kept in %s", source->description,
                    record_uid_or_unknown(source), reason, kept[0] ? kept : "(nowhere)");
    else if (source->is_spool)
        log_warning("association %lu: object %s from AE '%s' rejected: %s; bytes kept in %s",
                    source->association_id, source->announced_sop_instance_uid,
                    source->calling_ae_title, reason, kept[0] ? kept : "(nowhere)");
    else
        log_warning("import: %s rejected: %s", source->path, reason);
}

/* Keeps what the retention setting asks for: the whole object as a file
 * under objects/ (full), or its header in *header_bytes (header), for
 * the store to commit with the instance's row. */
static mitilog_status retain(ingest *ingest, dcm_object *object, const ingest_source *source,
                             const char *sop_instance_uid, unsigned char **header_bytes,
                             size_t *header_size, mitilog_error *error)
{
    if (ingest->retention == RETENTION_HEADER)
        return dcm_object_header_bytes(object, header_bytes, header_size, error);
    if (ingest->retention == RETENTION_NONE)
        return MITILOG_OK;
    char path[PATH_SIZE];
    mitilog_status status = hashed_path(ingest->objects, sop_instance_uid, path, error);
    if (status != MITILOG_OK)
        return status;
    return files_copy(source->path, path, error);
}

/* What is done about an object's pixels: nothing (wanted 0), a queue row
 * naming the file to read, or "not read" with the reason. */
typedef struct reading_plan {
    int wanted;
    int reserved; /* a queue place is held */
    store_reading_request request;
    char path[PATH_SIZE];
    char reason[MITILOG_ERROR_TEXT_SIZE + 64];
    metrics_pixel_refusal refusal; /* with not_read_reason: its kind */
} reading_plan;

/* Decides whether the object is read and, if so, which file the worker
 * reads: the kept object (retention full), the imported file, or a copy
 * in the reading spool (a received object's memory file is gone once the
 * C-STORE is answered). Never fails the object: anything that prevents
 * reading is recorded as its reason. */
static void plan_reading(ingest *ingest, const ingest_source *source, const dcm_facts *facts,
                         const ext_record *record, reading_plan *plan)
{
    int capture = record->is_ultrasound &&
                  (record->kind == EXT_KIND_IMAGE || record->kind == EXT_KIND_MULTIFRAME);
    if (!ingest_reading_wants(&ingest->reading, facts, capture))
        return;
    plan->wanted = 1;
    struct stat info;
    long long bytes = stat(source->path, &info) == 0 ? (long long)info.st_size : 0;
    if (!ingest_reading_reserve(&ingest->reading, bytes, plan->reason, sizeof plan->reason)) {
        plan->request.not_read_reason = plan->reason;
        plan->refusal = METRICS_PIXEL_QUEUE_FULL;
        return;
    }
    plan->reserved = 1;
    plan->request.bytes = bytes;
    mitilog_error error;
    if (ingest->retention == RETENTION_FULL &&
        hashed_path(ingest->objects, record->sop_instance_uid, plan->path, &error) == MITILOG_OK) {
        plan->request.path = plan->path;
    } else if (!source->is_spool) {
        snprintf(plan->path, sizeof plan->path, "%s", source->path);
        plan->request.path = plan->path;
    } else if (ingest_reading_spool_file(&ingest->reading, plan->path, sizeof plan->path, &error) ==
                   MITILOG_OK &&
               files_copy(source->path, plan->path, &error) == MITILOG_OK) {
        plan->request.path = plan->path;
        plan->request.owned = 1;
    } else {
        unlink(plan->path);
        ingest_reading_release(&ingest->reading, bytes);
        plan->reserved = 0;
        snprintf(plan->reason, sizeof plan->reason, "the object could not be kept for reading: %s",
                 error.text);
        plan->request.not_read_reason = plan->reason;
        plan->refusal = METRICS_PIXEL_NOT_KEPT;
        plan->request.path = NULL;
    }
}

/* The instance did not commit: give the place and the copy back. */
static void cancel_reading(ingest *ingest, reading_plan *plan)
{
    if (plan->reserved)
        ingest_reading_release(&ingest->reading, plan->request.bytes);
    if (plan->request.owned)
        unlink(plan->path);
}

static ingest_outcome reject(ingest *ingest, const ingest_source *source, mitilog_error *reason)
{
    quarantine(ingest, source, reason->text);
    return INGEST_OUTCOME_REJECTED;
}

ingest_outcome ingest_object(ingest *ingest, const ingest_source *source, mitilog_error *reason)
{
    return ingest_object_receipt(ingest, source, NULL, reason);
}

ingest_outcome ingest_object_receipt(ingest *ingest, const ingest_source *source,
                                     ingest_receipt *receipt, mitilog_error *reason)
{
    if (receipt != NULL)
        memset(receipt, 0, sizeof *receipt);
    dcm_object *object = NULL;
    dcm_facts facts;
    ext_record record;
    memset(&facts, 0, sizeof facts);
    memset(&record, 0, sizeof record);
    ingest_outcome outcome = INGEST_OUTCOME_NOT_STORED;

    if (dcm_object_load(source->path, &object, reason) != MITILOG_OK)
        return reject(ingest, source, reason);
    char now[EXT_ISO_TIME_SIZE];
    files_utc_now(now, sizeof now);
    mitilog_status read =
        read_record(object, &ingest->rules, ingest->private_requests, source->calling_ae_title, now,
                    ingest->sr_depth_limit, &facts, &record, reason);
    if (read == MITILOG_ERROR_MEMORY) {
        dcm_object_free(object);
        dcm_facts_free(&facts);
        ext_record_free(&record);
        log_error("object: out of memory reading it: %s", reason->text);
        return INGEST_OUTCOME_NOT_STORED;
    }
    if (read != MITILOG_OK) {
        dcm_object_free(object);
        dcm_facts_free(&facts);
        ext_record_free(&record);
        return reject(ingest, source, reason);
    }
    if (receipt != NULL) {
        snprintf(receipt->sop_class_uid, sizeof receipt->sop_class_uid, "%s",
                 record.sop_class_uid != NULL ? record.sop_class_uid : "");
        snprintf(receipt->sop_instance_uid, sizeof receipt->sop_instance_uid, "%s",
                 record.sop_instance_uid != NULL ? record.sop_instance_uid : "");
    }
    for (size_t i = 0; record.sr != NULL && i < record.sr->unknown_scheme_count; i++)
        ingest_schemes_note(&ingest->schemes, record.sr->unknown_schemes[i],
                            record.sop_instance_uid);
    if (facts.sr_truncated)
        log_warning("SR %s: content tree deeper than %u levels; deeper items not read",
                    record.sop_instance_uid, ingest->sr_depth_limit);
    /* The C-STORE command names the instance and class it carries (PS3.7
     * 9.3.1.1); an object that is another one is refused, never stored
     * over whatever it names (PS3.4 B.2.3, A900; DCMTK's storescp checks
     * both UIDs the same way). */
    const char *mismatch = NULL;
    if (source->announced_sop_instance_uid[0] != '\0' &&
        strcmp(source->announced_sop_instance_uid, record.sop_instance_uid) != 0)
        mismatch = "SOP Instance UID";
    else if (source->announced_sop_class_uid[0] != '\0' &&
             strcmp(source->announced_sop_class_uid, record.sop_class_uid) != 0)
        mismatch = "SOP Class UID";
    if (mismatch != NULL) {
        mitilog_error_set(reason, MITILOG_ERROR_INVALID,
                          "the C-STORE command announced %s %.64s but the data set's is %.64s; "
                          "not stored (A900): the sender must send the object under its own UIDs",
                          mismatch,
                          strcmp(mismatch, "SOP Class UID") == 0
                              ? source->announced_sop_class_uid
                              : source->announced_sop_instance_uid,
                          strcmp(mismatch, "SOP Class UID") == 0 ? record.sop_class_uid
                                                                 : record.sop_instance_uid);
        dcm_object_free(object);
        dcm_facts_free(&facts);
        ext_record_free(&record);
        reject(ingest, source, reason);
        return INGEST_OUTCOME_MISMATCHED;
    }
    record.source_path = source->is_spool ? NULL : strdup(source->path);

    store_put_outcome put = STORE_PUT_INSERTED;
    unsigned char *header_bytes = NULL;
    size_t header_size = 0;
    reading_plan plan;
    memset(&plan, 0, sizeof plan);
    long long instance_id = 0;
    char *stale_spool = NULL;
    double commit_started = 0; /* when the write was requested */
    if (record.calling_ae_title == NULL) {
        mitilog_error_set(reason, MITILOG_ERROR_MEMORY, "out of memory");
    } else if (retain(ingest, object, source, record.sop_instance_uid, &header_bytes, &header_size,
                      reason) != MITILOG_OK) {
        log_error("object %s: cannot keep its copy: %s", record.sop_instance_uid, reason->text);
    } else if (plan_reading(ingest, source, &facts, &record, &plan),
               commit_started = ingest_monotonic_seconds(),
               store_put_instance_read(
                   ingest->store, &record,
                   header_bytes != NULL ? &(store_bytes){header_bytes, header_size} : NULL,
                   plan.wanted ? &plan.request : NULL, &put, &instance_id, &stale_spool,
                   reason) != MITILOG_OK) {
        log_error("object %s not stored: %s", record.sop_instance_uid, reason->text);
        cancel_reading(ingest, &plan);
    } else {
        outcome = put == STORE_PUT_REPLACED ? INGEST_OUTCOME_REPLACED : INGEST_OUTCOME_STORED;
        metrics_commit_observed(ingest->metrics, ingest_monotonic_seconds() - commit_started);
        if (stale_spool != NULL)
            unlink(stale_spool); /* the older receipt's copy, no longer queued */
        if (plan.wanted && plan.request.not_read_reason == NULL)
            ingest_reading_push(&ingest->reading, instance_id, record.sop_instance_uid,
                                record.study_instance_uid, plan.request.path, plan.request.owned,
                                plan.request.bytes);
        else if (plan.wanted) {
            metrics_pixel_refused(ingest->metrics, plan.refusal);
            log_warning("object %s: pixel values not read: %s", record.sop_instance_uid,
                        plan.request.not_read_reason);
        }
        ingest_exams_wake(&ingest->exams); /* its study was marked in the commit */
        log_debug("object %s stored (%s)", record.sop_instance_uid,
                  put == STORE_PUT_REPLACED ? "replaced" : "new");
    }
    free(stale_spool);
    free(header_bytes);
    dcm_object_free(object);
    dcm_facts_free(&facts);
    ext_record_free(&record);
    return outcome;
}

mitilog_status ingest_read_stored(ingest *ingest, const char *from, const char *to,
                                  ingest_backfill_counts *counts, mitilog_error *error)
{
    ingest_backfill_counts local = {0};
    store_reading_entry *entries = NULL;
    size_t count = 0;
    /* What an earlier run left queued is read first, so that the list
     * below holds every capture of the period. */
    ingest_reading_flush(&ingest->reading);
    mitilog_status status =
        store_reading_backfill_candidates(ingest->store, from, to, &entries, &count, error);
    for (size_t i = 0; status == MITILOG_OK && i < count; i++) {
        store_reading_entry *entry = &entries[i];
        char path[PATH_SIZE] = "";
        mitilog_error ignored;
        struct stat info;
        if (hashed_path(ingest->objects, entry->sop_instance_uid, path, &ignored) != MITILOG_OK ||
            stat(path, &info) != 0) {
            if (entry->path != NULL && stat(entry->path, &info) == 0)
                snprintf(path, sizeof path, "%s", entry->path);
            else {
                local.not_kept++;
                continue;
            }
        }
        dcm_object *object = NULL;
        dcm_facts facts;
        memset(&facts, 0, sizeof facts);
        int wanted = dcm_object_load(path, &object, &ignored) == MITILOG_OK &&
                     dcm_object_facts(object, 1, &facts, &ignored) == MITILOG_OK &&
                     ingest_reading_wants(&ingest->reading, &facts, 1);
        dcm_facts_free(&facts);
        dcm_object_free(object);
        if (!wanted) {
            local.no_profile++;
            continue;
        }
        char reason[MITILOG_ERROR_TEXT_SIZE];
        long long bytes = (long long)info.st_size;
        int reserved = ingest_reading_reserve(&ingest->reading, bytes, reason, sizeof reason);
        if (!reserved) {
            /* A full queue: wait for it to empty, then try once more. */
            ingest_reading_flush(&ingest->reading);
            reserved = ingest_reading_reserve(&ingest->reading, bytes, reason, sizeof reason);
        }
        if (!reserved) {
            local.queue_full++;
            continue;
        }
        store_reading_request request = {path, 0, bytes, NULL};
        status = store_reading_enqueue(ingest->store, entry->instance_id, &request, error);
        if (status != MITILOG_OK) {
            ingest_reading_release(&ingest->reading, bytes);
            break;
        }
        ingest_reading_push(&ingest->reading, entry->instance_id, entry->sop_instance_uid,
                            entry->study_instance_uid, path, 0, bytes);
        local.queued++;
    }
    store_reading_entries_free(entries, count);
    ingest_flush(ingest);
    if (counts != NULL) {
        counts->queued += local.queued;
        counts->not_kept += local.not_kept;
        counts->no_profile += local.no_profile;
        counts->queue_full += local.queue_full;
    }
    return status;
}

void ingest_mark_study(ingest *ingest, const char *study_instance_uid)
{
    ingest_exams_mark(&ingest->exams, study_instance_uid);
}

uint16_t ingest_store_handler(void *context, const dcm_received *object)
{
    ingest_source source = {object->spool_path,
                            1,
                            object->calling_ae_title ? object->calling_ae_title : "",
                            object->peer_address ? object->peer_address : "",
                            object->affected_sop_class_uid ? object->affected_sop_class_uid : "",
                            object->affected_sop_instance_uid ? object->affected_sop_instance_uid
                                                              : "",
                            object->association_id,
                            NULL};
    mitilog_error reason;
    switch (ingest_object(context, &source, &reason)) {
    case INGEST_OUTCOME_STORED:
    case INGEST_OUTCOME_REPLACED: return DCM_STATUS_SUCCESS;
    case INGEST_OUTCOME_REJECTED: return DCM_STATUS_CANNOT_UNDERSTAND;
    case INGEST_OUTCOME_MISMATCHED: return DCM_STATUS_DATA_SET_MISMATCH;
    case INGEST_OUTCOME_NOT_STORED: break;
    }
    return DCM_STATUS_OUT_OF_RESOURCES;
}

/*
 * metrics.c - the metrics context (atomic counters, gauges, the commit
 * latency histogram) and its text exposition (metrics.h).
 *
 * The text follows the Prometheus text exposition format 0.0.4: one
 * "# HELP" and "# TYPE" line per family, then its samples; counters end
 * in _total, units are base units in the name (seconds, bytes), a
 * histogram has cumulative _bucket{le} samples ending with le="+Inf",
 * then _sum and _count (the Prometheus documentation, "Exposition
 * formats" and "Metric and label naming").
 */
#include "metrics/metrics.h"

#include <inttypes.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* Upper bounds (seconds) of the commit latency buckets: a commit that
 * syncs the write-ahead log takes a few milliseconds on a local disk,
 * group commit under load tens to hundreds; past 10 s a sender may give
 * up (its DIMSE timeout). Common practice, no source. */
static const double metrics_commit_bounds[] = {0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1,
                                               0.25,  0.5,    1.0,   2.5,  5.0,   10.0};
static const char *const metrics_commit_bound_texts[] = {
    "0.001", "0.0025", "0.005", "0.01", "0.025", "0.05", "0.1",
    "0.25",  "0.5",    "1",     "2.5",  "5",     "10"};
enum { METRICS_COMMIT_BUCKETS = sizeof metrics_commit_bounds / sizeof metrics_commit_bounds[0] };

/* The DIMSE statuses the receiver answers a C-STORE with (dcm.h); any
 * other is counted as "other". */
static const uint16_t metrics_statuses[] = {0x0000, 0xA700, 0xA900, 0xC000, 0xC001};
enum { METRICS_STATUS_COUNT = sizeof metrics_statuses / sizeof metrics_statuses[0] };

static const char *const metrics_refusal_labels[METRICS_REFUSAL_COUNT] = {
    [METRICS_REFUSAL_CALLED_AE_TITLE] = "called_ae_title",
    [METRICS_REFUSAL_CALLING_AE_TITLE] = "calling_ae_title",
    [METRICS_REFUSAL_NO_PRESENTATION_CONTEXT] = "no_presentation_context",
    [METRICS_REFUSAL_APPLICATION_CONTEXT] = "application_context",
    [METRICS_REFUSAL_TOO_MANY_ASSOCIATIONS] = "too_many_associations",
    [METRICS_REFUSAL_NEGOTIATION_LIMIT] = "negotiation_limit",
    [METRICS_REFUSAL_INVALID_REQUEST] = "invalid_request",
    [METRICS_REFUSAL_REQUEST_TIMEOUT] = "request_timeout",
    [METRICS_REFUSAL_INTERNAL_ERROR] = "internal_error",
};

static const char *const metrics_pixel_labels[METRICS_PIXEL_REFUSAL_COUNT] = {
    [METRICS_PIXEL_QUEUE_FULL] = "queue_full",
    [METRICS_PIXEL_NOT_KEPT] = "not_kept",
    [METRICS_PIXEL_NO_PROFILE] = "no_profile",
    [METRICS_PIXEL_SOFTWARE_CHANGED] = "software_changed",
    [METRICS_PIXEL_OBJECT_UNREADABLE] = "object_unreadable",
    [METRICS_PIXEL_FRAME_NOT_DECODED] = "frame_not_decoded",
    [METRICS_PIXEL_READER_FAILED] = "reader_failed",
    [METRICS_PIXEL_SCREEN_REFUSED] = "screen_refused",
};

static const char *const metrics_queue_labels[METRICS_QUEUE_COUNT] = {
    [METRICS_QUEUE_EXAM_REBUILD] = "exam_rebuild",
    [METRICS_QUEUE_PIXEL_READING] = "pixel_reading",
};

struct metrics {
    double start_seconds; /* wall clock at metrics_create(), read-only */
    atomic_uint_fast64_t associations_accepted;
    atomic_uint_fast64_t associations_refused[METRICS_REFUSAL_COUNT];
    atomic_uint_fast64_t objects[METRICS_STATUS_COUNT + 1]; /* last: other */
    atomic_uint_fast64_t bytes_received;
    atomic_uint_fast64_t last_received_ms; /* unix milliseconds; 0: none yet */
    /* Per bucket, not cumulative (the text adds them up); the last slot
     * holds commits over the largest bound (+Inf). */
    atomic_uint_fast64_t commit_buckets[METRICS_COMMIT_BUCKETS + 1];
    atomic_uint_fast64_t commit_nanoseconds;
    atomic_uint_fast64_t queues[METRICS_QUEUE_COUNT];
    atomic_uint_fast64_t pixel_read;
    atomic_uint_fast64_t documents_kept, documents_made;
    atomic_uint_fast64_t pixel_refused[METRICS_PIXEL_REFUSAL_COUNT];
};

mitilog_status metrics_create(metrics **out, mitilog_error *error)
{
    metrics *created = calloc(1, sizeof *created);
    if (created == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory for the metrics");
    struct timespec now;
    clock_gettime(CLOCK_REALTIME, &now);
    created->start_seconds = (double)now.tv_sec + (double)now.tv_nsec / 1e9;
    /* calloc's zero bytes are valid zero atomics on every platform we
     * build for; atomic_init says so for the standard's sake. */
    atomic_init(&created->associations_accepted, 0);
    for (size_t i = 0; i < METRICS_REFUSAL_COUNT; i++)
        atomic_init(&created->associations_refused[i], 0);
    for (size_t i = 0; i <= METRICS_STATUS_COUNT; i++)
        atomic_init(&created->objects[i], 0);
    atomic_init(&created->bytes_received, 0);
    atomic_init(&created->last_received_ms, 0);
    for (size_t i = 0; i <= METRICS_COMMIT_BUCKETS; i++)
        atomic_init(&created->commit_buckets[i], 0);
    atomic_init(&created->commit_nanoseconds, 0);
    for (size_t i = 0; i < METRICS_QUEUE_COUNT; i++)
        atomic_init(&created->queues[i], 0);
    atomic_init(&created->pixel_read, 0);
    atomic_init(&created->documents_kept, 0);
    atomic_init(&created->documents_made, 0);
    for (size_t i = 0; i < METRICS_PIXEL_REFUSAL_COUNT; i++)
        atomic_init(&created->pixel_refused[i], 0);
    *out = created;
    return MITILOG_OK;
}

void metrics_free(metrics *metrics) { free(metrics); }

/* ---- Reports ---------------------------------------------------------- */

void metrics_association_accepted(metrics *metrics)
{
    if (metrics != NULL)
        atomic_fetch_add(&metrics->associations_accepted, 1);
}

void metrics_association_refused(metrics *metrics, metrics_refusal reason)
{
    if (metrics == NULL)
        return;
    if ((unsigned)reason >= METRICS_REFUSAL_COUNT)
        reason = METRICS_REFUSAL_INTERNAL_ERROR;
    atomic_fetch_add(&metrics->associations_refused[reason], 1);
}

void metrics_object_answered(metrics *metrics, uint16_t status)
{
    if (metrics == NULL)
        return;
    size_t slot = METRICS_STATUS_COUNT;
    for (size_t i = 0; i < METRICS_STATUS_COUNT; i++)
        if (metrics_statuses[i] == status)
            slot = i;
    atomic_fetch_add(&metrics->objects[slot], 1);
}

void metrics_bytes_received(metrics *metrics, uint64_t bytes)
{
    if (metrics != NULL)
        atomic_fetch_add(&metrics->bytes_received, bytes);
}

void metrics_object_received(metrics *metrics, double unix_seconds)
{
    if (metrics == NULL || !(unix_seconds > 0))
        return;
    uint64_t milliseconds = (uint64_t)(unix_seconds * 1000.0);
    /* Keep the latest: objects of concurrent associations may report out
     * of order. */
    uint_fast64_t seen = atomic_load(&metrics->last_received_ms);
    while (seen < milliseconds &&
           !atomic_compare_exchange_weak(&metrics->last_received_ms, &seen, milliseconds)) {
    }
}

void metrics_commit_observed(metrics *metrics, double seconds)
{
    if (metrics == NULL)
        return;
    if (!(seconds >= 0))
        seconds = 0; /* a clock that went backwards: the fastest bucket */
    size_t slot = METRICS_COMMIT_BUCKETS;
    for (size_t i = 0; i < METRICS_COMMIT_BUCKETS; i++) {
        if (seconds <= metrics_commit_bounds[i]) { /* le: less than or equal */
            slot = i;
            break;
        }
    }
    atomic_fetch_add(&metrics->commit_buckets[slot], 1);
    if (seconds > 1e9)
        seconds = 1e9; /* keeps the sum's nanoseconds within 64 bits */
    atomic_fetch_add(&metrics->commit_nanoseconds, (uint64_t)(seconds * 1e9));
}

void metrics_queue_set(metrics *metrics, metrics_queue queue, uint64_t items)
{
    if (metrics != NULL && (unsigned)queue < METRICS_QUEUE_COUNT)
        atomic_store(&metrics->queues[queue], items);
}

void metrics_pixel_read(metrics *metrics)
{
    if (metrics != NULL)
        atomic_fetch_add(&metrics->pixel_read, 1);
}

void metrics_document_served(metrics *metrics, int kept)
{
    if (metrics != NULL)
        atomic_fetch_add(kept ? &metrics->documents_kept : &metrics->documents_made, 1);
}

void metrics_pixel_refused(metrics *metrics, metrics_pixel_refusal reason)
{
    if (metrics == NULL || (unsigned)reason >= METRICS_PIXEL_REFUSAL_COUNT)
        return;
    atomic_fetch_add(&metrics->pixel_refused[reason], 1);
}

void metrics_database_free(metrics_database *database)
{
    if (database == NULL)
        return;
    for (size_t i = 0; i < database->finding_count; i++) {
        free(database->findings[i].rule_id);
        free(database->findings[i].severity);
    }
    free(database->findings);
    memset(database, 0, sizeof *database);
}

/* ---- Text -------------------------------------------------------------- */

static void metrics_text_reserve(metrics_text *out, size_t more)
{
    if (out->failed || out->length + more + 1 <= out->capacity)
        return;
    size_t capacity = out->capacity != 0 ? out->capacity : 4096;
    while (capacity < out->length + more + 1)
        capacity *= 2;
    char *grown = realloc(out->data, capacity);
    if (grown == NULL) {
        out->failed = 1;
        return;
    }
    out->data = grown;
    out->capacity = capacity;
}

static void metrics_text_bytes(metrics_text *out, const char *bytes, size_t size)
{
    metrics_text_reserve(out, size);
    if (out->failed)
        return;
    memcpy(out->data + out->length, bytes, size);
    out->length += size;
    out->data[out->length] = '\0';
}

void metrics_text_append(metrics_text *out, const char *text)
{
    metrics_text_bytes(out, text, strlen(text));
}

void metrics_text_label_value(metrics_text *out, const char *value)
{
    for (const char *at = value; *at != '\0'; at++) {
        if (*at == '\\')
            metrics_text_bytes(out, "\\\\", 2);
        else if (*at == '"')
            metrics_text_bytes(out, "\\\"", 2);
        else if (*at == '\n')
            metrics_text_bytes(out, "\\n", 2);
        else
            metrics_text_bytes(out, at, 1);
    }
}

/* "# HELP name help" and "# TYPE name type" (help holds no backslash or
 * line feed, the two characters HELP text escapes). */
static void metrics_family(metrics_text *out, const char *name, const char *type, const char *help)
{
    metrics_text_append(out, "# HELP ");
    metrics_text_append(out, name);
    metrics_text_append(out, " ");
    metrics_text_append(out, help);
    metrics_text_append(out, "\n# TYPE ");
    metrics_text_append(out, name);
    metrics_text_append(out, " ");
    metrics_text_append(out, type);
    metrics_text_append(out, "\n");
}

/* One sample: name{label="value"} number, the label left out when
 * label is NULL. */
static void metrics_sample(metrics_text *out, const char *name, const char *label,
                           const char *label_value, const char *number)
{
    metrics_text_append(out, name);
    if (label != NULL) {
        metrics_text_append(out, "{");
        metrics_text_append(out, label);
        metrics_text_append(out, "=\"");
        metrics_text_label_value(out, label_value);
        metrics_text_append(out, "\"}");
    }
    metrics_text_append(out, " ");
    metrics_text_append(out, number);
    metrics_text_append(out, "\n");
}

static void metrics_sample_count(metrics_text *out, const char *name, const char *label,
                                 const char *label_value, uint64_t count)
{
    char number[32];
    snprintf(number, sizeof number, "%" PRIu64, count);
    metrics_sample(out, name, label, label_value, number);
}

static void metrics_write_pipeline(metrics_text *out, const metrics *m)
{
    metrics *counters = (metrics *)m; /* atomic_load takes a non-const pointer in C11 */
    char number[64];

    metrics_family(out, "process_start_time_seconds", "gauge",
                   "Start time of the process since the Unix epoch in seconds.");
    snprintf(number, sizeof number, "%.3f", m->start_seconds);
    metrics_sample(out, "process_start_time_seconds", NULL, NULL, number);

    metrics_family(out, "mitilog_associations_accepted_total", "counter",
                   "DICOM associations accepted.");
    metrics_sample_count(out, "mitilog_associations_accepted_total", NULL, NULL,
                         atomic_load(&counters->associations_accepted));
    metrics_family(out, "mitilog_associations_refused_total", "counter",
                   "DICOM associations and connections refused, by reason.");
    for (size_t i = 0; i < METRICS_REFUSAL_COUNT; i++)
        metrics_sample_count(out, "mitilog_associations_refused_total", "reason",
                             metrics_refusal_labels[i],
                             atomic_load(&counters->associations_refused[i]));

    metrics_family(out, "mitilog_objects_received_total", "counter",
                   "C-STORE requests answered, by DIMSE status (hexadecimal).");
    for (size_t i = 0; i <= METRICS_STATUS_COUNT; i++) {
        uint64_t count = atomic_load(&counters->objects[i]);
        if (i == METRICS_STATUS_COUNT && count == 0)
            break; /* "other" only once there is one */
        char status[8] = "other";
        if (i < METRICS_STATUS_COUNT)
            snprintf(status, sizeof status, "%04X", (unsigned)metrics_statuses[i]);
        metrics_sample_count(out, "mitilog_objects_received_total", "status", status, count);
    }

    metrics_family(out, "mitilog_received_bytes_total", "counter",
                   "Data set bytes of C-STORE requests received, discarded ones included.");
    metrics_sample_count(out, "mitilog_received_bytes_total", NULL, NULL,
                         atomic_load(&counters->bytes_received));

    uint64_t last = atomic_load(&counters->last_received_ms);
    if (last != 0) { /* no sample until an object arrived: never a false 0 */
        metrics_family(out, "mitilog_last_object_received_timestamp_seconds", "gauge",
                       "When the latest object arrived, seconds since the Unix epoch.");
        snprintf(number, sizeof number, "%" PRIu64 ".%03u", last / 1000, (unsigned)(last % 1000));
        metrics_sample(out, "mitilog_last_object_received_timestamp_seconds", NULL, NULL, number);
    }

    /* Buckets first, _count as their sum: a scrape during a report still
     * shows _count equal to the +Inf bucket. */
    metrics_family(out, "mitilog_commit_duration_seconds", "histogram",
                   "Time from an object's write request to the commit that holds it.");
    uint64_t cumulative = 0;
    for (size_t i = 0; i <= METRICS_COMMIT_BUCKETS; i++) {
        cumulative += atomic_load(&counters->commit_buckets[i]);
        metrics_sample_count(out, "mitilog_commit_duration_seconds_bucket", "le",
                             i < METRICS_COMMIT_BUCKETS ? metrics_commit_bound_texts[i] : "+Inf",
                             cumulative);
    }
    uint64_t nanoseconds = atomic_load(&counters->commit_nanoseconds);
    snprintf(number, sizeof number, "%" PRIu64 ".%09" PRIu64, nanoseconds / 1000000000u,
             nanoseconds % 1000000000u);
    metrics_sample(out, "mitilog_commit_duration_seconds_sum", NULL, NULL, number);
    metrics_sample_count(out, "mitilog_commit_duration_seconds_count", NULL, NULL, cumulative);

    metrics_family(out, "mitilog_queue_items", "gauge",
                   "Work waiting: studies whose exam record is to be rebuilt, objects whose "
                   "pixels are to be read.");
    for (size_t i = 0; i < METRICS_QUEUE_COUNT; i++)
        metrics_sample_count(out, "mitilog_queue_items", "queue", metrics_queue_labels[i],
                             atomic_load(&counters->queues[i]));

    metrics_family(out, "mitilog_pixel_objects_read_total", "counter",
                   "Objects whose indices were read from the pixels with a screen profile.");
    metrics_sample_count(out, "mitilog_pixel_objects_read_total", NULL, NULL,
                         atomic_load(&counters->pixel_read));
    metrics_family(out, "mitilog_pixel_objects_refused_total", "counter",
                   "Objects whose indices were not read from the pixels, by reason.");
    for (size_t i = 0; i < METRICS_PIXEL_REFUSAL_COUNT; i++)
        metrics_sample_count(out, "mitilog_pixel_objects_refused_total", "reason",
                             metrics_pixel_labels[i], atomic_load(&counters->pixel_refused[i]));

    metrics_family(out, "mitilog_documents_served_total", "counter",
                   "Documents of the period views answered: kept (from the database, their "
                   "data unchanged) or made now from the rows.");
    metrics_sample_count(out, "mitilog_documents_served_total", "way", "kept",
                         atomic_load(&counters->documents_kept));
    metrics_sample_count(out, "mitilog_documents_served_total", "way", "made",
                         atomic_load(&counters->documents_made));
}

static void metrics_write_database(metrics_text *out, const metrics_database *database)
{
    metrics_family(out, "mitilog_database_up", "gauge",
                   "1 when the database answered this scrape's queries, else 0.");
    metrics_sample(out, "mitilog_database_up", NULL, NULL, database->readable ? "1" : "0");
    if (!database->readable)
        return;
    if (database->has_size) {
        metrics_family(out, "mitilog_database_size_bytes", "gauge",
                       "Size of the database in bytes, by the database engine's own measure.");
        metrics_sample_count(out, "mitilog_database_size_bytes", NULL, NULL, database->size_bytes);
    }
    metrics_family(out, "mitilog_findings", "gauge",
                   "Current findings of the ALARA policy (not superseded), by rule and severity.");
    for (size_t i = 0; i < database->finding_count; i++) {
        const metrics_finding_count *row = &database->findings[i];
        char number[32];
        snprintf(number, sizeof number, "%" PRIu64, row->count);
        metrics_text_append(out, "mitilog_findings{rule=\"");
        metrics_text_label_value(out, row->rule_id != NULL ? row->rule_id : "");
        metrics_text_append(out, "\",severity=\"");
        metrics_text_label_value(out, row->severity != NULL ? row->severity : "");
        metrics_text_append(out, "\"} ");
        metrics_text_append(out, number);
        metrics_text_append(out, "\n");
    }
}

mitilog_status metrics_exposition(const metrics *metrics, const metrics_database *database,
                                  const char *version, const char *site, char **text,
                                  mitilog_error *error)
{
    if (metrics == NULL || text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "metrics_exposition: no metrics or result");
    *text = NULL;
    metrics_text out = {NULL, 0, 0, 0};
    metrics_family(&out, "mitilog_build_info", "gauge",
                   "Always 1; the version label names the running build, the site label the "
                   "receiver's site.");
    /* Two labels: the version, and the site, which tells apart the
     * scrapes of receivers sharing one database. */
    metrics_text_append(&out, "mitilog_build_info{version=\"");
    metrics_text_label_value(&out, version != NULL ? version : "");
    metrics_text_append(&out, "\",site=\"");
    metrics_text_label_value(&out, site != NULL ? site : "");
    metrics_text_append(&out, "\"} 1\n");
    metrics_write_pipeline(&out, metrics);
    if (database != NULL)
        metrics_write_database(&out, database);
    if (out.failed || out.data == NULL) {
        free(out.data);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory writing the metrics");
    }
    *text = out.data;
    return MITILOG_OK;
}

/*
 * store_instances.c - the store's instances (store_instances.h): checking
 * and writing an instance row with its SR values and header copy (and,
 * through store_readings.c, its reading queue row) in one group-commit
 * request, rejected objects, header copies read back, and the instance,
 * study and ingest documents of the HTTP API. SQL: sql/queries/instances/.
 */
#include "store/store_instances.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "extract/ext_modes.h"
#include "extract/ext_sr.h"
#include "extract/ext_text.h"
#include "store/store_internal.h"

enum { STORE_LIMIT_DEFAULT = 1000, STORE_LIMIT_MAX = 10000 };

/* The schema's name of a value status (CHECK constraint), NULL if bad. */
static const char *store_value_status_name(exam_value_status status)
{
    switch (status) {
    case EXAM_VALUE_MISSING: return "missing";
    case EXAM_VALUE_OK: return "ok";
    case EXAM_VALUE_INVALID: return "invalid";
    }
    return NULL;
}

/* The stored name of an acquisition time source, NULL if bad. Must match
 * ext_time_source_name() (src/extract/) and the schema's CHECK constraint:
 * the stored spelling is the store's, the meaning extraction's. */
static const char *store_time_source_name(ext_time_source source)
{
    switch (source) {
    case EXT_TIME_NONE: return "none";
    case EXT_TIME_ACQUISITION_DATE_TIME: return "acquisition_datetime";
    case EXT_TIME_ACQUISITION: return "acquisition";
    case EXT_TIME_CONTENT: return "content";
    case EXT_TIME_INSTANCE_CREATION: return "instance_creation";
    case EXT_TIME_STUDY: return "study";
    }
    return NULL;
}

/* 1 if text (may be NULL) is well-formed UTF-8: JSON output needs it. */
static int store_is_utf8(const char *text) { return text == NULL || ext_text_is_utf8(text); }

/* Checks a value classification: a known status, a finite value when ok. */
static int store_number_is_valid(exam_number number)
{
    if (store_value_status_name(number.status) == NULL)
        return 0;
    return number.status != EXAM_VALUE_OK || isfinite(number.value);
}

/* Rejects records the schema would refuse or that could not be served as
 * JSON, before they reach the queue. */
static mitilog_status store_check_record(const ext_record *record, mitilog_error *error)
{
    if (record == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no record");
    if (record->sop_instance_uid == NULL || record->sop_instance_uid[0] == 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "record without SOP Instance UID");
    if (record->sop_class_uid == NULL || record->sop_class_uid[0] == 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: record without SOP Class UID",
                                 record->sop_instance_uid);
    if (memchr(record->acquired_at, 0, sizeof record->acquired_at) == NULL ||
        memchr(record->received_at, 0, sizeof record->received_at) == NULL ||
        store_time_source_name(record->acquired_at_source) == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "%s: bad acquisition or receipt time", record->sop_instance_uid);
    int numbers_ok = store_number_is_valid(record->number_of_frames) &&
                     store_number_is_valid(record->frame_time_ms) &&
                     (record->number_of_frames.status != EXAM_VALUE_OK ||
                      fabs(record->number_of_frames.value) < 9.0e15);
    for (int i = 0; i < EXAM_INDEX_COUNT; i++)
        numbers_ok = numbers_ok && store_number_is_valid(record->indices[i]);
    if (!numbers_ok)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: bad value classification",
                                 record->sop_instance_uid);
    const char *texts[] = {record->sop_class_uid,
                           record->sop_instance_uid,
                           record->study_instance_uid,
                           record->series_instance_uid,
                           record->modality,
                           record->station_name,
                           record->institutional_department_name,
                           record->study_description,
                           record->accession_number,
                           record->protocol_name,
                           record->transfer_syntax_uid,
                           record->calling_ae_title,
                           record->source_path,
                           record->acquired_at,
                           record->received_at,
                           record->index_raw[0],
                           record->index_raw[1],
                           record->index_raw[2],
                           record->index_raw[3],
                           record->index_raw[4],
                           record->index_raw[5],
                           record->specific_character_set,
                           record->image_type,
                           record->series_description,
                           record->body_part_examined,
                           record->performed_procedure_step_description,
                           record->procedure_codes,
                           record->transducer_data,
                           record->transducer_type,
                           record->exam_type,
                           record->exam_type_label,
                           record->preset,
                           record->room,
                           record->shift,
                           record->operator_name,
                           record->gestational_age_source};
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++) {
        if (!store_is_utf8(texts[i]))
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "%s: text attribute is not UTF-8", record->sop_instance_uid);
    }
    return MITILOG_OK;
}

/* Binds a classified number to :<name> (value or NULL) and
 * :<name>_status; as an integer when integer is set. */
static void store_bind_number(store_query *query, const char *name, exam_number number, int integer)
{
    char parameter[64];
    snprintf(parameter, sizeof parameter, ":%s", name);
    if (number.status != EXAM_VALUE_OK)
        store_bind_null(query, parameter);
    else if (integer)
        store_bind_integer(query, parameter, (long long)number.value);
    else
        store_bind_real(query, parameter, 1, number.value);
    snprintf(parameter, sizeof parameter, ":%s_status", name);
    store_bind_text(query, parameter, store_value_status_name(number.status));
}

static const char *store_bitmap_status_name(int status)
{
    return status == 1 ? "ok" : status == 2 ? "invalid" : "missing";
}

/* Binds the exam-context columns (migration 002) from record. */
static void store_bind_context(store_query *query, const ext_record *record)
{
    static const char *const kinds[] = {"other", "image", "multiframe", "volume", "sr"};
    const char *kind = (unsigned)record->kind < 5 ? kinds[record->kind] : "other";
    const struct {
        const char *name;
        const char *value;
    } texts[] = {
        {":object_kind", kind},
        {":specific_character_set", record->specific_character_set},
        {":image_type", record->image_type},
        {":series_description", record->series_description},
        {":body_part_examined", record->body_part_examined},
        {":performed_procedure_step_description", record->performed_procedure_step_description},
        {":procedure_codes", record->procedure_codes},
        {":image_type_bitmap_status", store_bitmap_status_name(record->image_type_bitmap_status)},
        {":transducer_data", record->transducer_data},
        {":transducer_source", record->transducer_source},
        {":transducer_type", record->transducer_type},
        {":frequency_source", record->has_frequency ? record->frequency_source : NULL},
        {":exam_type", record->exam_type},
        {":exam_type_label", record->exam_type_label},
        {":exam_type_source", record->exam_type_source},
        {":governing_index",
         record->has_governing_index ? exam_index_name(record->governing_index) : NULL},
        {":governing_index_source",
         record->has_governing_index ? record->governing_index_source : NULL},
        {":gestational_age_source",
         record->has_gestational_age ? record->gestational_age_source : NULL},
        {":preset", record->preset},
        {":preset_source", record->preset_source},
        {":room", record->room},
        {":room_source", record->room_source},
        {":shift", record->shift},
        {":shift_source", record->shift_source},
        {":age_group", record->age_group},
        {":age_group_source", record->age_group_source},
        {":operator_name", record->operator_name},
        {":operator_source", record->operator_source},
        {":overlong_fields", record->overlong_fields[0] != '\0' ? record->overlong_fields : NULL},
    };
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++)
        store_bind_text(query, texts[i].name, texts[i].value);
    store_bind_integer(query, ":has_acoustic_record", record->has_acoustic_record ? 1 : 0);
    store_bind_integer(query, ":modes", record->modes);
    store_bind_integer(query, ":modes_image_type", record->modes_image_type);
    store_bind_integer(query, ":modes_regions", record->modes_regions);
    store_bind_integer(query, ":modes_sr", record->modes_sr);
    if (record->image_type_bitmap_status == 1)
        store_bind_integer(query, ":image_type_bitmap", record->image_type_bitmap);
    else
        store_bind_null(query, ":image_type_bitmap");
    store_bind_integer(query, ":modes_conflict", record->modes_conflict ? 1 : 0);
    if (record->has_frequency)
        store_bind_integer(query, ":frequency_khz", record->frequency_khz);
    else
        store_bind_null(query, ":frequency_khz");
    store_bind_real(query, ":cine_seconds", record->cine_seconds > 0, record->cine_seconds);
    store_bind_real(query, ":gestational_age_weeks", record->has_gestational_age,
                    record->gestational_age_weeks);
    store_bind_integer(query, ":text_replaced", record->text_replaced ? 1 : 0);
}

/* Binds every parameter of queries/instances/instance_upsert.sql from record. */
static void store_bind_instance(store_query *query, const ext_record *record)
{
    const struct {
        const char *name;
        const char *value;
    } texts[] = {
        {":sop_instance_uid", record->sop_instance_uid},
        {":sop_class_uid", record->sop_class_uid},
        {":study_instance_uid", record->study_instance_uid},
        {":series_instance_uid", record->series_instance_uid},
        {":modality", record->modality},
        {":station_name", record->station_name},
        {":institutional_department_name", record->institutional_department_name},
        {":study_description", record->study_description},
        {":accession_number", record->accession_number},
        {":protocol_name", record->protocol_name},
        {":transfer_syntax_uid", record->transfer_syntax_uid},
        {":calling_ae_title", record->calling_ae_title},
        {":source_path", record->source_path},
        {":acquired_at", record->acquired_at[0] != 0 ? record->acquired_at : NULL},
        {":acquired_at_source", store_time_source_name(record->acquired_at_source)},
        {":received_at", record->received_at},
    };
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++)
        store_bind_text(query, texts[i].name, texts[i].value);
    store_bind_number(query, "number_of_frames", record->number_of_frames, 1);
    store_bind_number(query, "frame_time_ms", record->frame_time_ms, 0);
    store_bind_integer(query, ":is_ultrasound", record->is_ultrasound ? 1 : 0);
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        char parameter[64];
        store_bind_number(query, exam_index_name((exam_index)i), record->indices[i], 0);
        snprintf(parameter, sizeof parameter, ":%s_raw", exam_index_name((exam_index)i));
        store_bind_text(query, parameter, record->index_raw[i]);
    }
    store_bind_context(query, record);
}

/* One instance write: the request's input and, once written, its outputs. */
typedef struct store_instance_write {
    const ext_record *record;
    const store_bytes *header;                   /* or NULL */
    const struct store_reading_request *reading; /* or NULL */
    store_put_outcome outcome;
    long long instance_id;
    char *stale_spool; /* malloc'd, or NULL */
} store_instance_write;

static mitilog_status store_instance_error(mitilog_error *error, const ext_record *record,
                                           const char *what, const store_query *query)
{
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s: %s", record->sop_instance_uid,
                             what, query->error.text);
}

static mitilog_status store_write_sr_value(store_link *writer, long long instance_id,
                                           const ext_record *record, const ext_sr_value *value,
                                           mitilog_error *error)
{
    store_query query;
    store_query_begin(&query, writer, "queries/instances/sr_value_insert.sql");
    store_bind_integer(&query, ":instance_id", instance_id);
    store_bind_text(&query, ":study_instance_uid", record->study_instance_uid);
    store_bind_text(&query, ":quantity", ext_quantity_name(value->quantity));
    store_bind_real(&query, ":value", value->number.status == EXAM_VALUE_OK, value->number.value);
    store_bind_text(&query, ":raw_value", value->raw);
    store_bind_text(&query, ":unit", value->unit);
    store_bind_real(&query, ":normalised", value->normalised_ok, value->normalised);
    store_bind_text(&query, ":concept", value->concept);
    store_bind_text(&query, ":concept_meaning", value->meaning);
    store_bind_text(&query, ":item_position", value->position);
    store_bind_text(&query, ":mode",
                    value->mode >= 0 ? exam_mode_name((exam_mode)value->mode) : NULL);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return store_instance_error(error, record, "store SR value", &query);
    return MITILOG_OK;
}

/* The rows that go with an instance row: its SR values (sr_values) and
 * its header copy (instance_headers), rewritten whenever the instance is
 * (re)stored (its modes are columns of the row itself, migration 004). */
static mitilog_status store_write_instance_context(store_link *writer, const ext_record *record,
                                                   const store_bytes *header, long long instance_id,
                                                   mitilog_error *error)
{
    store_query query;
    store_query_begin(&query, writer, "queries/instances/sr_values_delete.sql");
    store_bind_integer_at(&query, 1, instance_id);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return store_instance_error(error, record, "clear SR values", &query);
    /* The header copy, or no copy: an older one is removed. */
    store_query_begin(&query, writer,
                      header != NULL ? "queries/instances/instance_header_upsert.sql"
                                     : "queries/instances/instance_header_delete.sql");
    store_bind_integer(&query, ":instance_id", instance_id);
    if (header != NULL)
        store_bind_blob(&query, ":bytes", header->data, header->size);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return store_instance_error(error, record, "store header copy", &query);
    for (size_t i = 0; record->sr != NULL && i < record->sr->value_count; i++) {
        const ext_sr_value *value = &record->sr->values[i];
        if ((value->raw != NULL && !store_is_utf8(value->raw)) ||
            (value->meaning != NULL && !store_is_utf8(value->meaning)) ||
            !store_is_utf8(value->concept) || (value->unit != NULL && !store_is_utf8(value->unit)))
            continue; /* not servable as JSON: left out, the item is logged */
        mitilog_status status = store_write_sr_value(writer, instance_id, record, value, error);
        if (status != MITILOG_OK)
            return status;
    }
    return MITILOG_OK;
}

/* Writes one instance row with its context and reading (inside the
 * batch's transaction). */
static mitilog_status store_write_instance(store_link *writer, void *context, mitilog_error *error)
{
    store_instance_write *write = context;
    const ext_record *record = write->record;
    write->outcome = STORE_PUT_INSERTED;
    store_query query;
    store_query_begin(&query, writer, "queries/instances/instance_upsert.sql");
    store_bind_instance(&query, record);
    if (!store_query_step(&query)) {
        if (query.status == MITILOG_OK)
            query.status = mitilog_error_set(&query.error, MITILOG_ERROR_DATABASE, "no row");
        store_query_end(&query);
        return store_instance_error(error, record, "store instance", &query);
    }
    write->outcome = store_column_integer(&query, 0) > 0 ? STORE_PUT_REPLACED : STORE_PUT_INSERTED;
    long long instance_id = store_column_integer(&query, 1);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return store_instance_error(error, record, "store instance", &query);
    write->instance_id = instance_id;
    mitilog_status status =
        store_write_instance_context(writer, record, write->header, instance_id, error);
    if (status == MITILOG_OK) {
        free(write->stale_spool);
        write->stale_spool = NULL;
        status =
            store_readings_write(writer, write->reading, instance_id,
                                 write->outcome == STORE_PUT_REPLACED, &write->stale_spool, error);
    }
    return status;
}

/* Checks and submits one instance write; write's outputs are set on
 * MITILOG_OK (its stale_spool otherwise freed). */
static mitilog_status store_submit_instance(store *st, store_instance_write *write,
                                            mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no store");
    mitilog_status status = store_check_record(write->record, error);
    if (status != MITILOG_OK)
        return status;
    if (write->header != NULL && (write->header->data == NULL || write->header->size == 0))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: empty header copy",
                                 write->record->sop_instance_uid);
    status = store_commit_submit(st, store_write_instance, write, error);
    if (status != MITILOG_OK) {
        free(write->stale_spool);
        write->stale_spool = NULL;
    }
    return status;
}

mitilog_status store_put_instance(store *st, const ext_record *record, const store_bytes *header,
                                  store_put_outcome *outcome, mitilog_error *error)
{
    store_instance_write write = {.record = record, .header = header};
    mitilog_status status = store_submit_instance(st, &write, error);
    if (status == MITILOG_OK && outcome != NULL)
        *outcome = write.outcome;
    if (status == MITILOG_OK && write.stale_spool != NULL)
        unlink(write.stale_spool); /* an older spool copy nobody will read */
    free(write.stale_spool);
    return status;
}

mitilog_status store_put_instance_read(store *st, const ext_record *record,
                                       const store_bytes *header,
                                       const store_reading_request *reading,
                                       store_put_outcome *outcome, long long *instance_id,
                                       char **stale_spool, mitilog_error *error)
{
    if (stale_spool != NULL)
        *stale_spool = NULL;
    store_instance_write write = {.record = record, .header = header, .reading = reading};
    mitilog_status status = store_submit_instance(st, &write, error);
    if (status == MITILOG_OK && outcome != NULL)
        *outcome = write.outcome;
    if (status == MITILOG_OK && instance_id != NULL)
        *instance_id = write.instance_id;
    if (stale_spool != NULL && status == MITILOG_OK)
        *stale_spool = write.stale_spool;
    else
        free(write.stale_spool);
    return status;
}

/* Writes one rejection row (inside the batch's transaction); NULL fields
 * are stored as "". */
static mitilog_status store_write_rejection(store_link *writer, void *context, mitilog_error *error)
{
    const store_rejection *rejection = context;
#define STORE_TEXT(field) ((field) != NULL ? (field) : "")
    const struct {
        const char *name;
        const char *value;
    } texts[] = {
        {":received_at", STORE_TEXT(rejection->received_at)},
        {":calling_ae_title", STORE_TEXT(rejection->calling_ae_title)},
        {":peer_address", STORE_TEXT(rejection->peer_address)},
        {":sop_class_uid", STORE_TEXT(rejection->sop_class_uid)},
        {":sop_instance_uid", STORE_TEXT(rejection->sop_instance_uid)},
        {":source_path", STORE_TEXT(rejection->source_path)},
        {":quarantine_path", STORE_TEXT(rejection->quarantine_path)},
        {":reason", STORE_TEXT(rejection->reason)},
    };
#undef STORE_TEXT
    store_query query;
    store_query_begin(&query, writer, "queries/instances/rejection_insert.sql");
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++)
        store_bind_text(&query, texts[i].name, texts[i].value);
    store_query_run(&query);
    if (store_query_end(&query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "store rejection: %s",
                                 query.error.text);
    return MITILOG_OK;
}

mitilog_status store_put_rejection(store *st, const store_rejection *rejection,
                                   mitilog_error *error)
{
    if (st == NULL || rejection == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no store or no rejection");
    if (rejection->reason == NULL || rejection->reason[0] == '\0')
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "rejection without a reason");
    return store_commit_submit(st, store_write_rejection, (void *)rejection, error);
}

mitilog_status store_get_header(store *st, const char *sop_instance_uid, unsigned char **bytes,
                                size_t *size, mitilog_error *error)
{
    if (st == NULL || sop_instance_uid == NULL || bytes == NULL || size == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_get_header: NULL argument");
    *bytes = NULL;
    *size = 0;
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/instances/instance_header_select.sql");
    store_bind_text_at(&query, 1, sop_instance_uid);
    if (store_query_step(&query)) {
        size_t length = store_column_bytes(&query, 0);
        const void *data = store_column_blob(&query, 0);
        *bytes = malloc(length > 0 ? length : 1);
        if (*bytes == NULL)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
        else if (length > 0)
            memcpy(*bytes, data, length);
        *size = length;
    }
    if (store_query_end(&query) != MITILOG_OK)
        status =
            mitilog_error_set(error, MITILOG_ERROR_DATABASE, "header copy: %s", query.error.text);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

/* The row limit actually applied: default for <= 0, capped at the max. */
static long store_clamp_limit(long limit)
{
    if (limit <= 0)
        return STORE_LIMIT_DEFAULT;
    return limit > STORE_LIMIT_MAX ? STORE_LIMIT_MAX : limit;
}

mitilog_status store_instances_json(store *st, const store_instance_filter *filter, char **json,
                                    mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_instances_json: no store or result");
    *json = NULL;
    store_instance_filter none = {NULL, NULL, 0};
    if (filter == NULL)
        filter = &none;
    long limit = store_clamp_limit(filter->limit);
    int by_study = filter->study_instance_uid != NULL && filter->study_instance_uid[0] != '\0';

    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    if (by_study) {
        store_query_begin(&query, &st->reader, "queries/instances/instances_by_study.sql");
        store_bind_filter_at(&query, 1, filter->study_instance_uid);
        store_bind_filter_at(&query, 2, filter->since);
        store_bind_integer_at(&query, 3, limit);
    } else {
        store_query_begin(&query, &st->reader, "queries/instances/instances_since.sql");
        store_bind_filter_at(&query, 1, filter->since);
        store_bind_integer_at(&query, 2, limit);
    }
    mitilog_status status = store_query_text(&query, "query instances", 0, json, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_studies_json(store *st, const char *from, const char *to, char **json,
                                  mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_studies_json: no store or result");
    *json = NULL;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/instances/studies.sql");
    store_bind_filter_at(&query, 1, from);
    store_bind_filter_at(&query, 2, to);
    mitilog_status status = store_query_text(&query, "query studies", 0, json, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_ingest_json(store *st, int window_hours, int silent_hours, int days,
                                 char **json, mitilog_error *error)
{
    *json = NULL;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_ingest_json: no store");
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/instances/ingest_status.sql");
    store_bind_integer_at(&query, 1, window_hours);
    store_bind_integer_at(&query, 2, silent_hours);
    store_bind_integer_at(&query, 3, days);
    mitilog_status status = store_query_text(&query, "query ingest status", 0, json, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

/*
 * store_write.c - writing with group commit.
 *
 * Callers of store_put_* queue a request and wait. Whoever finds no batch
 * being written becomes the leader: it takes the queued requests (at most
 * STORE_BATCH_MAX), writes them on the writer connection inside one
 * BEGIN IMMEDIATE ... COMMIT (when one of them fails on its own, the batch
 * is written again one record per transaction, so a bad record fails
 * alone), and wakes every waiter with its own result. So a
 * caller returns only after the commit that holds its record, and many
 * concurrent associations share one WAL sync.
 *
 * If the commit fails (or SQLite rolls the transaction back by itself, as
 * it may on a full disk or an I/O error), every record of the batch fails
 * with MITILOG_ERROR_DATABASE and nothing of them is kept; the connection
 * is rolled back so that the next batch starts clean.
 */
#include "store/store_internal.h"
#include "store/store_reading.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "extract/ext_text.h"
#include "util/log.h"

enum { STORE_BATCH_MAX = 256 };

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

int store_is_text_utf8(const char *text) { return store_is_utf8(text); }

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

/* Binds text (NULL: SQL NULL) to the named parameter. SQLITE_STATIC: the
 * caller's record outlives the statement's use (bindings are cleared). */
static int store_bind_text(store *st, sqlite3_stmt *statement, const char *name, const char *value)
{
    int index = store_parameter_index(st, statement, name);
    if (index == 0)
        return SQLITE_RANGE;
    if (value == NULL)
        return sqlite3_bind_null(statement, index);
    return sqlite3_bind_text(statement, index, value, -1, SQLITE_STATIC);
}

/* Binds a classified number to :<name> (value or NULL) and
 * :<name>_status; as an integer when integer is set. */
static int store_bind_number(store *st, sqlite3_stmt *statement, const char *name,
                             exam_number number, int integer)
{
    char parameter[64];
    snprintf(parameter, sizeof parameter, ":%s", name);
    int index = store_parameter_index(st, statement, parameter);
    if (index == 0)
        return SQLITE_RANGE;
    int rc;
    if (number.status != EXAM_VALUE_OK)
        rc = sqlite3_bind_null(statement, index);
    else if (integer)
        rc = sqlite3_bind_int64(statement, index, (sqlite3_int64)number.value);
    else
        rc = sqlite3_bind_double(statement, index, number.value);
    if (rc != SQLITE_OK)
        return rc;
    snprintf(parameter, sizeof parameter, ":%s_status", name);
    return store_bind_text(st, statement, parameter, store_value_status_name(number.status));
}

int store_bind_text_named(store *st, sqlite3_stmt *statement, const char *name, const char *value)
{
    return store_bind_text(st, statement, name, value);
}

int store_bind_double_named(store *st, sqlite3_stmt *statement, const char *name, int present,
                            double value)
{
    int index = store_parameter_index(st, statement, name);
    if (index == 0)
        return SQLITE_RANGE;
    if (!present || !isfinite(value))
        return sqlite3_bind_null(statement, index);
    return sqlite3_bind_double(statement, index, value);
}

int store_bind_int_named(store *st, sqlite3_stmt *statement, const char *name, sqlite3_int64 value)
{
    int index = store_parameter_index(st, statement, name);
    if (index == 0)
        return SQLITE_RANGE;
    return sqlite3_bind_int64(statement, index, value);
}

static const char *store_bitmap_status_name(int status)
{
    return status == 1 ? "ok" : status == 2 ? "invalid" : "missing";
}

/* Binds the exam-context columns (migration 002) from record. */
static int store_bind_context(store *st, sqlite3_stmt *statement, const ext_record *record)
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
    int rc = SQLITE_OK;
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof texts / sizeof texts[0]; i++)
        rc = store_bind_text(st, statement, texts[i].name, texts[i].value);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":has_acoustic_record",
                                  record->has_acoustic_record ? 1 : 0);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":modes", record->modes);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":modes_image_type", record->modes_image_type);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":modes_regions", record->modes_regions);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":modes_sr", record->modes_sr);
    if (rc == SQLITE_OK)
        rc = record->image_type_bitmap_status == 1
                 ? store_bind_int_named(st, statement, ":image_type_bitmap",
                                        record->image_type_bitmap)
                 : store_bind_text(st, statement, ":image_type_bitmap", NULL);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":modes_conflict", record->modes_conflict ? 1 : 0);
    if (rc == SQLITE_OK)
        rc = record->has_frequency
                 ? store_bind_int_named(st, statement, ":frequency_khz", record->frequency_khz)
                 : store_bind_text(st, statement, ":frequency_khz", NULL);
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, statement, ":cine_seconds", record->cine_seconds > 0,
                                     record->cine_seconds);
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, statement, ":gestational_age_weeks",
                                     record->has_gestational_age, record->gestational_age_weeks);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":text_replaced", record->text_replaced ? 1 : 0);
    return rc;
}

/* Binds every parameter of queries/instances/instance_upsert.sql from record. */
static int store_bind_instance(store *st, sqlite3_stmt *statement, const ext_record *record)
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
        {":site", st->site},
    };
    int rc = SQLITE_OK;
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof texts / sizeof texts[0]; i++)
        rc = store_bind_text(st, statement, texts[i].name, texts[i].value);
    if (rc == SQLITE_OK)
        rc = store_bind_number(st, statement, "number_of_frames", record->number_of_frames, 1);
    if (rc == SQLITE_OK)
        rc = store_bind_number(st, statement, "frame_time_ms", record->frame_time_ms, 0);
    if (rc == SQLITE_OK)
        rc = sqlite3_bind_int(statement, store_parameter_index(st, statement, ":is_ultrasound"),
                              record->is_ultrasound ? 1 : 0);
    for (int i = 0; rc == SQLITE_OK && i < EXAM_INDEX_COUNT; i++) {
        char parameter[64];
        rc =
            store_bind_number(st, statement, exam_index_name((exam_index)i), record->indices[i], 0);
        snprintf(parameter, sizeof parameter, ":%s_raw", exam_index_name((exam_index)i));
        if (rc == SQLITE_OK)
            rc = store_bind_text(st, statement, parameter, record->index_raw[i]);
    }
    if (rc == SQLITE_OK)
        rc = store_bind_context(st, statement, record);
    return rc;
}

/* Writes one instance row (inside the batch's transaction). */
static mitilog_status store_write_instance(store *st, store_request *request)
{
    sqlite3_stmt *statement = st->write.upsert_instance;
    const ext_record *record = request->record;
    mitilog_status status = MITILOG_OK;
    int rc = store_bind_instance(st, statement, record);
    if (rc != SQLITE_OK) {
        status = mitilog_error_set(&request->error, MITILOG_ERROR_DATABASE, "%s: bind: %s",
                                   record->sop_instance_uid, sqlite3_errstr(rc));
    } else if ((rc = sqlite3_step(statement)) != SQLITE_ROW) {
        status =
            mitilog_error_set(&request->error, MITILOG_ERROR_DATABASE, "%s: store instance: %s",
                              record->sop_instance_uid, sqlite3_errmsg(st->writer));
    } else {
        request->outcome =
            sqlite3_column_int64(statement, 0) > 0 ? STORE_PUT_REPLACED : STORE_PUT_INSERTED;
        sqlite3_int64 instance_id = sqlite3_column_int64(statement, 1);
        if ((rc = store_step_done(statement)) != SQLITE_DONE)
            status =
                mitilog_error_set(&request->error, MITILOG_ERROR_DATABASE, "%s: store instance: %s",
                                  record->sop_instance_uid, sqlite3_errmsg(st->writer));
        else
            status = store_write_context(st, record, request->header, instance_id, &request->error);
        request->instance_id = instance_id;
        if (status == MITILOG_OK) {
            free(request->stale_spool);
            request->stale_spool = NULL;
            status = store_write_reading(st, request->reading, instance_id,
                                         request->outcome == STORE_PUT_REPLACED,
                                         &request->stale_spool, &request->error);
        }
    }
    sqlite3_reset(statement);
    sqlite3_clear_bindings(statement);
    return status;
}

/* Writes one rejection row (inside the batch's transaction); NULL fields
 * are stored as "". */
static mitilog_status store_write_rejection(store *st, store_request *request)
{
    sqlite3_stmt *statement = st->write.insert_rejection;
    const store_rejection *rejection = request->rejection;
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
        {":site", st->site},
    };
#undef STORE_TEXT
    int rc = SQLITE_OK;
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof texts / sizeof texts[0]; i++)
        rc = store_bind_text(st, statement, texts[i].name, texts[i].value);
    mitilog_status status = MITILOG_OK;
    if (rc != SQLITE_OK)
        status = mitilog_error_set(&request->error, MITILOG_ERROR_DATABASE, "rejection: bind: %s",
                                   sqlite3_errstr(rc));
    else if (store_step_done(statement) != SQLITE_DONE)
        status = mitilog_error_set(&request->error, MITILOG_ERROR_DATABASE, "store rejection: %s",
                                   sqlite3_errmsg(st->writer));
    sqlite3_reset(statement);
    sqlite3_clear_bindings(statement);
    return status;
}

/* Fails every request of the batch that has not failed on its own. */
static void store_fail_batch(store_request *batch, const char *what, const char *message)
{
    for (store_request *request = batch; request != NULL; request = request->next) {
        if (request->status == MITILOG_OK)
            request->status =
                mitilog_error_set(&request->error, MITILOG_ERROR_DATABASE, "%s: %s", what, message);
    }
}

/* Rewrites the summary row of an exam and its times at or above each
 * threshold from what this transaction wrote: once per exam written, not
 * once per row. Four statements, in this order: the times take the day
 * and governing index from the new summary row. */
static mitilog_status store_refresh_summary(store *st, const char *study_instance_uid,
                                            mitilog_error *error)
{
    sqlite3_stmt *statements[] = {st->write.summary_delete, st->write.summary_insert,
                                  st->write.times_delete, st->write.times_insert};
    int rc = SQLITE_OK;
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof statements / sizeof statements[0]; i++) {
        rc = sqlite3_bind_text(statements[i], 1, study_instance_uid, -1, SQLITE_STATIC);
        if (rc == SQLITE_OK)
            rc = store_step_done(statements[i]) == SQLITE_DONE ? SQLITE_OK : SQLITE_ERROR;
        sqlite3_clear_bindings(statements[i]);
    }
    if (rc != SQLITE_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: exam summary: %s",
                                 study_instance_uid, sqlite3_errmsg(st->writer));
    return MITILOG_OK;
}

/* An exam record alone, with its summary. */
static mitilog_status store_write_exam_summarised(store *st, store_request *request)
{
    mitilog_status status = store_write_exam(st, request->exam, &request->error);
    if (status == MITILOG_OK)
        status = store_refresh_summary(st, request->exam->study_instance_uid, &request->error);
    return status;
}

/* An evaluation, after the exam record it was made from when it has one;
 * an exam's evaluation then rewrites the exam's summary. */
static mitilog_status store_write_evaluated(store *st, store_request *request)
{
    const store_evaluation *evaluation = request->evaluation;
    if (evaluation->exam != NULL) {
        mitilog_status status = store_write_exam(st, evaluation->exam, &request->error);
        if (status != MITILOG_OK)
            return status;
    }
    mitilog_status status =
        store_write_evaluation(st, evaluation, &request->counts, &request->error);
    if (status == MITILOG_OK && evaluation->study_instance_uid != NULL)
        status = store_refresh_summary(st, evaluation->study_instance_uid, &request->error);
    return status;
}

/* Writes one request's rows in the open transaction; returns its status. */
static mitilog_status store_write_one(store *st, store_request *request)
{
    request->outcome = STORE_PUT_INSERTED;
    memset(&request->counts, 0, sizeof request->counts);
    request->error.text[0] = '\0';
    return request->record != NULL       ? store_write_instance(st, request)
           : request->exam != NULL       ? store_write_exam_summarised(st, request)
           : request->evaluation != NULL ? store_write_evaluated(st, request)
           : request->policy != NULL     ? store_write_policy(st, request->policy, &request->error)
           : request->custom != NULL ? request->custom(st, request->custom_context, &request->error)
           : request->review != NULL ? store_write_review(st, request->review, &request->error)
                                     : store_write_rejection(st, request);
}

/* Ends the open transaction: COMMIT, or ROLLBACK when rollback is set.
 * Returns 0 when committed. */
static int store_end_transaction(store *st, int rollback, char *message, size_t size)
{
    store_write_statements *write = &st->write;
    if (rollback) {
        if (!sqlite3_get_autocommit(st->writer))
            store_step_done(write->rollback);
        return -1;
    }
    if (store_step_done(write->commit) == SQLITE_DONE)
        return 0;
    snprintf(message, size, "%s", sqlite3_errmsg(st->writer));
    if (!sqlite3_get_autocommit(st->writer))
        store_step_done(write->rollback);
    return -1;
}

/* Writes the requests of batch in one transaction. Returns 0 when it
 * committed; -1 when a request failed on its own (the transaction is
 * rolled back, *failed_alone set) or the database failed (rolled back,
 * every request failed with the reason). */
static int store_write_together(store *st, store_request *batch, int *failed_alone)
{
    char message[MITILOG_ERROR_TEXT_SIZE] = "";
    *failed_alone = 0;
    if (store_step_done(st->write.begin) != SQLITE_DONE) {
        store_fail_batch(batch, "begin transaction", sqlite3_errmsg(st->writer));
        log_warning("database: cannot begin a write: %s", sqlite3_errmsg(st->writer));
        return -1;
    }
    for (store_request *request = batch; request != NULL; request = request->next) {
        request->status = store_write_one(st, request);
        if (sqlite3_get_autocommit(st->writer)) {
            /* The transaction is gone (full disk, I/O error): nothing of
             * the batch was kept. */
            snprintf(message, sizeof message, "%s", sqlite3_errmsg(st->writer));
            store_fail_batch(batch, "transaction rolled back", message);
            log_warning("database: write transaction rolled back: %s", message);
            return -1;
        }
        if (request->status != MITILOG_OK) {
            *failed_alone = 1;
            store_end_transaction(st, 1, message, sizeof message);
            return -1;
        }
    }
    if (store_end_transaction(st, 0, message, sizeof message) == 0)
        return 0;
    for (store_request *request = batch; request != NULL; request = request->next)
        request->status = MITILOG_OK;
    store_fail_batch(batch, "commit", message);
    log_warning("database: commit failed, batch rolled back: %s", message);
    return -1;
}

/* The leader's work: one transaction for the whole batch. A request that
 * fails on its own (a row the schema refuses) rolls the transaction
 * back, and the batch is written again one request per transaction, so
 * that it fails alone: savepoints per request, the other way to get
 * there, made SQLite copy every page a request touched, for the rare case
 * of a failure. Fills in each request's status, outcome and error. */
static void store_write_batch(store *st, store_request *batch)
{
    for (store_request *request = batch; request != NULL; request = request->next)
        request->status = MITILOG_OK;
    int failed_alone = 0;
    if (store_write_together(st, batch, &failed_alone) == 0 || !failed_alone || batch->next == NULL)
        return;
    for (store_request *request = batch; request != NULL; request = request->next) {
        store_request *next = request->next;
        request->next = NULL;
        request->status = MITILOG_OK;
        store_write_together(st, request, &failed_alone);
        request->next = next;
    }
}

/* Queues request and waits until a committed (or failed) batch holds it;
 * leads the next batch when nobody else is writing. */
static mitilog_status store_submit(store *st, store_request *request, mitilog_error *error)
{
    request->next = NULL;
    request->done = 0;
    request->status = MITILOG_OK;
    request->outcome = STORE_PUT_INSERTED;
    request->error.text[0] = '\0';

    pthread_mutex_lock(&st->queue_lock);
    if (st->queue_tail != NULL)
        st->queue_tail->next = request;
    else
        st->queue_head = request;
    st->queue_tail = request;
    while (!request->done) {
        if (st->leader_active) {
            pthread_cond_wait(&st->queue_changed, &st->queue_lock);
            continue;
        }
        st->leader_active = 1;
        store_request *batch = st->queue_head;
        store_request *last = batch;
        for (int count = 1; count < STORE_BATCH_MAX && last->next != NULL; count++)
            last = last->next;
        st->queue_head = last->next;
        if (st->queue_head == NULL)
            st->queue_tail = NULL;
        last->next = NULL;
        pthread_mutex_unlock(&st->queue_lock);

        store_write_batch(st, batch);

        pthread_mutex_lock(&st->queue_lock);
        while (batch != NULL) {
            store_request *next = batch->next;
            batch->done = 1; /* the waiter may return once we unlock */
            batch = next;
        }
        st->leader_active = 0;
        pthread_cond_broadcast(&st->queue_changed);
    }
    pthread_mutex_unlock(&st->queue_lock);
    if (request->status != MITILOG_OK && error != NULL)
        *error = request->error;
    return request->status;
}

mitilog_status store_put_instance(store *st, const ext_record *record, const store_bytes *header,
                                  store_put_outcome *outcome, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no store");
    mitilog_status status = store_check_record(record, error);
    if (status != MITILOG_OK)
        return status;
    if (header != NULL && (header->data == NULL || header->size == 0))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: empty header copy",
                                 record->sop_instance_uid);
    store_request request = {.record = record, .header = header};
    status = store_submit(st, &request, error);
    if (status == MITILOG_OK && outcome != NULL)
        *outcome = request.outcome;
    if (status == MITILOG_OK && request.stale_spool != NULL)
        unlink(request.stale_spool); /* an older spool copy nobody will read */
    free(request.stale_spool);
    return status;
}

mitilog_status store_put_instance_read(store *st, const ext_record *record,
                                       const store_bytes *header,
                                       const store_reading_request *reading,
                                       store_put_outcome *outcome, long long *instance_id,
                                       char **stale_spool, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no store");
    if (stale_spool != NULL)
        *stale_spool = NULL;
    mitilog_status status = store_check_record(record, error);
    if (status != MITILOG_OK)
        return status;
    if (header != NULL && (header->data == NULL || header->size == 0))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: empty header copy",
                                 record->sop_instance_uid);
    store_request request = {.record = record, .header = header, .reading = reading};
    status = store_submit(st, &request, error);
    if (status == MITILOG_OK && outcome != NULL)
        *outcome = request.outcome;
    if (status == MITILOG_OK && instance_id != NULL)
        *instance_id = request.instance_id;
    if (stale_spool != NULL && status == MITILOG_OK)
        *stale_spool = request.stale_spool;
    else
        free(request.stale_spool);
    return status;
}

/* Refuses an exam the schema would refuse or JSON could not serve. */
static mitilog_status store_check_exam(const store_exam *exam, mitilog_error *error)
{
    if (exam == NULL || exam->exam == NULL || exam->study_instance_uid == NULL ||
        exam->study_instance_uid[0] == 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_put_exam: no exam or study");
    if (!store_is_utf8(exam->study_instance_uid) || !store_is_utf8(exam->exam->exam_type_source) ||
        !store_is_utf8(exam->exam->gestational_age_source))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "exam: text is not UTF-8");
    return MITILOG_OK;
}

mitilog_status store_put_exam(store *st, const store_exam *exam, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_put_exam: no store");
    mitilog_status status = store_check_exam(exam, error);
    if (status != MITILOG_OK)
        return status;
    store_request request = {.exam = exam};
    return store_submit(st, &request, error);
}

mitilog_status store_put_evaluation(store *st, const store_evaluation *evaluation,
                                    store_evaluation_counts *counts, mitilog_error *error)
{
    if (st == NULL || evaluation == NULL || evaluation->policy_version == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_put_evaluation: no store or evaluation");
    if (evaluation->exam != NULL) {
        mitilog_status checked = store_check_exam(evaluation->exam, error);
        if (checked != MITILOG_OK)
            return checked;
    }
    store_request request = {.evaluation = evaluation};
    mitilog_status status = store_submit(st, &request, error);
    if (status == MITILOG_OK && counts != NULL) {
        counts->evaluations += request.counts.evaluations;
        counts->unchanged += request.counts.unchanged;
        counts->written += request.counts.written;
        counts->superseded += request.counts.superseded;
    }
    return status;
}

mitilog_status store_register_policy(store *st, const store_policy *policy, mitilog_error *error)
{
    if (st == NULL || policy == NULL || policy->version == NULL ||
        strlen(policy->version) >= sizeof st->active_policy)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_register_policy: no store or policy");
    store_request request = {.policy = policy};
    mitilog_status status = store_submit(st, &request, error);
    if (status == MITILOG_OK) {
        pthread_mutex_lock(&st->reader_lock);
        snprintf(st->active_policy, sizeof st->active_policy, "%s", policy->version);
        pthread_mutex_unlock(&st->reader_lock);
    }
    return status;
}

mitilog_status store_submit_custom(store *st,
                                   mitilog_status (*custom)(store *st, const void *context,
                                                            mitilog_error *error),
                                   const void *context, mitilog_error *error)
{
    if (st == NULL || custom == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_submit_custom: no store or write");
    store_request request = {.custom = custom, .custom_context = context};
    return store_submit(st, &request, error);
}

mitilog_status store_put_review(store *st, const store_review *review, mitilog_error *error)
{
    if (st == NULL || review == NULL || review->outcome == NULL || review->reviewer == NULL ||
        review->role == NULL || (review->finding_id <= 0 && review->study_instance_uid == NULL))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "a review needs a finding or a study, an outcome and a reviewer");
    store_request request = {.review = review};
    return store_submit(st, &request, error);
}

mitilog_status store_put_rejection(store *st, const store_rejection *rejection,
                                   mitilog_error *error)
{
    if (st == NULL || rejection == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no store or no rejection");
    if (rejection->reason == NULL || rejection->reason[0] == '\0')
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "rejection without a reason");
    store_request request = {.rejection = rejection};
    return store_submit(st, &request, error);
}

mitilog_status store_write_prepare(store *st, mitilog_error *error)
{
    const struct {
        const char *name;
        sqlite3_stmt **statement;
    } files[] = {
        {"queries/database/write_begin.sql", &st->write.begin},
        {"queries/database/write_commit.sql", &st->write.commit},
        {"queries/database/write_rollback.sql", &st->write.rollback},
        {"queries/instances/instance_upsert.sql", &st->write.upsert_instance},
        {"queries/instances/rejection_insert.sql", &st->write.insert_rejection},
        {"queries/instances/sr_values_delete.sql", &st->write.delete_sr_values},
        {"queries/instances/sr_value_insert.sql", &st->write.insert_sr_value},
        {"queries/exams/exam_upsert.sql", &st->write.upsert_exam},
        {"queries/exams/exam_timeline_delete.sql", &st->write.delete_timeline},
        {"queries/exams/exam_mode_maxima_delete.sql", &st->write.delete_mode_maxima},
        {"queries/exams/exam_timeline_insert.sql", &st->write.insert_timeline},
        {"queries/exams/exam_mode_maximum_insert.sql", &st->write.insert_mode_maximum},
        {"queries/instances/instance_header_upsert.sql", &st->write.upsert_header},
        {"queries/instances/instance_header_delete.sql", &st->write.delete_header},
        {"queries/exams/exam_summary_delete.sql", &st->write.summary_delete},
        {"queries/exams/exam_summary_insert.sql", &st->write.summary_insert},
        {"queries/exams/exam_time_at_or_above_delete.sql", &st->write.times_delete},
        {"queries/exams/exam_time_at_or_above_insert.sql", &st->write.times_insert},
    };
    for (size_t i = 0; i < sizeof files / sizeof files[0]; i++) {
        mitilog_status status = store_prepare(st->writer, files[i].name, files[i].statement, error);
        if (status != MITILOG_OK)
            return status;
    }
    return MITILOG_OK;
}

void store_write_finalize(store *st)
{
    sqlite3_stmt **statements[] = {&st->write.begin,
                                   &st->write.commit,
                                   &st->write.rollback,
                                   &st->write.upsert_instance,
                                   &st->write.insert_rejection,
                                   &st->write.delete_sr_values,
                                   &st->write.insert_sr_value,
                                   &st->write.upsert_exam,
                                   &st->write.delete_timeline,
                                   &st->write.delete_mode_maxima,
                                   &st->write.insert_timeline,
                                   &st->write.insert_mode_maximum,
                                   &st->write.upsert_header,
                                   &st->write.delete_header,
                                   &st->write.summary_delete,
                                   &st->write.summary_insert,
                                   &st->write.times_delete,
                                   &st->write.times_insert};
    for (size_t i = 0; i < sizeof statements / sizeof statements[0]; i++) {
        sqlite3_finalize(*statements[i]);
        *statements[i] = NULL;
    }
}

void store_write_drain(store *st)
{
    pthread_mutex_lock(&st->queue_lock);
    while (st->leader_active || st->queue_head != NULL)
        pthread_cond_wait(&st->queue_changed, &st->queue_lock);
    pthread_mutex_unlock(&st->queue_lock);
}

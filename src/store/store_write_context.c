/*
 * store_write_context.c - the rows that go with an instance row: its SR
 * values (sr_values) and its header copy (instance_headers), rewritten
 * whenever the instance is (re)stored (its modes are columns of the row
 * itself, migration 004). Runs on the
 * writer connection inside the batch's transaction (store_write.c).
 */
#include "store/store_internal.h"

#include "extract/ext_modes.h"
#include "extract/ext_sr.h"

static mitilog_status store_context_error(store *st, mitilog_error *error, const ext_record *record,
                                          const char *what, int rc)
{
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s: %s", record->sop_instance_uid,
                             what,
                             rc == SQLITE_RANGE ? "bad parameter" : sqlite3_errmsg(st->writer));
}

static int store_write_sr_value(store *st, sqlite3_int64 instance_id, const ext_record *record,
                                const ext_sr_value *value)
{
    sqlite3_stmt *statement = st->write.insert_sr_value;
    int rc = store_bind_int_named(st, statement, ":instance_id", instance_id);
    if (rc == SQLITE_OK)
        rc =
            store_bind_text_named(st, statement, ":study_instance_uid", record->study_instance_uid);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":quantity", ext_quantity_name(value->quantity));
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, statement, ":value", value->number.status == EXAM_VALUE_OK,
                                     value->number.value);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":raw_value", value->raw);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":unit", value->unit);
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, statement, ":normalised", value->normalised_ok,
                                     value->normalised);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":concept", value->concept);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":concept_meaning", value->meaning);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":item_position", value->position);
    if (rc == SQLITE_OK)
        rc =
            store_bind_text_named(st, statement, ":mode",
                                  value->mode >= 0 ? exam_mode_name((exam_mode)value->mode) : NULL);
    if (rc == SQLITE_OK)
        rc = store_step_done(statement) == SQLITE_DONE ? SQLITE_OK : SQLITE_ERROR;
    sqlite3_clear_bindings(statement);
    return rc;
}

/* The header copy, or no copy: an older one is removed. */
static int store_write_header(store *st, const store_bytes *header, sqlite3_int64 instance_id)
{
    sqlite3_stmt *statement = header != NULL ? st->write.upsert_header : st->write.delete_header;
    int rc = store_bind_int_named(st, statement, ":instance_id", instance_id);
    if (rc == SQLITE_OK && header != NULL) {
        int index = store_parameter_index(st, statement, ":bytes");
        rc = index == 0
                 ? SQLITE_RANGE
                 : sqlite3_bind_blob64(statement, index, header->data, header->size, SQLITE_STATIC);
    }
    if (rc == SQLITE_OK)
        rc = store_step_done(statement) == SQLITE_DONE ? SQLITE_OK : SQLITE_ERROR;
    sqlite3_clear_bindings(statement);
    return rc;
}

mitilog_status store_write_context(store *st, const ext_record *record, const store_bytes *header,
                                   sqlite3_int64 instance_id, mitilog_error *error)
{
    sqlite3_stmt *clear = st->write.delete_sr_values;
    int rc = sqlite3_bind_int64(clear, 1, instance_id);
    if (rc == SQLITE_OK)
        rc = store_step_done(clear) == SQLITE_DONE ? SQLITE_OK : SQLITE_ERROR;
    sqlite3_clear_bindings(clear);
    if (rc != SQLITE_OK)
        return store_context_error(st, error, record, "clear SR values", rc);
    rc = store_write_header(st, header, instance_id);
    if (rc != SQLITE_OK)
        return store_context_error(st, error, record, "store header copy", rc);
    for (size_t i = 0; record->sr != NULL && i < record->sr->value_count; i++) {
        const ext_sr_value *value = &record->sr->values[i];
        if ((value->raw != NULL && !store_is_text_utf8(value->raw)) ||
            (value->meaning != NULL && !store_is_text_utf8(value->meaning)) ||
            !store_is_text_utf8(value->concept) ||
            (value->unit != NULL && !store_is_text_utf8(value->unit)))
            continue; /* not servable as JSON: left out, the item is logged */
        rc = store_write_sr_value(st, instance_id, record, value);
        if (rc != SQLITE_OK)
            return store_context_error(st, error, record, "store SR value", rc);
    }
    return MITILOG_OK;
}

/*
 * store_read_header.c - reading back an instance's header copy
 * (instance_headers, written by store_write_context.c) on the read
 * connection, for `mitilog header`. Not on any hot path: the statement is
 * prepared per call.
 */
#include "store/store_internal.h"

#include <stdlib.h>
#include <string.h>

mitilog_status store_get_header(store *st, const char *sop_instance_uid, unsigned char **bytes,
                                size_t *size, mitilog_error *error)
{
    if (st == NULL || sop_instance_uid == NULL || bytes == NULL || size == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_get_header: NULL argument");
    *bytes = NULL;
    *size = 0;
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_prepare(
        st->reader, "queries/instances/instance_header_select.sql", &statement, error);
    if (status == MITILOG_OK) {
        int rc = sqlite3_bind_text(statement, 1, sop_instance_uid, -1, SQLITE_STATIC);
        if (rc == SQLITE_OK)
            rc = sqlite3_step(statement);
        if (rc == SQLITE_ROW) {
            int length = sqlite3_column_bytes(statement, 0);
            const void *data = sqlite3_column_blob(statement, 0);
            *bytes = malloc(length > 0 ? (size_t)length : 1);
            if (*bytes == NULL)
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
            else if (length > 0)
                memcpy(*bytes, data, (size_t)length);
            *size = length > 0 ? (size_t)length : 0;
        } else if (rc != SQLITE_DONE) {
            status = store_sql_error(error, st->reader, "header copy");
        }
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

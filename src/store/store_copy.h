/*
 * store_copy.h - copies an SQLite database of mitilog into an empty
 * PostgreSQL database, through the engines of store_engine.h (no other
 * SQL client), and verifies the copy.
 *
 * The PostgreSQL database is given its schema by the PostgreSQL engine's
 * own migrations (store_postgresql_migrate) when it has none; a database
 * at another schema version than the SQLite one, or one that already
 * holds rows, is refused with a plain message and left unchanged. Each
 * table is copied in batches inside one transaction; afterwards the rows
 * of every table are counted on both sides and a checksum of its key
 * columns (the primary key, or every column of a table without one) is
 * compared.
 *
 * Owns nothing after it returns: both connections are closed. The report
 * callback is called once per table with borrowed data.
 */
#ifndef MITILOG_STORE_COPY_H
#define MITILOG_STORE_COPY_H

#include <stdint.h>

#include "util/status.h"

typedef struct store_copy_table {
    const char *name;
    long long source_rows; /* -1: a table only PostgreSQL has, filled from another */
    long long target_rows;
    uint64_t source_checksum;
    uint64_t target_checksum;
    int matches; /* 1 when the counts (and checksums) agree */
} store_copy_table;

/* Called once per table, in the order copied, after the verification. */
typedef void (*store_copy_report)(void *context, const store_copy_table *table);

typedef struct store_copy_summary {
    int schema_version;
    int tables;
    int mismatched_tables;
    long long rows;
} store_copy_summary;

/* Copies every table of the SQLite database at sqlite_path into the
 * PostgreSQL database of conninfo (libpq's key=value or URI form) and
 * verifies it. MITILOG_OK means the copy ran to its end; then
 * summary->mismatched_tables says whether the verification found a
 * difference. busy_timeout_ms bounds waits on locks in either database. */
mitilog_status store_copy_database(const char *sqlite_path, const char *conninfo,
                                   int busy_timeout_ms, store_copy_report report, void *context,
                                   store_copy_summary *summary, mitilog_error *error);

#endif

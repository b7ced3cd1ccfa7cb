/*
 * store_engine_sqlite.h - what only the SQLite engine has, beyond the
 * seam of store_engine.h. For tests that inject faults on the writer
 * (PRAGMA query_only, max_page_count); the store itself never uses it.
 *
 * Owns nothing: the handle belongs to the connection.
 */
#ifndef MITILOG_STORE_ENGINE_SQLITE_H
#define MITILOG_STORE_ENGINE_SQLITE_H

#include "store/store_engine.h"

/* The sqlite3 handle of an SQLite connection (as void *, so that this
 * header needs no sqlite3.h). */
void *store_engine_sqlite_handle(store_connection *connection);

#endif

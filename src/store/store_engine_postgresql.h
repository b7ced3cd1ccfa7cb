/*
 * store_engine_postgresql.h - what only the PostgreSQL engine has, beyond
 * the seam of store_engine.h: asking a server whether it answers, for
 * `mitilog check-config`, and bringing a database's schema up to date
 * (store_postgresql_migrate.c).
 *
 * Owns nothing; the caller's buffers are filled.
 */
#ifndef MITILOG_STORE_ENGINE_POSTGRESQL_H
#define MITILOG_STORE_ENGINE_POSTGRESQL_H

#include <stddef.h>

#include "store/store_engine.h"

/* Connects to conninfo (read-only) and reads the server's version
 * ("15.4") and the schema version mitilog left there (-1: no mitilog
 * schema yet, the first start makes it). Fails with a plain message when
 * the server does not answer or refuses the connection. */
mitilog_status store_engine_postgresql_ping(const char *conninfo, int *schema_version,
                                            char *server_version, size_t server_version_size,
                                            mitilog_error *error);

/* The highest migration number this program knows (sql/migrations/NNN_*.sql),
 * the schema version a migrated database has. */
int store_postgresql_latest_migration(void);

/* Brings the database of connection (a store_engine_postgresql connection
 * that may write) to the newest schema, and fills *version with it:
 *   - the compatibility functions (migrations/postgresql/compat.sql,
 *     when built in) are applied again, so that a new program's take
 *     effect;
 *   - an empty database gets migrations/postgresql/012_baseline.sql;
 *   - then every common migration migrations/NNN_*.sql above the
 *     database's version, or migrations/postgresql/NNN_*.sql in its
 *     place when there is one; a common migration's
 *     "PRAGMA user_version = N;" (SQLite's record of it) is left out and
 *     schema_version set instead;
 *   - the month partitions from this month to twelve months ahead are
 *     created, and those of older months whose rows wait in the default
 *     partition (a copy of older data, a receiver that ran past the months
 *     made ahead), the rows moved into them.
 * Each step runs in its own transaction, all of them under a
 * PostgreSQL advisory lock, so that receivers starting together migrate
 * once: the others wait, then find nothing to do. busy_timeout_ms is the
 * connection's lock timeout, restored afterwards. A database newer than
 * this program is refused. */
mitilog_status store_postgresql_migrate(store_connection *connection, int busy_timeout_ms,
                                        int *version, mitilog_error *error);

/* The advisory lock store_postgresql_migrate takes, for what else must
 * happen once when receivers start together (the vocabulary's sync after
 * the migrations). Taken again by the same session it nests: each lock
 * needs its unlock. Unlock restores busy_timeout_ms as the lock timeout. */
mitilog_status store_postgresql_lock(store_connection *connection, mitilog_error *error);
mitilog_status store_postgresql_unlock(store_connection *connection, int busy_timeout_ms,
                                       mitilog_error *error);

#endif

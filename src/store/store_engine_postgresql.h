/*
 * store_engine_postgresql.h - what only the PostgreSQL engine has, beyond
 * the seam of store_engine.h: asking a server whether it answers, for
 * `mitilog check-config`.
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

#endif

/*
 * store_snapshots.h - documents of the period views kept in the database
 * (migration 018, sql/queries/snapshots/): the signature of the data of a
 * span of days, and a document kept under a view, a request and the
 * signature it was made from. src/report/report_snapshot.c decides what
 * is kept and when it is served.
 *
 * Reads go through the read connection, writes through the group-commit
 * queue. Ownership: a body given by store_snapshot_get() is malloc'd and
 * freed by the caller.
 */
#ifndef MITILOG_STORE_SNAPSHOTS_H
#define MITILOG_STORE_SNAPSHOTS_H

#include <stddef.h>

#include "store/store.h"

#ifdef __cplusplus
extern "C" {
#endif

enum { STORE_SNAPSHOT_SIGNATURE_MAX = 255 };

/* The signature of what a document of days [from_day, to_day]
 * ('YYYY-MM-DD', inclusive) is made from: text that changes whenever a
 * write changes one of those days' exams, times at or above or findings,
 * the policies held or the span of exams held. */
mitilog_status store_snapshot_signature(store *store, const char *from_day, const char *to_day,
                                        char signature[STORE_SNAPSHOT_SIGNATURE_MAX + 1],
                                        mitilog_error *error);

/* The document kept for view and request when it was made from data of
 * signature: *body (malloc'd), when it was made and when it was last
 * asked for (ISO 8601 UTC) into made_at and asked_at; *body NULL when
 * there is none. */
mitilog_status store_snapshot_get(store *store, const char *view, const char *request,
                                  const char *signature, char **body, char made_at[32],
                                  char asked_at[32], mitilog_error *error);

/* Records that the document of view and request was asked for now. */
mitilog_status store_snapshot_asked(store *store, const char *view, const char *request,
                                    mitilog_error *error);

/* Keeps body for view and request, made from data of signature in
 * made_ms milliseconds, in place of the one kept before (asked: made
 * because it was asked for, which counts as asking); committed when it
 * returns MITILOG_OK. */
mitilog_status store_snapshot_put(store *store, const char *view, const char *request,
                                  const char *signature, const char *body, double made_ms,
                                  int asked, mitilog_error *error);

/* One kept document's key and the signature it was made from. */
typedef struct store_snapshot_key {
    char *view, *request, *signature;
} store_snapshot_key;

/* The keys of the documents asked for at or after since (ISO 8601 UTC),
 * the most recently asked first, at most limit: *keys malloc'd, freed with
 * store_snapshot_keys_free(). */
mitilog_status store_snapshot_keys(store *store, const char *since, size_t limit,
                                   store_snapshot_key **keys, size_t *count, mitilog_error *error);
void store_snapshot_keys_free(store_snapshot_key *keys, size_t count);

/* Forgets the documents last asked for before before (ISO 8601 UTC). */
mitilog_status store_snapshots_prune(store *store, const char *before, mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

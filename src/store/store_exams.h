/*
 * store_exams.h - the store's exams: writing an exam record with its
 * timeline and per-mode maxima, loading a study's instances to build it,
 * the JSON of one exam, and the lists of exams an evaluation walks
 * (store_exams.c, sql/queries/exams/).
 *
 * Ownership: strings in the structs passed in are borrowed for the call;
 * what the loads give is malloc'ed and freed by the matching *_free().
 */
#ifndef MITILOG_STORE_EXAMS_H
#define MITILOG_STORE_EXAMS_H

#include <stddef.h>

#include "extract/ext_exam.h"
#include "store/store.h"

#ifdef __cplusplus
extern "C" {
#endif

/* An exam to write: the record built by ext_exam_build() from the
 * instances it was built from (their strings are borrowed). */
typedef struct store_exam {
    const char *study_instance_uid;
    const ext_exam *exam;
    const ext_exam_instance *instances;
    size_t instance_count;
} store_exam;

/* Writes (replaces) the study's exam row, timeline and per-mode maxima in
 * one transaction; returns after the commit. */
mitilog_status store_put_exam(store *store, const store_exam *exam, mitilog_error *error);

/* The study's instances as plain structs for ext_exam_build(), in
 * acquisition order; *instances is malloc'ed (NULL with count 0 when the
 * study has none). Free with store_study_free(). */
mitilog_status store_load_study(store *store, const char *study_instance_uid,
                                ext_exam_instance **instances, size_t *count, mitilog_error *error);
void store_study_free(ext_exam_instance *instances, size_t count);

/* JSON object of one exam with its instances and timeline;
 * MITILOG_ERROR_NOT_FOUND when no instance has that Study Instance UID. */
mitilog_status store_study_json(store *store, const char *study_instance_uid, char **json,
                                mitilog_error *error);

/* Study UIDs of the exams whose first acquisition date is in
 * [from_day, to_day] (YYYY-MM-DD, NULL open); store_texts_free(). */
mitilog_status store_exams_in_period(store *store, const char *from_day, const char *to_day,
                                     char ***study_uids, size_t *count, mitilog_error *error);
/* Study UIDs of the open exams idle for at least idle_seconds at
 * now_unix_seconds (the same clock as store_load_study_context());
 * store_texts_free(). */
mitilog_status store_exams_due_closing(store *store, double now_unix_seconds, double idle_seconds,
                                       char ***study_uids, size_t *count, mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

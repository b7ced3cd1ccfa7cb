/*
 * store_reviews.h - the review history (migration 012), the weekly
 * worklist and the operator view (store_reviews.c, sql/queries/reviews/).
 *
 * Ownership: strings passed in are borrowed for the call; texts returned
 * are malloc'ed, freed by the caller with free().
 */
#ifndef MITILOG_STORE_REVIEWS_H
#define MITILOG_STORE_REVIEWS_H

#include "store/store.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One review act: a finding (finding_id > 0) or a whole exam
 * (finding_id 0, study_instance_uid set) marked with an outcome
 * ("acceptable", "discussed_with_operator", "referred_to_physics",
 * "preset_to_change" or "reopened") and a comment, by reviewer in role.
 * Strings are borrowed for the call. The history is append-only. */
typedef struct store_review {
    const char *study_instance_uid; /* NULL with a finding: its own */
    long long finding_id;           /* 0: the whole exam            */
    const char *outcome, *comment, *reviewer, *role;
} store_review;
/* Appends the review in its own commit; MITILOG_ERROR_NOT_FOUND when the
 * finding or exam is unknown (or the finding is of another study). */
mitilog_status store_put_review(store *store, const store_review *review, mitilog_error *error);
/* The review history, oldest first: JSON array, or CSV text with a
 * header line when csv is set. study, from, to (YYYY-MM-DD, on the day
 * recorded): NULL = any. *out is malloc'ed, freed by the caller. */
mitilog_status store_reviews_text(store *store, const char *study, const char *from, const char *to,
                                  int csv, char **out, mitilog_error *error);
/* GET /api/v1/worklist: the week starting on monday (YYYY-MM-DD);
 * is_default says it is the default week (report_default_week, the one
 * rule of src/report/report.h). queries/reviews/review_worklist.sql says
 * how it ranks. *json is malloc'ed, freed by the caller. */
mitilog_status store_worklist_json(store *store, const char *monday, int is_default, char **json,
                                   mitilog_error *error);
/* GET /api/v1/operators: per-operator exams, median governing index and
 * findings of a period (from, to YYYY-MM-DD; NULL = open), when the site
 * records operators (queries/reviews/review_operators.sql). */
mitilog_status store_operators_json(store *store, const char *from, const char *to, char **json,
                                    mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

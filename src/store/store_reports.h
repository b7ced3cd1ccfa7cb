/*
 * store_reports.h - the period reads behind statistics, outliers and
 * reports: plain rows for src/report/ (store_reports.c,
 * sql/queries/reports/), read on the read connection.
 *
 * Ownership: every list, count and text given here is owned by the value
 * that holds it, freed by the matching *_free() (a zeroed value is
 * empty); store_load_day_range()'s days are freed by the caller.
 */
#ifndef MITILOG_STORE_REPORTS_H
#define MITILOG_STORE_REPORTS_H

#include <stddef.h>

#include "exam/exam.h"
#include "store/store.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The exams of a period are exam_row (exam/exam.h), read by
 * sql/queries/reports/stats_exam_rows.sql and its shorter variants; their strings
 * belong to the store_exam_list that holds them (study_instance_uid is
 * always read). */

/* The text columns store_load_exam_rows copies besides exam_type (the
 * others are left NULL): copying only what a report uses keeps a long
 * period cheap. */
enum {
    STORE_EXAM_IDENTITY = 1 << 0, /* day, first_acquired_at */
    STORE_EXAM_DETAIL = 1 << 1,   /* exam_type_label, governing_index, study_description */
    STORE_EXAM_ROOM = 1 << 2,
    STORE_EXAM_PRESET = 1 << 3,
    STORE_EXAM_SHIFT = 1 << 4,
    STORE_EXAM_TRANSDUCER = 1 << 5,
    /* day only; with ROOM and PRESET and no other bit, the short rows of
     * sql/queries/reports/stats_exam_series.sql: exam type, day, room, preset,
     * governing maximum, capture and indexed counts (drift) */
    STORE_EXAM_DAY = 1 << 6,
    STORE_EXAM_ALL = (1 << 7) - 1
};

/* Rows and the memory of their strings; free with store_exam_list_free()
 * (a zeroed list is empty). */
typedef struct store_exam_text_block store_exam_text_block;
typedef struct store_exam_list {
    exam_row *rows;
    size_t count;
    store_exam_text_block *texts;
} store_exam_list;

/* Exams whose day is between from_day and to_day (YYYY-MM-DD, inclusive),
 * ordered by Study Instance UID; columns: STORE_EXAM_* bits. */
mitilog_status store_load_exam_rows(store *store, const char *from_day, const char *to_day,
                                    unsigned columns, store_exam_list *list, mitilog_error *error);
/* Only exam_type and the governing maximum (has_governing,
 * max_governing) of the exams whose day is at or after from_day and
 * before before_day, in no particular order (sql/queries/reports/
 * stats_exam_governing.sql): a baseline. */
mitilog_status store_load_exam_governing(store *store, const char *from_day, const char *before_day,
                                         store_exam_list *list, mitilog_error *error);
void store_exam_list_free(store_exam_list *list);

/* Findings (not superseded) per exam and rule for the same period,
 * ordered by Study Instance UID, then rule: counts[i] (the vocabulary's
 * rule counts, which the period's exam rows point into) is of exam
 * study_instance_uids[i]. Every string is owned here; free with
 * store_finding_counts_free() (a zeroed value is empty). */
typedef struct store_finding_counts {
    char **study_instance_uids;
    exam_rule_count *counts;
    size_t count;
} store_finding_counts;

mitilog_status store_load_finding_counts(store *store, const char *from_day, const char *to_day,
                                         store_finding_counts *counts, mitilog_error *error);
void store_finding_counts_free(store_finding_counts *counts);

/* What a report states: the current policy (NULL when none was recorded),
 * the versions of the period's findings ("v1,v2" or NULL) and the first
 * and last exam day held (NULL when no exam). Free with
 * store_period_info_free(). */
typedef struct store_period_info {
    char *policy_version;
    char *policy_name;
    char *finding_policy_versions;
    char *first_day, *last_day;
} store_period_info;

mitilog_status store_load_period_info(store *store, const char *from_day, const char *to_day,
                                      store_period_info *info, mitilog_error *error);
void store_period_info_free(store_period_info *info);

/* The first and last exam day held (first acquisition; NULL when no
 * exam), malloc'ed; the caller frees both. */
mitilog_status store_load_day_range(store *store, char **first_day, char **last_day,
                                    mitilog_error *error);

/* What a baseline [from_day, before_day) really holds: first and last
 * exam day (out, "" when none; 11 bytes each), weeks with exams and
 * exams (queries/reports/baseline_span.sql). */
typedef struct store_span {
    char first_day[11], last_day[11];
    long weeks, exams;
} store_span;
mitilog_status store_load_baseline_span(store *store, const char *from_day, const char *before_day,
                                        store_span *span, mitilog_error *error);
#ifdef __cplusplus
}
#endif

#endif

/*
 * stats_exam.h - what every statistic reads: one exam as the store loads
 * it (stats_exam; src/report/ converts), the dimensions exams are grouped
 * by (exam type, room, preset, shift, transducer) and the governing TI
 * thresholds of "estimated time at or above". docs/domain.md section 5.
 *
 * Nothing here allocates. A stats_exam borrows its strings and rule list
 * from the caller, who keeps them alive while any result computed from
 * the exam is in use.
 */
#ifndef MITILOG_STATS_EXAM_H
#define MITILOG_STATS_EXAM_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

enum { STATS_THRESHOLD_COUNT = 4 };
/* Governing TI thresholds for "estimated time at or above" (the rows of
 * the default dwell tables, docs/policy.md). */
extern const double stats_thresholds[STATS_THRESHOLD_COUNT];

typedef struct stats_rule_count {
    const char *rule_id;
    size_t count;
} stats_rule_count;

/* One exam. Strings are borrowed; NULL means "not recorded". */
typedef struct stats_exam {
    const char *study_instance_uid;
    const char *day;             /* local date of the first capture */
    const char *exam_type;
    const char *room, *preset, *shift, *transducer;
    double max_governing;        /* highest governing TI, when has_governing */
    int has_governing;
    double max_mi;
    int has_mi;
    double estimated_seconds;    /* timeline estimate */
    double seconds_at_or_above[STATS_THRESHOLD_COUNT];
    size_t capture_count;        /* captures that could carry indices */
    size_t indexed_count;        /* ... of which carried at least one */
    size_t finding_count;        /* findings of the current policy */
    const stats_rule_count *rules;   /* findings by rule */
    size_t rule_count;
} stats_exam;

typedef enum stats_dimension {
    STATS_BY_EXAM_TYPE = 0,
    STATS_BY_ROOM,
    STATS_BY_PRESET,
    STATS_BY_SHIFT,
    STATS_BY_TRANSDUCER
} stats_dimension;

/* "exam_type", "room", "preset", "shift", "transducer". */
const char *stats_dimension_name(stats_dimension dimension);
/* 0 and *dimension set, or -1 for an unknown name. */
int stats_dimension_parse(const char *name, stats_dimension *dimension);
/* The exam's value for a dimension (may be NULL). */
const char *stats_exam_key(const stats_exam *exam, stats_dimension dimension);

#ifdef __cplusplus
}
#endif

#endif

/*
 * stats_exam.h - what every statistic reads: one exam as the store loads
 * it (exam_row of the exam vocabulary, passed as it is) and the
 * dimensions exams are grouped by (exam type, room, preset, shift,
 * transducer). docs/domain.md section 5.
 *
 * Nothing here allocates. An exam_row borrows its strings and rule list
 * from the caller, who keeps them alive while any result computed from
 * the exam is in use.
 */
#ifndef MITILOG_STATS_EXAM_H
#define MITILOG_STATS_EXAM_H

#include <stddef.h>

#include "exam/exam.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One exam is the exam vocabulary's exam_row (exam/exam.h), as the store
 * loads it; "time at or above" is at the first EXAM_TI_STATISTICS_STEPS
 * thresholds of exam_ti_ladder. */

typedef enum stats_dimension {
    STATS_BY_EXAM_TYPE = 0,
    STATS_BY_ROOM,
    STATS_BY_PRESET,
    STATS_BY_SHIFT,
    STATS_BY_TRANSDUCER,
    STATS_BY_SITE /* the site of the exam's first instance (exam.h) */
} stats_dimension;

/* "exam_type", "room", "preset", "shift", "transducer", "site". */
const char *stats_dimension_name(stats_dimension dimension);
/* 0 and *dimension set, or -1 for an unknown name. */
int stats_dimension_parse(const char *name, stats_dimension *dimension);
/* The exam's value for a dimension (may be NULL). */
const char *stats_exam_key(const exam_row *exam, stats_dimension dimension);

#ifdef __cplusplus
}
#endif

#endif

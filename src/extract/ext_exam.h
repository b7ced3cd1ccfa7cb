/*
 * ext_exam.h - the exam (study) record, rebuilt from all of a study's
 * instances whenever one arrives: exam type (the most frequent among the
 * instances; ties to the earliest), governing index (docs/domain.md
 * section 3), gestational age (an SR's LOINC 18185-9 value, else the exam
 * type's configured nominal age), first and last acquisition, instance
 * counts, maxima per index and per mode, and the exam timeline
 * (ext_timeline.h: intervals attributed to each capture, capped gaps,
 * cine durations, bounded by an SR scan time).
 *
 * Governing index [docs/domain.md section 3; all trade practice]:
 *   obstetric (by_gestation), GA < 10 weeks   TIS
 *   obstetric, GA >= 10 weeks or unknown       TIB
 *   transcranial / adult head (TIC)            TIC
 *   neonatal head, everything else (TIS)       TIS
 *   MI is always tracked as well.
 *
 * Ownership: the instances are the caller's; the exam borrows their
 * strings and the rules' and owns only its arrays (ext_exam_free()).
 */
#ifndef MITILOG_EXT_EXAM_H
#define MITILOG_EXT_EXAM_H

#include <stddef.h>

#include "extract/ext.h"
#include "extract/ext_modes.h"
#include "extract/ext_site.h"
#include "extract/ext_timeline.h"

/* What the exam needs of one instance (filled from the store). */
typedef struct ext_exam_instance {
    char *sop_instance_uid;
    char *kind;        /* "image", "multiframe", "volume", "sr", "other" */
    char *acquired_at; /* ISO, NULL if none */
    char *exam_type;   /* key, NULL if unclassified */
    char *exam_type_source;
    int is_capture; /* an ultrasound image, cine or volume */
    exam_number indices[EXAM_INDEX_COUNT];
    unsigned modes;
    double cine_seconds;
    int has_sr_gestational_age;
    double sr_gestational_age_weeks;
    char *sr_gestational_age_position;
    int has_sr_scan_time;
    double sr_scan_time_seconds;
} ext_exam_instance;

enum { EXT_EXAM_SOURCE_SIZE = 200 };

typedef struct ext_exam {
    const ext_exam_type *exam_type; /* NULL: unclassified */
    char exam_type_source[EXT_EXAM_SOURCE_SIZE];
    exam_index governing_index;
    const char *governing_index_source;
    int has_gestational_age;
    double gestational_age_weeks;
    char gestational_age_source[EXT_EXAM_SOURCE_SIZE];
    const char *first_acquired_at;
    const char *last_acquired_at;
    size_t instance_count, capture_count, cine_count, sr_count, other_count;
    exam_number maxima[EXAM_INDEX_COUNT];
    exam_number mode_maxima[EXAM_MODE_COUNT][EXAM_INDEX_COUNT];
    double gap_cap_seconds;
    double sr_scan_time_seconds; /* 0: none */
    exam_capture *captures;      /* capture_count */
    size_t *capture_instance;    /* capture -> instance index */
    ext_timeline_entry *entries; /* summary.entry_count used */
    ext_timeline_summary summary;
} ext_exam;

/* The governing index of an exam type at a gestational age; *source is
 * "exam_type", "gestational_age", "gestational_age_unknown" or "default". */
exam_index ext_governing_index(const ext_exam_type *type, int has_gestational_age,
                               double gestational_age_weeks, const char **source);

/* The policy group of an exam type: its group key, else obstetric for
 * obstetric types, else general (also without an exam type). */
exam_group ext_exam_type_group(const ext_exam_type *type);

mitilog_status ext_exam_build(const ext_site_rules *rules, const ext_exam_instance *instances,
                              size_t count, ext_exam *exam, mitilog_error *error);
void ext_exam_free(ext_exam *exam);

#endif

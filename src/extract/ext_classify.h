/*
 * ext_classify.h - the exam context of one instance, by the site's rules
 * (ext_site.h): exam type, preset, room, shift, age group and, only when
 * the site turns it on, the operator. Every result carries its
 * provenance: the name of the field or map that gave it
 * ("study_description", "protocol_name", "private_tag", "station_name_map",
 * "calling_ae_title_map", "station_name", "calling_ae_title",
 * "acquisition_local_time", "received_at_local_time",
 * "birth_date_and_study_date", "patient_age", "operators_name").
 *
 * Pure computation; results point into the input or the rules (borrowed).
 */
#ifndef MITILOG_EXT_CLASSIFY_H
#define MITILOG_EXT_CLASSIFY_H

#include "extract/ext_site.h"

typedef struct ext_classify_input {
    const char *fields[EXT_FIELD_COUNT];                      /* UTF-8; NULL or "" absent */
    const char *private_presets[EXT_SITE_PRESET_SOURCES_MAX]; /* value of
                                   * rules->presets[i] when it is private */
    const char *station_name;
    const char *calling_ae_title;
    const char *acquired_at;        /* ISO local wall-clock time, or "" */
    const char *received_at;        /* ISO UTC ("...Z"), or "" */
    const char *patient_age;        /* AS "nnnD|W|M|Y" */
    const char *patient_birth_date; /* DA */
    const char *study_date;         /* DA; acquisition date used if absent */
    const char *operators_name;
} ext_classify_input;

typedef struct ext_classification {
    const ext_exam_type *exam_type;
    const char *exam_type_source;
    const char *preset;
    const char *preset_source;
    const char *room;
    const char *room_source;
    const char *shift;
    const char *shift_source;
    const char *age_group;
    const char *age_group_source;
    long age_days; /* -1 unknown */
    const char *operator_name;
    const char *operator_source;
} ext_classification;

void ext_classify(const ext_site_rules *rules, const ext_classify_input *input,
                  ext_classification *out);

/* First exam type in file order with a matching rule; NULL if none.
 * *source gets the field name of the match. The answer for a set of field
 * values is kept in rules->classify_cache (when there is one), so the
 * images of a study, which share their values, run the regular
 * expressions once. Thread-safe. */
const ext_exam_type *ext_classify_exam_type(const ext_site_rules *rules, const char *const *fields,
                                            const char **source);

/* The cache of ext_classify_exam_type (ext_classify_cache.c): made empty
 * (NULL when out of memory: classification then runs uncached), freed
 * with its keys. ext_site_rules_init/free call these. */
struct ext_classify_cache *ext_classify_cache_create(void);
void ext_classify_cache_free(struct ext_classify_cache *cache);
/* Looks fields up: 1 and *type_index (-1: no type), *source when known. */
int ext_classify_cache_get(struct ext_classify_cache *cache, const char *const *fields,
                           long *type_index, const char **source);
void ext_classify_cache_put(struct ext_classify_cache *cache, const char *const *fields,
                            long type_index, const char *source);

/* First shift (file order) holding minute (0..1439); NULL if none.
 * from <= minute < to, or wrapping midnight when to <= from. */
const char *ext_classify_shift(const ext_site_rules *rules, int minute);

/* Minute of the local day: from the acquisition's wall-clock time (what
 * the modality displayed, DST included) or, without one, received_at (UTC)
 * converted with the process time zone (TZ). -1 if neither. */
int ext_local_minute(const char *acquired_at, const char *received_at, const char **source);

/* Age at the exam: from Birth Date and the study date (exact), else
 * Patient's Age (D, W exact; M as 30 days; Y as completed years).
 * Returns 0 and fills days and completed years, or -1 if unknown. */
int ext_age(const char *patient_age, const char *birth_date, const char *study_date, long *days,
            long *years, const char **source);

/* "neonate" (days <= neonate_max_days), "child" (years <=
 * child_max_years), else "adult". */
const char *ext_age_group(const ext_site_rules *rules, long days, long years);

#endif

/*
 * ext_site.h - a site's classification rules, as loaded from the site
 * file (conf/site.ini, parsed by src/config/config_site.c with inih):
 * exam types with their regular expressions, room maps, shifts, age
 * group bounds, the preset attribute(s), operator recording, and the SR
 * code table. Site rules are configuration, not code: nothing here names
 * an exam, a room or a vendor code.
 *
 * Ownership: the rules own every string and compiled regex; free with
 * ext_site_rules_free(). Read-only after loading: many threads may use
 * one set at once.
 */
#ifndef MITILOG_EXT_SITE_H
#define MITILOG_EXT_SITE_H

#include <regex.h>
#include <stddef.h>
#include <stdint.h>

#include "exam/exam.h"
#include "util/status.h"

/* The text fields an exam type's regexes may look at. */
typedef enum ext_field {
    EXT_FIELD_STUDY_DESCRIPTION = 0,                /* (0008,1030) */
    EXT_FIELD_PROTOCOL_NAME,                        /* (0018,1030) */
    EXT_FIELD_PERFORMED_PROCEDURE_STEP_DESCRIPTION, /* (0040,0254) */
    EXT_FIELD_PROCEDURE_CODE,                       /* (0008,1032), (0040,0260), (0032,1064):
                                  * "SCHEME:CODE meaning" per item */
    EXT_FIELD_BODY_PART_EXAMINED,                   /* (0018,0015) */
    EXT_FIELD_IMAGE_TYPE_3,                         /* (0008,0008) value 3 */
    EXT_FIELD_SERIES_DESCRIPTION,                   /* (0008,103E) */
    EXT_FIELD_COUNT
} ext_field;

/* "study_description", "protocol_name", ... ; NULL if bad. */
const char *ext_field_name(ext_field field);
int ext_field_from_name(const char *name); /* -1 if unknown */

typedef struct ext_match {
    ext_field field;
    char *pattern;
    regex_t regex; /* REG_EXTENDED | REG_ICASE | REG_NOSUB */
} ext_match;

typedef struct ext_exam_type {
    char *key; /* section name: [exam_type KEY] */
    char *label;
    exam_governing governing;
    int obstetric;
    int trimester;                        /* 0 unknown, 1..3 */
    double nominal_gestational_age_weeks; /* 0: none configured */
    int has_group;                        /* 0: not set (obstetric types count as
                                 * obstetric, others general) */
    exam_group group;                     /* the site's group key, when has_group */
    ext_match *matches;                   /* tried in order */
    size_t match_count;
} ext_exam_type;

typedef struct ext_name_map {
    char *from; /* Station Name or calling AE title */
    char *to;   /* room */
} ext_name_map;

typedef struct ext_shift {
    char *name;
    int from_minute; /* minutes after local midnight, 0..1439 */
    int to_minute;   /* exclusive; <= from: wraps midnight */
} ext_shift;

/* SR quantities (NUM items). */
typedef enum ext_quantity {
    EXT_QUANTITY_MI = 0,
    EXT_QUANTITY_TIS,
    EXT_QUANTITY_TIB,
    EXT_QUANTITY_TIC,
    EXT_QUANTITY_SCAN_TIME,
    EXT_QUANTITY_GESTATIONAL_AGE,
    EXT_QUANTITY_COUNT
} ext_quantity;

const char *ext_quantity_name(ext_quantity quantity); /* "mi", ... */
int ext_quantity_from_name(const char *name);         /* -1 if unknown */

typedef struct ext_sr_code {
    char *scheme; /* Coding Scheme Designator */
    char *code;   /* Code Value */
    int is_mode;  /* 0: quantity (NUM), 1: mode (CONTAINER) */
    int target;   /* ext_quantity or exam_mode */
} ext_sr_code;

/* Where the preset is read from, tried in order. */
typedef struct ext_preset_source {
    int is_private; /* 0: field; 1: private tag */
    ext_field field;
    uint16_t group, element; /* private: (gggg,xxee), creator below */
    char *private_creator;
} ext_preset_source;

enum { EXT_SITE_PRESET_SOURCES_MAX = 4 };

typedef struct ext_site_rules {
    char *source_path; /* the site file, or "(built-in)" */
    ext_exam_type *exam_types;
    size_t exam_type_count;
    ext_name_map *rooms; /* [rooms] Station Name -> room */
    size_t room_count;
    ext_name_map *rooms_by_ae; /* [room_by_calling_ae] */
    size_t room_by_ae_count;
    ext_shift *shifts;
    size_t shift_count;
    unsigned neonate_max_days; /* age <= this many days: neonate */
    unsigned child_max_years;  /* completed years <= this: child */
    ext_preset_source presets[EXT_SITE_PRESET_SOURCES_MAX];
    size_t preset_count;
    int record_operator;
    ext_sr_code *sr_codes;
    size_t sr_code_count;
    double gap_cap_seconds; /* exam timeline; 0 = default 300 */
    /* Exam types already decided for a set of field values
     * (ext_classify.c); made by ext_site_rules_init, freed with the rules;
     * NULL: no cache. The rules must not be changed once in use. */
    struct ext_classify_cache *classify_cache;
} ext_site_rules;

/* Built-in defaults: no exam types, rooms or shifts; neonate <= 28 days,
 * child <= 15 years; preset from Protocol Name; operator off; SR code
 * LN:18185-9 = gestational_age. */
mitilog_status ext_site_rules_init(ext_site_rules *rules, mitilog_error *error);
void ext_site_rules_free(ext_site_rules *rules);

/* Adding entries (used by the site file parser; tests). On a bad regex
 * the error text carries regerror()'s message. */
mitilog_status ext_site_add_exam_type(ext_site_rules *rules, const char *key, ext_exam_type **out,
                                      mitilog_error *error);
mitilog_status ext_site_add_match(ext_exam_type *type, ext_field field, const char *pattern,
                                  mitilog_error *error);
mitilog_status ext_site_add_name(ext_name_map **maps, size_t *count, const char *from,
                                 const char *to, mitilog_error *error);
/* "SCHEME:CODE" = "mi" | ... | "mode:pw". Replaces an earlier entry. */
mitilog_status ext_site_add_sr_code(ext_site_rules *rules, const char *scheme_code,
                                    const char *target, mitilog_error *error);
mitilog_status ext_site_add_shift(ext_site_rules *rules, const char *name, ext_shift **out,
                                  mitilog_error *error);
/* "HH:MM" (00:00..23:59, also 24:00 for "to") to minutes; -1 if bad. */
int ext_site_parse_clock(const char *text);
/* "ProtocolName", "SeriesDescription", ... or "(gggg,eeee) CREATOR". */
mitilog_status ext_site_set_presets(ext_site_rules *rules, const char *list, mitilog_error *error);

const ext_exam_type *ext_site_find_exam_type(const ext_site_rules *rules, const char *key);

#endif

/*
 * exam.h - the exam vocabulary every stage of the pipeline speaks:
 * extraction fills these types, the rules and statistics read them, the
 * store writes them and the HTTP API names them. Stages pass them as they
 * are; none keeps a look-alike copied field by field.
 *
 * Owns, each in exactly one place:
 *  - the value of one reading (exam_number: ok, missing or invalid, never
 *    guessed) and the displayed indices (exam_index) with their API names;
 *  - the imaging modes (exam_mode): one bit set, one set of names, and
 *    their DICOM encoding in Image Type value 4;
 *  - the TI threshold ladder (exam_ti_ladder): the displayed-TI steps at
 *    or above which time is measured, stored and drawn;
 *  - the governing-index rule (exam_governing_index, docs/domain.md
 *    section 3) and the exam's policy group (exam_group);
 *  - what a policy sets for an exam (exam_limits, exam_dwell_step) and
 *    how its rules are described (exam_rule_info);
 *  - a finding (exam_finding, exam_severity) and an evaluation's
 *    measurements (exam_measurements);
 *  - one capture of an exam (exam_capture), one instance of a day
 *    (exam_device_instance) and one exam of a period (exam_row).
 *
 * Pure data and computation: no allocation, no state; names returned are
 * static. Who fills a type owns its strings and says so in its own
 * header: the exam record (ext_exam.h) for captures, the policy engine's
 * rules_result (rules.h) for findings, the policy for rule descriptions
 * and limits, the store's lists (store_reports.h) for exam rows and day
 * instances.
 */
#ifndef MITILOG_EXAM_H
#define MITILOG_EXAM_H

#include <stddef.h>

#include "util/hash.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- One reading ---------------------------------------------------- */

typedef enum exam_value_status {
    EXAM_VALUE_MISSING = 0, /* attribute absent or empty                 */
    EXAM_VALUE_OK,          /* one well-formed number                     */
    EXAM_VALUE_INVALID      /* present but not one well-formed number     */
} exam_value_status;

/* "missing", "ok", "invalid" */
const char *exam_value_status_name(exam_value_status status);

typedef struct exam_number {
    exam_value_status status;
    double value; /* meaningful only when status == EXAM_VALUE_OK */
} exam_number;

/* ---- Indices (docs/domain.md section 1) ----------------------------- */

typedef enum exam_index {
    EXAM_INDEX_MI = 0,      /* (0018,5022) MechanicalIndex                */
    EXAM_INDEX_TIS,         /* (0018,5027) SoftTissueThermalIndex         */
    EXAM_INDEX_TIB,         /* (0018,5024) BoneThermalIndex               */
    EXAM_INDEX_TIC,         /* (0018,5026) CranialThermalIndex            */
    EXAM_INDEX_TIS_FOCUS,   /* (0018,5028) SoftTissueFocusThermalIndex    */
    EXAM_INDEX_TIS_SURFACE, /* (0018,5029) SoftTissueSurfaceThermalIndex  */
    EXAM_INDEX_COUNT
} exam_index;

/* API / column name of an index: "mi", "tis", "tib", "tic", "tis_focus",
 * "tis_surface"; "unknown" out of range. */
const char *exam_index_name(exam_index index);

/* ---- Imaging modes -------------------------------------------------- */

/* One bit per mode (EXAM_MODE_BIT), in the order of the Image Type value 4
 * bitmap of PS3.3 C.8.5.6.1.1 (whose bit values ext_modes.c decodes);
 * the API lists modes in this order. */
typedef enum exam_mode {
    EXAM_MODE_2D = 0,   /* B-mode / 2D imaging         */
    EXAM_MODE_M,        /* M-mode                      */
    EXAM_MODE_CW,       /* CW Doppler                  */
    EXAM_MODE_PW,       /* PW Doppler                  */
    EXAM_MODE_COLOUR,   /* colour (flow) Doppler       */
    EXAM_MODE_COLOUR_M, /* colour M-mode               */
    EXAM_MODE_3D,       /* 3D rendering (3D/4D)        */
    EXAM_MODE_POWER,    /* colour power (Doppler) mode */
    EXAM_MODE_TISSUE_CHARACTERIZATION,
    EXAM_MODE_SPATIALLY_RELATED_FRAMES,
    EXAM_MODE_COUNT
} exam_mode;

#define EXAM_MODE_BIT(mode) (1u << (unsigned)(mode))

/* The modes that count as Doppler (time in Doppler, first-trimester
 * Doppler rule). */
#define EXAM_MODES_DOPPLER                                                                         \
    (EXAM_MODE_BIT(EXAM_MODE_CW) | EXAM_MODE_BIT(EXAM_MODE_PW) | EXAM_MODE_BIT(EXAM_MODE_COLOUR) | \
     EXAM_MODE_BIT(EXAM_MODE_COLOUR_M) | EXAM_MODE_BIT(EXAM_MODE_POWER))

/* The DICOM encoding of a mode set: the bits of Image Type (0008,0008)
 * value 4 of US images [std: DICOM PS3.3 C.8.5.6.1.1: 0001 2D, 0002 M,
 * 0004 CW, 0008 PW, 0010 Color Doppler, 0020 Color M-Mode, 0040 3D
 * Rendering, 0100 Color Power Mode, 0200 Tissue Characterization, 0400
 * Spatially-related frames; 0080 and 0800-8000 undefined]. The reader
 * (ext_modes.c) decodes with it, the simulator encodes with it. */
unsigned exam_modes_image_type_bits(unsigned modes);
/* The defined Image Type value 4 bits (the others are unknown). */
unsigned exam_image_type_defined_bits(void);
/* The mode set of a value 4 bitmap (undefined bits ignored). */
unsigned exam_modes_from_image_type_bits(unsigned bits);

/* API name: "2d", "m", "cw", "pw", "colour", "colour_m", "3d", "power",
 * "tissue_characterization", "spatially_related_frames"; NULL if bad. */
const char *exam_mode_name(exam_mode mode);
/* Mode of an API name (also "b" for 2d, "color" for colour); -1 if none. */
int exam_mode_from_name(const char *name);

/* ---- The TI threshold ladder ---------------------------------------- */

/* Displayed TI values at or above which time is measured (per exam, per
 * policy evaluation, stored as rows of exam_time_at_or_above and drawn
 * by the dashboard). Ascending. The period statistics report the first
 * EXAM_TI_STATISTICS_STEPS of them. A policy's dwell table may name any
 * threshold; these are the ones every exam is measured at. */
enum { EXAM_TI_STEP_COUNT = 6, EXAM_TI_STATISTICS_STEPS = 4 };
extern const double exam_ti_ladder[EXAM_TI_STEP_COUNT];

enum { EXAM_TI_LABEL_SIZE = 24 };
/* The text of a threshold as the API's keys write it: at least one
 * decimal ("0.7", "1.0", "2.5"). */
void exam_ti_threshold_label(double threshold, char out[EXAM_TI_LABEL_SIZE]);

/* ---- The governing index (docs/domain.md section 3) ----------------- */

typedef enum exam_governing {
    EXAM_GOVERNING_TIS = 0,
    EXAM_GOVERNING_TIB,
    EXAM_GOVERNING_TIC,
    EXAM_GOVERNING_BY_GESTATION /* TIS below EXAM_OSSIFICATION_WEEKS, else TIB */
} exam_governing;

/* Bone ossifies from roughly 10 weeks of gestation (docs/domain.md
 * section 3). */
#define EXAM_OSSIFICATION_WEEKS 10.0

/* The governing index under a rule at a gestational age; *source (may be
 * NULL) is "exam_type", "gestational_age" or "gestational_age_unknown". An
 * unknown gestational age counts as ossifying (TIB). */
exam_index exam_governing_index(exam_governing rule, int has_gestational_age,
                                double gestational_age_weeks, const char **source);

/* ---- The exam's group ---------------------------------------------- */

/* The policy group of an exam type (docs/policy.md: "group:NAME"
 * selectors; the site's [exam_type KEY] group key): which tables,
 * limits and governing index apply. */
typedef enum exam_group {
    EXAM_GROUP_GENERAL = 0,
    EXAM_GROUP_OBSTETRIC,
    EXAM_GROUP_NEONATAL,     /* neonatal head and body */
    EXAM_GROUP_TRANSCRANIAL, /* adult head */
    EXAM_GROUP_OPHTHALMIC,
    EXAM_GROUP_CONTRAST, /* gas contrast agents */
    EXAM_GROUP_COUNT
} exam_group;

/* "general", "obstetric", "neonatal", "transcranial", "ophthalmic",
 * "contrast"; "unknown" out of range. */
const char *exam_group_name(exam_group group);
/* 0 and *group set for one of those names, -1 otherwise. */
int exam_group_parse(const char *text, exam_group *group);

/* ---- The limits a policy sets for an exam ------------------------- */

/* One row of a dwell table: the longest time allowed at or above a
 * displayed TI (docs/policy.md, rule kind dwell). */
typedef struct exam_dwell_step {
    double threshold;    /* TI at or above */
    double minutes;      /* longest time allowed, unless not_recommended */
    int not_recommended; /* any time at all is a finding */
} exam_dwell_step;

enum { EXAM_MAX_DWELL_STEPS = 16 };

/* What a policy sets for an exam of one group and age group (no
 * exam-type-specific key): the limits the dashboard draws. Filled by
 * rules_policy_limits(), written into the policy document by the store.
 * Strings point into the policy. */
typedef struct exam_limits {
    exam_group group;
    const char *age_group; /* "adult", "child", "neonate" */
    int has_ti_ceiling, has_mi_ceiling, has_mi_equipment, has_ti_equipment;
    double ti_ceiling;                 /* governing TI (rule kind ti_ceiling) */
    double mi_ceiling;                 /* rule kind mi_ceiling */
    double mi_equipment, ti_equipment; /* rule kind equipment_maxima */
    const char *dwell_rule;            /* the dwell rule that applies; NULL: none */
    exam_dwell_step dwell[EXAM_MAX_DWELL_STEPS];
    size_t dwell_count; /* ascending thresholds */
} exam_limits;

/* ---- A finding ------------------------------------------------------ */

typedef enum exam_severity {
    EXAM_SEVERITY_ADVISORY = 0,
    EXAM_SEVERITY_WARNING,
    EXAM_SEVERITY_VIOLATION
} exam_severity;

/* "advisory", "warning", "violation"; "unknown" out of range. */
const char *exam_severity_name(exam_severity severity);
/* 0 and *severity set for one of those names, -1 otherwise. */
int exam_severity_parse(const char *text, exam_severity *severity);

/* One finding of a policy rule on an exam (or, study_instance_uid NULL,
 * on a room and transducer over a period). The policy engine fills it
 * (its strings owned by the rules_result that holds it), the store
 * writes it as it is. */
typedef struct exam_finding {
    char *rule_id;
    exam_severity severity;
    char *quantity; /* "tib", "mi", "time_at_or_above", "cem43", ... */
    double measured;
    char *unit;   /* "", "min", "CEM43 min", "instances" */
    double limit; /* meaningful when has_limit */
    int has_limit;
    double threshold; /* dwell: the TI threshold; else 0 */
    exam_index index; /* governing index used, when has_index */
    int has_index;
    char **instance_uids; /* the instances that produced it */
    size_t instance_count;
    double first_seconds; /* time span of those instances, when has_span */
    double last_seconds;
    int has_span;
    double estimated_seconds; /* timeline time behind it (dwell: time at
                                  or above; Doppler: time in Doppler) */
    char *assumptions;        /* "estimate: gap cap 300 s; ..." or "" */
    int provisional;          /* exam not closed */
    char policy_version[HASH_HEX_SIZE];
    char *source;             /* the rule's source text, for users */
    char *study_instance_uid; /* NULL for output_not_reported */
    char *room;               /* output_not_reported: the group */
    char *transducer;
} exam_finding;

/* Values computed for every exam under a policy, finding or not (the
 * policy engine fills them, the store writes them). Times are ESTIMATES
 * from the exam timeline on the policy's gap cap. */
typedef struct exam_measurements {
    exam_index governing_index;
    double max_index[EXAM_INDEX_COUNT]; /* when index_reported[i] */
    int index_reported[EXAM_INDEX_COUNT];
    double estimated_seconds; /* timeline estimate (after the SR bound) */
    double span_seconds;      /* last capture time - first */
    double doppler_seconds;   /* estimated time in Doppler modes */
    double cem43_minutes;     /* thermal dose, an estimate */
    /* timeline seconds with the governing index at or above
     * exam_ti_ladder[k] */
    double seconds_at_or_above[EXAM_TI_STEP_COUNT];
} exam_measurements;

/* ---- A policy rule as described to users ---------------------------- */

/* One normalised setting and one rule of a policy (docs/policy.md), as
 * the policy engine describes them (rules_policy_rule_at) and the store
 * writes them into the policy document. Strings point into the policy. */
typedef struct exam_setting {
    const char *key;   /* "limit", "limit.group.ophthalmic", "dwell.1.0" */
    const char *value; /* normalised: "2", "off", "not_recommended" */
} exam_setting;

typedef struct exam_rule_info {
    const char *id;
    const char *kind; /* "ti_ceiling", "dwell", ... */
    exam_severity severity;
    int enabled;
    const char *source;
    const char *description; /* one line, what the rule checks */
    const exam_setting *settings;
    size_t setting_count;
} exam_rule_info;

/* ---- One received instance of a day -------------------------------- */

/* An ultrasound instance as the day-level rule output_not_reported reads
 * it; the store fills it (store_load_day_instances, which owns and frees
 * the strings). */
typedef struct exam_device_instance {
    const char *sop_instance_uid;
    const char *study_instance_uid;
    const char *room; /* station name or department; NULL = "" */
    const char *transducer;
    int has_any_index;   /* any of the six indices ok */
    double time_seconds; /* acquisition time, when has_time */
    int has_time;
} exam_device_instance;

/* ---- One exam of a period ------------------------------------------ */

/* Findings of one rule on one exam. */
typedef struct exam_rule_count {
    const char *rule_id;
    size_t count;
} exam_rule_count;

/* One exam as the period views read it: the store fills it (its strings
 * belong to the list that holds the row), the statistics and reports read
 * it. NULL strings: not recorded, or not asked for. */
typedef struct exam_row {
    const char *study_instance_uid;
    const char *day; /* local date of the first capture */
    const char *exam_type, *exam_type_label, *governing_index;
    const char *room, *preset, *shift, *transducer;
    const char *study_description, *first_acquired_at;
    double max_governing; /* highest governing TI, when has_governing */
    int has_governing;
    double max_mi; /* when has_mi */
    int has_mi;
    double estimated_seconds; /* timeline estimate */
    /* timeline seconds with the governing index at or above
     * exam_ti_ladder[k] (an estimate) */
    double seconds_at_or_above[EXAM_TI_STATISTICS_STEPS];
    size_t capture_count;         /* captures that could carry indices */
    size_t indexed_count;         /* ... of which carried at least one */
    size_t finding_count;         /* findings of the current policy */
    size_t informational_count;   /* ... of which advisories below their own
                                    limit: informational, counted apart */
    const exam_rule_count *rules; /* findings by rule (the report joins them) */
    size_t rule_count;
    int worst_severity; /* the most severe finding: an
                                    EXAM_SEVERITY_RANK_ (filled with every
                                    column only, else 0) */
} exam_row;

/* Severity ranks of a finding for ranking lists: an informational
 * advisory (below its own limit) ranks as none. */
enum {
    EXAM_SEVERITY_RANK_NONE = 0,
    EXAM_SEVERITY_RANK_ADVISORY = 1,
    EXAM_SEVERITY_RANK_WARNING = 2,
    EXAM_SEVERITY_RANK_VIOLATION = 3
};

/* ---- One capture of an exam ----------------------------------------- */

/* An image, cine loop or volume of an exam as the timeline and the rules
 * read it; filled by the exam record (ext_exam_build). */
typedef struct exam_capture {
    const char *sop_instance_uid; /* borrowed; NULL when not known */
    double time_seconds;          /* acquisition time on any fixed scale */
    int has_time;                 /* 0: no usable acquisition time */
    double cine_seconds;          /* frames x frame time / 1000; 0 if single */
    exam_number indices[EXAM_INDEX_COUNT];
    unsigned modes; /* EXAM_MODE_BIT set; 0 if unknown */
} exam_capture;

#ifdef __cplusplus
}
#endif

#endif

/*
 * ext.h - extraction: DICOM facts (dcm_facts) to an exposure record.
 *
 * Owns the interpretation of attribute values: DS/IS classification
 * (ok / missing / invalid, never guessed), the acquisition date-time with
 * its fall-backs, and the six displayed acoustic output indices (their
 * names and value type are the exam vocabulary's, exam/exam.h). The
 * ext_record is the struct that the store writes; the exam record built
 * from a study's instances (ext_exam.h) fills the vocabulary's captures
 * that the rules read.
 *
 * Ownership: ext_record_from_facts() fills a caller-supplied record whose
 * strings are heap copies owned by the record; free with ext_record_free().
 * The facts are not kept.
 */
#ifndef MITILOG_EXT_H
#define MITILOG_EXT_H

#include <stddef.h>

#include "dicom/dcm.h"
#include "exam/exam.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Decimal String (PS3.5 6.2, VR DS): leading/trailing spaces allowed,
 * at most 16 characters, [+-]digits[.digits][(E|e)[+-]digits]. Exactly one
 * value (VM 1): a backslash makes it invalid. NULL or all spaces: missing. */
exam_number ext_parse_decimal_string(const char *raw);
/* Integer String (VR IS): at most 12 characters, [+-]digits, VM 1. */
exam_number ext_parse_integer_string(const char *raw);

/* Frame Time Vector (0018,1065), DS with one value per frame: the time
 * from the previous frame, the first value 0 by definition (PS3.3 Cine
 * module, C.7.6.5.1.2). Fills the mean of the values after the first
 * (the frame time) and their exact sum (the cine's duration). OK only
 * when there are at least two values, every one a well-formed DS, none
 * negative and the sum above 0; MISSING when absent or empty; else
 * INVALID. */
exam_number ext_frame_time_vector(const char *raw, double *sum_ms);

typedef enum ext_time_source {
    EXT_TIME_NONE = 0,
    EXT_TIME_ACQUISITION_DATE_TIME, /* (0008,002A)                        */
    EXT_TIME_ACQUISITION,           /* (0008,0022) + (0008,0032)          */
    EXT_TIME_CONTENT,               /* (0008,0023) + (0008,0033)          */
    EXT_TIME_INSTANCE_CREATION,     /* (0008,0012) + (0008,0013)          */
    EXT_TIME_STUDY                  /* (0008,0020) + (0008,0030)          */
} ext_time_source;

const char *ext_time_source_name(ext_time_source source);

enum { EXT_ISO_TIME_SIZE = 40 };

/* Converts DICOM DA + TM (either may be NULL) or one DT to ISO 8601
 * ("YYYY-MM-DDTHH:MM:SS[.ffffff][+HH:MM]"); the offset is appended only
 * when the DT carries one or timezone_offset (0008,0201, "+HHMM") is
 * given. Returns 0 on success, -1 if the values are missing or malformed. */
int ext_iso_from_date_time(const char *date, const char *time, const char *timezone_offset,
                           char out[EXT_ISO_TIME_SIZE]);
int ext_iso_from_dt(const char *date_time, const char *timezone_offset,
                    char out[EXT_ISO_TIME_SIZE]);

/* Acquisition time with the fall-backs of docs/domain.md:
 * acquisition date-time, acquisition date + time, content date + time,
 * instance creation date + time, then study date + time. */
ext_time_source ext_acquisition_time(const dcm_facts *facts, char out[EXT_ISO_TIME_SIZE]);

/* What kind of object an instance is, from its SOP Class UID. */
typedef enum ext_object_kind {
    EXT_KIND_OTHER = 0,  /* any other class: no acoustic record */
    EXT_KIND_IMAGE,      /* US Image Storage (and its retired UID) */
    EXT_KIND_MULTIFRAME, /* US Multi-frame Image Storage (and retired) */
    EXT_KIND_VOLUME,     /* Enhanced US Volume Storage */
    EXT_KIND_SR          /* Comprehensive, Enhanced, Comprehensive 3D SR */
} ext_object_kind;

ext_object_kind ext_object_kind_of(const char *sop_class_uid);
/* "other", "image", "multiframe", "volume", "sr" */
const char *ext_object_kind_name(ext_object_kind kind);

/* One received or imported instance. Strings are owned, NULL if absent. */
typedef struct ext_record {
    char *sop_class_uid;
    char *sop_instance_uid;
    char *study_instance_uid;
    char *series_instance_uid;
    char *modality;
    char *station_name;
    char *institutional_department_name;
    char *study_description;
    char *accession_number; /* (0008,0050), NULL when absent */
    char *protocol_name;
    char *transfer_syntax_uid;
    char *calling_ae_title; /* "" for imported files */
    char *source_path;      /* imported file, NULL for network */

    char acquired_at[EXT_ISO_TIME_SIZE]; /* "" when no time at all */
    ext_time_source acquired_at_source;
    char received_at[EXT_ISO_TIME_SIZE]; /* UTC, set by the caller */

    exam_number number_of_frames;
    exam_number frame_time_ms;       /* Frame Time, else the mean of Frame
                                    * Time Vector's values after the first */
    int frame_time_from_vector;      /* 1 when frame_time_ms came from it */
    double frame_time_vector_sum_ms; /* its exact sum, when used */

    int is_ultrasound; /* modality US or an US SOP class */
    exam_number indices[EXAM_INDEX_COUNT];
    char *index_raw[EXAM_INDEX_COUNT]; /* raw text as sent, NULL if absent */

    int text_replaced; /* some text was not UTF-8: bad bytes became U+FFFD */

    /* ---- Exam context: filled by ext_record_enrich() (ext_context.c);
     * zero / NULL until then. *_source members are static provenance
     * names (docs/extraction.md), NULL when the value is absent. ---- */
    int enriched;
    ext_object_kind kind;
    int has_acoustic_record;      /* an US image, cine, volume or SR */
    char *specific_character_set; /* as sent */
    char *image_type;
    char *series_description;
    char *body_part_examined;
    char *performed_procedure_step_description;
    char *procedure_codes; /* "SCHEME:CODE meaning\\..." */

    unsigned modes;               /* union of the three sources below */
    unsigned modes_image_type;    /* Image Type value 4 (ext_modes.h) */
    int image_type_bitmap_status; /* ext_bitmap_status */
    unsigned image_type_bitmap;   /* the raw 16 bits when ok */
    unsigned modes_regions;       /* Region Data Types */
    unsigned modes_sr;            /* SR mode containers */
    int modes_conflict;           /* image type and regions disagree */

    char *transducer_data; /* (0018,5010), all values */
    const char *transducer_source;
    char *transducer_type; /* (0018,6031) */
    int has_frequency;
    unsigned frequency_khz;    /* (0018,6030) of the first region with one */
    char frequency_source[48]; /* "ultrasound_region_N" */
    double cine_seconds;       /* frames x frame time, or the sum of
                                    * Frame Acquisition Durations */

    char *exam_type; /* key of the site's exam type */
    char *exam_type_label;
    const char *exam_type_source;
    int has_governing_index;
    exam_index governing_index;
    const char *governing_index_source;
    int has_gestational_age;
    double gestational_age_weeks;
    char gestational_age_source[160];
    int trimester;
    char *preset;
    const char *preset_source;
    char *room;
    const char *room_source;
    char *shift;
    const char *shift_source;
    const char *age_group;
    const char *age_group_source;
    char *operator_name;
    const char *operator_source;

    struct ext_sr_result *sr;  /* SR objects only, else NULL */
    char overlong_fields[256]; /* comma-separated field names */
} ext_record;

/* Builds the record. Fails (MITILOG_ERROR_INVALID) only when the object
 * cannot be stored at all: no SOP Instance UID or no SOP Class UID. */
mitilog_status ext_record_from_facts(const dcm_facts *facts, ext_record *record,
                                     mitilog_error *error);
void ext_record_free(ext_record *record);

struct ext_site_rules;
/* Adds the exam context (modes, transducer, exam type, preset, room,
 * shift, age group, operator, SR values, governing index, gestational
 * age) by the site's rules. extra may be NULL. Call after setting
 * calling_ae_title and received_at. Fails only when out of memory. */
mitilog_status ext_record_enrich(ext_record *record, const dcm_facts *facts, const dcm_extra *extra,
                                 const struct ext_site_rules *rules, mitilog_error *error);
/* Frees what ext_record_enrich() added (called by ext_record_free). */
void ext_record_free_context(ext_record *record);

/* 1 for the ultrasound storage SOP classes of docs/domain.md. */
int ext_is_ultrasound_sop_class(const char *sop_class_uid);

/* 1 when uid is a valid UID (PS3.5 section 9.1): digits and dots,
 * components non-empty and without a leading zero (but "0" itself),
 * 1 to 64 bytes. */
int ext_uid_is_valid(const char *uid);

#ifdef __cplusplus
}
#endif

#endif

/*
 * ext_context.c - the exam context of one record (ext_record_enrich):
 * object kind, modes, transducer, cine duration, SR values, and the
 * site's classification (ext_classify.c). Provenance names are listed in
 * docs/extraction.md.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "extract/ext.h"
#include "extract/ext_classify.h"
#include "extract/ext_exam.h"
#include "extract/ext_modes.h"
#include "extract/ext_sr.h"
#include "extract/ext_text.h"

ext_object_kind ext_object_kind_of(const char *uid)
{
    static const struct {
        const char *uid;
        ext_object_kind kind;
    } classes[] = {
        {"1.2.840.10008.5.1.4.1.1.6.1", EXT_KIND_IMAGE},      /* US Image */
        {"1.2.840.10008.5.1.4.1.1.6", EXT_KIND_IMAGE},        /* retired */
        {"1.2.840.10008.5.1.4.1.1.3.1", EXT_KIND_MULTIFRAME}, /* US Multi-frame */
        {"1.2.840.10008.5.1.4.1.1.3", EXT_KIND_MULTIFRAME},   /* retired */
        {"1.2.840.10008.5.1.4.1.1.6.2", EXT_KIND_VOLUME},     /* Enhanced US Volume */
        {"1.2.840.10008.5.1.4.1.1.88.33", EXT_KIND_SR},       /* Comprehensive SR */
        {"1.2.840.10008.5.1.4.1.1.88.22", EXT_KIND_SR},       /* Enhanced SR */
        {"1.2.840.10008.5.1.4.1.1.88.34", EXT_KIND_SR},       /* Comprehensive 3D SR */
    };
    for (size_t i = 0; uid != NULL && i < sizeof classes / sizeof classes[0]; i++)
        if (strcmp(uid, classes[i].uid) == 0)
            return classes[i].kind;
    return EXT_KIND_OTHER;
}

const char *ext_object_kind_name(ext_object_kind kind)
{
    static const char *const names[] = {"other", "image", "multiframe", "volume", "sr"};
    return (unsigned)kind < sizeof names / sizeof names[0] ? names[kind] : "other";
}

/* A value of facts as UTF-8 (converted by DCMTK, or decoded here). */
static char *value_copy(const dcm_facts *facts, dcm_attribute attribute, int *failed, int *replaced)
{
    const char *raw = facts->values[attribute];
    if (raw == NULL)
        return NULL;
    const char *charset = facts->character_set_converted
                              ? "ISO_IR 192"
                              : facts->values[DCM_ATTRIBUTE_SPECIFIC_CHARACTER_SET];
    return ext_text_decode(raw, charset, replaced, failed);
}

static char *copy_text(const char *text, int *failed)
{
    if (text == NULL)
        return NULL;
    char *copy = strdup(text);
    if (copy == NULL)
        *failed = 1;
    return copy;
}

static void add_modes(ext_record *record, const dcm_facts *facts, const dcm_extra *extra)
{
    ext_bitmap bitmap = ext_modes_from_image_type(record->image_type);
    record->image_type_bitmap_status = bitmap.status;
    record->image_type_bitmap = bitmap.raw;
    record->modes_image_type = bitmap.modes;
    ext_region_mode_input regions[64];
    size_t count = facts->region_count < 64 ? facts->region_count : 64;
    for (size_t i = 0; i < count; i++) {
        regions[i].region_data_type =
            facts->regions[i].has_region_data_type ? facts->regions[i].region_data_type : -1;
        regions[i].region_spatial_format =
            extra != NULL && i < extra->region_count ? extra->region_spatial_formats[i] : -1;
    }
    record->modes_regions = ext_modes_from_regions(regions, count);
    record->modes_conflict = ext_modes_conflict(&bitmap, record->modes_regions, count);
    record->modes = ext_modes_union(&bitmap, record->modes_regions, record->modes_sr);
}

static void add_transducer(ext_record *record, const dcm_facts *facts)
{
    if (record->transducer_data != NULL && record->transducer_data[0] != '\0')
        record->transducer_source = "transducer_data";
    for (size_t i = 0; i < facts->region_count; i++) {
        if (facts->regions[i].has_transducer_frequency) {
            record->has_frequency = 1;
            record->frequency_khz = facts->regions[i].transducer_frequency_khz;
            snprintf(record->frequency_source, sizeof record->frequency_source,
                     "ultrasound_region_%zu", i + 1);
            return;
        }
    }
}

static void add_cine(ext_record *record, const dcm_extra *extra)
{
    double frames =
        record->number_of_frames.status == EXAM_VALUE_OK ? record->number_of_frames.value : 1;
    if (record->frame_time_from_vector) {
        /* the vector's exact sum: first frame to last [PS3.3 C.7.6.5.1.2] */
        record->cine_seconds = record->frame_time_vector_sum_ms / 1000.0;
    } else if (frames > 1 && record->frame_time_ms.status == EXAM_VALUE_OK &&
               record->frame_time_ms.value > 0) {
        record->cine_seconds = frames * record->frame_time_ms.value / 1000.0;
    } else if (extra != NULL && extra->frame_duration_count > 0) {
        double sum = extra->frame_duration_ms_sum;
        if (extra->frame_content_count == 1 && frames > 1)
            sum *= frames; /* one shared duration for every frame */
        record->cine_seconds = sum / 1000.0;
    }
    if (record->acquired_at[0] == '\0' && extra != NULL &&
        extra->first_frame_acquisition_datetime != NULL &&
        ext_iso_from_dt(extra->first_frame_acquisition_datetime, NULL, record->acquired_at) == 0)
        record->acquired_at_source = EXT_TIME_ACQUISITION_DATE_TIME;
}

/* Longest values per VR [std: DICOM PS3.5 6.2]: SH 16, LO 64, CS 16,
 * PN 64 per component group; counted in characters. */
static void flag_overlong(ext_record *record)
{
    const struct {
        const char *name;
        const char *value;
        size_t max;
    } checks[] = {
        {"station_name", record->station_name, 16},
        {"study_description", record->study_description, 64},
        {"protocol_name", record->protocol_name, 64},
        {"series_description", record->series_description, 64},
        {"institutional_department_name", record->institutional_department_name, 64},
        {"performed_procedure_step_description", record->performed_procedure_step_description, 64},
        {"body_part_examined", record->body_part_examined, 16},
        {"transducer_type", record->transducer_type, 16},
    };
    size_t used = 0;
    record->overlong_fields[0] = '\0';
    for (size_t i = 0; i < sizeof checks / sizeof checks[0]; i++) {
        if (checks[i].value == NULL || ext_text_characters(checks[i].value) <= checks[i].max)
            continue;
        int n = snprintf(record->overlong_fields + used, sizeof record->overlong_fields - used,
                         "%s%s", used ? "," : "", checks[i].name);
        if (n > 0 && (size_t)n < sizeof record->overlong_fields - used)
            used += (size_t)n;
    }
}

static void add_gestational_age(ext_record *record, const ext_exam_type *type)
{
    if (record->sr != NULL && record->sr->has_gestational_age) {
        record->has_gestational_age = 1;
        record->gestational_age_weeks = record->sr->gestational_age_weeks;
        snprintf(record->gestational_age_source, sizeof record->gestational_age_source,
                 "sr item %.120s", record->sr->gestational_age_position);
    } else if (type != NULL && type->nominal_gestational_age_weeks > 0) {
        record->has_gestational_age = 1;
        record->gestational_age_weeks = type->nominal_gestational_age_weeks;
        snprintf(record->gestational_age_source, sizeof record->gestational_age_source,
                 "exam_type_trimester");
    }
}

mitilog_status ext_record_enrich(ext_record *record, const dcm_facts *facts, const dcm_extra *extra,
                                 const ext_site_rules *rules, mitilog_error *error)
{
    ext_record_free_context(record);
    int failed = 0, *replaced = &record->text_replaced;
    record->enriched = 1;
    record->kind = ext_object_kind_of(record->sop_class_uid);
    record->has_acoustic_record = record->kind != EXT_KIND_OTHER;
    record->specific_character_set =
        copy_text(facts->values[DCM_ATTRIBUTE_SPECIFIC_CHARACTER_SET], &failed);
    if (record->specific_character_set != NULL &&
        !ext_text_is_utf8(record->specific_character_set)) {
        free(record->specific_character_set);
        record->specific_character_set = NULL;
    }
    record->image_type = value_copy(facts, DCM_ATTRIBUTE_IMAGE_TYPE, &failed, replaced);
    record->series_description =
        value_copy(facts, DCM_ATTRIBUTE_SERIES_DESCRIPTION, &failed, replaced);
    record->body_part_examined =
        value_copy(facts, DCM_ATTRIBUTE_BODY_PART_EXAMINED, &failed, replaced);
    record->performed_procedure_step_description =
        value_copy(facts, DCM_ATTRIBUTE_PERFORMED_PROCEDURE_STEP_DESCRIPTION, &failed, replaced);
    record->transducer_data = value_copy(facts, DCM_ATTRIBUTE_TRANSDUCER_DATA, &failed, replaced);
    record->transducer_type = value_copy(facts, DCM_ATTRIBUTE_TRANSDUCER_TYPE, &failed, replaced);
    const char *charset = facts->values[DCM_ATTRIBUTE_SPECIFIC_CHARACTER_SET];
    char *private_values[EXT_SITE_PRESET_SOURCES_MAX] = {NULL};
    if (extra != NULL) {
        record->procedure_codes =
            ext_text_decode(extra->procedure_codes, charset, replaced, &failed);
        for (size_t i = 0; i < EXT_SITE_PRESET_SOURCES_MAX && i < DCM_EXTRA_PRIVATE_MAX; i++)
            private_values[i] =
                ext_text_decode(extra->private_values[i], charset, replaced, &failed);
    }
    char *operators = value_copy(facts, DCM_ATTRIBUTE_OPERATORS_NAME, &failed, replaced);

    if (record->kind == EXT_KIND_SR && facts->sr_item_count > 0 && !failed) {
        record->sr = calloc(1, sizeof *record->sr);
        if (record->sr == NULL || ext_sr_map(rules, facts->sr_items, facts->sr_item_count,
                                             record->sr, error) != MITILOG_OK)
            failed = 1;
        else
            record->modes_sr = record->sr->modes;
    }
    add_modes(record, facts, extra);
    add_transducer(record, facts);
    add_cine(record, extra);

    char image_type_3[80];
    ext_classify_input input;
    memset(&input, 0, sizeof input);
    input.fields[EXT_FIELD_STUDY_DESCRIPTION] = record->study_description;
    input.fields[EXT_FIELD_PROTOCOL_NAME] = record->protocol_name;
    input.fields[EXT_FIELD_PERFORMED_PROCEDURE_STEP_DESCRIPTION] =
        record->performed_procedure_step_description;
    input.fields[EXT_FIELD_PROCEDURE_CODE] = record->procedure_codes;
    input.fields[EXT_FIELD_BODY_PART_EXAMINED] = record->body_part_examined;
    input.fields[EXT_FIELD_IMAGE_TYPE_3] =
        ext_multi_value(record->image_type, 3, image_type_3, sizeof image_type_3) ? image_type_3
                                                                                  : NULL;
    input.fields[EXT_FIELD_SERIES_DESCRIPTION] = record->series_description;
    for (size_t i = 0; i < EXT_SITE_PRESET_SOURCES_MAX; i++)
        input.private_presets[i] = private_values[i];
    input.station_name = record->station_name;
    input.calling_ae_title = record->calling_ae_title;
    input.acquired_at = record->acquired_at;
    input.received_at = record->received_at;
    input.patient_age = facts->values[DCM_ATTRIBUTE_PATIENT_AGE];
    input.patient_birth_date = facts->values[DCM_ATTRIBUTE_PATIENT_BIRTH_DATE];
    input.study_date = facts->values[DCM_ATTRIBUTE_STUDY_DATE];
    input.operators_name = operators;
    ext_classification result;
    ext_classify(rules, &input, &result);

    if (result.exam_type != NULL) {
        record->exam_type = copy_text(result.exam_type->key, &failed);
        record->exam_type_label = copy_text(result.exam_type->label, &failed);
        record->exam_type_source = result.exam_type_source;
        record->trimester = result.exam_type->trimester;
    }
    record->preset = copy_text(result.preset, &failed);
    record->preset_source = result.preset_source;
    record->room = copy_text(result.room, &failed);
    record->room_source = result.room_source;
    record->shift = copy_text(result.shift, &failed);
    record->shift_source = result.shift_source;
    record->age_group = result.age_group;
    record->age_group_source = result.age_group_source;
    record->operator_name = copy_text(result.operator_name, &failed);
    record->operator_source = result.operator_source;
    add_gestational_age(record, result.exam_type);
    if (record->has_acoustic_record) {
        record->has_governing_index = 1;
        record->governing_index =
            ext_governing_index(result.exam_type, record->has_gestational_age,
                                record->gestational_age_weeks, &record->governing_index_source);
    }
    flag_overlong(record);
    for (size_t i = 0; i < EXT_SITE_PRESET_SOURCES_MAX; i++)
        free(private_values[i]);
    free(operators);
    if (failed) {
        ext_record_free_context(record);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    return MITILOG_OK;
}

void ext_record_free_context(ext_record *record)
{
    char **strings[] = {&record->specific_character_set,
                        &record->image_type,
                        &record->series_description,
                        &record->body_part_examined,
                        &record->performed_procedure_step_description,
                        &record->procedure_codes,
                        &record->transducer_data,
                        &record->transducer_type,
                        &record->exam_type,
                        &record->exam_type_label,
                        &record->preset,
                        &record->room,
                        &record->shift,
                        &record->operator_name};
    for (size_t i = 0; i < sizeof strings / sizeof strings[0]; i++) {
        free(*strings[i]);
        *strings[i] = NULL;
    }
    if (record->sr != NULL) {
        ext_sr_result_free(record->sr);
        free(record->sr);
        record->sr = NULL;
    }
}

/* Building the exposure record of one instance from its DICOM facts. */
#include <stdlib.h>
#include <string.h>

#include "extract/ext.h"
#include "extract/ext_text.h"

/* The attribute carrying each displayed index, in exam_index order. */
static const dcm_attribute index_attributes[EXAM_INDEX_COUNT] = {
    DCM_ATTRIBUTE_MECHANICAL_INDEX,
    DCM_ATTRIBUTE_SOFT_TISSUE_THERMAL_INDEX,
    DCM_ATTRIBUTE_BONE_THERMAL_INDEX,
    DCM_ATTRIBUTE_CRANIAL_THERMAL_INDEX,
    DCM_ATTRIBUTE_SOFT_TISSUE_FOCUS_THERMAL_INDEX,
    DCM_ATTRIBUTE_SOFT_TISSUE_SURFACE_THERMAL_INDEX,
};

int ext_is_ultrasound_sop_class(const char *sop_class_uid)
{
    static const char *const classes[] = {
        "1.2.840.10008.5.1.4.1.1.6.1", /* US Image Storage */
        "1.2.840.10008.5.1.4.1.1.3.1", /* US Multi-frame Image Storage */
        "1.2.840.10008.5.1.4.1.1.6.2", /* Enhanced US Volume Storage */
        "1.2.840.10008.5.1.4.1.1.6",   /* US Image Storage (retired) */
        "1.2.840.10008.5.1.4.1.1.3",   /* US Multi-frame Storage (retired) */
    };
    if (sop_class_uid == NULL)
        return 0;
    for (size_t i = 0; i < sizeof classes / sizeof classes[0]; i++) {
        if (strcmp(sop_class_uid, classes[i]) == 0)
            return 1;
    }
    return 0;
}

/* Copy without the leading and trailing spaces that DICOM pads with
 * (insignificant for SH, LO, CS, UI per PS3.5 6.2); NULL stays NULL. */
static char *trimmed_duplicate(const char *raw, int *failed, int *replaced, int latin1)
{
    if (raw == NULL)
        return NULL;
    while (*raw == ' ')
        raw++;
    size_t length = strlen(raw);
    while (length > 0 && raw[length - 1] == ' ')
        length--;
    char *copy = malloc(length + 1);
    if (copy == NULL) {
        *failed = 1;
        return NULL;
    }
    memcpy(copy, raw, length);
    copy[length] = '\0';
    if (latin1 && !ext_text_is_ascii(copy)) {
        char *decoded = ext_text_latin1_to_utf8(copy);
        free(copy);
        if (decoded == NULL)
            *failed = 1;
        return decoded;
    }
    if (!ext_text_is_utf8(copy)) {
        char *repaired = ext_text_to_utf8(copy, replaced);
        free(copy);
        if (repaired == NULL)
            *failed = 1;
        return repaired;
    }
    return copy;
}

static char *exact_duplicate(const char *raw, int *failed, int *replaced)
{
    if (raw == NULL)
        return NULL;
    char *copy = ext_text_to_utf8(raw, replaced);
    if (copy == NULL)
        *failed = 1;
    return copy;
}

/* PS3.5 section 9.1 (and 6.2, VR UI): components of digits separated by
 * single dots, no component empty or starting with 0 unless it is "0",
 * at most 64 bytes in all. */
int ext_uid_is_valid(const char *uid)
{
    size_t length = 0;
    size_t component = 0; /* digits in the current component */
    int leading_zero = 0;
    for (const char *c = uid; *c != '\0'; c++, length++) {
        if (length >= 64)
            return 0;
        if (*c == '.') {
            if (component == 0)
                return 0;
            component = 0;
            leading_zero = 0;
        } else if (*c >= '0' && *c <= '9') {
            if (component == 1 && leading_zero)
                return 0;
            if (component == 0)
                leading_zero = *c == '0';
            component++;
        } else {
            return 0;
        }
    }
    return length > 0 && component > 0;
}

mitilog_status ext_record_from_facts(const dcm_facts *facts, ext_record *record,
                                     mitilog_error *error)
{
    memset(record, 0, sizeof *record);
    const char *const *values = (const char *const *)facts->values;
    int failed = 0;
    /* Values are UTF-8 when the shim converted them; when DCMTK could not,
     * Latin-1 (ISO_IR 100) is decoded here [std: DICOM PS3.3 C.12.1.1.2]. */
    int latin1 = !facts->character_set_converted &&
                 ext_charset_is_latin1(values[DCM_ATTRIBUTE_SPECIFIC_CHARACTER_SET]);
    record->sop_class_uid = trimmed_duplicate(values[DCM_ATTRIBUTE_SOP_CLASS_UID], &failed,
                                              &record->text_replaced, latin1);
    record->sop_instance_uid = trimmed_duplicate(values[DCM_ATTRIBUTE_SOP_INSTANCE_UID], &failed,
                                                 &record->text_replaced, latin1);
    if (!failed && (record->sop_instance_uid == NULL || record->sop_instance_uid[0] == '\0')) {
        ext_record_free(record);
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no SOP Instance UID (0008,0018)");
    }
    if (!failed && (record->sop_class_uid == NULL || record->sop_class_uid[0] == '\0')) {
        ext_record_free(record);
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no SOP Class UID (0008,0016)");
    }
    record->study_instance_uid = trimmed_duplicate(values[DCM_ATTRIBUTE_STUDY_INSTANCE_UID],
                                                   &failed, &record->text_replaced, latin1);
    record->series_instance_uid = trimmed_duplicate(values[DCM_ATTRIBUTE_SERIES_INSTANCE_UID],
                                                    &failed, &record->text_replaced, latin1);
    if (!failed) {
        /* An identifier that is not a UID is refused rather than stored:
         * it would name files and API paths (PS3.5 section 9.1). The
         * Study and Series UIDs are checked when present. */
        const struct {
            const char *value;
            const char *name;
        } uids[] = {
            {record->sop_instance_uid, "SOP Instance UID (0008,0018)"},
            {record->sop_class_uid, "SOP Class UID (0008,0016)"},
            {record->study_instance_uid, "Study Instance UID (0020,000D)"},
            {record->series_instance_uid, "Series Instance UID (0020,000E)"},
        };
        for (size_t i = 0; i < sizeof uids / sizeof uids[0]; i++) {
            if (uids[i].value == NULL || uids[i].value[0] == '\0' ||
                ext_uid_is_valid(uids[i].value))
                continue;
            mitilog_error_set(error, MITILOG_ERROR_INVALID,
                              "%s '%.80s%s' is not a valid UID (digits and dots, no "
                              "leading zero in a component, at most 64 bytes)",
                              uids[i].name, uids[i].value, strlen(uids[i].value) > 80 ? "..." : "");
            ext_record_free(record);
            return MITILOG_ERROR_INVALID;
        }
    }
    record->modality =
        trimmed_duplicate(values[DCM_ATTRIBUTE_MODALITY], &failed, &record->text_replaced, latin1);
    record->station_name = trimmed_duplicate(values[DCM_ATTRIBUTE_STATION_NAME], &failed,
                                             &record->text_replaced, latin1);
    record->institutional_department_name =
        trimmed_duplicate(values[DCM_ATTRIBUTE_INSTITUTIONAL_DEPARTMENT_NAME], &failed,
                          &record->text_replaced, latin1);
    record->study_description = trimmed_duplicate(values[DCM_ATTRIBUTE_STUDY_DESCRIPTION], &failed,
                                                  &record->text_replaced, latin1);
    record->accession_number = trimmed_duplicate(values[DCM_ATTRIBUTE_ACCESSION_NUMBER], &failed,
                                                 &record->text_replaced, latin1);
    record->protocol_name = trimmed_duplicate(values[DCM_ATTRIBUTE_PROTOCOL_NAME], &failed,
                                              &record->text_replaced, latin1);
    record->transfer_syntax_uid =
        trimmed_duplicate(facts->transfer_syntax_uid, &failed, &record->text_replaced, latin1);

    record->acquired_at_source = ext_acquisition_time(facts, record->acquired_at);
    record->number_of_frames = ext_parse_integer_string(values[DCM_ATTRIBUTE_NUMBER_OF_FRAMES]);
    record->frame_time_ms = ext_parse_decimal_string(values[DCM_ATTRIBUTE_FRAME_TIME]);
    if (record->frame_time_ms.status == EXAM_VALUE_MISSING) {
        /* A cine may time its frames by Frame Time Vector instead (PS3.3
         * C.7.6.5, Frame Increment Pointer to (0018,1065)). */
        exam_number mean = ext_frame_time_vector(values[DCM_ATTRIBUTE_FRAME_TIME_VECTOR],
                                                 &record->frame_time_vector_sum_ms);
        if (mean.status == EXAM_VALUE_OK) {
            record->frame_time_ms = mean;
            record->frame_time_from_vector = 1;
        }
    }

    record->is_ultrasound = ext_is_ultrasound_sop_class(record->sop_class_uid) ||
                            (record->modality != NULL && strcmp(record->modality, "US") == 0);
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        const char *raw = record->is_ultrasound ? values[index_attributes[i]] : NULL;
        record->indices[i] = ext_parse_decimal_string(raw);
        record->index_raw[i] = exact_duplicate(raw, &failed, &record->text_replaced);
    }
    if (failed) {
        ext_record_free(record);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    return MITILOG_OK;
}

void ext_record_free(ext_record *record)
{
    if (record == NULL)
        return;
    char **strings[] = {&record->sop_class_uid,
                        &record->sop_instance_uid,
                        &record->study_instance_uid,
                        &record->series_instance_uid,
                        &record->modality,
                        &record->station_name,
                        &record->institutional_department_name,
                        &record->study_description,
                        &record->accession_number,
                        &record->protocol_name,
                        &record->transfer_syntax_uid,
                        &record->calling_ae_title,
                        &record->source_path};
    for (size_t i = 0; i < sizeof strings / sizeof strings[0]; i++) {
        free(*strings[i]);
        *strings[i] = NULL;
    }
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        free(record->index_raw[i]);
        record->index_raw[i] = NULL;
    }
    ext_record_free_context(record);
}

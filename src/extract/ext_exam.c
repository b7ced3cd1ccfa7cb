/* The exam record of a study (ext_exam.h). */
#include "extract/ext_exam.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

exam_index ext_governing_index(const ext_exam_type *type, int has_gestational_age,
                               double gestational_age_weeks, const char **source)
{
    if (type == NULL) {
        *source = "default";
        return EXAM_INDEX_TIS;
    }
    return exam_governing_index(type->governing, has_gestational_age, gestational_age_weeks,
                                source);
}

exam_group ext_exam_type_group(const ext_exam_type *type)
{
    if (type == NULL)
        return EXAM_GROUP_GENERAL;
    if (type->has_group)
        return type->group;
    return type->obstetric ? EXAM_GROUP_OBSTETRIC : EXAM_GROUP_GENERAL;
}

static void take_max(exam_number *max, exam_number value)
{
    if (value.status != EXAM_VALUE_OK)
        return;
    if (max->status != EXAM_VALUE_OK || value.value > max->value)
        *max = value;
}

/* Most frequent exam type; ties go to the earliest instance. */
static void choose_exam_type(const ext_site_rules *rules, const ext_exam_instance *instances,
                             size_t count, ext_exam *exam)
{
    size_t best = count, best_votes = 0;
    for (size_t i = 0; i < count; i++) {
        if (instances[i].exam_type == NULL)
            continue;
        size_t votes = 0;
        for (size_t j = 0; j < count; j++)
            votes += instances[j].exam_type != NULL &&
                     strcmp(instances[j].exam_type, instances[i].exam_type) == 0;
        if (votes > best_votes) {
            best = i;
            best_votes = votes;
        }
    }
    if (best == count) {
        snprintf(exam->exam_type_source, sizeof exam->exam_type_source, "none of %zu instances",
                 count);
        return;
    }
    exam->exam_type = ext_site_find_exam_type(rules, instances[best].exam_type);
    snprintf(exam->exam_type_source, sizeof exam->exam_type_source, "%s (%zu of %zu instances)",
             instances[best].exam_type_source != NULL ? instances[best].exam_type_source : "?",
             best_votes, count);
}

static void choose_gestational_age(const ext_exam_instance *instances, size_t count, ext_exam *exam)
{
    /* The latest report wins (instances come in acquisition order). */
    for (size_t i = count; i-- > 0;) {
        if (instances[i].has_sr_gestational_age) {
            exam->has_gestational_age = 1;
            exam->gestational_age_weeks = instances[i].sr_gestational_age_weeks;
            snprintf(exam->gestational_age_source, sizeof exam->gestational_age_source,
                     "sr %.64s item %.64s", instances[i].sop_instance_uid,
                     instances[i].sr_gestational_age_position != NULL
                         ? instances[i].sr_gestational_age_position
                         : "?");
            return;
        }
    }
    if (exam->exam_type != NULL && exam->exam_type->nominal_gestational_age_weeks > 0) {
        exam->has_gestational_age = 1;
        exam->gestational_age_weeks = exam->exam_type->nominal_gestational_age_weeks;
        snprintf(exam->gestational_age_source, sizeof exam->gestational_age_source,
                 "exam_type_trimester");
    }
}

mitilog_status ext_exam_build(const ext_site_rules *rules, const ext_exam_instance *instances,
                              size_t count, ext_exam *exam, mitilog_error *error)
{
    memset(exam, 0, sizeof *exam);
    exam->instance_count = count;
    exam->gap_cap_seconds =
        rules->gap_cap_seconds > 0 ? rules->gap_cap_seconds : EXT_TIMELINE_DEFAULT_GAP_CAP_SECONDS;
    choose_exam_type(rules, instances, count, exam);
    choose_gestational_age(instances, count, exam);
    exam->governing_index =
        ext_governing_index(exam->exam_type, exam->has_gestational_age, exam->gestational_age_weeks,
                            &exam->governing_index_source);
    size_t captures = 0;
    for (size_t i = 0; i < count; i++)
        captures += instances[i].is_capture != 0;
    exam->captures = calloc(captures + 1, sizeof *exam->captures);
    exam->capture_instance = calloc(captures + 1, sizeof *exam->capture_instance);
    exam->entries = calloc(captures + 1, sizeof *exam->entries);
    if (exam->captures == NULL || exam->capture_instance == NULL || exam->entries == NULL) {
        ext_exam_free(exam);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory building an exam");
    }
    for (size_t i = 0; i < count; i++) {
        const ext_exam_instance *instance = &instances[i];
        if (instance->acquired_at != NULL) {
            if (exam->first_acquired_at == NULL ||
                strcmp(instance->acquired_at, exam->first_acquired_at) < 0)
                exam->first_acquired_at = instance->acquired_at;
            if (exam->last_acquired_at == NULL ||
                strcmp(instance->acquired_at, exam->last_acquired_at) > 0)
                exam->last_acquired_at = instance->acquired_at;
        }
        if (instance->kind != NULL && strcmp(instance->kind, "sr") == 0)
            exam->sr_count++;
        if (instance->has_sr_scan_time &&
            instance->sr_scan_time_seconds > exam->sr_scan_time_seconds)
            exam->sr_scan_time_seconds = instance->sr_scan_time_seconds;
        if (!instance->is_capture) {
            exam->other_count += instance->kind == NULL || strcmp(instance->kind, "sr") != 0;
            continue;
        }
        if (instance->cine_seconds > 0)
            exam->cine_count++;
        for (int x = 0; x < EXAM_INDEX_COUNT; x++) {
            take_max(&exam->maxima[x], instance->indices[x]);
            for (int m = 0; m < EXAM_MODE_COUNT; m++)
                if (instance->modes & EXAM_MODE_BIT(m))
                    take_max(&exam->mode_maxima[m][x], instance->indices[x]);
        }
        exam_capture *capture = &exam->captures[exam->capture_count];
        double seconds =
            instance->acquired_at != NULL ? ext_iso_to_seconds(instance->acquired_at) : -1;
        capture->has_time = seconds >= 0;
        capture->time_seconds = seconds >= 0 ? seconds : 0;
        capture->cine_seconds = instance->cine_seconds > 0 ? instance->cine_seconds : 0;
        memcpy(capture->indices, instance->indices, sizeof capture->indices);
        capture->modes = instance->modes;
        capture->sop_instance_uid = instance->sop_instance_uid;
        exam->capture_instance[exam->capture_count++] = i;
    }
    ext_timeline_build(exam->captures, exam->capture_count, exam->gap_cap_seconds,
                       exam->sr_scan_time_seconds, exam->entries, &exam->summary);
    return MITILOG_OK;
}

void ext_exam_free(ext_exam *exam)
{
    if (exam == NULL)
        return;
    free(exam->captures);
    free(exam->capture_instance);
    free(exam->entries);
    exam->captures = NULL;
    exam->capture_instance = NULL;
    exam->entries = NULL;
}

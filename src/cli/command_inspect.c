/* mitilog inspect [--config FILE] FILE: what mitilog extracts from one
 * DICOM file, with the provenance of every value, for a PACS
 * administrator checking a new modality. Nothing is stored. */
#include <stdio.h>
#include <string.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "config/config_site.h"
#include "dicom/dcm.h"
#include "extract/ext_modes.h"
#include "extract/ext_sr.h"
#include "ingest/ingest.h"
#include "util/files.h"
#include "util/log.h"

static const char *text(const char *value) { return value != NULL ? value : "(absent)"; }

static void line(const char *key, const char *value, const char *source)
{
    printf("%-28s %s", key, text(value));
    if (source != NULL)
        printf("  [%s]", source);
    printf("\n");
}

static void modes_line(const char *key, unsigned modes, const char *source)
{
    char list[256] = "";
    for (int m = 0; m < EXAM_MODE_COUNT; m++)
        if (modes & EXAM_MODE_BIT(m)) {
            strncat(list, list[0] ? "," : "", sizeof list - strlen(list) - 1);
            strncat(list, exam_mode_name((exam_mode)m), sizeof list - strlen(list) - 1);
        }
    line(key, list[0] ? list : "(none)", source);
}

static void print_record(const ext_record *r)
{
    char buffer[64];
    line("sop_instance_uid", r->sop_instance_uid, "(0008,0018)");
    line("sop_class_uid", r->sop_class_uid, "(0008,0016)");
    line("object_kind", ext_object_kind_name(r->kind), "sop_class_uid");
    line("has_acoustic_record", r->has_acoustic_record ? "yes" : "no", "object_kind");
    line("study_instance_uid", r->study_instance_uid, "(0020,000D)");
    line("specific_character_set", r->specific_character_set, "(0008,0005)");
    line("acquired_at", r->acquired_at[0] ? r->acquired_at : NULL,
         ext_time_source_name(r->acquired_at_source));
    line("station_name", r->station_name, "(0008,1010)");
    line("study_description", r->study_description, "(0008,1030)");
    line("protocol_name", r->protocol_name, "(0018,1030)");
    line("series_description", r->series_description, "(0008,103E)");
    line("performed_procedure_step_description", r->performed_procedure_step_description,
         "(0040,0254)");
    line("procedure_codes", r->procedure_codes, "(0008,1032)/(0040,0260)/(0032,1064)");
    line("body_part_examined", r->body_part_examined, "(0018,0015)");
    line("image_type", r->image_type, "(0008,0008)");
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        snprintf(buffer, sizeof buffer, "%s (%s)", text(r->index_raw[i]),
                 exam_value_status_name(r->indices[i].status));
        line(exam_index_name((exam_index)i), buffer, "image header");
    }
    modes_line("modes", r->modes, "union");
    snprintf(buffer, sizeof buffer, "image_type value 4 (%s%s%04X)",
             r->image_type_bitmap_status == EXT_BITMAP_OK ? "" : "not a bitmap",
             r->image_type_bitmap_status == EXT_BITMAP_OK ? "" : ", raw ", r->image_type_bitmap);
    modes_line("modes.image_type", r->modes_image_type, buffer);
    modes_line("modes.region_data_type", r->modes_regions, "(0018,6014)");
    modes_line("modes.sr_container", r->modes_sr, "sr_codes");
    line("modes_conflict", r->modes_conflict ? "yes" : "no", NULL);
    line("transducer", r->transducer_data, r->transducer_source);
    line("transducer_type", r->transducer_type, "(0018,6031)");
    if (r->has_frequency)
        snprintf(buffer, sizeof buffer, "%.3f MHz", r->frequency_khz / 1000.0);
    line("frequency_mhz", r->has_frequency ? buffer : NULL,
         r->has_frequency ? r->frequency_source : NULL);
    snprintf(buffer, sizeof buffer, "%.3f s", r->cine_seconds);
    line("cine_seconds", r->cine_seconds > 0 ? buffer : NULL, NULL);
    line("exam_type", r->exam_type, r->exam_type_source);
    line("exam_type_label", r->exam_type_label, NULL);
    line("governing_index", r->has_governing_index ? exam_index_name(r->governing_index) : NULL,
         r->governing_index_source);
    snprintf(buffer, sizeof buffer, "%.2f", r->gestational_age_weeks);
    line("gestational_age_weeks", r->has_gestational_age ? buffer : NULL,
         r->has_gestational_age ? r->gestational_age_source : NULL);
    line("preset", r->preset, r->preset_source);
    line("room", r->room, r->room_source);
    line("shift", r->shift, r->shift_source);
    line("age_group", r->age_group, r->age_group_source);
    line("operator_name", r->operator_name, r->operator_source);
    line("overlong_fields", r->overlong_fields[0] ? r->overlong_fields : "(none)", NULL);
    line("text_replaced", r->text_replaced ? "yes" : "no", NULL);
    if (r->sr == NULL)
        return;
    for (size_t i = 0; i < r->sr->value_count; i++) {
        const ext_sr_value *v = &r->sr->values[i];
        char key[64], value[160], source[200];
        snprintf(key, sizeof key, "sr.%s", ext_quantity_name(v->quantity));
        snprintf(value, sizeof value, "%s %s", text(v->raw), v->unit ? v->unit : "(no unit)");
        snprintf(source, sizeof source, "item %s %s \"%s\"%s%s", v->position, v->concept,
                 text(v->meaning), v->mode >= 0 ? " mode " : "",
                 v->mode >= 0 ? exam_mode_name((exam_mode)v->mode) : "");
        line(key, value, source);
    }
    for (size_t i = 0; i < r->sr->unknown_scheme_count; i++)
        line("sr.unknown_scheme", r->sr->unknown_schemes[i], "values ignored");
    snprintf(buffer, sizeof buffer, "%zu", r->sr->ignored_count);
    line("sr.ignored_items", buffer, NULL);
}

int command_inspect(int argc, char **argv)
{
    const char *config_path = NULL, *path = NULL;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            printf("usage: mitilog inspect [--config FILE] DICOMFILE\n"
                   "Prints every value mitilog extracts from one file, with its provenance\n"
                   "(attribute, map or rule), using the site rules of the configuration.\n"
                   "Nothing is stored. Exit status: 0 read, 1 unreadable, 2 usage.\n");
            return EXIT_STATUS_SUCCESS;
        } else if (strcmp(argv[i], "--config") == 0 && i + 1 < argc) {
            config_path = argv[++i];
        } else if (path == NULL && argv[i][0] != '-') {
            path = argv[i];
        } else {
            fprintf(stderr, "usage: mitilog inspect [--config FILE] DICOMFILE\n");
            return EXIT_STATUS_USAGE;
        }
    }
    if (path == NULL) {
        fprintf(stderr, "usage: mitilog inspect [--config FILE] DICOMFILE\n");
        return EXIT_STATUS_USAGE;
    }
    config config;
    if (cli_load_config(config_path, &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    mitilog_error error;
    ext_site_rules rules;
    int status = EXIT_STATUS_FAILURE;
    if (config_site_load(config.site_rules_path, &rules, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog inspect: %s\n", error.text);
        ext_site_rules_free(&rules);
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    dcm_private_request requests[EXT_SITE_PRESET_SOURCES_MAX];
    memset(requests, 0, sizeof requests);
    for (size_t i = 0; i < rules.preset_count; i++)
        if (rules.presets[i].is_private)
            requests[i] = (dcm_private_request){rules.presets[i].group, rules.presets[i].element,
                                                rules.presets[i].private_creator};
    dcm_object *object = NULL;
    dcm_facts facts;
    ext_record record;
    memset(&facts, 0, sizeof facts);
    memset(&record, 0, sizeof record);
    char now[EXT_ISO_TIME_SIZE];
    files_utc_now(now, sizeof now);
    if (dcm_initialise(LOG_LEVEL_ERROR, &error) != MITILOG_OK ||
        dcm_object_load(path, &object, &error) != MITILOG_OK ||
        ingest_read_record(object, &rules, requests, "", now, &facts, &record, &error) !=
            MITILOG_OK) {
        fprintf(stderr, "mitilog inspect: %s: %s\n", path, error.text);
    } else {
        printf("# %s (site rules %s)\n", path, rules.source_path);
        print_record(&record);
        status = EXIT_STATUS_SUCCESS;
    }
    ext_record_free(&record);
    dcm_facts_free(&facts);
    dcm_object_free(object);
    ext_site_rules_free(&rules);
    config_free(&config);
    return status;
}

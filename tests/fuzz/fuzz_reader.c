/*
 * fuzz_reader.c - libFuzzer harness over the reader and the extraction:
 * the input bytes become a file (the reader loads files; one path per
 * process), then dcm_object_load -> dcm_object_facts -> ext_record_from_facts
 * -> dcm_object_extra -> ext_record_enrich (built-in site rules) -> free.
 * Any status is fine; a crash, a sanitizer report or a leak is a finding.
 * Built by -DMITILOG_FUZZ=ON with clang; run with tests/fuzz/run.sh.
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "dicom/dcm.h"
#include "extract/ext.h"
#include "extract/ext_site.h"

int LLVMFuzzerInitialize(int *argc, char ***argv);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

enum { FUZZ_SR_DEPTH_LIMIT = 64 };

static char fuzz_path[64];
static ext_site_rules fuzz_rules;

int LLVMFuzzerInitialize(int *argc, char ***argv)
{
    (void)argc;
    (void)argv;
    mitilog_error error;
    if (dcm_initialise(3, &error) != MITILOG_OK ||
        ext_site_rules_init(&fuzz_rules, &error) != MITILOG_OK) {
        fprintf(stderr, "fuzz_reader: %s\n", error.text);
        abort();
    }
    const char *folder = getenv("TMPDIR") != NULL ? getenv("TMPDIR") : "/tmp";
    snprintf(fuzz_path, sizeof fuzz_path, "%.40s/fuzz-reader-%ld.dcm", folder, (long)getpid());
    return 0;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    FILE *file = fopen(fuzz_path, "wb");
    if (file == NULL)
        abort();
    if (size > 0 && fwrite(data, 1, size, file) != size)
        abort();
    fclose(file);

    mitilog_error error;
    dcm_object *object = NULL;
    if (dcm_object_load(fuzz_path, &object, &error) != MITILOG_OK)
        return 0;
    dcm_facts facts;
    ext_record record;
    memset(&facts, 0, sizeof facts);
    memset(&record, 0, sizeof record);
    if (dcm_object_facts(object, FUZZ_SR_DEPTH_LIMIT, &facts, &error) == MITILOG_OK &&
        ext_record_from_facts(&facts, &record, &error) == MITILOG_OK) {
        record.calling_ae_title = strdup("FUZZ");
        dcm_extra extra;
        if (record.calling_ae_title != NULL &&
            dcm_object_extra(object, NULL, 0, &extra, &error) == MITILOG_OK) {
            ext_record_enrich(&record, &facts, &extra, &fuzz_rules, &error);
            dcm_extra_free(&extra);
        }
    }
    ext_record_free(&record);
    dcm_facts_free(&facts);
    dcm_object_free(object);
    return 0;
}

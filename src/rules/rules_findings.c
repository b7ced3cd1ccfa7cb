/* Findings: appending to a result, and freeing it. */
#include <stdlib.h>
#include <string.h>

#include "rules/rules_internal.h"

static char *copy_or_null(const char *text, int *failed)
{
    if (text == NULL)
        return NULL;
    char *copy = strdup(text);
    if (copy == NULL)
        *failed = 1;
    return copy;
}

static void finding_free(exam_finding *finding)
{
    free(finding->rule_id);
    free(finding->quantity);
    free(finding->unit);
    for (size_t i = 0; i < finding->instance_count; i++)
        free(finding->instance_uids[i]);
    free(finding->instance_uids);
    free(finding->assumptions);
    free(finding->source);
    free(finding->study_instance_uid);
    free(finding->room);
    free(finding->transducer);
}

mitilog_status rules_result_append(rules_result *result, const rules_finding_input *input,
                                   const char *policy_version, mitilog_error *error)
{
    exam_finding *grown = realloc(result->findings, (result->finding_count + 1) * sizeof *grown);
    if (grown == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    result->findings = grown;
    exam_finding *finding = &grown[result->finding_count];
    memset(finding, 0, sizeof *finding);
    int failed = 0;
    finding->rule_id = copy_or_null(input->rule->id, &failed);
    finding->severity = input->severity;
    finding->quantity = copy_or_null(input->quantity ? input->quantity : "", &failed);
    finding->measured = input->measured;
    finding->unit = copy_or_null(input->unit ? input->unit : "", &failed);
    finding->limit = input->limit;
    finding->has_limit = input->has_limit;
    finding->threshold = input->threshold;
    finding->index = input->index;
    finding->has_index = input->has_index;
    finding->first_seconds = input->first_seconds;
    finding->last_seconds = input->last_seconds;
    finding->has_span = input->has_span;
    finding->estimated_seconds = input->estimated_seconds;
    finding->assumptions = copy_or_null(input->assumptions ? input->assumptions : "", &failed);
    finding->provisional = input->provisional;
    memcpy(finding->policy_version, policy_version, HASH_HEX_SIZE);
    finding->source = copy_or_null(input->rule->source, &failed);
    finding->study_instance_uid = copy_or_null(input->study_instance_uid, &failed);
    finding->room = copy_or_null(input->room, &failed);
    finding->transducer = copy_or_null(input->transducer, &failed);
    if (input->instance_count > 0) {
        finding->instance_uids = calloc(input->instance_count, sizeof(char *));
        if (finding->instance_uids == NULL)
            failed = 1;
        for (size_t i = 0; finding->instance_uids && i < input->instance_count; i++) {
            finding->instance_uids[i] =
                copy_or_null(input->instance_uids[i] ? input->instance_uids[i] : "", &failed);
            finding->instance_count = i + 1;
        }
    }
    if (failed) {
        finding_free(finding);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    result->finding_count++;
    return MITILOG_OK;
}

mitilog_status rules_result_add(rules_result *result, const exam_finding *borrowed,
                                mitilog_error *error)
{
    exam_finding *grown = realloc(result->findings, (result->finding_count + 1) * sizeof *grown);
    if (grown == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    result->findings = grown;
    exam_finding *finding = &grown[result->finding_count];
    *finding = *borrowed;
    int failed = 0;
    finding->rule_id = copy_or_null(borrowed->rule_id, &failed);
    finding->quantity = copy_or_null(borrowed->quantity ? borrowed->quantity : "", &failed);
    finding->unit = copy_or_null(borrowed->unit ? borrowed->unit : "", &failed);
    finding->assumptions =
        copy_or_null(borrowed->assumptions ? borrowed->assumptions : "", &failed);
    finding->source = copy_or_null(borrowed->source, &failed);
    finding->study_instance_uid = copy_or_null(borrowed->study_instance_uid, &failed);
    finding->room = copy_or_null(borrowed->room, &failed);
    finding->transducer = copy_or_null(borrowed->transducer, &failed);
    finding->instance_uids = NULL;
    finding->instance_count = 0;
    if (borrowed->instance_count > 0) {
        finding->instance_uids = calloc(borrowed->instance_count, sizeof(char *));
        if (finding->instance_uids == NULL)
            failed = 1;
        for (size_t i = 0; finding->instance_uids && i < borrowed->instance_count; i++) {
            finding->instance_uids[i] =
                copy_or_null(borrowed->instance_uids[i] ? borrowed->instance_uids[i] : "", &failed);
            finding->instance_count = i + 1;
        }
    }
    if (failed) {
        finding_free(finding);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    result->finding_count++;
    return MITILOG_OK;
}

void rules_result_free(rules_result *result)
{
    if (result == NULL)
        return;
    for (size_t i = 0; i < result->finding_count; i++)
        finding_free(&result->findings[i]);
    free(result->findings);
    result->findings = NULL;
    result->finding_count = 0;
}

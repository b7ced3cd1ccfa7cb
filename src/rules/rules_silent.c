/* Output not reported: ultrasound instances with no index at all,
 * aggregated per room and transducer so that one silent device shows as
 * one problem [std: IEC 60601-2-37 requires the display when MI or TI can
 * exceed 1.0; from memory]: a completeness finding, not proof of low
 * output. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "rules/rules_internal.h"

static const char *text_or_empty(const char *text) { return text ? text : ""; }

static int compare_instance(const void *a, const void *b)
{
    const exam_device_instance *left = *(const exam_device_instance *const *)a;
    const exam_device_instance *right = *(const exam_device_instance *const *)b;
    int order = strcmp(text_or_empty(left->room), text_or_empty(right->room));
    if (order == 0)
        order = strcmp(text_or_empty(left->transducer), text_or_empty(right->transducer));
    if (order == 0) /* keep the caller's order inside a group */
        order = (left > right) - (left < right);
    return order;
}

static int same_group(const exam_device_instance *a, const exam_device_instance *b)
{
    return strcmp(text_or_empty(a->room), text_or_empty(b->room)) == 0 &&
           strcmp(text_or_empty(a->transducer), text_or_empty(b->transducer)) == 0;
}

static mitilog_status emit_group(const rules_rule *rule, const char *version,
                                 const exam_device_instance *const *group, size_t count,
                                 const char **uids, rules_result *result, mitilog_error *error)
{
    size_t silent = 0;
    rules_finding_input input = {0};
    for (size_t i = 0; i < count; i++) {
        if (group[i]->has_any_index)
            continue;
        uids[silent++] = group[i]->sop_instance_uid;
        if (group[i]->has_time) {
            double t = group[i]->time_seconds;
            if (!input.has_span || t < input.first_seconds)
                input.first_seconds = t;
            if (!input.has_span || t > input.last_seconds)
                input.last_seconds = t;
            input.has_span = 1;
        }
    }
    if (silent == 0 || silent < rule->minimum_instances)
        return MITILOG_OK;
    char note[200];
    snprintf(note, sizeof note,
             "%zu of %zu ultrasound instance(s) from this room and transducer "
             "report no MI or TI",
             silent, count);
    double limit = rule->minimum_instances;
    input.rule = rule;
    input.severity = rule->severity;
    input.quantity = "instances_without_index";
    input.measured = (double)silent;
    input.unit = "instances";
    input.limit = limit;
    input.has_limit = 1;
    input.index = EXAM_INDEX_COUNT;
    input.instance_uids = uids;
    input.instance_count = silent;
    input.assumptions = note;
    input.room = text_or_empty(group[0]->room);
    input.transducer = text_or_empty(group[0]->transducer);
    return rules_result_append(result, &input, version, error);
}

mitilog_status rules_output_not_reported(const rules_policy *policy,
                                         const exam_device_instance *instances, size_t count,
                                         rules_result *result, mitilog_error *error)
{
    if (result == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no result");
    memset(result, 0, sizeof *result);
    if (policy == NULL || (count > 0 && instances == NULL))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no policy or instances");
    memcpy(result->policy_version, policy->version, HASH_HEX_SIZE);
    const rules_rule *rule = NULL;
    for (size_t r = 0; r < policy->rule_count; r++) {
        if (policy->rules[r].kind == RULES_KIND_OUTPUT_NOT_REPORTED && policy->rules[r].enabled)
            rule = &policy->rules[r];
    }
    if (rule == NULL || count == 0)
        return MITILOG_OK;
    const exam_device_instance **sorted = malloc(count * sizeof *sorted);
    const char **uids = malloc(count * sizeof *uids);
    mitilog_status status = MITILOG_OK;
    if (sorted == NULL || uids == NULL) {
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
        goto done;
    }
    for (size_t i = 0; i < count; i++)
        sorted[i] = &instances[i];
    qsort(sorted, count, sizeof *sorted, compare_instance);
    for (size_t start = 0; start < count && status == MITILOG_OK;) {
        size_t end = start + 1;
        while (end < count && same_group(sorted[start], sorted[end]))
            end++;
        status =
            emit_group(rule, policy->version, sorted + start, end - start, uids, result, error);
        start = end;
    }
done:
    free(sorted);
    free(uids);
    if (status != MITILOG_OK)
        rules_result_free(result);
    return status;
}

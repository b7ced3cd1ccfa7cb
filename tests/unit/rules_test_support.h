/* Helpers shared by the test_rules_*.c files: the shipped policy, exams
 * built by hand, and finding look-ups. Header-only (static). */
#ifndef MITILOG_RULES_TEST_SUPPORT_H
#define MITILOG_RULES_TEST_SUPPORT_H

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "rules/rules.h"

/* cmocka 1.1's assert_float_equal is single precision: compare in double. */
#define assert_close(actual, expected, tolerance)                                                  \
    do {                                                                                           \
        double actual_value = (actual), expected_value = (expected);                               \
        if (!(actual_value - expected_value <= (tolerance) &&                                      \
              expected_value - actual_value <= (tolerance)))                                       \
            fail_msg("%.9f != %.9f", actual_value, expected_value);                                \
    } while (0)

static inline const char *support_source_dir(void)
{
    const char *dir = getenv("MITILOG_SOURCE_DIR");
    return dir && dir[0] ? dir : MITILOG_SOURCE_DIR;
}

/* The text of conf/policy.ini (heap; free). */
static inline char *support_shipped_text(void)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/conf/policy.ini", support_source_dir());
    FILE *file = fopen(path, "rb");
    if (file == NULL)
        return NULL;
    char *text = calloc(1, 1 << 20);
    if (text != NULL)
        text[fread(text, 1, (1 << 20) - 1, file)] = '\0';
    fclose(file);
    return text;
}

/* Shipped policy with the first occurrence of from replaced by to. */
static inline rules_policy *support_policy_with(const char *from, const char *to)
{
    char *text = support_shipped_text();
    if (text == NULL)
        return NULL;
    if (from != NULL) {
        char *at = strstr(text, from);
        if (at == NULL) {
            free(text);
            return NULL;
        }
        size_t total = strlen(text) - strlen(from) + strlen(to) + 1;
        char *edited = malloc(total);
        snprintf(edited, total, "%.*s%s%s", (int)(at - text), text, to, at + strlen(from));
        free(text);
        text = edited;
    }
    rules_policy *policy = NULL;
    mitilog_error error;
    if (rules_policy_load_text(text, "policy.ini", &policy, &error) != MITILOG_OK)
        fprintf(stderr, "%s\n", error.text);
    free(text);
    return policy;
}

static inline rules_policy *support_shipped_policy(void) { return support_policy_with(NULL, NULL); }

static inline exam_number support_number(double value)
{
    exam_number number = {EXAM_VALUE_OK, value};
    return number;
}

/* A capture at time t with a cine of cine seconds; indices missing. */
static inline exam_capture support_capture(const char *uid, double t, double cine)
{
    exam_capture capture;
    memset(&capture, 0, sizeof capture);
    capture.sop_instance_uid = uid;
    capture.time_seconds = t;
    capture.has_time = 1;
    capture.cine_seconds = cine;
    capture.modes = EXAM_MODE_BIT(EXAM_MODE_2D);
    return capture;
}

static inline rules_exam support_exam(exam_group group, const exam_capture *captures, size_t count)
{
    rules_exam exam;
    memset(&exam, 0, sizeof exam);
    exam.study_instance_uid = "1.2.3.4";
    exam.group = group;
    exam.age = RULES_AGE_ADULT;
    exam.room = "ROOM1";
    exam.transducer = "C5-1";
    exam.closed = 1;
    exam.captures = captures;
    exam.capture_count = count;
    return exam;
}

/* Number of findings of a rule (threshold < 0: any threshold). */
static inline size_t support_count(const rules_result *result, const char *rule_id,
                                   double threshold)
{
    size_t count = 0;
    for (size_t i = 0; i < result->finding_count; i++) {
        if (strcmp(result->findings[i].rule_id, rule_id) == 0 &&
            (threshold < 0 || result->findings[i].threshold == threshold))
            count++;
    }
    return count;
}

static inline const exam_finding *support_find(const rules_result *result, const char *rule_id,
                                               double threshold)
{
    for (size_t i = 0; i < result->finding_count; i++) {
        if (strcmp(result->findings[i].rule_id, rule_id) == 0 &&
            (threshold < 0 || result->findings[i].threshold == threshold))
            return &result->findings[i];
    }
    return NULL;
}

#endif

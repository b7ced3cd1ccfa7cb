/* Properties of the rules on a few hundred generated exams (fixed seed,
 * deterministic): adding exposure time never removes a dwell finding;
 * lowering every index never adds a finding; evaluating twice gives the
 * same findings. The SR scan-time bound is left off: with it, added time
 * rescales the rest of the timeline down, by design. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "rules_test_support.h"

enum { CASES = 400, MAX_CAPTURES = 14 };

static uint64_t seed = 20240611;

static double uniform(void) /* [0, 1): a 64-bit LCG, top 53 bits */
{
    seed = seed * 6364136223846793005ULL + 1442695040888963407ULL;
    return (double)(seed >> 11) / 9007199254740992.0;
}

typedef struct generated {
    exam_capture captures[MAX_CAPTURES + 1];
    char uids[MAX_CAPTURES + 1][32];
    rules_exam exam;
} generated;

static void generate(generated *out)
{
    memset(out, 0, sizeof *out);
    size_t count = 1 + (size_t)(uniform() * MAX_CAPTURES);
    double t = 0;
    for (size_t i = 0; i < count; i++) {
        snprintf(out->uids[i], sizeof out->uids[i], "1.2.%zu", i);
        exam_capture *capture = &out->captures[i];
        t += uniform() * 900; /* gaps up to 15 min: some above the cap */
        *capture = support_capture(out->uids[i], t, uniform() < 0.3 ? uniform() * 600 : 0);
        capture->has_time = uniform() > 0.05;
        for (int x = 0; x < EXAM_INDEX_COUNT; x++) {
            if (uniform() < 0.85)
                capture->indices[x] =
                    support_number(x == EXAM_INDEX_MI ? uniform() * 2.2 : uniform() * 3.5);
        }
        capture->modes =
            uniform() < 0.3 ? EXAM_MODE_BIT(EXAM_MODE_PW) : EXAM_MODE_BIT(EXAM_MODE_2D);
    }
    out->exam = support_exam((exam_group)(uniform() * EXAM_GROUP_COUNT), out->captures, count);
    out->exam.age = (rules_age)(uniform() * RULES_AGE_COUNT);
    out->exam.gestational_age_known = uniform() < 0.8;
    out->exam.gestational_age_weeks = 5 + uniform() * 35;
    out->exam.category = uniform() < 0.2 ? "neonatal_lung" : NULL;
    out->exam.closed = uniform() < 0.5;
}

static void evaluate(const rules_policy *policy, const rules_exam *exam, rules_result *result)
{
    mitilog_error error;
    assert_int_equal(rules_evaluate(policy, exam, result, &error), MITILOG_OK);
}

static int has_finding(const rules_result *result, const exam_finding *finding)
{
    for (size_t i = 0; i < result->finding_count; i++) {
        const exam_finding *other = &result->findings[i];
        if (strcmp(other->rule_id, finding->rule_id) == 0 &&
            strcmp(other->quantity, finding->quantity) == 0 &&
            other->threshold == finding->threshold)
            return 1;
    }
    return 0;
}

static int is_dwell(const exam_finding *finding)
{
    return strncmp(finding->rule_id, "dwell_", 6) == 0;
}

static void adding_time_never_removes_a_dwell_finding(void **state)
{
    rules_policy *policy = *state;
    for (int n = 0; n < CASES; n++) {
        generated exam;
        generate(&exam);
        rules_result before, after;
        evaluate(policy, &exam.exam, &before);
        generated longer = exam;
        longer.exam.captures = longer.captures;
        size_t count = longer.exam.capture_count;
        if (uniform() < 0.5) { /* a longer cine */
            longer.captures[(size_t)(uniform() * count)].cine_seconds += uniform() * 900;
        } else { /* one more capture after the last */
            double last = 0;
            for (size_t i = 0; i < count; i++)
                if (longer.captures[i].time_seconds > last)
                    last = longer.captures[i].time_seconds;
            longer.captures[count] = longer.captures[(size_t)(uniform() * count)];
            longer.captures[count].time_seconds = last + uniform() * 900;
            longer.captures[count].has_time = 1;
            longer.exam.capture_count = count + 1;
        }
        evaluate(policy, &longer.exam, &after);
        for (size_t i = 0; i < before.finding_count; i++) {
            if (is_dwell(&before.findings[i]) && !has_finding(&after, &before.findings[i]))
                fail_msg("case %d: %s at %.1f lost", n, before.findings[i].rule_id,
                         before.findings[i].threshold);
        }
        rules_result_free(&before);
        rules_result_free(&after);
    }
}

static void lowering_indices_never_adds_a_finding(void **state)
{
    rules_policy *policy = *state;
    for (int n = 0; n < CASES; n++) {
        generated exam;
        generate(&exam);
        rules_result before, after;
        evaluate(policy, &exam.exam, &before);
        generated lower = exam;
        lower.exam.captures = lower.captures;
        for (size_t i = 0; i < lower.exam.capture_count; i++) {
            for (int x = 0; x < EXAM_INDEX_COUNT; x++)
                lower.captures[i].indices[x].value *= uniform();
        }
        evaluate(policy, &lower.exam, &after);
        for (size_t i = 0; i < after.finding_count; i++) {
            if (!has_finding(&before, &after.findings[i]))
                fail_msg("case %d: %s (%s %.1f) appeared", n, after.findings[i].rule_id,
                         after.findings[i].quantity, after.findings[i].threshold);
        }
        rules_result_free(&before);
        rules_result_free(&after);
    }
}

static void same_findings(const exam_finding *a, const exam_finding *b)
{
    assert_string_equal(a->rule_id, b->rule_id);
    assert_int_equal(a->severity, b->severity);
    assert_string_equal(a->quantity, b->quantity);
    assert_true(a->measured == b->measured && a->limit == b->limit);
    assert_true(a->threshold == b->threshold && a->has_limit == b->has_limit);
    assert_int_equal(a->instance_count, b->instance_count);
    for (size_t i = 0; i < a->instance_count; i++)
        assert_string_equal(a->instance_uids[i], b->instance_uids[i]);
    assert_true(a->first_seconds == b->first_seconds && a->last_seconds == b->last_seconds);
    assert_true(a->estimated_seconds == b->estimated_seconds);
    assert_string_equal(a->assumptions, b->assumptions);
    assert_string_equal(a->policy_version, b->policy_version);
    assert_int_equal(a->provisional, b->provisional);
}

static void evaluating_twice_changes_nothing(void **state)
{
    rules_policy *policy = *state;
    for (int n = 0; n < CASES; n++) {
        generated exam;
        generate(&exam);
        rules_result first, second;
        evaluate(policy, &exam.exam, &first);
        evaluate(policy, &exam.exam, &second);
        assert_int_equal(first.finding_count, second.finding_count);
        for (size_t i = 0; i < first.finding_count; i++)
            same_findings(&first.findings[i], &second.findings[i]);
        assert_memory_equal(&first.measurements, &second.measurements, sizeof first.measurements);
        rules_result_free(&first);
        rules_result_free(&second);
    }
}

static int setup(void **state)
{
    *state = support_shipped_policy();
    return *state ? 0 : -1;
}

static int teardown(void **state)
{
    rules_policy_free(*state);
    return 0;
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(adding_time_never_removes_a_dwell_finding),
        cmocka_unit_test(lowering_indices_never_adds_a_finding),
        cmocka_unit_test(evaluating_twice_changes_nothing),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}

/* The policy file: the shipped defaults load, errors name file:line and
 * key, and the version depends on content only. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "rules_test_support.h"

static void shipped_policy_loads(void **state)
{
    (void)state;
    char path[4096];
    snprintf(path, sizeof path, "%s/conf/policy.ini", support_source_dir());
    rules_policy *policy = NULL;
    mitilog_error error;
    assert_int_equal(rules_policy_load(path, &policy, &error), MITILOG_OK);
    assert_int_equal(strlen(rules_policy_version(policy)), 64);
    assert_close(rules_policy_closed_after_idle_minutes(policy), 60, 0);
    assert_close(rules_policy_gap_cap_seconds(policy), 300, 0);
    /* Every rule of the policy engine, each with a source. */
    const char *expected[] = {"ti_ceiling",
                              "mi_ceiling",
                              "equipment_maxima",
                              "dwell_general",
                              "dwell_obstetric_neonatal",
                              "first_trimester_doppler",
                              "output_not_reported",
                              "thermal_dose",
                              "exam_duration"};
    assert_int_equal(rules_policy_rule_count(policy), 9);
    for (size_t i = 0; i < 9; i++) {
        exam_rule_info info;
        assert_int_equal(rules_policy_rule_at(policy, i, &info), 0);
        assert_string_equal(info.id, expected[i]);
        assert_true(strlen(info.source) > 20);
        assert_true(info.setting_count >= 3);
    }
    exam_rule_info info;
    assert_int_equal(rules_policy_rule_at(policy, 9, &info), -1);
    /* The OB table exactly as in docs/domain.md (section 4). */
    rules_policy_rule_at(policy, 4, &info);
    const char *table[][2] = {{"dwell.0.7", "60.0"}, {"dwell.1.0", "30.0"},
                              {"dwell.1.5", "15.0"}, {"dwell.2.0", "4.0"},
                              {"dwell.2.5", "1.0"},  {"dwell.3.0", "not_recommended"}};
    for (size_t row = 0; row < 6; row++) {
        int seen = 0;
        for (size_t s = 0; s < info.setting_count; s++) {
            if (strcmp(info.settings[s].key, table[row][0]) == 0) {
                assert_string_equal(info.settings[s].value, table[row][1]);
                seen = 1;
            }
        }
        assert_true(seen);
    }
    assert_non_null(strstr(info.source, "from memory"));
    rules_policy_free(policy);
}

static void expect_error(const char *text, const char *message)
{
    rules_policy *policy = (rules_policy *)1;
    mitilog_error error;
    assert_int_not_equal(rules_policy_load_text(text, "site.ini", &policy, &error), MITILOG_OK);
    assert_null(policy);
    if (strstr(error.text, message) == NULL)
        fail_msg("'%s' does not contain '%s'", error.text, message);
}

static void errors_name_file_line_and_key(void **state)
{
    (void)state;
    const char *head = "[rule ti_ceiling]\nseverity = warning\nsource = s\n";
    char text[512];
    snprintf(text, sizeof text, "%slimt = 2.0\n", head);
    expect_error(text, "site.ini:4: [rule ti_ceiling] limt: unknown key");
    snprintf(text, sizeof text, "%slimit = 2,0\n", head);
    expect_error(text, "site.ini:4: [rule ti_ceiling] limit: '2,0' is not a number");
    snprintf(text, sizeof text, "%slimit = -1\n", head);
    expect_error(text, "site.ini:4: [rule ti_ceiling] limit:");
    expect_error("[rule ti_ceiling]\nseverity = severe\n",
                 "site.ini:2: [rule ti_ceiling] severity: 'severe' is not advisory");
    snprintf(text, sizeof text, "%slimit.group.martian = 1\n", head);
    /* the group names of docs/policy.md ("Selectors") */
    expect_error(text, "site.ini:4: [rule ti_ceiling] limit.group.martian: 'martian' is not a "
                       "group; the groups are general, obstetric, neonatal, transcranial, "
                       "ophthalmic, contrast");
    snprintf(text, sizeof text, "%slimit = 1\nlimit = 2\n", head);
    expect_error(text, "site.ini:5: [rule ti_ceiling] limit: set twice");
    /* an unknown rule is named at its section header, not at a key */
    expect_error("; c\n[rule no_such_rule]\nseverity = warning\n",
                 "site.ini:2: [rule no_such_rule]: 'no_such_rule' is not a rule; the rules are "
                 "ti_ceiling, mi_ceiling,");
    expect_error("[policy]\ngap_cap_seconds = 0\n", "site.ini:2: [policy] gap_cap_seconds:");
    expect_error("[rule ti_ceiling]\nseverity = warning\nlimit = 2\n",
                 "site.ini:1: [rule ti_ceiling] source: missing");
    expect_error("[rule dwell_x]\nseverity = warning\nsource = s\ndwell.1.0 = soon\n",
                 "site.ini:4: [rule dwell_x] dwell.1.0: 'soon' is not minutes");
    expect_error("[rule dwell_x]\nseverity = warning\nsource = s\napplies = obstetric\n",
                 "site.ini:4: [rule dwell_x] applies: 'obstetric' is not group:NAME");
    expect_error("[rule ti_ceiling]\nseverity = warning\nsource = s\nno equals sign\n",
                 "site.ini:4: syntax error");
    /* every problem of the file, each once, in file order */
    expect_error("[rule ti_ceiling]\nseverity = severe\nsource = s\nlimt = 1\n"
                 "[rule ti_celing]\nseverity = warning\nsource = s\n",
                 "site.ini:2: [rule ti_ceiling] severity: 'severe' is not advisory, warning or "
                 "violation\nsite.ini:4: [rule ti_ceiling] limt: unknown key\n"
                 "site.ini:5: [rule ti_celing]: 'ti_celing' is not a rule");
    rules_policy *policy = NULL;
    mitilog_error error;
    assert_int_equal(rules_policy_load("/nonexistent/policy.ini", &policy, &error),
                     MITILOG_ERROR_IO);
}

static char *version_of(const char *text)
{
    rules_policy *policy = NULL;
    mitilog_error error;
    if (rules_policy_load_text(text, "v.ini", &policy, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    char *version = strdup(rules_policy_version(policy));
    rules_policy_free(policy);
    return version;
}

/* Comments, blank lines, white space, key order, section order, number
 * spelling and re-wrapped source text keep the version; a limit does not. */
static void version_depends_on_content_only(void **state)
{
    (void)state;
    char *base = version_of("[rule ti_ceiling]\nseverity = warning\nsource = TI 2.0 [trade]\n"
                            "limit = 2.0\nlimit.group.ophthalmic = 1.0\n"
                            "[rule mi_ceiling]\nseverity = warning\nsource = m\nlimit = off\n");
    char *same = version_of("; a comment\n\n[rule mi_ceiling]\nsource=m\nseverity   =  warning  \n"
                            "limit = OFF\n\n[rule ti_ceiling]\nlimit.group.ophthalmic = 1\n"
                            "limit = 2\nsource = TI 2.0\n    [trade]\nseverity = warning\n"
                            "enabled = yes\n");
    char *changed = version_of("[rule ti_ceiling]\nseverity = warning\nsource = TI 2.0 [trade]\n"
                               "limit = 2.5\nlimit.group.ophthalmic = 1.0\n"
                               "[rule mi_ceiling]\nseverity = warning\nsource = m\nlimit = off\n");
    assert_string_equal(base, same);
    assert_string_not_equal(base, changed);
    free(base);
    free(same);
    free(changed);
    /* And on the shipped file: one limit changed changes the version. */
    rules_policy *shipped = support_shipped_policy();
    rules_policy *edited = support_policy_with("dwell.1.5 = 15", "dwell.1.5 = 16");
    assert_non_null(shipped);
    assert_non_null(edited);
    assert_string_not_equal(rules_policy_version(shipped), rules_policy_version(edited));
    rules_policy_free(shipped);
    rules_policy_free(edited);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(shipped_policy_loads),
        cmocka_unit_test(errors_name_file_line_and_key),
        cmocka_unit_test(version_depends_on_content_only),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

/*
 * rules.h - the ALARA policy engine: a policy file (docs/policy.md) and the
 * findings it produces for one exam, or for the instances of a period
 * (output not reported). Pure computation: no database, no globals.
 *
 * Ownership:
 * - rules_policy_load() allocates a rules_policy; rules_policy_free()
 *   releases it. A loaded policy is immutable and may be shared by threads.
 *   Strings returned by the iteration API point into the policy.
 * - rules_exam and its exam_captures (exam/exam.h, as the exam record
 *   filled them) are caller-owned, read only during the call; nothing of
 *   them is kept.
 * - rules_evaluate() and rules_output_not_reported() fill a caller-supplied
 *   rules_result whose findings (exam_finding) and strings are heap copies
 *   owned by the result, passed to the store as they are;
 *   rules_result_free() releases them (safe on a zeroed result and
 *   on a result whose evaluation failed).
 *
 * Times on the timeline are ESTIMATES (see extract/ext_timeline.h); every
 * finding built from them says so in its assumptions text.
 */
#ifndef MITILOG_RULES_H
#define MITILOG_RULES_H

#include <stddef.h>

#include "extract/ext.h"
#include "util/hash.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum rules_age {
    RULES_AGE_UNKNOWN = 0, /* limits for adults apply */
    RULES_AGE_ADULT,
    RULES_AGE_CHILD,
    RULES_AGE_NEONATE,
    RULES_AGE_COUNT
} rules_age;

/* Stable lower-case names ("neonate"; groups and severities are named by
 * exam/exam.h); the parser returns 0 on success, -1 for an unknown name. */
const char *rules_age_name(rules_age age);
int rules_age_parse(const char *text, rules_age *age);

/* One exam (study) as the exam record describes it. */
typedef struct rules_exam {
    const char *study_instance_uid;
    const char *category; /* exam type key, e.g. "neonatal_lung"; may be NULL */
    exam_group group;
    rules_age age;
    double gestational_age_weeks; /* 13+6 is 13 + 6/7 */
    int gestational_age_known;
    exam_index governing_index; /* used when has_governing_index */
    int has_governing_index;    /* 0: the engine decides (domain s.3) */
    const char *room;
    const char *transducer;
    const char *preset;
    int closed;                  /* 0: open, findings are provisional */
    double sr_scan_time_seconds; /* <= 0: no SR scan time */
    const exam_capture *captures;
    size_t capture_count;
} rules_exam;

typedef struct rules_result {
    exam_finding *findings;
    size_t finding_count;
    exam_measurements measurements; /* rules_evaluate only */
    char policy_version[HASH_HEX_SIZE];
} rules_result;

typedef struct rules_policy rules_policy;

/* Parses a policy file (docs/policy.md). Errors name the file, the line
 * and the key: "conf/policy.ini:12: [rule ti_ceiling] limit: 'x' is not a
 * number". On failure *policy is NULL. */
mitilog_status rules_policy_load(const char *path, rules_policy **policy, mitilog_error *error);
/* The same from text; name is used in error messages. */
mitilog_status rules_policy_load_text(const char *text, const char *name, rules_policy **policy,
                                      mitilog_error *error);
void rules_policy_free(rules_policy *policy);

/* SHA-256 hex of the normalised content: whitespace, comments, key order
 * and number spelling ("2" vs "2.0") do not change it; any value does. */
const char *rules_policy_version(const rules_policy *policy);
/* [policy] name; NULL when not set. */
const char *rules_policy_name(const rules_policy *policy);
/* Normalised serialisation the version is computed from. */
const char *rules_policy_normalised(const rules_policy *policy);

double rules_policy_closed_after_idle_minutes(const rules_policy *policy);
double rules_policy_gap_cap_seconds(const rules_policy *policy);
/* Which value of an index the rules use when the header has one and the
 * screen showed one too: "screen" (the default) or "header" ([policy]
 * index_source; docs/policy.md). */
const char *rules_policy_index_source(const rules_policy *policy);

/* Iteration (exam_rule_info, exam/exam.h); pointers stay valid while the
 * policy does. */
size_t rules_policy_rule_count(const rules_policy *policy);
/* Returns 0, or -1 if index is out of range. */
int rules_policy_rule_at(const rules_policy *policy, size_t index, exam_rule_info *info);

/* The limits the policy sets for an exam of a group and age group
 * without an exam-type-specific key (what the dashboard draws): the
 * first applicable rule of each kind, as rules_evaluate() would apply
 * it. */
void rules_policy_limits(const rules_policy *policy, exam_group group, rules_age age,
                         exam_limits *limits);

/* Governing index of docs/domain.md section 3 (when the exam does not
 * name one): obstetric < 10 weeks TIS, >= 10 weeks or unknown TIB;
 * transcranial TIC; everything else (neonatal head included) TIS. */
exam_index rules_governing_index(const rules_exam *exam);

/* Every enabled rule except output_not_reported on one exam. Fills result
 * (findings in policy order, then by threshold). MITILOG_ERROR_MEMORY or
 * MITILOG_ERROR_INVALID (NULL arguments) on failure. */
mitilog_status rules_evaluate(const rules_policy *policy, const rules_exam *exam,
                              rules_result *result, mitilog_error *error);

/* Groups instances by (room, transducer); one finding per group with at
 * least the rule's minimum of instances that report no index at all:
 * measured = silent count, instances = their UIDs, span = first/last
 * silent time. Findings ordered by room, then transducer. */
mitilog_status rules_output_not_reported(const rules_policy *policy,
                                         const exam_device_instance *instances, size_t count,
                                         rules_result *result, mitilog_error *error);

/* Appends a finding made outside the policy engine (e.g. a header that
 * disagrees with the screen): its strings are borrowed and copied into the
 * result, which owns them from then on. */
mitilog_status rules_result_add(rules_result *result, const exam_finding *borrowed,
                                mitilog_error *error);
void rules_result_free(rules_result *result);

/* CEM43 = sum t_i x R^(43 - T_i), R = 0.5 for T >= 43 C, 0.25 below
 * [std: Sapareto & Dewey 1984]; minutes at a temperature. */
double rules_cem43_minutes(double minutes, double temperature_celsius);
/* Worst-case temperature of a displayed TI: 37 + TI. */
double rules_cem43_temperature_from_ti(double thermal_index);

/* MI = p_r.3 / sqrt(f_awf), MPa and MHz [std: IEC 62359; NEMA UD 3].
 * Returns -1 for a non-positive frequency or a negative pressure. */
double rules_mechanical_index(double derated_pressure_mpa, double frequency_mhz);

#ifdef __cplusplus
}
#endif

#endif

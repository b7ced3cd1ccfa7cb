/*
 * stats_outliers.c - the weekly outlier list (stats_outliers.h). Robust z
 * and quantiles come from stats.h.
 */
#include "stats/stats_outliers.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "stats/stats.h"
#include "stats/stats_keys.h"

stats_week_settings stats_week_default_settings(void)
{
    stats_week_settings settings = {12, 20, 3.0};
    return settings;
}

void stats_week_result_free(stats_week_result *result)
{
    if (result == NULL)
        return;
    for (size_t i = 0; i < result->group_count; i++) {
        free(result->groups[i].rules);
        free(result->groups[i].members);
    }
    free(result->groups);
    free(result->flags);
    free(result->baselines);
    memset(result, 0, sizeof *result);
}

/* Adds an exam's findings to a group's tallies. */
static mitilog_status tally_rules(stats_group *group, const exam_row *exam)
{
    for (size_t r = 0; r < exam->rule_count; r++) {
        const exam_rule_count *rule = &exam->rules[r];
        size_t j = 0;
        while (j < group->rule_count && !stats_keys_equal(group->rules[j].rule_id, rule->rule_id))
            j++;
        if (j == group->rule_count) {
            stats_rule_tally *grown =
                realloc(group->rules, (group->rule_count + 1) * sizeof *grown);
            if (grown == NULL)
                return MITILOG_ERROR_MEMORY;
            group->rules = grown;
            group->rules[j].rule_id = rule->rule_id;
            group->rules[j].count = 0;
            group->rule_count++;
        }
        group->rules[j].count += rule->count;
    }
    return MITILOG_OK;
}

static int compare_tallies(const void *left, const void *right)
{
    const stats_rule_tally *a = left, *b = right;
    return stats_keys_compare(a->rule_id, b->rule_id);
}

/* Member order: outliers and exams with findings first, by robust z
 * (undefined last) then value, descending; then the others by value.
 * Each member is sorted with its keys beside it, so that the comparison
 * needs no other data (qsort passes none; the HTTP threads sort at once). */
typedef struct member_key {
    int rank;        /* 0: outlier or with findings; 1: other */
    double robust_z; /* -INFINITY when undefined */
    double value;    /* -INFINITY when the exam has none */
    size_t index;    /* into the week's exams */
} member_key;

static member_key member_key_of(const exam_row *exams, const stats_exam_flag *flags, size_t index)
{
    const stats_exam_flag *flag = &flags[index];
    member_key key;
    key.rank = flag->is_outlier || exams[index].finding_count > 0 ? 0 : 1;
    key.robust_z = isnan(flag->robust_z) ? -INFINITY : flag->robust_z;
    key.value = flag->has_value ? exams[index].max_governing : -INFINITY;
    key.index = index;
    return key;
}

static int compare_members(const void *left, const void *right)
{
    const member_key *a = left, *b = right;
    if (a->rank != b->rank)
        return a->rank - b->rank;
    if (a->robust_z != b->robust_z)
        return a->robust_z > b->robust_z ? -1 : 1;
    if (a->value != b->value)
        return a->value > b->value ? -1 : 1;
    return (a->index > b->index) - (a->index < b->index);
}

/* Sorts a group's members (indices into exams) into member order; keys
 * holds at least count entries. */
static void sort_members(size_t *members, size_t count, const exam_row *exams,
                         const stats_exam_flag *flags, member_key *keys)
{
    for (size_t m = 0; m < count; m++)
        keys[m] = member_key_of(exams, flags, members[m]);
    qsort(keys, count, sizeof *keys, compare_members);
    for (size_t m = 0; m < count; m++)
        members[m] = keys[m].index;
}

static int compare_groups(const void *left, const void *right)
{
    const stats_group *a = left, *b = right;
    if (a->worst_severity != b->worst_severity)
        return a->worst_severity > b->worst_severity ? -1 : 1;
    if (a->outlier_count != b->outlier_count)
        return a->outlier_count > b->outlier_count ? -1 : 1;
    if (a->outlier_rate != b->outlier_rate)
        return a->outlier_rate > b->outlier_rate ? -1 : 1;
    return stats_keys_compare(a->key, b->key);
}

/* The baseline of one exam type without one group's exams. */
typedef struct without_group {
    size_t type_stamp; /* the exam type's index + 1 it was made for; 0: none */
    int usable;        /* count >= the minimum: compared with it */
    size_t count;
    double median, mad, p95;
} without_group;

mitilog_status stats_week_outliers(const exam_row *week, size_t week_count,
                                   const exam_row *baseline, size_t baseline_count,
                                   const stats_week_settings *settings, stats_dimension by,
                                   stats_week_result *result, mitilog_error *error)
{
    memset(result, 0, sizeof *result);
    stats_week_settings defaults = stats_week_default_settings();
    if (settings == NULL)
        settings = &defaults;
    double z_limit = settings->z_limit > 0 ? settings->z_limit : 3.0;
    stats_key_groups types, base_types, keys, base_keys;
    memset(&base_keys, 0, sizeof base_keys);
    memset(&types, 0, sizeof types);
    memset(&base_types, 0, sizeof base_types);
    memset(&keys, 0, sizeof keys);
    double *values = NULL, *scratch = NULL;
    unsigned char *has_type = NULL;
    member_key *member_keys = NULL;
    without_group *pairs = NULL;
    mitilog_status status = MITILOG_ERROR_MEMORY;
    size_t capacity = week_count + baseline_count + 1;

    values = malloc(capacity * sizeof *values);
    scratch = malloc(2 * capacity * sizeof *scratch); /* values and a MAD's scratch */
    result->flags = calloc(week_count + 1, sizeof *result->flags);
    if (values == NULL || scratch == NULL || result->flags == NULL ||
        stats_group_by_key(week, week_count, STATS_BY_EXAM_TYPE, &types) != MITILOG_OK ||
        stats_group_by_known_key(baseline, baseline_count, STATS_BY_EXAM_TYPE, &types.table,
                                 &base_types) != MITILOG_OK ||
        stats_group_by_key(week, week_count, by, &keys) != MITILOG_OK ||
        stats_group_by_known_key(baseline, baseline_count, by, &keys.table, &base_keys) !=
            MITILOG_OK)
        goto done;
    size_t type_count = types.table.count, key_count = keys.table.count;
    result->flag_count = week_count;
    result->baselines = calloc(type_count + 1, sizeof *result->baselines);
    result->groups = calloc(key_count + 1, sizeof *result->groups);
    has_type = malloc(type_count + 1);
    member_keys = malloc((week_count + 1) * sizeof *member_keys);
    pairs = calloc(key_count + 1, sizeof *pairs);
    if (result->baselines == NULL || result->groups == NULL || has_type == NULL ||
        member_keys == NULL || pairs == NULL)
        goto done;

    /* Baselines per exam type (of the week), and each exam's flags. */
    for (size_t t = 0; t < type_count; t++) {
        stats_baseline *base = &result->baselines[t];
        base->exam_type = types.table.keys[t];
        size_t n = 0;
        for (size_t at = base_types.start[t]; at < base_types.start[t + 1]; at++) {
            const exam_row *exam = &baseline[base_types.members[at]];
            if (exam->has_governing)
                values[n++] = exam->max_governing;
        }
        base->trailing_count = n;
        if (n < settings->minimum_baseline) {
            base->thin = 1;
            result->any_thin = 1;
            for (size_t at = types.start[t]; at < types.start[t + 1]; at++) {
                const exam_row *exam = &week[types.members[at]];
                if (exam->has_governing)
                    values[n++] = exam->max_governing;
            }
        }
        base->count = n;
        result->baseline_count++;
        if (n > 0) {
            stats_sort(values, n);
            stats_mad(values, n, scratch, &base->median, &base->mad);
            stats_quantile_sorted(values, n, 0.95, &base->p95);
        }
        for (size_t at = types.start[t]; at < types.start[t + 1]; at++) {
            size_t i = types.members[at];
            stats_exam_flag *flag = &result->flags[i];
            flag->baseline = t;
            flag->robust_z = NAN;
            flag->has_value = week[i].has_governing;
            flag->compared_count = n;
            flag->compared_median = base->median;
            flag->compared_p95 = base->p95;
            if (!flag->has_value || n == 0)
                continue;
            double median = base->median, mad = base->mad, p95 = base->p95;
            /* The type's trailing exams of other groups only (stats_outliers.h);
             * grouped by exam type, every trailing exam is of the group.
             * They depend on the exam's type and group only: made once per
             * pair (a week of many exams has few pairs). */
            without_group *pair = &pairs[keys.key_of[i]];
            if (by != STATS_BY_EXAM_TYPE && pair->type_stamp != t + 1) {
                pair->type_stamp = t + 1;
                size_t other = 0;
                for (size_t b = base_types.start[t]; b < base_types.start[t + 1]; b++) {
                    size_t j = base_types.members[b];
                    if (baseline[j].has_governing && base_keys.key_of[j] != keys.key_of[i])
                        scratch[other++] = baseline[j].max_governing;
                }
                pair->count = other;
                pair->usable = other >= settings->minimum_baseline && other > 0;
                if (pair->usable) {
                    double *own = scratch + other;
                    stats_sort(scratch, other);
                    stats_mad(scratch, other, own, &pair->median, &pair->mad);
                    stats_quantile_sorted(scratch, other, 0.95, &pair->p95);
                }
            }
            if (by != STATS_BY_EXAM_TYPE && pair->usable) {
                median = pair->median;
                mad = pair->mad;
                p95 = pair->p95;
                flag->without_group = 1;
                flag->compared_count = pair->count;
                flag->compared_median = median;
                flag->compared_p95 = p95;
            }
            double z;
            if (stats_robust_z(week[i].max_governing, median, mad, &z) == MITILOG_OK) {
                flag->robust_z = z;
                flag->above_robust_z = z > z_limit;
            }
            flag->above_p95 = week[i].max_governing > p95;
            flag->is_outlier = flag->above_robust_z || flag->above_p95;
        }
    }

    /* Groups. */
    for (size_t g = 0; g < key_count; g++) {
        stats_group *group = &result->groups[g];
        result->group_count++;
        group->key = keys.table.keys[g];
        group->members = malloc((keys.start[g + 1] - keys.start[g] + 1) * sizeof *group->members);
        if (group->members == NULL)
            goto done;
        size_t n = 0, mi_n = 0;
        memset(has_type, 0, type_count + 1);
        for (size_t at = keys.start[g]; at < keys.start[g + 1]; at++) {
            size_t i = keys.members[at];
            const exam_row *exam = &week[i];
            group->members[group->member_count++] = i;
            has_type[types.key_of[i]] = 1;
            group->exam_count++;
            group->capture_count += exam->capture_count;
            group->indexed_count += exam->indexed_count;
            group->finding_count += exam->finding_count;
            if (exam->worst_severity > group->worst_severity)
                group->worst_severity = exam->worst_severity;
            if (tally_rules(group, exam) != MITILOG_OK)
                goto done;
            if (result->flags[i].has_value) {
                group->valued_count++;
                values[n++] = exam->max_governing;
            }
            if (result->flags[i].is_outlier)
                group->outlier_count++;
        }
        group->has_median = n > 0;
        group->median_governing = stats_median_of(values, n);
        for (size_t at = keys.start[g]; at < keys.start[g + 1]; at++) {
            const exam_row *exam = &week[keys.members[at]];
            if (exam->has_mi)
                values[mi_n++] = exam->max_mi;
        }
        group->median_mi = stats_median_of(values, mi_n);
        group->outlier_rate = group->valued_count > 0
                                  ? (double)group->outlier_count / (double)group->valued_count
                                  : 0.0;
        /* The department's median over the exam types this group has. */
        size_t d = 0;
        for (size_t i = 0; i < week_count; i++) {
            if (week[i].has_governing && has_type[types.key_of[i]])
                values[d++] = week[i].max_governing;
        }
        group->department_median = stats_median_of(values, d);
        if (group->member_count > 1)
            sort_members(group->members, group->member_count, week, result->flags, member_keys);
        if (group->rule_count > 1)
            qsort(group->rules, group->rule_count, sizeof *group->rules, compare_tallies);
    }
    if (result->group_count > 1)
        qsort(result->groups, result->group_count, sizeof *result->groups, compare_groups);
    status = MITILOG_OK;
done:
    free(values);
    free(scratch);
    free(has_type);
    free(member_keys);
    free(pairs);
    stats_key_groups_free(&types);
    stats_key_groups_free(&base_types);
    stats_key_groups_free(&keys);
    stats_key_groups_free(&base_keys);
    if (status != MITILOG_OK) {
        stats_week_result_free(result);
        mitilog_error_set(error, status, "weekly outliers: out of memory");
    }
    return status;
}

void stats_week_days(long monday, size_t baseline_weeks, long *baseline_first, long *week_last)
{
    *baseline_first = monday - 7L * (long)baseline_weeks;
    *week_last = monday + 6;
}

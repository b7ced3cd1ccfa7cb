/*
 * stats_week.c - ISO weeks, weekly outliers, period statistics and preset
 * drift (stats_week.h). Quantiles are type 7 (stats.c).
 */
#include "stats/stats_week.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stats/stats.h"

const double stats_thresholds[STATS_THRESHOLD_COUNT] = {0.7, 1.0, 1.5, 2.0};

/* ---- calendar: H. Hinnant's days_from_civil / civil_from_days
 * (public domain algorithms, "chrono-Compatible Low-Level Date
 * Algorithms"); proleptic Gregorian. ---- */

static long days_from_civil(long year, unsigned month, unsigned day)
{
    year -= month <= 2;
    long era = (year >= 0 ? year : year - 399) / 400;
    unsigned year_of_era = (unsigned)(year - era * 400);
    unsigned day_of_year = (153 * (month + (month > 2 ? -3 : 9)) + 2) / 5 + day - 1;
    unsigned day_of_era = year_of_era * 365 + year_of_era / 4 - year_of_era / 100 + day_of_year;
    return era * 146097 + (long)day_of_era - 719468;
}

static void civil_from_days(long days, long *year, unsigned *month, unsigned *day)
{
    days += 719468;
    long era = (days >= 0 ? days : days - 146096) / 146097;
    unsigned day_of_era = (unsigned)(days - era * 146097);
    unsigned year_of_era =
        (day_of_era - day_of_era / 1460 + day_of_era / 36524 - day_of_era / 146096) / 365;
    long y = (long)year_of_era + era * 400;
    unsigned day_of_year = day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);
    unsigned mp = (5 * day_of_year + 2) / 153;
    *day = day_of_year - (153 * mp + 2) / 5 + 1;
    *month = mp < 10 ? mp + 3 : mp - 9;
    *year = y + (*month <= 2);
}

/* ISO weekday, Monday 1 .. Sunday 7 (1970-01-01 was a Thursday). */
static int iso_weekday(long days)
{
    long r = ((days % 7) + 7) % 7;
    return (int)((r + 3) % 7) + 1;
}

static int is_leap(long year)
{
    return (year % 4 == 0 && year % 100 != 0) || year % 400 == 0;
}

mitilog_status stats_day_number(const char *date, long *days)
{
    *days = -1;
    if (date == NULL || strlen(date) < 10 || date[4] != '-' || date[7] != '-')
        return MITILOG_ERROR_INVALID;
    for (int i = 0; i < 10; i++) {
        if (i != 4 && i != 7 && (date[i] < '0' || date[i] > '9'))
            return MITILOG_ERROR_INVALID;
    }
    long year = strtol(date, NULL, 10);
    unsigned month = (unsigned)((date[5] - '0') * 10 + (date[6] - '0'));
    unsigned day = (unsigned)((date[8] - '0') * 10 + (date[9] - '0'));
    static const unsigned lengths[12] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    if (month < 1 || month > 12 || day < 1)
        return MITILOG_ERROR_INVALID;
    unsigned length = lengths[month - 1] + (month == 2 && is_leap(year));
    if (day > length)
        return MITILOG_ERROR_INVALID;
    *days = days_from_civil(year, month, day);
    return MITILOG_OK;
}

void stats_day_text(long days, char out[11])
{
    long year;
    unsigned month, day;
    civil_from_days(days, &year, &month, &day);
    char text[48];
    snprintf(text, sizeof text, "%04ld-%02u-%02u", year % 10000, month % 100, day % 100);
    memcpy(out, text, 10);
    out[10] = '\0';
}

void stats_iso_week_of_day(long days, int *iso_year, int *iso_week)
{
    long thursday = days - (iso_weekday(days) - 1) + 3;
    long year;
    unsigned month, day;
    civil_from_days(thursday, &year, &month, &day);
    *iso_year = (int)year;
    *iso_week = (int)((thursday - days_from_civil(year, 1, 1)) / 7 + 1);
}

int stats_iso_weeks_in_year(int iso_year)
{
    int year, week;
    stats_iso_week_of_day(days_from_civil(iso_year, 12, 28), &year, &week);
    return week;
}

mitilog_status stats_iso_week_monday(int iso_year, int iso_week, long *monday)
{
    if (iso_year < 1 || iso_year > 9999 || iso_week < 1 ||
        iso_week > stats_iso_weeks_in_year(iso_year))
        return MITILOG_ERROR_INVALID;
    long january4 = days_from_civil(iso_year, 1, 4);
    *monday = january4 - (iso_weekday(january4) - 1) + 7L * (iso_week - 1);
    return MITILOG_OK;
}

mitilog_status stats_iso_week_parse(const char *text, int *iso_year, int *iso_week)
{
    if (text == NULL || strlen(text) != 8 || text[4] != '-' || (text[5] != 'W' && text[5] != 'w'))
        return MITILOG_ERROR_INVALID;
    for (int i = 0; i < 8; i++) {
        if (i != 4 && i != 5 && (text[i] < '0' || text[i] > '9'))
            return MITILOG_ERROR_INVALID;
    }
    int year = (int)strtol(text, NULL, 10);
    int week = (text[6] - '0') * 10 + (text[7] - '0');
    long monday;
    if (stats_iso_week_monday(year, week, &monday) != MITILOG_OK)
        return MITILOG_ERROR_INVALID;
    *iso_year = year;
    *iso_week = week;
    return MITILOG_OK;
}

void stats_iso_week_text(int iso_year, int iso_week, char out[9])
{
    char text[32];
    snprintf(text, sizeof text, "%04d-W%02d", iso_year % 10000, iso_week % 100);
    memcpy(out, text, 8);
    out[8] = '\0';
}

void stats_week_days(long monday, size_t baseline_weeks, long *baseline_first, long *week_last)
{
    *baseline_first = monday - 7L * (long)baseline_weeks;
    *week_last = monday + 6;
}

/* ---- dimensions ---- */

static const char *const dimension_names[] = {"exam_type", "room", "preset", "shift",
                                               "transducer"};

const char *stats_dimension_name(stats_dimension dimension)
{
    if ((unsigned)dimension >= sizeof dimension_names / sizeof dimension_names[0])
        return "exam_type";
    return dimension_names[dimension];
}

int stats_dimension_parse(const char *name, stats_dimension *dimension)
{
    for (size_t i = 0; name != NULL && i < sizeof dimension_names / sizeof dimension_names[0];
         i++) {
        if (strcmp(name, dimension_names[i]) == 0) {
            *dimension = (stats_dimension)i;
            return 0;
        }
    }
    return -1;
}

const char *stats_exam_key(const stats_exam *exam, stats_dimension dimension)
{
    switch (dimension) {
    case STATS_BY_ROOM: return exam->room;
    case STATS_BY_PRESET: return exam->preset;
    case STATS_BY_SHIFT: return exam->shift;
    case STATS_BY_TRANSDUCER: return exam->transducer;
    case STATS_BY_EXAM_TYPE: break;
    }
    return exam->exam_type;
}

static int keys_equal(const char *a, const char *b)
{
    if (a == NULL || b == NULL)
        return a == b;
    return strcmp(a, b) == 0;
}

/* NULL sorts last. */
static int keys_compare(const char *a, const char *b)
{
    if (a == NULL || b == NULL)
        return (a == NULL) - (b == NULL);
    return strcmp(a, b);
}

/* ---- keys: every computation below groups exams by a text key (exam
 * type, room, ...). A hash table gives each distinct key an index in
 * first-seen order, and each group lists its members in input order, so
 * the work is one pass per value instead of one per key and exam, and
 * every sum and value list is built in the same order as by a scan. ---- */

typedef struct key_table {
    const char **keys;          /* by index, first-seen order */
    size_t count, capacity;
    size_t *slots;              /* index + 1; 0 = empty */
    size_t slot_count;          /* a power of two */
    size_t null_index;          /* index + 1 of the NULL key; 0 = none yet */
} key_table;

static void key_table_free(key_table *table)
{
    free(table->keys);
    free(table->slots);
    memset(table, 0, sizeof *table);
}

/* FNV-1a, 64-bit. */
static uint64_t key_hash(const char *key)
{
    uint64_t hash = 0xcbf29ce484222325u;
    for (const unsigned char *c = (const unsigned char *)key; *c != '\0'; c++)
        hash = (hash ^ *c) * 0x100000001b3u;
    return hash;
}

/* The slot holding key, or the empty slot where it would go. */
static size_t key_slot(const key_table *table, const char *key)
{
    size_t mask = table->slot_count - 1;
    size_t slot = (size_t)key_hash(key) & mask;
    while (table->slots[slot] != 0 && !keys_equal(table->keys[table->slots[slot] - 1], key))
        slot = (slot + 1) & mask;
    return slot;
}

/* The key's index, or SIZE_MAX when the table does not hold it. */
static size_t key_find(const key_table *table, const char *key)
{
    if (key == NULL)
        return table->null_index > 0 ? table->null_index - 1 : SIZE_MAX;
    if (table->slot_count == 0)
        return SIZE_MAX;
    size_t slot = key_slot(table, key);
    return table->slots[slot] > 0 ? table->slots[slot] - 1 : SIZE_MAX;
}

/* The key's index, added when new. */
static mitilog_status key_add(key_table *table, const char *key, size_t *index)
{
    *index = key_find(table, key);
    if (*index != SIZE_MAX)
        return MITILOG_OK;
    if (key != NULL && 2 * (table->count + 1) > table->slot_count) {
        size_t slot_count = table->slot_count ? table->slot_count * 2 : 64;
        size_t *slots = calloc(slot_count, sizeof *slots);
        if (slots == NULL)
            return MITILOG_ERROR_MEMORY;
        free(table->slots);
        table->slots = slots;
        table->slot_count = slot_count;
        for (size_t k = 0; k < table->count; k++) {
            if (table->keys[k] != NULL)
                table->slots[key_slot(table, table->keys[k])] = k + 1;
        }
    }
    if (table->count == table->capacity) {
        size_t capacity = table->capacity ? table->capacity * 2 : 16;
        const char **keys = realloc(table->keys, capacity * sizeof *keys);
        if (keys == NULL)
            return MITILOG_ERROR_MEMORY;
        table->keys = keys;
        table->capacity = capacity;
    }
    *index = table->count;
    table->keys[table->count++] = key;
    if (key == NULL)
        table->null_index = *index + 1;
    else
        table->slots[key_slot(table, key)] = *index + 1;
    return MITILOG_OK;
}

/* Exams grouped by a key: table.keys in first-seen order; the members of
 * key k are members[start[k]] .. members[start[k + 1] - 1], in input
 * order; key_of[i] is exam i's key. */
typedef struct key_groups {
    key_table table;
    size_t *key_of;
    size_t *start;
    size_t *members;
} key_groups;

static void key_groups_free(key_groups *groups)
{
    key_table_free(&groups->table);
    free(groups->key_of);
    free(groups->start);
    free(groups->members);
    memset(groups, 0, sizeof *groups);
}

/* Counting sort of the exams by key_of (stable: input order within);
 * keys: how many key indices there are. */
static mitilog_status key_groups_fill(key_groups *groups, size_t count, size_t keys)
{
    groups->start = calloc(keys + 2, sizeof *groups->start);
    groups->members = malloc((count + 1) * sizeof *groups->members);
    if (groups->start == NULL || groups->members == NULL)
        return MITILOG_ERROR_MEMORY;
    for (size_t i = 0; i < count; i++) {
        if (groups->key_of[i] != SIZE_MAX)
            groups->start[groups->key_of[i] + 2]++;
    }
    for (size_t k = 2; k < keys + 2; k++)
        groups->start[k] += groups->start[k - 1];
    /* start[k + 1] is now where key k's members begin. */
    for (size_t i = 0; i < count; i++) {
        if (groups->key_of[i] != SIZE_MAX)
            groups->members[groups->start[groups->key_of[i] + 1]++] = i;
    }
    return MITILOG_OK;
}

static mitilog_status group_by_key(const stats_exam *exams, size_t count,
                                   stats_dimension dimension, key_groups *groups)
{
    memset(groups, 0, sizeof *groups);
    groups->key_of = malloc((count + 1) * sizeof *groups->key_of);
    if (groups->key_of == NULL)
        return MITILOG_ERROR_MEMORY;
    for (size_t i = 0; i < count; i++) {
        if (key_add(&groups->table, stats_exam_key(&exams[i], dimension), &groups->key_of[i]) !=
            MITILOG_OK)
            return MITILOG_ERROR_MEMORY;
    }
    return key_groups_fill(groups, count, groups->table.count);
}

/* The exams whose key the table of another grouping holds, grouped by its
 * keys (exams with other keys are left out). */
static mitilog_status group_by_known_key(const stats_exam *exams, size_t count,
                                         stats_dimension dimension, const key_table *known,
                                         key_groups *groups)
{
    memset(groups, 0, sizeof *groups);
    groups->key_of = malloc((count + 1) * sizeof *groups->key_of);
    if (groups->key_of == NULL)
        return MITILOG_ERROR_MEMORY;
    for (size_t i = 0; i < count; i++)
        groups->key_of[i] = key_find(known, stats_exam_key(&exams[i], dimension));
    return key_groups_fill(groups, count, known->count);
}

static double median_of(double *values, size_t count)
{
    double median = NAN;
    if (count > 0) {
        stats_sort(values, count);
        stats_median_sorted(values, count, &median);
    }
    return median;
}

static void distribution_of(double *values, size_t count, stats_distribution *out)
{
    memset(out, 0, sizeof *out);
    out->count = count;
    if (count == 0)
        return;
    static const double p[] = {0.05, 0.25, 0.50, 0.75, 0.95};
    double q[5];
    stats_quantiles(values, count, p, 5, q, &out->minimum, &out->maximum);
    out->p05 = q[0];
    out->p25 = q[1];
    out->median = q[2];
    out->p75 = q[3];
    out->p95 = q[4];
}

/* ---- weekly outliers ---- */

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
static mitilog_status tally_rules(stats_group *group, const stats_exam *exam)
{
    for (size_t r = 0; r < exam->rule_count; r++) {
        const stats_rule_count *rule = &exam->rules[r];
        size_t j = 0;
        while (j < group->rule_count && !keys_equal(group->rules[j].rule_id, rule->rule_id))
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
    return keys_compare(a->rule_id, b->rule_id);
}

/* Member order: outliers and exams with findings first, by robust z
 * (undefined last) then value, descending; then the others by value. */
typedef struct member_sort {
    const stats_exam *exams;
    const stats_exam_flag *flags;
} member_sort;
static member_sort member_context;   /* qsort has no user pointer */

static int member_rank(size_t index)
{
    const stats_exam_flag *flag = &member_context.flags[index];
    return flag->is_outlier || member_context.exams[index].finding_count > 0 ? 0 : 1;
}

static int compare_members(const void *left, const void *right)
{
    size_t a = *(const size_t *)left, b = *(const size_t *)right;
    int rank_a = member_rank(a), rank_b = member_rank(b);
    if (rank_a != rank_b)
        return rank_a - rank_b;
    const stats_exam_flag *fa = &member_context.flags[a], *fb = &member_context.flags[b];
    double za = isnan(fa->robust_z) ? -INFINITY : fa->robust_z;
    double zb = isnan(fb->robust_z) ? -INFINITY : fb->robust_z;
    if (za != zb)
        return za > zb ? -1 : 1;
    double va = fa->has_value ? member_context.exams[a].max_governing : -INFINITY;
    double vb = fb->has_value ? member_context.exams[b].max_governing : -INFINITY;
    if (va != vb)
        return va > vb ? -1 : 1;
    return (a > b) - (a < b);
}

static int compare_groups(const void *left, const void *right)
{
    const stats_group *a = left, *b = right;
    if (a->outlier_count != b->outlier_count)
        return a->outlier_count > b->outlier_count ? -1 : 1;
    if (a->outlier_rate != b->outlier_rate)
        return a->outlier_rate > b->outlier_rate ? -1 : 1;
    return keys_compare(a->key, b->key);
}

mitilog_status stats_week_outliers(const stats_exam *week, size_t week_count,
                                   const stats_exam *baseline, size_t baseline_count,
                                   const stats_week_settings *settings,
                                   stats_dimension by, stats_week_result *result,
                                   mitilog_error *error)
{
    memset(result, 0, sizeof *result);
    stats_week_settings defaults = stats_week_default_settings();
    if (settings == NULL)
        settings = &defaults;
    double z_limit = settings->z_limit > 0 ? settings->z_limit : 3.0;
    key_groups types, base_types, keys;
    memset(&types, 0, sizeof types);
    memset(&base_types, 0, sizeof base_types);
    memset(&keys, 0, sizeof keys);
    double *values = NULL, *scratch = NULL;
    unsigned char *has_type = NULL;
    mitilog_status status = MITILOG_ERROR_MEMORY;
    size_t capacity = week_count + baseline_count + 1;

    values = malloc(capacity * sizeof *values);
    scratch = malloc(capacity * sizeof *scratch);
    result->flags = calloc(week_count + 1, sizeof *result->flags);
    if (values == NULL || scratch == NULL || result->flags == NULL ||
        group_by_key(week, week_count, STATS_BY_EXAM_TYPE, &types) != MITILOG_OK ||
        group_by_known_key(baseline, baseline_count, STATS_BY_EXAM_TYPE, &types.table,
                           &base_types) != MITILOG_OK ||
        group_by_key(week, week_count, by, &keys) != MITILOG_OK)
        goto done;
    size_t type_count = types.table.count, key_count = keys.table.count;
    result->flag_count = week_count;
    result->baselines = calloc(type_count + 1, sizeof *result->baselines);
    result->groups = calloc(key_count + 1, sizeof *result->groups);
    has_type = malloc(type_count + 1);
    if (result->baselines == NULL || result->groups == NULL || has_type == NULL)
        goto done;

    /* Baselines per exam type (of the week), and each exam's flags. */
    for (size_t t = 0; t < type_count; t++) {
        stats_baseline *base = &result->baselines[t];
        base->exam_type = types.table.keys[t];
        size_t n = 0;
        for (size_t at = base_types.start[t]; at < base_types.start[t + 1]; at++) {
            const stats_exam *exam = &baseline[base_types.members[at]];
            if (exam->has_governing)
                values[n++] = exam->max_governing;
        }
        base->trailing_count = n;
        if (n < settings->minimum_baseline) {
            base->thin = 1;
            result->any_thin = 1;
            for (size_t at = types.start[t]; at < types.start[t + 1]; at++) {
                const stats_exam *exam = &week[types.members[at]];
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
            if (!flag->has_value || n == 0)
                continue;
            double z;
            if (stats_robust_z(week[i].max_governing, base->median, base->mad, &z) ==
                MITILOG_OK) {
                flag->robust_z = z;
                flag->above_robust_z = z > z_limit;
            }
            flag->above_p95 = week[i].max_governing > base->p95;
            flag->is_outlier = flag->above_robust_z || flag->above_p95;
        }
    }

    /* Groups. */
    member_context.exams = week;
    member_context.flags = result->flags;
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
            const stats_exam *exam = &week[i];
            group->members[group->member_count++] = i;
            has_type[types.key_of[i]] = 1;
            group->exam_count++;
            group->capture_count += exam->capture_count;
            group->indexed_count += exam->indexed_count;
            group->finding_count += exam->finding_count;
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
        group->median_governing = median_of(values, n);
        for (size_t at = keys.start[g]; at < keys.start[g + 1]; at++) {
            const stats_exam *exam = &week[keys.members[at]];
            if (exam->has_mi)
                values[mi_n++] = exam->max_mi;
        }
        group->median_mi = median_of(values, mi_n);
        group->outlier_rate =
            group->valued_count > 0 ? (double)group->outlier_count / (double)group->valued_count
                                    : 0.0;
        /* The department's median over the exam types this group has. */
        size_t d = 0;
        for (size_t i = 0; i < week_count; i++) {
            if (week[i].has_governing && has_type[types.key_of[i]])
                values[d++] = week[i].max_governing;
        }
        group->department_median = median_of(values, d);
        if (group->member_count > 1)
            qsort(group->members, group->member_count, sizeof *group->members, compare_members);
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
    key_groups_free(&types);
    key_groups_free(&base_types);
    key_groups_free(&keys);
    if (status != MITILOG_OK) {
        stats_week_result_free(result);
        mitilog_error_set(error, status, "weekly outliers: out of memory");
    }
    return status;
}

/* ---- period statistics ---- */

void stats_period_result_free(stats_period_result *result)
{
    if (result == NULL)
        return;
    free(result->rows);
    memset(result, 0, sizeof *result);
}

static int compare_rows(const void *left, const void *right)
{
    const stats_period_row *a = left, *b = right;
    return keys_compare(a->key, b->key);
}

/* One row over the exams listed in members (count of them), or over all
 * exams in input order when members is NULL. */
static void period_row(const stats_exam *exams, const size_t *members, size_t count,
                       const char *key, double *values, stats_period_row *row)
{
#define MEMBER(at) (&exams[members != NULL ? members[at] : (at)])
    memset(row, 0, sizeof *row);
    row->key = key;
    size_t n = 0;
    for (size_t at = 0; at < count; at++) {
        const stats_exam *exam = MEMBER(at);
        row->exam_count++;
        row->capture_count += exam->capture_count;
        row->indexed_count += exam->indexed_count;
        if (exam->finding_count > 0)
            row->with_findings_count++;
        if (exam->has_governing)
            values[n++] = exam->max_governing;
    }
    row->share_with_findings =
        row->exam_count > 0 ? (double)row->with_findings_count / (double)row->exam_count : 0.0;
    distribution_of(values, n, &row->governing);
    n = 0;
    for (size_t at = 0; at < count; at++) {
        if (MEMBER(at)->has_mi)
            values[n++] = MEMBER(at)->max_mi;
    }
    distribution_of(values, n, &row->mi);
    n = 0;
    for (size_t at = 0; at < count; at++) {
        if (MEMBER(at)->has_governing)
            values[n++] = MEMBER(at)->estimated_seconds;
    }
    distribution_of(values, n, &row->estimated_seconds);
    for (int t = 0; t < STATS_THRESHOLD_COUNT; t++) {
        stats_threshold_time *time = &row->thresholds[t];
        time->threshold = stats_thresholds[t];
        n = 0;
        for (size_t at = 0; at < count; at++) {
            const stats_exam *exam = MEMBER(at);
            if (!exam->has_governing)
                continue;
            double seconds = exam->seconds_at_or_above[t];
            values[n++] = seconds;
            time->total_seconds += seconds;
            if (seconds > 0)
                time->exam_count++;
        }
        if (n > 0) {
            static const double p[] = {0.50, 0.95};
            double q[2];
            stats_quantiles(values, n, p, 2, q, NULL, NULL);
            time->median_seconds = q[0];
            time->p95_seconds = q[1];
        }
    }
#undef MEMBER
}

mitilog_status stats_period_table(const stats_exam *exams, size_t count,
                                  stats_dimension by, stats_period_result *result,
                                  mitilog_error *error)
{
    memset(result, 0, sizeof *result);
    key_groups keys;
    memset(&keys, 0, sizeof keys);
    double *values = malloc((count + 1) * sizeof *values);
    mitilog_status status = MITILOG_ERROR_MEMORY;
    if (values == NULL || group_by_key(exams, count, by, &keys) != MITILOG_OK)
        goto done;
    size_t key_count = keys.table.count;
    result->rows = calloc(key_count + 1, sizeof *result->rows);
    if (result->rows == NULL)
        goto done;
    for (size_t k = 0; k < key_count; k++)
        period_row(exams, &keys.members[keys.start[k]], keys.start[k + 1] - keys.start[k],
                   keys.table.keys[k], values, &result->rows[k]);
    result->row_count = key_count;
    if (key_count > 1)
        qsort(result->rows, key_count, sizeof *result->rows, compare_rows);
    period_row(exams, NULL, count, NULL, values, &result->total);
    status = MITILOG_OK;
done:
    free(values);
    key_groups_free(&keys);
    if (status != MITILOG_OK) {
        stats_period_result_free(result);
        mitilog_error_set(error, status, "period statistics: out of memory");
    }
    return status;
}

/* ---- preset drift ---- */

void stats_drift_result_free(stats_drift_result *result)
{
    if (result == NULL)
        return;
    for (size_t i = 0; i < result->series_count; i++)
        free(result->series[i].points);
    free(result->series);
    memset(result, 0, sizeof *result);
}

static int compare_series(const void *left, const void *right)
{
    const stats_drift_series *a = left, *b = right;
    if ((a->flagged_count > 0) != (b->flagged_count > 0))
        return a->flagged_count > 0 ? -1 : 1;
    if (a->flagged_count > 0 && a->max_abs_z != b->max_abs_z)
        return a->max_abs_z > b->max_abs_z ? -1 : 1;
    int c = keys_compare(a->preset, b->preset);
    return c != 0 ? c : keys_compare(a->room, b->room);
}

mitilog_status stats_drift(const stats_exam *exams, size_t count, long first_monday,
                           size_t week_count, size_t baseline_weeks,
                           size_t minimum_baseline, double z_limit,
                           stats_drift_result *result, mitilog_error *error)
{
    memset(result, 0, sizeof *result);
    result->week_count = week_count;
    if (z_limit <= 0)
        z_limit = 3.0;
    if (minimum_baseline < 1)
        minimum_baseline = 1;
    key_table presets, rooms;
    memset(&presets, 0, sizeof presets);
    memset(&rooms, 0, sizeof rooms);
    key_groups series_groups;
    memset(&series_groups, 0, sizeof series_groups);
    size_t *preset_of = malloc((count + 1) * sizeof *preset_of);
    size_t *room_of = malloc((count + 1) * sizeof *room_of);
    size_t *pairs = NULL;
    long *days = malloc((count + 1) * sizeof *days);
    double *values = malloc((count + 1) * sizeof *values);
    double *scratch = malloc((count + 1) * sizeof *scratch);
    mitilog_status status = MITILOG_ERROR_MEMORY;
    series_groups.key_of = malloc((count + 1) * sizeof *series_groups.key_of);
    if (preset_of == NULL || room_of == NULL || days == NULL || values == NULL ||
        scratch == NULL || series_groups.key_of == NULL)
        goto done;
    result->series = calloc(count + 1, sizeof *result->series);
    if (result->series == NULL)
        goto done;
    for (size_t i = 0; i < count; i++) {
        if (exams[i].preset == NULL || stats_day_number(exams[i].day, &days[i]) != MITILOG_OK)
            days[i] = -1;
        else if (key_add(&presets, exams[i].preset, &preset_of[i]) != MITILOG_OK ||
                 key_add(&rooms, exams[i].room, &room_of[i]) != MITILOG_OK)
            goto done;
    }
    /* Series: each (preset, room) pair, in first-seen order. */
    pairs = calloc(presets.count * rooms.count + 1, sizeof *pairs);
    if (pairs == NULL)
        goto done;
    for (size_t i = 0; i < count; i++) {
        series_groups.key_of[i] = SIZE_MAX;
        if (days[i] < 0)
            continue;
        size_t *pair = &pairs[preset_of[i] * rooms.count + room_of[i]];
        if (*pair == 0) {
            stats_drift_series *series = &result->series[result->series_count++];
            series->preset = exams[i].preset;
            series->room = exams[i].room;
            series->exam_type = exams[i].exam_type;
            series->points = calloc(week_count + 1, sizeof *series->points);
            if (series->points == NULL)
                goto done;
            *pair = result->series_count;
        }
        series_groups.key_of[i] = *pair - 1;
    }
    if (key_groups_fill(&series_groups, count, result->series_count) != MITILOG_OK)
        goto done;
    for (size_t s = 0; s < result->series_count; s++) {
        stats_drift_series *series = &result->series[s];
        const size_t *members = &series_groups.members[series_groups.start[s]];
        size_t member_count = series_groups.start[s + 1] - series_groups.start[s];
        for (size_t w = 0; w < week_count; w++) {
            stats_drift_point *point = &series->points[w];
            long monday = first_monday + 7L * (long)w;
            stats_iso_week_of_day(monday, &point->iso_year, &point->iso_week);
            size_t n = 0, b = 0;
            for (size_t m = 0; m < member_count; m++) {
                size_t i = members[m];
                if (exams[i].has_governing && days[i] >= monday && days[i] <= monday + 6)
                    values[n++] = exams[i].max_governing;
            }
            point->count = n;
            point->has_median = n > 0;
            point->median = median_of(values, n);
            for (size_t m = 0; m < member_count; m++) {
                size_t i = members[m];
                if (exams[i].has_governing && days[i] < monday &&
                    days[i] >= monday - 7L * (long)baseline_weeks)
                    values[b++] = exams[i].max_governing;
            }
            point->baseline_count = b;
            if (b == 0)
                continue;
            stats_mad(values, b, scratch, &point->baseline_median, &point->baseline_mad);
            if (n == 0 || b < minimum_baseline || !(point->baseline_mad > 0))
                continue;
            double spread = STATS_MAD_SCALE * point->baseline_mad * 1.2533 / sqrt((double)n);
            point->z = (point->median - point->baseline_median) / spread;
            point->has_z = 1;
            point->flagged = fabs(point->z) > z_limit;
            if (point->flagged)
                series->flagged_count++;
            if (fabs(point->z) > series->max_abs_z)
                series->max_abs_z = fabs(point->z);
        }
    }
    if (result->series_count > 1)
        qsort(result->series, result->series_count, sizeof *result->series, compare_series);
    status = MITILOG_OK;
done:
    free(preset_of);
    free(room_of);
    free(pairs);
    free(days);
    free(values);
    free(scratch);
    key_table_free(&presets);
    key_table_free(&rooms);
    key_groups_free(&series_groups);
    if (status != MITILOG_OK) {
        stats_drift_result_free(result);
        mitilog_error_set(error, status, "preset drift: out of memory");
    }
    return status;
}

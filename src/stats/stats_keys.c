/*
 * stats_keys.c - grouping exams by a text key (stats_keys.h).
 */
#include "stats/stats_keys.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "stats/stats.h"
#include "util/hash_table.h"

int stats_keys_equal(const char *a, const char *b)
{
    if (a == NULL || b == NULL)
        return a == b;
    return strcmp(a, b) == 0;
}

/* NULL sorts last. */
int stats_keys_compare(const char *a, const char *b)
{
    if (a == NULL || b == NULL)
        return (a == NULL) - (b == NULL);
    return strcmp(a, b);
}

void stats_key_table_free(stats_key_table *table)
{
    free(table->keys);
    hash_table_free(&table->indices);
    memset(table, 0, sizeof *table);
}

size_t stats_key_find(const stats_key_table *table, const char *key)
{
    if (key == NULL)
        return table->null_index > 0 ? table->null_index - 1 : SIZE_MAX;
    const hash_entry *entry = hash_table_find(&table->indices, key, strlen(key));
    return entry != NULL ? (size_t)entry->number : SIZE_MAX;
}

mitilog_status stats_key_add(stats_key_table *table, const char *key, size_t *index)
{
    *index = stats_key_find(table, key);
    if (*index != SIZE_MAX)
        return MITILOG_OK;
    if (table->count == table->capacity) {
        size_t capacity = table->capacity ? table->capacity * 2 : 16;
        const char **keys = realloc(table->keys, capacity * sizeof *keys);
        if (keys == NULL)
            return MITILOG_ERROR_MEMORY;
        table->keys = keys;
        table->capacity = capacity;
    }
    if (key == NULL)
        table->null_index = table->count + 1;
    else if (hash_table_put(&table->indices, key, strlen(key), table->count, NULL) != MITILOG_OK)
        return MITILOG_ERROR_MEMORY;
    *index = table->count;
    table->keys[table->count++] = key;
    return MITILOG_OK;
}

void stats_key_groups_free(stats_key_groups *groups)
{
    stats_key_table_free(&groups->table);
    free(groups->key_of);
    free(groups->start);
    free(groups->members);
    memset(groups, 0, sizeof *groups);
}

/* Counting sort of the exams by key_of (stable: input order within);
 * keys: how many key indices there are. */
mitilog_status stats_key_groups_fill(stats_key_groups *groups, size_t count, size_t keys)
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

mitilog_status stats_group_by_key(const exam_row *exams, size_t count, stats_dimension dimension,
                                  stats_key_groups *groups)
{
    memset(groups, 0, sizeof *groups);
    groups->key_of = malloc((count + 1) * sizeof *groups->key_of);
    if (groups->key_of == NULL)
        return MITILOG_ERROR_MEMORY;
    for (size_t i = 0; i < count; i++) {
        if (stats_key_add(&groups->table, stats_exam_key(&exams[i], dimension),
                          &groups->key_of[i]) != MITILOG_OK)
            return MITILOG_ERROR_MEMORY;
    }
    return stats_key_groups_fill(groups, count, groups->table.count);
}

mitilog_status stats_group_by_known_key(const exam_row *exams, size_t count,
                                        stats_dimension dimension, const stats_key_table *known,
                                        stats_key_groups *groups)
{
    memset(groups, 0, sizeof *groups);
    groups->key_of = malloc((count + 1) * sizeof *groups->key_of);
    if (groups->key_of == NULL)
        return MITILOG_ERROR_MEMORY;
    for (size_t i = 0; i < count; i++)
        groups->key_of[i] = stats_key_find(known, stats_exam_key(&exams[i], dimension));
    return stats_key_groups_fill(groups, count, known->count);
}

double stats_median_of(double *values, size_t count)
{
    double median = NAN;
    if (count > 0) {
        stats_sort(values, count);
        stats_median_sorted(values, count, &median);
    }
    return median;
}

/*
 * stats_keys.h - grouping exams by a text key (exam type, room, preset,
 * ...), shared by the outlier list, the period table and drift; internal
 * to src/stats/. A hash table (util/hash_table.h) gives each distinct key
 * an index in first-seen order, and each group lists its members in input
 * order, so the work is one pass per value instead of one per key and
 * exam, and every sum and value list is built in the same order as by a
 * scan.
 *
 * Keys are borrowed from the exams (NULL is a key of its own: "not
 * recorded"); the hash table keeps a copy of each distinct one. Every table and grouping is freed with its own *_free(),
 * which accepts a zeroed or partly filled one.
 */
#ifndef MITILOG_STATS_KEYS_H
#define MITILOG_STATS_KEYS_H

#include <stddef.h>

#include "stats/stats_exam.h"
#include "util/hash_table.h"
#include "util/status.h"

/* The distinct keys, each with an index in first-seen order. */
typedef struct stats_key_table {
    const char **keys; /* by index, first-seen order; borrowed */
    size_t count, capacity;
    hash_table indices; /* key text to index */
    size_t null_index;  /* index + 1 of the NULL key; 0 = none yet */
} stats_key_table;

/* Exams grouped by a key: table.keys in first-seen order; the members of
 * key k are members[start[k]] .. members[start[k + 1] - 1], in input
 * order; key_of[i] is exam i's key. */
typedef struct stats_key_groups {
    stats_key_table table;
    size_t *key_of;
    size_t *start;
    size_t *members;
} stats_key_groups;

/* Equal texts, or both NULL. */
int stats_keys_equal(const char *a, const char *b);
/* strcmp order; NULL sorts last. */
int stats_keys_compare(const char *a, const char *b);

void stats_key_table_free(stats_key_table *table);
/* The key's index, or SIZE_MAX when the table does not hold it. */
size_t stats_key_find(const stats_key_table *table, const char *key);
/* The key's index, added when new. MITILOG_ERROR_MEMORY on allocation. */
mitilog_status stats_key_add(stats_key_table *table, const char *key, size_t *index);

void stats_key_groups_free(stats_key_groups *groups);
/* Counting sort of count exams by groups->key_of (stable: input order
 * within; SIZE_MAX: left out); keys: how many key indices there are. */
mitilog_status stats_key_groups_fill(stats_key_groups *groups, size_t count, size_t keys);
/* The exams grouped by their value of a dimension. */
mitilog_status stats_group_by_key(const exam_row *exams, size_t count, stats_dimension dimension,
                                  stats_key_groups *groups);
/* The exams whose key the table of another grouping holds, grouped by its
 * keys (exams with other keys are left out). */
mitilog_status stats_group_by_known_key(const exam_row *exams, size_t count,
                                        stats_dimension dimension, const stats_key_table *known,
                                        stats_key_groups *groups);
/* The median of count values (sorted in place); NAN when count is 0. */
double stats_median_of(double *values, size_t count);

#endif

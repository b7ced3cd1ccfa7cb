/*
 * hash_table.h - the one hash table of the project, for in-memory lookups:
 * a key of bytes (the table keeps its own copy) to a number and a borrowed
 * pointer. Open addressing with linear probing over FNV-1a (hash.h), at
 * most half full. Without a limit it grows by doubling; with one it is a
 * cache: a new key arriving when the table holds limit entries first
 * empties it, so its memory stays bounded whatever the input.
 *
 * Not synchronised: a table shared by threads is used under its owner's
 * lock. A zeroed hash_table is an empty table without a limit.
 * hash_table_free() frees the copies of the keys and the slots; the
 * pointers stored as values belong to the caller and are never freed.
 */
#ifndef MITILOG_HASH_TABLE_H
#define MITILOG_HASH_TABLE_H

#include <stddef.h>
#include <stdint.h>

#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct hash_entry {
    unsigned char *key; /* the table's copy; NULL: empty slot */
    size_t key_size;
    uint64_t hash;       /* hash_fnv1a of the key */
    uint64_t number;     /* the values */
    const void *pointer; /* borrowed */
} hash_entry;

typedef struct hash_table {
    hash_entry *slots;
    size_t slot_count; /* 0 or a power of two */
    size_t count;      /* entries held */
    size_t limit;      /* 0: none */
} hash_table;

/* An empty table; limit 0: grows without bound. */
void hash_table_init(hash_table *table, size_t limit);
/* Frees what the table holds; the table is then empty, its limit kept. */
void hash_table_free(hash_table *table);
/* The entry of key, or NULL. The entry stays valid until the next
 * hash_table_put() or hash_table_free(). */
const hash_entry *hash_table_find(const hash_table *table, const void *key, size_t key_size);
/* Adds key with its values, or replaces the values of a key already held.
 * MITILOG_ERROR_MEMORY when a copy or the slots cannot be allocated (the
 * table is then unchanged, or emptied when it was a full cache). */
mitilog_status hash_table_put(hash_table *table, const void *key, size_t key_size, uint64_t number,
                              const void *pointer);

#ifdef __cplusplus
}
#endif

#endif

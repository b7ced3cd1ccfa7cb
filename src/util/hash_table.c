/*
 * hash_table.c - open addressing with linear probing (hash_table.h).
 */
#include "util/hash_table.h"

#include <stdlib.h>
#include <string.h>

#include "util/hash.h"

void hash_table_init(hash_table *table, size_t limit)
{
    memset(table, 0, sizeof *table);
    table->limit = limit;
}

/* Frees every key; the slots stay allocated and empty. */
static void hash_table_empty(hash_table *table)
{
    for (size_t i = 0; i < table->slot_count; i++) {
        free(table->slots[i].key);
        memset(&table->slots[i], 0, sizeof table->slots[i]);
    }
    table->count = 0;
}

void hash_table_free(hash_table *table)
{
    hash_table_empty(table);
    free(table->slots);
    table->slots = NULL;
    table->slot_count = 0;
}

/* The slot holding key, or the empty slot where it would go (slot_count
 * is a power of two and at least one slot is empty). */
static size_t hash_table_slot(const hash_entry *slots, size_t slot_count, uint64_t hash,
                              const void *key, size_t key_size)
{
    size_t mask = slot_count - 1;
    size_t slot = (size_t)hash & mask;
    while (slots[slot].key != NULL &&
           !(slots[slot].hash == hash && slots[slot].key_size == key_size &&
             (key_size == 0 || memcmp(slots[slot].key, key, key_size) == 0)))
        slot = (slot + 1) & mask;
    return slot;
}

const hash_entry *hash_table_find(const hash_table *table, const void *key, size_t key_size)
{
    if (table->count == 0)
        return NULL;
    size_t slot =
        hash_table_slot(table->slots, table->slot_count, hash_fnv1a(key, key_size), key, key_size);
    return table->slots[slot].key != NULL ? &table->slots[slot] : NULL;
}

/* Twice the slots, the entries moved (their keys are not copied). */
static mitilog_status hash_table_grow(hash_table *table)
{
    size_t slot_count = table->slot_count > 0 ? table->slot_count * 2 : 16;
    hash_entry *slots = calloc(slot_count, sizeof *slots);
    if (slots == NULL)
        return MITILOG_ERROR_MEMORY;
    for (size_t i = 0; i < table->slot_count; i++) {
        const hash_entry *entry = &table->slots[i];
        if (entry->key != NULL)
            slots[hash_table_slot(slots, slot_count, entry->hash, entry->key, entry->key_size)] =
                *entry;
    }
    free(table->slots);
    table->slots = slots;
    table->slot_count = slot_count;
    return MITILOG_OK;
}

mitilog_status hash_table_put(hash_table *table, const void *key, size_t key_size, uint64_t number,
                              const void *pointer)
{
    uint64_t hash = hash_fnv1a(key, key_size);
    if (table->count > 0) {
        hash_entry *held =
            &table->slots[hash_table_slot(table->slots, table->slot_count, hash, key, key_size)];
        if (held->key != NULL) {
            held->number = number;
            held->pointer = pointer;
            return MITILOG_OK;
        }
    }
    if (table->limit > 0 && table->count >= table->limit)
        hash_table_empty(table);
    /* At most half full: probes stay short and one slot is always empty. */
    if (2 * (table->count + 1) > table->slot_count && hash_table_grow(table) != MITILOG_OK)
        return MITILOG_ERROR_MEMORY;
    unsigned char *copy = malloc(key_size + 1);
    if (copy == NULL)
        return MITILOG_ERROR_MEMORY;
    if (key_size > 0)
        memcpy(copy, key, key_size);
    copy[key_size] = '\0';
    size_t slot = hash_table_slot(table->slots, table->slot_count, hash, key, key_size);
    table->slots[slot] = (hash_entry){copy, key_size, hash, number, pointer};
    table->count++;
    return MITILOG_OK;
}

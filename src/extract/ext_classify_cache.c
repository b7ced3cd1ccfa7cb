/*
 * ext_classify_cache.c - the exam types already decided, by the field
 * values they were decided on (ext_classify.h). POSIX regular expressions
 * cost more per image than reading the image's header, and a study's
 * images share their Study Description, Protocol Name and so on, so the
 * answer is kept in a hash table (util/hash_table.h) of at most
 * EXT_CLASSIFY_CACHE_ENTRIES entries keyed by the field values,
 * length-prefixed, under one mutex (the network threads classify at once).
 * When it is full it starts again empty.
 */
#include "extract/ext_classify.h"

#include <pthread.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "util/hash_table.h"

enum { EXT_CLASSIFY_CACHE_ENTRIES = 512, EXT_CLASSIFY_KEY_MAX = 4096 };

/* Each entry: number = the exam type's index (-1 as int64: none matched),
 * pointer = the static field name of the match, or NULL. */
struct ext_classify_cache {
    pthread_mutex_t lock;
    hash_table answers; /* under lock */
};

struct ext_classify_cache *ext_classify_cache_create(void)
{
    struct ext_classify_cache *cache = calloc(1, sizeof *cache);
    if (cache != NULL && pthread_mutex_init(&cache->lock, NULL) != 0) {
        free(cache);
        cache = NULL;
    }
    if (cache != NULL)
        hash_table_init(&cache->answers, EXT_CLASSIFY_CACHE_ENTRIES);
    return cache;
}

void ext_classify_cache_free(struct ext_classify_cache *cache)
{
    if (cache == NULL)
        return;
    hash_table_free(&cache->answers);
    pthread_mutex_destroy(&cache->lock);
    free(cache);
}

/* The fields, each as its length, a colon and its bytes ("-:" for an
 * absent one, so NULL and "" differ and no value can pose as two), into
 * key. Returns the key's length, or 0 when the values are too long to be
 * cached. */
static size_t ext_classify_key(const char *const *fields, char key[EXT_CLASSIFY_KEY_MAX])
{
    size_t length = 0;
    for (int f = 0; f < EXT_FIELD_COUNT; f++) {
        size_t size = fields[f] != NULL ? strlen(fields[f]) : 0;
        char prefix[32];
        int written = fields[f] != NULL ? snprintf(prefix, sizeof prefix, "%zu:", size)
                                        : snprintf(prefix, sizeof prefix, "-:");
        if (written < 0 || length + (size_t)written + size + 1 > EXT_CLASSIFY_KEY_MAX)
            return 0;
        memcpy(key + length, prefix, (size_t)written);
        length += (size_t)written;
        if (size > 0)
            memcpy(key + length, fields[f], size);
        length += size;
    }
    key[length] = '\0';
    return length;
}

int ext_classify_cache_get(struct ext_classify_cache *cache, const char *const *fields,
                           long *type_index, const char **source)
{
    char key[EXT_CLASSIFY_KEY_MAX];
    size_t length = ext_classify_key(fields, key);
    if (length == 0)
        return 0;
    int found = 0;
    pthread_mutex_lock(&cache->lock);
    const hash_entry *entry = hash_table_find(&cache->answers, key, length);
    if (entry != NULL) {
        *type_index = (long)(int64_t)entry->number;
        *source = entry->pointer;
        found = 1;
    }
    pthread_mutex_unlock(&cache->lock);
    return found;
}

void ext_classify_cache_put(struct ext_classify_cache *cache, const char *const *fields,
                            long type_index, const char *source)
{
    char key[EXT_CLASSIFY_KEY_MAX];
    size_t length = ext_classify_key(fields, key);
    if (length == 0)
        return;
    pthread_mutex_lock(&cache->lock);
    /* Out of memory: not cached; the next call decides again. */
    (void)hash_table_put(&cache->answers, key, length, (uint64_t)(int64_t)type_index, source);
    pthread_mutex_unlock(&cache->lock);
}

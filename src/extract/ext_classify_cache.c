/*
 * ext_classify_cache.c - the exam types already decided, by the field
 * values they were decided on (ext_classify.h). POSIX regular expressions
 * cost more per image than reading the image's header, and a study's
 * images share their Study Description, Protocol Name and so on, so the
 * answer is kept: a direct-mapped table of EXT_CLASSIFY_CACHE_SLOTS
 * entries keyed by the field values, length-prefixed, under one mutex (the network
 * threads classify at once). A collision replaces the older entry.
 */
#include "extract/ext_classify.h"

#include <pthread.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "util/hash.h"

enum { EXT_CLASSIFY_CACHE_SLOTS = 512, EXT_CLASSIFY_KEY_MAX = 4096 };

typedef struct ext_classify_slot {
    char *key;                  /* NULL: empty */
    uint64_t hash;
    long type_index;            /* -1: no exam type matched */
    const char *source;         /* static field name, or NULL */
} ext_classify_slot;

struct ext_classify_cache {
    pthread_mutex_t lock;
    ext_classify_slot slots[EXT_CLASSIFY_CACHE_SLOTS];
};

struct ext_classify_cache *ext_classify_cache_create(void)
{
    struct ext_classify_cache *cache = calloc(1, sizeof *cache);
    if (cache != NULL && pthread_mutex_init(&cache->lock, NULL) != 0) {
        free(cache);
        cache = NULL;
    }
    return cache;
}

void ext_classify_cache_free(struct ext_classify_cache *cache)
{
    if (cache == NULL)
        return;
    for (size_t i = 0; i < EXT_CLASSIFY_CACHE_SLOTS; i++)
        free(cache->slots[i].key);
    pthread_mutex_destroy(&cache->lock);
    free(cache);
}

/* The fields, each as its length, a colon and its bytes ("-:" for an
 * absent one, so NULL and "" differ and no value can pose as two), into
 * key, and the key's FNV-1a hash. Returns the key's length, or 0 when the
 * values are too long to be cached. */
static size_t ext_classify_key(const char *const *fields, char key[EXT_CLASSIFY_KEY_MAX],
                               uint64_t *hash)
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
    *hash = hash_fnv1a(key, length);
    return length;
}

int ext_classify_cache_get(struct ext_classify_cache *cache, const char *const *fields,
                           long *type_index, const char **source)
{
    char key[EXT_CLASSIFY_KEY_MAX];
    uint64_t hash;
    if (ext_classify_key(fields, key, &hash) == 0)
        return 0;
    int found = 0;
    pthread_mutex_lock(&cache->lock);
    const ext_classify_slot *slot = &cache->slots[hash % EXT_CLASSIFY_CACHE_SLOTS];
    if (slot->key != NULL && slot->hash == hash && strcmp(slot->key, key) == 0) {
        *type_index = slot->type_index;
        *source = slot->source;
        found = 1;
    }
    pthread_mutex_unlock(&cache->lock);
    return found;
}

void ext_classify_cache_put(struct ext_classify_cache *cache, const char *const *fields,
                            long type_index, const char *source)
{
    char key[EXT_CLASSIFY_KEY_MAX];
    uint64_t hash;
    size_t length = ext_classify_key(fields, key, &hash);
    char *copy = length > 0 ? malloc(length + 1) : NULL;
    if (copy == NULL)
        return; /* not cached: the next call decides again */
    memcpy(copy, key, length + 1);
    pthread_mutex_lock(&cache->lock);
    ext_classify_slot *slot = &cache->slots[hash % EXT_CLASSIFY_CACHE_SLOTS];
    char *old = slot->key;
    *slot = (ext_classify_slot){copy, hash, type_index, source};
    pthread_mutex_unlock(&cache->lock);
    free(old);
}

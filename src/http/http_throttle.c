/*
 * http_throttle.c - failed logins counted per client address and per user
 * name, with a growing wait once a few have failed (http_throttle.h).
 */
#include "http/http_throttle.h"

#include <stdlib.h>
#include <string.h>

enum {
    HTTP_THROTTLE_ENTRIES = 4096, /* addresses and names remembered */
    HTTP_THROTTLE_KEY_MAX = 80,
    HTTP_THROTTLE_FIRST_WAITING_FAILURE = 5,
    HTTP_THROTTLE_WAIT_MAX_S = 300,
    HTTP_THROTTLE_FORGET_S = 3600
};

typedef struct http_throttle_entry {
    char key[HTTP_THROTTLE_KEY_MAX + 3]; /* "a:" or "u:" and the value */
    unsigned failures;
    double last_failure;
    double locked_until;
} http_throttle_entry;

struct http_throttle {
    pthread_mutex_t lock;
    http_throttle_entry *entries;
    size_t count;
};

mitilog_status http_throttle_create(http_throttle **out, mitilog_error *error)
{
    http_throttle *throttle = calloc(1, sizeof *throttle);
    if (throttle != NULL)
        throttle->entries = calloc(HTTP_THROTTLE_ENTRIES, sizeof *throttle->entries);
    if (throttle == NULL || throttle->entries == NULL) {
        free(throttle);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory starting HTTP");
    }
    pthread_mutex_init(&throttle->lock, NULL);
    *out = throttle;
    return MITILOG_OK;
}

void http_throttle_free(http_throttle *throttle)
{
    if (throttle == NULL)
        return;
    pthread_mutex_destroy(&throttle->lock);
    free(throttle->entries);
    free(throttle);
}

static void http_throttle_key(char kind, const char *value, char *key)
{
    key[0] = kind;
    key[1] = ':';
    size_t length = strlen(value);
    if (length > HTTP_THROTTLE_KEY_MAX)
        length = HTTP_THROTTLE_KEY_MAX; /* longer names share an entry */
    memcpy(key + 2, value, length);
    key[2 + length] = '\0';
}

/* The entry of key, or NULL. Under lock. */
static http_throttle_entry *http_throttle_find(http_throttle *throttle, const char *key)
{
    for (size_t i = 0; i < throttle->count; i++) {
        if (strcmp(throttle->entries[i].key, key) == 0)
            return &throttle->entries[i];
    }
    return NULL;
}

/* The entry of key, made when missing: a free slot, else an entry
 * forgotten by now, else the one whose last failure is oldest. */
static http_throttle_entry *http_throttle_entry_for(http_throttle *throttle, const char *key,
                                                    double now)
{
    http_throttle_entry *entry = http_throttle_find(throttle, key);
    if (entry != NULL)
        return entry;
    if (throttle->count < HTTP_THROTTLE_ENTRIES) {
        entry = &throttle->entries[throttle->count++];
    } else {
        entry = &throttle->entries[0];
        for (size_t i = 0; i < throttle->count; i++) {
            http_throttle_entry *candidate = &throttle->entries[i];
            if (now - candidate->last_failure > HTTP_THROTTLE_FORGET_S &&
                now >= candidate->locked_until) {
                entry = candidate;
                break;
            }
            if (candidate->last_failure < entry->last_failure)
                entry = candidate;
        }
    }
    memset(entry, 0, sizeof *entry);
    strcpy(entry->key, key);
    return entry;
}

/* Seconds to wait for one entry. Under lock. */
static double http_throttle_entry_wait(const http_throttle_entry *entry, double now)
{
    if (entry == NULL || now >= entry->locked_until)
        return 0;
    return entry->locked_until - now;
}

unsigned http_throttle_wait(http_throttle *throttle, const char *address, const char *user,
                            double now)
{
    char key[HTTP_THROTTLE_KEY_MAX + 3];
    pthread_mutex_lock(&throttle->lock);
    http_throttle_key('a', address, key);
    double wait = http_throttle_entry_wait(http_throttle_find(throttle, key), now);
    if (user != NULL) {
        http_throttle_key('u', user, key);
        double user_wait = http_throttle_entry_wait(http_throttle_find(throttle, key), now);
        if (user_wait > wait)
            wait = user_wait;
    }
    pthread_mutex_unlock(&throttle->lock);
    unsigned seconds = (unsigned)wait;
    return seconds < wait ? seconds + 1 : seconds;
}

/* One more failure on entry: from the fifth on, locked for 1, 2, 4 ...
 * up to HTTP_THROTTLE_WAIT_MAX_S seconds. A failure counts only if the
 * entry has not been forgotten. */
static unsigned http_throttle_count(http_throttle_entry *entry, double now)
{
    if (entry->failures > 0 && now - entry->last_failure > HTTP_THROTTLE_FORGET_S)
        entry->failures = 0;
    entry->failures++;
    entry->last_failure = now;
    if (entry->failures >= HTTP_THROTTLE_FIRST_WAITING_FAILURE) {
        unsigned steps = entry->failures - HTTP_THROTTLE_FIRST_WAITING_FAILURE;
        double wait = steps >= 9 ? HTTP_THROTTLE_WAIT_MAX_S : (double)(1u << steps);
        if (wait > HTTP_THROTTLE_WAIT_MAX_S)
            wait = HTTP_THROTTLE_WAIT_MAX_S;
        entry->locked_until = now + wait;
    }
    return entry->failures;
}

void http_throttle_failed(http_throttle *throttle, const char *address, const char *user,
                          double now, unsigned *address_failures, unsigned *user_failures)
{
    char key[HTTP_THROTTLE_KEY_MAX + 3];
    pthread_mutex_lock(&throttle->lock);
    http_throttle_key('a', address, key);
    *address_failures = http_throttle_count(http_throttle_entry_for(throttle, key, now), now);
    *user_failures = 0;
    if (user != NULL) {
        http_throttle_key('u', user, key);
        *user_failures = http_throttle_count(http_throttle_entry_for(throttle, key, now), now);
    }
    pthread_mutex_unlock(&throttle->lock);
}

void http_throttle_succeeded(http_throttle *throttle, const char *address, const char *user)
{
    char key[HTTP_THROTTLE_KEY_MAX + 3];
    pthread_mutex_lock(&throttle->lock);
    http_throttle_key('a', address, key);
    http_throttle_entry *entry = http_throttle_find(throttle, key);
    if (entry != NULL)
        entry->failures = 0;
    http_throttle_key('u', user, key);
    entry = http_throttle_find(throttle, key);
    if (entry != NULL)
        entry->failures = 0;
    pthread_mutex_unlock(&throttle->lock);
}

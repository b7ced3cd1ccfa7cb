/*
 * store_devices.h - the device screen profiles (migration 008;
 * store_devices.c, sql/queries/devices/): the profile text is
 * src/screen's business, the store keeps it with its state.
 *
 * Ownership: strings passed in are borrowed for the call; what is
 * returned is malloc'd, freed as each call says.
 */
#ifndef MITILOG_STORE_DEVICES_H
#define MITILOG_STORE_DEVICES_H

#include <stddef.h>

#include "store/store.h"

#ifdef __cplusplus
extern "C" {
#endif

/* A learned profile is stored 'proposed' with the next version of its key;
 * activating a version retires the key's other active version; retiring a
 * key retires all its versions. */
typedef struct store_screen_profile_new {
    const char *key;
    const char *manufacturer, *model_name, *software_versions; /* or NULL */
    int rows, columns;
    const char *text;             /* screen_profile_to_text() */
    const char *report;           /* what learning found, or NULL */
    const unsigned char *example; /* one learning frame as PGM, or NULL */
    size_t example_size;
} store_screen_profile_new;

/* Stores profile as proposed; *version gets the version it was given. */
mitilog_status store_screen_profile_put(store *store, const store_screen_profile_new *profile,
                                        int *version, mitilog_error *error);
/* Makes version (0: the newest) of key the active one; who confirmed it is
 * kept. MITILOG_ERROR_NOT_FOUND when there is no such profile. */
mitilog_status store_screen_profile_activate(store *store, const char *key, int version,
                                             const char *confirmed_by, mitilog_error *error);
/* Retires every version of key; NOT_FOUND when none was in use. */
mitilog_status store_screen_profile_retire(store *store, const char *key, mitilog_error *error);
/* The text of every active profile: *texts is a malloc'd array of *count
 * malloc'd strings; free each and the array (NULL and 0 when none). */
mitilog_status store_screen_profiles_active(store *store, char ***texts, size_t *count,
                                            mitilog_error *error);
/* One profile of key: version 0 means the active one, else the newest.
 * Every out pointer may be NULL; strings and example are malloc'd (example
 * NULL when none was kept). NOT_FOUND when key has no such profile. */
typedef struct store_screen_profile_row {
    int version;
    char state[16];
    char *text;
    char *report;
    unsigned char *example;
    size_t example_size;
} store_screen_profile_row;
mitilog_status store_screen_profile_get(store *store, const char *key, int version,
                                        store_screen_profile_row *row, mitilog_error *error);
void store_screen_profile_row_free(store_screen_profile_row *row);
/* GET /api/v1/devices: every profile version as a JSON array (malloc'd). */
mitilog_status store_screen_profiles_json(store *store, char **json, mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

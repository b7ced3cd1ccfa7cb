/* Unknown SR coding schemes, logged once per process (ingest_internal.h). */
#include "ingest/ingest_internal.h"

#include <stdlib.h>
#include <string.h>

#include "util/log.h"

void ingest_schemes_note(ingest_schemes *schemes, const char *scheme, const char *sop_instance_uid)
{
    pthread_mutex_lock(&schemes->lock);
    for (size_t i = 0; i < schemes->count; i++) {
        if (strcmp(schemes->seen[i], scheme) == 0) {
            pthread_mutex_unlock(&schemes->lock);
            return;
        }
    }
    char **grown = realloc(schemes->seen, (schemes->count + 1) * sizeof *grown);
    char *copy = strdup(scheme);
    if (grown != NULL)
        schemes->seen = grown;
    if (grown != NULL && copy != NULL)
        schemes->seen[schemes->count++] = copy;
    else
        free(copy);
    pthread_mutex_unlock(&schemes->lock);
    log_warning("SR %s: coding scheme '%s' has no entry in the site's [sr_codes]: its NUM "
                "values are ignored (logged once per scheme)",
                sop_instance_uid, scheme);
}

void ingest_schemes_free(ingest_schemes *schemes)
{
    for (size_t i = 0; i < schemes->count; i++)
        free(schemes->seen[i]);
    free(schemes->seen);
    schemes->seen = NULL;
    schemes->count = 0;
}

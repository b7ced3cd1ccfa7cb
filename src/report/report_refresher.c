/*
 * report_refresher.c - the thread of report_refresher.h.
 */
#include "report/report_refresher.h"

#include <errno.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "report/report.h"
#include "util/log.h"

struct report_refresher {
    store *store;
    unsigned seconds;
    char version[48];
    pthread_t thread;
    pthread_mutex_t lock;
    pthread_cond_t wake;
    int stopping; /* under lock */
};

static void *report_refresher_run(void *argument)
{
    report_refresher *refresher = argument;
    pthread_mutex_lock(&refresher->lock);
    while (!refresher->stopping) {
        struct timespec until;
        clock_gettime(CLOCK_REALTIME, &until);
        until.tv_sec += (time_t)refresher->seconds;
        int waited = 0;
        while (!refresher->stopping && waited != ETIMEDOUT)
            waited = pthread_cond_timedwait(&refresher->wake, &refresher->lock, &until);
        if (refresher->stopping)
            break;
        pthread_mutex_unlock(&refresher->lock);
        size_t remade = 0;
        mitilog_error error = {{0}};
        if (report_snapshots_refresh(refresher->store, refresher->version, &remade, &error) !=
            MITILOG_OK)
            log_warning("kept documents: not refreshed (%s); they are made again when asked for",
                        error.text);
        else if (remade > 0)
            log_info("kept documents: %zu made again after their data changed", remade);
        pthread_mutex_lock(&refresher->lock);
    }
    pthread_mutex_unlock(&refresher->lock);
    return NULL;
}

mitilog_status report_refresher_start(store *st, unsigned seconds, const char *version,
                                      report_refresher **out, mitilog_error *error)
{
    *out = NULL;
    if (st == NULL || seconds == 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "refresher: needs a store and a period in seconds");
    report_refresher *refresher = calloc(1, sizeof *refresher);
    if (refresher == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "refresher: out of memory");
    refresher->store = st;
    refresher->seconds = seconds;
    snprintf(refresher->version, sizeof refresher->version, "%s", version != NULL ? version : "");
    pthread_mutex_init(&refresher->lock, NULL);
    pthread_condattr_t attributes;
    pthread_condattr_init(&attributes);
    pthread_cond_init(&refresher->wake, &attributes);
    pthread_condattr_destroy(&attributes);
    if (pthread_create(&refresher->thread, NULL, report_refresher_run, refresher) != 0) {
        pthread_cond_destroy(&refresher->wake);
        pthread_mutex_destroy(&refresher->lock);
        free(refresher);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "refresher: no thread");
    }
    *out = refresher;
    return MITILOG_OK;
}

void report_refresher_stop(report_refresher *refresher)
{
    if (refresher == NULL)
        return;
    pthread_mutex_lock(&refresher->lock);
    refresher->stopping = 1;
    pthread_cond_signal(&refresher->wake);
    pthread_mutex_unlock(&refresher->lock);
    pthread_join(refresher->thread, NULL);
    pthread_cond_destroy(&refresher->wake);
    pthread_mutex_destroy(&refresher->lock);
    free(refresher);
}

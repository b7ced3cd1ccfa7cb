/*
 * ingest_reading.h - reading the indices drawn in the pixels, off the
 * association's path: a bounded pool of workers over a durable queue
 * (store_readings.h). Not API outside src/ingest and src/cli.
 *
 * An ultrasound image or cine from a device with an active screen profile
 * is queued when its instance row commits (the C-STORE is answered then);
 * a worker decodes its frame(s) (dcm.h), reads them with the device's
 * profile (screen.h), writes the reading, deletes the spool copy and asks
 * for the exam to be rebuilt. Objects that carry every index in their
 * header are read too: the screen is how a header that disagrees with
 * what the operator saw is found (docs/reading.md).
 *
 * Bounds: [reading] queue_objects and queue_megabytes. An object that
 * would go past either is stored at once with its pixel values "not read:
 * reading queue full" (never blocked, never dropped); `mitilog rescore
 * --read-pixels` reads it later when retention kept the object.
 *
 * Ownership: the ingest owns one ingest_reading (ingest.c); strings in
 * the calls are borrowed.
 */
#ifndef MITILOG_INGEST_READING_H
#define MITILOG_INGEST_READING_H

#include <pthread.h>
#include <stddef.h>

#include "config/config.h"
#include "dicom/dcm.h"
#include "ingest/ingest_internal.h"
#include "screen/screen.h"
#include "store/store.h"
#include "util/hash_table.h"

typedef struct ingest_reading_item {
    long long instance_id;
    char *sop_instance_uid;
    char *study_instance_uid;
    char *path;
    int owned;
    long long bytes;
    struct ingest_reading_item *next;
} ingest_reading_item;

enum { INGEST_READING_FOLDER_SIZE = 3072 };

typedef struct ingest_reading {
    store *store;
    ingest_exams *exams;
    char spool[INGEST_READING_FOLDER_SIZE]; /* data_directory/reading */
    unsigned cine_frames;
    size_t limit_objects;
    long long limit_bytes;

    pthread_mutex_t lock;
    pthread_cond_t changed;           /* an item queued, or stopping      */
    pthread_cond_t idle;              /* an item finished                 */
    ingest_reading_item *head, *tail; /* waiting, oldest first            */
    size_t held_objects;              /* waiting + being read + reserved  */
    long long held_bytes;
    unsigned busy; /* workers reading one now          */
    int stopping;
    unsigned long read_count, not_read_count, full_count;
    size_t waiting;   /* items in head..tail                 */
    metrics *metrics; /* set at start; NULL: nothing reported */

    pthread_rwlock_t profiles_lock; /* profiles: read by workers and
                                       * receivers, replaced on reload   */
    screen_profile **profiles;
    size_t profile_count;
    double profiles_loaded_at; /* ingest_clock_now() */

    hash_table refusals_warned; /* profile key -> ingest_clock_now()
                                       * second of its last refusal warning
                                       * (under lock): one a profile an hour */

    pthread_t *threads;
    unsigned thread_count;
    int started;
} ingest_reading;

/* Creates the spool folder, loads the active profiles, takes back the
 * queue left by an earlier run (and deletes spool files no queue row
 * names), starts the workers. metrics: borrowed, NULL: nothing reported. */
mitilog_status ingest_reading_start(ingest_reading *reading, const config *config, store *store,
                                    ingest_exams *exams, metrics *metrics, mitilog_error *error);
/* Stops the workers after the object each is reading; what is still
 * queued stays in the database for the next start. */
void ingest_reading_stop(ingest_reading *reading);
/* Waits until nothing is queued or being read. */
void ingest_reading_flush(ingest_reading *reading);

/* 1 when the object (its facts) should be read: an ultrasound image or
 * cine whose device matches an active profile. */
int ingest_reading_wants(ingest_reading *reading, const dcm_facts *facts,
                         int is_ultrasound_capture);

/* Reserves room for an object of bytes; 0 when the queue is full (the
 * reason is then written to reason). */
int ingest_reading_reserve(ingest_reading *reading, long long bytes, char *reason,
                           size_t reason_size);
/* Gives a reservation back (the instance did not commit). */
void ingest_reading_release(ingest_reading *reading, long long bytes);
/* Hands a committed queue row to the workers (uses the reservation). */
void ingest_reading_push(ingest_reading *reading, long long instance_id,
                         const char *sop_instance_uid, const char *study_instance_uid,
                         const char *path, int owned, long long bytes);

/* A new spool file name under the spool folder (created empty, mode
 * 0640) into path; -1 with the reason in error when it cannot be. */
mitilog_status ingest_reading_spool_file(ingest_reading *reading, char *path, size_t size,
                                         mitilog_error *error);

#endif

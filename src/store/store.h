/*
 * store.h - the SQLite store: schema migrations, writing exposure records,
 * and the read queries the HTTP API serves.
 *
 * Owns the database connections. One writer connection serialises all
 * writes (any thread may call store_put_*; calls block until their
 * transaction has committed, so a caller may acknowledge after return).
 * A separate read connection serves queries (WAL mode: reads never wait
 * for writes). SQL text lives in sql/ and is compiled in; only prepared
 * statements with bound parameters are used.
 *
 * Ownership: store_open() gives a store freed by store_close(). JSON
 * strings returned by the query calls are malloc'ed; the caller frees them
 * with free().
 */
#ifndef MITILOG_STORE_H
#define MITILOG_STORE_H

#include <stddef.h>

#include "extract/ext.h"
#include "extract/ext_exam.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct store store;

/* Opens (creating if needed) the database at path, enables WAL, applies
 * the migrations in sql/migrations in order and records the schema version
 * in PRAGMA user_version. busy_timeout_ms bounds waits on a locked file. */
mitilog_status store_open(const char *path, int busy_timeout_ms, store **out, mitilog_error *error);
/* Finishes pending writes, checkpoints the WAL and closes. NULL is fine. */
void store_close(store *store);

/* How far a commit is durable before store_put_* returns (and so before
 * a C-STORE is answered). POWER_LOSS (the default after store_open):
 * every commit syncs the WAL. PROCESS: a commit survives the process being
 * killed but not a power loss (the WAL is synced at checkpoints). */
typedef enum store_durability {
    STORE_DURABILITY_POWER_LOSS = 0,
    STORE_DURABILITY_PROCESS
} store_durability;

mitilog_status store_set_durability(store *store, store_durability durability,
                                    mitilog_error *error);

/* The site this store's writes record on every instance and rejection
 * ([receiver] site; exam.h says what a site name is); "main" until set.
 * Call before the first write. MITILOG_ERROR_CONFIG when not a site name. */
mitilog_status store_set_site(store *store, const char *site, mitilog_error *error);

/* The sites a read is limited to: count 0 (or a NULL pointer where one is
 * taken) reads every site; a name that no row holds matches nothing.
 * Names are borrowed for the call. */
typedef struct store_sites {
    size_t count; /* at most EXAM_SITES_MAX */
    const char *names[EXAM_SITES_MAX];
} store_sites;

/* Schema version after migration (PRAGMA user_version). */
int store_schema_version(store *store);

typedef enum store_put_outcome {
    STORE_PUT_INSERTED = 0,
    STORE_PUT_REPLACED /* same SOP Instance UID was stored before */
} store_put_outcome;

/* Bytes borrowed for the duration of a call. */
typedef struct store_bytes {
    const void *data;
    size_t size;
} store_bytes;

/* Writes the instance row, its indices and, when header is not NULL, its
 * header copy (the Part 10 bytes of dcm_object_header_bytes) in one
 * transaction; returns after the commit. Re-sending a SOP Instance UID
 * replaces its row and its copy (a re-send without a header removes the
 * older copy). MITILOG_ERROR_DATABASE when the database cannot be written
 * (locked, read-only, full): nothing of the record is kept. */
mitilog_status store_put_instance(store *store, const ext_record *record, const store_bytes *header,
                                  store_put_outcome *outcome, mitilog_error *error);

/* The header copy of an instance, malloc'd into *bytes (the caller frees
 * it); *bytes stays NULL when the instance or its copy is not stored. */
mitilog_status store_get_header(store *store, const char *sop_instance_uid, unsigned char **bytes,
                                size_t *size, mitilog_error *error);

/* A rejected object: the received bytes were moved to quarantine_path. */
typedef struct store_rejection {
    const char *received_at;      /* ISO 8601 UTC */
    const char *calling_ae_title; /* "" for imports */
    const char *peer_address;     /* "" for imports */
    const char *sop_class_uid;    /* as announced, may be "" */
    const char *sop_instance_uid; /* as announced, may be "" */
    const char *source_path;      /* imported path, or "" */
    const char *quarantine_path;  /* "" when the bytes were not kept */
    const char *reason;
} store_rejection;

mitilog_status store_put_rejection(store *store, const store_rejection *rejection,
                                   mitilog_error *error);

/* An exam to write: the record built by ext_exam_build() from the
 * instances it was built from (their strings are borrowed). */
typedef struct store_exam {
    const char *study_instance_uid;
    const ext_exam *exam;
    const ext_exam_instance *instances;
    size_t instance_count;
} store_exam;

/* Writes (replaces) the study's exam row, timeline and per-mode maxima in
 * one transaction; returns after the commit. */
mitilog_status store_put_exam(store *store, const store_exam *exam, mitilog_error *error);

/* The study's instances as plain structs for ext_exam_build(), in
 * acquisition order; *instances is malloc'ed (NULL with count 0 when the
 * study has none). Free with store_study_free(). */
mitilog_status store_load_study(store *store, const char *study_instance_uid,
                                ext_exam_instance **instances, size_t *count, mitilog_error *error);
void store_study_free(ext_exam_instance *instances, size_t count);

/* JSON object of one exam with its instances and timeline;
 * MITILOG_ERROR_NOT_FOUND when no instance has that Study Instance UID. */
mitilog_status store_study_json(store *store, const char *study_instance_uid, char **json,
                                mitilog_error *error);

/* Read side. Filters: NULL or "" means "no filter". */
typedef struct store_instance_filter {
    const char *study_instance_uid;
    const char *since; /* received_at >= since (ISO 8601) */
    long limit;        /* <= 0: default 1000 */
} store_instance_filter;

/* JSON array of instance objects (keys as documented in docs/api.md). */
mitilog_status store_instances_json(store *store, const store_instance_filter *filter, char **json,
                                    mitilog_error *error);

/* JSON array, one object per study with acquisitions between from and to
 * (dates "YYYY-MM-DD", inclusive; NULL = open). */
mitilog_status store_studies_json(store *store, const char *from, const char *to,
                                  const store_sites *sites, char **json, mitilog_error *error);

/* JSON object: database status, schema version and counts. */
mitilog_status store_health_json(store *store, char **json, mitilog_error *error);

/* ---- ALARA policy and findings (store_findings.c, store_findings_read.c).
 * The store knows no rules: callers (src/ingest, src/cli) pass a policy
 * and its findings as the exam vocabulary's types (exam/exam.h); every
 * string is borrowed for the call. */

typedef struct store_policy {
    const char *version; /* SHA-256 hex of the normalised text */
    const char *name;
    const char *normalised_text;
    double closed_after_idle_minutes, gap_cap_seconds;
    const exam_rule_info *rules;
    size_t rule_count;
    const exam_limits *limits; /* per group and age group, for the */
    size_t limit_count;        /* dashboard (/api/v1/policy) */
} store_policy;

/* Writes (or refreshes) the policy row with its rules described as JSON
 * (written by json/json.h) and makes it this store's active
 * policy: the one GET /api/v1/policy serves and study details use. */
mitilog_status store_register_policy(store *store, const store_policy *policy,
                                     mitilog_error *error);
/* Copies the active version ("" when none) into out. */
void store_active_policy_version(store *store, char out[65]);

/* One evaluation: of an exam (study_instance_uid set) or of a
 * device-level rule over a period (study_instance_uid NULL, rule_id and
 * period set). Written in ONE transaction: policy row ensured, this
 * version's findings of the exam (or rule and period) deleted, other
 * versions' marked superseded, the new findings inserted, and for an
 * exam its exam_context and exam_measurements rows upserted. An
 * evaluation whose content hash equals the stored one (and that leaves
 * nothing to supersede) writes nothing: re-evaluating is idempotent. */
typedef struct store_evaluation {
    /* The exam record this evaluation was made from, written first in
     * the same transaction (one commit per rebuilt exam instead of two);
     * NULL: only the evaluation. */
    const store_exam *exam;
    const char *policy_version, *policy_name, *normalised_text;
    const char *study_instance_uid;
    const char *rule_id, *period; /* device-level */
    /* exam context */
    const char *exam_type, *room, *preset, *shift, *transducer, *age_group;
    const char *last_received_at;
    int closed;
    const exam_finding *findings;
    size_t finding_count;
    const exam_measurements *measurements; /* of an exam; NULL: device-level */
} store_evaluation;

typedef struct store_evaluation_counts {
    unsigned long evaluations, unchanged, written, superseded;
} store_evaluation_counts;

/* counts (may be NULL) is added to. */
mitilog_status store_put_evaluation(store *store, const store_evaluation *evaluation,
                                    store_evaluation_counts *counts, mitilog_error *error);

/* A study's context for an evaluation (malloc'ed strings, NULL when
 * absent; store_study_context_free). found = 0: no instance. */
typedef struct store_study_context {
    int found;
    char *room, *preset, *shift, *transducer, *age_group, *last_received_at;
    double idle_seconds; /* now - last receipt */
} store_study_context;
mitilog_status store_load_study_context(store *store, const char *study_instance_uid,
                                        double now_unix_seconds, store_study_context *context,
                                        mitilog_error *error);
void store_study_context_free(store_study_context *context);

/* Lists of text (malloc'ed array of malloc'ed strings; store_texts_free).
 * STORE_LIST_EXAMS_IN_PERIOD: study UIDs by first acquisition date in
 * [a, b] (dates, NULL open). STORE_LIST_DUE_CLOSING: open exams idle for
 * at least b seconds at a (Unix seconds, both as decimal text).
 * STORE_LIST_STUDY_DAYS: days of study a. STORE_LIST_DAYS: days with
 * ultrasound instances in [a, b]. */
typedef enum store_list_kind {
    STORE_LIST_EXAMS_IN_PERIOD = 0,
    STORE_LIST_DUE_CLOSING,
    STORE_LIST_STUDY_DAYS,
    STORE_LIST_DAYS
} store_list_kind;
mitilog_status store_list(store *store, store_list_kind kind, const char *a, const char *b,
                          char ***texts, size_t *count, mitilog_error *error);
void store_texts_free(char **texts, size_t count);

/* Ultrasound instances of one day for rule output_not_reported; free
 * with store_day_instances_free(). */
mitilog_status store_load_day_instances(store *store, const char *day,
                                        exam_device_instance **instances, size_t *count,
                                        mitilog_error *error);
void store_day_instances_free(exam_device_instance *instances, size_t count);

/* GET /api/v1/findings. Filters: NULL or "" = none. */
typedef struct store_finding_filter {
    const char *from, *to; /* dates YYYY-MM-DD */
    const char *severity, *rule, *room, *preset, *shift;
    int include_superseded;
    long limit;               /* <= 0: default 1000 */
    const store_sites *sites; /* NULL: every site */
} store_finding_filter;
mitilog_status store_findings_json(store *store, const store_finding_filter *filter, char **json,
                                   mitilog_error *error);
/* GET /api/v1/policy: the active policy; MITILOG_ERROR_NOT_FOUND if none. */
mitilog_status store_policy_json(store *store, char **json, mitilog_error *error);

/* ---- Reviews (store_reviews.c, migration 012) ---- */

/* One review act: a finding (finding_id > 0) or a whole exam
 * (finding_id 0, study_instance_uid set) marked with an outcome
 * ("acceptable", "discussed_with_operator", "referred_to_physics",
 * "preset_to_change" or "reopened") and a comment, by reviewer in role.
 * Strings are borrowed for the call. The history is append-only. */
typedef struct store_review {
    const char *study_instance_uid; /* NULL with a finding: its own */
    long long finding_id;           /* 0: the whole exam            */
    const char *outcome, *comment, *reviewer, *role;
} store_review;
/* Appends the review in its own commit; MITILOG_ERROR_NOT_FOUND when the
 * finding or exam is unknown (or the finding is of another study). */
mitilog_status store_put_review(store *store, const store_review *review, mitilog_error *error);
/* The review history, oldest first: JSON array, or CSV text with a
 * header line when csv is set. study, from, to (YYYY-MM-DD, on the day
 * recorded): NULL = any. *out is malloc'ed, freed by the caller. */
mitilog_status store_reviews_text(store *store, const char *study, const char *from, const char *to,
                                  int csv, char **out, mitilog_error *error);
/* GET /api/v1/worklist: the week starting on monday (YYYY-MM-DD);
 * is_default says it is the default week (report_default_week, the one
 * rule of src/report/report.h). queries/reviews/review_worklist.sql says
 * how it ranks. *json is malloc'ed, freed by the caller. */
mitilog_status store_worklist_json(store *store, const char *monday, int is_default,
                                   const store_sites *sites, char **json, mitilog_error *error);
/* GET /api/v1/operators: per-operator exams, median governing index and
 * findings of a period (from, to YYYY-MM-DD; NULL = open), when the site
 * records operators (queries/reviews/review_operators.sql). */
/* What a baseline [from_day, before_day) really holds: first and last
 * exam day (out, "" when none; 11 bytes each), weeks with exams and
 * exams (queries/reports/baseline_span.sql). */
typedef struct store_span {
    char first_day[11], last_day[11];
    long weeks, exams;
} store_span;
mitilog_status store_load_baseline_span(store *store, const char *from_day, const char *before_day,
                                        const store_sites *sites, store_span *span,
                                        mitilog_error *error);
mitilog_status store_operators_json(store *store, const char *from, const char *to,
                                    const store_sites *sites, char **json, mitilog_error *error);

/* ---- Statistics reads (store_read_stats.c) ---- */

/* The exams of a period are exam_row (exam/exam.h), read by
 * sql/queries/reports/stats_exam_rows.sql and its shorter variants; their strings
 * belong to the store_exam_list that holds them (study_instance_uid is
 * always read). */

/* The text columns store_load_exam_rows copies besides exam_type (the
 * others are left NULL): copying only what a report uses keeps a long
 * period cheap. */
enum {
    STORE_EXAM_IDENTITY = 1 << 0, /* day, first_acquired_at */
    STORE_EXAM_DETAIL = 1 << 1,   /* exam_type_label, governing_index, study_description */
    STORE_EXAM_ROOM = 1 << 2,
    STORE_EXAM_PRESET = 1 << 3,
    STORE_EXAM_SHIFT = 1 << 4,
    STORE_EXAM_TRANSDUCER = 1 << 5,
    /* day only; with ROOM and PRESET and no other bit, the short rows of
     * sql/queries/reports/stats_exam_series.sql: exam type, day, room, preset,
     * governing maximum, capture and indexed counts (drift) */
    STORE_EXAM_DAY = 1 << 6,
    STORE_EXAM_SITE = 1 << 7, /* the exam's site (of its first instance) */
    STORE_EXAM_ALL = (1 << 8) - 1
};

/* Rows and the memory of their strings; free with store_exam_list_free()
 * (a zeroed list is empty). */
typedef struct store_exam_text_block store_exam_text_block;
typedef struct store_exam_list {
    exam_row *rows;
    size_t count;
    store_exam_text_block *texts;
} store_exam_list;

/* Exams whose day is between from_day and to_day (YYYY-MM-DD, inclusive),
 * ordered by Study Instance UID; columns: STORE_EXAM_* bits. */
mitilog_status store_load_exam_rows(store *store, const char *from_day, const char *to_day,
                                    const store_sites *sites, unsigned columns,
                                    store_exam_list *list, mitilog_error *error);
/* Only exam_type and the governing maximum (has_governing,
 * max_governing) of the exams whose day is at or after from_day and
 * before before_day, in no particular order (sql/queries/reports/
 * stats_exam_governing.sql): a baseline. */
mitilog_status store_load_exam_governing(store *store, const char *from_day, const char *before_day,
                                         const store_sites *sites, store_exam_list *list,
                                         mitilog_error *error);
void store_exam_list_free(store_exam_list *list);

/* Findings (not superseded) per exam and rule for the same period,
 * ordered by Study Instance UID, then rule: counts[i] (the vocabulary's
 * rule counts, which the period's exam rows point into) is of exam
 * study_instance_uids[i]. Every string is owned here; free with
 * store_finding_counts_free() (a zeroed value is empty). */
typedef struct store_finding_counts {
    char **study_instance_uids;
    exam_rule_count *counts;
    size_t count;
} store_finding_counts;

mitilog_status store_load_finding_counts(store *store, const char *from_day, const char *to_day,
                                         const store_sites *sites, store_finding_counts *counts,
                                         mitilog_error *error);
void store_finding_counts_free(store_finding_counts *counts);

/* What a report states: the current policy (NULL when none was recorded),
 * the versions of the period's findings ("v1,v2" or NULL) and the first
 * and last exam day held (NULL when no exam). Free with
 * store_period_info_free(). */
typedef struct store_period_info {
    char *policy_version;
    char *policy_name;
    char *finding_policy_versions;
    char *first_day, *last_day;
} store_period_info;

mitilog_status store_load_period_info(store *store, const char *from_day, const char *to_day,
                                      const store_sites *sites, store_period_info *info,
                                      mitilog_error *error);
void store_period_info_free(store_period_info *info);

/* The first and last exam day held (first acquisition; NULL when no
 * exam), malloc'ed; the caller frees both. */
mitilog_status store_load_day_range(store *store, const store_sites *sites, char **first_day,
                                    char **last_day, mitilog_error *error);

/* JSON object for GET /api/v1/ingest (docs/api.md): objects per hour over
 * window_hours, rejections and quarantine, devices (silent after
 * silent_hours), transducers not reporting output in the last days. */
mitilog_status store_ingest_json(store *store, int window_hours, int silent_hours, int days,
                                 const store_sites *sites, char **json, mitilog_error *error);

/* ---- Device screen profiles (store_screen_profiles.c; the profile text
 * is src/screen's business, the store keeps it with its state).
 * A learned profile is stored 'proposed' with the next version of its key;
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

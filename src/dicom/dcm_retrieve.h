/*
 * dcm_retrieve.h - the Query/Retrieve SCU side of the DCMTK shim: one
 * association to a PACS (DCMTK's DcmSCU) that asks with C-FIND (Study
 * Root) and fetches with C-GET (objects arrive as C-STORE sub-operations
 * on the same association and are handed to a callback) or C-MOVE (the
 * PACS sends them to another AE over associations of its own).
 *
 * Plain C, like dcm.h: no C++ type crosses it, every exception is caught
 * inside. Ownership: dcm_association_open() gives an association that
 * dcm_association_close() releases and frees. Match lists are malloc'd
 * and freed with their _free function. Strings in the settings are
 * borrowed for the call. One association is used by one thread at a time.
 */
#ifndef MITILOG_DCM_RETRIEVE_H
#define MITILOG_DCM_RETRIEVE_H

#include <stddef.h>
#include <stdint.h>

#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum dcm_retrieve_method { DCM_RETRIEVE_GET = 0, DCM_RETRIEVE_MOVE } dcm_retrieve_method;

typedef struct dcm_peer {
    const char *calling_ae_title; /* ours */
    const char *called_ae_title;  /* the PACS's */
    const char *host;
    unsigned port;
    unsigned connect_timeout_seconds; /* TCP connection and association */
    unsigned dimse_timeout_seconds;   /* between messages */
    uint32_t max_pdu;                 /* largest PDU we receive */
} dcm_peer;

/* One object received as a C-STORE sub-operation of a C-GET. The object
 * has been written, with a meta header and in the transfer syntax it
 * arrived in, to a memory file that spool_path names ("/proc/self/fd/N"),
 * valid during the call only. */
typedef struct dcm_retrieved {
    const char *spool_path;
    const char *sop_class_uid;
    const char *sop_instance_uid;
} dcm_retrieved;

/* Returns the C-STORE status to answer with (PS3.4 B.2.3: 0x0000
 * success, 0xA7xx out of resources, 0xCxxx cannot understand). Called on
 * the thread that called dcm_association_get(). */
typedef uint16_t (*dcm_retrieved_handler)(void *context, const dcm_retrieved *object);

typedef struct dcm_association dcm_association;

/* Connects and negotiates: Study Root FIND, and GET (with the storage
 * classes of ultrasound studies in the SCP role, PS3.4 C.4.3) or MOVE.
 * Errors in plain words: the PACS cannot be reached, refused the
 * association, or accepted none of the services asked for. handler may
 * be NULL for MOVE. */
mitilog_status dcm_association_open(const dcm_peer *peer, dcm_retrieve_method method,
                                    dcm_retrieved_handler handler, void *context,
                                    dcm_association **out, mitilog_error *error);
/* Releases the association (aborts it if the release fails) and frees. */
void dcm_association_close(dcm_association *association);

/* A study as the PACS answered a STUDY-level C-FIND. Strings malloc'd,
 * NULL when the PACS did not return the attribute. */
typedef struct dcm_study_match {
    char *study_instance_uid;
    char *study_date;
    char *accession_number;
    char *study_description;
    char *modalities_in_study;
    long instance_count; /* Number of Study Related Instances; -1 absent */
} dcm_study_match;

typedef struct dcm_study_query {
    const char *date_from;         /* YYYYMMDD */
    const char *date_to;           /* YYYYMMDD */
    const char *modality;          /* Modalities in Study, e.g. "US" */
    const char *study_description; /* NULL or "" = any; wildcards * ? */
} dcm_study_query;

/* C-FIND at STUDY level (Study Root). A failure status from the PACS is
 * an error naming the status. */
mitilog_status dcm_association_find_studies(dcm_association *association,
                                            const dcm_study_query *query, dcm_study_match **matches,
                                            size_t *count, mitilog_error *error);
void dcm_study_matches_free(dcm_study_match *matches, size_t count);

/* The modalities of a study's series (C-FIND at SERIES level), distinct,
 * joined by '\\' into *modalities (malloc'd; "" when the PACS returned
 * none): for a PACS that does not return Modalities in Study. */
mitilog_status dcm_association_study_modalities(dcm_association *association,
                                                const char *study_instance_uid, char **modalities,
                                                mitilog_error *error);

/* An instance of a study: its series and SOP Instance UIDs (malloc'd). */
typedef struct dcm_instance_match {
    char *series_instance_uid;
    char *sop_instance_uid;
} dcm_instance_match;

/* The instances of one study: C-FIND at SERIES level, then at IMAGE
 * level per series (the hierarchical search of PS3.4 C.4.1.3.1). */
mitilog_status dcm_association_find_instances(dcm_association *association,
                                              const char *study_instance_uid,
                                              dcm_instance_match **matches, size_t *count,
                                              mitilog_error *error);
void dcm_instance_matches_free(dcm_instance_match *matches, size_t count);

/* The final response of a C-GET or C-MOVE: its status and the
 * sub-operation counts it gave (-1 when absent). */
typedef struct dcm_retrieve_result {
    uint16_t status;
    long completed, failed, warning;
    char status_text[128]; /* the status in words */
} dcm_retrieve_result;

/* Retrieves a whole study (series and SOP Instance UID NULL) or one
 * instance (both given) with C-GET on this association (the objects
 * reach handler) or C-MOVE to destination_ae_title. A failure status of
 * the PACS is not an error here: it is in result; errors are the
 * association's (lost, timed out). */
mitilog_status dcm_association_get(dcm_association *association, const char *study_instance_uid,
                                   const char *series_instance_uid, const char *sop_instance_uid,
                                   dcm_retrieve_result *result, mitilog_error *error);
mitilog_status dcm_association_move(dcm_association *association, const char *destination_ae_title,
                                    const char *study_instance_uid, const char *series_instance_uid,
                                    const char *sop_instance_uid, dcm_retrieve_result *result,
                                    mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

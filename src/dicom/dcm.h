/*
 * dcm.h - the C face of the DCMTK shim, the only C++ in mitilog.
 *
 * Owns every byte of DICOM: receiving objects over the network (a Storage
 * SCP with Verification), reading files and received objects into plain C
 * "facts" (raw attribute strings, ultrasound regions, SR content items),
 * writing header copies, and building new files for the simulator.
 *
 * No C++ type crosses this header: handles are opaque, structs are plain C,
 * every call returns a mitilog_status and fills a caller-supplied
 * mitilog_error. Every C++ exception is caught inside the shim.
 *
 * Ownership: dcm_object_load() gives the caller a dcm_object that it frees
 * with dcm_object_free(); dcm_facts filled by dcm_object_facts() are freed
 * with dcm_facts_free() (strings inside are heap copies owned by the facts).
 * The dcm_server owns its threads; dcm_server_free() after dcm_server_stop().
 */
#ifndef MITILOG_DCM_H
#define MITILOG_DCM_H

#include <stddef.h>
#include <stdint.h>

#include "metrics/metrics.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Process set-up                                                      */
/* ------------------------------------------------------------------ */

/* Loads the data dictionary, quiets DCMTK's own logger to the level given
 * (0 debug .. 3 error), sets TCP_NODELAY for dcmnet. Call once from main
 * before any thread starts. Fails if the dictionary cannot be loaded. */
mitilog_status dcm_initialise(int log_level, mitilog_error *error);

/* ------------------------------------------------------------------ */
/* Reading                                                             */
/* ------------------------------------------------------------------ */

/* The attributes extraction needs, as (keyword, group, element). Values
 * are taken from the top-level dataset; the transfer syntax comes from the
 * file meta information. */
#define DCM_ATTRIBUTE_LIST(X)                                                                      \
    X(SPECIFIC_CHARACTER_SET, 0x0008, 0x0005)                                                      \
    X(IMAGE_TYPE, 0x0008, 0x0008)                                                                  \
    X(INSTANCE_CREATION_DATE, 0x0008, 0x0012)                                                      \
    X(INSTANCE_CREATION_TIME, 0x0008, 0x0013)                                                      \
    X(SOP_CLASS_UID, 0x0008, 0x0016)                                                               \
    X(SOP_INSTANCE_UID, 0x0008, 0x0018)                                                            \
    X(STUDY_DATE, 0x0008, 0x0020)                                                                  \
    X(ACQUISITION_DATE, 0x0008, 0x0022)                                                            \
    X(CONTENT_DATE, 0x0008, 0x0023)                                                                \
    X(ACQUISITION_DATE_TIME, 0x0008, 0x002A)                                                       \
    X(STUDY_TIME, 0x0008, 0x0030)                                                                  \
    X(ACQUISITION_TIME, 0x0008, 0x0032)                                                            \
    X(CONTENT_TIME, 0x0008, 0x0033)                                                                \
    X(ACCESSION_NUMBER, 0x0008, 0x0050)                                                            \
    X(MODALITY, 0x0008, 0x0060)                                                                    \
    X(MANUFACTURER, 0x0008, 0x0070)                                                                \
    X(INSTITUTION_NAME, 0x0008, 0x0080)                                                            \
    X(TIMEZONE_OFFSET_FROM_UTC, 0x0008, 0x0201)                                                    \
    X(STATION_NAME, 0x0008, 0x1010)                                                                \
    X(STUDY_DESCRIPTION, 0x0008, 0x1030)                                                           \
    X(SERIES_DESCRIPTION, 0x0008, 0x103E)                                                          \
    X(INSTITUTIONAL_DEPARTMENT_NAME, 0x0008, 0x1040)                                               \
    X(OPERATORS_NAME, 0x0008, 0x1070)                                                              \
    X(MANUFACTURER_MODEL_NAME, 0x0008, 0x1090)                                                     \
    X(PATIENT_ID, 0x0010, 0x0020)                                                                  \
    X(PATIENT_BIRTH_DATE, 0x0010, 0x0030)                                                          \
    X(PATIENT_AGE, 0x0010, 0x1010)                                                                 \
    X(BODY_PART_EXAMINED, 0x0018, 0x0015)                                                          \
    X(SOFTWARE_VERSIONS, 0x0018, 0x1020)                                                           \
    X(FRAME_TIME, 0x0018, 0x1063)                                                                  \
    X(FRAME_TIME_VECTOR, 0x0018, 0x1065)                                                           \
    X(PROTOCOL_NAME, 0x0018, 0x1030)                                                               \
    X(TRANSDUCER_DATA, 0x0018, 0x5010)                                                             \
    X(MECHANICAL_INDEX, 0x0018, 0x5022)                                                            \
    X(BONE_THERMAL_INDEX, 0x0018, 0x5024)                                                          \
    X(CRANIAL_THERMAL_INDEX, 0x0018, 0x5026)                                                       \
    X(SOFT_TISSUE_THERMAL_INDEX, 0x0018, 0x5027)                                                   \
    X(SOFT_TISSUE_FOCUS_THERMAL_INDEX, 0x0018, 0x5028)                                             \
    X(SOFT_TISSUE_SURFACE_THERMAL_INDEX, 0x0018, 0x5029)                                           \
    X(TRANSDUCER_TYPE, 0x0018, 0x6031)                                                             \
    X(STUDY_INSTANCE_UID, 0x0020, 0x000D)                                                          \
    X(SERIES_INSTANCE_UID, 0x0020, 0x000E)                                                         \
    X(INSTANCE_NUMBER, 0x0020, 0x0013)                                                             \
    X(NUMBER_OF_FRAMES, 0x0028, 0x0008)                                                            \
    X(ROWS, 0x0028, 0x0010)                                                                        \
    X(COLUMNS, 0x0028, 0x0011)                                                                     \
    X(PERFORMED_PROCEDURE_STEP_DESCRIPTION, 0x0040, 0x0254)

typedef enum dcm_attribute {
#define DCM_ATTRIBUTE_ENUM(name, group, element) DCM_ATTRIBUTE_##name,
    DCM_ATTRIBUTE_LIST(DCM_ATTRIBUTE_ENUM)
#undef DCM_ATTRIBUTE_ENUM
        DCM_ATTRIBUTE_COUNT
} dcm_attribute;

/* One item of Sequence of Ultrasound Regions (0018,6011). Binary values
 * with a presence flag each. */
typedef struct dcm_region {
    int has_region_data_type;
    uint16_t region_data_type; /* (0018,6014) US */
    int has_transducer_frequency;
    uint32_t transducer_frequency_khz; /* (0018,6030) UL, kHz */
    int has_pulse_repetition_frequency;
    uint32_t pulse_repetition_frequency_hz; /* (0018,6032) UL, Hz */
} dcm_region;

/* One content item of a structured report, in document order (depth-first
 * pre-order). Strings are heap copies, never NULL ("" when absent). */
typedef struct dcm_sr_item {
    unsigned depth;        /* root container is 0 */
    unsigned long node_id; /* DCMTK's node id: unique in the document */
    char *position;        /* "1.2.3" style position in the tree */
    char *value_type;      /* "CONTAINER", "NUM", "CODE", "TEXT", ... */
    char *relationship;    /* "CONTAINS", "HAS PROPERTIES", ... or "" */
    char *concept_scheme;  /* concept name: coding scheme designator */
    char *concept_code;    /* concept name: code value */
    char *concept_meaning; /* concept name: code meaning */
    char *numeric_value;   /* NUM: the DS string as sent */
    char *unit_scheme;     /* NUM: measurement units code */
    char *unit_code;
    char *unit_meaning;
    char *code_scheme; /* CODE: the coded value */
    char *code_value;
    char *code_meaning;
    char *text_value; /* TEXT / other string values */
} dcm_sr_item;

/* Plain facts read from one object. values[a] is the raw attribute value
 * as stored (backslash-separated when multi-valued, padding kept,
 * converted to UTF-8 according to Specific Character Set where DCMTK
 * could), NULL when the attribute is absent, "" when present but empty. */
typedef struct dcm_facts {
    char *values[DCM_ATTRIBUTE_COUNT];
    char *transfer_syntax_uid;   /* from the meta header; NULL if none */
    int character_set_converted; /* 1 if values were converted to UTF-8 */
    size_t region_count;
    dcm_region *regions;
    int is_structured_report; /* SOP class is an SR storage class */
    size_t sr_item_count;
    dcm_sr_item *sr_items;
    int sr_truncated; /* SR deeper than the limit: rest skipped */
} dcm_facts;

typedef struct dcm_object dcm_object;

/* Reads a DICOM file (Part 10, or a bare dataset as a fall-back).
 * Large values are read lazily: the file must stay in place until
 * dcm_object_free(). A file that cannot be read gets a plain-words error
 * that does not repeat the path (the caller names the file): not DICOM
 * (and whether it looks like text), or truncated at byte N of the M its
 * elements need, naming the element larger than the rest of the file. */
mitilog_status dcm_object_load(const char *path, dcm_object **out, mitilog_error *error);
void dcm_object_free(dcm_object *object);

/* Fills facts (zeroed first). sr_depth_limit bounds the SR walk. */
mitilog_status dcm_object_facts(dcm_object *object, unsigned sr_depth_limit, dcm_facts *facts,
                                mitilog_error *error);
void dcm_facts_free(dcm_facts *facts);

/* The object without its pixel data (and without other bulk data over
 * 64 KiB) as the bytes of a Part 10 file, in *bytes (malloc'd, the caller
 * frees it) of *size bytes. Usually these are the file's own bytes up to
 * where DCMTK found the top-level Pixel Data, so the copy is the object
 * as received, cut before its pixels. When that cannot be (a deflated
 * transfer syntax, other bulk data, a group length over the pixels), the
 * copy is written by DCMTK instead, and the bulk data is then removed from
 * the loaded object itself: read its facts first; afterwards it is good
 * for nothing but another header copy and dcm_object_free(). */
mitilog_status dcm_object_header_bytes(dcm_object *object, unsigned char **bytes, size_t *size,
                                       mitilog_error *error);

/* ------------------------------------------------------------------ */
/* Frames (dcm_frame.cc)                                               */
/* ------------------------------------------------------------------ */

/* One decoded frame as 8-bit pixels, row-major, no padding between rows.
 * grey is always filled (width x height bytes, 0 black .. 255 white;
 * MONOCHROME1 is inverted to MONOCHROME2's sense). rgb is filled only for
 * colour objects (width x height x 3, interleaved R, G, B) and NULL for
 * monochrome ones; the grey of a colour pixel is
 * (299 R + 587 G + 114 B + 500) / 1000, the luma weights of ITU-R BT.601.
 * Both are malloc'd and freed by dcm_frame_free(). */
typedef struct dcm_frame {
    int width;
    int height;
    size_t frame_count; /* frames in the object (1 for single) */
    unsigned char *grey;
    unsigned char *rgb;
} dcm_frame;

/* Frame index (0-based) of the object's Pixel Data, decoded whatever its
 * transfer syntax: native (uncompressed), RLE, JPEG baseline, extended
 * and lossless (dcmjpeg), JPEG-LS (dcmjpls), JPEG 2000 (OpenJPEG, from
 * the frame's fragments in memory). Samples over 8 bits are scaled to 8
 * (the top bits). Enhanced US Volume objects are refused. When the frame
 * cannot be had, MITILOG_ERROR_INVALID with the reason in plain words in
 * error (no pixel data, no such frame, an unsupported transfer syntax or
 * photometric interpretation, a frame that does not decode);
 * MITILOG_ERROR_MEMORY when out of memory. frame_count is set whenever
 * the object has pixel data, also when the frame itself fails. */
mitilog_status dcm_object_frame(dcm_object *object, size_t index, dcm_frame *frame,
                                mitilog_error *error);
void dcm_frame_free(dcm_frame *frame);

/* ------------------------------------------------------------------ */
/* Receiving: Storage SCP + Verification SCP                           */
/* ------------------------------------------------------------------ */

/* DIMSE statuses mitilog answers with. */
enum {
    DCM_STATUS_SUCCESS = 0x0000,
    DCM_STATUS_OUT_OF_RESOURCES = 0xA700,
    /* A9xx "Error: Data Set does not match SOP Class" (PS3.4 B.2.3): the
     * data set's SOP Class or Instance UID is not the command's. */
    DCM_STATUS_DATA_SET_MISMATCH = 0xA900,
    DCM_STATUS_CANNOT_UNDERSTAND = 0xC000,
    /* Cxxx "Error: Cannot understand" (PS3.4 B.2.3), a failure the sender
     * should not retry: the object exceeds [dicom] max_object_bytes. */
    DCM_STATUS_TOO_LARGE = 0xC001
};

/* What the handler is told about one received C-STORE. The object has
 * been written byte for byte, with a meta header, to a memory file of
 * the association (memfd_create(2)) that spool_path names
 * ("/proc/self/fd/N"): the handler may open, read or copy it during the
 * call, but not rename or delete it. The shim writes the association's
 * next object over it, empties it after each handler call and closes it
 * when the association ends; nothing of a received object touches the
 * disk unless the handler writes it there. */
typedef struct dcm_received {
    const char *spool_path;
    const char *calling_ae_title;
    const char *called_ae_title;
    const char *peer_address;
    const char *affected_sop_class_uid;    /* from the C-STORE command */
    const char *affected_sop_instance_uid; /* from the C-STORE command */
    unsigned long association_id;          /* for log lines */
} dcm_received;

/* Called on the association's own thread, possibly on several threads at
 * once. Returns the DIMSE status to answer with (DCM_STATUS_*). */
typedef uint16_t (*dcm_store_handler)(void *context, const dcm_received *object);

typedef struct dcm_allowed_peer {
    const char *ae_title; /* calling AE title */
    const char *address;  /* NULL or "" = any source address */
} dcm_allowed_peer;

typedef struct dcm_server_settings {
    const char *ae_title; /* our AE title (called AE enforced) */
    unsigned port;
    const dcm_allowed_peer *allowed_peers; /* NULL = accept any caller */
    size_t allowed_peer_count;
    unsigned max_associations; /* concurrent; extra are refused */
    /* Connections still negotiating (TLS handshake and A-ASSOCIATE-RQ not
     * yet complete), over all addresses and from one address; a further
     * connection is closed at once. 0 = 128 and 8. */
    unsigned max_negotiations;
    unsigned max_negotiations_per_address;
    /* Total time allowed from the TCP connection to a complete
     * A-ASSOCIATE-RQ (TLS handshake included); then the connection is
     * closed whatever it still sends. */
    unsigned acse_timeout_seconds;
    unsigned dimse_timeout_seconds;
    uint32_t max_pdu; /* receive PDU size in bytes */
    /* TLS: all NULL = plain TCP. */
    const char *tls_certificate_file;
    const char *tls_private_key_file;
    const char *tls_ca_file; /* non-NULL: require client certs */
    /* Objects larger than this (data set bytes as received) are answered
     * DCM_STATUS_TOO_LARGE: as soon as the limit is passed the rest of the
     * object is read and discarded, so an association never holds more
     * than max_object_bytes plus one PDU of it; 0 = no limit. An
     * association holds at most one object at a time. */
    uint64_t max_object_bytes;
    /* All associations' objects in memory together: an object that takes
     * the total past this while others are in flight is discarded as it
     * arrives and answered DCM_STATUS_OUT_OF_RESOURCES (the sender
     * retries); one object alone may always reach max_object_bytes. So
     * received objects hold at most the larger of the two, plus a PDU per
     * association. 0 = no limit. */
    uint64_t max_memory_in_flight_bytes;
    /* Borrowed; NULL: nothing reported. Associations accepted and
     * refused (by reason), C-STOREs by the status answered, data set
     * bytes received and the time of the latest object are reported
     * into it (metrics.h). It must outlive the server. */
    metrics *metrics;
} dcm_server_settings;

typedef struct dcm_server dcm_server;

/* Copies the settings. Does not bind yet. */
mitilog_status dcm_server_create(const dcm_server_settings *settings, dcm_store_handler handler,
                                 void *context, dcm_server **out, mitilog_error *error);
/* Binds the port and starts the listener thread; returns once listening
 * (an error if the port cannot be bound). */
mitilog_status dcm_server_start(dcm_server *server, mitilog_error *error);
/* Stops accepting, lets associations in flight finish, joins threads. */
void dcm_server_stop(dcm_server *server);
void dcm_server_free(dcm_server *server);

/* Counters since start, for the health check. */
typedef struct dcm_server_counters {
    unsigned long associations_accepted;
    unsigned long associations_refused;
    unsigned long associations_active;
    unsigned long objects_received;
} dcm_server_counters;
void dcm_server_get_counters(dcm_server *server, dcm_server_counters *out);

/* ------------------------------------------------------------------ */
/* Building files (the simulator; test fixtures)                       */
/* ------------------------------------------------------------------ */

typedef struct dcm_builder dcm_builder;

mitilog_status dcm_builder_create(dcm_builder **out, mitilog_error *error);
void dcm_builder_free(dcm_builder *builder);

/* Puts a string-valued attribute (any string VR, DS, IS, UI, DA, TM...)
 * into the current item (top level, or the innermost open sequence item).
 * The VR comes from the data dictionary. */
mitilog_status dcm_builder_put_string(dcm_builder *builder, uint16_t group, uint16_t element,
                                      const char *value, mitilog_error *error);
/* US / UL / SS / SL valued attributes. */
mitilog_status dcm_builder_put_unsigned(dcm_builder *builder, uint16_t group, uint16_t element,
                                        uint32_t value, mitilog_error *error);
mitilog_status dcm_builder_put_signed(dcm_builder *builder, uint16_t group, uint16_t element,
                                      int32_t value, mitilog_error *error);
/* FD / FL valued attributes. */
mitilog_status dcm_builder_put_float(dcm_builder *builder, uint16_t group, uint16_t element,
                                     double value, mitilog_error *error);
/* Opens a new item in sequence (group,element) of the current item (the
 * sequence is created on first use); nested calls nest. */
mitilog_status dcm_builder_begin_item(dcm_builder *builder, uint16_t group, uint16_t element,
                                      mitilog_error *error);
mitilog_status dcm_builder_end_item(dcm_builder *builder, mitilog_error *error);
/* Pixel Data (7FE0,0010) as OB/OW from the given bytes (copied). */
mitilog_status dcm_builder_put_pixels(dcm_builder *builder, const uint8_t *bytes, size_t size,
                                      mitilog_error *error);
/* Writes a Part 10 file with a meta header in the given transfer syntax
 * (UID string; NULL = Explicit VR Little Endian). Besides the native
 * syntaxes, three compress the pixel data with DCMTK's encoders:
 * JPEG baseline 1.2.840.10008.1.2.4.50 (lossy, quality 90; colour as
 * YBR_FULL_422), JPEG-LS lossless 1.2.840.10008.1.2.4.80 and RLE lossless
 * 1.2.840.10008.1.2.5. The SOP Instance UID is kept either way. */
mitilog_status dcm_builder_save(dcm_builder *builder, const char *path,
                                const char *transfer_syntax_uid, mitilog_error *error);

/* ------------------------------------------------------------------ */
/* Building structured reports (the simulator)                         */
/* ------------------------------------------------------------------ */

/* One content item to build, in document order (depth-first pre-order).
 * depth 0 is the root CONTAINER (exactly one, first); an item at depth
 * d+1 is a child of the last item at depth d. Strings are borrowed; NULL
 * where not used. */
typedef struct dcm_sr_build_item {
    unsigned depth;
    const char *value_type;     /* "CONTAINER", "NUM", "CODE", "TEXT" */
    const char *relationship;   /* "CONTAINS", "HAS PROPERTIES", ...;
                                  * ignored for the root */
    const char *concept_scheme; /* concept name code triple */
    const char *concept_code;
    const char *concept_meaning;
    const char *numeric_value; /* NUM: DS string */
    const char *unit_scheme;   /* NUM: measurement units, e.g. "UCUM" */
    const char *unit_code;
    const char *unit_meaning;
    const char *code_scheme; /* CODE: the coded value */
    const char *code_value;
    const char *code_meaning;
    const char *text_value; /* TEXT */
} dcm_sr_build_item;

/* A coding scheme to list in Coding Scheme Identification (0008,0110),
 * e.g. a private '99' scheme. Strings borrowed; name/organisation may be
 * NULL. */
typedef struct dcm_sr_coding_scheme {
    const char *designator;
    const char *name;
    const char *responsible_organization;
} dcm_sr_coding_scheme;

/* Builds a Comprehensive SR content tree with DCMTK's dcmsr and puts its
 * document-level attributes into the builder's top-level dataset: SOP
 * Class UID (Comprehensive SR), Modality SR, Value Type, Concept Name Code
 * Sequence, Continuity Of Content, Content Sequence, Completion and
 * Verification Flags, Performed Procedure Code Sequence, Coding Scheme
 * Identification Sequence, and an empty Referenced Performed Procedure
 * Step Sequence (Type 2) unless dcmsr wrote one. Nothing time- or UID-dependent is copied from
 * dcmsr: the caller puts SOP Instance, Study and Series UIDs, dates and
 * times, patient and equipment attributes itself, like for an image. */
mitilog_status dcm_builder_put_sr_content(dcm_builder *builder, const dcm_sr_build_item *items,
                                          size_t item_count, const dcm_sr_coding_scheme *schemes,
                                          size_t scheme_count, mitilog_error *error);

/* ------------------------------------------------------------------ */
/* Further facts for the exam context (dcm_extra.cc)                   */
/* ------------------------------------------------------------------ */

enum { DCM_EXTRA_PRIVATE_MAX = 4 };

/* A private attribute to read: (group, 0xXXee) in the block reserved by
 * private_creator; only the low byte of element is used. */
typedef struct dcm_private_request {
    uint16_t group;
    uint16_t element;
    const char *private_creator;
} dcm_private_request;

/* Strings are raw bytes as stored (not charset-converted; decode them
 * with Specific Character Set), heap copies, NULL when absent. */
typedef struct dcm_extra {
    /* "SCHEME:CODE meaning" per item of Procedure Code Sequence
     * (0008,1032), Performed Protocol Code Sequence (0040,0260) and
     * Requested Procedure Code Sequence (0032,1064), joined by '\'. */
    char *procedure_codes;
    char *private_values[DCM_EXTRA_PRIVATE_MAX]; /* per request */
    size_t region_count;                         /* as dcm_facts.region_count */
    int *region_spatial_formats;                 /* (0018,6012); -1 absent */
    /* Enhanced multi-frame objects: Frame Content Sequence (0020,9111)
     * in the Shared (5200,9229) and Per-frame (5200,9230) Functional
     * Groups. */
    int has_functional_groups;
    size_t frame_content_count;
    double frame_duration_ms_sum; /* Frame Acquisition Duration (0018,9220) */
    size_t frame_duration_count;
    char *first_frame_acquisition_datetime; /* (0018,9074), earliest */
} dcm_extra;

mitilog_status dcm_object_extra(dcm_object *object, const dcm_private_request *requests,
                                size_t request_count, dcm_extra *extra, mitilog_error *error);
void dcm_extra_free(dcm_extra *extra);

#ifdef __cplusplus
}
#endif

#endif

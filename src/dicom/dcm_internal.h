/*
 * dcm_internal.h - helpers shared by the C++ files of the DCMTK shim.
 * C++ only; never included from C. Turns DCMTK conditions and C++
 * exceptions into the mitilog result convention (util/status.h).
 */
#ifndef MITILOG_DCM_INTERNAL_H
#define MITILOG_DCM_INTERNAL_H

#ifndef __cplusplus
#error "dcm_internal.h is C++ only"
#endif

#include "dcmtk/config/osconfig.h" /* must come first for DCMTK */
#include "dcmtk/ofstd/ofcond.h"

#include "dicom/dcm.h"

/* Writes "<what>: <DCMTK condition text>" into error (the condition text
 * lives only as long as the condition, so it is copied). Returns status. */
mitilog_status dcm_error_from_condition(mitilog_error *error, mitilog_status status,
                                        const char *what, const OFCondition &condition);

/* Call only inside a catch block: classifies the exception in flight
 * (std::bad_alloc -> MITILOG_ERROR_MEMORY, anything else -> status) and
 * writes "<what>: <exception text>" into error. */
mitilog_status dcm_error_from_exception(mitilog_error *error, mitilog_status status,
                                        const char *what);

/* malloc'd copy of text (NULL text gives NULL); throws std::bad_alloc when
 * the allocation fails so that callers can use one cleanup path. */
char *dcm_string_copy(const char *text);
char *dcm_string_copy_length(const char *text, size_t length);

class DcmFileFormat;
/* The loaded file of an object (dcm_read.cc), for the other readers of
 * the shim (dcm_extra.cc). */
DcmFileFormat *dcm_object_file(dcm_object *object);

/* Registers DCMTK's RLE, JPEG and JPEG-LS decoders (dcm_frame.cc) once,
 * and their clean-up at exit; dcm_initialise() calls it before any thread
 * starts. */
void dcm_frame_codecs_register(void);

/* Catch-all for the C boundary: every exception becomes a status. */
#define DCM_CATCH_ALL(error, status, what)                                                         \
    catch (...) { return dcm_error_from_exception((error), (status), (what)); }

#endif

/*
 * dcm_common.cc - process set-up for DCMTK and the error helpers of the
 * shim (DCMTK conditions and C++ exceptions -> mitilog_status).
 */
#include "dicom/dcm_internal.h"

#include "dcmtk/dcmdata/dcdict.h"
#include "dcmtk/dcmdata/dcobject.h"
#include "dcmtk/oflog/oflog.h"

#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <exception>
#include <new>

/* Our level (0 debug .. 3 error) to DCMTK's. DCMTK's INFO prints several
 * lines per association and per C-STORE, so at our "info" it runs at
 * WARN; mitilog logs its own one line per association. */
static OFLogger::LogLevel dcm_log_level_for(int log_level)
{
    switch (log_level) {
    case 0: return OFLogger::DEBUG_LOG_LEVEL;
    case 1: return OFLogger::WARN_LOG_LEVEL;
    case 2: return OFLogger::WARN_LOG_LEVEL;
    default: return OFLogger::ERROR_LOG_LEVEL;
    }
}

mitilog_status dcm_initialise(int log_level, mitilog_error *error)
{
    try {
        OFLog::configure(dcm_log_level_for(log_level));
        /* dcmsr warns about every missing type 2 attribute of every SR it
         * reads; above debug only its errors are of interest. */
        if (log_level > 0)
            OFLog::getLogger("dcmtk.dcmsr").setLogLevel(OFLogger::ERROR_LOG_LEVEL);
        /* A file dcmdata cannot parse is described in plain words by
         * dcm_object_load (dcm_read.cc); its own lines would repeat that
         * in the toolkit's terms. */
        if (log_level > 0)
            OFLog::getLogger("dcmtk.dcmdata").setLogLevel(OFLogger::FATAL_LOG_LEVEL);
        if (!dcmDataDict.isDictionaryLoaded()) {
            const char *path = getenv(DCM_DICT_ENVIRONMENT_VARIABLE);
            return mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND,
                                     "DCMTK data dictionary not loaded (%s=%s; Debian installs it "
                                     "as /usr/share/libdcmtk*/dicom.dic)",
                                     DCM_DICT_ENVIRONMENT_VARIABLE, path ? path : "(unset)");
        }
        /* Keep values as stored: with input data correction on (DCMTK's
         * default) string values lose their trailing padding when read
         * and odd-length OB values are padded. DcmSCP turns it off for
         * the same reason ("we want to see the real data"). */
        dcmEnableAutomaticInputDataCorrection.set(OFFalse);
        dcm_frame_codecs_register();
        /* dcmnet reads TCP_NODELAY at every accept; without it Nagle's
         * algorithm slows one-object-at-a-time senders to ~20 objects/s. */
        if (setenv("TCP_NODELAY", "1", 1) != 0)
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "setenv TCP_NODELAY: %s",
                                     strerror(errno));
        return MITILOG_OK;
    }
    DCM_CATCH_ALL(error, MITILOG_ERROR_INVALID, "dcm_initialise")
}

mitilog_status dcm_error_from_condition(mitilog_error *error, mitilog_status status,
                                        const char *what, const OFCondition &condition)
{
    const char *text = condition.text();
    return mitilog_error_set(error, status, "%s: %s", what,
                             text != NULL ? text : "unknown DCMTK error");
}

mitilog_status dcm_error_from_exception(mitilog_error *error, mitilog_status status,
                                        const char *what)
{
    try {
        throw;
    } catch (const std::bad_alloc &) {
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", what);
    } catch (const std::exception &exception) {
        return mitilog_error_set(error, status, "%s: internal error: %s", what, exception.what());
    } catch (...) {
        return mitilog_error_set(error, status, "%s: internal error: unknown exception", what);
    }
}

char *dcm_string_copy_length(const char *text, size_t length)
{
    if (text == NULL)
        return NULL;
    char *copy = static_cast<char *>(malloc(length + 1));
    if (copy == NULL)
        throw std::bad_alloc();
    memcpy(copy, text, length);
    copy[length] = '\0';
    return copy;
}

char *dcm_string_copy(const char *text)
{
    return text == NULL ? NULL : dcm_string_copy_length(text, strlen(text));
}

/* Stable names of the extraction enums: they are column values in the
 * database and keys in the API, so they never change once released. */
#include "extract/ext.h"

const char *ext_value_status_name(ext_value_status status)
{
    switch (status) {
    case EXT_VALUE_OK: return "ok";
    case EXT_VALUE_INVALID: return "invalid";
    case EXT_VALUE_MISSING: return "missing";
    }
    return "missing";
}

const char *ext_index_name(ext_index index)
{
    static const char *const names[EXT_INDEX_COUNT] = {"mi",  "tis",       "tib",
                                                       "tic", "tis_focus", "tis_surface"};
    return (unsigned)index < EXT_INDEX_COUNT ? names[index] : "unknown";
}

const char *ext_time_source_name(ext_time_source source)
{
    switch (source) {
    case EXT_TIME_NONE: return "none";
    case EXT_TIME_ACQUISITION_DATE_TIME: return "acquisition_datetime";
    case EXT_TIME_ACQUISITION: return "acquisition";
    case EXT_TIME_CONTENT: return "content";
    case EXT_TIME_INSTANCE_CREATION: return "instance_creation";
    case EXT_TIME_STUDY: return "study";
    }
    return "none";
}

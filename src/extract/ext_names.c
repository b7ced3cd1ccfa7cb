/* Stable names of the extraction enums: they are column values in the
 * database and keys in the API, so they never change once released. */
#include "extract/ext.h"

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

/*
 * stats_exam.c - the dimensions exams are grouped by
 * (stats_exam.h).
 */
#include "stats/stats_exam.h"

#include <string.h>

static const char *const dimension_names[] = {"exam_type", "room",       "preset",
                                              "shift",     "transducer", "site"};

const char *stats_dimension_name(stats_dimension dimension)
{
    if ((unsigned)dimension >= sizeof dimension_names / sizeof dimension_names[0])
        return "exam_type";
    return dimension_names[dimension];
}

int stats_dimension_parse(const char *name, stats_dimension *dimension)
{
    for (size_t i = 0; name != NULL && i < sizeof dimension_names / sizeof dimension_names[0];
         i++) {
        if (strcmp(name, dimension_names[i]) == 0) {
            *dimension = (stats_dimension)i;
            return 0;
        }
    }
    return -1;
}

const char *stats_exam_key(const exam_row *exam, stats_dimension dimension)
{
    switch (dimension) {
    case STATS_BY_ROOM: return exam->room;
    case STATS_BY_PRESET: return exam->preset;
    case STATS_BY_SHIFT: return exam->shift;
    case STATS_BY_TRANSDUCER: return exam->transducer;
    case STATS_BY_SITE: return exam->site;
    case STATS_BY_EXAM_TYPE: break;
    }
    return exam->exam_type;
}

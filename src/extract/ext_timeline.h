/*
 * ext_timeline.h - the exam timeline: how long each capture's displayed
 * settings were (estimated to be) in use.
 *
 * Rule (docs/domain.md, "Exam timeline"): order a study's captures by
 * acquisition time; the scanning that leads to capture i is the interval
 * since capture i-1, attributed to capture i's displayed settings; each
 * interval is capped (default 300 s: a longer gap means the probe sat
 * idle); a cine loop adds frames x frame time at its own settings. A scan
 * time reported in an SR, where present, bounds the total: if the estimate
 * is longer, every attributed duration is scaled down in proportion.
 * The result is an ESTIMATE and must be labelled so wherever it is shown.
 *
 * Pure computation on caller-owned arrays; nothing is allocated here.
 */
#ifndef MITILOG_EXT_TIMELINE_H
#define MITILOG_EXT_TIMELINE_H

#include <stddef.h>

#include "extract/ext.h"

#ifdef __cplusplus
extern "C" {
#endif

enum { EXT_TIMELINE_DEFAULT_GAP_CAP_SECONDS = 300 };

/* What the timeline attributes to one capture. */
typedef struct ext_timeline_entry {
    size_t capture;            /* index into the input array */
    double start_seconds;      /* from the first capture's time */
    double interval_seconds;   /* since the previous capture, after the cap */
    double cine_seconds;       /* the loop's own duration */
    double attributed_seconds; /* (interval + cine) x scale */
    int capped;                /* the raw interval exceeded the cap */
} ext_timeline_entry;

typedef struct ext_timeline_summary {
    size_t entry_count;   /* captures with a usable time */
    size_t untimed_count; /* captures without one: not in the timeline */
    size_t capped_count;
    double estimated_seconds; /* sum of attributed_seconds */
    double unscaled_seconds;  /* the sum before the SR bound */
    double scale;             /* 1.0, or < 1 when the SR bound applied */
    double span_seconds;      /* last time - first time */
} ext_timeline_summary;

/* Fills entries[0..summary->entry_count) in time order (stable for equal
 * times). entries must hold count elements. gap_cap_seconds <= 0 means
 * the default. sr_scan_time_seconds <= 0 means no bound. */
void ext_timeline_build(const exam_capture *captures, size_t count, double gap_cap_seconds,
                        double sr_scan_time_seconds, ext_timeline_entry *entries,
                        ext_timeline_summary *summary);

/* Seconds of the timeline spent with the given index at or above
 * threshold (only captures whose index is ok count). */
double ext_timeline_time_at_or_above(const exam_capture *captures,
                                     const ext_timeline_entry *entries, size_t entry_count,
                                     exam_index index, double threshold);

/* Seconds of the timeline whose capture does not report the index. */
double ext_timeline_time_unreported(const exam_capture *captures, const ext_timeline_entry *entries,
                                    size_t entry_count, exam_index index);

/* Seconds since 0001-01-01T00:00:00 of an ISO 8601 local time as written
 * by ext_iso_from_* (offset, when present, applied to give UTC-based
 * seconds; without one the wall-clock time is used as is). -1 if
 * malformed. */
double ext_iso_to_seconds(const char *iso);

#ifdef __cplusplus
}
#endif

#endif

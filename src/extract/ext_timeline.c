/* The exam timeline estimate (see ext_timeline.h for the rule). */
#include "extract/ext_timeline.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Insertion sort of entry indices by time: studies have tens of captures,
 * and the sort must be stable so equal times keep arrival order. */
static void sort_by_time(const exam_capture *captures, ext_timeline_entry *entries, size_t count)
{
    for (size_t i = 1; i < count; i++) {
        ext_timeline_entry moving = entries[i];
        double key = captures[moving.capture].time_seconds;
        size_t j = i;
        while (j > 0 && captures[entries[j - 1].capture].time_seconds > key) {
            entries[j] = entries[j - 1];
            j--;
        }
        entries[j] = moving;
    }
}

void ext_timeline_build(const exam_capture *captures, size_t count, double gap_cap_seconds,
                        double sr_scan_time_seconds, ext_timeline_entry *entries,
                        ext_timeline_summary *summary)
{
    memset(summary, 0, sizeof *summary);
    summary->scale = 1.0;
    if (gap_cap_seconds <= 0)
        gap_cap_seconds = EXT_TIMELINE_DEFAULT_GAP_CAP_SECONDS;
    size_t used = 0;
    for (size_t i = 0; i < count; i++) {
        if (!captures[i].has_time) {
            summary->untimed_count++;
            continue;
        }
        memset(&entries[used], 0, sizeof entries[used]);
        entries[used++].capture = i;
    }
    sort_by_time(captures, entries, used);
    double total = 0;
    for (size_t k = 0; k < used; k++) {
        const exam_capture *capture = &captures[entries[k].capture];
        double first = captures[entries[0].capture].time_seconds;
        entries[k].start_seconds = capture->time_seconds - first;
        double interval = 0;
        if (k > 0)
            interval = capture->time_seconds - captures[entries[k - 1].capture].time_seconds;
        if (interval > gap_cap_seconds) {
            interval = gap_cap_seconds;
            entries[k].capped = 1;
            summary->capped_count++;
        }
        entries[k].interval_seconds = interval;
        entries[k].cine_seconds = capture->cine_seconds > 0 ? capture->cine_seconds : 0;
        entries[k].attributed_seconds = interval + entries[k].cine_seconds;
        total += entries[k].attributed_seconds;
    }
    summary->entry_count = used;
    summary->unscaled_seconds = total;
    if (sr_scan_time_seconds > 0 && total > sr_scan_time_seconds) {
        summary->scale = sr_scan_time_seconds / total;
        total = 0;
        for (size_t k = 0; k < used; k++) {
            entries[k].attributed_seconds *= summary->scale;
            total += entries[k].attributed_seconds;
        }
    }
    summary->estimated_seconds = total;
    if (used > 1)
        summary->span_seconds = captures[entries[used - 1].capture].time_seconds -
                                captures[entries[0].capture].time_seconds;
}

double ext_timeline_time_at_or_above(const exam_capture *captures,
                                     const ext_timeline_entry *entries, size_t entry_count,
                                     exam_index index, double threshold)
{
    double seconds = 0;
    for (size_t k = 0; k < entry_count; k++) {
        const exam_number *value = &captures[entries[k].capture].indices[index];
        if (value->status == EXAM_VALUE_OK && value->value >= threshold)
            seconds += entries[k].attributed_seconds;
    }
    return seconds;
}

double ext_timeline_time_unreported(const exam_capture *captures, const ext_timeline_entry *entries,
                                    size_t entry_count, exam_index index)
{
    double seconds = 0;
    for (size_t k = 0; k < entry_count; k++) {
        if (captures[entries[k].capture].indices[index].status != EXAM_VALUE_OK)
            seconds += entries[k].attributed_seconds;
    }
    return seconds;
}

/* Days from 0001-01-01 to the given civil date (proleptic Gregorian). */
static long days_from_civil(int year, int month, int day)
{
    year -= month <= 2;
    long era = year / 400;
    long year_of_era = year - era * 400;
    long day_of_year = (153L * (month + (month > 2 ? -3 : 9)) + 2) / 5 + day - 1;
    long day_of_era = year_of_era * 365 + year_of_era / 4 - year_of_era / 100 + day_of_year;
    return era * 146097 + day_of_era - 306; /* 306: from 0000-03-01 to 0001-01-01 */
}

double ext_iso_to_seconds(const char *iso)
{
    int year, month, day, hour, minute, second, consumed = 0;
    if (iso == NULL || sscanf(iso, "%4d-%2d-%2dT%2d:%2d:%2d%n", &year, &month, &day, &hour, &minute,
                              &second, &consumed) != 6)
        return -1;
    double seconds = (double)days_from_civil(year, month, day) * 86400.0 + hour * 3600.0 +
                     minute * 60.0 + second;
    const char *rest = iso + consumed;
    if (*rest == '.') {
        double scale = 0.1;
        for (rest++; *rest >= '0' && *rest <= '9'; rest++, scale /= 10)
            seconds += (*rest - '0') * scale;
    }
    if (*rest == '+' || *rest == '-') {
        int offset_hours, offset_minutes;
        if (sscanf(rest + 1, "%2d:%2d", &offset_hours, &offset_minutes) != 2)
            return -1;
        double offset = offset_hours * 3600.0 + offset_minutes * 60.0;
        seconds += *rest == '+' ? -offset : offset;
    } else if (*rest != '\0' && *rest != 'Z') {
        return -1;
    }
    return seconds;
}

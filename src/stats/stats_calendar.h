/*
 * stats_calendar.h - the calendar the statistics count in: day numbers
 * (days since 1970-01-01, proleptic Gregorian) of local dates
 * "YYYY-MM-DD", and ISO 8601 week dates (Monday start; week 1 holds the
 * year's first Thursday).
 *
 * Pure computation; nothing is allocated. Text results go into
 * caller-owned buffers of the size each function names.
 */
#ifndef MITILOG_STATS_CALENDAR_H
#define MITILOG_STATS_CALENDAR_H

#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Days since 1970-01-01 of a valid proleptic Gregorian date; -1 with
 * MITILOG_ERROR_INVALID for anything else (format, month, day of month). */
mitilog_status stats_day_number(const char *date, long *days);
/* The date of a day number, "YYYY-MM-DD" (out holds 11 bytes). */
void stats_day_text(long days, char out[11]);
/* ISO year and week of a day number. */
void stats_iso_week_of_day(long days, int *iso_year, int *iso_week);
/* 52 or 53. */
int stats_iso_weeks_in_year(int iso_year);
/* Day number of the Monday of an ISO week; MITILOG_ERROR_INVALID when the
 * week does not exist (e.g. 2025-W53). */
mitilog_status stats_iso_week_monday(int iso_year, int iso_week, long *monday);
/* Parses "YYYY-Www" (e.g. "2026-W48"); checks the week exists. */
mitilog_status stats_iso_week_parse(const char *text, int *iso_year, int *iso_week);
/* "YYYY-Www" (out holds 9 bytes). */
void stats_iso_week_text(int iso_year, int iso_week, char out[9]);

#ifdef __cplusplus
}
#endif

#endif

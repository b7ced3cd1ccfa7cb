/*
 * stats_calendar.c - day numbers and ISO 8601 weeks (stats_calendar.h).
 */
#include "stats/stats_calendar.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- calendar: H. Hinnant's days_from_civil / civil_from_days
 * (public domain algorithms, "chrono-Compatible Low-Level Date
 * Algorithms"); proleptic Gregorian. ---- */

static long days_from_civil(long year, unsigned month, unsigned day)
{
    year -= month <= 2;
    long era = (year >= 0 ? year : year - 399) / 400;
    unsigned year_of_era = (unsigned)(year - era * 400);
    unsigned day_of_year = (153 * (month + (month > 2 ? -3 : 9)) + 2) / 5 + day - 1;
    unsigned day_of_era = year_of_era * 365 + year_of_era / 4 - year_of_era / 100 + day_of_year;
    return era * 146097 + (long)day_of_era - 719468;
}

static void civil_from_days(long days, long *year, unsigned *month, unsigned *day)
{
    days += 719468;
    long era = (days >= 0 ? days : days - 146096) / 146097;
    unsigned day_of_era = (unsigned)(days - era * 146097);
    unsigned year_of_era =
        (day_of_era - day_of_era / 1460 + day_of_era / 36524 - day_of_era / 146096) / 365;
    long y = (long)year_of_era + era * 400;
    unsigned day_of_year = day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);
    unsigned mp = (5 * day_of_year + 2) / 153;
    *day = day_of_year - (153 * mp + 2) / 5 + 1;
    *month = mp < 10 ? mp + 3 : mp - 9;
    *year = y + (*month <= 2);
}

/* ISO weekday, Monday 1 .. Sunday 7 (1970-01-01 was a Thursday). */
static int iso_weekday(long days)
{
    long r = ((days % 7) + 7) % 7;
    return (int)((r + 3) % 7) + 1;
}

static int is_leap(long year) { return (year % 4 == 0 && year % 100 != 0) || year % 400 == 0; }

mitilog_status stats_day_number(const char *date, long *days)
{
    *days = -1;
    if (date == NULL || strlen(date) < 10 || date[4] != '-' || date[7] != '-')
        return MITILOG_ERROR_INVALID;
    for (int i = 0; i < 10; i++) {
        if (i != 4 && i != 7 && (date[i] < '0' || date[i] > '9'))
            return MITILOG_ERROR_INVALID;
    }
    long year = strtol(date, NULL, 10);
    unsigned month = (unsigned)((date[5] - '0') * 10 + (date[6] - '0'));
    unsigned day = (unsigned)((date[8] - '0') * 10 + (date[9] - '0'));
    static const unsigned lengths[12] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    if (month < 1 || month > 12 || day < 1)
        return MITILOG_ERROR_INVALID;
    unsigned length = lengths[month - 1] + (month == 2 && is_leap(year));
    if (day > length)
        return MITILOG_ERROR_INVALID;
    *days = days_from_civil(year, month, day);
    return MITILOG_OK;
}

void stats_day_text(long days, char out[11])
{
    long year;
    unsigned month, day;
    civil_from_days(days, &year, &month, &day);
    char text[48];
    snprintf(text, sizeof text, "%04ld-%02u-%02u", year % 10000, month % 100, day % 100);
    memcpy(out, text, 10);
    out[10] = '\0';
}

void stats_iso_week_of_day(long days, int *iso_year, int *iso_week)
{
    long thursday = days - (iso_weekday(days) - 1) + 3;
    long year;
    unsigned month, day;
    civil_from_days(thursday, &year, &month, &day);
    *iso_year = (int)year;
    *iso_week = (int)((thursday - days_from_civil(year, 1, 1)) / 7 + 1);
}

int stats_iso_weeks_in_year(int iso_year)
{
    int year, week;
    stats_iso_week_of_day(days_from_civil(iso_year, 12, 28), &year, &week);
    return week;
}

mitilog_status stats_iso_week_monday(int iso_year, int iso_week, long *monday)
{
    if (iso_year < 1 || iso_year > 9999 || iso_week < 1 ||
        iso_week > stats_iso_weeks_in_year(iso_year))
        return MITILOG_ERROR_INVALID;
    long january4 = days_from_civil(iso_year, 1, 4);
    *monday = january4 - (iso_weekday(january4) - 1) + 7L * (iso_week - 1);
    return MITILOG_OK;
}

mitilog_status stats_iso_week_parse(const char *text, int *iso_year, int *iso_week)
{
    if (text == NULL || strlen(text) != 8 || text[4] != '-' || (text[5] != 'W' && text[5] != 'w'))
        return MITILOG_ERROR_INVALID;
    for (int i = 0; i < 8; i++) {
        if (i != 4 && i != 5 && (text[i] < '0' || text[i] > '9'))
            return MITILOG_ERROR_INVALID;
    }
    int year = (int)strtol(text, NULL, 10);
    int week = (text[6] - '0') * 10 + (text[7] - '0');
    long monday;
    if (stats_iso_week_monday(year, week, &monday) != MITILOG_OK)
        return MITILOG_ERROR_INVALID;
    *iso_year = year;
    *iso_week = week;
    return MITILOG_OK;
}

void stats_iso_week_text(int iso_year, int iso_week, char out[9])
{
    char text[32];
    snprintf(text, sizeof text, "%04d-W%02d", iso_year % 10000, iso_week % 100);
    memcpy(out, text, 8);
    out[8] = '\0';
}

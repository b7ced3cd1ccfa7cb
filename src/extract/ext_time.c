/* DICOM DA, TM and DT values (PS3.5 Table 6.2-1) to ISO 8601 text, and the
 * acquisition-time fall-backs. Malformed values are refused, not repaired. */
#include <ctype.h>
#include <stdio.h>
#include <string.h>

#include "extract/ext.h"

typedef struct time_parts {
    int year, month, day, hour, minute, second;
    char fraction[7]; /* digits as given, "" if none */
    char offset[7];   /* "+HH:MM" or "" */
} time_parts;

/* Copies raw without leading/trailing spaces into buffer; 0 if it fits. */
static int trimmed_copy(const char *raw, char *buffer, size_t size)
{
    while (*raw == ' ')
        raw++;
    size_t length = strlen(raw);
    while (length > 0 && raw[length - 1] == ' ')
        length--;
    if (length >= size)
        return -1;
    memcpy(buffer, raw, length);
    buffer[length] = '\0';
    return 0;
}

static int read_digits(const char **text, int count, int *value)
{
    int result = 0;
    for (int i = 0; i < count; i++) {
        if (!isdigit((unsigned char)(*text)[i]))
            return -1;
        result = result * 10 + ((*text)[i] - '0');
    }
    *text += count;
    *value = result;
    return 0;
}

static int days_in_month(int year, int month)
{
    static const int days[] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    int leap = (year % 4 == 0 && year % 100 != 0) || year % 400 == 0;
    return month == 2 && leap ? 29 : days[month - 1];
}

static int parse_date(const char **text, time_parts *parts)
{
    if (read_digits(text, 4, &parts->year) || read_digits(text, 2, &parts->month) ||
        read_digits(text, 2, &parts->day))
        return -1;
    if (parts->month < 1 || parts->month > 12 || parts->day < 1 ||
        parts->day > days_in_month(parts->year, parts->month))
        return -1;
    return 0;
}

/* HH[MM[SS[.F{1,6}]]], also the older HH:MM:SS form. Leaves *text after. */
static int parse_time(const char **text, time_parts *parts)
{
    parts->minute = parts->second = 0;
    parts->fraction[0] = '\0';
    if (read_digits(text, 2, &parts->hour))
        return -1;
    int colons = (**text == ':');
    if (isdigit((unsigned char)(*text)[colons])) {
        *text += colons;
        if (read_digits(text, 2, &parts->minute))
            return -1;
        if ((**text == ':') == colons && isdigit((unsigned char)(*text)[colons])) {
            *text += colons;
            if (read_digits(text, 2, &parts->second))
                return -1;
            if (**text == '.') {
                (*text)++;
                size_t count = 0;
                while (isdigit((unsigned char)**text) && count < 6)
                    parts->fraction[count++] = *(*text)++;
                parts->fraction[count] = '\0';
                if (count == 0)
                    return -1;
            }
        }
    }
    if (parts->hour > 23 || parts->minute > 59 || parts->second > 60)
        return -1;
    return 0;
}

/* "+HHMM" / "-HHMM" to "+HH:MM". */
static int parse_offset(const char *text, char out[7])
{
    int hours = 0, minutes = 0;
    if ((text[0] != '+' && text[0] != '-') || strlen(text) != 5)
        return -1;
    const char *digits = text + 1;
    if (read_digits(&digits, 2, &hours) || read_digits(&digits, 2, &minutes) || hours > 14 ||
        minutes > 59)
        return -1;
    out[0] = text[0];
    out[1] = text[1];
    out[2] = text[2];
    out[3] = ':';
    out[4] = text[3];
    out[5] = text[4];
    out[6] = '\0';
    return 0;
}

static void format_iso(const time_parts *parts, char out[EXT_ISO_TIME_SIZE])
{
    snprintf(out, EXT_ISO_TIME_SIZE, "%04d-%02d-%02dT%02d:%02d:%02d%s%s%s", parts->year,
             parts->month, parts->day, parts->hour, parts->minute, parts->second,
             parts->fraction[0] ? "." : "", parts->fraction, parts->offset);
}

static int apply_timezone(const char *timezone_offset, time_parts *parts)
{
    parts->offset[0] = '\0';
    if (timezone_offset == NULL)
        return 0;
    char buffer[16];
    if (trimmed_copy(timezone_offset, buffer, sizeof buffer) != 0)
        return 0;
    if (buffer[0] == '\0')
        return 0;
    /* A malformed offset is dropped, not guessed: the local time stands. */
    if (parse_offset(buffer, parts->offset) != 0)
        parts->offset[0] = '\0';
    return 0;
}

int ext_iso_from_date_time(const char *date, const char *time, const char *timezone_offset,
                           char out[EXT_ISO_TIME_SIZE])
{
    char date_buffer[32], time_buffer[32];
    time_parts parts;
    memset(&parts, 0, sizeof parts);
    out[0] = '\0';
    if (date == NULL || time == NULL || trimmed_copy(date, date_buffer, sizeof date_buffer) ||
        trimmed_copy(time, time_buffer, sizeof time_buffer))
        return -1;
    const char *cursor = date_buffer;
    if (parse_date(&cursor, &parts) != 0 || *cursor != '\0')
        return -1;
    cursor = time_buffer;
    if (parse_time(&cursor, &parts) != 0 || *cursor != '\0')
        return -1;
    apply_timezone(timezone_offset, &parts);
    format_iso(&parts, out);
    return 0;
}

int ext_iso_from_dt(const char *date_time, const char *timezone_offset, char out[EXT_ISO_TIME_SIZE])
{
    char buffer[40];
    time_parts parts;
    memset(&parts, 0, sizeof parts);
    out[0] = '\0';
    if (date_time == NULL || trimmed_copy(date_time, buffer, sizeof buffer) != 0)
        return -1;
    const char *cursor = buffer;
    /* A DT without a time of day cannot order captures: require HH. */
    if (parse_date(&cursor, &parts) != 0 || parse_time(&cursor, &parts) != 0)
        return -1;
    if (*cursor == '+' || *cursor == '-') {
        if (parse_offset(cursor, parts.offset) != 0)
            return -1;
    } else if (*cursor != '\0') {
        return -1;
    } else {
        apply_timezone(timezone_offset, &parts);
    }
    format_iso(&parts, out);
    return 0;
}

ext_time_source ext_acquisition_time(const dcm_facts *facts, char out[EXT_ISO_TIME_SIZE])
{
    const char *const *values = (const char *const *)facts->values;
    const char *zone = values[DCM_ATTRIBUTE_TIMEZONE_OFFSET_FROM_UTC];
    if (ext_iso_from_dt(values[DCM_ATTRIBUTE_ACQUISITION_DATE_TIME], zone, out) == 0)
        return EXT_TIME_ACQUISITION_DATE_TIME;
    static const struct {
        dcm_attribute date, time;
        ext_time_source source;
    } pairs[] = {
        {DCM_ATTRIBUTE_ACQUISITION_DATE, DCM_ATTRIBUTE_ACQUISITION_TIME, EXT_TIME_ACQUISITION},
        {DCM_ATTRIBUTE_CONTENT_DATE, DCM_ATTRIBUTE_CONTENT_TIME, EXT_TIME_CONTENT},
        {DCM_ATTRIBUTE_INSTANCE_CREATION_DATE, DCM_ATTRIBUTE_INSTANCE_CREATION_TIME,
         EXT_TIME_INSTANCE_CREATION},
        {DCM_ATTRIBUTE_STUDY_DATE, DCM_ATTRIBUTE_STUDY_TIME, EXT_TIME_STUDY},
    };
    for (size_t i = 0; i < sizeof pairs / sizeof pairs[0]; i++) {
        if (ext_iso_from_date_time(values[pairs[i].date], values[pairs[i].time], zone, out) == 0)
            return pairs[i].source;
    }
    out[0] = '\0';
    return EXT_TIME_NONE;
}

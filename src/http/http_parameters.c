/*
 * http_parameters.c - the one checker of query parameters for every
 * endpoint of the API: calendar dates, instants, ISO weeks, integers,
 * UIDs, free-text filters and fixed choices (docs/api.md, "Parameters").
 * A bad value answers 400 naming the parameter and the rule it broke.
 */
#include "http/http_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* The statistics' calendar (day numbers, ISO weeks), reached through
 * report.h as the audit routes reach it. */
#include "report/report.h"

enum { HTTP_UID_MAX = 64, HTTP_TEXT_MAX = 128, HTTP_INTEGER_DIGITS_MAX = 9 };

/* Two decimal digits at text, or -1. */
static int http_two_digits(const char *text)
{
    if (text[0] < '0' || text[0] > '9' || text[1] < '0' || text[1] > '9')
        return -1;
    return (text[0] - '0') * 10 + (text[1] - '0');
}

/* Day numbers (days since 1970-01-01) of the first and last day allowed. */
static void http_day_bounds(long *first, long *last)
{
    char text[16];
    snprintf(text, sizeof text, "%04d-01-01", HTTP_YEAR_MINIMUM);
    stats_day_number(text, first);
    snprintf(text, sizeof text, "%04d-12-31", HTTP_YEAR_MAXIMUM);
    stats_day_number(text, last);
}

int http_parse_date(const char *text, long *day)
{
    long first, last;
    if (text == NULL || strlen(text) != 10 || stats_day_number(text, day) != MITILOG_OK)
        return 0;
    http_day_bounds(&first, &last);
    return *day >= first && *day <= last;
}

/* ISO 8601 (RFC 3339 profile): "YYYY-MM-DD" or "YYYY-MM-DDTHH:MM[:SS[.f]]"
 * with an optional "Z" or "+HH:MM" / "-HH:MM" / "+HHMM" / "+HH"; without
 * one the time is UTC. A '+' sent unescaped in a URL arrives as a space
 * and is read as '+'. */
int http_parse_instant(const char *text, char out[HTTP_INSTANT_SIZE])
{
    char copy[HTTP_INSTANT_INPUT_MAX + 1];
    size_t length = text != NULL ? strlen(text) : 0;
    if (length < 10 || length > HTTP_INSTANT_INPUT_MAX)
        return 0;
    for (size_t i = 0; i <= length; i++)
        copy[i] = text[i] == ' ' ? '+' : text[i];
    char date[11];
    memcpy(date, copy, 10);
    date[10] = '\0';
    long day;
    if (!http_parse_date(date, &day))
        return 0;
    long hour = 0, minute = 0, second = 0, millisecond = 0, offset = 0;
    const char *rest = copy + 10;
    if (*rest == 'T' || *rest == 't') {
        hour = http_two_digits(rest + 1);
        if (hour < 0 || hour > 23 || rest[3] != ':')
            return 0;
        minute = http_two_digits(rest + 4);
        if (minute < 0 || minute > 59)
            return 0;
        rest += 6;
        if (*rest == ':') {
            second = http_two_digits(rest + 1);
            if (second < 0 || second > 59)
                return 0;
            rest += 3;
            if (*rest == '.' || *rest == ',') {
                /* At or after a fraction of a millisecond is at or after
                 * the next whole millisecond: round up. */
                size_t digits = strspn(rest + 1, "0123456789");
                if (digits == 0 || digits > 9)
                    return 0;
                long scale = 100;
                int beyond = 0;
                for (size_t i = 0; i < digits; i++) {
                    int digit = rest[1 + i] - '0';
                    if (i < 3) {
                        millisecond += digit * scale;
                        scale /= 10;
                    } else if (digit != 0) {
                        beyond = 1;
                    }
                }
                millisecond += beyond;
                rest += 1 + digits;
            }
        }
        if (*rest == 'Z' || *rest == 'z') {
            rest++;
        } else if (*rest == '+' || *rest == '-') {
            int sign = *rest == '-' ? -1 : 1;
            long offset_hours = http_two_digits(rest + 1), offset_minutes = 0;
            if (offset_hours < 0)
                return 0;
            rest += 3;
            if (*rest == ':')
                rest++;
            if (*rest != '\0') {
                offset_minutes = http_two_digits(rest);
                rest += 2;
            }
            if (offset_hours < 0 || offset_hours > 23 || offset_minutes < 0 || offset_minutes > 59)
                return 0;
            offset = sign * (offset_hours * 60 + offset_minutes);
        }
    }
    if (*rest != '\0')
        return 0;
    /* Local time minus its offset is UTC (RFC 3339 4.2). */
    long long total =
        ((((long long)day * 24 + hour) * 60 + minute - offset) * 60 + second) * 1000 + millisecond;
    long long per_day = 24LL * 60 * 60 * 1000;
    long utc_day = (long)(total >= 0 ? total / per_day : -((-total + per_day - 1) / per_day));
    long long in_day = total - (long long)utc_day * per_day;
    long first, last;
    http_day_bounds(&first, &last);
    if (utc_day < first || utc_day > last)
        return 0;
    char day_text[11];
    stats_day_text(utc_day, day_text);
    snprintf(out, HTTP_INSTANT_SIZE, "%sT%02d:%02d:%02d.%03dZ", day_text, (int)(in_day / 3600000),
             (int)(in_day / 60000 % 60), (int)(in_day / 1000 % 60), (int)(in_day % 1000));
    return 1;
}

/* 1 when text is name, or one of the '|'-separated names of choices. */
static int http_is_choice(const char *text, const char *choices)
{
    size_t length = strlen(text);
    for (const char *start = choices; *start != '\0';) {
        size_t item = strcspn(start, "|");
        if (item == length && length > 0 && strncmp(start, text, length) == 0)
            return 1;
        start += item;
        if (*start == '|')
            start++;
    }
    return 0;
}

/* Checks one value; 1 if good (value filled), else 0 with the rule's
 * wording in message. */
static int http_check(const http_parameter_rule *rule, const char *text,
                      http_parameter_value *value, char *message, size_t size)
{
    size_t length = strlen(text);
    switch (rule->kind) {
    case HTTP_PARAMETER_DATE:
        if (http_parse_date(text, &value->number))
            return 1;
        snprintf(message, size, "not a calendar date YYYY-MM-DD with a year from %d to %d",
                 HTTP_YEAR_MINIMUM, HTTP_YEAR_MAXIMUM);
        return 0;
    case HTTP_PARAMETER_INSTANT:
        if (http_parse_instant(text, value->instant))
            return 1;
        snprintf(message, size,
                 "not an ISO 8601 date or date-time (YYYY-MM-DD or YYYY-MM-DDThh:mm[:ss[.sss]] "
                 "with Z or +hh:mm; without an offset UTC) with a year from %d to %d",
                 HTTP_YEAR_MINIMUM, HTTP_YEAR_MAXIMUM);
        return 0;
    case HTTP_PARAMETER_WEEK:
        /* stats_iso_week_parse() also checks that the week exists. */
        if (stats_iso_week_parse(text, &value->iso_year, &value->iso_week) == MITILOG_OK &&
            value->iso_year >= HTTP_YEAR_MINIMUM && value->iso_year <= HTTP_YEAR_MAXIMUM)
            return 1;
        snprintf(message, size, "not an ISO week YYYY-Www that exists, with a year from %d to %d",
                 HTTP_YEAR_MINIMUM, HTTP_YEAR_MAXIMUM);
        return 0;
    case HTTP_PARAMETER_INTEGER:
        if (length > 0 && length <= HTTP_INTEGER_DIGITS_MAX &&
            strspn(text, "0123456789") == length) {
            value->number = strtol(text, NULL, 10);
            if (value->number >= rule->minimum && value->number <= rule->maximum)
                return 1;
        }
        snprintf(message, size, "not an integer from %ld to %ld", rule->minimum, rule->maximum);
        return 0;
    case HTTP_PARAMETER_UID:
        if (length > 0 && length <= HTTP_UID_MAX && strspn(text, "0123456789.") == length)
            return 1;
        snprintf(message, size, "not a UID (digits and dots, at most %d)", HTTP_UID_MAX);
        return 0;
    case HTTP_PARAMETER_TEXT:
        if (length > 0 && length <= HTTP_TEXT_MAX) {
            size_t i = 0;
            while (i < length && (unsigned char)text[i] >= 0x20 && text[i] != 0x7f)
                i++;
            if (i == length)
                return 1;
        }
        snprintf(message, size, "1 to %d characters, no control characters", HTTP_TEXT_MAX);
        return 0;
    case HTTP_PARAMETER_CHOICE:
        if (http_is_choice(text, rule->choices))
            return 1;
        {
            /* "one of a, b, c" from "a|b|c" */
            size_t used = (size_t)snprintf(message, size, "one of ");
            for (const char *at = rule->choices; *at != '\0' && used + 3 < size; at++) {
                if (*at == '|') {
                    message[used++] = ',';
                    message[used++] = ' ';
                } else {
                    message[used++] = *at;
                }
            }
            message[used] = '\0';
            return 0;
        }
    case HTTP_PARAMETER_SITES: break; /* http_sites_add() */
    }
    snprintf(message, size, "unknown rule");
    return 0;
}

/* Adds the names of one site= value (names separated by commas, spaces
 * around them dropped) to value->sites; 1 if good, else 0 with the rule
 * broken in message. */
static int http_sites_add(const char *text, http_parameter_value *value, char *message, size_t size)
{
    const char *at = text;
    for (;;) {
        size_t length = strcspn(at, ",");
        const char *start = at;
        while (length > 0 && *start == ' ') {
            start++;
            length--;
        }
        while (length > 0 && start[length - 1] == ' ')
            length--;
        if (value->sites.count == EXAM_SITES_MAX) {
            snprintf(message, size, "at most %d sites", EXAM_SITES_MAX);
            return 0;
        }
        char name[EXAM_SITE_MAX + 2];
        char reason[128];
        if (length > EXAM_SITE_MAX)
            length = EXAM_SITE_MAX + 1; /* too long: the check says so */
        memcpy(name, start, length);
        name[length] = '\0';
        if (!exam_site_name_check(name, reason, sizeof reason)) {
            snprintf(message, size, "%s", reason);
            return 0;
        }
        char *kept = value->site_text + value->sites.count * (EXAM_SITE_MAX + 1);
        memcpy(kept, name, length + 1);
        value->sites.names[value->sites.count++] = kept;
        at += strcspn(at, ",");
        if (*at == '\0')
            return 1;
        at++;
    }
}

/* Every value of one repeated parameter, for http_sites_collect(). */
typedef struct http_sites_walk {
    const char *name;
    http_parameter_value *value;
    char message[256];
    int failed;
} http_sites_walk;

static enum MHD_Result http_sites_collect(void *context, enum MHD_ValueKind kind, const char *key,
                                          const char *text)
{
    (void)kind;
    http_sites_walk *walk = context;
    if (walk->failed || key == NULL || strcmp(key, walk->name) != 0)
        return MHD_YES;
    if (text == NULL)
        text = "";
    if (walk->value->text == NULL)
        walk->value->text = text;
    if (!http_sites_add(text, walk->value, walk->message, sizeof walk->message))
        walk->failed = 1;
    return MHD_YES;
}

int http_parameters_read(http_server *server, struct MHD_Connection *connection,
                         const http_parameter_rule *rules, size_t count,
                         http_parameter_value *values, http_reply *reply)
{
    for (size_t i = 0; i < count; i++) {
        memset(&values[i], 0, sizeof values[i]);
        if (rules[i].kind == HTTP_PARAMETER_SITES) {
            http_sites_walk walk = {rules[i].name, &values[i], "", 0};
            MHD_get_connection_values(connection, MHD_GET_ARGUMENT_KIND, http_sites_collect, &walk);
            if (walk.failed) {
                *reply = http_error_reply(server, MHD_HTTP_BAD_REQUEST, "parameter %s: %s",
                                          rules[i].name, walk.message);
                return 0;
            }
            continue;
        }
        values[i].text =
            MHD_lookup_connection_value(connection, MHD_GET_ARGUMENT_KIND, rules[i].name);
        if (values[i].text == NULL)
            continue;
        char message[256];
        if (!http_check(&rules[i], values[i].text, &values[i], message, sizeof message)) {
            *reply = http_error_reply(server, MHD_HTTP_BAD_REQUEST, "parameter %s: %s",
                                      rules[i].name, message);
            return 0;
        }
    }
    return 1;
}

int http_parameters_period(http_server *server, const http_parameter_value *from,
                           const http_parameter_value *to, http_reply *reply)
{
    if (from->text == NULL || to->text == NULL || from->number <= to->number)
        return 1;
    *reply =
        http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                         "parameters from and to: from %s is after to %s", from->text, to->text);
    return 0;
}

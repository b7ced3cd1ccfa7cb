/* Exam context by the site's rules (ext_classify.h). */
#define _XOPEN_SOURCE 700
#include "extract/ext_classify.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <time.h>

static int present(const char *text) { return text != NULL && text[0] != '\0'; }

const ext_exam_type *ext_classify_exam_type(const ext_site_rules *rules, const char *const *fields,
                                            const char **source)
{
    *source = NULL;
    long cached = -1;
    if (rules->classify_cache != NULL &&
        ext_classify_cache_get(rules->classify_cache, fields, &cached, source))
        return cached >= 0 && (size_t)cached < rules->exam_type_count ? &rules->exam_types[cached]
                                                                      : NULL;
    const ext_exam_type *found = NULL;
    for (size_t t = 0; t < rules->exam_type_count && found == NULL; t++) {
        const ext_exam_type *type = &rules->exam_types[t];
        for (size_t m = 0; m < type->match_count; m++) {
            const ext_match *match = &type->matches[m];
            const char *text = fields[match->field];
            if (present(text) && regexec(&match->regex, text, 0, NULL, 0) == 0) {
                *source = ext_field_name(match->field);
                found = type;
                break;
            }
        }
    }
    if (rules->classify_cache != NULL)
        ext_classify_cache_put(rules->classify_cache, fields,
                               found != NULL ? (long)(found - rules->exam_types) : -1, *source);
    return found;
}

const char *ext_classify_shift(const ext_site_rules *rules, int minute)
{
    if (minute < 0 || minute >= 24 * 60)
        return NULL;
    for (size_t i = 0; i < rules->shift_count; i++) {
        const ext_shift *shift = &rules->shifts[i];
        int from = shift->from_minute, to = shift->to_minute;
        if (from < 0 || to < 0)
            continue;
        if (from < to ? (minute >= from && minute < to) : (minute >= from || minute < to))
            return shift->name;
    }
    return NULL;
}

/* "YYYY-MM-DDTHH:MM..." -> minute of day, -1 if malformed. */
static int iso_minute(const char *iso)
{
    int hours, minutes;
    if (iso == NULL || strlen(iso) < 16 || iso[10] != 'T' ||
        sscanf(iso + 11, "%2d:%2d", &hours, &minutes) != 2 || hours > 23 || minutes > 59 ||
        hours < 0 || minutes < 0)
        return -1;
    return hours * 60 + minutes;
}

int ext_local_minute(const char *acquired_at, const char *received_at, const char **source)
{
    *source = NULL;
    int minute = iso_minute(acquired_at);
    if (minute >= 0) {
        *source = "acquisition_local_time";
        return minute;
    }
    struct tm utc;
    memset(&utc, 0, sizeof utc);
    if (received_at == NULL ||
        sscanf(received_at, "%4d-%2d-%2dT%2d:%2d:%2d", &utc.tm_year, &utc.tm_mon, &utc.tm_mday,
               &utc.tm_hour, &utc.tm_min, &utc.tm_sec) != 6)
        return -1;
    utc.tm_year -= 1900;
    utc.tm_mon -= 1;
    time_t when = timegm(&utc);
    struct tm local;
    if (when == (time_t)-1 || localtime_r(&when, &local) == NULL)
        return -1;
    *source = "received_at_local_time";
    return local.tm_hour * 60 + local.tm_min;
}

/* DA "YYYYMMDD" (also "YYYY.MM.DD", ACR-NEMA) into y, m, d; 0 if ok. */
static int parse_date(const char *text, int *y, int *m, int *d)
{
    char digits[9];
    size_t n = 0;
    for (const char *c = text; c != NULL && *c != '\0' && n < 9; c++) {
        if (*c >= '0' && *c <= '9')
            digits[n++] = *c;
        else if (*c != '.' && *c != ' ' && *c != '-')
            return -1;
    }
    if (n != 8)
        return -1;
    digits[8] = '\0';
    long value = strtol(digits, NULL, 10);
    *y = (int)(value / 10000);
    *m = (int)(value / 100 % 100);
    *d = (int)(value % 100);
    return *m >= 1 && *m <= 12 && *d >= 1 && *d <= 31 ? 0 : -1;
}

static long days_from_civil(int y, int m, int d)
{
    /* Howard Hinnant's days_from_civil (public domain algorithm). */
    y -= m <= 2;
    long era = (y >= 0 ? y : y - 399) / 400;
    long yoe = y - era * 400;
    long doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
    long doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    return era * 146097 + doe - 719468;
}

int ext_age(const char *patient_age, const char *birth_date, const char *study_date, long *days,
            long *years, const char **source)
{
    int by, bm, bd, sy, sm, sd;
    *source = NULL;
    if (present(birth_date) && present(study_date) && parse_date(birth_date, &by, &bm, &bd) == 0 &&
        parse_date(study_date, &sy, &sm, &sd) == 0) {
        long difference = days_from_civil(sy, sm, sd) - days_from_civil(by, bm, bd);
        if (difference >= 0) {
            *days = difference;
            *years = sy - by - ((sm < bm || (sm == bm && sd < bd)) ? 1 : 0);
            *source = "birth_date_and_study_date";
            return 0;
        }
    }
    if (present(patient_age)) {
        char unit = 0;
        int number = -1, consumed = 0;
        const char *text = patient_age;
        while (*text == ' ')
            text++;
        if (strlen(text) >= 4 && sscanf(text, "%3d%c%n", &number, &unit, &consumed) == 2 &&
            consumed == 4 && number >= 0 && strspn(text + 4, " ") == strlen(text + 4)) {
            switch (unit) {
            case 'D':
                *days = number;
                *years = number / 365;
                break;
            case 'W':
                *days = 7L * number;
                *years = 7L * number / 365;
                break;
            case 'M':
                *days = 30L * number;
                *years = number / 12;
                break;
            case 'Y':
                *days = 365L * number;
                *years = number;
                break;
            default: return -1;
            }
            *source = "patient_age";
            return 0;
        }
    }
    return -1;
}

const char *ext_age_group(const ext_site_rules *rules, long days, long years)
{
    if (days <= (long)rules->neonate_max_days)
        return "neonate";
    if (years <= (long)rules->child_max_years)
        return "child";
    return "adult";
}

/* Room: Station Name through [rooms], calling AE title through
 * [room_by_calling_ae], else the Station Name itself, else the AE title. */
static void classify_room(const ext_site_rules *rules, const ext_classify_input *input,
                          ext_classification *out)
{
    for (size_t i = 0; present(input->station_name) && i < rules->room_count; i++) {
        if (strcasecmp(rules->rooms[i].from, input->station_name) == 0) {
            out->room = rules->rooms[i].to;
            out->room_source = "station_name_map";
            return;
        }
    }
    for (size_t i = 0; present(input->calling_ae_title) && i < rules->room_by_ae_count; i++) {
        if (strcasecmp(rules->rooms_by_ae[i].from, input->calling_ae_title) == 0) {
            out->room = rules->rooms_by_ae[i].to;
            out->room_source = "calling_ae_title_map";
            return;
        }
    }
    if (present(input->station_name)) {
        out->room = input->station_name;
        out->room_source = "station_name";
    } else if (present(input->calling_ae_title)) {
        out->room = input->calling_ae_title;
        out->room_source = "calling_ae_title";
    }
}

void ext_classify(const ext_site_rules *rules, const ext_classify_input *input,
                  ext_classification *out)
{
    memset(out, 0, sizeof *out);
    out->age_days = -1;
    out->exam_type = ext_classify_exam_type(rules, input->fields, &out->exam_type_source);
    for (size_t i = 0; i < rules->preset_count && out->preset == NULL; i++) {
        const ext_preset_source *preset = &rules->presets[i];
        const char *value =
            preset->is_private ? input->private_presets[i] : input->fields[preset->field];
        if (present(value)) {
            out->preset = value;
            out->preset_source = preset->is_private ? "private_tag" : ext_field_name(preset->field);
        }
    }
    classify_room(rules, input, out);
    const char *time_source = NULL;
    int minute = ext_local_minute(input->acquired_at, input->received_at, &time_source);
    out->shift = ext_classify_shift(rules, minute);
    if (out->shift != NULL)
        out->shift_source = time_source;
    char acquisition_date[9] = "";
    const char *study_date = input->study_date;
    if (!present(study_date) && input->acquired_at != NULL && strlen(input->acquired_at) >= 10) {
        snprintf(acquisition_date, sizeof acquisition_date, "%.4s%.2s%.2s", input->acquired_at,
                 input->acquired_at + 5, input->acquired_at + 8);
        study_date = acquisition_date;
    }
    long days = 0, years = 0;
    const char *age_source = NULL;
    if (ext_age(input->patient_age, input->patient_birth_date, study_date, &days, &years,
                &age_source) == 0) {
        out->age_days = days;
        out->age_group = ext_age_group(rules, days, years);
        out->age_group_source = age_source;
    }
    if (rules->record_operator && present(input->operators_name)) {
        out->operator_name = input->operators_name;
        out->operator_source = "operators_name";
    }
}

/*
 * screen_profile.c - a device screen profile and its text form.
 *
 * The text form is one item per line, "name value...", in a fixed order
 * (docs/screen-reading.md shows one):
 *
 *   mitilog-screen-profile 1
 *   key <rest of line>              version N
 *   manufacturer / model_name / software_versions <rest of line, may be empty>
 *   rows R   columns C   band ABOVE BELOW   ink_threshold T   split_width W
 *   glyph_threshold F   glyph_margin F   label_threshold F
 *   slot NAME not_shown
 *   slot NAME LABEL_X BASELINE DECIMALS GAP_MAX STOP_GAP SPAN LABEL_TEXT
 *   label NAME WIDTH HEIGHT HEX      (the label patch of the slot before)
 *   glyph CHARACTER WIDTH HEIGHT HEX
 *
 * HEX is two hexadecimal digits per ink value, row by row.
 */
#include "screen/screen_internal.h"

#include <ctype.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

enum { SCREEN_TEXT_FORMAT = 1 };

screen_profile *screen_profile_new(void)
{
    screen_profile *profile = calloc(1, sizeof *profile);
    if (profile == NULL)
        return NULL;
    profile->version = 1;
    profile->glyph_threshold = 0.80;
    profile->glyph_margin = 0.06;
    profile->label_threshold = 0.80;
    return profile;
}

void screen_template_set(screen_template *t, int width, int height, unsigned char *ink)
{
    t->width = width;
    t->height = height;
    t->ink = ink;
    double n = (double)width * height, sum = 0.0, squares = 0.0;
    for (size_t i = 0; i < (size_t)width * (size_t)height; i++) {
        sum += ink[i];
        squares += (double)ink[i] * ink[i];
    }
    t->mean = n > 0 ? sum / n : 0.0;
    double variance = squares - sum * t->mean;
    t->deviation = variance > 0 ? sqrt(variance) : 0.0;
}

void screen_template_clear(screen_template *t)
{
    free(t->ink);
    memset(t, 0, sizeof *t);
}

void screen_profile_free(screen_profile *profile)
{
    if (profile == NULL)
        return;
    for (int i = 0; i < EXAM_INDEX_COUNT; i++)
        screen_template_clear(&profile->slots[i].label);
    for (size_t i = 0; i < profile->glyph_count; i++)
        screen_template_clear(&profile->glyphs[i].shape);
    free(profile);
}

const char *screen_profile_key(const screen_profile *profile)
{
    return profile != NULL ? profile->key : "";
}

int screen_profile_version(const screen_profile *profile)
{
    return profile != NULL ? profile->version : 0;
}

const char *screen_index_label(exam_index index)
{
    static const char *const labels[EXAM_INDEX_COUNT] = {"MI",  "TIS",       "TIB",
                                                         "TIC", "TIS focus", "TIS surface"};
    return (unsigned)index < EXAM_INDEX_COUNT ? labels[index] : "?";
}

/* The text without leading and trailing padding spaces: its start, and
 * its length in *length. */
static const char *unpadded(const char *text, size_t *length)
{
    while (*text == ' ')
        text++;
    *length = strlen(text);
    while (*length > 0 && text[*length - 1] == ' ')
        (*length)--;
    return text;
}

/* Compares DICOM strings without their padding spaces, on both sides: a
 * profile learned from a DICOM file keeps the value as the file had it,
 * an odd-length value padded with a space (PS3.5 section 6.2). An empty
 * wanted text matches anything. */
static int same_text(const char *wanted, const char *given)
{
    size_t wanted_length = 0, given_length = 0;
    wanted = unpadded(wanted, &wanted_length);
    if (wanted_length == 0)
        return 1;
    if (given == NULL)
        return 0;
    given = unpadded(given, &given_length);
    return wanted_length == given_length && strncmp(wanted, given, given_length) == 0;
}

int screen_profile_matches(const screen_profile *profile, const screen_device *device)
{
    if (profile == NULL || device == NULL)
        return 0;
    if (profile->rows > 0 && device->rows != profile->rows)
        return 0;
    if (profile->columns > 0 && device->columns != profile->columns)
        return 0;
    return same_text(profile->manufacturer, device->manufacturer) &&
           same_text(profile->model_name, device->model_name) &&
           same_text(profile->software_versions, device->software_versions);
}

int screen_profile_matches_but_software(const screen_profile *profile, const screen_device *device)
{
    if (profile == NULL || device == NULL || profile->software_versions[0] == '\0')
        return 0;
    if (profile->rows > 0 && device->rows != profile->rows)
        return 0;
    if (profile->columns > 0 && device->columns != profile->columns)
        return 0;
    return same_text(profile->manufacturer, device->manufacturer) &&
           same_text(profile->model_name, device->model_name) &&
           !same_text(profile->software_versions, device->software_versions);
}

const char *screen_profile_software(const screen_profile *profile)
{
    return profile != NULL ? profile->software_versions : "";
}

/* ---- to text ------------------------------------------------------------ */

typedef struct text_buffer {
    char *data;
    size_t length, capacity;
    int failed;
} text_buffer;

__attribute__((format(printf, 2, 3))) static void append(text_buffer *buffer, const char *format,
                                                         ...)
{
    if (buffer->failed)
        return;
    for (;;) {
        va_list arguments;
        va_start(arguments, format);
        size_t room = buffer->capacity - buffer->length;
        int written = vsnprintf(buffer->data ? buffer->data + buffer->length : NULL,
                                buffer->data ? room : 0, format, arguments);
        va_end(arguments);
        if (written < 0) {
            buffer->failed = 1;
            return;
        }
        if (buffer->data != NULL && (size_t)written < room) {
            buffer->length += (size_t)written;
            return;
        }
        size_t wanted = buffer->capacity * 2 + (size_t)written + 256;
        char *bigger = realloc(buffer->data, wanted);
        if (bigger == NULL) {
            buffer->failed = 1;
            return;
        }
        buffer->data = bigger;
        buffer->capacity = wanted;
    }
}

static void append_hex(text_buffer *buffer, const screen_template *t)
{
    static const char digits[] = "0123456789abcdef";
    size_t n = (size_t)t->width * (size_t)t->height;
    char *hex = malloc(n * 2 + 1);
    if (hex == NULL) {
        buffer->failed = 1;
        return;
    }
    for (size_t i = 0; i < n; i++) {
        hex[2 * i] = digits[t->ink[i] >> 4];
        hex[2 * i + 1] = digits[t->ink[i] & 15];
    }
    hex[2 * n] = '\0';
    append(buffer, "%d %d %s\n", t->width, t->height, hex);
    free(hex);
}

mitilog_status screen_profile_to_text(const screen_profile *profile, char **text,
                                      mitilog_error *error)
{
    if (profile == NULL || text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "screen_profile_to_text: NULL argument");
    *text = NULL;
    text_buffer buffer = {0};
    append(&buffer, "mitilog-screen-profile %d\n", SCREEN_TEXT_FORMAT);
    append(&buffer, "key %s\nversion %d\n", profile->key, profile->version);
    append(&buffer, "manufacturer %s\nmodel_name %s\nsoftware_versions %s\n", profile->manufacturer,
           profile->model_name, profile->software_versions);
    append(&buffer, "rows %d\ncolumns %d\nband %d %d\nink_threshold %d\nsplit_width %d\n",
           profile->rows, profile->columns, profile->band_above, profile->band_below,
           profile->ink_threshold, profile->split_width);
    append(&buffer, "glyph_threshold %.3f\nglyph_margin %.3f\nlabel_threshold %.3f\n",
           profile->glyph_threshold, profile->glyph_margin, profile->label_threshold);
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        const screen_slot *slot = &profile->slots[i];
        const char *name = exam_index_name((exam_index)i);
        if (!slot->shown) {
            append(&buffer, "slot %s not_shown\n", name);
            continue;
        }
        append(&buffer, "slot %s %d %d %d %d %d %d %s\n", name, slot->label_x, slot->baseline,
               slot->decimals, slot->gap_max, slot->stop_gap, slot->span,
               slot->label_text[0] ? slot->label_text : "-");
        append(&buffer, "label %s ", name);
        append_hex(&buffer, &slot->label);
    }
    for (size_t i = 0; i < profile->glyph_count; i++) {
        append(&buffer, "glyph %c ", profile->glyphs[i].character);
        append_hex(&buffer, &profile->glyphs[i].shape);
    }
    if (buffer.failed) {
        free(buffer.data);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                 "out of memory writing a screen profile");
    }
    *text = buffer.data;
    return MITILOG_OK;
}

/* ---- from text ---------------------------------------------------------- */

static int index_by_name(const char *name)
{
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        if (strcmp(name, exam_index_name((exam_index)i)) == 0)
            return i;
    }
    return -1;
}

static int hex_value(char c)
{
    if (c >= '0' && c <= '9')
        return c - '0';
    if (c >= 'a' && c <= 'f')
        return c - 'a' + 10;
    if (c >= 'A' && c <= 'F')
        return c - 'A' + 10;
    return -1;
}

/* Reads "WIDTH HEIGHT HEX" into t; 0 on success. */
static int parse_template(const char *text, screen_template *t)
{
    int width = 0, height = 0, consumed = 0;
    if (sscanf(text, "%d %d %n", &width, &height, &consumed) != 2 || width <= 0 || height <= 0 ||
        width > 512 || height > 128)
        return -1;
    const char *hex = text + consumed;
    size_t n = (size_t)width * (size_t)height;
    if (strlen(hex) != 2 * n)
        return -1;
    unsigned char *ink = malloc(n);
    if (ink == NULL)
        return -1;
    for (size_t i = 0; i < n; i++) {
        int high = hex_value(hex[2 * i]), low = hex_value(hex[2 * i + 1]);
        if (high < 0 || low < 0) {
            free(ink);
            return -1;
        }
        ink[i] = (unsigned char)(high * 16 + low);
    }
    screen_template_clear(t);
    screen_template_set(t, width, height, ink);
    return 0;
}

static void copy_rest(char *target, size_t size, const char *rest)
{
    snprintf(target, size, "%s", rest);
}

/* Parses one line (without its newline) into profile; 0 on success. */
static int parse_line(screen_profile *profile, char *line, int line_number, int *slot_last,
                      const char **problem)
{
    char *space = strchr(line, ' ');
    const char *rest = space != NULL ? space + 1 : "";
    if (space != NULL)
        *space = '\0';
    const char *name = line;
    char word[32] = "";
    double number = 0.0;
    if (line_number == 1) {
        int format = 0;
        if (strcmp(name, "mitilog-screen-profile") != 0 || sscanf(rest, "%d", &format) != 1 ||
            format != SCREEN_TEXT_FORMAT) {
            *problem = "it does not start with 'mitilog-screen-profile 1'";
            return -1;
        }
        return 0;
    }
    if (strcmp(name, "key") == 0) {
        if (rest[0] == '\0' || strlen(rest) >= sizeof profile->key) {
            *problem = "its key is empty or longer than 127 characters";
            return -1;
        }
        copy_rest(profile->key, sizeof profile->key, rest);
    } else if (strcmp(name, "version") == 0) {
        if (sscanf(rest, "%d", &profile->version) != 1 || profile->version < 1) {
            *problem = "its version is not a positive number";
            return -1;
        }
    } else if (strcmp(name, "manufacturer") == 0) {
        copy_rest(profile->manufacturer, sizeof profile->manufacturer, rest);
    } else if (strcmp(name, "model_name") == 0) {
        copy_rest(profile->model_name, sizeof profile->model_name, rest);
    } else if (strcmp(name, "software_versions") == 0) {
        copy_rest(profile->software_versions, sizeof profile->software_versions, rest);
    } else if (strcmp(name, "rows") == 0) {
        if (sscanf(rest, "%d", &profile->rows) != 1 || profile->rows < 0)
            return -1;
    } else if (strcmp(name, "columns") == 0) {
        if (sscanf(rest, "%d", &profile->columns) != 1 || profile->columns < 0)
            return -1;
    } else if (strcmp(name, "band") == 0) {
        if (sscanf(rest, "%d %d", &profile->band_above, &profile->band_below) != 2 ||
            profile->band_above < 3 || profile->band_below < 0 ||
            profile->band_above + profile->band_below > 120)
            return -1;
    } else if (strcmp(name, "ink_threshold") == 0) {
        if (sscanf(rest, "%d", &profile->ink_threshold) != 1 || profile->ink_threshold < 1 ||
            profile->ink_threshold > 254)
            return -1;
    } else if (strcmp(name, "split_width") == 0) {
        if (sscanf(rest, "%d", &profile->split_width) != 1 || profile->split_width < 0 ||
            profile->split_width > 512)
            return -1;
    } else if (strcmp(name, "glyph_threshold") == 0 || strcmp(name, "glyph_margin") == 0 ||
               strcmp(name, "label_threshold") == 0) {
        if (sscanf(rest, "%lf", &number) != 1 || !(number > 0.0 && number < 1.0))
            return -1;
        if (name[0] == 'l')
            profile->label_threshold = number;
        else if (strcmp(name, "glyph_margin") == 0)
            profile->glyph_margin = number;
        else
            profile->glyph_threshold = number;
    } else if (strcmp(name, "slot") == 0) {
        screen_slot parsed = {0};
        char label_text[16] = "";
        if (sscanf(rest, "%31s", word) != 1 || index_by_name(word) < 0) {
            *problem = "a slot names no known index";
            return -1;
        }
        int index = index_by_name(word);
        const char *values = rest + strlen(word);
        if (strcmp(values, " not_shown") == 0) {
            *slot_last = -1;
            screen_template_clear(&profile->slots[index].label);
            memset(&profile->slots[index], 0, sizeof profile->slots[index]);
            return 0;
        }
        if (sscanf(values, "%d %d %d %d %d %d %15s", &parsed.label_x, &parsed.baseline,
                   &parsed.decimals, &parsed.gap_max, &parsed.stop_gap, &parsed.span,
                   label_text) != 7 ||
            parsed.label_x < 0 || parsed.baseline < 0 || parsed.decimals < 1 ||
            parsed.decimals > 3 || parsed.gap_max < 0 || parsed.stop_gap < 1 || parsed.span < 1)
            return -1;
        parsed.shown = 1;
        if (strcmp(label_text, "-") != 0)
            snprintf(parsed.label_text, sizeof parsed.label_text, "%s", label_text);
        screen_template_clear(&profile->slots[index].label);
        profile->slots[index] = parsed;
        *slot_last = index;
    } else if (strcmp(name, "label") == 0) {
        if (sscanf(rest, "%31s", word) != 1 || index_by_name(word) != *slot_last ||
            *slot_last < 0) {
            *problem = "a label line does not follow the slot line of its index";
            return -1;
        }
        if (parse_template(rest + strlen(word), &profile->slots[*slot_last].label) != 0)
            return -1;
    } else if (strcmp(name, "glyph") == 0) {
        if (profile->glyph_count == SCREEN_GLYPH_MAX) {
            *problem = "it has more than 64 glyphs";
            return -1;
        }
        char character = rest[0];
        if (!(isdigit((unsigned char)character) || character == '.') || rest[1] != ' ')
            return -1;
        screen_glyph *glyph = &profile->glyphs[profile->glyph_count];
        memset(glyph, 0, sizeof *glyph);
        if (parse_template(rest + 2, &glyph->shape) != 0)
            return -1;
        glyph->character = character;
        profile->glyph_count++;
    } else {
        *problem = "it has a line of unknown kind";
        return -1;
    }
    return 0;
}

/* Checks what no single line can: every shown slot has its label patch,
 * every template is as tall as the text band. */
static const char *check_profile(const screen_profile *profile)
{
    if (profile->key[0] == '\0')
        return "it has no key";
    if (profile->band_above < 1 || profile->ink_threshold < 1)
        return "it has no text band or ink threshold";
    int height = screen_text_rows(profile);
    int shown = 0;
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        const screen_slot *slot = &profile->slots[i];
        if (!slot->shown)
            continue;
        shown++;
        if (slot->label.ink == NULL || slot->label.height != height)
            return "a slot has no label patch as tall as the text";
    }
    if (shown == 0)
        return "it reads no index";
    for (size_t i = 0; i < profile->glyph_count; i++) {
        if (profile->glyphs[i].shape.height != height)
            return "a glyph is not as tall as the text";
    }
    return NULL;
}

mitilog_status screen_profile_from_text(const char *text, screen_profile **out,
                                        mitilog_error *error)
{
    if (text == NULL || out == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "screen_profile_from_text: NULL argument");
    *out = NULL;
    screen_profile *profile = screen_profile_new();
    char *copy = strdup(text);
    if (profile == NULL || copy == NULL) {
        free(copy);
        screen_profile_free(profile);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                 "out of memory reading a screen profile");
    }
    int line_number = 0, slot_last = -1;
    const char *problem = NULL;
    char *cursor = copy;
    int failed = 0;
    while (*cursor != '\0' && !failed) {
        char *end = strchr(cursor, '\n');
        if (end != NULL)
            *end = '\0';
        size_t length = strlen(cursor);
        if (length > 0 && cursor[length - 1] == '\r')
            cursor[length - 1] = '\0';
        line_number++;
        if (cursor[0] != '\0' && cursor[0] != '#')
            failed = parse_line(profile, cursor, line_number, &slot_last, &problem) != 0;
        else if (line_number == 1)
            failed = 1, problem = "it does not start with 'mitilog-screen-profile 1'";
        cursor = end != NULL ? end + 1 : cursor + length;
    }
    free(copy);
    if (!failed)
        problem = check_profile(profile);
    if (failed || problem != NULL) {
        screen_profile_free(profile);
        if (failed && problem == NULL)
            problem = "a value is missing or out of range";
        return mitilog_error_set(error, MITILOG_ERROR_PARSE,
                                 "screen profile not usable: %s (line %d); learn the "
                                 "device again with 'mitilog device learn'",
                                 problem, line_number);
    }
    *out = profile;
    return MITILOG_OK;
}

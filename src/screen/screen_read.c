/*
 * screen_read.c - reading the indices of one frame with a device profile,
 * and combining the readings of the frames of a cine.
 *
 * For each index the profile draws: the text line must not be blank; the
 * label must be found where the profile puts it (within 2 pixels), better
 * than any other label drawn at the same place; the characters after it,
 * up to a gap wider than the device ever leaves inside a number, are each
 * matched against the device's glyphs and must be certain (correlation at
 * or above the threshold, and a margin over the best other character);
 * the text must be exactly the device's number format. Anything else is
 * "not read" with the reason.
 */
#include "screen/screen_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

enum { SCREEN_VALUE_CHARACTERS_MAX = 6, SCREEN_LABEL_SHIFT = 2 };

typedef struct label_match {
    double score;
    int dx, dy;
    int background;
} label_match;

static int band_top(const screen_profile *profile, const screen_slot *slot)
{
    return slot->baseline - profile->band_above;
}

static int band_height(const screen_profile *profile)
{
    return profile->band_above + profile->band_below + 1;
}

int screen_slot_background(const screen_profile *profile, const screen_image *image,
                           const screen_slot *slot)
{
    int top = band_top(profile, slot);
    return screen_background(image, top, top + band_height(profile) - 1, slot->label_x,
                             slot->label_x + slot->label.width + slot->span);
}

static label_match match_label(const screen_profile *profile, const screen_image *image,
                               const screen_slot *slot)
{
    label_match best = {.score = -1.0};
    best.background = screen_slot_background(profile, image, slot);
    int top = band_top(profile, slot);
    for (int dy = -SCREEN_LABEL_SHIFT; dy <= SCREEN_LABEL_SHIFT; dy++) {
        for (int dx = -SCREEN_LABEL_SHIFT; dx <= SCREEN_LABEL_SHIFT; dx++) {
            double score = screen_correlate(image, best.background, &slot->label,
                                            slot->label_x + dx, top + 2 + dy);
            if (score > best.score) {
                best.score = score;
                best.dx = dx;
                best.dy = dy;
            }
        }
    }
    return best;
}

static void set_reason(screen_value *value, const char *format, const char *a, const char *b)
{
    value->status = SCREEN_VALUE_NOT_READ;
    snprintf(value->reason, sizeof value->reason, format, a, b);
}

/* The label of slot for messages: as drawn when known, else the index. */
static const char *slot_name(const screen_slot *slot, int index)
{
    return slot->label_text[0] ? slot->label_text : screen_index_label((exam_index)index);
}

/* 1 when the text is exactly the device's number format: one or two
 * digits (no leading zero before another digit), a point, decimals
 * digits. */
static int format_matches(const char *text, int decimals)
{
    size_t length = strlen(text);
    const char *point = strchr(text, '.');
    if (point == NULL || strchr(point + 1, '.') != NULL)
        return 0;
    size_t whole = (size_t)(point - text);
    if (whole < 1 || whole > 2 || length - whole - 1 != (size_t)decimals)
        return 0;
    if (whole == 2 && text[0] == '0')
        return 0;
    for (size_t i = 0; i < length; i++) {
        if (i != whole && (text[i] < '0' || text[i] > '9'))
            return 0;
    }
    return 1;
}

/* Matches one character column run; returns the character, or 0 with
 * *why set when it is not certain. */
static char match_blob(const screen_profile *profile, const screen_image *image, int background,
                       int top, const screen_blob *blob, const char **why)
{
    double best_by_character[128];
    for (int i = 0; i < 128; i++)
        best_by_character[i] = -2.0;
    int width = blob->right - blob->left + 1;
    int tried = 0;
    for (size_t g = 0; g < profile->glyph_count; g++) {
        const screen_glyph *glyph = &profile->glyphs[g];
        int difference = glyph->shape.width - width;
        if (difference < -2 || difference > 2)
            continue;
        tried = 1;
        int x = blob->left - difference / 2;
        for (int dy = -1; dy <= 1; dy++) {
            for (int dx = -1; dx <= 1; dx++) {
                double score = screen_correlate(image, background, &glyph->shape, x + dx, top + dy);
                if (score > best_by_character[(int)glyph->character])
                    best_by_character[(int)glyph->character] = score;
            }
        }
    }
    if (!tried) {
        *why = "a character of a width the device's font does not have (characters run "
               "together, or a different font)";
        return 0;
    }
    char best = 0;
    double first = -2.0, second = -2.0;
    for (int c = 0; c < 128; c++) {
        double score = best_by_character[c];
        if (score > first) {
            second = first;
            first = score;
            best = (char)c;
        } else if (score > second) {
            second = score;
        }
    }
    if (first < profile->glyph_threshold) {
        *why = "a character matches none of the device's glyphs well enough";
        return 0;
    }
    if (first - second < profile->glyph_margin) {
        *why = "a character could be either of two glyphs";
        return 0;
    }
    return best;
}

static void read_slot(const screen_profile *profile, const screen_image *image, int index,
                      screen_value *value)
{
    const screen_slot *slot = &profile->slots[index];
    const char *name = slot_name(slot, index);
    int height = band_height(profile);
    int top = band_top(profile, slot);
    int threshold = profile->ink_threshold;
    int last_column = slot->label_x + slot->label.width + slot->span;

    /* Blank or empty: no ink at all where the label and value go. */
    int background = screen_slot_background(profile, image, slot);
    screen_band whole = {.top = top - 1, .bottom = top + height, .background = background};
    screen_blob any;
    int touches = 0;
    if (screen_segment(image, &whole, threshold, slot->label_x - 1, last_column, &any, 1,
                       &touches) == 0) {
        set_reason(value,
                   "nothing is drawn where the profile expects %s (blank or empty "
                   "region)%s",
                   name, "");
        return;
    }

    label_match own = match_label(profile, image, slot);
    /* Another index drawn at the same place (one TI slot that shows TIS,
     * TIB or TIC by exam): its label must not match as well. */
    for (int other = 0; other < EXAM_INDEX_COUNT; other++) {
        const screen_slot *neighbour = &profile->slots[other];
        if (other == index || !neighbour->shown ||
            abs(neighbour->label_x - slot->label_x) > 2 * SCREEN_LABEL_SHIFT ||
            abs(neighbour->baseline - slot->baseline) > 2 * SCREEN_LABEL_SHIFT)
            continue;
        label_match theirs = match_label(profile, image, neighbour);
        if (theirs.score >= profile->label_threshold &&
            theirs.score > own.score - profile->glyph_margin) {
            if (theirs.score > own.score + profile->glyph_margin) {
                set_reason(value,
                           "%s is not displayed on this frame (%s is shown in its "
                           "place)",
                           name, slot_name(neighbour, other));
            } else {
                value->status = SCREEN_VALUE_NOT_READ;
                snprintf(value->reason, sizeof value->reason,
                         "the label at the place of %s could also be %s", name,
                         slot_name(neighbour, other));
            }
            return;
        }
    }
    if (own.score < profile->label_threshold) {
        set_reason(value,
                   "label %s not found where the profile expects it: the screen "
                   "layout may have changed (software update?); learn the device "
                   "again%s",
                   name, "");
        return;
    }

    screen_band band = {
        .top = top + own.dy, .bottom = top + own.dy + height - 1, .background = own.background};
    int start = slot->label_x + own.dx + slot->label.width;
    int limit = start + slot->span - 1;
    int frame_edge = 0;
    if (limit >= image->width) {
        limit = image->width - 1;
        frame_edge = 1;
    }
    /* Characters are cut on the text's rows and the one under the
     * baseline: the margin above may show the picture around a box drawn
     * behind the text, which would join them. */
    screen_band rows = {.top = band.top + 2,
                        .bottom = band.top + profile->band_above + 1,
                        .background = band.background};
    screen_blob blobs[SCREEN_VALUE_CHARACTERS_MAX + 2];
    size_t count = screen_segment(image, &rows, threshold, start, limit, blobs,
                                  sizeof blobs / sizeof blobs[0], &touches);
    count = screen_split_wide(image, &rows, threshold, blobs, count, sizeof blobs / sizeof blobs[0],
                              profile->split_width);
    /* A speck off the baseline (a pixel of the label's edge, noise) is no
     * character: points sit on the baseline, digits are tall. */
    int baseline = band.top + profile->band_above;
    size_t kept = 0;
    for (size_t i = 0; i < count; i++) {
        /* The edge of the box behind the text, or the picture: the text
         * ends there. */
        if (screen_blob_is_barrier(&blobs[i], &rows)) {
            touches = 0;
            break;
        }
        /* Nor is a point before the first digit (a speck at the label's
         * edge): the number starts with a digit. */
        int tall = (blobs[i].bottom - blobs[i].top + 1) * 4 > profile->band_above;
        if (tall || (kept > 0 && blobs[i].bottom >= baseline - 1))
            blobs[kept++] = blobs[i];
    }
    count = kept;
    if (count == 0 || blobs[0].left - start > slot->gap_max) {
        set_reason(value, "no value next to the label %s%s", name, "");
        return;
    }
    size_t used = 1;
    while (used < count && blobs[used].left - blobs[used - 1].right - 1 <= slot->stop_gap)
        used++;
    if (used > SCREEN_VALUE_CHARACTERS_MAX) {
        set_reason(value,
                   "the text after %s is longer than the device's number "
                   "format%s",
                   name, "");
        return;
    }
    if (used == count && touches) {
        set_reason(value,
                   frame_edge ? "the value of %s is cut by the edge of the frame%s"
                              : "the value of %s runs past where the profile "
                                "expects it to end%s",
                   name, "");
        return;
    }
    char text[SCREEN_VALUE_CHARACTERS_MAX + 1];
    for (size_t i = 0; i < used; i++) {
        const char *why = NULL;
        char character = match_blob(profile, image, band.background, band.top + 2, &blobs[i], &why);
        if (character == 0) {
            value->status = SCREEN_VALUE_NOT_READ;
            snprintf(value->reason, sizeof value->reason, "%s: %s", name, why);
            return;
        }
        text[i] = character;
    }
    text[used] = '\0';
    if (!format_matches(text, slot->decimals)) {
        value->status = SCREEN_VALUE_NOT_READ;
        snprintf(value->reason, sizeof value->reason,
                 "%s: '%s' is not the device's number format (%d decimal%s)", name, text,
                 slot->decimals, slot->decimals == 1 ? "" : "s");
        return;
    }
    value->status = SCREEN_VALUE_READ;
    value->value = strtod(text, NULL);
    value->decimals = slot->decimals;
    snprintf(value->text, sizeof value->text, "%s", text);
    value->reason[0] = '\0';
}

mitilog_status screen_read(const screen_profile *profile, const screen_image *image,
                           screen_reading *reading, mitilog_error *error)
{
    if (profile == NULL || image == NULL || reading == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "screen_read: NULL argument");
    memset(reading, 0, sizeof *reading);
    snprintf(reading->profile_key, sizeof reading->profile_key, "%s", profile->key);
    reading->profile_version = profile->version;
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        reading->values[i].status =
            profile->slots[i].shown ? SCREEN_VALUE_NOT_READ : SCREEN_VALUE_NOT_SHOWN;
        if (!profile->slots[i].shown)
            snprintf(reading->values[i].reason, sizeof reading->values[i].reason,
                     "the device profile says %s is not displayed",
                     screen_index_label((exam_index)i));
    }
    if (image->grey == NULL || image->width <= 0 || image->height <= 0 ||
        image->stride < (size_t)image->width)
        snprintf(reading->reason, sizeof reading->reason, "the frame has no pixels");
    else if ((profile->columns > 0 && image->width != profile->columns) ||
             (profile->rows > 0 && image->height != profile->rows))
        snprintf(reading->reason, sizeof reading->reason,
                 "the frame is %dx%d pixels, the profile %.40s is for %dx%d: not the "
                 "same screen",
                 image->width, image->height, profile->key, profile->columns, profile->rows);
    if (reading->reason[0] != '\0') {
        for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
            if (reading->values[i].status == SCREEN_VALUE_NOT_READ)
                snprintf(reading->values[i].reason, sizeof reading->values[i].reason, "%s",
                         reading->reason);
        }
        return MITILOG_OK;
    }
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        if (profile->slots[i].shown)
            read_slot(profile, image, i, &reading->values[i]);
    }
    return MITILOG_OK;
}

void screen_combine(const screen_reading *readings, size_t count, screen_reading *combined)
{
    if (combined == NULL)
        return;
    memset(combined, 0, sizeof *combined);
    if (readings == NULL || count == 0) {
        snprintf(combined->reason, sizeof combined->reason, "no frame was read");
        for (int i = 0; i < EXAM_INDEX_COUNT; i++)
            snprintf(combined->values[i].reason, sizeof combined->values[i].reason,
                     "no frame was read");
        return;
    }
    snprintf(combined->profile_key, sizeof combined->profile_key, "%s", readings[0].profile_key);
    combined->profile_version = readings[0].profile_version;
    int every_frame_refused = 1;
    for (size_t f = 0; f < count; f++)
        every_frame_refused &= readings[f].reason[0] != '\0';
    if (every_frame_refused)
        snprintf(combined->reason, sizeof combined->reason, "%s", readings[0].reason);
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        screen_value *out = &combined->values[i];
        const screen_value *first_read = NULL, *first_refusal = NULL;
        int all_not_shown = 1, disagree = 0;
        for (size_t f = 0; f < count; f++) {
            const screen_value *v = &readings[f].values[i];
            all_not_shown &= v->status == SCREEN_VALUE_NOT_SHOWN;
            if (v->status == SCREEN_VALUE_READ) {
                if (first_read == NULL)
                    first_read = v;
                else if (strcmp(first_read->text, v->text) != 0 && !disagree) {
                    disagree = 1;
                    out->status = SCREEN_VALUE_NOT_READ;
                    snprintf(out->reason, sizeof out->reason,
                             "the frames of this cine disagree: %s on one, %s on another",
                             first_read->text, v->text);
                }
            } else if (v->status == SCREEN_VALUE_NOT_READ && first_refusal == NULL) {
                first_refusal = v;
            }
        }
        if (disagree)
            continue;
        if (first_read != NULL)
            *out = *first_read;
        else if (all_not_shown)
            *out = readings[0].values[i];
        else if (first_refusal != NULL)
            *out = *first_refusal;
    }
}

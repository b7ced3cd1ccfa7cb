/*
 * screen_internal.h - what the files of src/screen/ share; not API.
 *
 * screen_profile.c  the profile struct, its text form, device matching;
 * screen_pixels.c   ink, segmentation into character columns, matching;
 * screen_read.c     reading one frame and combining the frames of a cine;
 * screen_learn.c    learning a profile from labelled frames.
 *
 * Pixels are compared as "ink": the distance of a grey level from the
 * background of the text line (its median), so that light-on-dark and
 * dark-on-light screens and any colours read the same way.
 */
#ifndef MITILOG_SCREEN_INTERNAL_H
#define MITILOG_SCREEN_INTERNAL_H

#include "screen/screen.h"

/* A grey patch: a label or a glyph as cut from a learning frame, in ink
 * (0 background .. 255 strongest text). */
typedef struct screen_template {
    int width, height;
    unsigned char *ink;     /* width * height, owned */
    double mean, deviation; /* of ink; deviation = sqrt(sum (v-mean)^2) */
} screen_template;

/* One character of the device's number font (a digit or '.'). */
typedef struct screen_glyph {
    char character;
    screen_template shape;
} screen_glyph;

/* Where and how one index is drawn. The text line is the band of rows
 * baseline - band_above .. baseline + band_below, a row of margin above
 * the tallest digit and two below the baseline; labels and glyphs are
 * compared on the text's own rows only, baseline - band_above + 2 ..
 * baseline (what lies in the margin, such as the picture around a box
 * drawn behind the text, changes from place to place). The label starts
 * at column label_x; the value follows it. */
typedef struct screen_slot {
    int shown; /* 0: the device does not draw this index */
    int label_x, baseline;
    char label_text[16]; /* e.g. "TIs", for messages ("" unknown) */
    screen_template label;
    int decimals; /* digits after the point (1 or 2) */
    int gap_max;  /* widest gap label end .. first character */
    int stop_gap; /* a wider gap ends the value */
    int span;     /* columns after the label to look in */
} screen_slot;

enum { SCREEN_GLYPH_MAX = 64 };

struct screen_profile {
    char key[SCREEN_KEY_SIZE];
    int version;
    char manufacturer[65], model_name[65], software_versions[129];
    int rows, columns;
    int band_above, band_below; /* rows of the text line around baseline */
    int ink_threshold;          /* ink above this is text */
    int split_width;            /* a wider run is characters touching */
    double glyph_threshold;     /* least correlation of a character */
    double glyph_margin;        /* over the next-best other character */
    double label_threshold;     /* least correlation of a label */
    screen_slot slots[EXAM_INDEX_COUNT];
    screen_glyph glyphs[SCREEN_GLYPH_MAX];
    size_t glyph_count;
};

/* Rows of the text itself (labels and glyphs are this tall). */
static inline int screen_text_rows(const screen_profile *profile)
{
    return profile->band_above - 1;
}

/* screen_profile.c */
screen_profile *screen_profile_new(void);
/* Names as screens show them: "MI", "TIS", ... */
const char *screen_index_label(exam_index index);
/* Takes ownership of ink (width*height); computes mean and deviation. */
void screen_template_set(screen_template *t, int width, int height, unsigned char *ink);
void screen_template_clear(screen_template *t);

/* screen_pixels.c */

/* A text line of a frame: rows top..bottom (inclusive, inside the frame)
 * and the background grey level there. */
typedef struct screen_band {
    int top, bottom;
    int background;
} screen_band;

/* Median grey of rows top..bottom, columns left..right (clipped). */
int screen_median(const screen_image *image, int top, int bottom, int left, int right);
/* The background grey there: the median of the most common band of 24
 * grey levels. Not the median of all: dense bold text, or the picture
 * around a box drawn behind the text, can make up half the pixels. */
int screen_background(const screen_image *image, int top, int bottom, int left, int right);

static inline int screen_ink(const screen_image *image, int background, int x, int y)
{
    int value = image->grey[(size_t)y * image->stride + (size_t)x] - background;
    return value < 0 ? -value : value;
}

/* One character column run: columns left..right, ink rows top..bottom. */
typedef struct screen_blob {
    int left, right, top, bottom;
} screen_blob;

/* Column runs with ink above threshold in band, columns left..right
 * (clipped to the frame), at most max; returns how many were found.
 * *touches_end is set when ink reaches column right. */
size_t screen_segment(const screen_image *image, const screen_band *band, int threshold, int left,
                      int right, screen_blob *blobs, size_t max, int *touches_end);

/* 1 when a run fills the band from its top row to its bottom row: no
 * character does (the band has a margin above and below the text); it is
 * the edge of a box drawn behind the text, or the picture beside it. */
static inline int screen_blob_is_barrier(const screen_blob *blob, const screen_band *band)
{
    return blob->top <= band->top && blob->bottom >= band->bottom;
}

/* Splits every run wider than split_width at its column of least ink
 * (characters drawn touching), keeping at most max runs in blobs; returns
 * the new count. */
size_t screen_split_wide(const screen_image *image, const screen_band *band, int threshold,
                         screen_blob *blobs, size_t count, size_t max, int split_width);

/* Normalised cross-correlation of template t placed at (x, top of band)
 * against the frame's ink; -1 when the window leaves the frame. */
double screen_correlate(const screen_image *image, int background, const screen_template *t, int x,
                        int y);

/* Cuts columns left..right of band (rows top..bottom) as a template. */
int screen_cut(const screen_image *image, int background, int top, int bottom, int left, int right,
               screen_template *t);

/* screen_read.c: the background grey of a slot's text line, from the
 * label's first column to the end of the value's columns
 * (screen_background). */
int screen_slot_background(const screen_profile *profile, const screen_image *image,
                           const screen_slot *slot);

#endif

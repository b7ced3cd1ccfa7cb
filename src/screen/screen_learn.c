/*
 * screen_learn.c - learning a device screen profile from labelled frames.
 *
 * 1. Text is found as small connected components of pixels that stand
 *    out from their neighbourhood, grouped into lines; each line is cut
 *    into character column runs.
 * 2. For each index with a known value, every place in every line where
 *    the characters have the shape of that value as the device would draw
 *    it ("1.2": tall, small at the baseline, tall), preceded by a label
 *    and followed by a gap or the end of the line, is a candidate.
 * 3. A device draws an index at the same place on every frame: the place
 *    found in most examples wins; a tie between places is ambiguous and
 *    the index is not learned.
 * 4. The glyphs of the digits and the point are cut from the values, the
 *    label patch from the label. All ten digits and the point must have
 *    been seen: a digit the profile has never seen could be taken for one
 *    it knows.
 * 5. The learned profile must read every example back exactly.
 */
#include "screen/screen_internal.h"

#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

enum {
    LEARN_LOCAL_RADIUS = 15,    /* neighbourhood for finding text          */
    LEARN_FIRST_THRESHOLD = 48, /* ink that stands out before the text's
                                 * own contrast is known                 */
    LEARN_LINE_MAX = 4096,
    LEARN_BLOB_MAX = 256,
    LEARN_CANDIDATE_MAX = 64,
    LEARN_SAMPLES_PER_CHARACTER = 3
};

typedef struct learn_component {
    int left, right, top, bottom;
} learn_component;

typedef struct learn_line {
    int top, bottom, left, right; /* band of its tall components */
    int height;
    screen_band band;
    screen_blob blobs[LEARN_BLOB_MAX];
    size_t blob_count;
} learn_line;

typedef struct learn_frame {
    learn_line *lines;
    size_t line_count;
} learn_frame;

typedef struct learn_candidate {
    size_t example;
    size_t line;
    size_t label_first, value_first, length;
    int decimals;
    char text[24];
} learn_candidate;

typedef struct report_buffer {
    char *text;
    size_t size, length;
} report_buffer;

__attribute__((format(printf, 2, 3))) static void report_add(report_buffer *report,
                                                             const char *format, ...)
{
    if (report->text == NULL || report->size == 0 || report->length + 1 >= report->size)
        return;
    va_list arguments;
    va_start(arguments, format);
    int written =
        vsnprintf(report->text + report->length, report->size - report->length, format, arguments);
    va_end(arguments);
    if (written > 0)
        report->length += (size_t)written;
    if (report->length >= report->size)
        report->length = report->size - 1;
}

/* ---- 1. text lines ------------------------------------------------------ */

/* Components of pixels differing by more than threshold from the mean of
 * their neighbourhood; only those small enough to be characters. */
static mitilog_status find_components(const screen_image *image, learn_component **out,
                                      size_t *count)
{
    int width = image->width, height = image->height;
    size_t pixels = (size_t)width * (size_t)height;
    int64_t *integral = malloc((size_t)(width + 1) * (size_t)(height + 1) * sizeof *integral);
    unsigned char *mask = calloc(pixels, 1);
    int *stack = malloc(pixels * sizeof *stack);
    short *difference = malloc(pixels * sizeof *difference);
    learn_component *components = NULL;
    size_t used = 0, capacity = 0;
    mitilog_status status = MITILOG_OK;
    if (integral == NULL || mask == NULL || stack == NULL || difference == NULL) {
        status = MITILOG_ERROR_MEMORY;
        goto done;
    }
    size_t row_length = (size_t)width + 1;
    for (int x = 0; x <= width; x++)
        integral[x] = 0;
    for (int y = 1; y <= height; y++) {
        int64_t running = 0;
        integral[(size_t)y * row_length] = 0;
        const unsigned char *row = image->grey + (size_t)(y - 1) * image->stride;
        for (int x = 1; x <= width; x++) {
            running += row[x - 1];
            integral[(size_t)y * row_length + (size_t)x] =
                integral[(size_t)(y - 1) * row_length + (size_t)x] + running;
        }
    }
    for (int y = 0; y < height; y++) {
        int y0 = y - LEARN_LOCAL_RADIUS < 0 ? 0 : y - LEARN_LOCAL_RADIUS;
        int y1 = y + LEARN_LOCAL_RADIUS + 1 > height ? height : y + LEARN_LOCAL_RADIUS + 1;
        for (int x = 0; x < width; x++) {
            int x0 = x - LEARN_LOCAL_RADIUS < 0 ? 0 : x - LEARN_LOCAL_RADIUS;
            int x1 = x + LEARN_LOCAL_RADIUS + 1 > width ? width : x + LEARN_LOCAL_RADIUS + 1;
            int64_t sum = integral[(size_t)y1 * row_length + (size_t)x1] -
                          integral[(size_t)y0 * row_length + (size_t)x1] -
                          integral[(size_t)y1 * row_length + (size_t)x0] +
                          integral[(size_t)y0 * row_length + (size_t)x0];
            int mean = (int)(sum / ((int64_t)(y1 - y0) * (x1 - x0)));
            difference[(size_t)y * (size_t)width + (size_t)x] =
                (short)(image->grey[(size_t)y * image->stride + (size_t)x] - mean);
        }
    }
    /* Brighter than the neighbourhood, then darker: one at a time, so that
     * the dark box behind light text is not joined to its characters. */
    for (int polarity = 1; polarity >= -1; polarity -= 2) {
        for (size_t p = 0; p < pixels; p++)
            mask[p] = difference[p] * polarity > LEARN_FIRST_THRESHOLD;
        for (size_t start = 0; start < pixels; start++) {
            if (mask[start] != 1)
                continue;
            learn_component c = {.left = (int)(start % (size_t)width),
                                 .right = (int)(start % (size_t)width),
                                 .top = (int)(start / (size_t)width),
                                 .bottom = (int)(start / (size_t)width)};
            size_t depth = 0;
            stack[depth++] = (int)start;
            mask[start] = 2;
            while (depth > 0) {
                int p = stack[--depth];
                int px = p % width, py = p / width;
                if (px < c.left)
                    c.left = px;
                if (px > c.right)
                    c.right = px;
                if (py < c.top)
                    c.top = py;
                if (py > c.bottom)
                    c.bottom = py;
                for (int dy = -1; dy <= 1; dy++) {
                    for (int dx = -1; dx <= 1; dx++) {
                        int nx = px + dx, ny = py + dy;
                        if (nx < 0 || ny < 0 || nx >= width || ny >= height)
                            continue;
                        size_t q = (size_t)ny * (size_t)width + (size_t)nx;
                        if (mask[q] == 1) {
                            mask[q] = 2;
                            stack[depth++] = (int)q;
                        }
                    }
                }
            }
            int w = c.right - c.left + 1, h = c.bottom - c.top + 1;
            if (h < 5 || h > 48 || w > 48)
                continue;
            if (used == capacity) {
                size_t grown = capacity ? capacity * 2 : 256;
                learn_component *bigger = realloc(components, grown * sizeof *bigger);
                if (bigger == NULL) {
                    status = MITILOG_ERROR_MEMORY;
                    goto done;
                }
                components = bigger;
                capacity = grown;
            }
            components[used++] = c;
        }
    }
done:
    free(integral);
    free(mask);
    free(stack);
    free(difference);
    if (status != MITILOG_OK) {
        free(components);
        return status;
    }
    *out = components;
    *count = used;
    return MITILOG_OK;
}

static int compare_left(const void *a, const void *b)
{
    const learn_component *x = a, *y = b;
    return (x->left > y->left) - (x->left < y->left);
}

static int overlap(int a0, int a1, int b0, int b1)
{
    int low = a0 > b0 ? a0 : b0, high = a1 < b1 ? a1 : b1;
    return high - low + 1;
}

static mitilog_status find_lines(const screen_image *image, int threshold, learn_frame *frame)
{
    learn_component *components = NULL;
    size_t count = 0;
    mitilog_status status = find_components(image, &components, &count);
    if (status != MITILOG_OK)
        return status;
    qsort(components, count, sizeof *components, compare_left);
    learn_line *lines = calloc(LEARN_LINE_MAX, sizeof *lines);
    if (lines == NULL) {
        free(components);
        return MITILOG_ERROR_MEMORY;
    }
    size_t line_count = 0;
    int *members = calloc(LEARN_LINE_MAX, sizeof *members);
    if (members == NULL) {
        free(components);
        free(lines);
        return MITILOG_ERROR_MEMORY;
    }
    for (size_t i = 0; i < count; i++) {
        learn_component *c = &components[i];
        int h = c->bottom - c->top + 1;
        size_t chosen = line_count;
        for (size_t l = 0; l < line_count; l++) {
            learn_line *line = &lines[l];
            int common = overlap(line->top, line->bottom, c->top, c->bottom);
            int smaller = h < line->height ? h : line->height;
            if (common * 10 >= smaller * 7 && c->left - line->right <= 2 * line->height &&
                abs(h - line->height) * 3 <= line->height) {
                chosen = l;
                break;
            }
        }
        if (chosen == line_count) {
            if (line_count == LEARN_LINE_MAX)
                continue;
            lines[line_count] = (learn_line){.top = c->top,
                                             .bottom = c->bottom,
                                             .left = c->left,
                                             .right = c->right,
                                             .height = h};
            members[line_count] = 1;
            line_count++;
        } else {
            learn_line *line = &lines[chosen];
            if (c->top < line->top)
                line->top = c->top;
            if (c->bottom > line->bottom)
                line->bottom = c->bottom;
            if (c->right > line->right)
                line->right = c->right;
            members[chosen]++;
        }
    }
    free(components);
    /* Each line of two or more characters is cut into column runs. */
    size_t kept = 0;
    for (size_t l = 0; l < line_count; l++) {
        learn_line *line = &lines[l];
        if (members[l] < 2)
            continue;

        line->height = line->bottom - line->top + 1;
        line->band.top = line->top - 1 < 0 ? 0 : line->top - 1;
        line->band.bottom =
            line->bottom + 1 >= image->height ? image->height - 1 : line->bottom + 1;
        line->band.background = screen_median(image, line->band.top, line->band.bottom,
                                              line->left - 2, line->right + 2);
        int touches = 0;
        int line_threshold = threshold;
        if (line_threshold == 0) {
            /* Before the text's own contrast is known: half the ink of the
             * line's strongest twentieth. */
            unsigned histogram[256] = {0};
            unsigned total = 0, seen = 0;
            for (int y = line->band.top; y <= line->band.bottom; y++) {
                for (int x = line->left; x <= line->right; x++) {
                    histogram[screen_ink(image, line->band.background, x, y)]++;
                    total++;
                }
            }
            line_threshold = LEARN_FIRST_THRESHOLD;
            for (int level = 255; level >= 0; level--) {
                seen += histogram[level];
                if (seen * 20 >= total) {
                    if (level / 2 > line_threshold)
                        line_threshold = level / 2;
                    break;
                }
            }
        }
        /* A character touching what lies beside the text (a box's edge,
         * the picture) was joined to it in the search for characters:
         * look a little further right. */
        int right = line->right + 2 * line->height;
        line->blob_count = screen_segment(image, &line->band, line_threshold, line->left - 2, right,
                                          line->blobs, LEARN_BLOB_MAX, &touches);
        /* What fills the band from top to bottom is no character (the
         * edge of a box behind the text, the picture). */
        size_t kept_blobs = 0;
        for (size_t b = 0; b < line->blob_count; b++) {
            if (!screen_blob_is_barrier(&line->blobs[b], &line->band))
                line->blobs[kept_blobs++] = line->blobs[b];
        }
        line->blob_count = kept_blobs;
        /* No digit is wider than the line is high. */
        line->blob_count =
            screen_split_wide(image, &line->band, line_threshold, line->blobs, line->blob_count,
                              LEARN_BLOB_MAX, line->height * 95 / 100);
        lines[kept++] = *line;
    }
    free(members);
    frame->lines = lines;
    frame->line_count = kept;
    return MITILOG_OK;
}

/* ---- 2. candidates ----------------------------------------------------- */

static int blob_is_point(const learn_line *line, const screen_blob *b)
{
    int h = b->bottom - b->top + 1, w = b->right - b->left + 1;
    return h * 100 <= line->height * 35 && w * 2 <= line->height &&
           b->bottom >= line->bottom - 1 - line->height / 8;
}

static int blob_is_tall(const learn_line *line, const screen_blob *b)
{
    return (b->bottom - b->top + 1) * 100 >= line->height * 55 && !blob_is_point(line, b);
}

static int gap_between(const screen_blob *a, const screen_blob *b)
{
    return b->left - a->right - 1;
}

/* Candidates for text (e.g. "1.2") in one line of one example. */
static size_t find_in_line(const learn_line *line, size_t example, size_t line_index,
                           const char *text, int decimals, learn_candidate *found, size_t room)
{
    size_t length = strlen(text), count = 0;
    for (size_t start = 1; start + length <= line->blob_count && count < room; start++) {
        const screen_blob *b = line->blobs + start;
        int ok = 1, inner_gap = 0, baseline = -1;
        for (size_t k = 0; k < length && ok; k++) {
            int point = text[k] == '.';
            ok = point ? blob_is_point(line, &b[k]) : blob_is_tall(line, &b[k]);
            if (ok && !point) {
                if (baseline < 0)
                    baseline = b[k].bottom;
                ok = abs(b[k].bottom - baseline) <= 1;
            }
            if (k > 0) {
                int gap = gap_between(&b[k - 1], &b[k]);
                if (gap > inner_gap)
                    inner_gap = gap;
            }
        }
        if (!ok)
            continue;
        /* Followed by a gap wider than any inside the number, or nothing. */
        if (start + length < line->blob_count &&
            gap_between(&b[length - 1], &b[length]) <= inner_gap + 1)
            continue;
        /* Preceded by a label: the word just before, close enough. */
        int label_gap = gap_between(&b[-1], &b[0]);
        if (label_gap > 3 * line->height)
            continue;
        size_t first = start - 1;
        /* Letters of a label sit closer than a third of the line height,
         * or than the widest gap inside the number. */
        int word_gap = inner_gap + 1 > line->height / 3 ? inner_gap + 1 : line->height / 3;
        if (word_gap < 2)
            word_gap = 2;
        while (first > 0 && start - first < 6 &&
               gap_between(&line->blobs[first - 1], &line->blobs[first]) <= word_gap)
            first--;
        /* A label that runs on from a longer word is not one. */
        if (first > 0 && gap_between(&line->blobs[first - 1], &line->blobs[first]) <= word_gap)
            continue;
        learn_candidate *c = &found[count++];
        c->example = example;
        c->line = line_index;
        c->label_first = first;
        c->value_first = start;
        c->length = length;
        c->decimals = decimals;
        snprintf(c->text, sizeof c->text, "%s", text);
    }
    return count;
}

/* Text forms the value may be drawn in: as typed, or with one and two
 * decimals. */
static size_t value_texts(const screen_value *truth, char texts[2][24], int decimals[2])
{
    if (truth->text[0] != '\0') {
        const char *point = strchr(truth->text, '.');
        snprintf(texts[0], sizeof texts[0], "%s", truth->text);
        decimals[0] = point != NULL ? (int)strlen(point + 1) : 0;
        return decimals[0] >= 1 ? 1 : 0;
    }
    if (truth->decimals > 0) {
        snprintf(texts[0], sizeof texts[0], "%.*f", truth->decimals, truth->value);
        decimals[0] = truth->decimals;
        return 1;
    }
    snprintf(texts[0], sizeof texts[0], "%.1f", truth->value);
    snprintf(texts[1], sizeof texts[1], "%.2f", truth->value);
    decimals[0] = 1;
    decimals[1] = 2;
    return 2;
}

/* ---- the whole ---------------------------------------------------------- */

typedef struct learn_pick {
    int found; /* this example's candidate is known */
    learn_candidate candidate;
} learn_pick;

static const screen_blob *candidate_blob(const learn_frame *frames, const learn_candidate *c,
                                         size_t k)
{
    return &frames[c->example].lines[c->line].blobs[k];
}

static int candidate_label_x(const learn_frame *frames, const learn_candidate *c)
{
    return candidate_blob(frames, c, c->label_first)->left;
}

static int candidate_top(const learn_frame *frames, const learn_candidate *c)
{
    return frames[c->example].lines[c->line].top;
}

static int same_place(const learn_frame *frames, const learn_candidate *a, const learn_candidate *b)
{
    /* Not the number of label characters: a thin letter may come apart
     * in one frame and not in another. */
    return abs(candidate_label_x(frames, a) - candidate_label_x(frames, b)) <= 2 &&
           abs(candidate_top(frames, a) - candidate_top(frames, b)) <= 2 &&
           a->decimals == b->decimals;
}

static int candidate_baseline(const learn_frame *frames, const learn_candidate *c)
{
    int baseline = 0;
    for (size_t k = 0; k < c->length; k++) {
        const screen_blob *b = candidate_blob(frames, c, c->value_first + k);
        if (c->text[k] != '.' && b->bottom > baseline)
            baseline = b->bottom;
    }
    return baseline;
}

/* ---- 3. which place shows which index ----------------------------------- */

/* A place: where values of one shape are drawn after a label in several
 * examples; cands[e] is its candidate in example e, or -1. */
typedef struct learn_place {
    const learn_candidate *first;
    int letters; /* label characters, a colon not counted */
    int *cands;
} learn_place;

/* The shape of a value: digits as '0', the point as '.'. */
static void value_shape(const char *text, char *shape, size_t size)
{
    size_t i = 0;
    for (; text[i] && i + 1 < size; i++)
        shape[i] = text[i] == '.' ? '.' : '0';
    shape[i] = '\0';
}

/* 1 when the column run is a colon: narrow, with an empty row inside. */
static int blob_is_colon(const screen_image *image, const learn_line *line, const screen_blob *b,
                         int threshold)
{
    if ((b->right - b->left + 1) * 100 > line->height * 40)
        return 0;
    for (int y = b->top + 1; y < b->bottom; y++) {
        int ink = 0;
        for (int x = b->left; x <= b->right && !ink; x++)
            ink = screen_ink(image, line->band.background, x, y) > threshold;
        if (!ink)
            return 1;
    }
    return 0;
}

/* Label characters a screen draws before each index: "MI" has two,
 * "TIS", "TIB", "TIC" (any case) three, the focus and surface variants
 * at least three. */
static int letters_fit(int index, int letters)
{
    if (index == EXAM_INDEX_MI)
        return letters == 2;
    if (index == EXAM_INDEX_TIS || index == EXAM_INDEX_TIB || index == EXAM_INDEX_TIC)
        return letters == 3;
    return letters >= 3;
}

typedef struct learn_search {
    const learn_frame *frames;
    const screen_example *examples;
    size_t example_count;
    learn_place *places;
    size_t place_count;
    int indices[EXAM_INDEX_COUNT];
    size_t index_count;
    /* compatible[k][p]: the form (1 + decimals) index k takes at place p,
     * 0 when incompatible */
    int compatible[EXAM_INDEX_COUNT][64];
    char forms[EXAM_INDEX_COUNT][64][8][24]; /* text per example (first 8) */
    int current[EXAM_INDEX_COUNT], best[EXAM_INDEX_COUNT], second[EXAM_INDEX_COUNT];
    int best_assigned;
    double best_penalty, second_penalty;
    const learn_candidate *candidates;
    size_t evaluations;
} learn_search;

/* Similarity of two character column runs, each cut tight; 0 when their
 * sizes differ by more than two pixels. */
static double blob_similarity(const learn_search *search, size_t ea, const learn_line *la,
                              const screen_blob *a, size_t eb, const learn_line *lb,
                              const screen_blob *b)
{
    int wa = a->right - a->left + 1, ha = a->bottom - a->top + 1;
    int wb = b->right - b->left + 1, hb = b->bottom - b->top + 1;
    if (abs(wa - wb) > 2 || abs(ha - hb) > 2)
        return 0.0;
    int w = wa < wb ? wa : wb, h = ha < hb ? ha : hb;
    screen_template t = {0};
    if (screen_cut(&search->examples[eb].image, lb->band.background, b->top, b->top + h - 1,
                   b->left, b->left + w - 1, &t) != 0)
        return 0.0;
    double best = 0.0;
    for (int oy = -(hb - h); oy <= ha - h; oy++) {
        for (int ox = -(wb - w); ox <= wa - w; ox++) {
            double score = screen_correlate(&search->examples[ea].image, la->band.background, &t,
                                            a->left + ox, a->top + oy);
            if (score > best)
                best = score;
        }
    }
    screen_template_clear(&t);
    return best;
}

typedef struct learn_sample {
    char character;
    size_t example;
    const learn_line *line;
    const screen_blob *blob;
} learn_sample;

static const learn_candidate *place_candidate(const learn_search *search, size_t p, size_t e)
{
    int i = search->places[p].cands[e];
    return i < 0 ? NULL : &search->candidates[e * LEARN_CANDIDATE_MAX + (size_t)i];
}

/* How badly the current assignment of places to indices explains the
 * digits: the same digit drawn unlike itself, or two digits drawn alike. */
static double assignment_penalty(learn_search *search)
{
    enum { SAMPLE_MAX = EXAM_INDEX_COUNT * 8 * 6 };
    learn_sample samples[SAMPLE_MAX];
    size_t n = 0;
    for (size_t k = 0; k < search->index_count; k++) {
        int p = search->current[k];
        if (p < 0)
            continue;
        for (size_t e = 0; e < search->example_count && e < 8; e++) {
            const learn_candidate *c = place_candidate(search, (size_t)p, e);
            const char *text = search->forms[k][p][e];
            if (c == NULL || text[0] == '\0')
                continue;
            const learn_line *line = &search->frames[e].lines[c->line];
            for (size_t j = 0; j < c->length && n < SAMPLE_MAX; j++) {
                if (text[j] == '.')
                    continue;
                samples[n++] = (learn_sample){.character = text[j],
                                              .example = e,
                                              .line = line,
                                              .blob = &line->blobs[c->value_first + j]};
            }
        }
    }
    double penalty = 0.0;
    for (size_t i = 0; i < n; i++) {
        for (size_t j = i + 1; j < n; j++) {
            double similarity =
                blob_similarity(search, samples[i].example, samples[i].line, samples[i].blob,
                                samples[j].example, samples[j].line, samples[j].blob);
            if (samples[i].character == samples[j].character)
                penalty += 1.0 - similarity;
            else if (similarity > 0.75)
                penalty += (similarity - 0.75) * 4.0;
        }
    }
    /* A label of another length than the index's usual one counts
     * against the assignment, but characters drawn touching can make a
     * label look shorter. */
    for (size_t k = 0; k < search->index_count; k++) {
        int p = search->current[k];
        if (p >= 0 && !letters_fit(search->indices[k], search->places[p].letters))
            penalty += 2.0;
    }
    search->evaluations++;
    return penalty;
}

/* 1 when index k may take place p: a place free so far, or one that shows
 * other indices never given a value on the same frame as k (one place
 * showing TIS, TIB or TIC by exam; the labels tell them apart). */
static int place_free_for(const learn_search *search, size_t k, size_t p, unsigned long used)
{
    if (!(used & (1ul << p)))
        return 1;
    for (size_t j = 0; j < k; j++) {
        if (search->current[j] != (int)p)
            continue;
        for (size_t e = 0; e < search->example_count; e++) {
            const screen_value *truth = search->examples[e].truth;
            if (truth[search->indices[k]].status == SCREEN_VALUE_READ &&
                truth[search->indices[j]].status == SCREEN_VALUE_READ)
                return 0;
        }
    }
    return 1;
}

static void search_assign(learn_search *search, size_t k, int assigned, unsigned long used)
{
    if (search->evaluations > 20000)
        return;
    if (k == search->index_count) {
        double penalty = assignment_penalty(search);
        if (assigned > search->best_assigned ||
            (assigned == search->best_assigned && penalty < search->best_penalty)) {
            if (assigned == search->best_assigned) {
                search->second_penalty = search->best_penalty;
                memcpy(search->second, search->best, sizeof search->second);
            } else {
                search->second_penalty = 1e300;
            }
            search->best_assigned = assigned;
            search->best_penalty = penalty;
            memcpy(search->best, search->current, sizeof search->best);
        } else if (assigned == search->best_assigned && penalty < search->second_penalty) {
            search->second_penalty = penalty;
            memcpy(search->second, search->current, sizeof search->second);
        }
        return;
    }
    int any = 0;
    for (size_t p = 0; p < search->place_count; p++) {
        if (!search->compatible[k][p] || !place_free_for(search, k, p, used))
            continue;
        any = 1;
        search->current[k] = (int)p;
        search_assign(search, k + 1, assigned + 1, used | (1ul << p));
    }
    search->current[k] = -1;
    if (!any || search->place_count > search->index_count)
        search_assign(search, k + 1, assigned, used);
}

/* Finds the places of every line of every example, which index each
 * shows, and fills picks. Indices that cannot be placed for certain are
 * reported and left out. */
static mitilog_status place_indices(const learn_frame *frames, const screen_example *examples,
                                    size_t count, int threshold, learn_candidate *candidates,
                                    size_t *candidate_counts, learn_pick (*picks)[EXAM_INDEX_COUNT],
                                    int learned[EXAM_INDEX_COUNT], report_buffer *report)
{
    static const char *const patterns[] = {"0.0", "00.0", "0.00", "00.00"};
    static const int pattern_decimals[] = {1, 1, 2, 2};
    for (size_t e = 0; e < count; e++) {
        candidate_counts[e] = 0;
        for (size_t l = 0; l < frames[e].line_count; l++) {
            for (size_t q = 0; q < 4; q++)
                candidate_counts[e] +=
                    find_in_line(&frames[e].lines[l], e, l, patterns[q], pattern_decimals[q],
                                 &candidates[e * LEARN_CANDIDATE_MAX + candidate_counts[e]],
                                 LEARN_CANDIDATE_MAX - candidate_counts[e]);
        }
    }
    learn_search *search = calloc(1, sizeof *search);
    learn_place *places = calloc(64, sizeof *places);
    int *slots = malloc(64 * count * sizeof *slots);
    if (search == NULL || places == NULL || slots == NULL) {
        free(search);
        free(places);
        free(slots);
        return MITILOG_ERROR_MEMORY;
    }
    size_t place_count = 0;
    for (size_t e = 0; e < count; e++) {
        for (size_t i = 0; i < candidate_counts[e]; i++) {
            const learn_candidate *c = &candidates[e * LEARN_CANDIDATE_MAX + i];
            size_t p = 0;
            while (p < place_count && !same_place(frames, c, places[p].first))
                p++;
            if (p == place_count) {
                if (place_count == 64)
                    continue;
                places[p].first = c;
                places[p].cands = slots + p * count;
                for (size_t f = 0; f < count; f++)
                    places[p].cands[f] = -1;
                const learn_line *line = &frames[e].lines[c->line];
                int letters = 0;
                for (size_t b = c->label_first; b < c->value_first; b++)
                    letters += !blob_is_colon(&examples[e].image, line, &line->blobs[b], threshold);
                places[p].letters = letters;
                place_count++;
            }
            if (places[p].cands[e] < 0)
                places[p].cands[e] = (int)i;
        }
    }
    search->frames = frames;
    search->examples = examples;
    search->example_count = count;
    search->candidates = candidates;
    search->places = places;
    search->place_count = place_count;
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        int known = 0;
        for (size_t e = 0; e < count; e++)
            known |= examples[e].truth[i].status == SCREEN_VALUE_READ;
        if (known)
            search->indices[search->index_count++] = i;
    }
    for (size_t k = 0; k < search->index_count; k++) {
        int index = search->indices[k];
        for (size_t p = 0; p < place_count; p++) {
            int fits = 1;
            for (size_t e = 0; e < count && fits; e++) {
                const screen_value *truth = &examples[e].truth[index];
                if (truth->status != SCREEN_VALUE_READ)
                    continue;
                const learn_candidate *c = place_candidate(search, p, e);
                if (c == NULL) {
                    fits = 0;
                    break;
                }
                char texts[2][24], shape[24], drawn[24];
                int decimals[2];
                size_t forms = value_texts(truth, texts, decimals);
                value_shape(c->text, drawn, sizeof drawn);
                fits = 0;
                for (size_t f = 0; f < forms; f++) {
                    value_shape(texts[f], shape, sizeof shape);
                    if (strcmp(shape, drawn) == 0 && decimals[f] == c->decimals) {
                        fits = 1;
                        if (e < 8)
                            snprintf(search->forms[k][p][e], 24, "%.23s", texts[f]);
                    }
                }
            }
            search->compatible[k][p] = fits;
        }
        search->current[k] = -1;
    }
    search->best_assigned = -1;
    search->best_penalty = search->second_penalty = 1e300;
    search_assign(search, 0, 0, 0);

    for (size_t k = 0; k < search->index_count; k++) {
        int index = search->indices[k];
        int p = search->best_assigned >= 0 ? search->best[k] : -1;
        learned[index] = 0;
        if (p < 0) {
            report_add(report, "%s not learned: its value was not found next to a label\n",
                       screen_index_label((exam_index)index));
            continue;
        }
        /* Another assignment explaining the digits nearly as well, with
         * this index elsewhere: the examples do not tell. */
        if (search->second_penalty < search->best_penalty + 0.5 && search->second[k] != p) {
            report_add(report,
                       "%s not learned: the examples do not tell which of two places "
                       "shows it (add a frame whose values differ)\n",
                       screen_index_label((exam_index)index));
            continue;
        }
        learned[index] = 1;
        for (size_t e = 0; e < count; e++) {
            const learn_candidate *c = place_candidate(search, (size_t)p, e);
            picks[e][index].found = 0;
            if (c == NULL || examples[e].truth[index].status != SCREEN_VALUE_READ)
                continue;
            char texts[2][24], shape[24], drawn[24];
            int decimals[2];
            size_t forms = value_texts(&examples[e].truth[index], texts, decimals);
            value_shape(c->text, drawn, sizeof drawn);
            for (size_t f = 0; f < forms; f++) {
                value_shape(texts[f], shape, sizeof shape);
                if (strcmp(shape, drawn) == 0 && decimals[f] == c->decimals) {
                    picks[e][index].found = 1;
                    picks[e][index].candidate = *c;
                    snprintf(picks[e][index].candidate.text, 24, "%.23s", texts[f]);
                }
            }
        }
    }
    free(search);
    free(places);
    free(slots);
    return MITILOG_OK;
}

/* Best correlation of the narrower template slid across the wider one
 * (same height). */
static double template_similarity(const screen_template *a, const screen_template *b)
{
    const screen_template *wide = a->width >= b->width ? a : b;
    const screen_template *narrow = wide == a ? b : a;
    if (wide->height != narrow->height)
        return -1.0;
    screen_image patch = {.width = wide->width,
                          .height = wide->height,
                          .stride = (size_t)wide->width,
                          .grey = wide->ink};
    double best = -1.0;
    for (int x = 0; x + narrow->width <= wide->width; x++) {
        double score = screen_correlate(&patch, 0, narrow, x, 0);
        if (score > best)
            best = score;
    }
    return best;
}

static int add_glyph(screen_profile *profile, const screen_image *image, int background, int top,
                     int bottom, const screen_blob *blob, char character, const char **problem)
{
    screen_template cut = {0};
    if (screen_cut(image, background, top, bottom, blob->left, blob->right, &cut) != 0) {
        *problem = "a character lies too near the edge of the frame";
        return -1;
    }
    size_t samples = 0;
    for (size_t g = 0; g < profile->glyph_count; g++) {
        screen_glyph *glyph = &profile->glyphs[g];
        if (glyph->character != character)
            continue;
        samples++;
        if (abs(glyph->shape.width - cut.width) > 2)
            continue;
        /* The same character must look the same wherever it is drawn; if
         * not, a value given for the example is not the one drawn. */
        double best = template_similarity(&glyph->shape, &cut);
        if (best < 0.80) {
            *problem = "the same digit looks different in two places: a value given for "
                       "an example is not the one on its screen";
            screen_template_clear(&cut);
            return -1;
        }
        if (best > 0.98 && glyph->shape.width == cut.width) {
            screen_template_clear(&cut);
            return 0;
        }
    }
    if (samples >= LEARN_SAMPLES_PER_CHARACTER || profile->glyph_count == SCREEN_GLYPH_MAX) {
        screen_template_clear(&cut);
        return 0;
    }
    profile->glyphs[profile->glyph_count].character = character;
    profile->glyphs[profile->glyph_count].shape = cut;
    profile->glyph_count++;
    return 0;
}

/* The learned profile reads every example back: a learned index must read
 * exactly its value where it was found, and nowhere read another. */
static int verify(const screen_profile *profile, const screen_example *examples, size_t count,
                  learn_pick picks[][EXAM_INDEX_COUNT], report_buffer *report)
{
    int failures = 0;
    for (size_t e = 0; e < count; e++) {
        screen_reading reading;
        if (screen_read(profile, &examples[e].image, &reading, NULL) != MITILOG_OK)
            return -1;
        for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
            if (!profile->slots[i].shown || examples[e].truth[i].status != SCREEN_VALUE_READ)
                continue;
            const screen_value *v = &reading.values[i];
            const char *expected = picks[e][i].found ? picks[e][i].candidate.text : NULL;
            if (v->status == SCREEN_VALUE_READ &&
                (expected == NULL || strcmp(v->text, expected) != 0)) {
                report_add(report, "example %zu: %s read back as %s, given %s\n", e + 1,
                           screen_index_label((exam_index)i), v->text,
                           expected ? expected : "a value not drawn");
                failures++;
            } else if (v->status != SCREEN_VALUE_READ && expected != NULL) {
                report_add(report, "example %zu: %s not read back: %s\n", e + 1,
                           screen_index_label((exam_index)i), v->reason);
                failures++;
            }
        }
    }
    return failures;
}

static mitilog_status learn_once(const screen_device *device, const char *profile_key,
                                 const screen_example *examples, size_t count, int contrast_percent,
                                 screen_profile **out, char *report_text, size_t report_size,
                                 mitilog_error *error)
{
    report_buffer report = {.text = report_text, .size = report_size};
    if (report_text != NULL && report_size > 0)
        report_text[0] = '\0';
    if (out == NULL || examples == NULL || count == 0 || profile_key == NULL ||
        profile_key[0] == '\0' || strlen(profile_key) >= SCREEN_KEY_SIZE ||
        strchr(profile_key, '\n') != NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "screen_learn: needs a key (one line, under 128 "
                                 "characters) and at least one example");
    *out = NULL;
    int width = examples[0].image.width, height = examples[0].image.height;
    for (size_t e = 0; e < count; e++) {
        const screen_image *image = &examples[e].image;
        if (image->grey == NULL || image->width < 16 || image->height < 16 ||
            image->stride < (size_t)image->width)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "example %zu has no usable pixels", e + 1);
        if (image->width != width || image->height != height)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "example %zu is %dx%d, example 1 is %dx%d: learn one "
                                     "screen size at a time",
                                     e + 1, image->width, image->height, width, height);
    }

    mitilog_status status = MITILOG_OK;
    learn_frame *frames = calloc(count, sizeof *frames);
    learn_candidate *candidates = malloc(count * LEARN_CANDIDATE_MAX * sizeof *candidates);
    size_t *candidate_counts = calloc(count, sizeof *candidate_counts);
    learn_pick(*picks)[EXAM_INDEX_COUNT] = calloc(count, sizeof *picks);
    screen_profile *profile = screen_profile_new();
    const char *problem = NULL;
    if (frames == NULL || candidates == NULL || candidate_counts == NULL || picks == NULL ||
        profile == NULL) {
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory learning");
        goto done;
    }

    /* Two passes: the first finds the values with a contrast every screen
     * has; the second segments with half the text's own contrast. */
    int threshold = 0;
    int learned[EXAM_INDEX_COUNT] = {0};
    for (int pass = 0; pass < 2; pass++) {
        report.length = 0;
        if (report.text != NULL && report.size > 0)
            report.text[0] = '\0';
        for (size_t e = 0; e < count; e++) {
            free(frames[e].lines);
            frames[e].lines = NULL;
            if (find_lines(&examples[e].image, threshold, &frames[e]) != MITILOG_OK) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory learning");
                goto done;
            }
        }
        unsigned long ink_sum = 0, ink_pixels = 0;
        if (place_indices(frames, examples, count, threshold, candidates, candidate_counts, picks,
                          learned, &report) != MITILOG_OK) {
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory learning");
            goto done;
        }
        /* Two indices found at the very same characters of one example
         * (equal values, one place): that example tells neither apart. */
        for (size_t e = 0; e < count; e++) {
            for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
                for (int j = i + 1; j < EXAM_INDEX_COUNT; j++) {
                    learn_candidate *a = &picks[e][i].candidate, *b = &picks[e][j].candidate;
                    if (picks[e][i].found && picks[e][j].found && a->line == b->line &&
                        a->value_first == b->value_first) {
                        picks[e][i].found = 0;
                        picks[e][j].found = 0;
                    }
                }
            }
        }
        for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
            int any = 0;
            for (size_t e = 0; e < count; e++)
                any |= learned[i] && picks[e][i].found;
            if (learned[i] && !any) {
                learned[i] = 0;
                report_add(&report,
                           "%s not learned: it has the same value at the same "
                           "place as another index in every example\n",
                           screen_index_label((exam_index)i));
            }
        }
        if (pass == 1)
            break;
        /* Half the contrast of the values' strokes (their brightest tenth). */
        for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
            for (size_t e = 0; e < count && learned[i]; e++) {
                if (!picks[e][i].found)
                    continue;
                const learn_candidate *c = &picks[e][i].candidate;
                const learn_line *line = &frames[e].lines[c->line];
                unsigned histogram[256] = {0};
                unsigned total = 0;
                for (size_t k = 0; k < c->length; k++) {
                    const screen_blob *b = &line->blobs[c->value_first + k];
                    for (int y = b->top; y <= b->bottom; y++) {
                        for (int x = b->left; x <= b->right; x++) {
                            histogram[screen_ink(&examples[e].image, line->band.background, x,
                                                 y)]++;
                            total++;
                        }
                    }
                }
                unsigned seen = 0;
                for (int level = 255; level >= 0 && total > 0; level--) {
                    seen += histogram[level];
                    if (seen * 10 >= total) {
                        ink_sum += (unsigned long)level;
                        ink_pixels++;
                        break;
                    }
                }
            }
        }
        if (ink_pixels == 0)
            break;
        threshold = (int)(ink_sum / ink_pixels) * contrast_percent / 100;
        if (threshold < 16)
            threshold = 16;
    }

    /* Geometry: one text band for the device's font. */
    int cap = 0, inner_gap = 0, after_gap = -1, widest = 0, decimals_seen[EXAM_INDEX_COUNT];
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        decimals_seen[i] = 0;
        for (size_t e = 0; e < count && learned[i]; e++) {
            if (!picks[e][i].found)
                continue;
            const learn_candidate *c = &picks[e][i].candidate;
            const learn_line *line = &frames[e].lines[c->line];
            int baseline = candidate_baseline(frames, c);
            if (decimals_seen[i] != 0 && decimals_seen[i] != c->decimals) {
                problem = "its values were drawn with different numbers of decimals";
                report_add(&report, "%s not learned: %s\n", screen_index_label((exam_index)i),
                           problem);
                learned[i] = 0;
                break;
            }
            decimals_seen[i] = c->decimals;
            for (size_t k = 0; k < c->length; k++) {
                const screen_blob *b = &line->blobs[c->value_first + k];
                if (c->text[k] != '.' && baseline - b->top + 1 > cap)
                    cap = baseline - b->top + 1;
                if (b->right - b->left + 1 > widest)
                    widest = b->right - b->left + 1;
                if (k > 0 && gap_between(b - 1, b) > inner_gap)
                    inner_gap = gap_between(b - 1, b);
            }
            size_t after = c->value_first + c->length;
            if (after < line->blob_count) {
                int gap = gap_between(&line->blobs[after - 1], &line->blobs[after]);
                if (after_gap < 0 || gap < after_gap)
                    after_gap = gap;
            }
        }
    }
    int learned_count = 0;
    for (int i = 0; i < EXAM_INDEX_COUNT; i++)
        learned_count += learned[i];
    if (learned_count == 0) {
        status = mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                                   "no index could be learned from these examples: %s",
                                   report.length ? "see the report" : "no value was given");
        goto done;
    }
    /* Every index given a value must have been placed: when one was not,
     * the place taken by another could be its own (a label misread, a
     * value not found), and that other would read the wrong index. */
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        int known = 0;
        for (size_t e = 0; e < count; e++)
            known |= examples[e].truth[i].status == SCREEN_VALUE_READ;
        if (known && !learned[i]) {
            status = mitilog_error_set(
                error, MITILOG_ERROR_REFUSED,
                "%s was given a value but not placed for certain (see the report), so the "
                "places found for the other indices are not certain either: give values "
                "only for the indices the screens show, or more frames",
                screen_index_label((exam_index)i));
            goto done;
        }
    }
    snprintf(profile->key, sizeof profile->key, "%s", profile_key);
    if (device != NULL) {
        snprintf(profile->manufacturer, sizeof profile->manufacturer, "%s",
                 device->manufacturer ? device->manufacturer : "");
        snprintf(profile->model_name, sizeof profile->model_name, "%s",
                 device->model_name ? device->model_name : "");
        snprintf(profile->software_versions, sizeof profile->software_versions, "%s",
                 device->software_versions ? device->software_versions : "");
    }
    profile->rows = height;
    profile->columns = width;
    profile->band_above = cap + 1;
    profile->band_below = 2;
    profile->ink_threshold = threshold;
    profile->glyph_threshold = 0.80;
    profile->glyph_margin = 0.06;
    profile->label_threshold = 0.80;
    int stop_gap = after_gap > inner_gap + 1 ? (inner_gap + after_gap) / 2
                                             : inner_gap + (cap / 4 > 2 ? cap / 4 : 2);
    if (stop_gap <= inner_gap)
        stop_gap = inner_gap + 1;

    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        screen_slot *slot = &profile->slots[i];
        if (!learned[i])
            continue;
        int gap_max = 0, reach = 0, first = 1;
        size_t source = 0;
        for (size_t e = 0; e < count; e++) {
            if (!picks[e][i].found)
                continue;
            const learn_candidate *c = &picks[e][i].candidate;
            const learn_line *line = &frames[e].lines[c->line];
            const screen_blob *label_last = &line->blobs[c->value_first - 1];
            int gap = gap_between(label_last, &line->blobs[c->value_first]);
            int end = line->blobs[c->value_first + c->length - 1].right - label_last->right;
            if (gap > gap_max)
                gap_max = gap;
            if (end > reach)
                reach = end;
            if (first) {
                source = e;
                slot->label_x = line->blobs[c->label_first].left;
                slot->baseline = candidate_baseline(frames, c);
                first = 0;
            }
        }
        slot->shown = 1;
        slot->decimals = decimals_seen[i];
        slot->gap_max = gap_max + widest + 2;
        slot->stop_gap = stop_gap;
        slot->span = reach + 2 * widest + 2;
        const learn_candidate *c = &picks[source][i].candidate;
        const learn_line *line = &frames[source].lines[c->line];
        int label_right = line->blobs[c->value_first - 1].right;
        int top = slot->baseline - profile->band_above + 2;
        int bottom = slot->baseline;
        /* The label patch: its own columns, the text's rows. */
        slot->label.width = label_right - slot->label_x + 1;
        int background = screen_slot_background(profile, &examples[source].image, slot);
        if (screen_cut(&examples[source].image, background, top, bottom, slot->label_x, label_right,
                       &slot->label) != 0) {
            report_add(&report,
                       "%s not learned: its label lies too near the edge of the "
                       "frame\n",
                       screen_index_label((exam_index)i));
            slot->shown = 0;
            learned[i] = 0;
            continue;
        }
        for (size_t e = 0; e < count && learned[i]; e++) {
            if (!picks[e][i].found)
                continue;
            const learn_candidate *pick = &picks[e][i].candidate;
            const learn_line *pick_line = &frames[e].lines[pick->line];
            screen_slot here = *slot;
            here.label_x = pick_line->blobs[pick->label_first].left;
            here.baseline = candidate_baseline(frames, pick);
            int pick_background = screen_slot_background(profile, &examples[e].image, &here);
            for (size_t k = 0; k < pick->length; k++) {
                if (add_glyph(profile, &examples[e].image, pick_background,
                              here.baseline - profile->band_above + 2, here.baseline,
                              &pick_line->blobs[pick->value_first + k], pick->text[k],
                              &problem) != 0) {
                    status =
                        mitilog_error_set(error, MITILOG_ERROR_REFUSED, "%s in example %zu: %s",
                                          screen_index_label((exam_index)i), e + 1, problem);
                    goto done;
                }
            }
        }
    }

    for (size_t g = 0; g < profile->glyph_count; g++) {
        if (profile->glyphs[g].character != '.' &&
            profile->glyphs[g].shape.width + 2 > profile->split_width)
            profile->split_width = profile->glyphs[g].shape.width + 2;
    }
    /* Every digit and the point, or a digit never seen could pass for one
     * that was. */
    char missing[32] = "";
    size_t missing_length = 0;
    for (const char *c = "0123456789."; *c; c++) {
        int seen = 0;
        for (size_t g = 0; g < profile->glyph_count; g++)
            seen |= profile->glyphs[g].character == *c;
        if (!seen && missing_length + 3 < sizeof missing) {
            missing[missing_length++] = *c;
            missing[missing_length++] = ' ';
            missing[missing_length] = '\0';
        }
    }
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        if (learned[i])
            report_add(&report, "%s: label at x=%d, baseline y=%d, %d decimal%s\n",
                       screen_index_label((exam_index)i), profile->slots[i].label_x,
                       profile->slots[i].baseline, profile->slots[i].decimals,
                       profile->slots[i].decimals == 1 ? "" : "s");
    }
    if (missing_length > 0) {
        report_add(&report, "characters never seen in the examples: %s\n", missing);
        status = mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                                   "the examples do not show every digit (missing: %s); add "
                                   "frames whose values show them",
                                   missing);
        goto done;
    }
    int failures = verify(profile, examples, count, picks, &report);
    if (failures != 0) {
        status = mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                                   "the learned profile does not read its own examples back "
                                   "exactly (%d difference%s): see the report",
                                   failures, failures == 1 ? "" : "s");
        goto done;
    }
    report_add(&report, "read back all %zu example%s exactly\n", count, count == 1 ? "" : "s");
    *out = profile;
    profile = NULL;

done:
    if (frames != NULL) {
        for (size_t e = 0; e < count; e++)
            free(frames[e].lines);
    }
    free(frames);
    free(candidates);
    free(candidate_counts);
    free(picks);
    screen_profile_free(profile);
    return status;
}

mitilog_status screen_learn(const screen_device *device, const char *profile_key,
                            const screen_example *examples, size_t count, screen_profile **out,
                            char *report_text, size_t report_size, mitilog_error *error)
{
    /* Text is cut into characters at a share of its own contrast: below
     * half, thin strokes of small fonts hold together; above, bold and
     * tight fonts come apart. The first share whose profile reads its
     * examples back is kept; the report and reason are those of the
     * first try when none does. */
    static const int shares[] = {45, 60, 35, 75};
    mitilog_error first_error = {{0}};
    char *first_report = report_text != NULL && report_size > 0 ? malloc(report_size) : NULL;
    mitilog_status first_status = MITILOG_OK;
    for (size_t i = 0; i < sizeof shares / sizeof shares[0]; i++) {
        mitilog_error attempt_error = {{0}};
        mitilog_status status = learn_once(device, profile_key, examples, count, shares[i], out,
                                           report_text, report_size, &attempt_error);
        if (status == MITILOG_OK || status != MITILOG_ERROR_REFUSED) {
            if (status != MITILOG_OK && error != NULL)
                *error = attempt_error;
            free(first_report);
            return status;
        }
        if (i == 0) {
            first_error = attempt_error;
            first_status = status;
            if (first_report != NULL)
                memcpy(first_report, report_text, report_size);
        }
    }
    if (first_report != NULL) {
        memcpy(report_text, first_report, report_size);
        free(first_report);
    }
    if (error != NULL)
        *error = first_error;
    return first_status;
}

/*
 * screen_pixels.c - the pixel work of the reader: background level of a
 * text line, segmentation into character column runs, normalised
 * cross-correlation of templates (common practice, e.g. Gonzalez & Woods,
 * Digital Image Processing, "matching by correlation").
 */
#include "screen/screen_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

int screen_median(const screen_image *image, int top, int bottom, int left, int right)
{
    if (top < 0)
        top = 0;
    if (left < 0)
        left = 0;
    if (bottom >= image->height)
        bottom = image->height - 1;
    if (right >= image->width)
        right = image->width - 1;
    unsigned histogram[256] = {0};
    unsigned total = 0;
    for (int y = top; y <= bottom; y++) {
        const unsigned char *row = image->grey + (size_t)y * image->stride;
        for (int x = left; x <= right; x++) {
            histogram[row[x]]++;
            total++;
        }
    }
    if (total == 0)
        return 0;
    unsigned seen = 0;
    for (int level = 0; level < 256; level++) {
        seen += histogram[level];
        if (seen * 2 >= total)
            return level;
    }
    return 255;
}

static int compare_blob_left(const void *a, const void *b)
{
    const screen_blob *x = a, *y = b;
    return (x->left > y->left) - (x->left < y->left);
}

/* Characters are the connected parts (8-neighbours) of the pixels with
 * ink above threshold; parts that share most of the narrower one's
 * columns (a colon, the dot of an i, a thin stroke broken by the
 * threshold) are one character. Column projections alone are not enough:
 * bold and tight fonts let neighbouring characters share a column. */
int screen_background(const screen_image *image, int top, int bottom, int left, int right)
{
    enum { WINDOW = 24 };
    if (top < 0)
        top = 0;
    if (left < 0)
        left = 0;
    if (bottom >= image->height)
        bottom = image->height - 1;
    if (right >= image->width)
        right = image->width - 1;
    unsigned histogram[256] = {0};
    for (int y = top; y <= bottom; y++) {
        const unsigned char *row = image->grey + (size_t)y * image->stride;
        for (int x = left; x <= right; x++)
            histogram[row[x]]++;
    }
    unsigned window = 0, best = 0;
    int best_start = 0;
    for (int level = 0; level < 256; level++) {
        window += histogram[level];
        if (level >= WINDOW)
            window -= histogram[level - WINDOW];
        if (window > best) {
            best = window;
            best_start = level - WINDOW + 1 < 0 ? 0 : level - WINDOW + 1;
        }
    }
    if (best == 0)
        return 0;
    unsigned seen = 0;
    for (int level = best_start; level < best_start + WINDOW && level < 256; level++) {
        seen += histogram[level];
        if (seen * 2 >= best)
            return level;
    }
    return best_start;
}

size_t screen_segment(const screen_image *image, const screen_band *band, int threshold, int left,
                      int right, screen_blob *blobs, size_t max, int *touches_end)
{
    *touches_end = 0;
    if (left < 0)
        left = 0;
    if (right >= image->width)
        right = image->width - 1;
    int top = band->top < 0 ? 0 : band->top;
    int bottom = band->bottom >= image->height ? image->height - 1 : band->bottom;
    if (right < left || bottom < top || max == 0)
        return 0;
    int width = right - left + 1, height = bottom - top + 1;
    size_t pixels = (size_t)width * (size_t)height;
    enum { LOCAL_PIXELS = 16384, LOCAL_PARTS = 128 };
    unsigned char local_mask[LOCAL_PIXELS];
    int local_stack[LOCAL_PIXELS];
    screen_blob local_parts[LOCAL_PARTS];
    unsigned char *mask = pixels <= LOCAL_PIXELS ? local_mask : malloc(pixels);
    int *stack = pixels <= LOCAL_PIXELS ? local_stack : malloc(pixels * sizeof *stack);
    size_t part_capacity = LOCAL_PARTS, part_count = 0;
    screen_blob *parts = local_parts;
    size_t count = 0;
    if (mask == NULL || stack == NULL)
        goto done;
    for (int y = 0; y < height; y++) {
        for (int x = 0; x < width; x++)
            mask[(size_t)y * (size_t)width + (size_t)x] =
                screen_ink(image, band->background, left + x, top + y) > threshold;
    }
    for (size_t start = 0; start < pixels; start++) {
        if (mask[start] != 1)
            continue;
        int sx = (int)(start % (size_t)width), sy = (int)(start / (size_t)width);
        screen_blob part = {.left = sx, .right = sx, .top = sy, .bottom = sy};
        size_t depth = 0;
        stack[depth++] = (int)start;
        mask[start] = 2;
        while (depth > 0) {
            int p = stack[--depth];
            int px = p % width, py = p / width;
            if (px < part.left)
                part.left = px;
            if (px > part.right)
                part.right = px;
            if (py < part.top)
                part.top = py;
            if (py > part.bottom)
                part.bottom = py;
            const int neighbours[8][2] = {{1, 0}, {-1, 0}, {0, 1},  {0, -1},
                                          {1, 1}, {-1, 1}, {1, -1}, {-1, -1}};
            for (int n = 0; n < 8; n++) {
                int nx = px + neighbours[n][0], ny = py + neighbours[n][1];
                if (nx < 0 || ny < 0 || nx >= width || ny >= height)
                    continue;
                size_t q = (size_t)ny * (size_t)width + (size_t)nx;
                if (mask[q] == 1) {
                    mask[q] = 2;
                    stack[depth++] = (int)q;
                }
            }
        }
        if (part_count == part_capacity) {
            size_t grown = part_capacity * 2;
            screen_blob *bigger = parts == local_parts ? malloc(grown * sizeof *bigger)
                                                       : realloc(parts, grown * sizeof *bigger);
            if (bigger == NULL)
                goto done;
            if (parts == local_parts)
                memcpy(bigger, local_parts, sizeof local_parts);
            parts = bigger;
            part_capacity = grown;
        }
        part.left += left;
        part.right += left;
        part.top += top;
        part.bottom += top;
        parts[part_count++] = part;
    }
    qsort(parts, part_count, sizeof *parts, compare_blob_left);
    /* Parts sharing at least half of the narrower one's columns. */
    for (size_t i = 0; i < part_count; i++) {
        screen_blob *a = &parts[i];
        if (a->left > a->right)
            continue; /* merged away */
        for (size_t j = i + 1; j < part_count && parts[j].left <= a->right; j++) {
            screen_blob *b = &parts[j];
            if (b->left > b->right)
                continue;
            int low = a->left > b->left ? a->left : b->left;
            int high = a->right < b->right ? a->right : b->right;
            int narrow = a->right - a->left < b->right - b->left ? a->right - a->left + 1
                                                                 : b->right - b->left + 1;
            if ((high - low + 1) * 2 >= narrow) {
                if (b->left < a->left)
                    a->left = b->left;
                if (b->right > a->right)
                    a->right = b->right;
                if (b->top < a->top)
                    a->top = b->top;
                if (b->bottom > a->bottom)
                    a->bottom = b->bottom;
                b->left = 1;
                b->right = 0;
            }
        }
    }
    for (size_t i = 0; i < part_count; i++) {
        if (parts[i].left > parts[i].right)
            continue;
        if (parts[i].right == right)
            *touches_end = 1;
        if (count < max)
            blobs[count++] = parts[i];
    }
done:
    if (mask != local_mask)
        free(mask);
    if (stack != local_stack)
        free(stack);
    if (parts != local_parts)
        free(parts);
    return count;
}

double screen_correlate(const screen_image *image, int background, const screen_template *t, int x,
                        int y)
{
    if (x < 0 || y < 0 || x + t->width > image->width || y + t->height > image->height ||
        t->deviation <= 0.0)
        return -1.0;
    double sum = 0.0, sum_squares = 0.0, sum_products = 0.0;
    const unsigned char *ink = t->ink;
    for (int row = 0; row < t->height; row++) {
        const unsigned char *pixels = image->grey + (size_t)(y + row) * image->stride + x;
        for (int column = 0; column < t->width; column++) {
            int value = pixels[column] - background;
            if (value < 0)
                value = -value;
            sum += value;
            sum_squares += (double)value * value;
            sum_products += (double)value * *ink++;
        }
    }
    double n = (double)t->width * t->height;
    double variance = sum_squares - sum * sum / n;
    if (variance <= 1e-9)
        return 0.0;
    double covariance = sum_products - sum * t->mean;
    return covariance / (sqrt(variance) * t->deviation);
}

int screen_cut(const screen_image *image, int background, int top, int bottom, int left, int right,
               screen_template *t)
{
    if (top < 0 || left < 0 || bottom >= image->height || right >= image->width || bottom < top ||
        right < left)
        return -1;
    int width = right - left + 1, height = bottom - top + 1;
    unsigned char *ink = malloc((size_t)width * (size_t)height);
    if (ink == NULL)
        return -1;
    for (int y = 0; y < height; y++) {
        for (int x = 0; x < width; x++)
            ink[(size_t)y * (size_t)width + (size_t)x] =
                (unsigned char)screen_ink(image, background, left + x, top + y);
    }
    screen_template_set(t, width, height, ink);
    return 0;
}

size_t screen_split_wide(const screen_image *image, const screen_band *band, int threshold,
                         screen_blob *blobs, size_t count, size_t max, int split_width)
{
    if (split_width < 3)
        return count;
    for (size_t i = 0; i < count; i++) {
        screen_blob *blob = &blobs[i];
        int width = blob->right - blob->left + 1;
        if (width <= split_width || count == max)
            continue;
        /* The column of least ink in the middle of the run. */
        int from = blob->left + width * 3 / 10, to = blob->right - width * 3 / 10;
        int cut = -1;
        long least = -1;
        for (int x = from; x <= to; x++) {
            long sum = 0;
            for (int y = blob->top; y <= blob->bottom; y++) {
                int ink = screen_ink(image, band->background, x, y);
                sum += ink > threshold ? ink : 0;
            }
            if (least < 0 || sum < least) {
                least = sum;
                cut = x;
            }
        }
        if (cut <= blob->left || cut >= blob->right)
            continue;
        memmove(&blobs[i + 2], &blobs[i + 1], (count - i - 1) * sizeof *blobs);
        count++;
        screen_blob right_part = {.left = cut + 1, .right = blob->right};
        blob->right = cut - 1 >= blob->left ? cut - 1 : blob->left;
        screen_blob *parts[2] = {blob, &right_part};
        for (int p = 0; p < 2; p++) {
            int top = -1, bottom = -1;
            for (int y = band->top < 0 ? 0 : band->top; y <= band->bottom && y < image->height;
                 y++) {
                for (int x = parts[p]->left; x <= parts[p]->right; x++) {
                    if (screen_ink(image, band->background, x, y) > threshold) {
                        if (top < 0)
                            top = y;
                        bottom = y;
                        break;
                    }
                }
            }
            parts[p]->top = top < 0 ? blob->top : top;
            parts[p]->bottom = bottom < 0 ? blob->bottom : bottom;
        }
        blobs[i + 1] = right_part;
        i--; /* the left part may still be too wide */
    }
    return count;
}

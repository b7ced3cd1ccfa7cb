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
    if (top < 0) top = 0;
    if (left < 0) left = 0;
    if (bottom >= image->height) bottom = image->height - 1;
    if (right >= image->width) right = image->width - 1;
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

size_t screen_segment(const screen_image *image, const screen_band *band, int threshold,
                      int left, int right, screen_blob *blobs, size_t max,
                      int *touches_end)
{
    *touches_end = 0;
    if (left < 0) left = 0;
    if (right >= image->width) right = image->width - 1;
    int top = band->top < 0 ? 0 : band->top;
    int bottom = band->bottom >= image->height ? image->height - 1 : band->bottom;
    size_t count = 0;
    int in_run = 0;
    for (int x = left; x <= right; x++) {
        int first = -1, last = -1;
        for (int y = top; y <= bottom; y++) {
            if (screen_ink(image, band->background, x, y) > threshold) {
                if (first < 0) first = y;
                last = y;
            }
        }
        if (first >= 0) {
            if (!in_run) {
                if (count == max) {
                    /* More runs than asked for: the caller only wanted the
                     * first max; what follows is not its business. */
                    return count;
                }
                blobs[count].left = x;
                blobs[count].top = first;
                blobs[count].bottom = last;
                count++;
                in_run = 1;
            }
            screen_blob *blob = &blobs[count - 1];
            blob->right = x;
            if (first < blob->top) blob->top = first;
            if (last > blob->bottom) blob->bottom = last;
            if (x == right)
                *touches_end = 1;
        } else {
            in_run = 0;
        }
    }
    return count;
}

double screen_correlate(const screen_image *image, int background, const screen_template *t,
                        int x, int y)
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
            if (value < 0) value = -value;
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

int screen_cut(const screen_image *image, int background, int top, int bottom, int left,
               int right, screen_template *t)
{
    if (top < 0 || left < 0 || bottom >= image->height || right >= image->width ||
        bottom < top || right < left)
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

/*
 * sim_screen.c - draws a simulated scanner's screen text (the displayed
 * indices and the text around them) with FreeType, into an overlay laid
 * over every frame of a capture.
 *
 * Layout (sim_screen_design.rows): text rows stacked from the top (or up
 * from the bottom) edge, each row's items separated by half an em, rows left-
 * or right-aligned with a 3-pixel margin; a black panel one pixel larger
 * than each row's ink clears the picture behind it, as scanners draw text
 * on the black border of the image. Glyphs are FreeType's anti-aliased
 * 8-bit coverage (FT_LOAD_RENDER, FT_RENDER_MODE_NORMAL), blended with
 * the design's colour; grey frames get its luminance (ITU-R BT.601
 * weights). Rendering is deterministic: no clock, no randomness.
 *
 * Ownership: sim_screen owns the FreeType library and faces; a
 * sim_overlay's buffers belong to it until sim_overlay_free().
 */
#include "sim/sim.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <ft2build.h>
#include FT_FREETYPE_H

enum { SIM_SCREEN_FACES = 8, SIM_SCREEN_MARGIN = 3, SIM_SCREEN_ITEMS = 8, SIM_SCREEN_ROWS = 12 };

typedef struct sim_face {
    const char *path;
    FT_Face face;
} sim_face;

struct sim_screen {
    FT_Library library;
    sim_face faces[SIM_SCREEN_FACES];
    size_t face_count;
};

mitilog_status sim_screen_open(sim_screen **out, mitilog_error *error)
{
    *out = NULL;
    sim_screen *screen = calloc(1, sizeof *screen);
    if (screen == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "screens: out of memory");
    FT_Error ft = FT_Init_FreeType(&screen->library);
    if (ft != 0) {
        free(screen);
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "screens: FreeType did not start "
                                 "(error %d)",
                                 ft);
    }
    *out = screen;
    return MITILOG_OK;
}

void sim_screen_close(sim_screen *screen)
{
    if (screen == NULL)
        return;
    for (size_t i = 0; i < screen->face_count; i++)
        FT_Done_Face(screen->faces[i].face);
    FT_Done_FreeType(screen->library);
    free(screen);
}

static mitilog_status sim_screen_face(sim_screen *screen, const sim_screen_design *design,
                                      FT_Face *face, mitilog_error *error)
{
    for (size_t i = 0; i < screen->face_count; i++)
        if (strcmp(screen->faces[i].path, design->font_file) == 0) {
            *face = screen->faces[i].face;
            return FT_Set_Pixel_Sizes(*face, 0, (FT_UInt)design->font_pixels) == 0
                       ? MITILOG_OK
                       : mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                           "screens: font %s has no %d px "
                                           "size",
                                           design->font_file, design->font_pixels);
        }
    if (screen->face_count == SIM_SCREEN_FACES)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "screens: more than %d fonts",
                                 SIM_SCREEN_FACES);
    FT_Face opened = NULL;
    if (FT_New_Face(screen->library, design->font_file, 0, &opened) != 0)
        return mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND,
                                 "screens: cannot open the font %s; install the Debian package "
                                 "%s (deploy/install-dependencies.sh does)",
                                 design->font_file, design->font_package);
    screen->faces[screen->face_count].path = design->font_file;
    screen->faces[screen->face_count].face = opened;
    screen->face_count++;
    *face = opened;
    if (FT_Set_Pixel_Sizes(opened, 0, (FT_UInt)design->font_pixels) != 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "screens: font %s has no %d px size",
                                 design->font_file, design->font_pixels);
    return MITILOG_OK;
}

void sim_screen_format_value(const sim_screen_design *design, double value, char *buffer,
                             size_t size)
{
    snprintf(buffer, size, "%.*f", design->decimals == 2 ? 2 : 1, value);
}

/* Advance width of a string in pixels (no kerning, as the drawing). */
static mitilog_status sim_text_width(FT_Face face, const char *text, int *width,
                                     mitilog_error *error)
{
    long pen = 0;
    for (const char *p = text; *p != '\0'; p++) {
        if (FT_Load_Char(face, (FT_ULong)(unsigned char)*p, FT_LOAD_DEFAULT) != 0)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "screens: no glyph for '%c'",
                                     *p);
        pen += face->glyph->advance.x;
    }
    *width = (int)((pen + 63) >> 6);
    return MITILOG_OK;
}

/* Draws text with its pen at (x, baseline); grows box to its ink. */
static mitilog_status sim_text_draw(FT_Face face, const char *text, int x, int baseline,
                                    const uint8_t colour[3], sim_overlay *overlay, int box[4],
                                    mitilog_error *error)
{
    long pen = (long)x << 6;
    for (const char *p = text; *p != '\0'; p++) {
        if (FT_Load_Char(face, (FT_ULong)(unsigned char)*p, FT_LOAD_RENDER) != 0)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "screens: no glyph for '%c'",
                                     *p);
        FT_GlyphSlot glyph = face->glyph;
        FT_Bitmap *bitmap = &glyph->bitmap;
        int left = (int)(pen >> 6) + glyph->bitmap_left;
        int top = baseline - glyph->bitmap_top;
        for (unsigned row = 0; row < bitmap->rows; row++)
            for (unsigned column = 0; column < bitmap->width; column++) {
                unsigned char coverage = bitmap->buffer[(long)row * bitmap->pitch + column];
                if (coverage == 0)
                    continue;
                int px = left + (int)column, py = top + (int)row;
                if (px < 0 || py < 0 || px >= (int)overlay->columns || py >= (int)overlay->rows)
                    return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                             "screens: \"%s\" at (%d, %d) does not fit a %ux%u "
                                             "frame: the design needs a larger matrix or fewer "
                                             "items per row",
                                             text, x, baseline, overlay->columns, overlay->rows);
                size_t at = (size_t)py * overlay->columns + (size_t)px;
                if (coverage > overlay->alpha[at]) {
                    overlay->alpha[at] = coverage;
                    memcpy(&overlay->rgb[at * 3], colour, 3);
                }
                if (px < box[0])
                    box[0] = px;
                if (py < box[1])
                    box[1] = py;
                if (px > box[2])
                    box[2] = px;
                if (py > box[3])
                    box[3] = py;
            }
        pen += glyph->advance.x;
    }
    return MITILOG_OK;
}

static void sim_date_text(const sim_screen_design *design, const sim_screen_text *t, char *buffer,
                          size_t size)
{
    switch (design->date_style) {
    case 1:
        snprintf(buffer, size, "%02d/%02d/%04d %02d:%02d", t->day, t->month, t->year, t->hour,
                 t->minute);
        break;
    case 2:
        snprintf(buffer, size, "%02d.%02d.%02d %02d:%02d:%02d", t->day, t->month, t->year % 100,
                 t->hour, t->minute, t->second);
        break;
    default:
        snprintf(buffer, size, "%04d-%02d-%02d %02d:%02d:%02d", t->year, t->month, t->day, t->hour,
                 t->minute, t->second);
        break;
    }
}

/* The text of an index item, "" when the capture does not show it. */
static void sim_index_text(const sim_screen_design *design, const sim_screen_text *t, int index,
                           char *buffer, size_t size)
{
    char value[16];
    buffer[0] = '\0';
    if (!t->show[index])
        return;
    sim_screen_format_value(design, t->values[index], value, sizeof value);
    snprintf(buffer, size, "%s%s", design->labels[index], value);
}

typedef struct sim_item {
    char text[48];
    int index; /* SIM_INDEX_* or -1 */
    int is_index;
} sim_item;

static mitilog_status sim_overlay_reset(sim_overlay *overlay, unsigned columns, unsigned rows,
                                        mitilog_error *error)
{
    size_t pixels = (size_t)columns * rows;
    if (overlay->columns * overlay->rows != pixels || overlay->alpha == NULL) {
        sim_overlay_free(overlay);
        overlay->alpha = calloc(pixels, 1);
        overlay->blank = calloc(pixels, 1);
        overlay->rgb = calloc(pixels, 3);
        if (overlay->alpha == NULL || overlay->blank == NULL || overlay->rgb == NULL) {
            sim_overlay_free(overlay);
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "screens: out of memory");
        }
    } else {
        memset(overlay->alpha, 0, pixels);
        memset(overlay->blank, 0, pixels);
        memset(overlay->rgb, 0, pixels * 3);
    }
    overlay->columns = columns;
    overlay->rows = rows;
    return MITILOG_OK;
}

void sim_overlay_free(sim_overlay *overlay)
{
    free(overlay->alpha);
    free(overlay->blank);
    free(overlay->rgb);
    memset(overlay, 0, sizeof *overlay);
}

/* Splits one row of the design into the items it shows. */
static size_t sim_row_items(const sim_screen_design *design, const sim_screen_text *t,
                            const char *row, size_t length, sim_item items[SIM_SCREEN_ITEMS])
{
    size_t count = 0;
    for (size_t i = 0; i < length && count < SIM_SCREEN_ITEMS; i++) {
        char code = row[i];
        if (code == ' ')
            continue;
        sim_item *item = &items[count];
        memset(item, 0, sizeof *item);
        item->index = -1;
        switch (code) {
        case 'H': snprintf(item->text, sizeof item->text, "%s", design->hospital); break;
        case 'D': sim_date_text(design, t, item->text, sizeof item->text); break;
        case 'F':
            snprintf(item->text, sizeof item->text, design->frequency_format, t->frequency_mhz);
            break;
        case 'G': snprintf(item->text, sizeof item->text, design->gain_format, t->gain); break;
        case 'P': snprintf(item->text, sizeof item->text, design->depth_format, t->depth_cm); break;
        case 'R':
            snprintf(item->text, sizeof item->text, design->rate_format, t->frame_rate);
            break;
        case 'I':
            /* every index shown, each its own item */
            for (int index = 0; index < SIM_INDEX_COUNT && count < SIM_SCREEN_ITEMS; index++) {
                if (!t->show[index])
                    continue;
                sim_item *one = &items[count++];
                memset(one, 0, sizeof *one);
                one->index = index;
                one->is_index = 1;
                sim_index_text(design, t, index, one->text, sizeof one->text);
            }
            continue;
        case 'M':
        case 'S':
        case 'X': {
            int index = code == 'M'              ? SIM_INDEX_MI
                        : code == 'S'            ? SIM_INDEX_TIS
                        : t->show[SIM_INDEX_TIC] ? SIM_INDEX_TIC
                                                 : SIM_INDEX_TIB;
            item->index = index;
            item->is_index = 1;
            sim_index_text(design, t, index, item->text, sizeof item->text);
            break;
        }
        default: continue;
        }
        if (item->text[0] != '\0')
            count++;
    }
    return count;
}

mitilog_status sim_screen_render(sim_screen *screen, const sim_device *device,
                                 const sim_screen_text *text, sim_overlay *overlay,
                                 sim_drawn_index drawn[SIM_INDEX_COUNT], mitilog_error *error)
{
    const sim_screen_design *design = &device->screen;
    memset(drawn, 0, sizeof(sim_drawn_index) * SIM_INDEX_COUNT);
    mitilog_status status = sim_overlay_reset(overlay, device->columns, device->rows, error);
    if (status != MITILOG_OK || design->rows == NULL)
        return status;
    FT_Face face = NULL;
    status = sim_screen_face(screen, design, &face, error);
    if (status != MITILOG_OK)
        return status;

    int ascender = (int)((face->size->metrics.ascender + 63) >> 6);
    int line = (int)((face->size->metrics.height + 63) >> 6);
    int gap = (design->font_pixels + 1) / 2; /* half an em between items */

    const char *rows[SIM_SCREEN_ROWS];
    size_t lengths[SIM_SCREEN_ROWS], row_count = 0;
    for (const char *p = design->rows; row_count < SIM_SCREEN_ROWS;) {
        const char *bar = strchr(p, '|');
        rows[row_count] = p;
        lengths[row_count++] = bar ? (size_t)(bar - p) : strlen(p);
        if (bar == NULL)
            break;
        p = bar + 1;
    }

    for (size_t r = 0; r < row_count; r++) {
        sim_item items[SIM_SCREEN_ITEMS];
        size_t count = sim_row_items(design, text, rows[r], lengths[r], items);
        if (count == 0)
            continue;
        int widths[SIM_SCREEN_ITEMS], total = 0;
        for (size_t i = 0; i < count; i++) {
            status = sim_text_width(face, items[i].text, &widths[i], error);
            if (status != MITILOG_OK)
                return status;
            total += widths[i] + (i > 0 ? gap : 0);
        }
        int top = design->anchor_bottom
                      ? (int)device->rows - SIM_SCREEN_MARGIN - (int)(row_count - r) * line
                      : SIM_SCREEN_MARGIN + (int)r * line;
        int x = design->align_right ? (int)device->columns - SIM_SCREEN_MARGIN - total
                                    : SIM_SCREEN_MARGIN;
        if (x < 0 || x + total > (int)device->columns || top < 0 || top + line > (int)device->rows)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "screens: row %zu of %s (%d px wide, %d px high) does not "
                                     "fit its %ux%u frame: the design needs a larger matrix or "
                                     "fewer items per row",
                                     r + 1, device->key, total, line, device->columns,
                                     device->rows);
        int row_box[4] = {(int)device->columns, (int)device->rows, -1, -1};
        for (size_t i = 0; i < count; i++) {
            int box[4] = {(int)device->columns, (int)device->rows, -1, -1};
            const uint8_t *colour = items[i].is_index ? design->colour : design->other_colour;
            status =
                sim_text_draw(face, items[i].text, x, top + ascender, colour, overlay, box, error);
            if (status != MITILOG_OK)
                return status;
            if (items[i].is_index && box[2] >= box[0]) {
                sim_drawn_index *d = &drawn[items[i].index];
                size_t n = strnlen(items[i].text, sizeof d->text - 1);
                memcpy(d->text, items[i].text, n);
                d->text[n] = '\0';
                d->x = box[0];
                d->y = box[1];
                d->width = box[2] - box[0] + 1;
                d->height = box[3] - box[1] + 1;
            }
            if (box[2] >= box[0]) {
                row_box[0] = box[0] < row_box[0] ? box[0] : row_box[0];
                row_box[1] = box[1] < row_box[1] ? box[1] : row_box[1];
                row_box[2] = box[2] > row_box[2] ? box[2] : row_box[2];
                row_box[3] = box[3] > row_box[3] ? box[3] : row_box[3];
            }
            x += widths[i] + gap;
        }
        /* the black panel behind the row, one pixel beyond its ink */
        for (int y = row_box[1] - 1; y <= row_box[3] + 1; y++)
            for (int px = row_box[0] - 1; px <= row_box[2] + 1; px++)
                if (y >= 0 && px >= 0 && y < (int)device->rows && px < (int)device->columns)
                    overlay->blank[(size_t)y * device->columns + (size_t)px] = 1;
    }
    return MITILOG_OK;
}

void sim_overlay_apply(const sim_overlay *overlay, uint8_t *frame, unsigned samples)
{
    size_t pixels = (size_t)overlay->columns * overlay->rows;
    for (size_t i = 0; i < pixels; i++) {
        if (!overlay->blank[i] && overlay->alpha[i] == 0)
            continue;
        unsigned a = overlay->alpha[i];
        const uint8_t *c = &overlay->rgb[i * 3];
        if (samples == 3) {
            for (unsigned s = 0; s < 3; s++)
                frame[i * 3 + s] = (uint8_t)((c[s] * a + 127) / 255);
        } else {
            /* ITU-R BT.601 luma weights */
            double luma = 0.299 * c[0] + 0.587 * c[1] + 0.114 * c[2];
            frame[i] = (uint8_t)lround(luma * a / 255.0);
        }
    }
}

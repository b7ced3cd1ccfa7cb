/* Imaging modes from Image Type value 4 and from ultrasound regions
 * (tables and citations in ext_modes.h). */
#include "extract/ext_modes.h"

#include <string.h>
#include <strings.h>

int ext_multi_value(const char *values, int number, char *out, size_t size)
{
    if (size == 0)
        return 0;
    out[0] = '\0';
    if (values == NULL || number < 1)
        return 0;
    const char *start = values;
    for (int i = 1; i < number; i++) {
        start = strchr(start, '\\');
        if (start == NULL)
            return 0;
        start++;
    }
    const char *end = strchr(start, '\\');
    size_t length = end != NULL ? (size_t)(end - start) : strlen(start);
    while (length > 0 && (*start == ' ' || *start == '\0')) {
        start++;
        length--;
    }
    while (length > 0 && start[length - 1] == ' ')
        length--;
    if (length == 0)
        return 0;
    if (length >= size)
        length = size - 1;
    memcpy(out, start, length);
    out[length] = '\0';
    return 1;
}

static int hex_digit(char c)
{
    if (c >= '0' && c <= '9')
        return c - '0';
    if (c >= 'A' && c <= 'F')
        return c - 'A' + 10;
    if (c >= 'a' && c <= 'f')
        return c - 'a' + 10;
    return -1;
}

ext_bitmap ext_modes_from_image_type(const char *image_type)
{
    ext_bitmap result = {EXT_BITMAP_MISSING, 0, 0, 0};
    char value[32];
    if (!ext_multi_value(image_type, 4, value, sizeof value))
        return result;
    result.status = EXT_BITMAP_INVALID;
    if (strlen(value) != 4)
        return result;
    unsigned raw = 0;
    for (int i = 0; i < 4; i++) {
        int digit = hex_digit(value[i]);
        if (digit < 0)
            return result;
        raw = raw * 16 + (unsigned)digit;
    }
    result.status = EXT_BITMAP_OK;
    result.raw = raw;
    result.modes = exam_modes_from_image_type_bits(raw);
    result.unknown_bits = raw & ~exam_image_type_defined_bits();
    return result;
}

unsigned ext_modes_from_regions(const ext_region_mode_input *regions, size_t count)
{
    unsigned modes = 0;
    for (size_t i = 0; i < count; i++) {
        int m_mode = regions[i].region_spatial_format == 0x0002;
        switch (regions[i].region_data_type) {
        case 0x0001: /* tissue */
            modes |= EXAM_MODE_BIT(m_mode ? EXAM_MODE_M : EXAM_MODE_2D);
            break;
        case 0x0002: /* color flow */
            modes |= EXAM_MODE_BIT(m_mode ? EXAM_MODE_COLOUR_M : EXAM_MODE_COLOUR);
            break;
        case 0x0003: modes |= EXAM_MODE_BIT(EXAM_MODE_PW); break;
        case 0x0004: modes |= EXAM_MODE_BIT(EXAM_MODE_CW); break;
        default: break; /* traces, bars, physiological: no mode */
        }
    }
    return modes;
}

int ext_modes_conflict(const ext_bitmap *bitmap, unsigned region_modes, size_t region_count)
{
    if (bitmap->status != EXT_BITMAP_OK || region_count == 0 || region_modes == 0)
        return 0;
    /* Modes a region cannot express: compare only what both can say.
     * Colour power is drawn in a color flow region. */
    unsigned comparable = EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_M) |
                          EXAM_MODE_BIT(EXAM_MODE_CW) | EXAM_MODE_BIT(EXAM_MODE_PW) |
                          EXAM_MODE_BIT(EXAM_MODE_COLOUR) | EXAM_MODE_BIT(EXAM_MODE_COLOUR_M);
    unsigned from_bitmap = bitmap->modes & comparable;
    if (bitmap->modes & EXAM_MODE_BIT(EXAM_MODE_POWER))
        from_bitmap |= EXAM_MODE_BIT(EXAM_MODE_COLOUR);
    return from_bitmap != (region_modes & comparable);
}

unsigned ext_modes_union(const ext_bitmap *bitmap, unsigned region_modes, unsigned sr_modes)
{
    unsigned from_regions = region_modes;
    if (bitmap->status == EXT_BITMAP_OK && (bitmap->modes & EXAM_MODE_BIT(EXAM_MODE_POWER)) &&
        !(bitmap->modes & EXAM_MODE_BIT(EXAM_MODE_COLOUR)))
        from_regions &= ~EXAM_MODE_BIT(EXAM_MODE_COLOUR);
    return bitmap->modes | from_regions | sr_modes;
}

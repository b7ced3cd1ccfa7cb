/* Modes from Image Type value 4 and ultrasound regions (ext_modes.c).
 * Reference for every bit: DICOM PS3.3 C.8.5.6.1.1, "US Image Type"
 * value 4 bitmap: 0001 2D Imaging, 0002 M-Mode, 0004 CW Doppler,
 * 0008 PW Doppler, 0010 Color Doppler, 0020 Color M-Mode, 0040 3D
 * Rendering, 0100 Color Power Mode, 0200 Tissue Characterization,
 * 0400 Spatially-related frames. Region Data Type: PS3.3 C.8.5.5.1.2
 * (0001 tissue, 0002 color flow, 0003 PW, 0004 CW, 0005-0007 traces);
 * Region Spatial Format 0002 M-mode. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "extract/ext_modes.h"

#define BIT(m) EXAM_MODE_BIT(EXAM_MODE_##m)

static void each_bit_of_the_table(void **state)
{
    (void)state;
    const struct {
        const char *image_type;
        unsigned modes;
    } table[] = {
        {"ORIGINAL\\PRIMARY\\ABDOMINAL\\0001", BIT(2D)},
        {"ORIGINAL\\PRIMARY\\\\0002", BIT(M)},
        {"ORIGINAL\\PRIMARY\\\\0004", BIT(CW)},
        {"ORIGINAL\\PRIMARY\\\\0008", BIT(PW)},
        {"ORIGINAL\\PRIMARY\\\\0010", BIT(COLOUR)},
        {"ORIGINAL\\PRIMARY\\\\0020", BIT(COLOUR_M)},
        {"ORIGINAL\\PRIMARY\\\\0040", BIT(3D)},
        {"ORIGINAL\\PRIMARY\\\\0100", BIT(POWER)},
        {"ORIGINAL\\PRIMARY\\\\0200", BIT(TISSUE_CHARACTERIZATION)},
        {"ORIGINAL\\PRIMARY\\\\0400", BIT(SPATIALLY_RELATED_FRAMES)},
        /* combinations the simulator writes: 2D + colour + PW = 0019 */
        {"ORIGINAL\\PRIMARY\\OBSTETRICAL\\0019", BIT(2D) | BIT(COLOUR) | BIT(PW)},
        {"ORIGINAL\\PRIMARY\\CHEST\\0005", BIT(2D) | BIT(CW)},
        {"ORIGINAL\\PRIMARY\\X\\0101", BIT(2D) | BIT(POWER)},
        {"ORIGINAL\\PRIMARY\\X\\0041", BIT(2D) | BIT(3D)},
        {"ORIGINAL\\PRIMARY\\X\\07ff", 0x3FFu}, /* lower case hex */
    };
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++) {
        ext_bitmap bitmap = ext_modes_from_image_type(table[i].image_type);
        assert_int_equal(bitmap.status, EXT_BITMAP_OK);
        assert_int_equal(bitmap.modes, table[i].modes);
    }
    ext_bitmap b = ext_modes_from_image_type("ORIGINAL\\PRIMARY\\X\\0080");
    assert_int_equal(b.modes, 0);
    assert_int_equal(b.unknown_bits, 0x0080); /* not defined in PS3.3 */
}

static void missing_and_invalid(void **state)
{
    (void)state;
    assert_int_equal(ext_modes_from_image_type(NULL).status, EXT_BITMAP_MISSING);
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY").status, EXT_BITMAP_MISSING);
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\X\\ ").status,
                     EXT_BITMAP_MISSING);
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\X\\COLOR").status,
                     EXT_BITMAP_INVALID);
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\X\\001").status,
                     EXT_BITMAP_INVALID);
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\X\\00G1").status,
                     EXT_BITMAP_INVALID);
    /* padding around the value is not significant (PS3.5 6.2, CS) */
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\X\\ 0003 ").modes,
                     BIT(2D) | BIT(M));
}

static void regions_and_conflicts(void **state)
{
    (void)state;
    ext_region_mode_input pw[] = {{1, 1}, {2, 1}, {3, 3}};
    assert_int_equal(ext_modes_from_regions(pw, 3), BIT(2D) | BIT(COLOUR) | BIT(PW));
    ext_region_mode_input m[] = {{1, 1}, {1, 2}, {2, 2}, {5, 3}};
    assert_int_equal(ext_modes_from_regions(m, 4), BIT(2D) | BIT(M) | BIT(COLOUR_M));
    ext_region_mode_input cw[] = {{4, 3}, {-1, -1}, {0x000E, 5}};
    assert_int_equal(ext_modes_from_regions(cw, 3), BIT(CW));

    ext_bitmap agree = ext_modes_from_image_type("A\\B\\C\\0019");
    assert_int_equal(ext_modes_conflict(&agree, ext_modes_from_regions(pw, 3), 3), 0);
    ext_bitmap power = ext_modes_from_image_type("A\\B\\C\\0101");
    ext_region_mode_input colour[] = {{1, 1}, {2, 1}};
    assert_int_equal(ext_modes_conflict(&power, ext_modes_from_regions(colour, 2), 2), 0);
    ext_bitmap only_2d = ext_modes_from_image_type("A\\B\\C\\0001");
    assert_int_equal(ext_modes_conflict(&only_2d, ext_modes_from_regions(pw, 3), 3), 1);
    assert_int_equal(ext_modes_conflict(&only_2d, 0, 0), 0); /* no regions: nothing to compare */
}

/* PS3.3 C.8.5.6.1.1: 0100 Color Power Mode and 0010 Color Doppler are
 * distinct bits; a color flow region (C.8.5.5.1.2, 0002) is where either
 * is drawn, so with only 0100 set it shows power, not colour Doppler. */
static void power_mode_union(void **state)
{
    (void)state;
    ext_region_mode_input regions[] = {{0x0001, 0x0001}, {0x0002, 0x0001}};
    unsigned from_regions = ext_modes_from_regions(regions, 2);
    assert_int_equal(from_regions, BIT(2D) | BIT(COLOUR)); /* sources kept apart */
    ext_bitmap power = ext_modes_from_image_type("ORIGINAL\\PRIMARY\\ABDOMINAL\\0101");
    assert_int_equal(ext_modes_union(&power, from_regions, 0), BIT(2D) | BIT(POWER));
    assert_int_equal(ext_modes_conflict(&power, from_regions, 2), 0);
    /* both bits set: the image shows both */
    ext_bitmap both = ext_modes_from_image_type("ORIGINAL\\PRIMARY\\ABDOMINAL\\0111");
    assert_int_equal(ext_modes_union(&both, from_regions, 0), BIT(2D) | BIT(COLOUR) | BIT(POWER));
    /* no usable bitmap: the region's word stands */
    ext_bitmap none = ext_modes_from_image_type("ORIGINAL\\PRIMARY");
    assert_int_equal(ext_modes_union(&none, from_regions, BIT(PW)),
                     BIT(2D) | BIT(COLOUR) | BIT(PW));
    /* colour M-mode region is not touched */
    ext_region_mode_input m_regions[] = {{0x0002, 0x0002}};
    assert_int_equal(ext_modes_union(&power, ext_modes_from_regions(m_regions, 1), 0),
                     BIT(2D) | BIT(POWER) | BIT(COLOUR_M));
}

static void names(void **state)
{
    (void)state;
    assert_string_equal(exam_mode_name(EXAM_MODE_2D), "2d");
    assert_string_equal(exam_mode_name(EXAM_MODE_COLOUR), "colour");
    assert_null(exam_mode_name(EXAM_MODE_COUNT));
    assert_int_equal(exam_mode_from_name("b"), EXAM_MODE_2D);
    assert_int_equal(exam_mode_from_name("PW"), EXAM_MODE_PW);
    assert_int_equal(exam_mode_from_name("bogus"), -1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(each_bit_of_the_table),
        cmocka_unit_test(missing_and_invalid),
        cmocka_unit_test(regions_and_conflicts),
        cmocka_unit_test(power_mode_union),
        cmocka_unit_test(names),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

/*
 * ext_modes.h - the imaging modes of one instance, from two DICOM sources
 * that are kept apart (a conflict is recorded, never merged silently):
 *
 *  - Image Type (0008,0008) value 4 of US images: four hexadecimal digits,
 *    a bitmap of the modes in use [std: DICOM PS3.3 C.8.5.6.1.1, table
 *    "US Image Type value 4"]:
 *      0001 2D Imaging         0002 M-Mode            0004 CW Doppler
 *      0008 PW Doppler         0010 Color Doppler     0020 Color M-Mode
 *      0040 3D Rendering       0100 Color Power Mode
 *      0200 Tissue Characterization                   0400 Spatially-related frames
 *    (0080 and 0800-8000 are not defined: reported as unknown bits.)
 *  - Region Data Type (0018,6014) of each Sequence of Ultrasound Regions
 *    item [std: DICOM PS3.3 C.8.5.5.1.2]: 0001 tissue, 0002 color flow,
 *    0003 PW spectral Doppler, 0004 CW spectral Doppler, 0005-0007 Doppler
 *    traces (derived from a spectral region: no mode of their own), with
 *    Region Spatial Format (0018,6012) 0002 = M-mode turning tissue into M
 *    and colour flow into colour M.
 *
 * A mode set is the exam vocabulary's bit set (EXAM_MODE_BIT, exam/exam.h):
 * these decoders translate the DICOM encodings into it. Pure computation.
 */
#ifndef MITILOG_EXT_MODES_H
#define MITILOG_EXT_MODES_H

#include <stddef.h>
#include <stdint.h>

#include "exam/exam.h"

typedef enum ext_bitmap_status {
    EXT_BITMAP_MISSING = 0, /* no Image Type value 4                    */
    EXT_BITMAP_OK,          /* four hexadecimal digits                  */
    EXT_BITMAP_INVALID      /* something else (vendor text, 3 digits...) */
} ext_bitmap_status;

typedef struct ext_bitmap {
    ext_bitmap_status status;
    unsigned modes;        /* exam_mode bits of the defined bits set */
    unsigned raw;          /* the 16-bit value as sent               */
    unsigned unknown_bits; /* set bits PS3.3 does not define          */
} ext_bitmap;

/* Decodes value 4 of a backslash-separated Image Type (raw, may be NULL;
 * spaces around values ignored). */
ext_bitmap ext_modes_from_image_type(const char *image_type);

/* Value number (1-based) of a backslash-separated value into out (spaces
 * trimmed); returns 0 if absent or empty. */
int ext_multi_value(const char *values, int number, char *out, size_t size);

/* One region: data type and spatial format (-1 = absent). */
typedef struct ext_region_mode_input {
    int region_data_type;
    int region_spatial_format;
} ext_region_mode_input;

/* Mode bits of the regions. */
unsigned ext_modes_from_regions(const ext_region_mode_input *regions, size_t count);

/* 1 when both sources are present and give different sets. The bitmap's
 * 2D-only extras that regions cannot express (3D, power, tissue
 * characterization, spatially related frames) are not a conflict. */
int ext_modes_conflict(const ext_bitmap *bitmap, unsigned region_modes, size_t region_count);

/* The instance's modes: the union of the three sources, except that a
 * color flow region of an image whose bitmap says Color Power Mode
 * without Color Doppler (0100 set, 0010 not) is that power mode, not a
 * colour Doppler one [std: DICOM PS3.3 C.8.5.6.1.1 and C.8.5.5.1.2]. */
unsigned ext_modes_union(const ext_bitmap *bitmap, unsigned region_modes, unsigned sr_modes);

#endif

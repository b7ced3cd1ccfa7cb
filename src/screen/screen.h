/*
 * screen.h - reading the displayed indices from the pixels of a frame.
 *
 * Many scanners never write MI, TIS, TIB or TIC into the DICOM header: the
 * only record of what the operator saw is the text burned into the image.
 * This module owns the device screen profiles (where a device draws each
 * index, its label and number format, and the glyphs of its font) and the
 * reader that turns an 8-bit grey frame into index values. A value is
 * reported only when the reading is certain; otherwise it is "not read"
 * with a reason. A wrong number is worse than none.
 *
 * It knows nothing of DICOM or of the database: the shim decodes frames
 * (dcm.h), the pipeline looks up the profile of a device and stores what
 * is read.
 *
 * Ownership: screen_profile_from_text() and screen_learn() give the caller
 * a profile freed with screen_profile_free(); screen_profile_to_text()
 * gives a malloc'd string freed with free(). screen_image pixels stay the
 * caller's. screen_reading is a plain struct with no pointers.
 */
#ifndef MITILOG_SCREEN_H
#define MITILOG_SCREEN_H

#include <stddef.h>

#include "extract/ext.h"
#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One frame as 8-bit grey (0 black .. 255 white), row-major; stride is
 * the distance in bytes between rows (>= width). */
typedef struct screen_image {
    int width;
    int height;
    size_t stride;
    const unsigned char *grey;
} screen_image;

/* Identifies a device: what a received object says of its origin. Any
 * string may be NULL (absent). */
typedef struct screen_device {
    const char *manufacturer;      /* (0008,0070) */
    const char *model_name;        /* (0008,1090) */
    const char *software_versions; /* (0018,1020), all values */
    int rows;                      /* (0028,0010) */
    int columns;                   /* (0028,0011) */
} screen_device;

typedef enum screen_value_status {
    SCREEN_VALUE_NOT_READ = 0, /* nothing certain: see reason */
    SCREEN_VALUE_READ,         /* value is what the screen showed */
    SCREEN_VALUE_NOT_SHOWN     /* the profile says the device does not
                                 * draw this index at all */
} screen_value_status;

enum { SCREEN_REASON_SIZE = 128, SCREEN_KEY_SIZE = 128 };

typedef struct screen_value {
    screen_value_status status;
    double value;                    /* meaningful only when READ */
    int decimals;                    /* digits after the point as drawn */
    char text[24];                   /* the characters read, e.g. "1.2" */
    char reason[SCREEN_REASON_SIZE]; /* plain words when NOT_READ */
} screen_value;

typedef struct screen_reading {
    screen_value values[EXAM_INDEX_COUNT];
    char profile_key[SCREEN_KEY_SIZE];
    int profile_version;
    char reason[SCREEN_REASON_SIZE]; /* whole-frame refusal, "" if none */
} screen_reading;

typedef struct screen_profile screen_profile;

/* A profile as text (the form kept in the database and shown to the
 * administrator) and back. */
mitilog_status screen_profile_from_text(const char *text, screen_profile **profile,
                                        mitilog_error *error);
mitilog_status screen_profile_to_text(const screen_profile *profile, char **text,
                                      mitilog_error *error);
void screen_profile_free(screen_profile *profile);

const char *screen_profile_key(const screen_profile *profile);
int screen_profile_version(const screen_profile *profile);
/* 1 when the profile is for this device (key fields and frame size). */
int screen_profile_matches(const screen_profile *profile, const screen_device *device);
/* 1 when the profile names a software version and the device is the
 * profile's device (manufacturer, model, frame size) with other
 * software: a software update may have changed the screen, so the
 * profile is not read with; the object is "not read" with that reason. */
int screen_profile_matches_but_software(const screen_profile *profile, const screen_device *device);
/* The Software Versions the profile was learned on ("" for any). */
const char *screen_profile_software(const screen_profile *profile);

/* Reads every index the profile knows from one frame. Fails only when out
 * of memory or for a programming error; anything about the frame itself
 * (wrong size, blank region, text cut by the edge, a glyph not certain,
 * a layout that no longer matches) is a NOT_READ value with a reason. */
mitilog_status screen_read(const screen_profile *profile, const screen_image *image,
                           screen_reading *reading, mitilog_error *error);

/* Several frames of one cine: a value is READ only when every frame that
 * read it agrees; a disagreement is NOT_READ with the reason saying so. */
void screen_combine(const screen_reading *readings, size_t count, screen_reading *combined);

/* One labelled example for learning: a frame and the values the screen
 * shows (from the header of a device that writes both, or typed by the
 * administrator); a value with status NOT_READ is unknown. */
typedef struct screen_example {
    screen_image image;
    screen_value truth[EXAM_INDEX_COUNT];
} screen_example;

/* Learns a profile for a device from labelled examples: finds the region
 * and label of each index, cuts the glyphs, checks that the learned
 * profile reads every example back exactly. report (may be NULL) gets a
 * plain-words summary of what was found and what is missing. */
mitilog_status screen_learn(const screen_device *device, const char *profile_key,
                            const screen_example *examples, size_t count, screen_profile **profile,
                            char *report, size_t report_size, mitilog_error *error);

#ifdef __cplusplus
}
#endif

#endif

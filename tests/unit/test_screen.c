/*
 * test_screen.c - the screen reader (src/screen): profiles learned from
 * labelled frames, values read from rendered strips, and every refusal.
 *
 * The frames are drawn by tests/fixtures/screens.py with PIL and Debian's
 * TTF fonts (run once at setup into a temporary folder): the text PIL drew
 * is the outside truth every reading is compared with.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

#include "screen/screen.h"

typedef struct frame {
    int width, height;
    unsigned char *grey;
} frame;

static char fixture_directory[256];

static void frame_free(frame *f)
{
    free(f->grey);
    f->grey = NULL;
}

/* Binary PGM as PIL writes it: "P5\n<w> <h>\n255\n" then the pixels. */
static int frame_load(const char *name, frame *f)
{
    char path[512];
    snprintf(path, sizeof path, "%s/%s", fixture_directory, name);
    FILE *in = fopen(path, "rb");
    if (in == NULL)
        return -1;
    int maximum = 0;
    if (fscanf(in, "P5 %d %d %d", &f->width, &f->height, &maximum) != 3 || maximum != 255) {
        fclose(in);
        return -1;
    }
    fgetc(in);
    size_t size = (size_t)f->width * (size_t)f->height;
    f->grey = malloc(size);
    int ok = f->grey != NULL && fread(f->grey, 1, size, in) == size;
    fclose(in);
    return ok ? 0 : -1;
}

static screen_image image_of(const frame *f)
{
    return (screen_image){
        .width = f->width, .height = f->height, .stride = (size_t)f->width, .grey = f->grey};
}

static int index_named(const char *name)
{
    static const char *const names[] = {"MI", "TIS", "TIB", "TIC"};
    for (int i = 0; i < 4; i++) {
        if (strcmp(name, names[i]) == 0)
            return i; /* EXAM_INDEX_MI .. EXAM_INDEX_TIC, in this order */
    }
    return -1;
}

/* "MI=1.2,TIS=0.4" into truth values (the text as drawn). */
static void parse_truth(const char *text, screen_value truth[EXAM_INDEX_COUNT])
{
    memset(truth, 0, sizeof(screen_value) * EXAM_INDEX_COUNT);
    char copy[256];
    snprintf(copy, sizeof copy, "%s", text);
    char *save = NULL;
    for (char *item = strtok_r(copy, ",", &save); item; item = strtok_r(NULL, ",", &save)) {
        char *equals = strchr(item, '=');
        assert_non_null(equals);
        *equals = '\0';
        int index = index_named(item);
        assert_true(index >= 0);
        truth[index].status = SCREEN_VALUE_READ;
        truth[index].value = strtod(equals + 1, NULL);
        snprintf(truth[index].text, sizeof truth[index].text, "%s", equals + 1);
    }
}

/* Learns design's profile from its "learn" lines of the manifest. */
static screen_profile *learn_design(const char *design)
{
    char path[512], line[512];
    snprintf(path, sizeof path, "%s/manifest.txt", fixture_directory);
    FILE *in = fopen(path, "r");
    assert_non_null(in);
    screen_example examples[4];
    frame frames[4];
    size_t count = 0;
    while (fgets(line, sizeof line, in) != NULL && count < 4) {
        char verb[16], name[32], file[400], values[128];
        if (sscanf(line, "%15s %31s %399s %127s", verb, name, file, values) != 4 ||
            strcmp(verb, "learn") != 0 || strcmp(name, design) != 0)
            continue;
        assert_int_equal(frame_load(strrchr(file, '/') + 1, &frames[count]), 0);
        examples[count].image = image_of(&frames[count]);
        parse_truth(values, examples[count].truth);
        count++;
    }
    fclose(in);
    assert_int_equal(count, 2);
    screen_profile *profile = NULL;
    char report[2048];
    mitilog_error error = {{0}};
    mitilog_status status =
        screen_learn(NULL, design, examples, count, &profile, report, sizeof report, &error);
    if (status != MITILOG_OK)
        print_error("learning %s: %s\n%s", design, error.text, report);
    assert_int_equal(status, MITILOG_OK);
    for (size_t i = 0; i < count; i++)
        frame_free(&frames[i]);
    return profile;
}

static int setup(void **state)
{
    (void)state;
    const char *source = getenv("MITILOG_SOURCE_DIR");
    snprintf(fixture_directory, sizeof fixture_directory, "/tmp/mitilog-screen-XXXXXX");
    if (mkdtemp(fixture_directory) == NULL)
        return -1;
    char command[1024];
    snprintf(command, sizeof command, "/usr/bin/python3 %s/tests/fixtures/screens.py fixtures %s",
             source ? source : MITILOG_SOURCE_DIR, fixture_directory);
    return system(command) == 0 ? 0 : -1;
}

static int teardown(void **state)
{
    (void)state;
    char command[512];
    snprintf(command, sizeof command, "rm -rf '%s'", fixture_directory);
    return system(command) == 0 ? 0 : -1;
}

/* Reads one frame with profile; returns the reading. */
static screen_reading read_frame(const screen_profile *profile, const char *name)
{
    frame f;
    assert_int_equal(frame_load(name, &f), 0);
    screen_image image = image_of(&f);
    screen_reading reading;
    mitilog_error error = {{0}};
    assert_int_equal(screen_read(profile, &image, &reading, &error), MITILOG_OK);
    frame_free(&f);
    return reading;
}

/* Every value PIL drew on the test frames of four designs (monospace
 * "MI 1.2", proportional two-decimal "TIs0.45", "MI:1.2" on a side panel,
 * one place showing "TIs 0.45" or "TIb 0.89"; half of them JPEG-compressed)
 * is read exactly: the drawn text is the truth (tests/fixtures/screens.py). */
static void reads_rendered_strips(void **state)
{
    (void)state;
    const char *designs[] = {"harbor", "meadow", "lantern", "relay"};
    for (size_t d = 0; d < 4; d++) {
        screen_profile *profile = learn_design(designs[d]);
        char path[512], line[512];
        snprintf(path, sizeof path, "%s/manifest.txt", fixture_directory);
        FILE *in = fopen(path, "r");
        assert_non_null(in);
        int frames = 0;
        while (fgets(line, sizeof line, in) != NULL) {
            char verb[16], name[32], file[400], values[128];
            if (sscanf(line, "%15s %31s %399s %127s", verb, name, file, values) != 4 ||
                strcmp(verb, "read") != 0 || strcmp(name, designs[d]) != 0)
                continue;
            screen_value truth[EXAM_INDEX_COUNT];
            parse_truth(values, truth);
            screen_reading reading = read_frame(profile, strrchr(file, '/') + 1);
            assert_string_equal(reading.reason, "");
            assert_string_equal(reading.profile_key, designs[d]);
            for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
                if (truth[i].status != SCREEN_VALUE_READ) {
                    /* Not drawn: either the device never shows it, or (relay:
                     * one place shows TIS or TIB) the other is shown there. */
                    if (strcmp(designs[d], "relay") == 0 &&
                        (i == EXAM_INDEX_TIS || i == EXAM_INDEX_TIB)) {
                        assert_int_equal(reading.values[i].status, SCREEN_VALUE_NOT_READ);
                        assert_non_null(strstr(reading.values[i].reason, "not displayed"));
                    } else {
                        assert_int_equal(reading.values[i].status, SCREEN_VALUE_NOT_SHOWN);
                    }
                    continue;
                }
                if (reading.values[i].status != SCREEN_VALUE_READ)
                    print_error("%s index %d: %s\n", file, i, reading.values[i].reason);
                assert_int_equal(reading.values[i].status, SCREEN_VALUE_READ);
                assert_string_equal(reading.values[i].text, truth[i].text);
                assert_true(reading.values[i].value == truth[i].value);
            }
            frames++;
        }
        fclose(in);
        assert_int_equal(frames, 6);
        screen_profile_free(profile);
    }
}

/* No value of a refused frame is READ, and each refusal says why in
 * plain words (common practice, no source). */
static void assert_refused(const screen_reading *reading, int index, const char *words)
{
    assert_int_equal(reading->values[index].status, SCREEN_VALUE_NOT_READ);
    if (strstr(reading->values[index].reason, words) == NULL)
        print_error("reason '%s' lacks '%s'\n", reading->values[index].reason, words);
    assert_non_null(strstr(reading->values[index].reason, words));
}

static void refuses_frame_of_another_size(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("harbor");
    screen_reading reading = read_frame(profile, "harbor-other-size.pgm");
    assert_non_null(strstr(reading.reason, "600x480"));
    for (int i = EXAM_INDEX_MI; i <= EXAM_INDEX_TIB; i++)
        assert_refused(&reading, i, "not the same screen");
    screen_profile_free(profile);
}

static void refuses_blank_region(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("harbor");
    screen_reading reading = read_frame(profile, "harbor-blank.pgm");
    for (int i = EXAM_INDEX_MI; i <= EXAM_INDEX_TIB; i++)
        assert_refused(&reading, i, "blank or empty");
    screen_profile_free(profile);
}

/* The text moved 40 pixels (as after a software update): flagged, never
 * read at the old place. */
static void refuses_moved_layout(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("harbor");
    screen_reading reading = read_frame(profile, "harbor-moved.pgm");
    for (int i = EXAM_INDEX_MI; i <= EXAM_INDEX_TIB; i++)
        assert_refused(&reading, i, "layout may have changed");
    screen_profile_free(profile);
}

/* Another label where MI's was: MI not read, the others still are. */
static void refuses_label_not_found(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("harbor");
    screen_reading reading = read_frame(profile, "harbor-relabelled.pgm");
    assert_refused(&reading, EXAM_INDEX_MI, "label MI not found");
    assert_int_equal(reading.values[EXAM_INDEX_TIS].status, SCREEN_VALUE_READ);
    assert_string_equal(reading.values[EXAM_INDEX_TIS].text, "0.5");
    assert_string_equal(reading.values[EXAM_INDEX_TIB].text, "0.6");
    screen_profile_free(profile);
}

/* Two decimals on a one-decimal device: "1.15" is not "1.2" or "1.1". */
static void refuses_other_number_format(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("harbor");
    screen_reading reading = read_frame(profile, "harbor-two-decimals.pgm");
    assert_refused(&reading, EXAM_INDEX_MI, "number format");
    assert_refused(&reading, EXAM_INDEX_TIS, "number format");
    screen_profile_free(profile);
}

/* "MI 11.5" drawn at the right edge: its last characters leave the frame,
 * so "11." or "11" must not pass for a value. */
static void refuses_value_cut_by_edge(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("edge");
    screen_reading reading = read_frame(profile, "edge-cut.pgm");
    assert_refused(&reading, EXAM_INDEX_MI, "cut by the edge");
    assert_string_equal(reading.values[EXAM_INDEX_TIS].text, "0.5");
    screen_profile_free(profile);
}

/* A character half erased: below the match threshold. */
static void refuses_uncertain_glyph(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("harbor");
    frame f;
    assert_int_equal(frame_load("harbor-learn-1.pgm", &f), 0);
    /* MI 1.2 is drawn from x = 8 on rows 5..18 (screens.py, design
     * harbor); the "1" sits near x = 30: blank its upper half. */
    screen_image image = image_of(&f);
    screen_reading before;
    assert_int_equal(screen_read(profile, &image, &before, NULL), MITILOG_OK);
    assert_string_equal(before.values[EXAM_INDEX_MI].text, "1.2");
    for (int y = 0; y < 12; y++) {
        for (int x = 28; x < 36; x++)
            f.grey[(size_t)y * (size_t)f.width + (size_t)x] = f.grey[0];
    }
    screen_reading reading;
    assert_int_equal(screen_read(profile, &image, &reading, NULL), MITILOG_OK);
    assert_int_equal(reading.values[EXAM_INDEX_MI].status, SCREEN_VALUE_NOT_READ);
    assert_non_null(strstr(reading.values[EXAM_INDEX_MI].reason, "MI"));
    frame_free(&f);
    screen_profile_free(profile);
}

/* The label without a number after it ("MI" with its value erased). */
static void refuses_label_without_value(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("harbor");
    frame f;
    assert_int_equal(frame_load("harbor-learn-1.pgm", &f), 0);
    /* "MI 1.2" from x = 8 (screens.py, design harbor): the value is drawn
     * from about x = 29 to 50, in the strip's rows 0..21. */
    for (int y = 0; y < 22; y++) {
        for (int x = 26; x < 60; x++)
            f.grey[(size_t)y * (size_t)f.width + (size_t)x] = f.grey[0];
    }
    screen_image image = image_of(&f);
    screen_reading reading;
    assert_int_equal(screen_read(profile, &image, &reading, NULL), MITILOG_OK);
    assert_refused(&reading, EXAM_INDEX_MI, "no value next to the label");
    assert_string_equal(reading.values[EXAM_INDEX_TIS].text, "3.4");
    frame_free(&f);
    screen_profile_free(profile);
}

/* A margin no glyph can have over the next best: every value is refused
 * as "either of two glyphs" rather than guessed. */
static void refuses_glyph_without_margin(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("harbor");
    char *text = NULL;
    assert_int_equal(screen_profile_to_text(profile, &text, NULL), MITILOG_OK);
    char *margin = strstr(text, "glyph_margin 0.060");
    assert_non_null(margin);
    memcpy(margin, "glyph_margin 0.990", 18);
    screen_profile *strict = NULL;
    assert_int_equal(screen_profile_from_text(text, &strict, NULL), MITILOG_OK);
    screen_reading reading = read_frame(strict, "harbor-read-1.pgm");
    assert_refused(&reading, EXAM_INDEX_MI, "either of two glyphs");
    free(text);
    screen_profile_free(strict);
    screen_profile_free(profile);
}

/* Text form round trip: the same text, the same readings. */
static void profile_text_round_trip(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("meadow");
    char *text = NULL, *again = NULL;
    assert_int_equal(screen_profile_to_text(profile, &text, NULL), MITILOG_OK);
    screen_profile *copy = NULL;
    mitilog_error error = {{0}};
    assert_int_equal(screen_profile_from_text(text, &copy, &error), MITILOG_OK);
    assert_int_equal(screen_profile_to_text(copy, &again, NULL), MITILOG_OK);
    assert_string_equal(text, again);
    assert_string_equal(screen_profile_key(copy), "meadow");
    assert_int_equal(screen_profile_version(copy), 1);
    screen_reading a = read_frame(profile, "meadow-read-1.pgm");
    screen_reading b = read_frame(copy, "meadow-read-1.pgm");
    assert_memory_equal(&a, &b, sizeof a);

    /* Damaged texts are refused with a reason, never half read. */
    const char *bad[] = {"", "hello\n", "mitilog-screen-profile 2\nkey x\n",
                         "mitilog-screen-profile 1\nkey x\nband 5 2\nink_threshold 40\n"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        screen_profile *none = NULL;
        assert_int_not_equal(screen_profile_from_text(bad[i], &none, &error), MITILOG_OK);
        assert_null(none);
        assert_non_null(strstr(error.text, "screen profile not usable"));
    }
    for (size_t cut = 0; cut < strlen(text); cut += 97) {
        char *part = strndup(text, cut);
        screen_profile *maybe = NULL;
        if (screen_profile_from_text(part, &maybe, &error) == MITILOG_OK)
            screen_profile_free(maybe);
        free(part);
    }
    free(text);
    free(again);
    screen_profile_free(copy);
    screen_profile_free(profile);
}

/* Learning refuses examples that do not show every digit, and values
 * typed wrong (the profile would read its example back differently). */
static void learning_refuses(void **state)
{
    (void)state;
    frame a, b;
    assert_int_equal(frame_load("harbor-learn-1.pgm", &a), 0);
    assert_int_equal(frame_load("harbor-learn-2.pgm", &b), 0);
    screen_example examples[2];
    examples[0].image = image_of(&a);
    examples[1].image = image_of(&b);
    parse_truth("MI=1.2,TIS=3.4,TIB=5.6", examples[0].truth);
    parse_truth("MI=0.7,TIS=8.9,TIB=0.8", examples[1].truth);
    screen_profile *profile = NULL;
    char report[2048];
    mitilog_error error = {{0}};
    /* One frame: its three values of one shape cannot be told apart. */
    assert_int_equal(screen_learn(NULL, "k", examples, 1, &profile, report, sizeof report, &error),
                     MITILOG_ERROR_REFUSED);
    assert_null(profile);

    /* Without TIB's values, 5 and 6 are never seen. */
    parse_truth("MI=1.2,TIS=3.4", examples[0].truth);
    parse_truth("MI=0.7,TIS=8.9", examples[1].truth);
    assert_int_equal(screen_learn(NULL, "k", examples, 2, &profile, report, sizeof report, &error),
                     MITILOG_ERROR_REFUSED);
    assert_null(profile);
    assert_non_null(strstr(error.text, "every digit"));
    assert_non_null(strstr(error.text, "5 6"));
    parse_truth("MI=0.7,TIS=8.9,TIB=0.8", examples[1].truth);

    /* A value given for an index the screen does not show: the places of
     * the others are not certain either (it could have taken one). */
    parse_truth("MI=1.2,TIS=3.4,TIB=5.6,TIC=4.1", examples[0].truth);
    assert_int_equal(screen_learn(NULL, "k", examples, 2, &profile, report, sizeof report, &error),
                     MITILOG_ERROR_REFUSED);
    assert_null(profile);
    assert_non_null(strstr(error.text, "TIC was given a value but not placed"));

    /* MI typed as 1.3 where the screen shows 1.2. */
    parse_truth("MI=1.3,TIS=3.4,TIB=5.6", examples[0].truth);
    mitilog_status status =
        screen_learn(NULL, "k", examples, 2, &profile, report, sizeof report, &error);
    if (status == MITILOG_OK) {
        /* Whatever was learned must not read MI 1.2 as anything else. */
        screen_reading reading;
        assert_int_equal(screen_read(profile, &examples[0].image, &reading, NULL), MITILOG_OK);
        assert_true(reading.values[EXAM_INDEX_MI].status != SCREEN_VALUE_READ ||
                    strcmp(reading.values[EXAM_INDEX_MI].text, "1.2") == 0);
        screen_profile_free(profile);
    } else {
        assert_int_equal(status, MITILOG_ERROR_REFUSED);
    }
    frame_free(&a);
    frame_free(&b);
}

/* Frames of a cine: agreeing frames read, disagreeing ones not. */
static void combining_cine_frames(void **state)
{
    (void)state;
    screen_reading frames[3];
    memset(frames, 0, sizeof frames);
    for (int f = 0; f < 3; f++) {
        snprintf(frames[f].profile_key, sizeof frames[f].profile_key, "harbor");
        frames[f].values[EXAM_INDEX_MI] =
            (screen_value){.status = SCREEN_VALUE_READ, .value = 1.2, .decimals = 1, .text = "1.2"};
        frames[f].values[EXAM_INDEX_TIS] =
            (screen_value){.status = SCREEN_VALUE_READ, .value = 0.4, .decimals = 1, .text = "0.4"};
        frames[f].values[EXAM_INDEX_TIB].status = SCREEN_VALUE_NOT_SHOWN;
    }
    frames[1].values[EXAM_INDEX_TIS].text[2] = '5';
    frames[2].values[EXAM_INDEX_MI].status = SCREEN_VALUE_NOT_READ;
    screen_reading combined;
    screen_combine(frames, 3, &combined);
    assert_int_equal(combined.values[EXAM_INDEX_MI].status, SCREEN_VALUE_READ);
    assert_string_equal(combined.values[EXAM_INDEX_MI].text, "1.2");
    assert_int_equal(combined.values[EXAM_INDEX_TIS].status, SCREEN_VALUE_NOT_READ);
    assert_non_null(strstr(combined.values[EXAM_INDEX_TIS].reason, "disagree"));
    assert_int_equal(combined.values[EXAM_INDEX_TIB].status, SCREEN_VALUE_NOT_SHOWN);
    screen_combine(NULL, 0, &combined);
    assert_int_equal(combined.values[EXAM_INDEX_MI].status, SCREEN_VALUE_NOT_READ);
}

/* A profile is for its device's frame size and key fields (DICOM strings
 * compared without their padding, PS3.5 section 6.2). */
static void profile_matches_device(void **state)
{
    (void)state;
    screen_profile *profile = learn_design("harbor");
    screen_device device = {.rows = 480, .columns = 640, .manufacturer = "Anyone "};
    assert_true(screen_profile_matches(profile, &device));
    device.rows = 600;
    assert_false(screen_profile_matches(profile, &device));
    screen_profile_free(profile);
}

/* Replaces the profile text's line starting with name by "name value". */
static char *with_line(char *text, const char *name, const char *value)
{
    char *start = strstr(text, name);
    assert_non_null(start);
    char *end = strchr(start + 1, '\n');
    assert_non_null(end);
    size_t size = strlen(text) + strlen(value) + 2;
    char *out = malloc(size);
    assert_non_null(out);
    snprintf(out, size, "%.*s%s %s%s", (int)(start - text), text, name, value, end);
    free(text);
    return out;
}

/* A profile learned from DICOM files keeps the device's strings as the
 * file had them, an odd length padded with a space (PS3.5 section 6.2):
 * it still matches the device's unpadded strings; and the same device on
 * other software is told apart (the profile is never read with then). */
static void padded_profile_matches_and_other_software_is_told_apart(void **state)
{
    (void)state;
    screen_profile *learned = learn_design("harbor");
    char *text = NULL;
    mitilog_error error = {{0}};
    assert_int_equal(screen_profile_to_text(learned, &text, &error), MITILOG_OK);
    screen_profile_free(learned);
    text = with_line(text, "\nmanufacturer", "Northmere Simulated Imaging ");
    text = with_line(text, "\nsoftware_versions", "4.0.2 ");
    screen_profile *profile = NULL;
    assert_int_equal(screen_profile_from_text(text, &profile, &error), MITILOG_OK);
    free(text);
    screen_device device = {.rows = 480,
                            .columns = 640,
                            .manufacturer = "Northmere Simulated Imaging",
                            .software_versions = "4.0.2"};
    assert_true(screen_profile_matches(profile, &device));
    assert_false(screen_profile_matches_but_software(profile, &device));
    assert_string_equal(screen_profile_software(profile), "4.0.2 ");
    device.software_versions = "4.1.0";
    assert_false(screen_profile_matches(profile, &device));
    assert_true(screen_profile_matches_but_software(profile, &device));
    device.rows = 600; /* another frame size is another screen altogether */
    assert_false(screen_profile_matches_but_software(profile, &device));
    screen_profile_free(profile);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(padded_profile_matches_and_other_software_is_told_apart),
        cmocka_unit_test(reads_rendered_strips),
        cmocka_unit_test(refuses_frame_of_another_size),
        cmocka_unit_test(refuses_blank_region),
        cmocka_unit_test(refuses_moved_layout),
        cmocka_unit_test(refuses_label_not_found),
        cmocka_unit_test(refuses_other_number_format),
        cmocka_unit_test(refuses_value_cut_by_edge),
        cmocka_unit_test(refuses_uncertain_glyph),
        cmocka_unit_test(refuses_glyph_without_margin),
        cmocka_unit_test(refuses_label_without_value),
        cmocka_unit_test(profile_text_round_trip),
        cmocka_unit_test(learning_refuses),
        cmocka_unit_test(combining_cine_frames),
        cmocka_unit_test(profile_matches_device),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}

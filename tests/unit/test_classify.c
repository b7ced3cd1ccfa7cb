/* The classifier (ext_classify.c) with the shipped conf/site.ini, shift
 * boundaries around midnight and DST changes, age groups at their
 * boundaries, and site-file errors (config_site.c). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <cmocka.h>

#include "config/config_site.h"
#include "extract/ext_classify.h"
#include "util/hash.h"

static int load_shipped(void **state)
{
    ext_site_rules *rules = calloc(1, sizeof *rules);
    mitilog_error error;
    if (config_site_load(MITILOG_SOURCE_DIR "/conf/site.ini", rules, &error) != MITILOG_OK) {
        fprintf(stderr, "%s\n", error.text);
        return -1;
    }
    *state = rules;
    return 0;
}

static int free_rules(void **state)
{
    ext_site_rules_free(*state);
    free(*state);
    return 0;
}

static const char *classify_field(const ext_site_rules *rules, ext_field field, const char *text,
                                  const char **source)
{
    const char *fields[EXT_FIELD_COUNT] = {NULL};
    fields[field] = text;
    const ext_exam_type *type = ext_classify_exam_type(rules, fields, source);
    return type != NULL ? type->key : "unclassified";
}

/* Real-world-shaped descriptions: abbreviations, mixed case, French and
 * German spellings (common practice, no source: typical RIS wording). */
static void descriptions(void **state)
{
    const ext_site_rules *rules = *state;
    const struct {
        const char *text;
        const char *expected;
    } table[] = {
        {"US OB 2ND TRI", "obstetric_second"},
        {"Obstetric anomaly scan", "obstetric_second"},
        {"Echographie obstetricale T2", "obstetric_second"},
        {"Échographie obstétricale T3", "obstetric_third"},
        {"us ob early pregnancy", "obstetric_first"},
        {"OB 1st trimester dating", "obstetric_first"},
        {"Nuchal translucency", "obstetric_first"},
        {"Schwangerschaft", "obstetric"},
        {"Fetal growth scan", "obstetric_third"},
        {"TCD", "transcranial"},
        {"Transcranial Doppler", "transcranial"},
        {"Carotid Doppler bilat", "carotid"},
        {"Écho cardiaque", "echo_adult"},
        {"ECHO ADULT TTE", "echo_adult"},
        {"Echokardiographie", "echo_adult"},
        {"Echo paediatric", "echo_paediatric"},
        {"US PAEDIATRIC ABDOMEN", "paediatric_abdomen"},
        {"US Abdomen complete", "abdomen"},
        {"Oberbauch / Leber", "abdomen"},
        {"US RENAL TRACT", "abdomen"},
        {"US PELVIS TRANSVAGINAL", "gynaecology"},
        {"Gyn TV", "gynaecology"},
        {"US NEONATAL HEAD", "neonatal_head"},
        {"Cranial US neonate", "neonatal_head"},
        {"US THYROID", "thyroid_small_parts"},
        {"Schilddrüse", "thyroid_small_parts"},
        {"Scrotal US", "thyroid_small_parts"},
        {"US VENOUS LEG DOPPLER", "vascular_other"},
        {"DVT left leg", "vascular_other"},
        {"US MUSCULOSKELETAL", "musculoskeletal"},
        {"Shoulder ultrasound", "musculoskeletal"},
        {"Ophthalmic B-scan", "ophthalmic"},
        {"CEUS liver", "contrast"},
        {"QA phantom", "unclassified"},
    };
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++) {
        const char *source = NULL;
        const char *got =
            classify_field(rules, EXT_FIELD_STUDY_DESCRIPTION, table[i].text, &source);
        if (strcmp(got, table[i].expected) != 0)
            fail_msg("'%s' classified as %s, expected %s", table[i].text, got, table[i].expected);
        if (strcmp(got, "unclassified") != 0)
            assert_string_equal(source, "study_description");
    }
    const char *source = NULL;
    /* The simulator's shared preset must not decide the trimester. */
    assert_string_equal(classify_field(rules, EXT_FIELD_PROTOCOL_NAME, "OB 2nd/3rd Tri", &source),
                        "obstetric");
    assert_string_equal(classify_field(rules, EXT_FIELD_IMAGE_TYPE_3, "OBSTETRICAL", &source),
                        "obstetric");
    assert_string_equal(source, "image_type_3");
    assert_string_equal(
        classify_field(rules, EXT_FIELD_PROCEDURE_CODE, "LN:24558-9 US Abdomen", &source),
        "abdomen");
    assert_string_equal(source, "procedure_code");
}

static void context_and_provenance(void **state)
{
    const ext_site_rules *rules = *state;
    ext_classify_input input;
    memset(&input, 0, sizeof input);
    input.fields[EXT_FIELD_PROTOCOL_NAME] = "Carotid";
    input.station_name = "US-ROOM-2";
    input.calling_ae_title = "USROOM1";
    input.acquired_at = "2026-11-02T23:30:00";
    input.patient_birth_date = "19500101";
    input.study_date = "20261102";
    input.operators_name = "DOE^JANE";
    ext_classification out;
    ext_classify(rules, &input, &out);
    assert_string_equal(out.exam_type->key, "carotid");
    assert_string_equal(out.exam_type_source, "protocol_name");
    assert_string_equal(out.preset, "Carotid");
    assert_string_equal(out.preset_source, "protocol_name");
    assert_string_equal(out.room, "Room 2");
    assert_string_equal(out.room_source, "station_name_map");
    assert_string_equal(out.shift, "night");
    assert_string_equal(out.age_group, "adult");
    assert_null(out.operator_name); /* record_operator = no by default */
    input.station_name = NULL;
    ext_classify(rules, &input, &out);
    assert_string_equal(out.room, "Room 1");
    assert_string_equal(out.room_source, "calling_ae_title_map");
    input.station_name = "UNLISTED"; /* a configured AE map beats a raw name */
    ext_classify(rules, &input, &out);
    assert_string_equal(out.room, "Room 1");
    input.calling_ae_title = "OTHERAE";
    ext_classify(rules, &input, &out);
    assert_string_equal(out.room, "UNLISTED");
    assert_string_equal(out.room_source, "station_name");
}

/* Shifts of the shipped file: day 07-15, evening 15-23, night 23-07. */
static void shift_boundaries(void **state)
{
    const ext_site_rules *rules = *state;
    const struct {
        int minute;
        const char *shift;
    } table[] = {
        {0, "night"},          {6 * 60 + 59, "night"},  {7 * 60, "day"},
        {14 * 60 + 59, "day"}, {15 * 60, "evening"},    {22 * 60 + 59, "evening"},
        {23 * 60, "night"},    {23 * 60 + 59, "night"},
    };
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++)
        assert_string_equal(ext_classify_shift(rules, table[i].minute), table[i].shift);
    assert_null(ext_classify_shift(rules, 24 * 60));
    assert_null(ext_classify_shift(rules, -1));
}

/* DST: the wall-clock time the modality displayed decides, whatever the
 * offset; without one, received_at (UTC) is converted with TZ. Europe/
 * London changes at 01:00 UTC on 2024-03-31 (to BST, +01:00) and on
 * 2024-10-27 (back to GMT) [std: EU summer-time directive 2000/84/EC]. */
static void shift_across_dst(void **state)
{
    (void)state;
    const char *source = NULL;
    assert_int_equal(ext_local_minute("2024-03-31T00:59:59+00:00", NULL, &source), 59);
    assert_string_equal(source, "acquisition_local_time");
    assert_int_equal(ext_local_minute("2024-03-31T02:00:00+01:00", NULL, &source), 120);
    setenv("TZ", "Europe/London", 1);
    tzset();
    /* 06:30 UTC is 07:30 BST in summer (day shift) but 06:30 GMT in winter. */
    assert_int_equal(ext_local_minute("", "2024-03-31T06:30:00.000Z", &source), 7 * 60 + 30);
    assert_string_equal(source, "received_at_local_time");
    assert_int_equal(ext_local_minute("", "2024-03-30T06:30:00.000Z", &source), 6 * 60 + 30);
    /* 00:30 UTC on the autumn change day is 01:30 BST, the first 01:30. */
    assert_int_equal(ext_local_minute("", "2024-10-27T00:30:00Z", &source), 90);
    assert_int_equal(ext_local_minute("", "2024-10-27T01:30:00Z", &source), 90);
    assert_int_equal(ext_local_minute("", "garbage", &source), -1);
    unsetenv("TZ");
    tzset();
}

/* Age groups: neonate <= 28 days (WHO neonatal period), child <= 15
 * completed years (common practice, no source), else adult. */
static void age_boundaries(void **state)
{
    const ext_site_rules *rules = *state;
    long days = 0, years = 0;
    const char *source = NULL;
    const struct {
        const char *age, *birth, *study, *group;
    } table[] = {
        {NULL, "20240101", "20240129", "neonate"}, /* 28 days */
        {NULL, "20240101", "20240130", "child"},   /* 29 days */
        {NULL, "20100315", "20260314", "child"},   /* day before 16th birthday */
        {NULL, "20100315", "20260315", "adult"},   /* 16th birthday */
        {NULL, "20080229", "20240228", "child"},   /* leap-day birthday */
        {"028D", NULL, NULL, "neonate"},
        {"029D", NULL, NULL, "child"},
        {"004W", NULL, NULL, "neonate"},
        {"005W", NULL, NULL, "child"},
        {"015Y", NULL, NULL, "child"},
        {"016Y", NULL, NULL, "adult"},
        {"030Y", "19000101", "garbage", "adult"}, /* bad date: falls back to age */
    };
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++) {
        assert_int_equal(
            ext_age(table[i].age, table[i].birth, table[i].study, &days, &years, &source), 0);
        assert_string_equal(ext_age_group(rules, days, years), table[i].group);
    }
    assert_int_equal(ext_age("12Y", NULL, NULL, &days, &years, &source), -1);
    assert_int_equal(ext_age(NULL, "20240102", "20240101", &days, &years, &source), -1);
}

static void write_file(const char *path, const char *text)
{
    FILE *file = fopen(path, "w");
    assert_non_null(file);
    fputs(text, file);
    fclose(file);
}

static void site_file_errors(void **state)
{
    (void)state;
    char path[] = "/tmp/mitilog-site-XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    const struct {
        const char *text;
        const char *expected;
    } table[] = {
        {"[exam_type a]\nlabel = A\nmatch = (unclosed\n",
         ":3: [exam_type a] match: bad regular expression"},
        {"[exam_type a]\ngoverning_index = TIX\n", ":2: [exam_type a] governing_index"},
        {"[shift night]\nfrom = 25:00\n", ":2: [shift night] from"},
        {"[sr_codes]\n99X:1 = volume\n", ":2: [sr_codes] 99X:1"},
        {"[nonsense]\na = b\n", ":2: [nonsense]"},
        {"[extraction]\npreset_attribute = (0018,1030) X\n", "odd group"},
        {"[exam_type a]\nlabel = A\n", "has no match rule"},
    };
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++) {
        write_file(path, table[i].text);
        ext_site_rules rules;
        mitilog_error error;
        assert_int_not_equal(config_site_load(path, &rules, &error), MITILOG_OK);
        if (strstr(error.text, table[i].expected) == NULL)
            fail_msg("'%s' not in '%s'", table[i].expected, error.text);
        ext_site_rules_free(&rules);
    }
    write_file(path, "[extraction]\npreset_attribute = (0019,1001) ACME US, ProtocolName\n"
                     "record_operator = yes\n[sr_codes]\n99ACME:MI-1 = mi\n"
                     "99ACME:PW = mode:pw\n[age_groups]\nchild_max_years = 17\n");
    ext_site_rules rules;
    mitilog_error error;
    assert_int_equal(config_site_load(path, &rules, &error), MITILOG_OK);
    assert_int_equal(rules.preset_count, 2);
    assert_true(rules.presets[0].is_private);
    assert_int_equal(rules.presets[0].group, 0x0019);
    assert_string_equal(rules.presets[0].private_creator, "ACME US");
    assert_true(rules.record_operator);
    assert_int_equal(rules.sr_code_count, 3); /* LN:18185-9 built in */
    assert_int_equal(rules.child_max_years, 17);
    ext_site_rules_free(&rules);
    close(fd);
    unlink(path);
}

/* The exam-type cache changes no answer: every field value of the
 * shipped rules' test table, in every field, classified twice with the
 * cache and once without it (the reference: the regular expressions run
 * every time), gives the same type and the same source. */
static void cache_changes_no_answer(void **state)
{
    ext_site_rules *rules = *state;
    const char *texts[] = {"US OB 2ND TRI",
                           "OB 2nd/3rd Tri",
                           "OBSTETRICAL",
                           "TCD",
                           "LN:24558-9 US Abdomen",
                           "US THYROID",
                           "QA phantom",
                           "",
                           "Échographie obstétricale T3",
                           "CEUS liver"};
    struct ext_classify_cache *cache = rules->classify_cache;
    assert_non_null(cache);
    for (int round = 0; round < 2; round++) {
        for (size_t t = 0; t < sizeof texts / sizeof texts[0]; t++) {
            for (int f = 0; f < EXT_FIELD_COUNT; f++) {
                const char *cached_source = NULL, *reference_source = NULL;
                rules->classify_cache = cache;
                const char *cached = classify_field(rules, (ext_field)f, texts[t], &cached_source);
                rules->classify_cache = NULL;
                const char *reference =
                    classify_field(rules, (ext_field)f, texts[t], &reference_source);
                rules->classify_cache = cache;
                assert_string_equal(cached, reference);
                assert_true(cached_source == reference_source);
            }
        }
    }
}

/* Cache keys cannot be confused: values that join to the same characters
 * when split at another place, an absent field and an empty one, are
 * different entries. Common practice, no source. */
static void cache_keys_are_unambiguous(void **state)
{
    (void)state;
    struct ext_classify_cache *cache = ext_classify_cache_create();
    assert_non_null(cache);
    const char *stored[EXT_FIELD_COUNT] = {0}, *asked[EXT_FIELD_COUNT] = {0};
    stored[0] = "OB\x1f";
    stored[1] = "2ND";
    asked[0] = "OB";
    asked[1] = "\x1f"
               "2ND";
    ext_classify_cache_put(cache, stored, 3, NULL);
    long type_index = -2;
    const char *source = NULL;
    assert_int_equal(ext_classify_cache_get(cache, asked, &type_index, &source), 0);
    assert_int_equal(ext_classify_cache_get(cache, stored, &type_index, &source), 1);
    assert_int_equal(type_index, 3);
    const char *empty[EXT_FIELD_COUNT] = {0};
    empty[0] = "";
    const char *absent[EXT_FIELD_COUNT] = {0};
    ext_classify_cache_put(cache, empty, 5, NULL);
    assert_int_equal(ext_classify_cache_get(cache, absent, &type_index, &source), 0);
    ext_classify_cache_free(cache);
}

/* The cache's hash against the FNV-1a 64-bit test vectors of the FNV
 * reference code (fnv_test.c; values from memory of that table, also
 * computed with Python's integers): "" -> cbf29ce484222325, "a" ->
 * af63dc4c8601ec8c, "foobar" -> 85944171f73967e8. */
static void fnv1a_test_vectors(void **state)
{
    (void)state;
    assert_true(hash_fnv1a("", 0) == 0xcbf29ce484222325ULL);
    assert_true(hash_fnv1a("a", 1) == 0xaf63dc4c8601ec8cULL);
    assert_true(hash_fnv1a("foobar", 6) == 0x85944171f73967e8ULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(descriptions),
        cmocka_unit_test(cache_changes_no_answer),
        cmocka_unit_test(cache_keys_are_unambiguous),
        cmocka_unit_test(fnv1a_test_vectors),
        cmocka_unit_test(context_and_provenance),
        cmocka_unit_test(shift_boundaries),
        cmocka_unit_test(shift_across_dst),
        cmocka_unit_test(age_boundaries),
        cmocka_unit_test(site_file_errors),
    };
    return cmocka_run_group_tests(tests, load_shipped, free_rules);
}

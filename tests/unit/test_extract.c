/* Unit tests of extraction: DS/IS classification, date-time conversion and
 * the acquisition-time fall-backs, and record building. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "extract/ext.h"

static void assert_ok_value(const char *raw, double expected)
{
    exam_number number = ext_parse_decimal_string(raw);
    if (number.status != EXAM_VALUE_OK)
        fail_msg("'%s' should be a valid DS", raw);
    assert_float_equal(number.value, expected, 1e-12);
}

static void assert_status(const char *raw, exam_value_status expected)
{
    exam_number number = ext_parse_decimal_string(raw);
    if (number.status != expected)
        fail_msg("'%s': status %s, expected %s", raw ? raw : "(null)",
                 exam_value_status_name(number.status), exam_value_status_name(expected));
}

/* DICOM PS3.5 Table 6.2-1, VR DS: characters 0-9 + - E e . and space;
 * leading/trailing spaces allowed; at most 16 bytes; ANSI X3.9 float form. */
static void decimal_string_forms(void **state)
{
    (void)state;
    assert_ok_value("0.8", 0.8);
    assert_ok_value("0.8 ", 0.8);    /* padded to even length */
    assert_ok_value("  1.25", 1.25); /* leading spaces allowed */
    assert_ok_value("1.2E-1", 0.12); /* exponent form */
    assert_ok_value("1.2e+1", 12.0);
    assert_ok_value("+0.4", 0.4);
    assert_ok_value("-0.0", 0.0);
    assert_ok_value("2", 2.0);
    assert_ok_value(".5", 0.5); /* ANSI X3.9 allows a bare fraction */
    assert_ok_value("3.", 3.0);
    assert_ok_value("1234567890.12345", 1234567890.12345); /* exactly 16 bytes */
}

static void decimal_string_missing_and_invalid(void **state)
{
    (void)state;
    assert_status(NULL, EXAM_VALUE_MISSING);   /* attribute absent */
    assert_status("", EXAM_VALUE_MISSING);     /* present, zero length */
    assert_status("    ", EXAM_VALUE_MISSING); /* only padding */
    assert_status("1,2", EXAM_VALUE_INVALID);  /* decimal comma: never guessed */
    assert_status("abc", EXAM_VALUE_INVALID);
    assert_status("1.1\\1.2", EXAM_VALUE_INVALID); /* VM 2 in a VM 1 attribute */
    assert_status("1 2", EXAM_VALUE_INVALID);      /* embedded space (PS3.5) */
    assert_status("1.2E", EXAM_VALUE_INVALID);
    assert_status("E5", EXAM_VALUE_INVALID);
    assert_status(".", EXAM_VALUE_INVALID);
    assert_status("NaN", EXAM_VALUE_INVALID);
    assert_status("inf", EXAM_VALUE_INVALID);
    assert_status("0x1A", EXAM_VALUE_INVALID);
    assert_status("12345678901234567", EXAM_VALUE_INVALID); /* 17 bytes > 16 */
    assert_status("1e999", EXAM_VALUE_INVALID);             /* out of double range */
}

/* PS3.5 Table 6.2-1, VR IS: [+-]digits, at most 12 bytes,
 * -2^31 <= n <= 2^31-1. */
static void integer_string_forms(void **state)
{
    (void)state;
    exam_number number = ext_parse_integer_string(" 120 ");
    assert_int_equal(number.status, EXAM_VALUE_OK);
    assert_float_equal(number.value, 120.0, 0);
    assert_int_equal(ext_parse_integer_string("+7").status, EXAM_VALUE_OK);
    assert_int_equal(ext_parse_integer_string("2147483647").status, EXAM_VALUE_OK);
    assert_int_equal(ext_parse_integer_string("2147483648").status, EXAM_VALUE_INVALID);
    assert_int_equal(ext_parse_integer_string("12.5").status, EXAM_VALUE_INVALID);
    assert_int_equal(ext_parse_integer_string("").status, EXAM_VALUE_MISSING);
    assert_int_equal(ext_parse_integer_string(NULL).status, EXAM_VALUE_MISSING);
}

/* DA "YYYYMMDD", TM "HHMMSS.FFFFFF" with trailing components optional, DT
 * "YYYYMMDDHHMMSS.FFFFFF&ZZXX" (PS3.5 Table 6.2-1). */
static void date_time_conversion(void **state)
{
    (void)state;
    char out[EXT_ISO_TIME_SIZE];
    assert_int_equal(ext_iso_from_date_time("20261123", "140512", NULL, out), 0);
    assert_string_equal(out, "2026-11-23T14:05:12");
    assert_int_equal(ext_iso_from_date_time("20261123", "140512.123456", NULL, out), 0);
    assert_string_equal(out, "2026-11-23T14:05:12.123456");
    assert_int_equal(ext_iso_from_date_time("20261123", "1405", NULL, out), 0);
    assert_string_equal(out, "2026-11-23T14:05:00");
    assert_int_equal(ext_iso_from_date_time("20261123", "14:05:12", NULL, out), 0);
    assert_string_equal(out, "2026-11-23T14:05:12"); /* older ACR-NEMA TM form */
    assert_int_equal(ext_iso_from_date_time("20261123", "140512", "+0100", out), 0);
    assert_string_equal(out, "2026-11-23T14:05:12+01:00");
    assert_int_equal(ext_iso_from_date_time("20240229", "000000", NULL, out), 0); /* leap day */
    assert_int_equal(ext_iso_from_date_time("20230229", "000000", NULL, out), -1);
    assert_int_equal(ext_iso_from_date_time("20261301", "000000", NULL, out), -1);
    assert_int_equal(ext_iso_from_date_time("20261123", "250000", NULL, out), -1);
    assert_int_equal(ext_iso_from_date_time("20261123", NULL, NULL, out), -1);
    assert_int_equal(ext_iso_from_date_time("2026-11-23", "140512", NULL, out), -1);
    assert_int_equal(ext_iso_from_dt("20261123140512.5-0500", NULL, out), 0);
    assert_string_equal(out, "2026-11-23T14:05:12.5-05:00");
    assert_int_equal(ext_iso_from_dt("2026112314", NULL, out), 0);
    assert_string_equal(out, "2026-11-23T14:00:00");
    assert_int_equal(ext_iso_from_dt("20261123", NULL, out), -1); /* no time of day */
    assert_int_equal(ext_iso_from_dt("20261123140512junk", NULL, out), -1);
}

static void set_value(dcm_facts *facts, dcm_attribute attribute, const char *value)
{
    free(facts->values[attribute]);
    facts->values[attribute] = value ? strdup(value) : NULL;
}

static void clear_facts(dcm_facts *facts)
{
    for (int i = 0; i < DCM_ATTRIBUTE_COUNT; i++)
        free(facts->values[i]);
    memset(facts, 0, sizeof *facts);
}

/* The order of the exam-timeline section of docs/domain.md:
 * acquisition date-time, acquisition, content, instance creation, study. */
static void acquisition_time_fall_backs(void **state)
{
    (void)state;
    dcm_facts facts;
    memset(&facts, 0, sizeof facts);
    char out[EXT_ISO_TIME_SIZE];
    assert_int_equal(ext_acquisition_time(&facts, out), EXT_TIME_NONE);
    assert_string_equal(out, "");
    set_value(&facts, DCM_ATTRIBUTE_STUDY_DATE, "20261101");
    set_value(&facts, DCM_ATTRIBUTE_STUDY_TIME, "080000");
    assert_int_equal(ext_acquisition_time(&facts, out), EXT_TIME_STUDY);
    set_value(&facts, DCM_ATTRIBUTE_INSTANCE_CREATION_DATE, "20261101");
    set_value(&facts, DCM_ATTRIBUTE_INSTANCE_CREATION_TIME, "080500");
    assert_int_equal(ext_acquisition_time(&facts, out), EXT_TIME_INSTANCE_CREATION);
    set_value(&facts, DCM_ATTRIBUTE_CONTENT_DATE, "20261101");
    set_value(&facts, DCM_ATTRIBUTE_CONTENT_TIME, "080400");
    assert_int_equal(ext_acquisition_time(&facts, out), EXT_TIME_CONTENT);
    assert_string_equal(out, "2026-11-01T08:04:00");
    set_value(&facts, DCM_ATTRIBUTE_ACQUISITION_DATE, "20261101");
    set_value(&facts, DCM_ATTRIBUTE_ACQUISITION_TIME, "bad"); /* malformed: skipped */
    assert_int_equal(ext_acquisition_time(&facts, out), EXT_TIME_CONTENT);
    set_value(&facts, DCM_ATTRIBUTE_ACQUISITION_TIME, "080300");
    assert_int_equal(ext_acquisition_time(&facts, out), EXT_TIME_ACQUISITION);
    set_value(&facts, DCM_ATTRIBUTE_ACQUISITION_DATE_TIME, "20261101080200");
    assert_int_equal(ext_acquisition_time(&facts, out), EXT_TIME_ACQUISITION_DATE_TIME);
    assert_string_equal(out, "2026-11-01T08:02:00");
    clear_facts(&facts);
}

static void record_from_facts(void **state)
{
    (void)state;
    dcm_facts facts;
    memset(&facts, 0, sizeof facts);
    ext_record record;
    mitilog_error error;
    /* No SOP Instance UID: cannot be stored at all. */
    set_value(&facts, DCM_ATTRIBUTE_SOP_CLASS_UID, "1.2.840.10008.5.1.4.1.1.6.1");
    assert_int_equal(ext_record_from_facts(&facts, &record, &error), MITILOG_ERROR_INVALID);
    set_value(&facts, DCM_ATTRIBUTE_SOP_INSTANCE_UID, "2.25.1234\0");
    set_value(&facts, DCM_ATTRIBUTE_STATION_NAME, "US-ROOM-1 ");
    set_value(&facts, DCM_ATTRIBUTE_MECHANICAL_INDEX, "1.1 ");
    set_value(&facts, DCM_ATTRIBUTE_BONE_THERMAL_INDEX, "1,2");
    set_value(&facts, DCM_ATTRIBUTE_SOFT_TISSUE_THERMAL_INDEX, "");
    set_value(&facts, DCM_ATTRIBUTE_NUMBER_OF_FRAMES, "24");
    set_value(&facts, DCM_ATTRIBUTE_FRAME_TIME, "33.3");
    assert_int_equal(ext_record_from_facts(&facts, &record, &error), MITILOG_OK);
    assert_true(record.is_ultrasound);
    assert_string_equal(record.station_name, "US-ROOM-1");
    assert_int_equal(record.indices[EXAM_INDEX_MI].status, EXAM_VALUE_OK);
    assert_float_equal(record.indices[EXAM_INDEX_MI].value, 1.1, 1e-12);
    assert_string_equal(record.index_raw[EXAM_INDEX_MI], "1.1 ");
    assert_int_equal(record.indices[EXAM_INDEX_TIB].status, EXAM_VALUE_INVALID);
    assert_string_equal(record.index_raw[EXAM_INDEX_TIB], "1,2");
    assert_int_equal(record.indices[EXAM_INDEX_TIS].status, EXAM_VALUE_MISSING);
    assert_int_equal(record.indices[EXAM_INDEX_TIC].status, EXAM_VALUE_MISSING);
    assert_null(record.index_raw[EXAM_INDEX_TIC]);
    assert_float_equal(record.number_of_frames.value, 24.0, 0);
    assert_float_equal(record.frame_time_ms.value, 33.3, 1e-12);
    ext_record_free(&record);

    /* A CT image carries no acoustic record even if a tag were present. */
    set_value(&facts, DCM_ATTRIBUTE_SOP_CLASS_UID, "1.2.840.10008.5.1.4.1.1.2");
    set_value(&facts, DCM_ATTRIBUTE_MODALITY, "CT");
    assert_int_equal(ext_record_from_facts(&facts, &record, &error), MITILOG_OK);
    assert_false(record.is_ultrasound);
    assert_int_equal(record.indices[EXAM_INDEX_MI].status, EXAM_VALUE_MISSING);
    ext_record_free(&record);
    clear_facts(&facts);
}

static void uid_syntax(void **state)
{
    (void)state;
    /* PS3.5 section 9.1: digits and dots; a component starts with 0 only
     * when it is "0"; at most 64 bytes. Examples from PS3.5 9.1 and B.2. */
    assert_true(ext_uid_is_valid("1.2.840.10008.1.2.1"));
    assert_true(ext_uid_is_valid("1.2.840.10008.0.1"));
    assert_true(ext_uid_is_valid("2.25.329800735698586629295641978511506172918"));
    assert_true(ext_uid_is_valid("0"));
    char longest[65];
    memset(longest, '1', 64);
    longest[1] = '.';
    longest[64] = '\0';
    assert_true(ext_uid_is_valid(longest)); /* exactly 64 bytes */
    char too_long[66];
    memset(too_long, '1', 65);
    too_long[1] = '.';
    too_long[65] = '\0';
    assert_false(ext_uid_is_valid(too_long));
    assert_false(ext_uid_is_valid(""));
    assert_false(ext_uid_is_valid("1.2.03")); /* leading zero */
    assert_false(ext_uid_is_valid("1..2"));   /* empty component */
    assert_false(ext_uid_is_valid(".1.2"));
    assert_false(ext_uid_is_valid("1.2."));
    assert_false(ext_uid_is_valid("../../tmp/x"));
    assert_false(ext_uid_is_valid("1.2.3\n4"));
    assert_false(ext_uid_is_valid("1.2.3 ")); /* padding is trimmed before */
}

static void record_with_invalid_uid_is_refused(void **state)
{
    (void)state;
    dcm_facts facts;
    ext_record record;
    mitilog_error error;
    memset(&facts, 0, sizeof facts);
    set_value(&facts, DCM_ATTRIBUTE_SOP_CLASS_UID, "1.2.840.10008.5.1.4.1.1.6.1");
    set_value(&facts, DCM_ATTRIBUTE_SOP_INSTANCE_UID, "2.25.1");
    set_value(&facts, DCM_ATTRIBUTE_STUDY_INSTANCE_UID, "../../etc");
    assert_int_equal(ext_record_from_facts(&facts, &record, &error), MITILOG_ERROR_INVALID);
    assert_non_null(strstr(error.text, "Study Instance UID"));
    clear_facts(&facts);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(decimal_string_forms),
        cmocka_unit_test(decimal_string_missing_and_invalid),
        cmocka_unit_test(integer_string_forms),
        cmocka_unit_test(date_time_conversion),
        cmocka_unit_test(acquisition_time_fall_backs),
        cmocka_unit_test(record_from_facts),
        cmocka_unit_test(uid_syntax),
        cmocka_unit_test(record_with_invalid_uid_is_refused),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

/*
 * test_dicom_reader.c - the reading and receiving half of src/dicom/dcm.h.
 *
 * Files are made in a temporary directory with DCMTK's dump2dcm from text
 * dumps, and checked against what DCMTK's dcmdump prints for the same
 * file (the outside reference), the DICOM standard and the dump itself.
 * The receiver tests start a dcm_server on a free port and send with
 * DCMTK's echoscu and storescu.
 */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <cmocka.h>

#include <arpa/inet.h>
#include <errno.h>
#include <netinet/in.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "dicom/dcm.h"
#include "util/log.h"

static char temporary_directory[] = "/tmp/mitilog-test-dicom-XXXXXX";

/* ------------------------------------------------------------------ */
/* Helpers                                                             */
/* ------------------------------------------------------------------ */

static void path_in_temporary(char *out, size_t size, const char *name)
{
    snprintf(out, size, "%s/%s", temporary_directory, name);
}

static void write_bytes(const char *path, const void *bytes, size_t size)
{
    FILE *file = fopen(path, "wb");
    assert_non_null(file);
    assert_int_equal(fwrite(bytes, 1, size, file), size);
    assert_int_equal(fclose(file), 0);
}

static int run_command(const char *format, ...) __attribute__((format(printf, 1, 2)));
static int run_command(const char *format, ...)
{
    char command[4096];
    va_list arguments;
    va_start(arguments, format);
    vsnprintf(command, sizeof command, format, arguments);
    va_end(arguments);
    int status = system(command);
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

/* Writes dump text to <name>.dump and converts it with dump2dcm (extra
 * options e.g. "+ti" or "-F +ti"); the DICOM file goes to out. */
static void make_dicom(const char *name, const char *dump, const char *options, char *out,
                       size_t size)
{
    char dump_path[512];
    snprintf(dump_path, sizeof dump_path, "%s/%s.dump", temporary_directory, name);
    write_bytes(dump_path, dump, strlen(dump));
    snprintf(out, size, "%s/%s.dcm", temporary_directory, name);
    assert_int_equal(run_command("dump2dcm -q +l 1000000 %s %s %s", options, dump_path, out), 0);
}

static void trim_right(char *text)
{
    size_t length = strlen(text);
    while (length > 0 && text[length - 1] == ' ')
        text[--length] = '\0';
}

/* The value dcmdump prints for tag in file ("+U8": converted to UTF-8),
 * i.e. what is between the brackets; "" when dcmdump prints nothing. */
static void dcmdump_value(const char *file, const char *tag, char *out, size_t size)
{
    char command[1024];
    snprintf(command, sizeof command, "dcmdump -q +U8 +P %s %s", tag, file);
    FILE *pipe = popen(command, "r");
    assert_non_null(pipe);
    char line[4096] = "";
    if (fgets(line, sizeof line, pipe) == NULL)
        line[0] = '\0';
    pclose(pipe);
    out[0] = '\0';
    char *open = strchr(line, '[');
    char *close = strrchr(line, ']');
    if (open != NULL && close != NULL && close > open)
        snprintf(out, size, "%.*s", (int)(close - open - 1), open + 1);
    else if (strlen(line) > 15) {
        /* Binary VRs are printed without brackets: "(gggg,eeee) OB v  #" */
        char *end = strstr(line + 15, "  #");
        int length = end != NULL ? (int)(end - line - 15) : (int)strlen(line + 15);
        snprintf(out, size, "%.*s", length, line + 15);
        trim_right(out);
    }
}

/* ------------------------------------------------------------------ */
/* Fixtures                                                            */
/* ------------------------------------------------------------------ */

#define US_SOP_INSTANCE_UID "1.2.826.0.1.3680043.10.543.1.1"
#define US_IMAGE_CLASS_UID "1.2.840.10008.5.1.4.1.1.6.1"

/* Latin-1 bytes: \xC9 is É, \xE8 è, \xE9 é [std: ISO/IEC 8859-1]. The
 * string literals are split after each escape so that a following hex
 * digit ("c", "e") does not extend the escape. */
static const char us_image_dump[] = "(0008,0005) CS [ISO_IR 100]\n"
                                    "(0008,0008) CS [ORIGINAL\\PRIMARY\\ABDOMINAL\\0001]\n"
                                    "(0008,0016) UI =UltrasoundImageStorage\n"
                                    "(0008,0018) UI [" US_SOP_INSTANCE_UID "]\n"
                                    "(0008,0060) CS [US]\n"
                                    "(0008,1010) SH [Salle \xC9"
                                    "chographie]\n"
                                    "(0008,1070) PN [Lef\xE8"
                                    "vre^H\xE9"
                                    "l\xE8"
                                    "ne]\n"
                                    "(0018,5022) DS [0.8 ]\n"
                                    "(0018,5024) DS [1.2\\1.3]\n"
                                    "(0018,5027) DS []\n"
                                    "(0018,6011) SQ (Sequence)\n"
                                    "(fffe,e000) na (Item)\n"
                                    "(0018,6014) US 1\n"
                                    "(0018,6030) UL 3500\n"
                                    "(fffe,e00d) na (ItemDelimitationItem)\n"
                                    "(fffe,e000) na (Item)\n"
                                    "(0018,6014) US 3\n"
                                    "(0018,6030) UL 3500\n"
                                    "(0018,6032) UL 4000\n"
                                    "(fffe,e00d) na (ItemDelimitationItem)\n"
                                    "(fffe,e0dd) na (SequenceDelimitationItem)\n"
                                    "(0020,000d) UI [1.2.826.0.1.3680043.10.543.2]\n"
                                    "(0020,000e) UI [1.2.826.0.1.3680043.10.543.3]\n"
                                    "(0028,0002) US 1\n"
                                    "(0028,0004) CS [MONOCHROME2]\n"
                                    "(0028,0010) US 2\n"
                                    "(0028,0011) US 2\n"
                                    "(0028,0100) US 8\n"
                                    "(0028,0101) US 8\n"
                                    "(0028,0102) US 7\n"
                                    "(0028,0103) US 0\n"
                                    "(7fe0,0010) OB 00\\01\\02\\03\n";

static void make_us_image(char *out, size_t size)
{
    make_dicom("us_image", us_image_dump, "+te", out, size);
}

/* ------------------------------------------------------------------ */
/* Reader                                                              */
/* ------------------------------------------------------------------ */

static void test_raw_values_and_regions(void **state)
{
    (void)state;
    char path[512], reference[1024];
    mitilog_error error;
    dcm_object *object = NULL;
    dcm_facts facts;
    make_us_image(path, sizeof path);
    assert_int_equal(dcm_object_load(path, &object, &error), MITILOG_OK);
    assert_int_equal(dcm_object_facts(object, 8, &facts, &error), MITILOG_OK);

    /* DS padded to even length with a trailing space [std: DICOM PS3.5
     * 6.2, 7.1.1]; dcmdump prints "[0.8]" but reports 4 bytes (#   4):
     * the raw value keeps the space. */
    assert_string_equal(facts.values[DCM_ATTRIBUTE_MECHANICAL_INDEX], "0.8 ");
    dcmdump_value(path, "0018,5022", reference, sizeof reference);
    assert_string_equal(reference, "0.8");
    /* Multi-valued: the backslash separator is kept [std: PS3.5 6.4];
     * dcmdump prints [1.2\1.3]. */
    assert_string_equal(facts.values[DCM_ATTRIBUTE_BONE_THERMAL_INDEX],
                        "1.2\\1.3 "); /* 7 bytes + pad; dcmdump: #   8, 2 */
    dcmdump_value(path, "0018,5024", reference, sizeof reference);
    assert_string_equal(reference, "1.2\\1.3");
    /* Present but empty: dcmdump prints "(no value available)". */
    assert_non_null(facts.values[DCM_ATTRIBUTE_SOFT_TISSUE_THERMAL_INDEX]);
    assert_string_equal(facts.values[DCM_ATTRIBUTE_SOFT_TISSUE_THERMAL_INDEX], "");
    /* Absent from the dump: NULL. */
    assert_null(facts.values[DCM_ATTRIBUTE_CRANIAL_THERMAL_INDEX]);
    assert_null(facts.values[DCM_ATTRIBUTE_TRANSDUCER_DATA]);
    /* 31 bytes padded to 32 (dcmdump: #  32, 4 ImageType). */
    assert_string_equal(facts.values[DCM_ATTRIBUTE_IMAGE_TYPE],
                        "ORIGINAL\\PRIMARY\\ABDOMINAL\\0001 ");
    assert_string_equal(facts.values[DCM_ATTRIBUTE_SOP_INSTANCE_UID], US_SOP_INSTANCE_UID);
    assert_string_equal(facts.values[DCM_ATTRIBUTE_SOP_CLASS_UID], US_IMAGE_CLASS_UID);
    /* dump2dcm +te writes Explicit VR Little Endian [std: PS3.5 A.2,
     * UID 1.2.840.10008.1.2.1]; dcmdump shows =LittleEndianExplicit. */
    assert_string_equal(facts.transfer_syntax_uid, "1.2.840.10008.1.2.1");
    assert_false(facts.is_structured_report);
    assert_int_equal(facts.sr_item_count, 0);

    /* Regions as in the dump (dcmdump prints "US 1", "UL 3500", ...). */
    assert_int_equal(facts.region_count, 2);
    assert_true(facts.regions[0].has_region_data_type);
    assert_int_equal(facts.regions[0].region_data_type, 1);
    assert_true(facts.regions[0].has_transducer_frequency);
    assert_int_equal(facts.regions[0].transducer_frequency_khz, 3500);
    assert_false(facts.regions[0].has_pulse_repetition_frequency);
    assert_int_equal(facts.regions[1].region_data_type, 3);
    assert_int_equal(facts.regions[1].transducer_frequency_khz, 3500);
    assert_true(facts.regions[1].has_pulse_repetition_frequency);
    assert_int_equal(facts.regions[1].pulse_repetition_frequency_hz, 4000);

    dcm_facts_free(&facts);
    /* A second call on the same object gives the same facts. */
    assert_int_equal(dcm_object_facts(object, 8, &facts, &error), MITILOG_OK);
    assert_string_equal(facts.values[DCM_ATTRIBUTE_MECHANICAL_INDEX], "0.8 ");
    dcm_facts_free(&facts);
    dcm_object_free(object);
}

static void test_latin1_converted_to_utf8(void **state)
{
    (void)state;
    char path[512], reference[1024];
    mitilog_error error;
    dcm_object *object = NULL;
    dcm_facts facts;
    make_us_image(path, sizeof path);
    assert_int_equal(dcm_object_load(path, &object, &error), MITILOG_OK);
    assert_int_equal(dcm_object_facts(object, 8, &facts, &error), MITILOG_OK);
    assert_true(facts.character_set_converted);
    /* U+00C9 is C3 89 in UTF-8, U+00E8 C3 A8, U+00E9 C3 A9 [std: RFC
     * 3629; Unicode]. 17 characters padded to 18 bytes in Latin-1, the
     * padding space is kept. */
    assert_string_equal(facts.values[DCM_ATTRIBUTE_STATION_NAME], "Salle \xC3\x89"
                                                                  "chographie ");
    assert_string_equal(facts.values[DCM_ATTRIBUTE_OPERATORS_NAME],
                        "Lef\xC3\xA8vre^H\xC3\xA9l\xC3\xA8ne");
    /* dcmdump +U8 converts the same way (padding not shown). */
    dcmdump_value(path, "0008,1010", reference, sizeof reference);
    char value[256];
    snprintf(value, sizeof value, "%s", facts.values[DCM_ATTRIBUTE_STATION_NAME]);
    trim_right(value);
    assert_string_equal(value, reference);
    /* The character set as sent, not the ISO_IR 192 of the converted copy
     * (dcmdump: (0008,0005) CS [ISO_IR 100]). */
    assert_string_equal(facts.values[DCM_ATTRIBUTE_SPECIFIC_CHARACTER_SET], "ISO_IR 100");
    dcm_facts_free(&facts);
    dcm_object_free(object);
}

static void test_bare_dataset(void **state)
{
    (void)state;
    char path[512];
    mitilog_error error;
    dcm_object *object = NULL;
    dcm_facts facts;
    /* -F: no meta header; +ti: Implicit VR Little Endian, the default
     * transfer syntax [std: PS3.5 A.1, UID 1.2.840.10008.1.2]. */
    make_dicom("bare", us_image_dump, "-F +ti", path, sizeof path);
    assert_int_equal(dcm_object_load(path, &object, &error), MITILOG_OK);
    assert_int_equal(dcm_object_facts(object, 8, &facts, &error), MITILOG_OK);
    assert_string_equal(facts.transfer_syntax_uid, "1.2.840.10008.1.2");
    assert_string_equal(facts.values[DCM_ATTRIBUTE_SOP_INSTANCE_UID], US_SOP_INSTANCE_UID);
    assert_int_equal(facts.region_count, 2);
    dcm_facts_free(&facts);
    dcm_object_free(object);
}

static void assert_parse_error(const char *path)
{
    mitilog_error error;
    dcm_object *object = (dcm_object *)&error; /* must be reset to NULL */
    error.text[0] = '\0';
    assert_int_equal(dcm_object_load(path, &object, &error), MITILOG_ERROR_PARSE);
    assert_null(object);
    assert_true(strlen(error.text) > 0);
}

static void test_unreadable_files(void **state)
{
    (void)state;
    char path[512], us_path[512];
    mitilog_error error;
    dcm_object *object = NULL;

    path_in_temporary(path, sizeof path, "empty.dcm");
    write_bytes(path, "", 0);
    assert_parse_error(path);

    /* Random bytes, fixed seed (a 32-bit LCG, Numerical Recipes). */
    unsigned char noise[8192];
    uint32_t seed = 12345;
    for (size_t i = 0; i < sizeof noise; i++) {
        seed = seed * 1664525u + 1013904223u;
        noise[i] = (unsigned char)(seed >> 24);
    }
    path_in_temporary(path, sizeof path, "noise.dcm");
    write_bytes(path, noise, sizeof noise);
    assert_parse_error(path);

    /* A Part 10 preamble and "DICM" [std: PS3.10 7.1] before noise. */
    unsigned char preamble[128 + 4 + 512];
    memset(preamble, 0, 128);
    memcpy(preamble + 128, "DICM", 4);
    memcpy(preamble + 132, noise, 512);
    path_in_temporary(path, sizeof path, "preamble_noise.dcm");
    write_bytes(path, preamble, sizeof preamble);
    assert_parse_error(path);

    /* The US image cut short: inside the meta header, inside the regions
     * sequence, and in the middle of the last value. */
    make_us_image(us_path, sizeof us_path);
    FILE *file = fopen(us_path, "rb");
    assert_non_null(file);
    static unsigned char whole[65536];
    size_t size = fread(whole, 1, sizeof whole, file);
    fclose(file);
    assert_true(size > 400);
    size_t cuts[] = {140, size / 2, size - 2};
    for (size_t i = 0; i < sizeof cuts / sizeof cuts[0]; i++) {
        path_in_temporary(path, sizeof path, "truncated.dcm");
        write_bytes(path, whole, cuts[i]);
        assert_parse_error(path);
    }

    /* A directory is not a file; a missing file is an I/O error. */
    assert_parse_error(temporary_directory);
    path_in_temporary(path, sizeof path, "does-not-exist.dcm");
    assert_int_equal(dcm_object_load(path, &object, &error), MITILOG_ERROR_IO);
    assert_null(object);
}

/* A Comprehensive SR [std: PS3.4 B.5, 1.2.840.10008.5.1.4.1.1.88.33]:
 * CONTAINER { NUM MI 0.9 {no units}, CONTAINER { TEXT "C5-1" } } with
 * concepts in an invented private scheme "99MTLG" [std: PS3.16 8.2,
 * "99" prefix for private schemes]; units in UCUM, "1" = unity. */
#define CODE(value, scheme, meaning)                                                               \
    "(fffe,e000) na (Item)\n"                                                                      \
    "(0008,0100) SH [" value "]\n"                                                                 \
    "(0008,0102) SH [" scheme "]\n"                                                                \
    "(0008,0104) LO [" meaning "]\n"                                                               \
    "(fffe,e00d) na\n"
#define SEQUENCE(tag, items) "(" tag ") SQ (Sequence)\n" items "(fffe,e0dd) na\n"

static const char sr_dump[] =
    "(0008,0005) CS [ISO_IR 100]\n"
    "(0008,0016) UI =ComprehensiveSRStorage\n"
    "(0008,0018) UI [1.2.826.0.1.3680043.10.543.9.1]\n"
    "(0008,0020) DA [20240102]\n"
    "(0008,0030) TM [101500]\n"
    "(0008,0050) SH [A123]\n"
    "(0008,0060) CS [SR]\n"
    "(0008,0090) PN []\n"
    "(0010,0010) PN [Test^Patient]\n"
    "(0010,0020) LO [P1]\n"
    "(0010,0030) DA []\n"
    "(0010,0040) CS []\n"
    "(0020,000d) UI [1.2.826.0.1.3680043.10.543.9.2]\n"
    "(0020,000e) UI [1.2.826.0.1.3680043.10.543.9.3]\n"
    "(0020,0010) SH [S1]\n"
    "(0020,0011) IS [1]\n"
    "(0020,0013) IS [1]\n"
    "(0008,0023) DA [20240102]\n"
    "(0008,0033) TM [101600]\n"
    "(0040,a040) CS [CONTAINER]\n" SEQUENCE(
        "0040,a043",
        CODE(
            "MTLG001", "99MTLG",
            "Acoustic output report")) "(0040,a050) CS [SEPARATE]\n"
                                       "(0040,a491) CS [COMPLETE]\n"
                                       "(0040,a493) CS [UNVERIFIED]\n"
                                       "(0040,a730) SQ (Sequence)\n"
                                       "(fffe,e000) na (Item)\n"
                                       "(0040,a010) CS [CONTAINS]\n"
                                       "(0040,a040) CS [NUM]\n" SEQUENCE(
                                           "0040,a043",
                                           CODE(
                                               "MTLG010", "99MTLG",
                                               "Mechanical index")) "(0040,a300) SQ (Sequence)\n"
                                                                    "(fffe,e000) na "
                                                                    "(Item)\n" SEQUENCE(
                                                                        "0040,08ea",
                                                                        CODE(
                                                                            "1", "UCUM",
                                                                            "no units")) "(0040,"
                                                                                         "a30a) DS "
                                                                                         "[0.9]\n"
                                                                                         "(fffe,"
                                                                                         "e00d) "
                                                                                         "na\n"
                                                                                         "(fffe,"
                                                                                         "e0dd) "
                                                                                         "na\n"
                                                                                         "(fffe,"
                                                                                         "e00d) "
                                                                                         "na\n"
                                                                                         "(fffe,"
                                                                                         "e000) na "
                                                                                         "(Item)\n"
                                                                                         "(0040,"
                                                                                         "a010) CS "
                                                                                         "[CONTAINS"
                                                                                         "]\n"
                                                                                         "(0040,"
                                                                                         "a040) CS "
                                                                                         "[CONTAINE"
                                                                                         "R]"
                                                                                         "\n" SEQUENCE(
                                                                                             "0040,"
                                                                                             "a043",
                                                                                             CODE(
                                                                                                 "M"
                                                                                                 "T"
                                                                                                 "L"
                                                                                                 "G"
                                                                                                 "0"
                                                                                                 "2"
                                                                                                 "0",
                                                                                                 "9"
                                                                                                 "9"
                                                                                                 "M"
                                                                                                 "T"
                                                                                                 "L"
                                                                                                 "G",
                                                                                                 "P"
                                                                                                 "r"
                                                                                                 "o"
                                                                                                 "b"
                                                                                                 "e"
                                                                                                 " "
                                                                                                 "s"
                                                                                                 "e"
                                                                                                 "t"
                                                                                                 "t"
                                                                                                 "i"
                                                                                                 "n"
                                                                                                 "g"
                                                                                                 "s")) "(0040,a050) CS [SEPARATE]\n"
                                                                                                       "(0040,a730) SQ (Sequence)\n"
                                                                                                       "(fffe,e000) na (Item)\n"
                                                                                                       "(0040,a010) CS [CONTAINS]\n"
                                                                                                       "(0040,a040) CS [TEXT]\n" SEQUENCE(
                                                                                                           "0040,a043",
                                                                                                           CODE(
                                                                                                               "MTLG021",
                                                                                                               "99MTLG",
                                                                                                               "Transducer")) "(0040,a160) UT [C5-1]\n"
                                                                                                                              "(fffe,e00d) na\n"
                                                                                                                              "(fffe,e0dd) na\n"
                                                                                                                              "(fffe,e00d) na\n"
                                                                                                                              "(fffe,e0dd) na\n";

static void assert_sr_item(const dcm_sr_item *item, unsigned depth, const char *position,
                           const char *value_type, const char *relationship, const char *code)
{
    assert_int_equal(item->depth, depth);
    assert_string_equal(item->position, position);
    assert_string_equal(item->value_type, value_type);
    assert_string_equal(item->relationship, relationship);
    assert_string_equal(item->concept_scheme, "99MTLG");
    assert_string_equal(item->concept_code, code);
}

static void test_structured_report(void **state)
{
    (void)state;
    char path[512];
    mitilog_error error;
    dcm_object *object = NULL;
    dcm_facts facts;
    make_dicom("sr", sr_dump, "+te", path, sizeof path);
    assert_int_equal(dcm_object_load(path, &object, &error), MITILOG_OK);
    assert_int_equal(dcm_object_facts(object, 8, &facts, &error), MITILOG_OK);
    assert_true(facts.is_structured_report);
    assert_false(facts.sr_truncated);
    assert_int_equal(facts.sr_item_count, 4);
    /* Depth-first pre-order, positions as dsrdump prints them. */
    assert_sr_item(&facts.sr_items[0], 0, "1", "CONTAINER", "", "MTLG001");
    assert_string_equal(facts.sr_items[0].concept_meaning, "Acoustic output report");
    assert_sr_item(&facts.sr_items[1], 1, "1.1", "NUM", "CONTAINS", "MTLG010");
    assert_string_equal(facts.sr_items[1].numeric_value, "0.9");
    assert_string_equal(facts.sr_items[1].unit_scheme, "UCUM");
    assert_string_equal(facts.sr_items[1].unit_code, "1");
    assert_string_equal(facts.sr_items[1].unit_meaning, "no units");
    assert_string_equal(facts.sr_items[1].text_value, "");
    assert_string_equal(facts.sr_items[1].code_value, "");
    assert_sr_item(&facts.sr_items[2], 1, "1.2", "CONTAINER", "CONTAINS", "MTLG020");
    assert_sr_item(&facts.sr_items[3], 2, "1.2.1", "TEXT", "CONTAINS", "MTLG021");
    assert_string_equal(facts.sr_items[3].text_value, "C5-1");
    assert_string_equal(facts.sr_items[3].numeric_value, "");
    for (size_t i = 1; i < facts.sr_item_count; i++)
        assert_true(facts.sr_items[i].node_id != facts.sr_items[0].node_id);
    dcm_facts_free(&facts);

    /* Depth limit 1: the TEXT at depth 2 is skipped and flagged. */
    assert_int_equal(dcm_object_facts(object, 1, &facts, &error), MITILOG_OK);
    assert_int_equal(facts.sr_item_count, 3);
    assert_true(facts.sr_truncated);
    assert_string_equal(facts.sr_items[2].position, "1.2");
    dcm_facts_free(&facts);
    dcm_object_free(object);
}

static void test_broken_structured_report(void **state)
{
    (void)state;
    char path[512];
    mitilog_error error;
    dcm_object *object = NULL;
    dcm_facts facts;
    /* An SR SOP class without any content: facts still succeed. */
    make_dicom("broken_sr",
               "(0008,0016) UI =ComprehensiveSRStorage\n"
               "(0008,0018) UI [1.2.826.0.1.3680043.10.543.9.9]\n"
               "(0018,5022) DS [1.1]\n",
               "+te", path, sizeof path);
    assert_int_equal(dcm_object_load(path, &object, &error), MITILOG_OK);
    assert_int_equal(dcm_object_facts(object, 8, &facts, &error), MITILOG_OK);
    assert_true(facts.is_structured_report);
    assert_int_equal(facts.sr_item_count, 0);
    /* "1.1" padded to even length [std: PS3.5 6.2] */
    assert_string_equal(facts.values[DCM_ATTRIBUTE_MECHANICAL_INDEX], "1.1 ");
    dcm_facts_free(&facts);
    dcm_object_free(object);
}

/* The US image plus a Waveform Sequence whose Waveform Data (5400,1010)
 * is 80,000 bytes (over the 64 KiB bulk limit) and a small private OB
 * that must stay. */
static void make_us_image_with_waveform(char *out, size_t size)
{
    size_t words = 40000;
    size_t capacity = sizeof us_image_dump + words * 5 + 1024;
    char *dump = malloc(capacity);
    assert_non_null(dump);
    size_t length = (size_t)snprintf(dump, capacity, "%s", us_image_dump);
    length += (size_t)snprintf(dump + length, capacity - length,
                               "(0009,0010) LO [MITILOG TEST]\n"
                               "(0009,1001) OB 01\\02\\03\\04\n"
                               "(5400,0100) SQ (Sequence)\n"
                               "(fffe,e000) na (Item)\n"
                               "(003a,0005) US 1\n"
                               "(003a,0010) UL %zu\n"
                               "(5400,1004) US 16\n"
                               "(5400,1006) CS [SS]\n"
                               "(5400,1010) OW ",
                               words);
    for (size_t i = 0; i < words; i++)
        length += (size_t)snprintf(dump + length, capacity - length, "%s0001", i == 0 ? "" : "\\");
    snprintf(dump + length, capacity - length, "\n(fffe,e00d) na\n(fffe,e0dd) na\n");
    make_dicom("us_waveform", dump, "+te", out, size);
    free(dump);
}

/* Writes the header copy of object to path (dcm_object_header_bytes),
 * so that dcmdump and the reader can check it. */
static void save_header_copy(dcm_object *object, const char *path)
{
    mitilog_error error;
    unsigned char *bytes = NULL;
    size_t size = 0;
    assert_int_equal(dcm_object_header_bytes(object, &bytes, &size, &error), MITILOG_OK);
    assert_non_null(bytes);
    assert_true(size > 132);
    write_bytes(path, (const char *)bytes, size);
    free(bytes);
}

static void test_save_header(void **state)
{
    (void)state;
    char path[512], header_path[512], reference[1024];
    mitilog_error error;
    dcm_object *object = NULL, *header = NULL;
    dcm_facts facts;
    make_us_image_with_waveform(path, sizeof path);
    /* dcmdump sees pixel and waveform data in the original. */
    dcmdump_value(path, "7fe0,0010", reference, sizeof reference);
    assert_string_equal(reference, "00\\01\\02\\03");
    dcmdump_value(path, "5400,1010", reference, sizeof reference);
    assert_true(strlen(reference) > 0);

    assert_int_equal(dcm_object_load(path, &object, &error), MITILOG_OK);
    /* Facts first: the header copy removes the bulk data from the object. */
    assert_int_equal(dcm_object_facts(object, 8, &facts, &error), MITILOG_OK);
    assert_string_equal(facts.values[DCM_ATTRIBUTE_STATION_NAME], "Salle \xC3\x89"
                                                                  "chographie ");
    dcm_facts_free(&facts);
    path_in_temporary(header_path, sizeof header_path, "header.dcm");
    save_header_copy(object, header_path);

    /* dcmdump +P prints nothing for an absent tag. */
    dcmdump_value(header_path, "7fe0,0010", reference, sizeof reference);
    assert_string_equal(reference, "");
    dcmdump_value(header_path, "5400,1010", reference, sizeof reference);
    assert_string_equal(reference, "");
    /* Small elements stay, including the private one and the sequence. */
    dcmdump_value(header_path, "0009,1001", reference, sizeof reference);
    assert_string_equal(reference, "01\\02\\03\\04");
    dcmdump_value(header_path, "5400,1004", reference, sizeof reference);
    assert_true(strstr(reference, "16") != NULL);
    /* Same SOP Instance UID in the dataset and in the meta header. */
    dcmdump_value(header_path, "0002,0003", reference, sizeof reference);
    assert_string_equal(reference, US_SOP_INSTANCE_UID);

    assert_int_equal(dcm_object_load(header_path, &header, &error), MITILOG_OK);
    assert_int_equal(dcm_object_facts(header, 8, &facts, &error), MITILOG_OK);
    assert_string_equal(facts.values[DCM_ATTRIBUTE_SOP_INSTANCE_UID], US_SOP_INSTANCE_UID);
    assert_string_equal(facts.transfer_syntax_uid, "1.2.840.10008.1.2.1");
    assert_string_equal(facts.values[DCM_ATTRIBUTE_MECHANICAL_INDEX], "0.8 ");
    dcm_facts_free(&facts);
    dcm_object_free(header);

    /* A second copy of the same object is the same file. */
    char second_path[512];
    path_in_temporary(second_path, sizeof second_path, "header2.dcm");
    save_header_copy(object, second_path);
    assert_int_equal(run_command("cmp -s %s %s", header_path, second_path), 0);
    dcm_object_free(object);
}

/* An encapsulated (JPEG Baseline) object made with pydicom: the header
 * copy has no pixel data and still reads. */
static void test_save_header_encapsulated(void **state)
{
    (void)state;
    char path[512], header_path[512], script_path[512], reference[1024];
    mitilog_error error;
    dcm_object *object = NULL;
    path_in_temporary(path, sizeof path, "jpeg.dcm");
    path_in_temporary(script_path, sizeof script_path, "jpeg.py");
    path_in_temporary(header_path, sizeof header_path, "jpeg_header.dcm");
    char script[2048];
    snprintf(script, sizeof script,
             "import sys\n"
             "from pydicom.dataset import Dataset, FileMetaDataset\n"
             "from pydicom.encaps import encapsulate\n"
             "meta = FileMetaDataset()\n"
             "meta.MediaStorageSOPClassUID = '%s'\n"
             "meta.MediaStorageSOPInstanceUID = '%s'\n"
             "meta.TransferSyntaxUID = '1.2.840.10008.1.2.4.50'\n"
             "ds = Dataset()\n"
             "ds.file_meta = meta\n"
             "ds.SOPClassUID = meta.MediaStorageSOPClassUID\n"
             "ds.SOPInstanceUID = meta.MediaStorageSOPInstanceUID\n"
             "ds.MechanicalIndex = '0.7'\n"
             "ds.Rows = 2; ds.Columns = 2; ds.BitsAllocated = 8\n"
             "ds.SamplesPerPixel = 1; ds.PhotometricInterpretation = "
             "'MONOCHROME2'\n"
             "ds.PixelData = encapsulate([b'\\xff\\xd8fake\\xff\\xd9'])\n"
             "ds['PixelData'].VR = 'OB'\n"
             "ds.is_little_endian = True; ds.is_implicit_VR = False\n"
             "ds.save_as(sys.argv[1], write_like_original=False)\n",
             US_IMAGE_CLASS_UID, US_SOP_INSTANCE_UID);
    write_bytes(script_path, script, strlen(script));
    if (run_command("/usr/bin/python3 %s %s", script_path, path) != 0) {
        skip(); /* pydicom missing: nothing to test */
    }
    assert_int_equal(dcm_object_load(path, &object, &error), MITILOG_OK);
    save_header_copy(object, header_path);
    dcm_object_free(object);
    dcmdump_value(header_path, "7fe0,0010", reference, sizeof reference);
    assert_string_equal(reference, "");
    dcmdump_value(header_path, "0018,5022", reference, sizeof reference);
    assert_string_equal(reference, "0.7");
    /* Nothing encapsulated is left, so the original transfer syntax
     * (JPEG Baseline [std: PS3.5 A.4.1, 1.2.840.10008.1.2.4.50]) is kept;
     * dcmdump shows it as =JPEGBaseline. */
    dcmdump_value(header_path, "0002,0010", reference, sizeof reference);
    assert_string_equal(reference, "=JPEGBaseline");
    dcm_facts facts;
    assert_int_equal(dcm_object_load(header_path, &object, &error), MITILOG_OK);
    assert_int_equal(dcm_object_facts(object, 8, &facts, &error), MITILOG_OK);
    assert_string_equal(facts.transfer_syntax_uid, "1.2.840.10008.1.2.4.50");
    dcm_facts_free(&facts);
    dcm_object_free(object);
}

/* ------------------------------------------------------------------ */
/* Receiver                                                            */
/* ------------------------------------------------------------------ */

typedef struct recorded_store {
    pthread_mutex_t mutex;
    pthread_cond_t changed;
    int calls;
    int spool_file_was_part10; /* "DICM" at offset 128 */
    int spool_path_is_memory;  /* "/proc/self/fd/N" */
    unsigned char tail[256];   /* the received object's last bytes */
    size_t tail_size;
    char sop_class_uid[80];
    char sop_instance_uid[80];
    char calling_ae_title[20];
    char called_ae_title[20];
    char peer_address[64];
    int block;  /* handler waits while this is set */
    int inside; /* handlers running now */
    uint16_t answer;
} recorded_store;

static uint16_t record_store(void *context, const dcm_received *object)
{
    recorded_store *record = context;
    unsigned char header[132] = {0};
    unsigned char tail[256];
    size_t tail_size = 0;
    FILE *file = fopen(object->spool_path, "rb");
    size_t size = file != NULL ? fread(header, 1, sizeof header, file) : 0;
    if (file != NULL && fseek(file, -(long)sizeof tail, SEEK_END) == 0)
        tail_size = fread(tail, 1, sizeof tail, file);
    if (file != NULL)
        fclose(file);

    pthread_mutex_lock(&record->mutex);
    record->calls++;
    record->inside++;
    record->spool_file_was_part10 = size == sizeof header && memcmp(header + 128, "DICM", 4) == 0;
    record->spool_path_is_memory = strncmp(object->spool_path, "/proc/self/fd/", 14) == 0;
    memcpy(record->tail, tail, tail_size);
    record->tail_size = tail_size;
    snprintf(record->sop_class_uid, sizeof record->sop_class_uid, "%s",
             object->affected_sop_class_uid);
    snprintf(record->sop_instance_uid, sizeof record->sop_instance_uid, "%s",
             object->affected_sop_instance_uid);
    snprintf(record->calling_ae_title, sizeof record->calling_ae_title, "%s",
             object->calling_ae_title);
    snprintf(record->called_ae_title, sizeof record->called_ae_title, "%s",
             object->called_ae_title);
    snprintf(record->peer_address, sizeof record->peer_address, "%s", object->peer_address);
    pthread_cond_broadcast(&record->changed);
    while (record->block)
        pthread_cond_wait(&record->changed, &record->mutex);
    record->inside--;
    uint16_t answer = record->answer;
    pthread_mutex_unlock(&record->mutex);
    return answer;
}

static void record_init(recorded_store *record)
{
    memset(record, 0, sizeof *record);
    pthread_mutex_init(&record->mutex, NULL);
    pthread_cond_init(&record->changed, NULL);
    record->answer = DCM_STATUS_SUCCESS;
}

static void record_destroy(recorded_store *record)
{
    pthread_mutex_destroy(&record->mutex);
    pthread_cond_destroy(&record->changed);
}

/* A port the kernel just handed out and released. */
static unsigned free_port(void)
{
    int socket_fd = socket(AF_INET, SOCK_STREAM, 0);
    assert_true(socket_fd >= 0);
    struct sockaddr_in address;
    memset(&address, 0, sizeof address);
    address.sin_family = AF_INET;
    address.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    assert_int_equal(bind(socket_fd, (struct sockaddr *)&address, sizeof address), 0);
    socklen_t length = sizeof address;
    assert_int_equal(getsockname(socket_fd, (struct sockaddr *)&address, &length), 0);
    close(socket_fd);
    return ntohs(address.sin_port);
}

static dcm_server_settings receiver_settings(unsigned port)
{
    dcm_server_settings settings;
    memset(&settings, 0, sizeof settings);
    settings.ae_title = "MITILOG";
    settings.port = port;
    settings.max_associations = 4;
    settings.acse_timeout_seconds = 5;
    settings.dimse_timeout_seconds = 10;
    settings.max_pdu = 16384;
    return settings;
}

/* 1 if the last size bytes of the file at path are bytes. */
static int file_ends_with(const char *path, const unsigned char *bytes, size_t size)
{
    unsigned char tail[256];
    FILE *file = fopen(path, "rb");
    if (file == NULL || size > sizeof tail || fseek(file, -(long)size, SEEK_END) != 0) {
        if (file != NULL)
            fclose(file);
        return 0;
    }
    size_t read = fread(tail, 1, size, file);
    fclose(file);
    return read == size && memcmp(tail, bytes, size) == 0;
}

/* Exit statuses of DCMTK's echoscu/storescu: 0 on success, non-zero when
 * the association is rejected (DCMTK man pages, EXIT CODES). */
static void test_receive_echo_store_and_called_ae(void **state)
{
    (void)state;
    char image[512];
    mitilog_error error;
    recorded_store record;
    record_init(&record);
    unsigned port = free_port();
    dcm_server_settings settings = receiver_settings(port);
    dcm_server *server = NULL;
    assert_int_equal(dcm_server_create(&settings, record_store, &record, &server, &error),
                     MITILOG_OK);
    assert_int_equal(dcm_server_start(server, &error), MITILOG_OK);

    /* The port is taken now: a second server fails to start. */
    dcm_server *second = NULL;
    assert_int_equal(dcm_server_create(&settings, record_store, &record, &second, &error),
                     MITILOG_OK);
    assert_int_equal(dcm_server_start(second, &error), MITILOG_ERROR_IO);
    assert_non_null(strstr(error.text, "in use"));
    dcm_server_free(second);

    assert_int_equal(run_command("echoscu -q -aec MITILOG localhost %u", port), 0);
    make_us_image(image, sizeof image);
    assert_int_equal(run_command("storescu -q -aet MODALITY1 -aec MITILOG "
                                 "localhost %u %s",
                                 port, image),
                     0);
    assert_int_equal(record.calls, 1);
    /* Received byte for byte into a memory file: a meta header first, then
     * the data set as storescu sent it (its file's own transfer syntax),
     * so the object ends with the same bytes as the file. */
    assert_true(record.spool_file_was_part10);
    assert_true(record.spool_path_is_memory);
    assert_int_equal(record.tail_size, 256);
    assert_true(file_ends_with(image, record.tail, record.tail_size));
    assert_string_equal(record.sop_class_uid, US_IMAGE_CLASS_UID);
    assert_string_equal(record.sop_instance_uid, US_SOP_INSTANCE_UID);
    assert_string_equal(record.calling_ae_title, "MODALITY1");
    assert_string_equal(record.called_ae_title, "MITILOG");
    assert_string_equal(record.peer_address, "127.0.0.1");

    /* Called AE enforced: A-ASSOCIATE-RJ, echoscu fails. */
    assert_int_not_equal(run_command("echoscu -q -aec ELSEWHERE localhost %u "
                                     ">/dev/null 2>&1",
                                     port),
                         0);
    /* A handler answering Out of Resources: storescu sees the status. */
    record.answer = DCM_STATUS_OUT_OF_RESOURCES;
    run_command("storescu -q -aec MITILOG localhost %u %s >/dev/null 2>&1", port, image);
    assert_int_equal(record.calls, 2);

    dcm_server_stop(server);
    dcm_server_counters counters;
    dcm_server_get_counters(server, &counters);
    assert_int_equal(counters.associations_accepted, 3);
    assert_int_equal(counters.associations_refused, 1);
    assert_int_equal(counters.associations_active, 0);
    assert_int_equal(counters.objects_received, 2);
    dcm_server_free(server);
    record_destroy(&record);
}

static void test_receive_allowed_peers(void **state)
{
    (void)state;
    char image[512];
    mitilog_error error;
    recorded_store record;
    record_init(&record);
    unsigned port = free_port();
    dcm_server_settings settings = receiver_settings(port);
    const dcm_allowed_peer peers[] = {
        {"MODALITY1", NULL},
        {"MODALITY2", "127.0.0.1"},
        {"MODALITY3", "192.0.2.7"}, /* TEST-NET-1 [std: RFC 5737] */
    };
    settings.allowed_peers = peers;
    settings.allowed_peer_count = 3;
    dcm_server *server = NULL;
    assert_int_equal(dcm_server_create(&settings, record_store, &record, &server, &error),
                     MITILOG_OK);
    assert_int_equal(dcm_server_start(server, &error), MITILOG_OK);
    make_us_image(image, sizeof image);
    const char *format = "storescu -q -aet %s -aec MITILOG localhost %u %s "
                         ">/dev/null 2>&1";
    assert_int_equal(run_command(format, "MODALITY1", port, image), 0);
    assert_int_equal(run_command(format, "MODALITY2", port, image), 0);
    assert_int_not_equal(run_command(format, "MODALITY3", port, image), 0);
    assert_int_not_equal(run_command(format, "STRANGER", port, image), 0);
    assert_int_equal(record.calls, 2);
    dcm_server_counters counters;
    dcm_server_get_counters(server, &counters);
    assert_int_equal(counters.associations_refused, 2);
    dcm_server_free(server);
    record_destroy(&record);
}

typedef struct background_send {
    char command[1024];
    int status;
} background_send;

static void *run_background(void *argument)
{
    background_send *send = argument;
    int status = system(send->command);
    send->status = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
    return NULL;
}

static void *release_later(void *argument)
{
    recorded_store *record = argument;
    struct timespec pause = {1, 500000000};
    nanosleep(&pause, NULL);
    pthread_mutex_lock(&record->mutex);
    record->block = 0;
    pthread_cond_broadcast(&record->changed);
    pthread_mutex_unlock(&record->mutex);
    return NULL;
}

static void test_receive_association_limit(void **state)
{
    (void)state;
    char image[512];
    mitilog_error error;
    recorded_store record;
    record_init(&record);
    record.block = 1;
    unsigned port = free_port();
    dcm_server_settings settings = receiver_settings(port);
    settings.max_associations = 1;
    dcm_server *server = NULL;
    assert_int_equal(dcm_server_create(&settings, record_store, &record, &server, &error),
                     MITILOG_OK);
    assert_int_equal(dcm_server_start(server, &error), MITILOG_OK);
    make_us_image(image, sizeof image);

    /* One storescu holds the only slot while its handler blocks. */
    background_send send;
    snprintf(send.command, sizeof send.command, "storescu -q -aec MITILOG localhost %u %s", port,
             image);
    pthread_t thread;
    assert_int_equal(pthread_create(&thread, NULL, run_background, &send), 0);
    pthread_mutex_lock(&record.mutex);
    struct timespec deadline;
    clock_gettime(CLOCK_REALTIME, &deadline);
    deadline.tv_sec += 20;
    while (record.inside == 0)
        assert_int_equal(pthread_cond_timedwait(&record.changed, &record.mutex, &deadline), 0);
    pthread_mutex_unlock(&record.mutex);

    /* A second association: transient rejection, local limit exceeded. */
    assert_int_not_equal(run_command("echoscu -q -aec MITILOG localhost %u "
                                     ">/dev/null 2>&1",
                                     port),
                         0);
    /* Stop while the object is still in the handler: a helper thread
     * releases it a moment later, and the sender still gets its answer
     * (storescu exits 0) before dcm_server_stop() returns. */
    pthread_t releaser;
    assert_int_equal(pthread_create(&releaser, NULL, release_later, &record), 0);
    dcm_server_stop(server);
    assert_int_equal(pthread_join(releaser, NULL), 0);
    assert_int_equal(pthread_join(thread, NULL), 0);
    assert_int_equal(send.status, 0);
    dcm_server_counters counters;
    dcm_server_get_counters(server, &counters);
    assert_int_equal(counters.associations_refused, 1);
    assert_int_equal(counters.objects_received, 1);
    dcm_server_free(server);
    record_destroy(&record);
}

/* TLS with a CA made by openssl: client certificates required. */
static void test_receive_tls(void **state)
{
    (void)state;
    char image[512];
    mitilog_error error;
    recorded_store record;
    record_init(&record);
    const char *d = temporary_directory;
    int made = run_command("cd %s && openssl req -x509 -newkey rsa:2048 -nodes -days 2 "
                           "-subj /CN=mitilog-test-ca -keyout ca.key -out ca.pem && "
                           "for who in server client; do "
                           "openssl req -newkey rsa:2048 -nodes -subj /CN=$who "
                           "-keyout $who.key -out $who.csr && "
                           "openssl x509 -req -in $who.csr -CA ca.pem -CAkey ca.key "
                           "-CAcreateserial -days 2 -out $who.pem; done >/dev/null 2>&1",
                           d);
    if (made != 0)
        skip();
    char certificate[512], key[512], ca[512];
    snprintf(certificate, sizeof certificate, "%s/server.pem", d);
    snprintf(key, sizeof key, "%s/server.key", d);
    snprintf(ca, sizeof ca, "%s/ca.pem", d);
    unsigned port = free_port();
    dcm_server_settings settings = receiver_settings(port);
    settings.tls_certificate_file = certificate;
    settings.tls_private_key_file = key;
    settings.tls_ca_file = ca;
    dcm_server *server = NULL;
    assert_int_equal(dcm_server_create(&settings, record_store, &record, &server, &error),
                     MITILOG_OK);
    assert_int_equal(dcm_server_start(server, &error), MITILOG_OK);
    make_us_image(image, sizeof image);
    assert_int_equal(run_command("storescu -q +tls %s/client.key "
                                 "%s/client.pem +cf %s/ca.pem -aec MITILOG "
                                 "localhost %u %s",
                                 d, d, d, port, image),
                     0);
    assert_int_equal(record.calls, 1);
    /* Without a client certificate the handshake fails. */
    assert_int_not_equal(run_command("storescu -q +tla +cf %s/ca.pem -aec "
                                     "MITILOG localhost %u %s >/dev/null 2>&1",
                                     d, port, image),
                         0);
    /* Plain TCP to a TLS port fails too. */
    assert_int_not_equal(run_command("echoscu -q -to 5 -aec MITILOG localhost "
                                     "%u >/dev/null 2>&1",
                                     port),
                         0);
    assert_int_equal(record.calls, 1);
    dcm_server_free(server);
    record_destroy(&record);
}

#define RECEIVER_TESTS                                                                             \
    cmocka_unit_test(test_receive_echo_store_and_called_ae),                                       \
        cmocka_unit_test(test_receive_allowed_peers),                                              \
        cmocka_unit_test(test_receive_association_limit), cmocka_unit_test(test_receive_tls),

int main(void)
{
    mitilog_error error;
    /* MITILOG_TEST_VERBOSE=1 shows mitilog's debug lines and DCMTK's. */
    int verbose = getenv("MITILOG_TEST_VERBOSE") != NULL;
    log_set_level(verbose ? LOG_LEVEL_DEBUG : LOG_LEVEL_WARNING);
    if (mkdtemp(temporary_directory) == NULL) {
        perror("mkdtemp");
        return 1;
    }
    if (dcm_initialise(verbose ? 0 : 3, &error) != MITILOG_OK) {
        fprintf(stderr, "dcm_initialise: %s\n", error.text);
        return 1;
    }
    const struct CMUnitTest tests[] = {cmocka_unit_test(test_raw_values_and_regions),
                                       cmocka_unit_test(test_latin1_converted_to_utf8),
                                       cmocka_unit_test(test_bare_dataset),
                                       cmocka_unit_test(test_unreadable_files),
                                       cmocka_unit_test(test_structured_report),
                                       cmocka_unit_test(test_broken_structured_report),
                                       cmocka_unit_test(test_save_header),
                                       cmocka_unit_test(test_save_header_encapsulated),
                                       RECEIVER_TESTS};
    int failures = cmocka_run_group_tests(tests, NULL, NULL);
    if (failures == 0)
        run_command("rm -rf %s", temporary_directory);
    return failures;
}

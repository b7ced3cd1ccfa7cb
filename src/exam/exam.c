/* The exam vocabulary (exam.h): names, the TI ladder, the governing
 * index. */
#include "exam/exam.h"

#include <stdio.h>
#include <string.h>
#include <strings.h>

const double exam_ti_ladder[EXAM_TI_STEP_COUNT] = {0.7, 1.0, 1.5, 2.0, 2.5, 3.0};

const char *exam_value_status_name(exam_value_status status)
{
    switch (status) {
    case EXAM_VALUE_OK: return "ok";
    case EXAM_VALUE_INVALID: return "invalid";
    case EXAM_VALUE_MISSING: break;
    }
    return "missing";
}

const char *exam_index_name(exam_index index)
{
    static const char *const names[EXAM_INDEX_COUNT] = {"mi",  "tis",       "tib",
                                                        "tic", "tis_focus", "tis_surface"};
    return (unsigned)index < EXAM_INDEX_COUNT ? names[index] : "unknown";
}

static const char *const exam_mode_names[EXAM_MODE_COUNT] = {"2d",
                                                             "m",
                                                             "cw",
                                                             "pw",
                                                             "colour",
                                                             "colour_m",
                                                             "3d",
                                                             "power",
                                                             "tissue_characterization",
                                                             "spatially_related_frames"};

/* PS3.3 C.8.5.6.1.1: the Image Type value 4 bit of each mode, in
 * exam_mode order (the only place those bit values are written). */
static const unsigned exam_image_type_bits[EXAM_MODE_COUNT] = {
    0x0001, 0x0002, 0x0004, 0x0008, 0x0010, 0x0020, 0x0040, 0x0100, 0x0200, 0x0400};

unsigned exam_modes_image_type_bits(unsigned modes)
{
    unsigned bits = 0;
    for (int m = 0; m < EXAM_MODE_COUNT; m++)
        if (modes & EXAM_MODE_BIT(m))
            bits |= exam_image_type_bits[m];
    return bits;
}

unsigned exam_image_type_defined_bits(void)
{
    return exam_modes_image_type_bits((1u << EXAM_MODE_COUNT) - 1);
}

unsigned exam_modes_from_image_type_bits(unsigned bits)
{
    unsigned modes = 0;
    for (int m = 0; m < EXAM_MODE_COUNT; m++)
        if (bits & exam_image_type_bits[m])
            modes |= EXAM_MODE_BIT(m);
    return modes;
}

const char *exam_mode_name(exam_mode mode)
{
    if ((int)mode < 0 || mode >= EXAM_MODE_COUNT)
        return NULL;
    return exam_mode_names[mode];
}

int exam_mode_from_name(const char *name)
{
    if (name == NULL)
        return -1;
    for (int i = 0; i < EXAM_MODE_COUNT; i++)
        if (strcasecmp(name, exam_mode_names[i]) == 0)
            return i;
    if (strcasecmp(name, "b") == 0)
        return EXAM_MODE_2D;
    if (strcasecmp(name, "color") == 0)
        return EXAM_MODE_COLOUR;
    if (strcasecmp(name, "color_m") == 0)
        return EXAM_MODE_COLOUR_M;
    return -1;
}

static const char *const exam_group_names[EXAM_GROUP_COUNT] = {
    "general", "obstetric", "neonatal", "transcranial", "ophthalmic", "contrast"};

const char *exam_group_name(exam_group group)
{
    return (unsigned)group < EXAM_GROUP_COUNT ? exam_group_names[group] : "unknown";
}

int exam_group_parse(const char *text, exam_group *group)
{
    for (int i = 0; text != NULL && i < EXAM_GROUP_COUNT; i++) {
        if (strcmp(text, exam_group_names[i]) == 0) {
            *group = (exam_group)i;
            return 0;
        }
    }
    return -1;
}

static const char *const exam_severity_names[] = {"advisory", "warning", "violation"};

const char *exam_severity_name(exam_severity severity)
{
    return (unsigned)severity <= EXAM_SEVERITY_VIOLATION ? exam_severity_names[severity]
                                                         : "unknown";
}

int exam_severity_parse(const char *text, exam_severity *severity)
{
    for (int i = 0; text != NULL && i <= EXAM_SEVERITY_VIOLATION; i++) {
        if (strcmp(text, exam_severity_names[i]) == 0) {
            *severity = (exam_severity)i;
            return 0;
        }
    }
    return -1;
}

void exam_ti_threshold_label(double threshold, char out[EXAM_TI_LABEL_SIZE])
{
    snprintf(out, EXAM_TI_LABEL_SIZE, "%.15g", threshold);
    if (strpbrk(out, ".eEn") == NULL && strlen(out) + 2 < EXAM_TI_LABEL_SIZE)
        strcat(out, ".0");
}

exam_index exam_governing_index(exam_governing rule, int has_gestational_age,
                                double gestational_age_weeks, const char **source)
{
    const char *ignored;
    if (source == NULL)
        source = &ignored;
    switch (rule) {
    case EXAM_GOVERNING_TIB: *source = "exam_type"; return EXAM_INDEX_TIB;
    case EXAM_GOVERNING_TIC: *source = "exam_type"; return EXAM_INDEX_TIC;
    case EXAM_GOVERNING_BY_GESTATION:
        if (!has_gestational_age) {
            *source = "gestational_age_unknown";
            return EXAM_INDEX_TIB;
        }
        *source = "gestational_age";
        return gestational_age_weeks < EXAM_OSSIFICATION_WEEKS ? EXAM_INDEX_TIS : EXAM_INDEX_TIB;
    case EXAM_GOVERNING_TIS: break;
    }
    *source = "exam_type";
    return EXAM_INDEX_TIS;
}

int exam_site_name_check(const char *text, char *reason, size_t size)
{
    const char *problem = NULL;
    size_t length = text != NULL ? strlen(text) : 0;
    if (length == 0 || length > EXAM_SITE_MAX)
        problem = "a site name has 1 to 64 characters";
    else if (text[0] == ' ' || text[length - 1] == ' ')
        problem = "a site name neither starts nor ends with a space";
    for (size_t i = 0; problem == NULL && i < length; i++) {
        unsigned char c = (unsigned char)text[i];
        if (c < 0x20 || c == 0x7f)
            problem = "a site name has no control characters";
        else if (c == ',')
            problem = "a site name has no comma (filters list sites separated by commas)";
    }
    if (problem != NULL && reason != NULL && size > 0)
        snprintf(reason, size, "%s", problem);
    return problem == NULL;
}

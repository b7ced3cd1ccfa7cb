/*
 * sim_write.c - the simulated department's exams as DICOM Part 10 files,
 * through the shim's dcm_builder_* calls:
 *   DIR/<YYYY-MM-DD>/e<NNN>/<NNN>.dcm   (names from counters only)
 *   DIR/manifest.csv                   (the simulator's ground truth)
 *
 * Images are US Image (single frame) or US Multi-frame (cine) objects with
 * tiny pixel data; exams of types with has_sr end with a Comprehensive SR
 * in its own series. All dates and times are simulated, all UIDs derived
 * from the seed (sim_uid), so a seed gives byte-identical files.
 *
 * With --screens each room's scanner (sim_device.c) has its own identity
 * and matrix and draws its screen text into every frame (sim_screen.c);
 * the manifest then records, per file, the text drawn for each index and
 * the box of its ink: the ground truth of what a screen reader must read.
 */
#include "sim/sim.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "dicom/dcm.h"

#define SOP_US_IMAGE "1.2.840.10008.5.1.4.1.1.6.1"
#define SOP_US_MULTIFRAME "1.2.840.10008.5.1.4.1.1.3.1"
#define SOP_COMPREHENSIVE_SR "1.2.840.10008.5.1.4.1.1.88.33"

enum { UID_STUDY = 1, UID_SERIES = 2, UID_INSTANCE = 3, UID_SR_SERIES = 4, UID_SR_INSTANCE = 5 };

/* Pixel matrix: single frames 32x24, cine frames 16x12 (kept tiny, so
 * four weeks stay a couple of hundred MB). */
enum { SINGLE_COLUMNS = 32, SINGLE_ROWS = 24, CINE_COLUMNS = 16, CINE_ROWS = 12 };

void sim_uid(uint64_t seed, uint64_t kind, uint64_t a, uint64_t b, char *buffer, size_t size)
{
    unsigned __int128 v = ((unsigned __int128)sim_mix(seed, 0x75696431, kind, a, b) << 64) |
                          sim_mix(seed, 0x75696432, kind, a, b);
    char digits[48];
    size_t n = 0;
    do {
        digits[n++] = (char)('0' + (int)(v % 10));
        v /= 10;
    } while (v != 0 && n < sizeof digits);
    size_t used = (size_t)snprintf(buffer, size, "2.25.");
    while (n > 0 && used + 1 < size)
        buffer[used++] = digits[--n];
    buffer[used < size ? used : size - 1] = '\0';
}

/* ------------------------------------------------------------------ */

typedef struct sim_writer {
    const sim_options *options;
    long start_days; /* days since epoch of the start date */
    FILE *manifest;
    sim_run *run;
    dcm_builder *builder;
    mitilog_error *error;
    sim_screen *screen;  /* FreeType, with --screens */
    sim_overlay overlay; /* the current capture's screen text */
} sim_writer;

typedef struct sim_stamp {
    char date[16];     /* YYYYMMDD */
    char time[16];     /* HHMMSS */
    char datetime[32]; /* YYYYMMDDHHMMSS */
} sim_stamp;

static void sim_stamp_of(const sim_writer *w, int day_index, long second, sim_stamp *out)
{
    long day = w->start_days + day_index + second / 86400;
    long s = second % 86400;
    sim_date date = sim_date_from_days(day);
    snprintf(out->date, sizeof out->date, "%04d%02d%02d", date.year, date.month, date.day);
    snprintf(out->time, sizeof out->time, "%02ld%02ld%02ld", s / 3600, (s / 60) % 60, s % 60);
    snprintf(out->datetime, sizeof out->datetime, "%s%s", out->date, out->time);
}

#define PUT_S(g, e, v)                                                                             \
    do {                                                                                           \
        if (dcm_builder_put_string(w->builder, g, e, v, w->error))                                 \
            return MITILOG_ERROR_INVALID;                                                          \
    } while (0)
#define PUT_U(g, e, v)                                                                             \
    do {                                                                                           \
        if (dcm_builder_put_unsigned(w->builder, g, e, v, w->error))                               \
            return MITILOG_ERROR_INVALID;                                                          \
    } while (0)
#define PUT_F(g, e, v)                                                                             \
    do {                                                                                           \
        if (dcm_builder_put_float(w->builder, g, e, v, w->error))                                  \
            return MITILOG_ERROR_INVALID;                                                          \
    } while (0)
#define CHECK(call)                                                                                \
    do {                                                                                           \
        if ((call) != MITILOG_OK)                                                                  \
            return MITILOG_ERROR_INVALID;                                                          \
    } while (0)

static void sim_patient_age(int days, char *buffer, size_t size)
{
    if (days < 28)
        snprintf(buffer, size, "%03dD", days);
    else if (days < 2 * 365)
        snprintf(buffer, size, "%03dM", days * 12 / 365);
    else
        snprintf(buffer, size, "%03dY", days / 365);
}

/* Patient, study and equipment attributes shared by every object. */
static mitilog_status sim_put_common(sim_writer *w, const sim_exam *exam, const char *study_uid,
                                     int is_image)
{
    const sim_device *device =
        sim_device_of(exam->slot.room, exam->day_index, w->options->days, w->options->screens);
    const sim_exam_type *type = &sim_exam_types[exam->slot.exam_type];
    const sim_room *room = &sim_rooms[exam->slot.room];
    char text[96], station[17], serial[17];
    sim_stamp study, birth;

    sim_stamp_of(w, exam->day_index, exam->captures[0].second - 60, &study);
    /* Birth date: the exam date minus the patient's age in days. */
    sim_stamp_of(w, exam->day_index - exam->patient_age_days, 0, &birth);

    snprintf(text, sizeof text, "SIMULATED^PATIENT%06u", (unsigned)exam->patient_number);
    PUT_S(0x0010, 0x0010, text);
    snprintf(text, sizeof text, "SIM%06u", (unsigned)exam->patient_number);
    PUT_S(0x0010, 0x0020, text);
    PUT_S(0x0010, 0x0030, birth.date);
    snprintf(text, sizeof text, "%c", exam->patient_sex);
    PUT_S(0x0010, 0x0040, text);
    sim_patient_age(exam->patient_age_days, text, sizeof text);
    PUT_S(0x0010, 0x1010, text);

    PUT_S(0x0020, 0x000D, study_uid);
    PUT_S(0x0008, 0x0020, study.date);
    PUT_S(0x0008, 0x0030, study.time);
    PUT_S(0x0008, 0x0090, "");
    snprintf(text, sizeof text, "%d", exam->exam_number);
    PUT_S(0x0020, 0x0010, text);
    snprintf(text, sizeof text, "SA%s%03d", study.date, exam->exam_number);
    PUT_S(0x0008, 0x0050, text);
    PUT_S(0x0008, 0x1030, type->study_description);
    PUT_S(0x0008, 0x0201, "+0000");

    PUT_S(0x0008, 0x0070, device->manufacturer);
    PUT_S(0x0008, 0x0080, SIM_HOSPITAL_NAME);
    PUT_S(0x0008, 0x1010, sim_site_name(room->station_name, w->options->site, station));
    PUT_S(0x0008, 0x1040, SIM_DEPARTMENT_NAME);
    PUT_S(0x0008, 0x1090, device->model_name);
    PUT_S(0x0018, 0x1000, sim_site_name(room->serial, w->options->site, serial));
    PUT_S(0x0018, 0x1020, device->software_versions);
    if (is_image) /* Operators' Name is not in the SR IODs */
        PUT_S(0x0008, 0x1070, sim_operators[exam->operator_index]);
    return MITILOG_OK;
}

static mitilog_status sim_put_region(sim_writer *w, unsigned spatial, unsigned data_type,
                                     unsigned x0, unsigned y0, unsigned x1, unsigned y1,
                                     unsigned units_x, unsigned units_y, double delta_x,
                                     double delta_y, uint32_t frequency_khz, uint32_t prf)
{
    CHECK(dcm_builder_begin_item(w->builder, 0x0018, 0x6011, w->error));
    PUT_U(0x0018, 0x6012, spatial);
    PUT_U(0x0018, 0x6014, data_type);
    PUT_U(0x0018, 0x6016, 0);
    PUT_U(0x0018, 0x6018, x0);
    PUT_U(0x0018, 0x601A, y0);
    PUT_U(0x0018, 0x601C, x1);
    PUT_U(0x0018, 0x601E, y1);
    PUT_U(0x0018, 0x6024, units_x);
    PUT_U(0x0018, 0x6026, units_y);
    PUT_F(0x0018, 0x602C, delta_x);
    PUT_F(0x0018, 0x602E, delta_y);
    PUT_U(0x0018, 0x6030, frequency_khz);
    if (prf > 0)
        PUT_U(0x0018, 0x6032, prf);
    CHECK(dcm_builder_end_item(w->builder, w->error));
    return MITILOG_OK;
}

enum { UNITS_CM = 3, UNITS_SECONDS = 4, UNITS_CM_PER_S = 7 };
enum { SPATIAL_2D = 1, SPATIAL_M = 2, SPATIAL_SPECTRAL = 3 };
enum { DATA_TISSUE = 1, DATA_COLOUR = 2, DATA_PW = 3, DATA_CW = 4 };

/* Sequence of Ultrasound Regions for a capture's mode. */
static mitilog_status sim_put_regions(sim_writer *w, const sim_capture *c, const sim_probe *probe,
                                      unsigned cols, unsigned rows)
{
    uint32_t f = probe->frequency_khz;
    uint32_t doppler_f = f * 7 / 10;
    double depth = 0.3 * 64.0 / (double)cols; /* cm per pixel */
    unsigned half = rows / 2;
    switch (c->mode) {
    case SIM_MODE_B:
    case SIM_MODE_3D:
        return sim_put_region(w, SPATIAL_2D, DATA_TISSUE, 0, 0, cols - 1, rows - 1, UNITS_CM,
                              UNITS_CM, depth, depth, f, 0);
    case SIM_MODE_COLOUR:
    case SIM_MODE_POWER:
        CHECK(sim_put_region(w, SPATIAL_2D, DATA_TISSUE, 0, 0, cols - 1, rows - 1, UNITS_CM,
                             UNITS_CM, depth, depth, f, 0));
        return sim_put_region(w, SPATIAL_2D, DATA_COLOUR, cols / 4, rows / 4, 3 * cols / 4 - 1,
                              3 * rows / 4 - 1, UNITS_CM, UNITS_CM, depth, depth, doppler_f,
                              c->mode == SIM_MODE_POWER ? 1500 : 3000);
    case SIM_MODE_M:
        CHECK(sim_put_region(w, SPATIAL_2D, DATA_TISSUE, 0, 0, cols - 1, half - 1, UNITS_CM,
                             UNITS_CM, depth, depth, f, 0));
        return sim_put_region(w, SPATIAL_M, DATA_TISSUE, 0, half, cols - 1, rows - 1, UNITS_SECONDS,
                              UNITS_CM, 0.05, depth, f, 0);
    case SIM_MODE_PW:
        CHECK(sim_put_region(w, SPATIAL_2D, DATA_TISSUE, 0, 0, cols - 1, half - 1, UNITS_CM,
                             UNITS_CM, depth, depth, f, 0));
        CHECK(sim_put_region(w, SPATIAL_2D, DATA_COLOUR, cols / 4, 0, 3 * cols / 4 - 1, half - 1,
                             UNITS_CM, UNITS_CM, depth, depth, doppler_f, 3500));
        return sim_put_region(w, SPATIAL_SPECTRAL, DATA_PW, 0, half, cols - 1, rows - 1,
                              UNITS_SECONDS, UNITS_CM_PER_S, 0.05, 2.5, doppler_f, 5000);
    case SIM_MODE_CW:
        CHECK(sim_put_region(w, SPATIAL_2D, DATA_TISSUE, 0, 0, cols - 1, half - 1, UNITS_CM,
                             UNITS_CM, depth, depth, f, 0));
        return sim_put_region(w, SPATIAL_SPECTRAL, DATA_CW, 0, half, cols - 1, rows - 1,
                              UNITS_SECONDS, UNITS_CM_PER_S, 0.05, 10.0, doppler_f, 12000);
    case SIM_MODE_COUNT: break;
    }
    return MITILOG_OK;
}

static int sim_mode_is_colour(sim_mode mode)
{
    return mode == SIM_MODE_COLOUR || mode == SIM_MODE_POWER || mode == SIM_MODE_PW;
}

/* A screen device's picture: black, with a fan widening down from the
 * top centre in grey bands that drift one row per frame, and in colour
 * modes a red and blue flow box inside it. Long runs of equal values, so
 * that RLE and JPEG-LS compress it well. */
static void sim_picture(uint8_t *frame, unsigned cols, unsigned rows, unsigned samples,
                        size_t index, int colour)
{
    int centre = (int)cols / 2;
    for (unsigned y = 0; y < rows; y++) {
        int half = (int)((y * cols) / (2 * rows));
        unsigned band = (unsigned)(((y + index) / 8) % 6);
        int flow_row = colour && y >= rows / 3 && y < 2 * rows / 3;
        int red = ((y + index) / 6) % 2 == 0;
        for (unsigned x = 0; x < cols; x++) {
            int offset = (int)x - centre;
            int inside = offset >= -half && offset <= half;
            uint8_t grey = inside ? (uint8_t)(50 + band * 20) : 0;
            uint8_t *out = &frame[((size_t)y * cols + x) * samples];
            if (samples == 1) {
                out[0] = grey;
                continue;
            }
            if (inside && flow_row && offset > -(int)cols / 6 && offset < (int)cols / 6) {
                out[0] = red ? 200 : 40;
                out[1] = red ? 40 : 60;
                out[2] = red ? 40 : 200;
            } else {
                out[0] = out[1] = out[2] = grey;
            }
        }
    }
}

/* A deterministic, cheap picture: a speckle-free gradient per frame; on a
 * screen device, its picture with the screen text laid over. */
static mitilog_status sim_put_pixels(sim_writer *w, const sim_capture *c, unsigned cols,
                                     unsigned rows, unsigned samples, int screen)
{
    size_t frame = (size_t)cols * rows * samples;
    size_t size = frame * (size_t)c->frames;
    uint8_t *pixels = malloc(size);
    if (pixels == NULL)
        return mitilog_error_set(w->error, MITILOG_ERROR_MEMORY, "pixels: out of memory");
    for (size_t f = 0; f < (size_t)c->frames && screen; f++) {
        sim_picture(pixels + f * frame, cols, rows, samples, f, samples == 3);
        sim_overlay_apply(&w->overlay, pixels + f * frame, samples);
    }
    for (size_t f = 0; f < (size_t)c->frames && !screen; f++)
        for (size_t i = 0; i < frame; i++) {
            size_t pixel = i / samples, x = pixel % cols, y = pixel / cols;
            pixels[f * frame + i] = (uint8_t)((x * 3 + y * 5 + f * 7 + (i % samples) * 40) & 0xFF);
        }
    mitilog_status status = dcm_builder_put_pixels(w->builder, pixels, size, w->error);
    free(pixels);
    return status;
}

/* Laterality of an exam's images: every exam of a paired structure
 * (shoulder, leg, kidney, testis) looks at one side, chosen from the
 * patient number; NULL when the body part is not paired. */
static const char *sim_laterality(const sim_exam_type *type, const sim_exam *exam)
{
    static const char *const paired[] = {"SHOULDER", "LEG", "KIDNEY", "SCROTUM"};
    if (type->body_part == NULL)
        return NULL;
    for (size_t i = 0; i < sizeof paired / sizeof paired[0]; i++)
        if (strcmp(type->body_part, paired[i]) == 0)
            return exam->patient_number % 2 ? "R" : "L";
    return NULL;
}

static void sim_format_index(int decimals, double value, char *buffer, size_t size)
{
    snprintf(buffer, size, "%.*f", decimals == 2 ? 2 : 1, value);
}

/* Lays out the screen text of a capture into w->overlay and fills drawn
 * (every index "" when the device draws no text). */
static mitilog_status sim_render_screen(sim_writer *w, const sim_exam *exam, size_t position,
                                        const sim_device *device,
                                        sim_drawn_index drawn[SIM_INDEX_COUNT])
{
    const sim_exam_type *type = &sim_exam_types[exam->slot.exam_type];
    const sim_capture *c = &exam->captures[position];
    sim_screen_text text;
    memset(&text, 0, sizeof text);
    if (c->has_indices) {
        text.show[SIM_INDEX_MI] = text.show[SIM_INDEX_TIS] = 1;
        text.show[SIM_INDEX_TIB] = type->indices == SIM_INDICES_TIB;
        text.show[SIM_INDEX_TIC] = type->indices == SIM_INDICES_TIC;
    }
    text.values[SIM_INDEX_MI] = c->mi;
    text.values[SIM_INDEX_TIS] = c->tis;
    text.values[SIM_INDEX_TIB] = c->tib;
    text.values[SIM_INDEX_TIC] = c->tic;
    sim_date date = sim_date_from_days(w->start_days + exam->day_index + c->second / 86400);
    long s = c->second % 86400;
    text.year = date.year;
    text.month = date.month;
    text.day = date.day;
    text.hour = (int)(s / 3600);
    text.minute = (int)((s / 60) % 60);
    text.second = (int)(s % 60);
    text.frequency_mhz = sim_probes[type->probe].frequency_khz / 1000.0;
    /* the other text near the indices: its own stream, so that the
     * exposure model's draws stay as they were */
    uint64_t h = sim_mix(w->options->seed, 0x73637265656eULL,
                         (uint64_t)(exam->day_index * 1000 + exam->exam_number), position, 0);
    text.gain = 40 + (int)(h % 31);
    text.depth_cm = 4 + (int)((h >> 8) % 15);
    text.frame_rate = c->frames > 1 && c->frame_time_ms > 0.0
                          ? (int)lround(1000.0 / c->frame_time_ms)
                          : 18 + (int)((h >> 16) % 30);
    if (device->screen.rows == NULL) {
        memset(drawn, 0, sizeof(sim_drawn_index) * SIM_INDEX_COUNT);
        return MITILOG_OK;
    }
    return sim_screen_render(w->screen, device, &text, &w->overlay, drawn, w->error);
}

/* header: the capture whose indices the header carries (the capture
 * itself, or the one before on a stale header); NULL: none. */
static mitilog_status sim_put_image(sim_writer *w, const sim_exam *exam, size_t position,
                                    const char *study_uid, const char *series_uid,
                                    const char *sop_uid, const sim_capture *header)
{
    const sim_exam_type *type = &sim_exam_types[exam->slot.exam_type];
    const sim_probe *probe = &sim_probes[type->probe];
    const sim_capture *c = &exam->captures[position];
    const sim_device *device =
        sim_device_of(exam->slot.room, exam->day_index, w->options->days, w->options->screens);
    int screen = device->screen.rows != NULL;
    int cine = c->frames > 1;
    unsigned cols = cine ? CINE_COLUMNS : SINGLE_COLUMNS;
    unsigned rows = cine ? CINE_ROWS : SINGLE_ROWS;
    if (w->options->matrix_columns > 0 && w->options->matrix_rows > 0) {
        cols = cine ? w->options->matrix_columns / 2 : w->options->matrix_columns;
        rows = cine ? w->options->matrix_rows / 2 : w->options->matrix_rows;
    }
    if (screen) { /* a scanner keeps one matrix, single frame or cine */
        cols = device->columns;
        rows = device->rows;
    }
    int colour = sim_mode_is_colour(c->mode);
    char text[96];
    sim_stamp at, series;

    sim_stamp_of(w, exam->day_index, c->second, &at);
    sim_stamp_of(w, exam->day_index, exam->captures[0].second, &series);

    PUT_S(0x0008, 0x0016, cine ? SOP_US_MULTIFRAME : SOP_US_IMAGE);
    PUT_S(0x0008, 0x0018, sop_uid);
    PUT_S(0x0008, 0x0012, at.date);
    PUT_S(0x0008, 0x0013, at.time);
    snprintf(text, sizeof text, "ORIGINAL\\PRIMARY\\%s\\%04X", type->image_type_3,
             sim_mode_bitmap(c->mode));
    PUT_S(0x0008, 0x0008, text);
    CHECK(sim_put_common(w, exam, study_uid, 1));

    PUT_S(0x0008, 0x0060, "US");
    PUT_S(0x0020, 0x000E, series_uid);
    PUT_S(0x0020, 0x0011, "1");
    PUT_S(0x0008, 0x0021, series.date);
    PUT_S(0x0008, 0x0031, series.time);
    PUT_S(0x0008, 0x103E, type->preset);
    PUT_S(0x0018, 0x1030, type->preset);
    PUT_S(0x0040, 0x0254, type->study_description);
    if (type->body_part != NULL)
        PUT_S(0x0018, 0x0015, type->body_part);
    /* Laterality (0020,0060) is Type 2C in General Series (PS3.3
     * C.7.3.1): required for a paired structure, with a value (dciodvfy
     * warns when it is empty but the side is known). */
    const char *laterality = sim_laterality(type, exam);
    if (laterality != NULL)
        PUT_S(0x0020, 0x0060, laterality);

    snprintf(text, sizeof text, "%zu", position + 1);
    PUT_S(0x0020, 0x0013, text);
    PUT_S(0x0020, 0x0020, "");
    PUT_S(0x0008, 0x0022, at.date);
    PUT_S(0x0008, 0x0032, at.time);
    PUT_S(0x0008, 0x002A, at.datetime);
    PUT_S(0x0008, 0x0023, at.date);
    PUT_S(0x0008, 0x0033, at.time);

    PUT_S(0x0018, 0x5010, probe->model);
    PUT_S(0x0018, 0x6031, probe->type);
    if (header != NULL && header->has_indices) {
        int decimals = exam->slot.decimals;
        sim_format_index(decimals, header->mi, text, sizeof text);
        PUT_S(0x0018, 0x5022, text);
        sim_format_index(decimals, header->tis, text, sizeof text);
        PUT_S(0x0018, 0x5027, text);
        if (type->indices == SIM_INDICES_TIB) {
            sim_format_index(decimals, header->tib, text, sizeof text);
            PUT_S(0x0018, 0x5024, text);
        }
        if (type->indices == SIM_INDICES_TIC) {
            sim_format_index(decimals, header->tic, text, sizeof text);
            PUT_S(0x0018, 0x5026, text);
        }
    }

    PUT_U(0x0028, 0x0002, colour ? 3 : 1);
    PUT_S(0x0028, 0x0004, colour ? "RGB" : "MONOCHROME2");
    if (colour)
        PUT_U(0x0028, 0x0006, 0);
    PUT_U(0x0028, 0x0010, rows);
    PUT_U(0x0028, 0x0011, cols);
    PUT_U(0x0028, 0x0100, 8);
    PUT_U(0x0028, 0x0101, 8);
    PUT_U(0x0028, 0x0102, 7);
    PUT_U(0x0028, 0x0103, 0);
    PUT_U(0x0028, 0x0014, colour ? 1 : 0);
    PUT_S(0x0028, 0x2110, "00");
    if (cine) {
        snprintf(text, sizeof text, "%d", c->frames);
        PUT_S(0x0028, 0x0008, text);
        PUT_U(0x0028, 0x0009, (0x0018u << 16) | 0x1063u);
        snprintf(text, sizeof text, "%.1f", c->frame_time_ms);
        PUT_S(0x0018, 0x1063, text);
    }
    CHECK(sim_put_regions(w, c, probe, cols, rows));
    return sim_put_pixels(w, c, cols, rows, colour ? 3 : 1, screen);
}

/* ------------------------------------------------------------------ */
/* The acoustic output SR                                              */
/* ------------------------------------------------------------------ */

static dcm_sr_build_item sim_sr_num(const char *scheme, const char *code, const char *meaning,
                                    const char *value, const char *unit_code,
                                    const char *unit_meaning)
{
    dcm_sr_build_item item;
    memset(&item, 0, sizeof item);
    item.depth = 1;
    item.value_type = "NUM";
    item.relationship = "CONTAINS";
    item.concept_scheme = scheme;
    item.concept_code = code;
    item.concept_meaning = meaning;
    item.numeric_value = value;
    item.unit_scheme = "UCUM";
    item.unit_code = unit_code;
    item.unit_meaning = unit_meaning;
    return item;
}

static mitilog_status sim_put_sr(sim_writer *w, const sim_exam *exam, const char *study_uid,
                                 const char *series_uid, const char *sop_uid, char uids[][72])
{
    const sim_exam_type *type = &sim_exam_types[exam->slot.exam_type];
    const sim_device *device =
        sim_device_of(exam->slot.room, exam->day_index, w->options->days, w->options->screens);
    double mi = 0, tis = 0, tib = 0, tic = 0;
    int any = 0;
    for (size_t i = 0; i < exam->capture_count; i++) {
        const sim_capture *c = &exam->captures[i];
        if (!c->has_indices || !device->header_indices)
            continue;
        any = 1;
        mi = c->mi > mi ? c->mi : mi;
        tis = c->tis > tis ? c->tis : tis;
        tib = c->tib > tib ? c->tib : tib;
        tic = c->tic > tic ? c->tic : tic;
    }
    long first = exam->captures[0].second;
    long last = exam->captures[exam->capture_count - 1].second;
    char v_mi[32], v_tis[32], v_tib[32], v_tic[32], v_time[32], v_ga[32];
    sim_format_index(exam->slot.decimals, mi, v_mi, sizeof v_mi);
    sim_format_index(exam->slot.decimals, tis, v_tis, sizeof v_tis);
    sim_format_index(exam->slot.decimals, tib, v_tib, sizeof v_tib);
    sim_format_index(exam->slot.decimals, tic, v_tic, sizeof v_tic);
    snprintf(v_time, sizeof v_time, "%ld", last - first + 60);

    dcm_sr_build_item items[8];
    size_t n = 0;
    memset(&items[0], 0, sizeof items[0]);
    items[0].depth = 0;
    items[0].value_type = "CONTAINER";
    items[0].concept_scheme = SIM_SR_SCHEME;
    items[0].concept_code = "AO-REPORT";
    items[0].concept_meaning = "Acoustic Output Report";
    n = 1;
    if (any) {
        items[n++] =
            sim_sr_num(SIM_SR_SCHEME, "AO-MI", "Maximum Mechanical Index", v_mi, "1", "no units");
        items[n++] = sim_sr_num(SIM_SR_SCHEME, "AO-TIS", "Maximum Soft Tissue Thermal Index", v_tis,
                                "1", "no units");
        if (type->indices == SIM_INDICES_TIB)
            items[n++] = sim_sr_num(SIM_SR_SCHEME, "AO-TIB", "Maximum Bone Thermal Index", v_tib,
                                    "1", "no units");
        if (type->indices == SIM_INDICES_TIC)
            items[n++] = sim_sr_num(SIM_SR_SCHEME, "AO-TIC", "Maximum Cranial Thermal Index", v_tic,
                                    "1", "no units");
    }
    items[n++] = sim_sr_num(SIM_SR_SCHEME, "AO-SCANTIME", "Total Scan Time", v_time, "s", "second");
    if (exam->gestation_days > 0) {
        /* Early pregnancy in days, later in weeks: both UCUM units occur. */
        if (exam->gestation_days < 14 * 7) {
            snprintf(v_ga, sizeof v_ga, "%d", exam->gestation_days);
            items[n++] = sim_sr_num("LN", "18185-9", "Gestational age", v_ga, "d", "day");
        } else {
            snprintf(v_ga, sizeof v_ga, "%.1f", exam->gestation_days / 7.0);
            items[n++] = sim_sr_num("LN", "18185-9", "Gestational age", v_ga, "wk", "week");
        }
    }
    static const dcm_sr_coding_scheme schemes[] = {
        {SIM_SR_SCHEME, "Mitilog simulator acoustic output codes (invented)", "Mitilog simulator"},
    };
    CHECK(dcm_builder_put_sr_content(w->builder, items, n, schemes, 1, w->error));

    sim_stamp at, series;
    sim_stamp_of(w, exam->day_index, last + 60, &at);
    sim_stamp_of(w, exam->day_index, last + 60, &series);
    PUT_S(0x0008, 0x0018, sop_uid);
    PUT_S(0x0008, 0x0012, at.date);
    PUT_S(0x0008, 0x0013, at.time);
    CHECK(sim_put_common(w, exam, study_uid, 0));
    PUT_S(0x0020, 0x000E, series_uid);
    PUT_S(0x0020, 0x0011, "2");
    PUT_S(0x0008, 0x0021, series.date);
    PUT_S(0x0008, 0x0031, series.time);
    PUT_S(0x0008, 0x103E, "ACOUSTIC OUTPUT REPORT");
    PUT_S(0x0018, 0x1030, type->preset);
    PUT_S(0x0020, 0x0013, "1");
    PUT_S(0x0008, 0x0023, at.date);
    PUT_S(0x0008, 0x0033, at.time);

    /* Current Requested Procedure Evidence: the exam's images. */
    CHECK(dcm_builder_begin_item(w->builder, 0x0040, 0xA375, w->error));
    PUT_S(0x0020, 0x000D, study_uid);
    CHECK(dcm_builder_begin_item(w->builder, 0x0008, 0x1115, w->error));
    {
        char image_series[72];
        sim_uid(w->options->seed, UID_SERIES,
                (uint64_t)(exam->day_index * 1000 + exam->exam_number), 0, image_series,
                sizeof image_series);
        PUT_S(0x0020, 0x000E, image_series);
    }
    for (size_t i = 0; i < exam->capture_count; i++) {
        CHECK(dcm_builder_begin_item(w->builder, 0x0008, 0x1199, w->error));
        PUT_S(0x0008, 0x1150, exam->captures[i].frames > 1 ? SOP_US_MULTIFRAME : SOP_US_IMAGE);
        PUT_S(0x0008, 0x1155, uids[i]);
        CHECK(dcm_builder_end_item(w->builder, w->error));
    }
    CHECK(dcm_builder_end_item(w->builder, w->error));
    CHECK(dcm_builder_end_item(w->builder, w->error));
    return MITILOG_OK;
}

/* ------------------------------------------------------------------ */
/* Files, directories, manifest                                        */
/* ------------------------------------------------------------------ */

static mitilog_status sim_mkdir(const char *path, mitilog_error *error)
{
    if (mkdir(path, 0755) != 0 && errno != EEXIST)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "mkdir %s: %s", path, strerror(errno));
    return MITILOG_OK;
}

static mitilog_status sim_save(sim_writer *w, const char *relative, const char *transfer_syntax)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/%s", w->options->out_directory, relative);
    mitilog_status status = dcm_builder_save(w->builder, path, transfer_syntax, w->error);
    dcm_builder_free(w->builder);
    w->builder = NULL;
    if (status != MITILOG_OK)
        return status;
    struct stat st;
    if (stat(path, &st) == 0)
        w->run->bytes += (unsigned long long)st.st_size;
    w->run->file_count++;
    return MITILOG_OK;
}

static mitilog_status sim_run_add(sim_run *run, const sim_study_record *rec, mitilog_error *error)
{
    if (run->study_count == run->study_capacity) {
        size_t capacity = run->study_capacity ? run->study_capacity * 2 : 256;
        sim_study_record *grown = realloc(run->studies, capacity * sizeof *grown);
        if (grown == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "study list: out of memory");
        run->studies = grown;
        run->study_capacity = capacity;
    }
    run->studies[run->study_count++] = *rec;
    return MITILOG_OK;
}

void sim_run_free(sim_run *run)
{
    free(run->studies);
    memset(run, 0, sizeof *run);
}

/* Manifest lines of one study, kept for a resend: the columns before
 * planted, and those after it. */
typedef struct sim_manifest_study {
    char lines[SIM_MAX_CAPTURES + 1][400];
    char screens[SIM_MAX_CAPTURES + 1][400];
    size_t count;
} sim_manifest_study;

#define SYNTAX_EXPLICIT_LITTLE "1.2.840.10008.1.2.1"

/* Whether capture i's header carries the capture before's indices: on a
 * device with header_mismatch, in exams with no other planted problem,
 * about one capture in eight whose indices differ from the one before
 * (beyond rounding) gets the stale header. */
static int sim_stale_header(const sim_writer *w, const sim_exam *exam, const sim_device *device,
                            size_t i)
{
    if (!device->header_mismatch || exam->planted != 0 || i == 0)
        return 0;
    const sim_capture *c = &exam->captures[i], *before = c - 1;
    if (!c->has_indices || !before->has_indices)
        return 0;
    uint64_t h = sim_mix(w->options->seed, 0x7374616c65ULL,
                         (uint64_t)(exam->day_index * 1000 + exam->exam_number), i, 0);
    if (h % 8 != 0)
        return 0;
    return fabs(c->mi - before->mi) >= 0.05 || fabs(c->tis - before->tis) >= 0.05 ||
           fabs(c->tib - before->tib) >= 0.05 || fabs(c->tic - before->tic) >= 0.05;
}

/* The manifest columns after planted: device, software, matrix, transfer
 * syntax, whether the header carries indices, then text and ink box
 * ("x y width height") of each index drawn. */
static int sim_screen_columns(char *buffer, size_t size, const sim_device *device, unsigned cols,
                              unsigned rows, const char *syntax, int header_indices,
                              const sim_drawn_index drawn[SIM_INDEX_COUNT])
{
    int used = snprintf(buffer, size, "%s,%s,%ux%u,%s,%d", device->key, device->software_versions,
                        cols, rows, syntax, header_indices);
    for (int i = 0; i < SIM_INDEX_COUNT && used >= 0 && (size_t)used < size; i++) {
        const sim_drawn_index *d = &drawn[i];
        int more = d->text[0] != '\0'
                       ? snprintf(buffer + used, size - (size_t)used, ",%s,%d %d %d %d", d->text,
                                  d->x, d->y, d->width, d->height)
                       : snprintf(buffer + used, size - (size_t)used, ",,");
        if (more < 0)
            return -1;
        used += more;
    }
    return used;
}

static mitilog_status sim_write_exam(sim_writer *w, const sim_exam *exam, sim_manifest_study *kept)
{
    const sim_exam_type *type = &sim_exam_types[exam->slot.exam_type];
    const sim_device *device =
        sim_device_of(exam->slot.room, exam->day_index, w->options->days, w->options->screens);
    const char *image_syntax = w->options->compress ? device->compressed_syntax : NULL;
    uint64_t key = (uint64_t)(exam->day_index * 1000 + exam->exam_number);
    char study_uid[72], series_uid[72], sr_series_uid[72], sr_uid[72];
    char uids[SIM_MAX_CAPTURES][72];
    sim_uid(w->options->seed, UID_STUDY, key, 0, study_uid, sizeof study_uid);
    sim_uid(w->options->seed, UID_SERIES, key, 0, series_uid, sizeof series_uid);
    sim_uid(w->options->seed, UID_SR_SERIES, key, 0, sr_series_uid, sizeof sr_series_uid);
    sim_uid(w->options->seed, UID_SR_INSTANCE, key, 0, sr_uid, sizeof sr_uid);

    sim_stamp day;
    sim_stamp_of(w, exam->day_index, 0, &day);
    char day_dir[32], study_dir[64], path[4096], relative[128];
    snprintf(day_dir, sizeof day_dir, "%.4s-%.2s-%.2s", day.date, day.date + 4, day.date + 6);
    snprintf(study_dir, sizeof study_dir, "%s/e%03d", day_dir, exam->exam_number);
    snprintf(path, sizeof path, "%s/%s", w->options->out_directory, day_dir);
    CHECK(sim_mkdir(path, w->error));
    snprintf(path, sizeof path, "%s/%s", w->options->out_directory, study_dir);
    CHECK(sim_mkdir(path, w->error));

    char file_tags[160], station[17];
    kept->count = 0;
    size_t files = exam->capture_count + (type->has_sr ? 1 : 0);
    for (size_t i = 0; i < files; i++) {
        int is_sr = i == exam->capture_count;
        const char *sop = is_sr ? sr_uid : uids[i];
        sim_drawn_index drawn[SIM_INDEX_COUNT];
        memset(drawn, 0, sizeof drawn);
        const sim_capture *header = NULL;
        int stale = 0;
        if (!is_sr) {
            sim_uid(w->options->seed, UID_INSTANCE, key, i + 1, uids[i], sizeof uids[i]);
            CHECK(sim_render_screen(w, exam, i, device, drawn));
            stale = sim_stale_header(w, exam, device, i);
            if (device->header_indices)
                header = &exam->captures[stale ? i - 1 : i];
        }
        CHECK(dcm_builder_create(&w->builder, w->error));
        mitilog_status status =
            is_sr ? sim_put_sr(w, exam, study_uid, sr_series_uid, sr_uid, uids)
                  : sim_put_image(w, exam, i, study_uid, series_uid, uids[i], header);
        if (status != MITILOG_OK) {
            dcm_builder_free(w->builder);
            w->builder = NULL;
            return status;
        }
        const char *syntax = is_sr ? NULL : image_syntax;
        snprintf(relative, sizeof relative, "%s/%03zu.dcm", study_dir, i + 1);
        CHECK(sim_save(w, relative, syntax));
        int written = snprintf(
            kept->lines[kept->count], sizeof kept->lines[0], "%s,%s,%s,%s,%s,%s", relative, sop,
            study_uid, type->key, type->preset,
            sim_site_name(sim_rooms[exam->slot.room].station_name, w->options->site, station));
        int screen_columns = 0;
        if (is_sr)
            screen_columns =
                snprintf(kept->screens[kept->count], sizeof kept->screens[0],
                         "%s,%s,,%s,%d,,,,,,,,", device->key, device->software_versions,
                         SYNTAX_EXPLICIT_LITTLE, device->header_indices);
        else
            screen_columns =
                sim_screen_columns(kept->screens[kept->count], sizeof kept->screens[0], device,
                                   device->screen.rows != NULL    ? device->columns
                                   : exam->captures[i].frames > 1 ? CINE_COLUMNS
                                                                  : SINGLE_COLUMNS,
                                   device->screen.rows != NULL    ? device->rows
                                   : exam->captures[i].frames > 1 ? CINE_ROWS
                                                                  : SINGLE_ROWS,
                                   syntax != NULL ? syntax : SYNTAX_EXPLICIT_LITTLE,
                                   header != NULL && header->has_indices, drawn);
        if (written < 0 || (size_t)written >= sizeof kept->lines[0] || screen_columns < 0 ||
            (size_t)screen_columns >= sizeof kept->screens[0])
            return mitilog_error_set(w->error, MITILOG_ERROR_INVALID,
                                     "manifest line too long for %s", relative);
        sim_planted_tags((exam->planted & ~(unsigned)SIM_PLANTED_RESEND) |
                             (stale ? (unsigned)SIM_PLANTED_HEADER_MISMATCH : 0u),
                         file_tags, sizeof file_tags);
        fprintf(w->manifest, "%s,%s,%s\n", kept->lines[kept->count], file_tags,
                kept->screens[kept->count]);
        kept->count++;
    }

    sim_study_record rec;
    memset(&rec, 0, sizeof rec);
    rec.send_second =
        ((long)exam->day_index * 86400 + exam->captures[exam->capture_count - 1].second + 60);
    rec.room = exam->slot.room;
    snprintf(rec.directory, sizeof rec.directory, "%s", study_dir);
    rec.file_count = files;
    rec.compressed_syntax = image_syntax;
    return sim_run_add(w->run, &rec, w->error);
}

/* The resend goes out two simulated hours after the original. */
enum { SIM_RESEND_DELAY_SECONDS = 2 * 3600 };

static mitilog_status sim_flush_resend(sim_writer *w, sim_manifest_study *kept,
                                       sim_study_record *pending)
{
    for (size_t i = 0; i < kept->count; i++)
        fprintf(w->manifest, "%s,resend,%s\n", kept->lines[i], kept->screens[i]);
    pending->is_resend = 1;
    mitilog_status status = sim_run_add(w->run, pending, w->error);
    pending->file_count = 0;
    return status;
}

mitilog_status sim_write_all(const sim_options *options, sim_run *run, mitilog_error *error)
{
    sim_writer w;
    memset(&w, 0, sizeof w);
    memset(run, 0, sizeof *run);
    w.options = options;
    w.run = run;
    w.error = error;
    w.start_days = sim_date_to_days(options->start);

    mitilog_status status = sim_mkdir(options->out_directory, error);
    if (status != MITILOG_OK)
        return status;
    char path[4096];
    snprintf(path, sizeof path, "%s/manifest.csv", options->out_directory);
    w.manifest = fopen(path, "w");
    if (w.manifest == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "open %s: %s", path, strerror(errno));
    fprintf(w.manifest, "path,sop_instance_uid,study_instance_uid,exam_type,"
                        "preset,room,planted,device,software_versions,"
                        "matrix,transfer_syntax,header_indices,mi_text,"
                        "mi_box,tis_text,tis_box,tib_text,tib_box,tic_text,"
                        "tic_box\n");
    if (options->screens) {
        status = sim_screen_open(&w.screen, error);
        if (status != MITILOG_OK) {
            fclose(w.manifest);
            return status;
        }
    }

    sim_day *day = malloc(sizeof *day);
    sim_exam *exam = malloc(sizeof *exam);
    sim_manifest_study *current = malloc(sizeof *current);
    sim_manifest_study *kept = malloc(sizeof *kept);
    sim_study_record pending;
    memset(&pending, 0, sizeof pending);
    if (day == NULL || exam == NULL || current == NULL || kept == NULL) {
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "simulate: out of memory");
        goto cleanup;
    }
    for (int d = 0; d < options->days && status == MITILOG_OK; d++) {
        sim_date date = sim_date_from_days(w.start_days + d);
        sim_day_schedule(options->seed, d, sim_date_weekday(date), day);
        sim_planted_mark(day, options->days);
        for (size_t i = 0; i < day->count; i++) {
            day->slots[i].decimals =
                sim_device_of(day->slots[i].room, d, options->days, options->screens)
                    ->screen.decimals;
            sim_exam_build(d, (int)i + 1, &day->slots[i], exam);
            status = sim_write_exam(&w, exam, current);
            if (status != MITILOG_OK)
                break;
            sim_study_record *last = &run->studies[run->study_count - 1];
            if (pending.file_count > 0 && last->send_second >= pending.send_second) {
                status = sim_flush_resend(&w, kept, &pending);
                if (status != MITILOG_OK)
                    break;
            }
            if (exam->planted & SIM_PLANTED_RESEND) {
                pending = *last;
                pending.send_second += SIM_RESEND_DELAY_SECONDS;
                memcpy(kept, current, sizeof *kept);
            }
        }
    }
    if (status == MITILOG_OK && pending.file_count > 0)
        status = sim_flush_resend(&w, kept, &pending);

cleanup:
    sim_overlay_free(&w.overlay);
    sim_screen_close(w.screen);
    free(day);
    free(exam);
    free(current);
    free(kept);
    if (fclose(w.manifest) != 0 && status == MITILOG_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "close %s", path);
    return status;
}

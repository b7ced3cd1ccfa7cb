/*
 * sim.h - the simulated ultrasound department behind `mitilog simulate`.
 *
 * Everything here is invented: the hospital, rooms, probes, presets,
 * patients and sonographers. The simulator writes DICOM Part 10 files
 * through the shim's dcm_builder_* calls, and can stream them to a running
 * daemon with DCMTK's storescu.
 *
 * Determinism: every random choice comes from sim_rng (splitmix64), seeded
 * from the --seed value and from counters (day, room, shift, exam index),
 * never from the clock or the pid, so the same seed gives byte-identical
 * files, UIDs included.
 *
 * Pipeline: sim_department.c (tables) -> sim_schedule.c (exams per day,
 * room and shift) -> sim_exam.c (captures and the index model, with
 * sim_planted.c bending it) -> sim_write.c (files and manifest, with
 * sim_device.c's scanners and sim_screen.c drawing their screens through
 * FreeType) -> sim_send.c (storescu feed).
 *
 * Ownership: sim_day_schedule() fills a caller-owned sim_day; sim_exam_build()
 * fills a caller-owned sim_exam (fixed-size arrays, nothing to free).
 */
#ifndef MITILOG_SIM_H
#define MITILOG_SIM_H

#include <stddef.h>
#include <stdint.h>

#include "util/status.h"

/* ------------------------------------------------------------------ */
/* Random numbers (sim_random.c)                                       */
/* ------------------------------------------------------------------ */

/* splitmix64 (Steele, Lea, Flood 2014; Vigna's public-domain reference
 * splitmix64.c at prng.di.unimi.it). */
typedef struct sim_rng {
    uint64_t state;
} sim_rng;

void sim_rng_seed(sim_rng *rng, uint64_t seed);
uint64_t sim_rng_next(sim_rng *rng);
/* Uniform in [0, 1). */
double sim_rng_uniform(sim_rng *rng);
/* Uniform integer in [low, high] (inclusive). */
int sim_rng_range(sim_rng *rng, int low, int high);
/* Standard normal (Box-Muller). */
double sim_rng_normal(sim_rng *rng);
/* Index into weights[0..count-1], chosen with probability proportional to
 * the weight; -1 if all weights are zero. */
int sim_rng_pick(sim_rng *rng, const double *weights, size_t count);
/* Mixes a seed with up to four counters into a new seed (splitmix64
 * finaliser over each word): independent streams per exam. */
uint64_t sim_mix(uint64_t seed, uint64_t a, uint64_t b, uint64_t c, uint64_t d);

/* ------------------------------------------------------------------ */
/* The invented department (sim_department.c)                          */
/* ------------------------------------------------------------------ */

#define SIM_HOSPITAL_NAME "Wrenmoor Vale General Hospital"
#define SIM_DEPARTMENT_NAME "Ultrasound Imaging"
#define SIM_MANUFACTURER "Mitilog Simulated Systems"
#define SIM_MODEL_NAME "SIM-US 1"
/* The simulator's private SR coding scheme ('99' prefix: private). */
#define SIM_SR_SCHEME "99MTSIM"

enum { SIM_ROOM_COUNT = 5, SIM_SHIFT_COUNT = 3, SIM_OPERATOR_COUNT = 6 };

typedef enum sim_shift {
    SIM_SHIFT_DAY = 0,     /* 07:00-15:00 */
    SIM_SHIFT_EVENING = 1, /* 15:00-23:00 */
    SIM_SHIFT_NIGHT = 2    /* 23:00-07:00 (wraps midnight) */
} sim_shift;

/* The mode a capture was taken in; each maps to a bitmap and regions. */
typedef enum sim_mode {
    SIM_MODE_B = 0,  /* 2D                     0001 */
    SIM_MODE_M,      /* 2D + M-mode            0003 */
    SIM_MODE_COLOUR, /* 2D + colour flow       0011 */
    SIM_MODE_POWER,  /* 2D + colour power      0101 */
    SIM_MODE_PW,     /* 2D + colour + PW       0019 */
    SIM_MODE_CW,     /* 2D + CW                0005 */
    SIM_MODE_3D,     /* 2D + 3D rendering      0041 */
    SIM_MODE_COUNT
} sim_mode;

typedef enum sim_index_set {
    SIM_INDICES_TIS = 0, /* MI, TIS */
    SIM_INDICES_TIB,     /* MI, TIS, TIB (bone in focus) */
    SIM_INDICES_TIC      /* MI, TIS, TIC (transcranial) */
} sim_index_set;

typedef struct sim_room {
    const char *station_name; /* Station Name (0008,1010) */
    const char *ae_title;     /* the room's calling AE title */
    const char *serial;       /* Device Serial Number */
} sim_room;

typedef struct sim_probe {
    const char *model;      /* Transducer Data (0018,5010) value 1 */
    const char *type;       /* Transducer Type (0018,6031) */
    uint32_t frequency_khz; /* nominal centre frequency */
} sim_probe;

typedef struct sim_exam_type {
    const char *key; /* short key for the manifest: "ob2" */
    const char *study_description;
    const char *preset;       /* Protocol Name (0018,1030) */
    const char *body_part;    /* Body Part Examined; NULL = none */
    const char *image_type_3; /* Image Type value 3 (defined term) */
    int probe;                /* index into sim_probes */
    sim_index_set indices;
    double mi_b; /* median MI in B-mode */
    double ti_b; /* median governing TI in B-mode */
    double mode_weights[SIM_MODE_COUNT];
    int minutes_low, minutes_high;
    int captures_low, captures_high;
    double cine_fraction;
    int age_low_days, age_high_days;               /* patient age at the exam */
    char sex;                                      /* 'F', 'M' or 0 = either */
    int has_sr;                                    /* ends with an acoustic output SR */
    int gestation_low_weeks, gestation_high_weeks; /* 0 = not obstetric */
    /* Median governing TI of each mode where it departs from ti_b x the
     * mode's factor (0 = the factor applies): obstetric presets hold
     * Doppler output down and M-mode for the fetal heart rate is their
     * usual cause of TI above 0.7 (docs/demo.md, "Index model"). */
    double ti_by_mode[SIM_MODE_COUNT];
    /* Share of exams with one stretch of pulsed-wave Doppler at TI
     * 2.0-2.4 lasting five minutes or more: the rare dwell breach of an
     * otherwise compliant department (docs/demo.md). */
    double pw_breach_share;
} sim_exam_type;

extern const sim_room sim_rooms[SIM_ROOM_COUNT];
extern const sim_probe sim_probes[];
extern const size_t sim_probe_count;
extern const sim_exam_type sim_exam_types[];
extern const size_t sim_exam_type_count;
extern const char *const sim_operators[SIM_OPERATOR_COUNT];

/* Index of the exam type with this key, or -1. */
int sim_exam_type_find(const char *key);
/* name as it reads at a site (sim_options.site): name itself for site 0
 * or 1, else "name-N" (buffer holds 17 bytes: SH, AE and LO values stay
 * within 16 characters for sites up to 9). Returns name or buffer. */
const char *sim_site_name(const char *name, int site, char buffer[17]);
/* Image Type value 4 bitmap of a mode. */
unsigned sim_mode_bitmap(sim_mode mode);
/* Short lower-case name of a mode ("b", "pw", ...). */
const char *sim_mode_name(sim_mode mode);
/* Median MI and TI factors of a mode relative to B-mode (an exam type's
 * ti_by_mode, when set, takes precedence for TI). */
double sim_mode_mi_factor(sim_mode mode);
double sim_mode_ti_factor(sim_mode mode);

/* ------------------------------------------------------------------ */
/* Schedule (sim_schedule.c)                                           */
/* ------------------------------------------------------------------ */

/* Documented daily volumes (docs/demo.md); the unit test checks them. */
enum {
    SIM_WEEKDAY_EXAMS_LOW = 55,
    SIM_WEEKDAY_EXAMS_HIGH = 95,
    SIM_WEEKEND_EXAMS_LOW = 25,
    SIM_WEEKEND_EXAMS_HIGH = 55,
    SIM_CAPTURES_LOW = 5,
    SIM_CAPTURES_HIGH = 40,
    SIM_DAY_MAX_EXAMS = 128
};

/* Shift of a local minute of the day (0..1439). */
sim_shift sim_shift_of_minute(int minute_of_day);
const char *sim_shift_name(sim_shift shift);

/* One scheduled exam. Times are minutes from the simulated day's 00:00
 * (the night shift runs to 31*60 = 07:00 the next morning). */
typedef struct sim_slot {
    int room;
    sim_shift shift;
    int exam_type;
    int start_minute;
    int duration_minutes;
    uint64_t seed;    /* the exam's own random stream */
    unsigned planted; /* SIM_PLANTED_* bits (sim_planted_mark) */
    int decimals;     /* digits the room's device displays after
                                 * the point: 0 or 1 = one, 2 = two (set by
                                 * the writer from the device) */
} sim_slot;

typedef struct sim_day {
    int day_index; /* 0 = the start date */
    int weekday;   /* 0 = Monday .. 6 = Sunday */
    size_t count;
    sim_slot slots[SIM_DAY_MAX_EXAMS];
} sim_day;

/* Fills day with the exams of day day_index, ordered by start time. */
void sim_day_schedule(uint64_t seed, int day_index, int weekday, sim_day *day);

/* ------------------------------------------------------------------ */
/* Simple calendar arithmetic (sim_schedule.c)                         */
/* ------------------------------------------------------------------ */

typedef struct sim_date {
    int year, month, day;
} sim_date;

/* Parses YYYY-MM-DD; 0 on success. */
int sim_date_parse(const char *text, sim_date *out);
/* Days since 1970-01-01 (proleptic Gregorian) and back. */
long sim_date_to_days(sim_date date);
sim_date sim_date_from_days(long days);
/* 0 = Monday .. 6 = Sunday. */
int sim_date_weekday(sim_date date);

/* ------------------------------------------------------------------ */
/* Exams, captures and the index model (sim_exam.c, sim_planted.c)     */
/* ------------------------------------------------------------------ */

enum { SIM_MAX_CAPTURES = 40 };

/* Planted problems (docs/demo.md); bits in sim_exam.planted. */
enum {
    SIM_PLANTED_HOT_PRESET = 1 << 0,
    SIM_PLANTED_NIGHT_OB_DWELL = 1 << 1,
    SIM_PLANTED_SILENT_PROBE = 1 << 2,
    SIM_PLANTED_TIC_HIGH = 1 << 3,
    SIM_PLANTED_MI_OVER_LIMIT = 1 << 4,
    SIM_PLANTED_RESEND = 1 << 5,
    /* per file, screen devices only: the header's indices are those of
     * the capture before while the screen shows the right ones */
    SIM_PLANTED_HEADER_MISMATCH = 1 << 6
};

typedef struct sim_capture {
    long second; /* seconds from the day's 00:00 */
    sim_mode mode;
    int frames; /* 1 = single frame */
    double frame_time_ms;
    int has_indices;          /* 0: MI/TI attributes omitted */
    double mi, tis, tib, tic; /* as displayed (rounded to the
                                 * device's decimals, 0.1 or 0.01) */
} sim_capture;

typedef struct sim_exam {
    int day_index;
    int exam_number; /* 1-based within the day */
    sim_slot slot;
    unsigned planted; /* SIM_PLANTED_* bits */
    int operator_index;
    uint32_t patient_number;
    int patient_age_days;
    char patient_sex;
    int gestation_days; /* 0 when not obstetric */
    size_t capture_count;
    sim_capture captures[SIM_MAX_CAPTURES];
} sim_exam;

/* Builds exam number exam_number (1-based) of a day from its slot
 * (including slot->planted). */
void sim_exam_build(int day_index, int exam_number, const sim_slot *slot, sim_exam *exam);

/* Planted problems (sim_planted.c). sim_planted_mark() runs after
 * sim_day_schedule(): it forces the exam type of a few target slots and
 * sets slot->planted on every affected exam; days is the run length (the
 * resend falls on day min(2, days-1)). sim_planted_apply() bends one
 * capture's indices after the normal model has set them. */
void sim_planted_mark(sim_day *day, int days);
void sim_planted_apply(const sim_exam *exam, sim_capture *capture, size_t position, sim_rng *rng);
/* Comma-free tag list of the bits ("hot-preset;resend"), "" if none. */
void sim_planted_tags(unsigned planted, char *buffer, size_t size);

/* ------------------------------------------------------------------ */
/* Devices and their screens (sim_device.c, sim_screen.c)              */
/* ------------------------------------------------------------------ */

/* The indices a screen can show, in drawing order. */
enum { SIM_INDEX_MI = 0, SIM_INDEX_TIS, SIM_INDEX_TIB, SIM_INDEX_TIC, SIM_INDEX_COUNT };

/* How a device's screen is laid out. rows: the text rows, top to bottom,
 * separated by '|'; each row is a list of items separated by spaces:
 *   H hospital   D date and time   F transmit frequency   G gain
 *   P depth      R frame rate      I every index shown, side by side
 *   M MI         S TIS             X TIB or TIC (whichever the exam shows)
 * A row keeps its place when it has nothing to show (a probe that reports
 * no indices leaves its index rows empty). */
typedef struct sim_screen_design {
    const char *font_file;    /* a TrueType file of a Debian package */
    const char *font_package; /* ... named in the error when missing */
    int font_pixels;          /* nominal size, FreeType pixel size */
    const char *rows;
    int align_right;                     /* rows right-aligned (else left) */
    int anchor_bottom;                   /* rows stacked up from the bottom edge */
    uint8_t colour[3];                   /* RGB of the index text */
    uint8_t other_colour[3];             /* RGB of every other text */
    const char *labels[SIM_INDEX_COUNT]; /* as drawn, separator included:
                                          * "MI ", "MI:", "TIb" */
    int decimals;                        /* 1 or 2 */
    const char *hospital;                /* the short name drawn */
    int date_style;                      /* 0 2026-11-02 09:14:05, 1 02/11/2026
                                 * 09:14, 2 02.11.26 09:14:05 */
    const char *frequency_format;        /* printf of MHz (double) */
    const char *gain_format;             /* printf of gain (int) */
    const char *depth_format;            /* printf of depth in cm (int) */
    const char *rate_format;             /* printf of frames per second (int) */
} sim_screen_design;

typedef struct sim_device {
    const char *key;               /* manifest name: "ambervale-av40-4.0" */
    const char *manufacturer;      /* (0008,0070) */
    const char *model_name;        /* (0008,1090) */
    const char *software_versions; /* (0018,1020) */
    unsigned columns, rows;        /* every frame, single or cine */
    int header_indices;            /* writes MI/TI into the header too */
    int header_mismatch;           /* now and then a stale header (planted) */
    const char *compressed_syntax; /* under --compress; NULL: native */
    sim_screen_design screen;      /* screen.rows NULL: draws nothing */
} sim_device;

/* The device of a room on day day_index of a run of days days. screens
 * 0: the header-only department (every room SIM-US 1, tiny matrices); 1:
 * the screen devices. */
const sim_device *sim_device_of(int room, int day_index, int days, int screens);
/* Day index from which US-ROOM-1's scanner runs its new software: the
 * middle of the run (day 15 of 28), never on 1-day runs. */
int sim_software_update_day(int days);

/* One index as drawn on a screen: its text (label included; "" when not
 * drawn) and the box of its ink in the frame. */
typedef struct sim_drawn_index {
    char text[32];
    int x, y, width, height;
} sim_drawn_index;

/* What a capture's screen shows besides the picture. */
typedef struct sim_screen_text {
    int show[SIM_INDEX_COUNT]; /* 1: drawn */
    double values[SIM_INDEX_COUNT];
    int year, month, day, hour, minute, second;
    double frequency_mhz;
    int gain, depth_cm, frame_rate;
} sim_screen_text;

/* The rendered text of one capture, laid over every frame of it. */
typedef struct sim_overlay {
    unsigned columns, rows;
    uint8_t *alpha; /* coverage 0..255 per pixel */
    uint8_t *rgb;   /* colour per pixel (3 bytes) */
    uint8_t *blank; /* 1: the black panel behind a text row */
} sim_overlay;

typedef struct sim_screen sim_screen;

/* The FreeType library and the faces it has opened; freed with
 * sim_screen_close(). */
mitilog_status sim_screen_open(sim_screen **out, mitilog_error *error);
void sim_screen_close(sim_screen *screen);
/* Lays out and renders the text of a capture on device's screen into
 * overlay (caller-owned; buffers grown here, freed with
 * sim_overlay_free), and says where each index was drawn. A design whose
 * text does not fit the frame is an error. */
mitilog_status sim_screen_render(sim_screen *screen, const sim_device *device,
                                 const sim_screen_text *text, sim_overlay *overlay,
                                 sim_drawn_index drawn[SIM_INDEX_COUNT], mitilog_error *error);
/* Blends the overlay into one frame (samples 1: grey, 3: RGB). */
void sim_overlay_apply(const sim_overlay *overlay, uint8_t *frame, unsigned samples);
void sim_overlay_free(sim_overlay *overlay);
/* The value text of an index as the design draws it ("0.4", "1.23"). */
void sim_screen_format_value(const sim_screen_design *design, double value, char *buffer,
                             size_t size);

/* ------------------------------------------------------------------ */
/* Writing (sim_write.c) and sending (sim_send.c)                      */
/* ------------------------------------------------------------------ */

typedef struct sim_options {
    const char *out_directory;
    int days;
    uint64_t seed;
    sim_date start;
    /* Which site of the department the rooms belong to: 0 or 1 keeps the
     * rooms' own names; N > 1 appends "-N" to every Station Name, AE title
     * and device serial, so that runs with other seeds over the same days
     * add sister rooms (a bigger department) rather than busier ones. */
    int site;
    /* Pixel matrix of single frames, columns x rows; cine frames are half
     * as wide and half as high. 0: the tiny default (32 x 24), which keeps
     * four weeks to a couple of hundred MB; department-sized matrices
     * (e.g. 640 x 480) give objects of realistic size for benchmarks. */
    unsigned matrix_columns, matrix_rows;
    /* --screens: the rooms' scanners burn the indices into the pixels
     * (sim_device_of); each has its own matrix (no --matrix). */
    int screens;
    /* --compress: screen devices that compress write their images in
     * their own compressed transfer syntax (sim_device.compressed_syntax). */
    int compress;
    /* --send */
    const char *send_host; /* NULL: write files only */
    unsigned send_port;
    const char *calling_ae; /* NULL: the room's own AE title */
    const char *called_ae;
    double speed;         /* 0 = as fast as possible */
    const char *storescu; /* program to run; default "storescu" */
} sim_options;

/* One study written, for the send order. */
typedef struct sim_study_record {
    long send_second; /* simulated seconds since start, at end */
    int room;
    char directory[64]; /* relative to out: "2026-11-02/e0001" */
    size_t file_count;
    int is_resend;
    /* transfer syntax of the study's images when compressed, else NULL
     * (storescu must propose it) */
    const char *compressed_syntax;
} sim_study_record;

typedef struct sim_run {
    sim_study_record *studies;
    size_t study_count, study_capacity;
    size_t file_count;
    unsigned long long bytes;
} sim_run;

/* Writes every file and manifest.csv under options->out_directory. */
mitilog_status sim_write_all(const sim_options *options, sim_run *run, mitilog_error *error);
void sim_run_free(sim_run *run);

/* Sends the written studies in time order with storescu. Returns
 * MITILOG_OK only if every batch was sent. */
mitilog_status sim_send_all(const sim_options *options, const sim_run *run, mitilog_error *error);

/* UIDs: "2.25." + the decimal of a 128-bit value derived from the seed and
 * the counters given. */
void sim_uid(uint64_t seed, uint64_t kind, uint64_t a, uint64_t b, char *buffer, size_t size);

#endif

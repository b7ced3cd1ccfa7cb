/*
 * sim_department.c - the invented department: rooms, probes, presets
 * (exam types) and the per-mode index factors. All names are invented;
 * no real hospital, person, vendor or product is meant.
 *
 * Index model (documented in docs/demo.md, checked by
 * tests/integration/test_simulator.py): each preset has a median B-mode
 * MI and a median B-mode governing TI; a capture's median is that times the
 * factor of its mode, then multiplied by small noise (sd 6 %) and rounded
 * to one decimal as equipment displays it. Obstetric presets set their
 * own per-mode TI medians (ti_by_mode): B-mode and colour low, M-mode for
 * the fetal heart rate around 0.8, pulsed-wave Doppler held at 0.6, and a
 * small share of exams with one five-minute stretch of pulsed-wave
 * Doppler at TI 2.0-2.4 (pw_breach_share), after the published audits
 * docs/demo.md cites.
 *
 * Image Type value 3 uses PS3.3 C.8.5.6.1.1 defined terms as dciodvfy
 * knows them: there is no "CARDIAC", so transthoracic echo says "CHEST".
 */
#include "sim/sim.h"

#include <stdio.h>
#include <string.h>

#include "exam/exam.h"

const sim_room sim_rooms[SIM_ROOM_COUNT] = {
    {"US-ROOM-1", "USROOM1", "SIM0001"},
    {"US-ROOM-2", "USROOM2", "SIM0002"},
    {"US-ROOM-3", "USROOM3", "SIM0003"},
    {"US-ROOM-4", "USROOM4", "SIM0004"},
    {"US-MATERNITY", "USMATERNITY", "SIM0005"},
};

/* Transducer Type defined terms: PS3.3 C.8.5.6 (0018,6031). */
const sim_probe sim_probes[] = {
    {"C1-6", "CURVED LINEAR", 3500},   /* 0 abdominal / obstetric */
    {"L4-15", "LINEAR", 9000},         /* 1 vascular / small parts */
    {"P1-5", "SECTOR_PHASED", 2500},   /* 2 adult echo / transcranial */
    {"EV3-10", "ENDOCAV_CLA", 6500},   /* 3 endovaginal */
    {"VOL4-8", "CURVED LINEAR", 5000}, /* 4 volume (3D) obstetric */
    {"MC5-11", "CURVED LINEAR", 8000}, /* 5 micro-convex, neonates */
    {"P4-12", "SECTOR_PHASED", 7000},  /* 6 paediatric echo */
};
const size_t sim_probe_count = sizeof sim_probes / sizeof sim_probes[0];

enum { DAY = 1, YEAR = 365 };

/* mode_weights and ti_by_mode columns:
 *                     B     M     COL   POW   PW    CW    3D          */
const sim_exam_type sim_exam_types[] = {
    {"ob_early", "US OBSTETRIC EARLY PREGNANCY", "OB Early", "PELVIS",
     "OBSTETRICAL", 3, SIM_INDICES_TIB, 0.9, 0.15,
     {0.80, 0.12, 0.01, 0.005, 0.00, 0.00, 0.00}, 10, 20, 5, 14, 0.15,
     18 * YEAR, 45 * YEAR, 'F', 1, 6, 13,
     {0.0, 0.80, 0.35, 0.35, 0.0, 0.0, 0.0}, 0.0},
    {"ob2", "US OBSTETRIC 2ND TRIMESTER", "OB 2nd/3rd Tri", "ABDOMEN",
     "OBSTETRICAL", 0, SIM_INDICES_TIB, 1.0, 0.30,
     {0.71, 0.05, 0.12, 0.00, 0.08, 0.00, 0.04}, 20, 40, 18, 40, 0.20,
     18 * YEAR, 45 * YEAR, 'F', 1, 18, 24,
     {0.0, 0.80, 0.50, 0.0, 0.60, 0.0, 0.35}, 0.10},
    {"ob3", "US OBSTETRIC 3RD TRIMESTER", "OB 2nd/3rd Tri", "ABDOMEN",
     "OBSTETRICAL", 0, SIM_INDICES_TIB, 1.0, 0.30,
     {0.57, 0.05, 0.13, 0.00, 0.25, 0.00, 0.00}, 15, 30, 10, 25, 0.25,
     18 * YEAR, 45 * YEAR, 'F', 1, 28, 40,
     {0.0, 0.80, 0.50, 0.0, 0.60, 0.0, 0.0}, 0.15},
    {"gyn", "US PELVIS TRANSVAGINAL", "Gyn TV", "PELVIS", "GYNECOLOGY", 3,
     SIM_INDICES_TIS, 1.0, 0.20,
     {0.75, 0.00, 0.15, 0.05, 0.05, 0.00, 0.00}, 10, 25, 6, 18, 0.10,
     18 * YEAR, 80 * YEAR, 'F', 0, 0, 0,
     {0}, 0.0},
    {"abdomen", "US ABDOMEN", "Abdomen General", "ABDOMEN", "ABDOMINAL", 0,
     SIM_INDICES_TIS, 1.2, 0.30,
     {0.78, 0.00, 0.14, 0.00, 0.08, 0.00, 0.00}, 10, 30, 8, 30, 0.12,
     18 * YEAR, 90 * YEAR, 0, 0, 0, 0,
     {0}, 0.0},
    {"renal", "US RENAL TRACT", "Renal", "KIDNEY", "ABDOMINAL", 0,
     SIM_INDICES_TIS, 1.15, 0.30,
     {0.75, 0.00, 0.12, 0.05, 0.08, 0.00, 0.00}, 10, 20, 6, 20, 0.10,
     18 * YEAR, 90 * YEAR, 0, 0, 0, 0,
     {0}, 0.0},
    {"paeds_abdomen", "US PAEDIATRIC ABDOMEN", "Paeds Abdomen", "ABDOMEN",
     "PEDIATRIC", 5, SIM_INDICES_TIS, 0.9, 0.20,
     {0.80, 0.00, 0.12, 0.00, 0.08, 0.00, 0.00}, 10, 25, 6, 20, 0.15,
     1 * YEAR, 15 * YEAR, 0, 0, 0, 0,
     {0}, 0.0},
    {"echo_adult", "ECHO ADULT TTE", "Echo Adult", "HEART", "CHEST", 2,
     SIM_INDICES_TIS, 1.3, 0.30,
     {0.35, 0.10, 0.25, 0.00, 0.18, 0.12, 0.00}, 20, 45, 20, 40, 0.55,
     25 * YEAR, 90 * YEAR, 0, 1, 0, 0,
     {0}, 0.0},
    {"echo_paeds", "ECHO PAEDIATRIC TTE", "Echo Paeds", "HEART", "CHEST",
     6, SIM_INDICES_TIS, 1.1, 0.25,
     {0.35, 0.10, 0.25, 0.00, 0.18, 0.12, 0.00}, 20, 45, 15, 35, 0.55,
     30 * DAY, 15 * YEAR, 0, 0, 0, 0,
     {0}, 0.0},
    {"carotid", "US CAROTID DOPPLER", "Carotid", "NECK", "VASCULAR", 1,
     SIM_INDICES_TIS, 1.0, 0.20,
     {0.30, 0.00, 0.30, 0.00, 0.40, 0.00, 0.00}, 15, 30, 10, 25, 0.15,
     40 * YEAR, 90 * YEAR, 0, 0, 0, 0,
     {0}, 0.0},
    {"venous_leg", "US VENOUS LEG DOPPLER", "Venous Leg", "LEG", "VASCULAR",
     1, SIM_INDICES_TIS, 0.9, 0.15,
     {0.40, 0.00, 0.30, 0.00, 0.30, 0.00, 0.00}, 10, 25, 6, 20, 0.15,
     20 * YEAR, 90 * YEAR, 0, 0, 0, 0,
     {0}, 0.0},
    {"transcranial", "US TRANSCRANIAL DOPPLER", "Transcranial", "HEAD",
     "TRANSCRANIAL", 2, SIM_INDICES_TIC, 0.8, 0.30,
     {0.20, 0.00, 0.20, 0.00, 0.60, 0.00, 0.00}, 20, 40, 10, 25, 0.20,
     30 * YEAR, 85 * YEAR, 0, 1, 0, 0,
     {0}, 0.0},
    {"thyroid", "US THYROID", "Thyroid", "THYROID", "THYROID", 1,
     SIM_INDICES_TIS, 1.0, 0.15,
     {0.70, 0.00, 0.15, 0.10, 0.05, 0.00, 0.00}, 10, 20, 6, 18, 0.05,
     18 * YEAR, 85 * YEAR, 0, 0, 0, 0,
     {0}, 0.0},
    {"small_parts", "US SMALL PARTS", "Small Parts", "SCROTUM",
     "SMALL PARTS", 1, SIM_INDICES_TIS, 0.9, 0.15,
     {0.65, 0.00, 0.15, 0.15, 0.05, 0.00, 0.00}, 10, 20, 5, 15, 0.05,
     16 * YEAR, 80 * YEAR, 'M', 0, 0, 0,
     {0}, 0.0},
    {"neonatal_head", "US NEONATAL HEAD", "Neonatal Head", "HEAD",
     "NEONATAL HEAD", 5, SIM_INDICES_TIS, 0.7, 0.10,
     {0.80, 0.00, 0.12, 0.08, 0.00, 0.00, 0.00}, 10, 20, 6, 16, 0.10,
     0 * DAY, 28 * DAY, 0, 0, 0, 0,
     {0}, 0.0},
    {"msk", "US MUSCULOSKELETAL", "MSK", "SHOULDER", "MUSCULOSKELETAL", 1,
     SIM_INDICES_TIS, 1.0, 0.15,
     {0.80, 0.00, 0.05, 0.15, 0.00, 0.00, 0.00}, 10, 25, 6, 20, 0.10,
     16 * YEAR, 80 * YEAR, 0, 0, 0, 0,
     {0}, 0.0},
};
const size_t sim_exam_type_count =
    sizeof sim_exam_types / sizeof sim_exam_types[0];

const char *const sim_operators[SIM_OPERATOR_COUNT] = {
    "QUENBY^ALDITH", "MARRAWAY^TOBIN", "FELSTRAND^IONA",
    "OSSETT^RHODRI", "BRACKENHOLT^SAOIRSE", "TILLINGHAM^CORMAC",
};

int sim_exam_type_find(const char *key)
{
    for (size_t i = 0; i < sim_exam_type_count; i++)
        if (strcmp(sim_exam_types[i].key, key) == 0)
            return (int)i;
    return -1;
}

static const struct {
    const char *name;
    unsigned modes;              /* EXAM_MODE_BIT set */
    double mi_factor;
    double ti_factor;
} sim_mode_table[SIM_MODE_COUNT] = {
    [SIM_MODE_B] = {"b", EXAM_MODE_BIT(EXAM_MODE_2D), 1.00, 1.0},
    [SIM_MODE_M] = {"m", EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_M), 0.90, 0.7},
    [SIM_MODE_COLOUR] = {"colour", EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_COLOUR),
                         0.75, 2.0},
    [SIM_MODE_POWER] = {"power", EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_POWER), 0.75,
                        2.2},
    [SIM_MODE_PW] = {"pw",
                     EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_COLOUR) | EXAM_MODE_BIT(EXAM_MODE_PW),
                     0.55, 4.0},
    [SIM_MODE_CW] = {"cw", EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_CW), 0.30, 4.5},
    [SIM_MODE_3D] = {"3d", EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_3D), 0.90, 1.2},
};

unsigned sim_mode_bitmap(sim_mode mode)
{
    return exam_modes_image_type_bits(sim_mode_table[mode].modes);
}
const char *sim_mode_name(sim_mode mode) { return sim_mode_table[mode].name; }
double sim_mode_mi_factor(sim_mode mode)
{
    return sim_mode_table[mode].mi_factor;
}
double sim_mode_ti_factor(sim_mode mode)
{
    return sim_mode_table[mode].ti_factor;
}

const char *sim_site_name(const char *name, int site, char buffer[17])
{
    if (site <= 1)
        return name;
    snprintf(buffer, 17, "%.13s-%d", name, site % 10);
    return buffer;
}

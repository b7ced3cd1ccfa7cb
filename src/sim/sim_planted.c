/*
 * sim_planted.c - the problems planted in the simulated department, for
 * the demo and the tests (docs/demo.md lists what, where, when and how to
 * find each). Nothing in the files says "problem": the only record is the
 * simulator's own manifest.csv, which mitilog never reads.
 *
 *  hot-preset      "Abdomen General" in US-ROOM-2, days 8-21 (day index
 *                  7..20): MI +0.4, TIS x1.6.
 *  night-ob-dwell  every night-shift 2nd/3rd-trimester OB exam: 15-25 min
 *                  of long PW Doppler cine loops at TIB 1.9-2.0 (at, not
 *                  above, the TI 2.0 ceiling): beyond the obstetric
 *                  dwell table's 4 minutes at 2.0 in every exam, where
 *                  the rest of the department breaches it in a few.
 *  silent-probe    the L4-15 linear probe in US-ROOM-3 omits MI/TI from
 *                  day 15 (day index 14) on.
 *  tic-high        the first US-ROOM-3 day-shift exam of day 10 (index 9)
 *                  is a transcranial exam with TIC 2.2-2.6 in PW Doppler.
 *  mi-over-limit   the first US-ROOM-1 day-shift exam of days 5, 12 and 19
 *                  (indices 4, 11, 18) is an abdomen with MI 2.1 on its
 *                  middle B-mode captures (above the 1.9 equipment limit).
 *  resend          the first US-ROOM-4 day-shift exam of day 3 (index 2;
 *                  day 1 on shorter runs) is sent twice, same UIDs.
 *  header-mismatch with --screens only, per file: US-ROOM-2's scanner
 *                  now and then writes into the header the indices of the
 *                  capture before while its screen shows the right ones
 *                  (sim_write.c decides which captures).
 */
#include "sim/sim.h"

#include <stdio.h>
#include <string.h>

enum { ROOM_1 = 0, ROOM_2 = 1, ROOM_3 = 2, ROOM_4 = 3, ROOM_MATERNITY = 4, PROBE_L4_15 = 1 };

/* Forces the first day-shift slot of a room to an exam type. */
static void sim_force_first(sim_day *day, int room, const char *key, unsigned bit)
{
    for (size_t i = 0; i < day->count; i++) {
        sim_slot *slot = &day->slots[i];
        if (slot->room == room && slot->shift == SIM_SHIFT_DAY) {
            if (key != NULL)
                slot->exam_type = sim_exam_type_find(key);
            slot->planted |= bit;
            return;
        }
    }
}

void sim_planted_mark(sim_day *day, int days)
{
    int d = day->day_index;
    if (d == 9)
        sim_force_first(day, ROOM_3, "transcranial", SIM_PLANTED_TIC_HIGH);
    if (d == 4 || d == 11 || d == 18)
        sim_force_first(day, ROOM_1, "abdomen", SIM_PLANTED_MI_OVER_LIMIT);
    if (d == (days > 2 ? 2 : days - 1))
        sim_force_first(day, ROOM_4, NULL, SIM_PLANTED_RESEND);

    int abdomen = sim_exam_type_find("abdomen");
    int ob2 = sim_exam_type_find("ob2");
    int ob3 = sim_exam_type_find("ob3");
    for (size_t i = 0; i < day->count; i++) {
        sim_slot *slot = &day->slots[i];
        const sim_exam_type *type = &sim_exam_types[slot->exam_type];
        if (slot->room == ROOM_2 && slot->exam_type == abdomen && d >= 7 && d <= 20)
            slot->planted |= SIM_PLANTED_HOT_PRESET;
        if (slot->room == ROOM_MATERNITY && slot->shift == SIM_SHIFT_NIGHT &&
            (slot->exam_type == ob2 || slot->exam_type == ob3))
            slot->planted |= SIM_PLANTED_NIGHT_OB_DWELL;
        if (slot->room == ROOM_3 && type->probe == PROBE_L4_15 && d >= 14)
            slot->planted |= SIM_PLANTED_SILENT_PROBE;
    }
}

void sim_planted_apply(const sim_exam *exam, sim_capture *capture, size_t position, sim_rng *rng)
{
    unsigned planted = exam->planted;
    size_t n = exam->capture_count;
    if (planted & SIM_PLANTED_HOT_PRESET) {
        capture->mi += 0.4;
        capture->tis *= 1.6;
    }
    if ((planted & SIM_PLANTED_NIGHT_OB_DWELL) && capture->mode == SIM_MODE_PW) {
        /* 1.90-2.04: displayed 1.9 or, two times in three, 2.0 */
        capture->tib = 1.9 + 0.14 * sim_rng_uniform(rng);
        capture->tis = capture->tib * 0.6;
    }
    if (planted & SIM_PLANTED_TIC_HIGH) {
        if (position >= n / 3 && position < n - n / 3) {
            capture->mode = SIM_MODE_PW;
            capture->tic = 2.2 + 0.4 * sim_rng_uniform(rng);
            capture->tis = capture->tic * 0.5;
            capture->mi = 0.5 + 0.1 * sim_rng_uniform(rng);
        }
    }
    if (planted & SIM_PLANTED_MI_OVER_LIMIT) {
        if (position >= n / 3 && position < n - n / 3 &&
            (capture->mode == SIM_MODE_B || position == n / 2)) {
            capture->mode = SIM_MODE_B;
            capture->mi = 2.1;
        }
    }
    if (planted & SIM_PLANTED_SILENT_PROBE)
        capture->has_indices = 0;
}

void sim_planted_tags(unsigned planted, char *buffer, size_t size)
{
    static const struct {
        unsigned bit;
        const char *tag;
    } tags[] = {
        {SIM_PLANTED_HOT_PRESET, "hot-preset"},
        {SIM_PLANTED_NIGHT_OB_DWELL, "night-ob-dwell"},
        {SIM_PLANTED_SILENT_PROBE, "silent-probe"},
        {SIM_PLANTED_TIC_HIGH, "tic-high"},
        {SIM_PLANTED_MI_OVER_LIMIT, "mi-over-limit"},
        {SIM_PLANTED_RESEND, "resend"},
        {SIM_PLANTED_HEADER_MISMATCH, "header-mismatch"},
    };
    size_t used = 0;
    if (size == 0)
        return;
    buffer[0] = '\0';
    for (size_t i = 0; i < sizeof tags / sizeof tags[0]; i++) {
        if (!(planted & tags[i].bit))
            continue;
        int w = snprintf(buffer + used, size - used, "%s%s", used > 0 ? ";" : "", tags[i].tag);
        if (w < 0 || (size_t)w >= size - used)
            return;
        used += (size_t)w;
    }
}

/*
 * sim_schedule.c - how many exams of which type each room does per shift,
 * and when; plus the small calendar arithmetic the simulator needs.
 *
 * Volumes (docs/demo.md): weekdays 57-87 exams, weekends 25-39; the night
 * shift is mostly obstetric emergencies in US-MATERNITY.
 */
#include "sim/sim.h"

#include <stdio.h>
#include <string.h>

typedef struct sim_room_shift {
    int low, high;   /* exams per shift */
    const char *mix; /* "key:weight,key:weight" */
} sim_room_shift;

/* [room][weekend][shift] */
static const sim_room_shift sim_plan[SIM_ROOM_COUNT][2][SIM_SHIFT_COUNT] = {
    {/* US-ROOM-1: general */
     {{9, 12, "abdomen:4,renal:2,thyroid:1.5,small_parts:1,msk:1.5,gyn:0.5"},
      {3, 5, "abdomen:3,renal:1,thyroid:1,small_parts:1"},
      {0, 1, "abdomen:1"}},
     {{6, 8, "abdomen:4,renal:2,small_parts:1,msk:1"},
      {2, 3, "abdomen:3,renal:1"},
      {0, 1, "abdomen:1"}}},
    {/* US-ROOM-2: general and vascular */
     {{9, 12, "abdomen:4,renal:1,carotid:2,venous_leg:2"},
      {3, 5, "venous_leg:2,abdomen:2"},
      {0, 0, ""}},
     {{0, 0, ""}, {0, 0, ""}, {0, 0, ""}}},
    {/* US-ROOM-3: echo, vascular, transcranial */
     {{8, 11, "echo_adult:4,carotid:2,transcranial:1,thyroid:1,venous_leg:1"},
      {2, 4, "echo_adult:3,carotid:1"},
      {0, 0, ""}},
     {{0, 0, ""}, {0, 0, ""}, {0, 0, ""}}},
    {/* US-ROOM-4: paediatrics and neonates */
     {{8, 11, "paeds_abdomen:4,echo_paeds:2,neonatal_head:3,msk:1"},
      {0, 2, "paeds_abdomen:2,neonatal_head:1"},
      {0, 0, ""}},
     {{4, 6, "paeds_abdomen:3,neonatal_head:2,echo_paeds:1"}, {0, 0, ""}, {0, 0, ""}}},
    {/* US-MATERNITY: obstetrics and gynaecology, round the clock */
     {{10, 14, "ob_early:3,ob2:4,ob3:3,gyn:1.5"},
      {4, 6, "ob_early:2,ob2:2,ob3:3,gyn:1"},
      {1, 4, "ob3:3,ob_early:2,ob2:1"}},
     {{7, 10, "ob_early:3,ob2:3,ob3:3,gyn:1"},
      {5, 7, "ob_early:2,ob2:1,ob3:3"},
      {1, 4, "ob3:3,ob_early:2,ob2:1"}}},
};

static const int sim_shift_start[SIM_SHIFT_COUNT] = {7 * 60, 15 * 60, 23 * 60};
enum { SIM_SHIFT_MINUTES = 8 * 60 };

sim_shift sim_shift_of_minute(int minute_of_day)
{
    int m = ((minute_of_day % 1440) + 1440) % 1440;
    if (m >= 7 * 60 && m < 15 * 60)
        return SIM_SHIFT_DAY;
    if (m >= 15 * 60 && m < 23 * 60)
        return SIM_SHIFT_EVENING;
    return SIM_SHIFT_NIGHT;
}

const char *sim_shift_name(sim_shift shift)
{
    static const char *const names[SIM_SHIFT_COUNT] = {"day", "evening", "night"};
    return names[shift];
}

/* Picks an exam type from a "key:weight,..." mix. */
static int sim_pick_type(sim_rng *rng, const char *mix)
{
    double weights[32];
    int types[32];
    size_t count = 0;
    const char *p = mix;
    while (*p != '\0' && count < 32) {
        char key[32];
        double weight = 0.0;
        int used = 0;
        if (sscanf(p, "%31[^:]:%lf%n", key, &weight, &used) != 2)
            break;
        types[count] = sim_exam_type_find(key);
        weights[count] = types[count] >= 0 ? weight : 0.0;
        count++;
        p += used;
        if (*p == ',')
            p++;
    }
    int chosen = sim_rng_pick(rng, weights, count);
    return chosen < 0 ? 0 : types[chosen];
}

static int sim_slot_compare(const sim_slot *a, const sim_slot *b)
{
    if (a->start_minute != b->start_minute)
        return a->start_minute < b->start_minute ? -1 : 1;
    return a->room < b->room ? -1 : a->room > b->room;
}

void sim_day_schedule(uint64_t seed, int day_index, int weekday, sim_day *day)
{
    memset(day, 0, sizeof *day);
    day->day_index = day_index;
    day->weekday = weekday;
    int weekend = weekday >= 5;
    for (int room = 0; room < SIM_ROOM_COUNT; room++) {
        for (int shift = 0; shift < SIM_SHIFT_COUNT; shift++) {
            const sim_room_shift *plan = &sim_plan[room][weekend][shift];
            sim_rng rng;
            sim_rng_seed(&rng,
                         sim_mix(seed, 1, (uint64_t)day_index, (uint64_t)room, (uint64_t)shift));
            int n = sim_rng_range(&rng, plan->low, plan->high);
            if (n <= 0)
                continue;
            int slot_minutes = SIM_SHIFT_MINUTES / n;
            for (int i = 0; i < n && day->count < SIM_DAY_MAX_EXAMS; i++) {
                sim_slot *slot = &day->slots[day->count++];
                slot->room = room;
                slot->shift = (sim_shift)shift;
                slot->exam_type = sim_pick_type(&rng, plan->mix);
                const sim_exam_type *type = &sim_exam_types[slot->exam_type];
                int duration = sim_rng_range(&rng, type->minutes_low, type->minutes_high);
                if (duration > slot_minutes - 3)
                    duration = slot_minutes - 3;
                if (duration < 5)
                    duration = 5;
                int slack = slot_minutes - duration - 2;
                slot->duration_minutes = duration;
                slot->start_minute = sim_shift_start[shift] + i * slot_minutes +
                                     sim_rng_range(&rng, 0, slack > 0 ? slack : 0);
                slot->seed = sim_mix(seed, 2, (uint64_t)day_index, (uint64_t)(room * 8 + shift),
                                     (uint64_t)i);
            }
        }
    }
    /* Insertion sort: at most SIM_DAY_MAX_EXAMS, deterministic order. */
    for (size_t i = 1; i < day->count; i++) {
        sim_slot key = day->slots[i];
        size_t j = i;
        while (j > 0 && sim_slot_compare(&day->slots[j - 1], &key) > 0) {
            day->slots[j] = day->slots[j - 1];
            j--;
        }
        day->slots[j] = key;
    }
}

/* Civil-from-days and days-from-civil (Howard Hinnant's algorithms). */
long sim_date_to_days(sim_date date)
{
    int y = date.year - (date.month <= 2);
    long era = (y >= 0 ? y : y - 399) / 400;
    unsigned yoe = (unsigned)(y - era * 400);
    unsigned mp = (unsigned)(date.month + (date.month > 2 ? -3 : 9));
    unsigned doy = (153 * mp + 2) / 5 + (unsigned)date.day - 1;
    unsigned doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    return era * 146097 + (long)doe - 719468;
}

sim_date sim_date_from_days(long days)
{
    days += 719468;
    long era = (days >= 0 ? days : days - 146096) / 146097;
    unsigned doe = (unsigned)(days - era * 146097);
    unsigned yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
    long y = (long)yoe + era * 400;
    unsigned doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    unsigned mp = (5 * doy + 2) / 153;
    unsigned d = doy - (153 * mp + 2) / 5 + 1;
    unsigned m = mp < 10 ? mp + 3 : mp - 9;
    sim_date out = {(int)(y + (m <= 2)), (int)m, (int)d};
    return out;
}

int sim_date_weekday(sim_date date)
{
    long days = sim_date_to_days(date); /* 1970-01-01 was a Thursday */
    return (int)(((days % 7) + 7 + 3) % 7);
}

int sim_date_parse(const char *text, sim_date *out)
{
    int y, m, d, used = 0;
    if (text == NULL || strlen(text) != 10 ||
        sscanf(text, "%4d-%2d-%2d%n", &y, &m, &d, &used) != 3 || used != 10 || text[4] != '-' ||
        text[7] != '-')
        return -1;
    if (y < 1900 || y > 9999 || m < 1 || m > 12 || d < 1 || d > 31)
        return -1;
    sim_date date = {y, m, d};
    sim_date back = sim_date_from_days(sim_date_to_days(date));
    if (back.year != y || back.month != m || back.day != d)
        return -1;
    *out = date;
    return 0;
}

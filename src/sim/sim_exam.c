/*
 * sim_exam.c - one exam: patient, operator, capture times, modes, cine
 * loops and displayed indices (the model in sim_department.c), bent by the
 * planted problems of sim_planted.c.
 */
#include "sim/sim.h"

#include <math.h>
#include <string.h>

static double sim_round1(double value, double floor_value)
{
    double r = round(value * 10.0) / 10.0;
    return r < floor_value ? floor_value : r;
}

static void sim_sort_seconds(long *values, size_t count)
{
    for (size_t i = 1; i < count; i++) {
        long key = values[i];
        size_t j = i;
        while (j > 0 && values[j - 1] > key) {
            values[j] = values[j - 1];
            j--;
        }
        values[j] = key;
    }
}

/* Sets the model's indices for a capture in its mode. */
static void sim_model_indices(const sim_exam_type *type, sim_capture *c, sim_rng *rng)
{
    double noise_mi = 1.0 + 0.06 * sim_rng_normal(rng);
    double noise_ti = 1.0 + 0.06 * sim_rng_normal(rng);
    double mi = type->mi_b * sim_mode_mi_factor(c->mode) * noise_mi;
    double median_ti = type->ti_by_mode[c->mode] > 0.0 ? type->ti_by_mode[c->mode]
                                                       : type->ti_b * sim_mode_ti_factor(c->mode);
    double ti = median_ti * noise_ti;
    c->has_indices = 1;
    c->mi = mi;
    c->tib = c->tic = 0.0;
    switch (type->indices) {
    case SIM_INDICES_TIS: c->tis = ti; break;
    case SIM_INDICES_TIB:
        c->tib = ti;
        c->tis = ti * 0.6; /* soft tissue below the bone-at-focus value */
        break;
    case SIM_INDICES_TIC:
        c->tic = ti;
        c->tis = ti * 0.5;
        break;
    }
}

/* Rounds to the digits the room's device displays (floor 0.1 either
 * way): the displayed value is the model's value. */
static double sim_round_to(double value, int decimals)
{
    if (decimals != 2)
        return sim_round1(value, 0.1);
    double r = round(value * 100.0) / 100.0;
    return r < 0.1 ? 0.1 : r;
}

static void sim_round_indices(sim_capture *c, int decimals)
{
    c->mi = sim_round_to(c->mi, decimals);
    c->tis = sim_round_to(c->tis, decimals);
    c->tib = c->tib > 0.0 ? sim_round_to(c->tib, decimals) : 0.0;
    c->tic = c->tic > 0.0 ? sim_round_to(c->tic, decimals) : 0.0;
}

/* A capture in the breach stretch: pulsed-wave Doppler at governing TI
 * 2.0, the other indices as the model's index set relates them. 2.0 is
 * at the TI ceiling (at most 2.0 passes, docs/domain.md section 4) and at
 * the obstetric dwell table's 4-minute row: a dwell breach, not a
 * ceiling one, which stays the planted transcranial exam's. */
static void sim_breach_indices(const sim_exam_type *type, sim_capture *c, sim_rng *rng)
{
    double ti = 2.0;
    c->mode = SIM_MODE_PW;
    c->mi = type->mi_b * sim_mode_mi_factor(SIM_MODE_PW) * (1.0 + 0.06 * sim_rng_normal(rng));
    switch (type->indices) {
    case SIM_INDICES_TIS: c->tis = ti; break;
    case SIM_INDICES_TIB:
        c->tib = ti;
        c->tis = ti * 0.6;
        break;
    case SIM_INDICES_TIC:
        c->tic = ti;
        c->tis = ti * 0.5;
        break;
    }
}

/* The breach stretch, captures first..last (0, 0: none): consecutive
 * captures from a random one of the first half on, as few as make the
 * intervals that lead to them (each capped at 300 s, docs/domain.md
 * section 5) add up to at least 270 s, longer than the 4 minutes the
 * obstetric table allows at TI 2.0. It reaches back when the rest of the
 * exam is too short; none when the whole exam is. */
static void sim_breach_stretch(const long *seconds, size_t n, sim_rng *rng, size_t *first,
                               size_t *last)
{
    *first = *last = 0;
    if (n < 3)
        return;
    size_t start = (size_t)sim_rng_range(rng, 1, (int)(n / 2));
    size_t end = start;
    long gap = seconds[start] - seconds[start - 1];
    long total = gap > 300 ? 300 : gap;
    while (total < 270 && end + 1 < n) {
        end++;
        gap = seconds[end] - seconds[end - 1];
        total += gap > 300 ? 300 : gap;
    }
    while (total < 270 && start > 1) {
        start--;
        gap = seconds[start] - seconds[start - 1];
        total += gap > 300 ? 300 : gap;
    }
    if (total >= 270) {
        *first = start;
        *last = end;
    }
}

static int sim_cine_frames(sim_rng *rng)
{
    /* Mostly short loops (20-60 frames), a few long ones up to 120. */
    if (sim_rng_uniform(rng) < 0.8)
        return sim_rng_range(rng, 20, 60);
    return sim_rng_range(rng, 61, 120);
}

void sim_exam_build(int day_index, int exam_number, const sim_slot *slot, sim_exam *exam)
{
    const sim_exam_type *type = &sim_exam_types[slot->exam_type];
    sim_rng rng;
    sim_rng_seed(&rng, slot->seed);
    memset(exam, 0, sizeof *exam);
    exam->day_index = day_index;
    exam->exam_number = exam_number;
    exam->slot = *slot;
    exam->planted = slot->planted;
    exam->operator_index = sim_rng_range(&rng, 0, SIM_OPERATOR_COUNT - 1);
    exam->patient_number = (uint32_t)(day_index * 1000 + exam_number);
    exam->patient_age_days = sim_rng_range(&rng, type->age_low_days, type->age_high_days);
    exam->patient_sex = type->sex != 0 ? type->sex : (sim_rng_uniform(&rng) < 0.5 ? 'F' : 'M');
    if (type->gestation_low_weeks > 0)
        exam->gestation_days =
            sim_rng_range(&rng, type->gestation_low_weeks * 7, type->gestation_high_weeks * 7 + 6);

    int dwell = (exam->planted & SIM_PLANTED_NIGHT_OB_DWELL) != 0;
    int n = sim_rng_range(&rng, type->captures_low, type->captures_high);
    int minutes = slot->duration_minutes;
    if (dwell) {
        n = sim_rng_range(&rng, 15, 25);
        minutes = 5 + sim_rng_range(&rng, 15, 25);
    }
    if (n < SIM_CAPTURES_LOW)
        n = SIM_CAPTURES_LOW;
    if (n > SIM_CAPTURES_HIGH)
        n = SIM_CAPTURES_HIGH;

    long start = (long)slot->start_minute * 60 + sim_rng_range(&rng, 30, 120);
    long span = (long)minutes * 60 - 150;
    if (span < n * 10)
        span = n * 10;
    long seconds[SIM_MAX_CAPTURES];
    for (int i = 0; i < n; i++) {
        if (dwell) /* 3 B-mode views in 5 min, then PW to the end */
            seconds[i] = i < 3 ? 40 + i * 80 : 300 + (span - 300) * (i - 2) / (n - 2);
        else
            seconds[i] = (long)(sim_rng_uniform(&rng) * (double)span);
    }
    sim_sort_seconds(seconds, (size_t)n);
    for (int i = 1; i < n; i++) /* the times written: one second apart */
        if (seconds[i] <= seconds[i - 1])
            seconds[i] = seconds[i - 1] + 1;
    /* Drawn from the exam's own stream only for exam types that have a
     * share, so that every other exam keeps its captures. */
    size_t breach_first = 0, breach_last = 0;
    if (!dwell && type->pw_breach_share > 0.0 && sim_rng_uniform(&rng) < type->pw_breach_share)
        sim_breach_stretch(seconds, (size_t)n, &rng, &breach_first, &breach_last);

    exam->capture_count = (size_t)n;
    long previous = -1;
    for (int i = 0; i < n; i++) {
        sim_capture *c = &exam->captures[i];
        long t = start + seconds[i];
        if (t <= previous)
            t = previous + 1;
        previous = t;
        c->second = t;
        int mode = dwell ? (i < 3 ? SIM_MODE_B : SIM_MODE_PW)
                         : sim_rng_pick(&rng, type->mode_weights, SIM_MODE_COUNT);
        c->mode = mode < 0 ? SIM_MODE_B : (sim_mode)mode;
        double cine = type->cine_fraction;
        if (c->mode == SIM_MODE_PW || c->mode == SIM_MODE_CW)
            cine *= 1.5;
        c->frames = 1;
        c->frame_time_ms = 0.0;
        if (c->mode != SIM_MODE_3D && (dwell ? i >= 3 : sim_rng_uniform(&rng) < cine)) {
            c->frames = dwell ? sim_rng_range(&rng, 100, 120) : sim_cine_frames(&rng);
            c->frame_time_ms = dwell ? 40.0 : (double)sim_rng_range(&rng, 20, 40);
        }
        sim_model_indices(type, c, &rng);
        if (breach_first > 0 && (size_t)i >= breach_first && (size_t)i <= breach_last)
            sim_breach_indices(type, c, &rng);
        sim_planted_apply(exam, c, (size_t)i, &rng);
        sim_round_indices(c, slot->decimals);
    }
}

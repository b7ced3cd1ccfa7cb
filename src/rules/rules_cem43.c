/* Thermal dose CEM43 [std: Sapareto & Dewey 1984]. */
#include <math.h>

#include "rules/rules_internal.h"

double rules_cem43_minutes(double minutes, double temperature_celsius)
{
    if (!(minutes > 0))
        return 0;
    double r = temperature_celsius >= 43.0 ? 0.5 : 0.25;
    return minutes * pow(r, 43.0 - temperature_celsius);
}

double rules_cem43_temperature_from_ti(double thermal_index)
{
    /* Worst case: the displayed TI read as the rise in C above 37 C
     * (docs/domain.md section 5). */
    return 37.0 + thermal_index;
}

double rules_timeline_cem43(const rules_view *view)
{
    double dose = 0;
    for (size_t k = 0; k < view->summary.entry_count; k++) {
        const ext_timeline_entry *entry = &view->entries[k];
        const exam_number *ti = &view->captures[entry->capture].indices[view->governing];
        if (ti->status != EXAM_VALUE_OK)
            continue;
        dose += rules_cem43_minutes(entry->attributed_seconds / 60.0,
                                    rules_cem43_temperature_from_ti(ti->value));
    }
    return dose;
}

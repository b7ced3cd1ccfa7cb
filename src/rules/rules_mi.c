/* Mechanical Index from derated pressure and frequency
 * [std: IEC 62359; NEMA UD 3]: MI = p_r.3 / sqrt(f_awf). */
#include <math.h>

#include "rules/rules_internal.h"

double rules_mechanical_index(double derated_pressure_mpa, double frequency_mhz)
{
    if (!(frequency_mhz > 0) || !(derated_pressure_mpa >= 0))
        return -1;
    return derated_pressure_mpa / sqrt(frequency_mhz);
}

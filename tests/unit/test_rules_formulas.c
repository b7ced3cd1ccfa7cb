/* Published check values of the two formulas the rules own. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "rules_test_support.h"

/* Sapareto & Dewey 1984 (docs/domain.md section 5): 1 min at 43 C is
 * 1.0 CEM43; 1 min at 44 C is 2.0; 1 min at 42 C is 0.25. */
static void cem43_check_values(void **state)
{
    (void)state;
    assert_close(rules_cem43_minutes(1, 43), 1.0, 1e-12);
    assert_close(rules_cem43_minutes(1, 44), 2.0, 1e-12);
    assert_close(rules_cem43_minutes(1, 42), 0.25, 1e-12);
    /* Derived from the same formula: 10 min at 41 C = 10 x 0.25^2. */
    assert_close(rules_cem43_minutes(10, 41), 0.625, 1e-12);
    assert_close(rules_cem43_minutes(0, 50), 0.0, 0);
    /* T = 37 + TI (worst case): TI 6 is 43 C. */
    assert_close(rules_cem43_temperature_from_ti(6.0), 43.0, 1e-12);
    assert_close(rules_cem43_minutes(1, rules_cem43_temperature_from_ti(7.0)), 2.0, 1e-12);
}

/* IEC 62359 / NEMA UD 3: MI = p_r.3 / sqrt(f_awf); worked values of the
 * docs/domain.md section 1: 2.0 MPa at 4.0 MHz -> 1.0; 1.9 MPa at
 * 1.0 MHz -> 1.9. */
static void mechanical_index_check_values(void **state)
{
    (void)state;
    assert_close(rules_mechanical_index(2.0, 4.0), 1.0, 1e-12);
    assert_close(rules_mechanical_index(1.9, 1.0), 1.9, 1e-12);
    assert_close(rules_mechanical_index(1.0, 0.0), -1.0, 0);
    assert_close(rules_mechanical_index(-1.0, 2.0), -1.0, 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(cem43_check_values),
        cmocka_unit_test(mechanical_index_check_values),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

/*
 * test_runlog_write.c — the writer's digit conversion (runlog_digits8, src/runlog_internal.h:
 * eight decimal digits of n < 10^8 by multiply-and-shift on lanes of one 64-bit word) against
 * division digit by digit, for every n below 10^8, and the leading and trailing zero counts the
 * writer takes from it. Tolerance: none (integers). The formatted cells themselves are checked
 * against printf and the rounding rule in tests/test_runlog_stream.c (runlog_g9_matches_printf,
 * runlog_fixed_matches_rule). Mutations caught: either magic constant (10486, 103) off by one,
 * either lane mask one bit narrower.
 */
#include <stdint.h>
#include <stdlib.h>

#include "runlog_internal.h"
#include "testutil.h"

static void digits8_every_value(void **state)
{
    (void)state;
#if defined(RUNLOG_DIGITS8)
    uint32_t bad = 0, first = 0;
    for (uint32_t n = 0; n < 100000000u; n++) {
        uint64_t t = runlog_digits8(n), want = 0;
        uint32_t v = n;
        for (int b = 7; b >= 0; b--, v /= 10) /* the last digit in the highest byte */
            want |= (uint64_t)(v % 10) << (8 * b);
        if (t != want && bad++ == 0)
            first = n;
    }
    if (bad)
        print_error("%u values differ, the first %u\n", bad, first);
    assert_int_equal(bad, 0);
    /* the leading zeros (low zero bytes) and trailing zeros (high zero bytes) as counted */
    assert_int_equal(__builtin_ctzll(runlog_digits8(1)) >> 3, 7);
    assert_int_equal(__builtin_ctzll(runlog_digits8(12345678)) >> 3, 0);
    assert_int_equal(__builtin_ctzll(runlog_digits8(3000)) >> 3, 4);
    assert_int_equal(__builtin_clzll(runlog_digits8(12340000)) >> 3, 4);
    assert_int_equal(__builtin_clzll(runlog_digits8(10000000)) >> 3, 7);
    assert_int_equal(__builtin_clzll(runlog_digits8(99999999)) >> 3, 0);
#else
    skip(); /* not a little-endian GCC/Clang target: the writer's loops by division */
#endif
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(digits8_every_value),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

/*
 * test_error.c — status texts and error records.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <string.h>
#include <cmocka.h>

#include "internal.h"
#include "stagecal/error.h"

static void error_texts_are_distinct(void **state)
{
    (void)state;
    for (int i = 0; i < STAGECAL_NSTATUS; i++)
        for (int j = i + 1; j < STAGECAL_NSTATUS; j++)
            assert_string_not_equal(stagecal_strerror(i), stagecal_strerror(j));
    assert_string_equal(stagecal_strerror(-1), "unknown status");
    assert_string_equal(stagecal_strerror(STAGECAL_NSTATUS), "unknown status");
}

static void error_location_prefix(void **state)
{
    (void)state;
    stagecal_error e;
    int rc = error_set_at(&e, STAGECAL_EDATA, "run.csv", 12, 3, "column '%s': bad", "xB");
    assert_int_equal(rc, STAGECAL_EDATA);
    assert_string_equal(e.text, "run.csv:12: column 'xB': bad");
    assert_int_equal(e.line, 12);
    assert_int_equal(e.column, 3);
    assert_int_equal(error_set(NULL, STAGECAL_ENOMEM, "x"), STAGECAL_ENOMEM);
    stagecal_error_clear(&e);
    assert_int_equal(e.code, STAGECAL_OK);
    assert_string_equal(e.text, "");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(error_texts_are_distinct),
        cmocka_unit_test(error_location_prefix),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

/*
 * test_convention.c — the stage convention, the column-id rule and the caution: one
 * home (src/convention.c) that every module and command asks.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <string.h>
#include <cmocka.h>

#include "stagecal/convention.h"
#include "testutil.h"

/* Stages include the pot (an ideal stage); a partial condenser is one more equilibrium
 * stage, a total condenser none (the McCabe-Thiele convention of the textbooks, e.g.
 * McCabe, Smith & Harriott, Unit Operations of Chemical Engineering; from memory).
 * Exact arithmetic: tolerance 0. */
static void convention_column_stages_by_condenser(void **state)
{
    (void)state;
    assert_abs(stagecal_convention_column_stages(7.25, STAGECAL_CONDENSER_TOTAL), 6.25, 0.0,
               "total: stages - 1");
    assert_abs(stagecal_convention_column_stages(7.25, STAGECAL_CONDENSER_PARTIAL), 5.25, 0.0,
               "partial: stages - 2");
    assert_abs(stagecal_convention_stages(5.25, STAGECAL_CONDENSER_PARTIAL), 7.25, 0.0,
               "partial: back to stages");
    assert_abs(stagecal_convention_column_stages(1.0, STAGECAL_CONDENSER_TOTAL), 0.0, 0.0,
               "the pot alone: no column stage");
    assert_abs(stagecal_convention_column_stages(2.0, STAGECAL_CONDENSER_PARTIAL), 0.0, 0.0,
               "pot and partial condenser alone: no column stage");
    /* less separation than the stages outside the column give: no count, never negative */
    assert_true(isnan(stagecal_convention_column_stages(1.5, STAGECAL_CONDENSER_PARTIAL)));
    assert_true(isnan(stagecal_convention_column_stages(0.5, STAGECAL_CONDENSER_TOTAL)));
    assert_true(isnan(stagecal_convention_column_stages(NAN, STAGECAL_CONDENSER_TOTAL)));
    assert_true(isnan(stagecal_convention_column_stages(INFINITY, STAGECAL_CONDENSER_TOTAL)));
}

/* The sentences are part of the model-file format (docs/model-file.md quotes them). */
static void convention_texts_are_the_file_format(void **state)
{
    (void)state;
    assert_string_equal(
        stagecal_convention_text(STAGECAL_CONDENSER_TOTAL),
        "stages include the pot; column stages = stages - 1; total condenser not a stage");
    assert_string_equal(stagecal_convention_text(STAGECAL_CONDENSER_PARTIAL),
                        "stages include the pot; column stages = stages - 2; the partial "
                        "condenser is an equilibrium stage");
    assert_non_null(strstr(stagecal_convention_text_any(), "stages - 2"));
    assert_non_null(strstr(stagecal_caution_text(), "engineering judgement"));
    assert_non_null(strstr(stagecal_caution_text(), "extrapolation"));
    assert_non_null(strstr(stagecal_caution_text(), "licensed engineer"));
}

static void convention_condenser_names_round_trip(void **state)
{
    (void)state;
    stagecal_condenser c = STAGECAL_CONDENSER_TOTAL;
    stagecal_error err;
    assert_int_equal(stagecal_condenser_parse("partial", &c, &err), STAGECAL_OK);
    assert_int_equal(c, STAGECAL_CONDENSER_PARTIAL);
    assert_string_equal(stagecal_condenser_name(c), "partial");
    assert_int_equal(stagecal_condenser_parse("total", &c, &err), STAGECAL_OK);
    assert_string_equal(stagecal_condenser_name(c), "total");
    assert_int_equal(stagecal_condenser_parse("Partial", &c, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "\"total\" or \"partial\""));
    assert_int_equal(stagecal_condenser_parse(NULL, &c, NULL), STAGECAL_EINVAL);
}

/* Ids name folders (fits/<id>/): nothing that climbs out or hides. */
static void convention_id_rule(void **state)
{
    (void)state;
    const char *good[] = {"K7", "kestrel-harwick-C-3", "a.b_c-1", "0", "x.."};
    const char *bad[] = {"", ".", "..", ".hidden", "../x", "a/b", "a b", "é", "a\\b", NULL};
    for (size_t i = 0; i < sizeof good / sizeof good[0]; i++)
        assert_true(stagecal_convention_id_valid(good[i]));
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++)
        assert_false(stagecal_convention_id_valid(bad[i]));
    char longest[STAGECAL_NAME_MAX];
    memset(longest, 'a', sizeof longest - 1);
    longest[sizeof longest - 1] = '\0';
    assert_true(stagecal_convention_id_valid(longest));
    char too_long[STAGECAL_NAME_MAX + 1];
    memset(too_long, 'a', sizeof too_long - 1);
    too_long[sizeof too_long - 1] = '\0';
    assert_false(stagecal_convention_id_valid(too_long));
    assert_non_null(strstr(stagecal_convention_id_rule(), "not starting with '.'"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(convention_column_stages_by_condenser),
        cmocka_unit_test(convention_texts_are_the_file_format),
        cmocka_unit_test(convention_condenser_names_round_trip),
        cmocka_unit_test(convention_id_rule),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

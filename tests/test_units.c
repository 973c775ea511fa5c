/*
 * test_units.c — run-log header units and ISO 8601 timestamps.
 * Conversion factors are exact by definition (SI brochure: 1 h = 3600 s; NIST SP 811:
 * 1 lb = 0.45359237 kg, 0 °C = 273.15 K, 1 bar = 1e5 Pa), so they are compared
 * exactly or to 1 ulp-level relative tolerance (1e-15: one rounding in a division).
 */
#include <gsl/gsl_errno.h>
#include <math.h>
#include <string.h>

#include "testutil.h"
#include "stagecal/units.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

static void units_split_name_and_unit(void **state)
{
    (void)state;
    char name[32], unit[32];
    int has = -1;
    assert_int_equal(
        stagecal_units_split(" xB [ mol/mol ] ", name, sizeof name, unit, sizeof unit, &has, NULL),
        0);
    assert_string_equal(name, "xB");
    assert_string_equal(unit, "mol/mol");
    assert_int_equal(has, 1);
    assert_int_equal(stagecal_units_split("run", name, sizeof name, unit, sizeof unit, &has, NULL),
                     0);
    assert_string_equal(name, "run");
    assert_string_equal(unit, "");
    assert_int_equal(has, 0);
}

static void units_split_rejects_malformed(void **state)
{
    (void)state;
    char name[32], unit[32];
    int has;
    stagecal_error e;
    const char *bad[] = {"xB[mol/mol", "xB]", "xB[a][b]", "xB[a]x"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++)
        assert_int_equal(
            stagecal_units_split(bad[i], name, sizeof name, unit, sizeof unit, &has, &e),
            STAGECAL_EINVAL);
    assert_string_equal(e.text, "header 'xB[a]x' is malformed (expected name[unit])");
    assert_int_equal(stagecal_units_split("a_very_long_column_name_that_does_not_fit", name, 8,
                                          unit, sizeof unit, &has, &e),
                     STAGECAL_EINVAL);
}

static void units_factors_are_exact(void **state)
{
    (void)state;
    stagecal_unit u;
    /* SI brochure / NIST SP 811 definitions (exact). */
    struct {
        stagecal_quantity q;
        const char *t;
        double scale, offset;
        int mass;
    } c[] = {
        {STAGECAL_QTY_TIME, "h", 3600, 0, 0},
        {STAGECAL_QTY_TIME, "min", 60, 0, 0},
        {STAGECAL_QTY_AMOUNT, "kmol", 1000, 0, 0},
        {STAGECAL_QTY_AMOUNT, "lb", 0.45359237, 0, 1},
        {STAGECAL_QTY_FRACTION, "mol%", 0.01, 0, 0},
        {STAGECAL_QTY_FRACTION, "wt%", 0.01, 0, 1},
        {STAGECAL_QTY_FRACTION, "kg/kg", 1, 0, 1},
        /* ppm = µmol/mol and ppmw = mg/kg: 1e-6 by the SI prefix micro (SI brochure) */
        {STAGECAL_QTY_FRACTION, "ppm", 1e-6, 0, 0},
        {STAGECAL_QTY_FRACTION, "ppmw", 1e-6, 0, 1},
        {STAGECAL_QTY_FLOW, "kmol/h", 1000.0 / 3600.0, 0, 0},
        {STAGECAL_QTY_FLOW, "kg/h", 1.0 / 3600.0, 0, 1},
        {STAGECAL_QTY_DUTY, "kW", 1000, 0, 0},
        {STAGECAL_QTY_PRESSURE, "kPa", 1000, 0, 0},
        {STAGECAL_QTY_PRESSURE, "bar", 1e5, 0, 0},
        {STAGECAL_QTY_TEMPERATURE, "C", 1, 273.15, 0},
        {STAGECAL_QTY_TEMPERATURE, "K", 1, 0, 0},
        {STAGECAL_QTY_RATIO, "-", 1, 0, 0},
    };
    for (size_t i = 0; i < sizeof c / sizeof c[0]; i++) {
        assert_int_equal(stagecal_units_parse(c[i].q, c[i].t, &u, NULL), 0);
        assert_rel(u.scale, c[i].scale, 1e-15, c[i].t);
        assert_abs(u.offset, c[i].offset, 0, c[i].t);
        assert_int_equal(u.mass, c[i].mass);
    }
    assert_int_equal(stagecal_units_parse(STAGECAL_QTY_FRACTION, "mol%", &u, NULL), 0);
    assert_abs(u.hi, 100, 0, "mol% range");
    assert_int_equal(stagecal_units_parse(STAGECAL_QTY_FRACTION, "ppm", &u, NULL), 0);
    assert_abs(u.hi, 1e6, 0, "ppm range: 10^6 ppm is the whole");
    assert_int_equal(stagecal_units_parse(STAGECAL_QTY_FRACTION, "ppmw", &u, NULL), 0);
    assert_abs(u.hi, 1e6, 0, "ppmw range");
    /* ppm is a mole basis: not an amount, ratio or flow */
    assert_int_equal(stagecal_units_parse(STAGECAL_QTY_AMOUNT, "ppm", &u, NULL), STAGECAL_EINVAL);
    assert_int_equal(stagecal_units_parse(STAGECAL_QTY_TIME, "iso8601", &u, NULL), 0);
    assert_int_equal(u.iso8601, 1);
}

static void units_unknown_unit_message(void **state)
{
    (void)state;
    stagecal_unit u;
    stagecal_error e;
    assert_int_equal(stagecal_units_parse(STAGECAL_QTY_FRACTION, "ppb", &u, &e), STAGECAL_EINVAL);
    assert_string_equal(e.text,
                        "unknown unit 'ppb' (expected mol/mol, mol%, ppm, kg/kg, wt% or ppmw)");
    assert_int_equal(stagecal_units_parse(STAGECAL_QTY_TIME, "d", &u, &e), STAGECAL_EINVAL);
    assert_string_equal(e.text, "unknown unit 'd' (expected h, min, s or iso8601)");
    /* kmol is an amount, not a flow */
    assert_int_equal(stagecal_units_parse(STAGECAL_QTY_FLOW, "kmol", &u, &e), STAGECAL_EINVAL);
}

static void units_iso8601_matches_python_datetime(void **state)
{
    (void)state;
    double t;
    /* Expected values: /usr/bin/python3 datetime(...).timestamp() (Python stdlib). */
    assert_int_equal(stagecal_units_parse_iso8601("2026-01-01T00:00:00Z", &t), 0);
    assert_abs(t, 1767225600.0, 0, "2026-01-01Z");
    assert_int_equal(stagecal_units_parse_iso8601("2024-02-29 13:45:30.25+02:00", &t), 0);
    assert_abs(t, 1709207130.25, 1e-6, "leap day with zone"); /* 1e-6 s: decimal fraction */
    assert_int_equal(stagecal_units_parse_iso8601("1969-12-31T23:59:59", &t), 0);
    assert_abs(t, -1.0, 0, "before epoch, no zone = UTC");
    assert_int_equal(stagecal_units_parse_iso8601("2000-03-01T00:00-0530", &t), 0);
    assert_abs(t, 951888600.0, 0, "negative zone, no seconds");
}

static void units_iso8601_rejects_bad(void **state)
{
    (void)state;
    double t;
    const char *bad[] = {"2023-02-29T00:00:00", "2023-13-01T00:00",   "2023-04-31T00:00",
                         "2023-01-01T24:00",    "2023-01-01",         "2023-01-01T00:00:00Zx",
                         "23-01-01T00:00",      "2023-01-01T00:00:60"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        if (stagecal_units_parse_iso8601(bad[i], &t) != -1)
            fail_msg("accepted '%s'", bad[i]);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(units_split_name_and_unit),
        cmocka_unit_test(units_split_rejects_malformed),
        cmocka_unit_test(units_factors_are_exact),
        cmocka_unit_test(units_unknown_unit_message),
        cmocka_unit_test(units_iso8601_matches_python_datetime),
        cmocka_unit_test(units_iso8601_rejects_bad),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}

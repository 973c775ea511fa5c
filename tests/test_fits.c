/*
 * test_fits.c — finding a column's fits by label, name or period, and flagging fits whose
 * data period straddles an event (include/stagecal/fits.h). The entries are made by hand
 * here (dates worked out with the days-from-civil arithmetic of test_trend.c, checked
 * against `date -u -d 2025-08-01 +%s` = 1754006400); listing, labelling and retiring real
 * model files are exercised through the program in tests/cli/test_fits.sh.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "testutil.h"
#include "stagecal/fits.h"

#define DAY 86400.0
#define AUG1 1754006400.0 /* 2025-08-01T00:00:00Z */

static stagecal_fit_entry mk(const char *file, const char *name, double first, double last,
                             const char *label)
{
    stagecal_fit_entry e;
    memset(&e, 0, sizeof e);
    snprintf(e.file, sizeof e.file, "%s", file);
    snprintf(e.name, sizeof e.name, "%s", name);
    snprintf(e.label, sizeof e.label, "%s", label);
    e.first_s = first;
    e.last_s = last;
    e.straddles = -1;
    return e;
}

static void test_find(void **state)
{
    (void)state;
    stagecal_fit_entry e[4];
    e[0] = mk("a.json", "K@2025-08-08..2025-08-30", AUG1 + 7 * DAY, AUG1 + 29.5 * DAY, "");
    e[1] = mk("b.json", "K@2025-09-07..2025-09-29", AUG1 + 37 * DAY, AUG1 + 59 * DAY, "");
    e[2] = mk("c.json", "K@2025-08-08..2025-09-29#both", AUG1 + 7 * DAY, AUG1 + 59 * DAY, "both");
    e[3] = mk("d.json", "K@2025-10-12..2025-10-21", AUG1 + 72 * DAY, AUG1 + 81 * DAY, "");
    size_t k;
    stagecal_error err;
    assert_int_equal(stagecal_fits_find(e, 4, "2025-08", &k, &err), 0);
    assert_int_equal(k, 0);
    assert_int_equal(stagecal_fits_find(e, 4, "both", &k, &err), 0);
    assert_int_equal(k, 2);
    assert_int_equal(stagecal_fits_find(e, 4, "d.json", &k, &err), 0);
    assert_int_equal(k, 3);
    /* the exact period wins over the fits it contains */
    assert_int_equal(stagecal_fits_find(e, 4, "2025-08-08..2025-09-29", &k, &err), 0);
    assert_int_equal(k, 2);
    /* a wider period holds three fits: ambiguous, the message lists them */
    assert_int_equal(stagecal_fits_find(e, 4, "2025-08-01..2025-09-30", &k, &err), STAGECAL_EDATA);
    assert_non_null(strstr(err.text, "names 3 fits"));
    /* retired fits are never found */
    e[0].retired = 1;
    assert_int_equal(stagecal_fits_find(e, 4, "2025-08", &k, &err), STAGECAL_EDATA);
    assert_non_null(strstr(err.text, "no live fit"));
    assert_int_equal(stagecal_fits_find(e, 4, "2025-13", &k, &err), STAGECAL_EDATA);
}

static void test_straddles(void **state)
{
    (void)state;
    stagecal_fit_entry e[2];
    e[0] = mk("a.json", "K@…", AUG1, AUG1 + 60 * DAY, "");
    e[1] = mk("b.json", "K@…", AUG1 + 70 * DAY, AUG1 + 80 * DAY, "");
    stagecal_trend_event ev[3];
    memset(ev, 0, sizeof ev);
    ev[0].t_s = AUG1 + 30 * DAY; /* inside a's period but a note: does not split */
    ev[0].kind = STAGECAL_EVENT_NOTE;
    ev[1].t_s = AUG1 + 40 * DAY; /* repack of another column */
    ev[1].kind = STAGECAL_EVENT_REPACK;
    ev[2].t_s = AUG1 + 50 * DAY;
    ev[2].kind = STAGECAL_EVENT_MAINTENANCE;
    snprintf(ev[0].column_id, sizeof ev[0].column_id, "K");
    snprintf(ev[1].column_id, sizeof ev[1].column_id, "other");
    snprintf(ev[2].column_id, sizeof ev[2].column_id, "K");
    stagecal_fits_check_events(e, 2, ev, 3, "K");
    assert_int_equal(e[0].straddles, 2);
    assert_int_equal(e[1].straddles, -1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_find),
        cmocka_unit_test(test_straddles),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

/*
 * test_column.c — the column file reader: the shipped examples, SI values, and one
 * provoked message per kind of bad field (docs/column-file.md).
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_errno.h>

#include "stagecal/column.h"
#include "testutil.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* A valid file with the top-level extra fields, the model object and the uncertainty
 * object substituted. */
static int parse3(const char *top, const char *model, const char *unc, stagecal_column *col,
                  stagecal_error *err)
{
    char buf[4096];
    int n = snprintf(buf, sizeof buf,
                     "{\n"
                     "  \"format\": \"stagecal-column\", \"version\": 1,\n"
                     "  \"id\": \"t-1\", \"condenser\": \"total\",\n"
                     "  %s\n"
                     "  \"system\": {\n"
                     "    \"light\": {\"name\": \"ethanol\", \"molar_mass_kg_mol\": 0.04606844,\n"
                     "      \"antoine\": {\"a\": 5.24677, \"b\": 1598.673, \"c\": -46.424}},\n"
                     "    \"heavy\": {\"name\": \"water\", \"molar_mass_kg_mol\": 0.01801528,\n"
                     "      \"antoine\": {\"a\": 5.08354, \"b\": 1663.125, \"c\": -45.622,\n"
                     "                  \"t_min_k\": 344, \"t_max_k\": 373}},\n"
                     "    \"model\": %s\n"
                     "  },\n"
                     "  \"uncertainty\": %s\n"
                     "}\n",
                     top, model, unc);
    assert_true(n > 0 && (size_t)n < sizeof buf);
    return stagecal_column_parse(buf, (size_t)n, "col.json", col, err);
}

static int parse(const char *top, const char *model, stagecal_column *col, stagecal_error *err)
{
    return parse3(top, model, "{\"xd\": 0.003}", col, err);
}

static void column_examples_load(void **state)
{
    (void)state;
    stagecal_column col;
    stagecal_error err;
    double az[2], y;

    int rc = stagecal_column_load(STAGECAL_DATASETS "/columns/kestrel_c3_ethanol_water.json", &col,
                                  &err);
    if (rc != STAGECAL_OK)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    assert_string_equal(col.id, "kestrel-harwick-C-3");
    assert_rel(col.height_m, 6.0, 0.0, "height");
    assert_rel(col.diameter_m, 0.30, 0.0, "diameter");
    assert_int_equal(col.condenser, STAGECAL_CONDENSER_TOTAL);
    assert_string_equal(col.system.light, "ethanol");
    assert_rel(col.system.m_light, 0.04606844, 0.0, "m_light [kg/mol]");
    assert_rel(col.system.p_pa, 101325.0, 0.0, "pressure");
    assert_rel(col.u.w_mol, 500.0, 0.0, "u(W)");
    assert_rel(col.u.r_rel, 0.02, 0.0, "u_rel(R)");
    assert_int_equal(stagecal_vle_get_kind(col.system.vle), STAGECAL_VLE_NRTL);
    /* the file's model is NRTL-A: its azeotrope is 0.8954479598,
     * computed in Python with the NRTL-A constants (Gmehling & Onken 1977, source secondary) */
    assert_int_equal(stagecal_vle_azeotropes(col.system.vle, az, 2), 1);
    assert_rel(az[0], 0.8954479598, 1e-8,
               "azeotrope of the file's model (NRTL-A, computed in Python)");
    stagecal_column_free(&col);
    stagecal_column_free(NULL);

    assert_int_equal(stagecal_column_load(STAGECAL_DATASETS "/columns/demo_alpha.json", &col, &err),
                     STAGECAL_OK);
    assert_int_equal(col.trays, 20);
    assert_rel(col.height_m, 0.0, 0.0, "no height");
    assert_int_equal(stagecal_vle_ystar(col.system.vle, 0.5, &y), STAGECAL_OK);
    assert_rel(y, 2.5 * 0.5 / (1 + 1.5 * 0.5), 1e-15, "alpha 2.5 closed form");
    stagecal_column_free(&col);

    assert_int_equal(
        stagecal_column_load(STAGECAL_DATASETS "/columns/demo_benzene_toluene.json", &col, &err),
        STAGECAL_OK);
    assert_int_equal(stagecal_vle_get_kind(col.system.vle), STAGECAL_VLE_IDEAL);
    double t;
    /* benzene's normal boiling point from its Antoine set (NIST WebBook,
     * after Williamham et al. 1945), computed in Python: 353.2529 K */
    assert_int_equal(stagecal_vle_tbubble(col.system.vle, 1.0, &t), STAGECAL_OK);
    assert_abs(t, 353.2529, 1e-4, "pure benzene bubble T (NIST WebBook set)");
    stagecal_column_free(&col);
}

static void column_table_and_other_models(void **state)
{
    (void)state;
    stagecal_column col;
    stagecal_error err;
    double y;
    int rc = parse("\"trays\": 12, \"pressure_pa\": 101325,",
                   "{\"kind\": \"table\", \"x\": [0, 0.2, 0.6, 1], \"y\": [0, 0.5, 0.8, 1],"
                   " \"t_k\": [373.1, 360.0, 353.0, 351.4], \"source\": \"made up\"}",
                   &col, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    assert_int_equal(stagecal_vle_ystar(col.system.vle, 0.2, &y), STAGECAL_OK);
    assert_rel(y, 0.5, 1e-15, "table passes through its data");
    stagecal_column_free(&col);
    static const char *const models[] = {
        "{\"kind\": \"ideal\"}",
        "{\"kind\": \"vanlaar\", \"a12\": 1.6798, \"a21\": 0.9227}",
        "{\"kind\": \"margules\", \"a12\": 1.2, \"a21\": 0.7}",
        ("{\"kind\": \"wilson\", \"a12_j_mol\": 1234.5, \"a21_j_mol\": 3456.7, \"v1_m3_mol\": "
         "5.868e-5, \"v2_m3_mol\": 1.807e-5}"),
        "{\"kind\": \"kvalue\", \"k\": 8.5}",
    };
    for (size_t i = 0; i < sizeof models / sizeof models[0]; i++) {
        rc = parse("\"pressure_pa\": 101325,", models[i], &col, &err);
        if (rc)
            print_error("%s\n", err.text);
        assert_int_equal(rc, STAGECAL_OK);
        stagecal_column_free(&col);
    }
}

static void expect(int rc, const stagecal_error *err, int code, const char *text)
{
    if (rc != code || strstr(err->text, text) == NULL)
        print_error("got %d '%s', want %d containing '%s'\n", rc, err->text, code, text);
    assert_int_equal(rc, code);
    assert_non_null(strstr(err->text, text));
}

static void column_bad_fields_are_named(void **state)
{
    (void)state;
    stagecal_column col;
    stagecal_error err;
    const char *nrtl = "{\"kind\": \"nrtl\", \"tau12_a\": -0.8009, \"tau12_b_k\": 246.18, "
                       "\"tau21_a\": 3.4578, \"tau21_b_k\": -586.0809, \"alpha12\": 0.3}";
    int rc = parse("", "{\"kind\": \"alpha\", \"alpha\": 0.9}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "");
    assert_string_equal(err.text, "col.json: member 'system.model.alpha': 0.9 is outside (1, inf)");
    assert_null(col.system.vle);

    rc = parse("\"height_ft\": 20,", "{\"kind\": \"alpha\", \"alpha\": 2}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'height_ft': unknown member");
    /* flooding: the F-factor is required in the object, the margin in (0, 1] */
    rc = parse("\"flooding\": {\"margin\": 0.7},", "{\"kind\": \"alpha\", \"alpha\": 2}", &col,
               &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'flooding.f_factor': missing");
    rc = parse("\"flooding\": {\"f_factor\": 2.5, \"margin\": 1.2},",
               "{\"kind\": \"alpha\", \"alpha\": 2}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'flooding.margin': 1.2 is outside (0, 1]");
    rc = parse("\"flooding\": {\"f_factor\": 2.5},", "{\"kind\": \"alpha\", \"alpha\": 2}", &col,
               &err);
    assert_int_equal(rc, STAGECAL_OK);
    assert_true(col.flood_f_pa05 == 2.5 && col.flood_margin == 0.8); /* the default margin */
    stagecal_column_free(&col);
    /* the temperature sensors' uncertainties (K) */
    rc = parse3("", "{\"kind\": \"alpha\", \"alpha\": 2}", "{\"t_pot\": 60}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'uncertainty.t_pot': 60 is outside [0, 50]");
    rc = parse("", nrtl, &col, &err); /* no pressure */
    expect(rc, &err, STAGECAL_EDATA, "member 'pressure_pa': missing");
    rc = parse("\"pressure_pa\": 101325,",
               "{\"kind\": \"nrtl\", \"tau12_a\": -0.8009, \"tau12_b_k\": 246.18, "
               "\"tau21_a\": 3.4578, \"tau21_b_k\": -586.0809, \"alpha12\": 3}",
               &col, &err);
    expect(rc, &err, STAGECAL_EDATA,
           "col.json: member 'system.model': nrtl non-randomness 3 is outside (0, 1]");
    rc = parse("\"pressure_pa\": 101325,", "{\"kind\": \"nrtl\", \"tau12_a\": 1}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'system.model.tau12_b_k': missing");
    rc = parse("", "{\"kind\": \"unifac\"}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'system.model.kind': 'unifac' is not one of");
    rc = parse("\"condenser\": \"half\",", "{\"kind\": \"alpha\", \"alpha\": 2}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "duplicate object key"); /* jansson rejects duplicates */
    rc = parse("\"packed_height_m\": 5, \"trays\": 10,", "{\"kind\": \"alpha\", \"alpha\": 2}",
               &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'trays': a column has trays or a packed height");
    rc = parse("\"packed_height_m\": -5,", "{\"kind\": \"alpha\", \"alpha\": 2}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'packed_height_m': -5 is outside (0, 1000] m");
    rc = parse3("", "{\"kind\": \"alpha\", \"alpha\": 2}", "{\"xd\": -0.1}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'uncertainty.xd': -0.1 is outside [0, 0.5]");
    rc = parse3("", "{\"kind\": \"alpha\", \"alpha\": 2}", "{\"xd_heavy_rel\": 1.5}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA,
           "member 'uncertainty.xd_heavy_rel': 1.5 is outside [0, 1] (fraction of the heavy "
           "content 1 - xD)");
    rc = parse3("", "{\"kind\": \"alpha\", \"alpha\": 2}",
                "{\"xd\": 5e-8, \"xd_heavy_rel\": 0.05, \"xb\": 0.001, \"xb_rel\": 0.02}", &col,
                &err);
    assert_int_equal(rc, STAGECAL_OK);
    assert_rel(col.u.xd_heavy_rel, 0.05, 0.0, "u_rel(xD_heavy)");
    assert_rel(col.u.xb_rel, 0.02, 0.0, "u_rel(xB)");
    stagecal_column_free(&col);
    rc = parse3("", "{\"kind\": \"alpha\", \"alpha\": 2}", "{\"w_kg\": 3}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'uncertainty.w_kg': unknown member");
    rc = parse("\"pressure_pa\": 101325,",
               "{\"kind\": \"table\", \"x\": [0, 0.5, 0.4, 1], \"y\": [0, 0.5, 0.8, 1]}", &col,
               &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'system.model': x-y table point 3");
    rc = parse("", "{\"kind\": \"table\", \"x\": [0, 0.5, 1], \"y\": [0, 1]}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'system.model.y': expected an array of as many");
    rc = parse("", "{\"kind\": \"table\", \"x\": [0, \"a\", 1], \"y\": [0, 0.5, 1]}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'system.model.x[1]': expected a number");
    rc = parse("\"id\": \"C 3\",", "{\"kind\": \"alpha\", \"alpha\": 2}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "duplicate object key");

    /* fields inside the components: build those texts by hand */
    const char *mm = "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"a\", "
                     "\"condenser\": \"partial\", \"system\": {\"light\": {\"name\": \"ethanol\", "
                     "\"molar_mass_kg_mol\": 46.07}, \"heavy\": {\"name\": \"water\"}, "
                     "\"model\": {\"kind\": \"alpha\", \"alpha\": 2}}}";
    rc = stagecal_column_parse(mm, strlen(mm), "mm.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA,
           "mm.json: member 'system.light.molar_mass_kg_mol': 46.07 is outside (0, 1] kg/mol");
    const char *na = "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"a\", "
                     "\"condenser\": \"total\", \"pressure_pa\": 1e5, \"system\": {\"light\": "
                     "{\"name\": \"ethanol\"}, \"heavy\": {\"name\": \"water\"}, "
                     "\"model\": {\"kind\": \"ideal\"}}}";
    rc = stagecal_column_parse(na, strlen(na), "na.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'system.light.antoine': missing");
    const char *same = "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"a\", "
                       "\"condenser\": \"total\", \"system\": {\"light\": {\"name\": \"w\"}, "
                       "\"heavy\": {\"name\": \"w\"}, \"model\": {\"kind\": \"alpha\", "
                       "\"alpha\": 2}}}";
    rc = stagecal_column_parse(same, strlen(same), "s.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'system.heavy.name': 'w' is also the light");
    const char *cond = "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"a\", "
                       "\"condenser\": \"half\", \"system\": {}}";
    rc = stagecal_column_parse(cond, strlen(cond), "c.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'condenser': 'half' is not");
    const char *id = "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"C 3\"}";
    rc = stagecal_column_parse(id, strlen(id), "i.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'id': 'C 3' may hold only");
    const char *lat = "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"a\", "
                      "\"condenser\": \"total\", \"system\": {\"light\": {\"name\": \"e\"}, "
                      "\"heavy\": {\"name\": \"w\"}, \"latent_heat_j_mol\": 40.6, "
                      "\"model\": {\"kind\": \"alpha\", \"alpha\": 2}}}";
    rc = stagecal_column_parse(lat, strlen(lat), "l.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'system.latent_heat_j_mol': 40.6 is outside");
}

static void column_format_version_and_syntax(void **state)
{
    (void)state;
    stagecal_column col;
    stagecal_error err;
    const char *syn = "{\n  \"format\": \"stagecal-column\",\n  \"version\": 1,\n  oops\n}\n";
    int rc = stagecal_column_parse(syn, strlen(syn), "syn.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "syn.json:4: ");
    assert_int_equal(err.line, 4); /* jansson's position of the bad token */
    const char *v2 = "{\"format\": \"stagecal-column\", \"version\": 2}";
    rc = stagecal_column_parse(v2, strlen(v2), "v2.json", &col, &err);
    expect(rc, &err, STAGECAL_EVERSION, "member 'version': 2 is newer");
    const char *fm = "{\"format\": \"some-other\", \"version\": 1}";
    rc = stagecal_column_parse(fm, strlen(fm), "f.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'format': expected \"stagecal-column\"");
    rc = stagecal_column_parse("[1, 2]", 6, "a.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "expected a JSON object");
    rc = stagecal_column_load(STAGECAL_BUILD_DIR "/no/such/column.json", &col, &err);
    expect(rc, &err, STAGECAL_ENOINPUT, "cannot open");
}

/* Uncertainties with a unit like a run-log header: converted to the plain keys' units with
 * the bound that holds at every composition (ethanol/water molar masses as in parse()):
 * dx/dw <= M_ethanol/M_water for a fraction, 1/M_water per kg. The expected values are
 * computed here by hand from those molar masses; tolerance 1e-12 relative (one product). */
static void column_uncertainty_units(void **state)
{
    (void)state;
    stagecal_column col;
    stagecal_error err;
    const double ml = 0.04606844, mh = 0.01801528; /* as in parse3() */
    int rc = parse3("", "{\"kind\": \"alpha\", \"alpha\": 2}",
                    "{\"xd[wt%]\": 0.2, \"xb[mol%]\": 0.5, \"w[kg]\": 10, "
                    "\"v[kmol/h]\": 0.036, \"r\": 0.05}",
                    &col, &err);
    assert_int_equal(rc, STAGECAL_OK);
    assert_true(fabs(col.u.xd / (0.002 * ml / mh) - 1) < 1e-12);
    assert_true(fabs(col.u.xb / 0.005 - 1) < 1e-12);
    assert_true(fabs(col.u.w_mol / (10 / mh) - 1) < 1e-12);
    assert_true(fabs(col.u.v_mol_s / 0.01 - 1) < 1e-12);
    assert_true(col.u.r == 0.05);
    stagecal_column_free(&col);
    rc = parse3("", "{\"kind\": \"alpha\", \"alpha\": 2}", "{\"xd[wt%]\": 0.2, \"xd\": 0.1}", &col,
                &err);
    expect(rc, &err, STAGECAL_EDATA,
           "member 'uncertainty.xd[wt%]': 'xd' is given as well (expected one of the two)");
    rc = parse3("", "{\"kind\": \"alpha\", \"alpha\": 2}", "{\"q[kg]\": 1}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "member 'uncertainty.q[kg]': unknown key");
    rc = parse3("", "{\"kind\": \"alpha\", \"alpha\": 2}", "{\"xd[wt%]\": 80}", &col, &err);
    expect(rc, &err, STAGECAL_EDATA, "is more than 0.5 mol/mol");
    /* a mass basis without molar masses */
    const char *nm = "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"u\", "
                     "\"condenser\": \"total\", \"system\": {\"light\": {\"name\": "
                     "\"a\"}, \"heavy\": {\"name\": \"b\"}, \"model\": {\"kind\": "
                     "\"alpha\", \"alpha\": 2}}, \"uncertainty\": {\"w[kg]\": 0.2}}";
    rc = stagecal_column_parse(nm, strlen(nm), "m.json", &col, &err);
    expect(rc, &err, STAGECAL_EDATA,
           "m.json: member 'uncertainty.w[kg]': a mass basis needs the molar masses");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(column_examples_load),
        cmocka_unit_test(column_table_and_other_models),
        cmocka_unit_test(column_bad_fields_are_named),
        cmocka_unit_test(column_format_version_and_syntax),
        cmocka_unit_test(column_uncertainty_units),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}

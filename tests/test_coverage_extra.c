/*
 * test_coverage_extra.c — error paths and small closed-form cases of the library that
 * the per-module tests do not reach (issue 8: line coverage of the library): plan files,
 * batch problems and laws, stage closed forms, trend points, lines, EWMA and events,
 * HETP from a model, x-y tables, column files, chart builders, reports.
 *
 * Sources of truth: the documented rules and message texts (docs/plan-file.md,
 * docs/column-file.md, docs/events-file.md and the contract comments of the public
 * headers; an error path is checked by its status code and its whole message, the
 * product's interface to people), and closed forms named beside each numerical check
 * (Fenske 1932, "Fractionation of straight-run Pennsylvania gasoline", Ind. Eng. Chem. 24,
 * citation from memory; constant-α equilibrium and operating line, the variance of
 * a linear combination gᵀCg).
 */
#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "testutil.h"

#include "stagecal/batch.h"
#include "stagecal/column.h"
#include "stagecal/error.h"
#include "stagecal/form.h"
#include "stagecal/hetp.h"
#include "stagecal/model.h"
#include "stagecal/plot.h"
#include "stagecal/regress.h"
#include "stagecal/report.h"
#include "stagecal/stages.h"
#include "stagecal/trend.h"
#include "stagecal/vle.h"

/* ---- batch_plan.c ---------------------------------------------------------------- */

/* Parses text as a plan named "x.json" and checks the status and the whole message. */
static void plan_fails(const char *text, int code, const char *message)
{
    stagecal_batch_problem pb;
    stagecal_error err;
    stagecal_batch_problem_init(&pb);
    stagecal_error_clear(&err);
    int rc = stagecal_batch_plan_parse(text, strlen(text), "x.json", &pb, &err);
    if (rc != code || strcmp(err.text, message) != 0)
        print_error("plan %s\n  -> %d '%s'\n  expected %d '%s'\n", text, rc, err.text, code,
                    message);
    assert_int_equal(rc, code);
    assert_string_equal(err.text, message);
}

#define PLAN_HEAD "{\"format\": \"stagecal-plan\", \"version\": 1, "
#define CR_POLICY "\"policy\": {\"kind\": \"constant-reflux\", \"reflux\": 2}"

/* Every refusal of the plan reader (docs/plan-file.md: unknown members are refused,
 * units named, policy kinds, cut targets), message by message. */
static void coverage_plan_refusals(void **state)
{
    (void)state;
    /* not JSON at all: jansson's own location (line 1, column 1) and text */
    {
        stagecal_batch_problem pb;
        stagecal_error err;
        stagecal_batch_problem_init(&pb);
        assert_int_equal(stagecal_batch_plan_parse("@", 1, "x.json", &pb, &err), STAGECAL_EDATA);
        assert_int_equal(err.line, 1);
        assert_non_null(strstr(err.text, "x.json:1: not a JSON plan: "));
    }
    plan_fails("[1, 2]", STAGECAL_EDATA, "x.json: the plan is not a JSON object");
    plan_fails("{\"format\": \"other\"}", STAGECAL_EDATA,
               "x.json: member 'format': expected \"stagecal-plan\"");
    plan_fails("{\"format\": \"stagecal-plan\", \"version\": 0}", STAGECAL_EDATA,
               "x.json: member 'version': expected an integer >= 1");
    plan_fails("{\"format\": \"stagecal-plan\", \"version\": 1.0}", STAGECAL_EDATA,
               "x.json: member 'version': expected an integer >= 1");
    plan_fails("{\"format\": \"stagecal-plan\", \"version\": 3}", STAGECAL_EVERSION,
               "x.json: written for a newer stagecal (plan version 3 > 1)");
    plan_fails(PLAN_HEAD "\"colour\": 1}", STAGECAL_EDATA,
               "x.json: member 'colour': unknown member, see docs/plan-file.md");
    plan_fails(PLAN_HEAD "\"charge\": 5}", STAGECAL_EDATA,
               "x.json: member 'charge': expected an object");
    plan_fails(PLAN_HEAD "\"charge\": {\"amount\": 5}}", STAGECAL_EDATA,
               "x.json: member 'charge.amount': unknown member, see docs/plan-file.md");
    plan_fails(PLAN_HEAD "\"charge\": {\"x_light\": 0.4}}", STAGECAL_EDATA,
               "x.json: member 'charge.amount_kmol': missing, expected a number");
    plan_fails(PLAN_HEAD "\"charge\": {\"amount_kmol\": 5}}", STAGECAL_EDATA,
               "x.json: member 'charge.x_light': missing, expected a number");
    plan_fails(PLAN_HEAD "\"charge\": {\"amount_kmol\": \"5\", \"x_light\": 0.4}}", STAGECAL_EDATA,
               "x.json: member 'charge.amount_kmol': expected a number");
    plan_fails(PLAN_HEAD "\"boilup_kmol_h\": true}", STAGECAL_EDATA,
               "x.json: member 'boilup_kmol_h': expected a number");
    plan_fails(PLAN_HEAD "\"latent_heat_kj_mol\": null}", STAGECAL_EDATA,
               "x.json: member 'latent_heat_kj_mol': expected a number");
    plan_fails(PLAN_HEAD "\"comment\": \"no policy\"}", STAGECAL_EDATA,
               "x.json: member 'policy': missing, expected an object");
    plan_fails(PLAN_HEAD "\"policy\": 3}", STAGECAL_EDATA,
               "x.json: member 'policy': expected an object");
    plan_fails(PLAN_HEAD "\"policy\": {\"reflux\": 3}}", STAGECAL_EDATA,
               "x.json: member 'policy.kind': missing or not a string, expected "
               "'constant-reflux', 'constant-distillate' or 'schedule'");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"adaptive\"}}", STAGECAL_EDATA,
               "x.json: member 'policy.kind': 'adaptive' is not known, expected "
               "'constant-reflux', 'constant-distillate' or 'schedule'");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"constant-reflux\"}}", STAGECAL_EDATA,
               "x.json: member 'policy.reflux': missing, expected a number");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"constant-distillate\", \"x_distillate\": 0.9, "
                         "\"reflux\": 3}}",
               STAGECAL_EDATA,
               "x.json: member 'policy.reflux': unknown member, see docs/plan-file.md");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"constant-distillate\", \"x_distillate\": 0.9}}",
               STAGECAL_EDATA, "x.json: member 'policy.reflux_max': missing, expected a number");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"schedule\", \"at\": 1}}", STAGECAL_EDATA,
               "x.json: member 'policy.at': unknown member, see docs/plan-file.md");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"schedule\", \"by\": \"volume\"}}",
               STAGECAL_EDATA, "x.json: member 'policy.by': expected 'time_h' or 'pot_x'");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"schedule\", \"by\": \"pot_x\"}}", STAGECAL_EDATA,
               "x.json: member 'policy.steps': expected an array of 1 to 64 objects");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"schedule\", \"by\": \"pot_x\", \"steps\": []}}",
               STAGECAL_EDATA,
               "x.json: member 'policy.steps': expected an array of 1 to 64 objects");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"schedule\", \"by\": \"pot_x\", \"steps\": [7]}}",
               STAGECAL_EDATA, "x.json: member 'policy.steps[0]': expected an object");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"schedule\", \"by\": \"pot_x\", \"steps\": "
                         "[{\"from\": 0.5, \"reflux\": 2}, {\"from\": 0.3}]}}",
               STAGECAL_EDATA,
               "x.json: member 'policy.steps[1].reflux': missing, expected a number");
    plan_fails(PLAN_HEAD "\"policy\": {\"kind\": \"schedule\", \"by\": \"pot_x\", \"steps\": "
                         "[{\"from\": 0.5, \"reflux\": 2, \"to\": 0.1}]}}",
               STAGECAL_EDATA,
               "x.json: member 'policy.steps[0].to': unknown member, see docs/plan-file.md");
    plan_fails(PLAN_HEAD CR_POLICY ", \"cuts\": {}}", STAGECAL_EDATA,
               "x.json: member 'cuts': expected an array of 1 to 16 objects");
    plan_fails(PLAN_HEAD CR_POLICY ", \"cuts\": [\"heads\"]}", STAGECAL_EDATA,
               "x.json: member 'cuts[0]': expected an object");
    plan_fails(PLAN_HEAD CR_POLICY ", \"cuts\": [{\"until\": \"pot-x\", \"value\": 0.1, "
                                   "\"size\": 2}]}",
               STAGECAL_EDATA,
               "x.json: member 'cuts[0].size': unknown member, see docs/plan-file.md");
    plan_fails(PLAN_HEAD CR_POLICY ", \"cuts\": [{\"name\": 4, \"until\": \"pot-x\", "
                                   "\"value\": 0.1}]}",
               STAGECAL_EDATA,
               "x.json: member 'cuts[0].name': expected a string of at most 31 bytes");
    plan_fails(PLAN_HEAD CR_POLICY ", \"cuts\": [{\"name\": \"abcdefghijklmnopqrstuvwxyz789012\", "
                                   "\"until\": \"pot-x\", \"value\": 0.1}]}",
               STAGECAL_EDATA,
               "x.json: member 'cuts[0].name': expected a string of at most 31 bytes");
    plan_fails(PLAN_HEAD CR_POLICY ", \"cuts\": [{\"until\": \"volume\", \"value\": 0.1}]}",
               STAGECAL_EDATA,
               "x.json: member 'cuts[0].until': expected one of 'pot-x', 'mean-x', "
               "'distillate-x', 'fraction', 'time', 'reflux'");
    plan_fails(PLAN_HEAD CR_POLICY ", \"cuts\": [{\"until\": \"mean-x\"}]}", STAGECAL_EDATA,
               "x.json: member 'cuts[0].value': missing, expected a number");
}

/* A plan with only a policy keeps the caller's charge and boil-up (batch.h: "charge and
 * boil-up when present (otherwise pb's values are kept)"); a pot-x schedule is not
 * converted (pot mole fractions have no unit); constant-distillate members land in the
 * policy. A failed parse leaves pb untouched. */
static void coverage_plan_keeps_caller_values(void **state)
{
    (void)state;
    static const char sched[] =
        PLAN_HEAD "\"policy\": {\"kind\": \"schedule\", \"by\": \"pot_x\", \"steps\": "
                  "[{\"from\": 0.6, \"reflux\": 1.5}, {\"from\": 0.25, \"reflux\": 3.25}]}}";
    static const char cd[] = PLAN_HEAD "\"policy\": {\"kind\": \"constant-distillate\", "
                                       "\"x_distillate\": 0.935, \"reflux_max\": 12.5}, "
                                       "\"cuts\": [{\"until\": \"reflux\", \"value\": 12}]}";
    stagecal_batch_problem pb;
    stagecal_error err;
    stagecal_batch_problem_init(&pb);
    pb.w0_mol = 2385;
    pb.xb0 = 0.615;
    pb.v_mol_s = 0.77;
    assert_int_equal(stagecal_batch_plan_parse(sched, strlen(sched), "s.json", &pb, &err),
                     STAGECAL_OK);
    assert_rel(pb.w0_mol, 2385, 0, "charge kept");
    assert_rel(pb.xb0, 0.615, 0, "x kept");
    assert_rel(pb.v_mol_s, 0.77, 0, "boil-up kept");
    assert_int_equal(pb.policy.kind, STAGECAL_BATCH_SCHEDULE);
    assert_int_equal(pb.policy.key, STAGECAL_BATCH_BY_POT_X);
    assert_int_equal(pb.policy.n_steps, 2);
    assert_rel(pb.policy.steps[1].at, 0.25, 0, "pot-x switch point, no unit");
    assert_rel(pb.policy.steps[1].reflux, 3.25, 0, "reflux");
    assert_int_equal(pb.n_cuts, 0);

    assert_int_equal(stagecal_batch_plan_parse(cd, strlen(cd), "c.json", &pb, &err), STAGECAL_OK);
    assert_int_equal(pb.policy.kind, STAGECAL_BATCH_CONSTANT_DISTILLATE);
    assert_rel(pb.policy.xd_set, 0.935, 0, "set point");
    assert_rel(pb.policy.reflux_max, 12.5, 0, "ceiling");
    assert_int_equal(pb.n_cuts, 1);
    assert_int_equal(pb.cuts[0].kind, STAGECAL_BATCH_UNTIL_REFLUX);
    assert_string_equal(pb.cuts[0].name, "");
    assert_rel(pb.cuts[0].value, 12, 0, "reflux target, no unit");

    /* a failure half-way (bad cut after a good policy) changes nothing */
    static const char bad[] =
        PLAN_HEAD "\"charge\": {\"amount_kmol\": 1, \"x_light\": 0.2}, " CR_POLICY
                  ", \"cuts\": [{\"until\": \"x\", \"value\": 1}]}";
    assert_int_equal(stagecal_batch_plan_parse(bad, strlen(bad), "b.json", &pb, &err),
                     STAGECAL_EDATA);
    assert_rel(pb.w0_mol, 2385, 0, "charge untouched");
    assert_int_equal(pb.policy.kind, STAGECAL_BATCH_CONSTANT_DISTILLATE);
}

/* stagecal_batch_plan_load reads a file (any size: the buffer grows past its first
 * 4096 bytes) and names the path in messages. */
static void coverage_plan_load_file(void **state)
{
    (void)state;
    char path[512];
    snprintf(path, sizeof path, "%s/coverage_extra_plan.json", STAGECAL_BUILD_DIR);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    /* a long comment pushes the file past 4096 bytes */
    fputs(PLAN_HEAD "\"comment\": \"", f);
    for (int i = 0; i < 600; i++)
        fputs("padding ", f);
    fputs("\", \"boilup_kmol_h\": 7.2, " CR_POLICY ", \"cuts\": [{\"name\": \"main\", "
          "\"until\": \"fraction\", \"value\": 0.4}]}",
          f);
    assert_int_equal(fclose(f), 0);
    stagecal_batch_problem pb;
    stagecal_error err;
    stagecal_batch_problem_init(&pb);
    assert_int_equal(stagecal_batch_plan_load(path, &pb, &err), STAGECAL_OK);
    assert_rel(pb.v_mol_s, 2.0, 1e-15, "7.2 kmol/h = 2 mol/s (one rounding)");
    assert_rel(pb.policy.reflux, 2, 0, "reflux");
    assert_string_equal(pb.cuts[0].name, "main");
    assert_int_equal(pb.cuts[0].kind, STAGECAL_BATCH_UNTIL_FRACTION);
    remove(path);

    /* a directory opens but cannot be read */
    assert_int_equal(stagecal_batch_plan_load(STAGECAL_BUILD_DIR, &pb, &err), STAGECAL_ENOINPUT);
    char want[600];
    snprintf(want, sizeof want, "%s: cannot read: Is a directory", STAGECAL_BUILD_DIR);
    assert_string_equal(err.text, want);
}

/* ---- batch.c: problem checks, column, inner solve ----------------------------------- */

static void base_problem(stagecal_batch_problem *pb)
{
    stagecal_batch_problem_init(pb);
    pb->w0_mol = 2385.0;
    pb->xb0 = 0.45;
    pb->v_mol_s = 0.75;
    pb->latent_j_mol = 38500;
    pb->policy.kind = STAGECAL_BATCH_CONSTANT_REFLUX;
    pb->policy.reflux = 2.5;
    pb->n_cuts = 1;
    pb->cuts[0].kind = STAGECAL_BATCH_UNTIL_POT_X;
    pb->cuts[0].value = 0.2;
}

static void check_fails(const stagecal_batch_problem *pb, const char *message)
{
    stagecal_error err;
    stagecal_error_clear(&err);
    int rc = stagecal_batch_check(pb, &err);
    if (rc != STAGECAL_EINVAL || strcmp(err.text, message) != 0)
        print_error("check -> %d '%s'\n  expected '%s'\n", rc, err.text, message);
    assert_int_equal(rc, STAGECAL_EINVAL);
    assert_string_equal(err.text, message);
}

/* Each domain rule of batch.h's problem fields, one at a time (messages name the field,
 * the value and the domain, DESIGN/STYLE message form). */
static void coverage_batch_check_each_field(void **state)
{
    (void)state;
    stagecal_batch_problem pb;
    base_problem(&pb);
    assert_int_equal(stagecal_batch_check(&pb, NULL), STAGECAL_OK);

    pb.w0_mol = -1;
    check_fails(&pb, "charge -1 mol: expected a finite amount > 0");
    base_problem(&pb);
    pb.v_mol_s = INFINITY;
    check_fails(&pb, "boil-up inf mol/s: expected a finite rate > 0");
    base_problem(&pb);
    pb.latent_j_mol = -38500;
    check_fails(&pb, "latent heat -38500 J/mol: expected >= 0 (0 = unknown)");
    base_problem(&pb);
    pb.policy.reflux = -0.5;
    check_fails(&pb, "reflux ratio -0.5: expected a finite R >= 0 (a batch at total reflux "
                     "collects nothing)");

    base_problem(&pb);
    pb.policy.kind = STAGECAL_BATCH_CONSTANT_DISTILLATE;
    pb.policy.xd_set = 0.9;
    pb.policy.reflux_max = 0;
    check_fails(&pb, "reflux ceiling 0: expected a finite R > 0");
    pb.policy.xd_set = 1.0;
    check_fails(&pb, "distillate set point 1: expected a mole fraction in (xB0 = 0.45, 1)");

    base_problem(&pb);
    pb.policy.kind = STAGECAL_BATCH_SCHEDULE;
    pb.policy.key = STAGECAL_BATCH_BY_TIME;
    pb.policy.n_steps = 0;
    check_fails(&pb, "reflux schedule has 0 entries: expected 1 to 64");
    pb.policy.n_steps = 3;
    pb.policy.steps[0] = (stagecal_batch_schedule_step){0, 1.5};
    pb.policy.steps[1] = (stagecal_batch_schedule_step){3600, NAN};
    pb.policy.steps[2] = (stagecal_batch_schedule_step){1800, 4};
    check_fails(&pb, "reflux schedule entry 2: R = nan, expected a finite R >= 0");
    pb.policy.steps[1].reflux = 3;
    check_fails(&pb, "reflux schedule entry 3: time 1800 s, expected times >= 0 in increasing "
                     "order");
    pb.policy.steps[2].at = 7200;
    assert_int_equal(stagecal_batch_check(&pb, NULL), STAGECAL_OK);
    pb.policy.key = STAGECAL_BATCH_BY_POT_X;
    pb.policy.steps[0].at = 0.5;
    pb.policy.steps[1].at = 0.3;
    pb.policy.steps[2].at = 0.35;
    check_fails(&pb, "reflux schedule entry 3: pot composition 0.35, expected mole fractions in "
                     "(0, 1] in decreasing order");
    pb.policy.steps[2].at = 0.2;
    assert_int_equal(stagecal_batch_check(&pb, NULL), STAGECAL_OK);
    pb.policy.steps[0].at = 0.4; /* below xB0 = 0.45: does not apply from the start */
    check_fails(&pb, "reflux schedule: the first entry must apply from the start (time 0, or a "
                     "pot composition >= xB0 = 0.45)");

    base_problem(&pb);
    pb.policy.kind = (stagecal_batch_policy_kind)7;
    check_fails(&pb, "unknown reflux policy 7");

    base_problem(&pb);
    pb.cuts[0].kind = (stagecal_batch_target_kind)9;
    check_fails(&pb, "cut 1: unknown target 9");
    pb.n_cuts = 2;
    pb.cuts[0].kind = STAGECAL_BATCH_UNTIL_FRACTION;
    pb.cuts[0].value = 0.3;
    pb.cuts[1].kind = STAGECAL_BATCH_UNTIL_TIME;
    pb.cuts[1].value = -60;
    check_fails(&pb, "cut 2: target time = -60 is outside its domain (mole fractions and "
                     "fractions in (0, 1), times and R > 0)");
    pb.cuts[1].kind = STAGECAL_BATCH_UNTIL_FRACTION;
    pb.cuts[1].value = 1;
    check_fails(&pb, "cut 2: target fraction = 1 is outside its domain (mole fractions and "
                     "fractions in (0, 1), times and R > 0)");
}

/* Names of stops and targets, both ways (batch.h lists them). */
static void coverage_batch_names(void **state)
{
    (void)state;
    static const char *const stops[] = {"target", "reflux-ceiling", "pot-empty", "time-limit",
                                        "not-started"};
    static const char *const targets[] = {"pot-x",    "mean-x", "distillate-x",
                                          "fraction", "time",   "reflux"};
    for (int i = 0; i < 5; i++)
        assert_string_equal(stagecal_batch_stop_name(i), stops[i]);
    for (int i = 0; i < 6; i++) {
        assert_string_equal(stagecal_batch_target_name(i), targets[i]);
        assert_int_equal(stagecal_batch_target_from_name(targets[i]), i);
    }
    assert_int_equal(stagecal_batch_target_from_name("volume"), -1);
    /* freeing NULL is a no-op (batch.h) */
    stagecal_batch_result_free(NULL);
    stagecal_batch_free(NULL);
}

static int nan_law(void *data, double r, double *stages, unsigned *outside, stagecal_error *err)
{
    (void)data, (void)r, (void)err;
    *stages = NAN;
    *outside = 0;
    return STAGECAL_OK;
}

/* The inner solve at one stage: xD = y*(xB) = αx/(1 + (α − 1)x) (constant relative
 * volatility, Smoker 1938, "Analytic determination of plates in fractionating columns", Trans.
 * AIChE 34, citation from memory); a law below one stage is clamped to the pot alone (batch.h), so
 * 0.4 gives the same; a non-finite law and bad arguments are refused. */
static void coverage_batch_distillate_one_stage(void **state)
{
    (void)state;
    const double alpha = 2.5, xb = 0.3;
    stagecal_error err;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(alpha, &err);
    assert_non_null(vle);
    double one = 1, little = 0.4, xd, n;
    stagecal_batch_column col = {vle, stagecal_batch_constant_stages, &one, NULL, NULL};
    const double want = alpha * xb / (1 + (alpha - 1) * xb);
    assert_int_equal(stagecal_batch_distillate(&col, NULL, xb, 3.0, &xd, &n, &err), STAGECAL_OK);
    /* 1e-12: Brent stops at x_epsabs = 1e-14 on xD; y* is evaluated in closed form */
    assert_abs(xd, want, 1e-12, "xD = y*(xB) at one stage");
    assert_rel(n, 1, 0, "stages");
    col.stages_data = &little;
    assert_int_equal(stagecal_batch_distillate(&col, NULL, xb, 3.0, &xd, &n, &err), STAGECAL_OK);
    assert_abs(xd, want, 1e-12, "clamped to one stage");
    assert_rel(n, 1, 0, "clamped stages");

    assert_int_equal(stagecal_batch_distillate(&col, NULL, 1.0, 3.0, &xd, &n, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text, "xB = 1, R = 3: expected xB in (0, 1) and R >= 0");
    assert_int_equal(stagecal_batch_distillate(&col, NULL, 0.3, -1, &xd, &n, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text, "xB = 0.3, R = -1: expected xB in (0, 1) and R >= 0");
    col.stages = nan_law;
    assert_int_equal(stagecal_batch_distillate(&col, NULL, xb, 2.0, &xd, &n, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text, "stage law gave nan stages at R = 2");

    /* a workspace needs both an equilibrium model and a stage law */
    stagecal_batch_problem pb;
    base_problem(&pb);
    stagecal_batch_column none = {vle, NULL, NULL, NULL, NULL};
    assert_null(stagecal_batch_alloc(&pb, &none, NULL, &err));
    assert_int_equal(err.code, STAGECAL_EINVAL);
    assert_string_equal(err.text,
                        "batch column: an equilibrium model and a stage law are required");
    assert_null(stagecal_batch_alloc(&pb, NULL, NULL, &err));
    assert_int_equal(err.code, STAGECAL_EINVAL);
    pb.w0_mol = 0;
    assert_null(stagecal_batch_alloc(&pb, &col, NULL, &err));
    assert_string_equal(err.text, "charge 0 mol: expected a finite amount > 0");
    stagecal_vle_free(vle);
}

/* Envelope warnings (batch.h): one line per way out of the envelope, with the ranges;
 * at most STAGECAL_BATCH_MAXWARN are kept. */
static void coverage_batch_envelope_warnings(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_model_init(&m);
    m.r_min = 1.5;
    m.r_max = 5;
    m.has_load = 1;
    m.f_min = 0.8;
    m.f_max = 1.9;
    stagecal_batch_result res;
    stagecal_batch_result_init(&res);
    res.outside = STAGECAL_MODEL_R_BELOW | STAGECAL_MODEL_R_ABOVE | STAGECAL_MODEL_F_ABOVE;
    res.r_min_used = 1.25;
    res.r_max_used = 6.5;
    stagecal_batch_envelope_warnings(&m, 2.385, &res);
    assert_int_equal(res.n_warnings, 3);
    assert_string_equal(res.warnings[0], "extrapolation: the batch runs at R down to 1.25, below "
                                         "the lowest reflux ratio calibrated (1.5)");
    assert_string_equal(res.warnings[1], "extrapolation: the batch runs at R up to 6.5, above the "
                                         "highest reflux ratio calibrated (5)");
    assert_string_equal(res.warnings[2], "extrapolation: the F-factor 2.385 Pa^0.5 lies outside "
                                         "the calibrated range [0.8, 1.9]");
    stagecal_batch_envelope_warnings(&m, 2.385, &res);
    stagecal_batch_envelope_warnings(&m, 2.385, &res);
    assert_int_equal(res.n_warnings, STAGECAL_BATCH_MAXWARN);
    stagecal_model_free(&m);
}

/* ---- batch_band.c: argument checks ----------------------------------------------- */

static void coverage_batch_band_arguments(void **state)
{
    (void)state;
    stagecal_error err;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, &err);
    assert_non_null(vle);
    stagecal_model m;
    stagecal_model_init(&m);
    stagecal_batch_problem pb;
    base_problem(&pb);
    stagecal_batch_result nominal;
    stagecal_batch_result_init(&nominal);
    stagecal_batch_band band;
    assert_int_equal(
        stagecal_batch_band_sample(&pb, vle, &m, NAN, NULL, &nominal, 1, 7, 0.95, &band, &err),
        STAGECAL_EINVAL);
    assert_string_equal(err.text, "1 samples: expected at least 2");
    assert_int_equal(
        stagecal_batch_band_sample(&pb, vle, &m, NAN, NULL, &nominal, 50, 7, 1.0, &band, &err),
        STAGECAL_EINVAL);
    assert_string_equal(err.text, "level 1: expected a coverage in (0, 1)");
    assert_int_equal(
        stagecal_batch_band_sample(&pb, vle, &m, NAN, NULL, &nominal, 50, 7, 0.95, &band, &err),
        STAGECAL_EINVAL);
    assert_string_equal(err.text, "nominal result has 0 cuts, the problem 1: run it first");
    stagecal_model_free(&m);
    stagecal_vle_free(vle);
}

/* ---- stages.c: closed forms and their refusals ----------------------------------- */

/* Fenske (Fenske 1932): N = ln[(xD/(1 − xD))·((1 − xB)/xB)] / ln α; Smoker at total
 * reflux is Fenske; every refusal names the function and the domain. */
static void coverage_stages_closed_form_refusals(void **state)
{
    (void)state;
    stagecal_error err;
    double n;
    assert_int_equal(stagecal_smoker(2.5, INFINITY, 0.96, 0.08, &n, &err), STAGECAL_OK);
    /* 1e-14: one log ratio in double precision */
    assert_rel(n, log((0.96 / 0.04) * (0.92 / 0.08)) / log(2.5), 1e-14, "Smoker at R = inf");
    assert_int_equal(stagecal_fenske(2.5, 0.96, 0.08, NULL, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "fenske: stages is NULL");
    assert_int_equal(stagecal_fenske(1.0, 0.96, 0.08, &n, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "fenske: relative volatility 1 outside (1, inf)");
    assert_int_equal(stagecal_fenske(2.5, 0.5, 0.6, &n, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text,
                        "fenske: compositions xD = 0.5, xB = 0.6, expected 0 < xB < xD < 1");
    assert_int_equal(stagecal_smoker(2.5, 3, 0.96, 0.08, NULL, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "smoker: stages is NULL");
    assert_int_equal(stagecal_smoker(0.8, 3, 0.96, 0.08, &n, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "smoker: relative volatility 0.8 outside (1, inf)");
    assert_int_equal(stagecal_smoker(2.5, 0, 0.96, 0.08, &n, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "smoker: reflux ratio 0, expected R > 0");
    assert_int_equal(stagecal_smoker(2.5, 3, 1.0, 0.08, &n, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text,
                        "smoker: compositions xD = 1, xB = 0.08, expected 0 < xB < xD < 1");

    /* Below the pinch: α = 2.5, R = 1, xD = 0.9; the operating line y = x/2 + 0.45 meets
     * y = αx/(1 + 1.5x) where 0.75x² − 1.325x + 0.45 = 0 (quadratic formula), at
     * k = (1.325 − √(1.325² − 1.35))/1.5. */
    const double k = (1.325 - sqrt(1.325 * 1.325 - 1.35)) / 1.5;
    assert_int_equal(stagecal_smoker(2.5, 1, 0.9, 0.3, &n, &err), STAGECAL_EINVAL);
    const char *head = "smoker: xB = 0.3 is at or below the pinch ";
    assert_memory_equal(err.text, head, strlen(head));
    double got = strtod(err.text + strlen(head), NULL);
    /* 1e-9: the message prints the pinch with %.10g */
    assert_rel(got, k, 1e-9, "pinch composition in the message");
    assert_non_null(strstr(err.text, ", no finite count"));
}

/* Stepping and minimum reflux refuse NULL pointers and compositions outside their domain;
 * the minimum reflux with constant α pinches at the pot (the chord from (xD, xD) to
 * (xB, y*(xB)) stays under the concave curve): L/V = (xD − y*)/(xD − xB), R = L/D =
 * (L/V)/(1 − L/V) (Smoker 1938 operating line). */
static void coverage_stages_step_and_rmin_refusals(void **state)
{
    (void)state;
    stagecal_error err;
    stagecal_vle *v = stagecal_vle_alloc_alpha(2.5, &err);
    assert_non_null(v);
    double xb, rmin;
    size_t len;
    int status;
    assert_int_equal(
        stagecal_stages_step(NULL, 0.95, 4, 3, 1, NULL, &xb, NULL, 0, &len, &status, &err),
        STAGECAL_EINVAL);
    assert_string_equal(err.text, "stages_step: a required pointer is NULL");
    assert_int_equal(stagecal_stages_step(v, 0.95, 4, 3, 1, NULL, &xb, NULL, 0, &len, NULL, &err),
                     STAGECAL_EINVAL);
    stagecal_stages_params par = stagecal_stages_default_params();
    par.max_stages = 5;
    assert_int_equal(
        stagecal_stages_step(v, 0.95, 4, 12.5, 1, &par, &xb, NULL, 0, &len, &status, &err),
        STAGECAL_EINVAL);
    assert_string_equal(err.text, "stages 12.5: more than max_stages = 5");

    assert_int_equal(stagecal_min_reflux(NULL, 0.95, 0.3, &rmin, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "min_reflux: a required pointer is NULL");
    assert_int_equal(stagecal_min_reflux(v, 0.95, 0.3, NULL, &err), STAGECAL_EINVAL);
    assert_int_equal(stagecal_min_reflux(v, 0.3, 0.95, &rmin, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "min_reflux: xD = 0.3, xB = 0.95, expected 0 < xB < xD <= 1");

    const double xd = 0.95, xw = 0.3, ys = 2.5 * xw / (1 + 1.5 * xw);
    const double lv = (xd - ys) / (xd - xw);
    assert_int_equal(stagecal_min_reflux(v, xd, xw, &rmin, &err), STAGECAL_OK);
    /* 1e-9: the pinch is located by a grid scan and Brent to 1e-13 in x */
    assert_rel(rmin, lv / (1 - lv), 1e-9, "minimum reflux, pinch at the pot");
    stagecal_vle_free(v);
}

/* ---- trend.c: a trend point from a model file ------------------------------------ */

/* A model on the straight line N = a + b/R ('linear:1+1/R') with a given covariance. */
static void line_model(stagecal_model *m)
{
    stagecal_model_init(m);
    snprintf(m->column_id, sizeof m->column_id, "K-9.demo");
    assert_int_equal(stagecal_form_parse("linear:1+1/R", &m->form, NULL), STAGECAL_OK);
    m->theta[0] = 9;
    m->theta[1] = -6;
    m->cov[0] = 0.04;
    m->cov[1] = m->cov[2] = -0.01;
    m->cov[3] = 0.09;
    m->sigma = 0.3;
    m->dof = 12;
    m->level = 0.95;
    m->r_min = 1;
    m->r_max = 8;
    m->condenser = STAGECAL_CONDENSER_TOTAL;
    m->has_hetp = 1;
    m->height_m = 3.05;
    snprintf(m->fitted_utc, sizeof m->fitted_utc, "2026-03-04T10:00:00Z");
    snprintf(m->data_last_utc, sizeof m->data_last_utc, "2026-03-01T00:00:00Z");
}

/* At R = 2 the gradient of a + b/R is g = (1, 1/2): N = 9 − 3 = 6, Var = gᵀCg = 0.04 −
 * 0.01 + 0.0225 = 0.0525 (variance of a linear combination of the parameters, exact for a
 * linear form); the
 * HETP of a total-condenser column is h/(N − 1) with the delta-method error h·se/(N − 1)²
 * (hetp.h); the point is dated by the last logged sample, 2026-03-01T00:00:00Z =
 * 1772323200 s (Python calendar.timegm). */
static void coverage_trend_point_from_model(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_trend_point pt;
    stagecal_error err;
    line_model(&m);
    assert_int_equal(stagecal_trend_point_from_model(&m, 2, NAN, 0, &pt, &err), STAGECAL_OK);
    assert_rel(pt.t_s, 1772323200.0, 0, "date of the last sample");
    /* 1e-13: a handful of double operations */
    assert_rel(pt.value, 6, 1e-13, "stages");
    assert_rel(pt.se, sqrt(0.0525), 1e-13, "se of the fitted mean");
    assert_int_equal(stagecal_trend_point_from_model(&m, 2, NAN, 1, &pt, &err), STAGECAL_OK);
    assert_rel(pt.value, 3.05 / 5, 1e-13, "HETP");
    assert_rel(pt.se, 3.05 * sqrt(0.0525) / 25, 1e-13, "se of the HETP");

    /* without the data period, the time of fit dates the point */
    m.data_last_utc[0] = '\0';
    assert_int_equal(stagecal_trend_point_from_model(&m, 2, NAN, 0, &pt, &err), STAGECAL_OK);
    assert_rel(pt.t_s, 1772323200.0 + 3 * 86400 + 10 * 3600, 0, "time of fit");

    snprintf(m.fitted_utc, sizeof m.fitted_utc, "last tuesday");
    assert_int_equal(stagecal_trend_point_from_model(&m, 2, NAN, 0, &pt, &err), STAGECAL_EDATA);
    assert_string_equal(err.text, "column K-9.demo: date 'last tuesday' is not a timestamp "
                                  "(expected YYYY-MM-DDTHH:MM:SSZ)");
    snprintf(m.fitted_utc, sizeof m.fitted_utc, "2026-03-04T10:00:00Z");
    m.has_hetp = 0;
    assert_int_equal(stagecal_trend_point_from_model(&m, 2, NAN, 1, &pt, &err), STAGECAL_EDATA);
    assert_string_equal(err.text, "column K-9.demo: fit of 2026-03-04T10:00:00Z has no packed "
                                  "height (expected one for HETP)");
    m.has_hetp = 1;
    /* at R = 1.25: N = 9 − 4.8 = 4.2 — fine; at R = 0.75: N = 1, no column stage */
    assert_int_equal(stagecal_trend_point_from_model(&m, 0.75, NAN, 1, &pt, &err), STAGECAL_EDATA);
    assert_memory_equal(err.text, "column K-9.demo: fit of 2026-03-04T10:00:00Z predicts ", 54);
    assert_non_null(strstr(err.text, "column stages at R = 0.75 (expected > 0 for an HETP)"));
    memset(m.cov, 0, sizeof m.cov);
    assert_int_equal(stagecal_trend_point_from_model(&m, 2, NAN, 0, &pt, &err), STAGECAL_EDATA);
    assert_string_equal(err.text, "column K-9.demo: fit of 2026-03-04T10:00:00Z has no positive "
                                  "standard error at R = 2 (got 0)");
    stagecal_model_free(&m);
}

/* Line fits refuse too few points, non-finite points, non-positive errors and levels
 * outside (0, 1) (trend.h domains). */
static void coverage_trend_fit_refusals(void **state)
{
    (void)state;
    stagecal_trend_point pts[3] = {{0, 6.1, 0.2}, {1e6, 6.0, 0.2}, {2e6, 5.8, 0.2}};
    stagecal_trend_fit fit;
    stagecal_error err;
    assert_int_equal(stagecal_trend_fit_line(pts, 2, 0.95, &fit, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text,
                        "2 point(s) cannot carry a trend with an interval (expected >= 3)");
    assert_int_equal(stagecal_trend_fit_line(pts, 3, 1.5, &fit, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "confidence level 1.5 is outside (0, 1) (expected e.g. 0.95)");
    pts[1].value = NAN;
    assert_int_equal(stagecal_trend_fit_line(pts, 3, 0.95, &fit, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "point 2: time or value is not finite (expected numbers)");
    pts[1].value = 6.0;
    pts[2].se = 0;
    assert_int_equal(stagecal_trend_fit_line(pts, 3, 0.95, &fit, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "point 3: standard error 0 is not positive (expected se > 0)");
}

/* ---- vle.c: constructors' refusals and the K-value slope ------------------------- */

/* y = K·x has the slope K everywhere below x_max (closed form); x-y tables refuse
 * non-positive temperatures and a curve that does not rise from x = 0; Antoine ranges
 * must be ordered (vle.h domains). */
static void coverage_vle_refusals_and_kvalue(void **state)
{
    (void)state;
    stagecal_error err;
    stagecal_vle *k = stagecal_vle_alloc_kvalue(1.8, &err);
    assert_non_null(k);
    double d = 0;
    assert_int_equal(stagecal_vle_dydx(k, 0.2, &d), STAGECAL_OK);
    assert_rel(d, 1.8, 0, "dy/dx of y = Kx");
    stagecal_vle_free(k);

    const double x[3] = {0.1, 0.5, 0.9}, y[3] = {0.3, 0.7, 0.95}, t[3] = {350, -1, 340};
    assert_null(stagecal_vle_alloc_table(x, y, t, 3, &err));
    assert_int_equal(err.code, STAGECAL_EINVAL);
    assert_string_equal(err.text, "x-y table point 2: temperature -1 K is not > 0");
    const double xf[3] = {0, 0.4, 0.8}, yf[3] = {0, 0, 0};
    assert_null(stagecal_vle_alloc_table(xf, yf, NULL, 3, &err));
    assert_int_equal(err.code, STAGECAL_EINVAL);
    assert_string_equal(err.text, "x-y table: y does not increase from x = 0");

    /* NIST WebBook-form constants (benzene/toluene after Williamham et al. 1945); range reversed */
    stagecal_antoine ant[2] = {{4.01814, 1203.835, -53.226, 287.70, 354.07},
                               {4.07827, 1343.943, -53.773, 384.66, 308.52}};
    assert_null(stagecal_vle_alloc_activity(STAGECAL_VLE_IDEAL, ant, NULL, 0, 101325, NULL, &err));
    assert_int_equal(err.code, STAGECAL_EINVAL);
    assert_string_equal(err.text,
                        "antoine range of the heavy component [384.66, 308.52] K: expected 0 <= "
                        "t_min_k <= t_max_k with t_min_k + c > 0 (or 0, 0 for none)");
}

/* ---- plot_build.c, plot_mccabe.c: the chart builders' refusals ------------------- */

/* Each builder names its chart and what is missing or out of domain (plot.h: "EINVAL
 * (inputs outside their domain, named in the message)"). */
static void coverage_plot_builders_refuse(void **state)
{
    (void)state;
    stagecal_error err;
    stagecal_plot_chart *c = NULL;
    stagecal_vle *v = stagecal_vle_alloc_alpha(2.5, &err);
    assert_non_null(v);

    stagecal_stage_point prof[2] = {{1, 0.8, 0.9}, {2, 0.5, 0.75}};
    stagecal_plot_mccabe_data md = {v, 0.9, 3, 1, prof, 2, NAN, NULL, 0};
    md.murphree = 1.5;
    assert_int_equal(stagecal_plot_mccabe(&md, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "mccabe diagram: xD 0.9, R 3 or E_MV 1.5 outside its domain "
                                  "(expected xD in (0, 1), R >= 0 or inf, E_MV in (0, 1])");
    md.murphree = 1;
    prof[1].x = 1.25;
    assert_int_equal(stagecal_plot_mccabe(&md, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text,
                        "mccabe diagram: profile point 2 (x 1.25, y 0.75) outside [0, 1]");
    md.n_profile = 0;
    assert_int_equal(stagecal_plot_mccabe(&md, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "mccabe diagram: missing equilibrium model or stage profile");
    assert_int_equal(stagecal_plot_mccabe_condition(NULL, 0.9, 0.2, 3, 4, 1, &c, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text, "mccabe diagram: missing model or output");
    assert_int_equal(stagecal_plot_mccabe_condition(v, 0.9, 0.2, 3, 0.5, 1, &c, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text,
                        "mccabe diagram: 0.5 stages (expected stages incl. the pot, >= 1)");

    const double xs[2] = {1.5, 3}, ns[2] = {6.2, 7.9}, nan2[2] = {NAN, NAN};
    const size_t grp[2] = {0, 2};
    stagecal_plot_fit_data fd;
    memset(&fd, 0, sizeof fd);
    fd.env_lo = fd.env_hi = NAN;
    assert_int_equal(stagecal_plot_fit(&fd, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "stages chart: missing samples or fit arrays (expected samples "
                                  "and/or a fitted curve of at least 2 points)");
    fd.x = xs;
    fd.stages = ns;
    fd.n = 2;
    fd.n_groups = 40;
    assert_int_equal(stagecal_plot_fit(&fd, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "stages chart: 40 groups (expected at most 32)");
    fd.n_groups = 2;
    fd.group = grp;
    assert_int_equal(stagecal_plot_fit(&fd, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "stages chart: sample 2 in group 2 (expected < 2)");
    fd.group = NULL;
    fd.stages = nan2;
    fd.x = nan2;
    assert_int_equal(stagecal_plot_fit(&fd, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "stages chart: no finite point to draw");

    stagecal_plot_resid_data rd;
    memset(&rd, 0, sizeof rd);
    assert_int_equal(stagecal_plot_resid(&rd, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "residual chart: no residuals to draw");
    rd.fitted = nan2;
    rd.resid = ns;
    rd.n = 2;
    assert_int_equal(stagecal_plot_resid(&rd, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "residual chart: no finite abscissa");

    stagecal_plot_trend_data td;
    memset(&td, 0, sizeof td);
    assert_int_equal(stagecal_plot_trend(&td, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "trend chart: no calibrations to draw");
    td.time_s = nan2;
    td.stages = ns;
    td.n = 2;
    assert_int_equal(stagecal_plot_trend(&td, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "trend chart: no finite calibration time");

    stagecal_plot_batch_curve curves[2] = {{"xD", ns, NULL, NULL}, {"xB", NULL, NULL, NULL}};
    stagecal_plot_batch_data bd = {xs, 2, curves, 0, NULL, NAN, NULL};
    assert_int_equal(stagecal_plot_batch(&bd, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "batch chart: expected at least 2 times and 1..8 curves");
    bd.n_curves = 2;
    assert_int_equal(stagecal_plot_batch(&bd, &c, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "batch chart: curve 2 has no values");
    assert_null(c);
    stagecal_vle_free(v);
}

/* ---- column.c: column file refusals --------------------------------------------- */

/* A valid column file (docs/column-file.md; NIST WebBook Antoine
 * constants), edited below one field at a time. */
static const char column_base[] =
    "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"K-7\",\"packed_height_m\":4.5,"
    "\"condenser\":\"total\",\"pressure_pa\":101325,\"system\":{"
    "\"light\":{\"name\":\"benzene\",\"molar_mass_kg_mol\":0.078112,\"antoine\":{\"a\":4.01814,"
    "\"b\":1203.835,\"c\":-53.226,\"t_min_k\":287.70,\"t_max_k\":354.07}},"
    "\"heavy\":{\"name\":\"toluene\",\"antoine\":{\"a\":4.07827,\"b\":1343.943,\"c\":-53.773,"
    "\"t_min_k\":308.52,\"t_max_k\":384.66}},"
    "\"model\":{\"kind\":\"ideal\"}}}";

/* Parses column_base with the first `from` replaced by `to`; checks code and message. */
static void column_fails(const char *from, const char *to, int code, const char *message)
{
    char text[2048];
    const char *at = strstr(column_base, from);
    assert_non_null(at);
    size_t head = (size_t)(at - column_base);
    snprintf(text, sizeof text, "%.*s%s%s", (int)head, column_base, to, at + strlen(from));
    stagecal_column col;
    stagecal_error err;
    memset(&col, 0, sizeof col);
    stagecal_error_clear(&err);
    int rc = stagecal_column_parse(text, strlen(text), "c.json", &col, &err);
    if (rc != code || strcmp(err.text, message) != 0)
        print_error("column %s\n  -> %d '%s'\n  expected %d '%s'\n", text, rc, err.text, code,
                    message);
    assert_int_equal(rc, code);
    assert_string_equal(err.text, message);
    stagecal_column_free(&col);
}

static void coverage_column_refusals(void **state)
{
    (void)state;
    stagecal_column col;
    stagecal_error err;
    memset(&col, 0, sizeof col);
    assert_int_equal(stagecal_column_parse(column_base, strlen(column_base), "c.json", &col, &err),
                     STAGECAL_OK);
    stagecal_column_free(&col);

    column_fails("{\"kind\":\"ideal\"}", "\"ideal\"", STAGECAL_EDATA,
                 "c.json: member 'system.model': expected an object");
    column_fails("\"ideal\"", "\"uniquac\"", STAGECAL_EDATA,
                 "c.json: member 'system.model.kind': 'uniquac' is not one of alpha, kvalue, "
                 "table, ideal, wilson, nrtl, vanlaar, margules");
    column_fails("\"b\":1203.835,", "", STAGECAL_EDATA,
                 "c.json: member 'system.light.antoine.b': missing, expected a number "
                 "(log10(P/bar) = a - b/(T/K + c))");
    column_fails("\"a\":4.01814", "\"a\":\"4.01814\"", STAGECAL_EDATA,
                 "c.json: member 'system.light.antoine.a': expected a number (log10(P/bar) = a - "
                 "b/(T/K + c))");
    column_fails("\"toluene\"", "7", STAGECAL_EDATA,
                 "c.json: member 'system.heavy.name': expected a string");
    column_fails("\"toluene\"", "\"\"", STAGECAL_EDATA,
                 "c.json: member 'system.heavy.name': '' must have 1 to 63 characters");
    column_fails("\"toluene\"", "\"benzene\"", STAGECAL_EDATA,
                 "c.json: member 'system.heavy.name': 'benzene' is also the light component");
    column_fails(
        "\"t_min_k\":308.52,\"t_max_k\":384.66", "\"t_min_k\":308.52", STAGECAL_EDATA,
        "c.json: member 'system.heavy.antoine': give both t_min_k and t_max_k, or neither");
    column_fails("\"id\":\"K-7\",", "\"id\":\"K-7\",\"trays\":20,", STAGECAL_EDATA,
                 "c.json: member 'trays': a column has trays or a packed height, not both");
    column_fails("\"total\"", "\"none\"", STAGECAL_EDATA,
                 "c.json: member 'condenser': 'none' is not \"total\" or \"partial\"");
    column_fails("\"model\":", "\"latent_heat_j_mol\":32,\"model\":", STAGECAL_EDATA,
                 "c.json: member 'system.latent_heat_j_mol': 32 is outside (1000, 1e+06] J/mol "
                 "(not kJ/mol)");
    column_fails("{\"kind\":\"ideal\"}",
                 "{\"kind\":\"table\",\"x\":[0.1,\"a\",0.9],\"y\":[0.2,0.5,0.95]}", STAGECAL_EDATA,
                 "c.json: member 'system.model.x[1]': expected a number");
    column_fails(
        "{\"kind\":\"ideal\"}", "{\"kind\":\"table\",\"x\":[0.1,0.5,0.9],\"y\":[0.2,0.5,0.7,0.95]}",
        STAGECAL_EDATA, "c.json: member 'system.model.y': expected an array of as many numbers");
}

/* ---- report.c: refusals of the renderer ----------------------------------------- */

/* report.h: tables have 1..64 headed columns, figures a chart, files a name, and a
 * report from a model file needs a model that passes stagecal_model_check. */
static void coverage_report_refusals(void **state)
{
    (void)state;
    stagecal_error err;
    char *html = NULL;
    size_t len = 0;
    stagecal_report r;
    memset(&r, 0, sizeof r);
    assert_int_equal(stagecal_report_html(NULL, NULL, &html, &len, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "report: missing content or output pointer");
    stagecal_report_table t = {"inputs", NULL, 0, NULL, 0};
    r.inputs = &t;
    assert_int_equal(stagecal_report_html(&r, NULL, &html, &len, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "report inputs table: 0 columns, 0 rows (expected 1..64 "
                                  "columns with headings and cells)");
    const char *head[2] = {"file", NULL};
    t.head = head;
    t.n_cols = 2;
    assert_int_equal(stagecal_report_html(&r, NULL, &html, &len, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "report inputs table: heading 2 is NULL");
    r.inputs = NULL;
    stagecal_report_figure fig = {NULL, "no chart"};
    r.figures = &fig;
    r.n_figures = 1;
    assert_int_equal(stagecal_report_html(&r, NULL, &html, &len, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "report figure 1: no chart");
    assert_null(html);
    assert_int_equal(stagecal_report_write(&r, NULL, "", &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "report file name is empty");

    stagecal_report_doc *doc = NULL;
    assert_int_equal(stagecal_report_from_model(NULL, NULL, &doc, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "report: missing model or output pointer");
    stagecal_model m;
    stagecal_model_init(&m); /* no column id: fails the model file's first rule */
    assert_int_equal(stagecal_report_from_model(&m, NULL, &doc, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "column id '': expected letters, digits, '_', '.', '-' (not "
                                  "starting with '.')");
    assert_null(doc);
    stagecal_model_free(&m);
    stagecal_report_doc_free(NULL);
}

/* ---- hetp.c: column stages from a model, names ---------------------------------- */

/* On line_model at R = 2: column stages N − 1 = 5 (total condenser, DESIGN stage
 * convention), se = √0.0525 as above, dof = the model's 12; at R = 0.75 no column stage is
 * left (N = 1) and the call refuses. */
static void coverage_hetp_stages_from_model(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_hetp_stages st;
    stagecal_model_point pt;
    stagecal_error err;
    line_model(&m);
    assert_int_equal(stagecal_hetp_stages_from_model(&m, 2, NAN, &st, &pt, &err), STAGECAL_OK);
    /* 1e-13: a handful of double operations */
    assert_rel(st.column_stages, 5, 1e-13, "column stages");
    assert_rel(st.se, sqrt(0.0525), 1e-13, "se");
    assert_rel(st.dof, 12, 0, "dof");
    assert_rel(pt.stages, 6, 1e-13, "stages incl. the pot");
    assert_int_equal(stagecal_hetp_stages_from_model(&m, 0.75, NAN, &st, NULL, &err),
                     STAGECAL_EDATA);
    const char *head = "column K-9.demo: the model predicts ";
    assert_memory_equal(err.text, head, strlen(head));
    assert_non_null(strstr(err.text, " column stages at R = 0.75 (expected > 0 for an HETP)"));
    assert_int_equal(stagecal_hetp_stages_from_model(&m, -1, NAN, &st, NULL, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text, "reflux ratio R = -1: expected R >= 0 or inf");
    stagecal_model_free(&m);

    assert_string_equal(stagecal_hetp_verdict_name(STAGECAL_HETP_CONSISTENT), "consistent");
    assert_string_equal(stagecal_hetp_verdict_name(STAGECAL_HETP_WORSE), "worse");
    assert_string_equal(stagecal_hetp_verdict_name(STAGECAL_HETP_BETTER), "better");
    assert_string_equal(stagecal_packing_kind_name(STAGECAL_PACKING_RANDOM), "random");
    assert_string_equal(stagecal_packing_kind_name(STAGECAL_PACKING_STRUCTURED), "structured");
    stagecal_hetp_rule rule;
    assert_int_equal(stagecal_hetp_rule_of_thumb((stagecal_packing_kind)5, 0.025, &rule, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text, "unknown packing kind 5");
}

/* The fitted line and its band at a time (trend.h): value a + b·τ, se = √(c00 + 2c01τ
 * + c11τ²), band value ∓ t_crit·se, τ = t − t0 (variance of a linear combination). */
static void coverage_trend_line_eval_band(void **state)
{
    (void)state;
    stagecal_trend_fit f;
    memset(&f, 0, sizeof f);
    f.t0_s = 1.7e9;
    f.a = 8.25;
    f.b = -2.0e-8;
    f.c00 = 0.0144;
    f.c01 = -1.5e-10;
    f.c11 = 4.0e-18;
    f.t_crit = 2.262;
    const double tau = 2.5e7, v = 8.25 - 0.5,
                 var = 0.0144 - 2 * 1.5e-10 * tau + 4.0e-18 * tau * tau;
    double value, se, low, high;
    stagecal_trend_line_eval(&f, f.t0_s + tau, &value, &se, &low, &high);
    /* 1e-12: cancellation-free sums of a few terms */
    assert_rel(value, v, 1e-12, "line value");
    assert_rel(se, sqrt(var), 1e-12, "se of the line");
    assert_rel(low, v - 2.262 * sqrt(var), 1e-12, "lower band");
    assert_rel(high, v + 2.262 * sqrt(var), 1e-12, "upper band");
    assert_string_equal(stagecal_forecast_status_name(STAGECAL_FORECAST_OK), "ok");
    assert_string_equal(stagecal_forecast_status_name(STAGECAL_FORECAST_UNBOUNDED), "unbounded");
    assert_string_equal(stagecal_forecast_status_name(STAGECAL_FORECAST_NOT_DECLINING),
                        "not-declining");
    assert_string_equal(stagecal_event_kind_name(STAGECAL_EVENT_NOTE), "note");
}

/* EWMA chart arguments (trend.h domains): λ in (0, 1], L > 0, chain size odd in
 * [11, 2001], finite shift, finite baseline with se >= 0. */
static void coverage_trend_ewma_refusals(void **state)
{
    (void)state;
    stagecal_error err;
    stagecal_trend_ewma_params par = stagecal_trend_ewma_default_params();
    double arl;
    stagecal_trend_point pts[1] = {{0, 6.0, 0.2}};
    stagecal_trend_ewma_point out[1];
    assert_int_equal(stagecal_trend_ewma(pts, 1, NAN, 0.1, &par, out, NULL, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "baseline nan with standard error 0.1 is invalid (expected "
                                  "finite, se >= 0)");
    assert_int_equal(stagecal_trend_ewma_arl(&par, 0, 12, &arl, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text,
                        "Markov chain size 12 is invalid (expected an odd number in [11, 2001])");
    assert_int_equal(stagecal_trend_ewma_arl(&par, INFINITY, 101, &arl, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "shift inf is not finite");
    par.L = -1;
    assert_int_equal(stagecal_trend_ewma_arl(&par, 0, 101, &arl, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "EWMA limit width L -1 is not positive (expected e.g. 2.962)");
    par.lambda = 1.5;
    assert_int_equal(stagecal_trend_ewma_arl(&par, 0, 101, &arl, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "EWMA weight lambda 1.5 is outside (0, 1] (expected e.g. 0.2)");
}

/* Writes text to a file in the build tree and reads it as an events file. */
static int events_from(const char *text, char *path, size_t cap, stagecal_error *err)
{
    snprintf(path, cap, "%s/coverage_extra_events.csv", STAGECAL_BUILD_DIR);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs(text, f);
    assert_int_equal(fclose(f), 0);
    stagecal_trend_event *ev = NULL;
    size_t n = 99;
    int rc = stagecal_trend_events_read(path, &ev, &n, err);
    free(ev);
    remove(path);
    if (rc != STAGECAL_OK)
        assert_int_equal(n, 0);
    return rc;
}

/* Events files (docs/events-file.md): each refusal names file and line. */
static void coverage_trend_events_refusals(void **state)
{
    (void)state;
    char path[512], want[1024], note[256];
    stagecal_error err;
    assert_int_equal(events_from("# only a comment\n\n", path, sizeof path, &err), STAGECAL_EDATA);
    snprintf(want, sizeof want, "%s: no header (expected 'time,column,kind[,note]')", path);
    assert_string_equal(err.text, want);
    assert_int_equal(
        events_from("time,column,kind,note\n2026-03-01,K-7\n", path, sizeof path, &err),
        STAGECAL_EDATA);
    snprintf(want, sizeof want, "%s:2: 2 fields (expected 4: time,column,kind,note)", path);
    assert_string_equal(err.text, want);
    assert_int_equal(
        events_from("time,column,kind\n2026-03-01,K-7,repack,x,y\n", path, sizeof path, &err),
        STAGECAL_EDATA);
    snprintf(want, sizeof want,
             "%s:2: 5 fields or a field over 255 bytes (expected time,column,kind[,note])", path);
    assert_string_equal(err.text, want);
    assert_int_equal(
        events_from("time,column,kind\n2026-03-01,K 7,repack\n", path, sizeof path, &err),
        STAGECAL_EDATA);
    snprintf(want, sizeof want,
             "%s:2: column 'K 7' is not a column id (expected letters, digits, '_', '.', '-' (not "
             "starting with '.'))",
             path);
    assert_string_equal(err.text, want);
    memset(note, 'n', 200);
    note[200] = '\0';
    char text[600];
    snprintf(text, sizeof text, "time,column,kind,note\n2026-03-01,K-7,note,%s\n", note);
    assert_int_equal(events_from(text, path, sizeof path, &err), STAGECAL_EDATA);
    snprintf(want, sizeof want, "%s:2: note of 200 bytes is too long (expected < 160)", path);
    assert_string_equal(err.text, want);
}

/* The model's law inside the batch (batch.h: stagecal_form_eval with the envelope check):
 * N = a + b·F for 'linear:1+F'; every side of the envelope is flagged. */
static void coverage_batch_model_law_envelope(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    stagecal_model_init(&m);
    assert_int_equal(stagecal_form_parse("linear:1+F", &m.form, &err), STAGECAL_OK);
    m.theta[0] = 9.5;
    m.theta[1] = -1.25;
    m.r_min = 1.5;
    m.r_max = 6;
    m.has_load = 1;
    m.f_min = 0.8;
    m.f_max = 1.9;
    const double theta[2] = {8.0, -0.5};
    stagecal_batch_model_law law = {&m, NULL, 0.5};
    double n;
    unsigned out;
    assert_int_equal(stagecal_batch_model_stages(&law, 1.0, &n, &out, &err), STAGECAL_OK);
    /* 1e-15: one multiply-add */
    assert_rel(n, 9.5 - 1.25 * 0.5, 1e-15, "a + bF");
    assert_int_equal(out, STAGECAL_MODEL_R_BELOW | STAGECAL_MODEL_F_BELOW);
    law.f_load = 2.4;
    law.theta = theta;
    assert_int_equal(stagecal_batch_model_stages(&law, 7.0, &n, &out, &err), STAGECAL_OK);
    assert_rel(n, 8.0 - 0.5 * 2.4, 1e-15, "a + bF with the caller's theta");
    assert_int_equal(out, STAGECAL_MODEL_R_ABOVE | STAGECAL_MODEL_F_ABOVE);
    law.f_load = 1.2;
    assert_int_equal(stagecal_batch_model_stages(&law, 3.0, &n, &out, &err), STAGECAL_OK);
    assert_int_equal(out, 0);
    stagecal_model_free(&m);
}

/* ---- main ------------------------------------------------------------------------ */

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(coverage_plan_refusals),
        cmocka_unit_test(coverage_plan_keeps_caller_values),
        cmocka_unit_test(coverage_plan_load_file),
        cmocka_unit_test(coverage_batch_check_each_field),
        cmocka_unit_test(coverage_batch_names),
        cmocka_unit_test(coverage_batch_distillate_one_stage),
        cmocka_unit_test(coverage_batch_envelope_warnings),
        cmocka_unit_test(coverage_batch_band_arguments),
        cmocka_unit_test(coverage_stages_closed_form_refusals),
        cmocka_unit_test(coverage_stages_step_and_rmin_refusals),
        cmocka_unit_test(coverage_trend_point_from_model),
        cmocka_unit_test(coverage_trend_fit_refusals),
        cmocka_unit_test(coverage_vle_refusals_and_kvalue),
        cmocka_unit_test(coverage_plot_builders_refuse),
        cmocka_unit_test(coverage_column_refusals),
        cmocka_unit_test(coverage_report_refusals),
        cmocka_unit_test(coverage_hetp_stages_from_model),
        cmocka_unit_test(coverage_trend_line_eval_band),
        cmocka_unit_test(coverage_trend_ewma_refusals),
        cmocka_unit_test(coverage_trend_events_refusals),
        cmocka_unit_test(coverage_batch_model_law_envelope),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}

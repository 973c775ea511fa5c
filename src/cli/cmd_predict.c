/*
 * cmd_predict.c — `stagecal predict`: a batch predicted from a model file (the
 * planner's side of the calibration): trajectory, cuts, batch time, energy, and a band
 * from the model's parameter covariance; quasi-steady, or dynamic with the column
 * file's holdup (start-up, first-cut delay, smeared cuts). Numerics live in src/batch*.c;
 * the band's output is in predict_band.c, the dynamic model's in predict_dynamic.c.
 */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "fileio.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "predict.h"
#include "stagecal/batch.h"
#include "stagecal/model.h"
#include "stagecal/units.h"

static const struct cli_usage usage = {
    "usage: stagecal predict --model FILE [--column FILE | --alpha A | --kvalue K]\n"
    "                        --charge AMOUNT --xb0 X --boilup RATE\n"
    "                        (--reflux R | --xd-setpoint X [--reflux-max R] | --plan FILE)\n"
    "                        [--cut KIND=VALUE ...] [--f-factor F] [--latent KJ_PER_MOL]\n"
    "                        [--dynamics MODEL [--startup-xd X | --startup-time H]]\n"
    "                        [--every H] [-o FILE] [--samples N] [--seed S] [--level P]\n"
    "                        [--json] [--quiet]\n",
    "Predicts a batch rectification from a model file: the pot is charged with AMOUNT at\n"
    "composition X and boiled up at a constant rate; at every instant the distillate\n"
    "follows from stepping the model's stages(R, F) up from the pot (quasi-steady:\n"
    "column holdup neglected), or from a stage-by-stage column that holds the column\n"
    "file's liquid holdup (dynamic: a total-reflux start-up, then the draw). Receivers\n"
    "(cuts) are filled in order, each until its target. The equilibrium model is\n"
    "--column, --alpha or --kvalue, else the model file's.\n",
    "--cut KIND=VALUE (repeatable, in order; NAME:KIND=VALUE names the receiver):\n"
    "  pot-x         until the pot mole fraction <= VALUE\n"
    "  mean-x        until the receiver's mean mole fraction <= VALUE\n"
    "  distillate-x  until the distillate mole fraction <= VALUE\n"
    "  fraction      until VALUE of the charge has been distilled\n"
    "  time          until VALUE hours from the start\n"
    "  reflux        until R reaches VALUE (--xd-setpoint only)\n"
    "--dynamics: holdup (the default when the column file states a holdup) or\n"
    "quasi-steady (the default otherwise); docs/methods.md, 'Dynamic batch prediction'.\n"};

static const char *const dynamics_choices[] = {"holdup", "quasi-steady", NULL};
/* --scatter-part: what of the run-to-run scatter --run-scatter draws */
static const char *const scatter_part_choices[] = {"process", "window", NULL};

/* Parses NAME:KIND=VALUE (NAME: optional) into spec; time in h → s. */
static int parse_cut(const char *text, stagecal_batch_cut_spec *spec)
{
    char buf[128], *kind = buf, *eq, *colon;
    int k;
    double v;
    if (strlen(text) >= sizeof buf)
        return cli_usage_error("option '--cut': '%s' is too long", text);
    snprintf(buf, sizeof buf, "%s", text);
    memset(spec, 0, sizeof *spec);
    colon = strchr(buf, ':');
    if (colon) {
        *colon = '\0';
        if (strlen(buf) == 0 || strlen(buf) >= sizeof spec->name)
            return cli_usage_error("option '--cut': name '%s' must have 1 to %zu characters", buf,
                                   sizeof spec->name - 1);
        memcpy(spec->name, buf, strlen(buf) + 1); /* length checked above */
        kind = colon + 1;
    }
    eq = strchr(kind, '=');
    if (!eq)
        return cli_usage_error("option '--cut': '%s' is not KIND=VALUE (e.g. pot-x=0.1)", text);
    *eq = '\0';
    if ((k = stagecal_batch_target_from_name(kind)) < 0)
        return cli_usage_error("option '--cut': unknown target '%s' (expected pot-x, mean-x, "
                               "distillate-x, fraction, time or reflux)",
                               kind);
    if (cli_parse_double("cut", eq + 1, 0, "a number", &v))
        return CLI_EXIT_USAGE;
    spec->kind = (stagecal_batch_target_kind)k;
    spec->value = k == STAGECAL_BATCH_UNTIL_TIME ? v * STAGECAL_UNIT_H : v;
    return 0;
}

/* The equilibrium model: options first, else the one recorded in the model file. */
static int open_vle(cli_system *sys, const stagecal_model *m, const char *model_path,
                    stagecal_vle **own)
{
    stagecal_error err;
    *own = NULL;
    if (sys->column_path || !isnan(sys->alpha) || !isnan(sys->kvalue))
        return cli_system_open(sys);
    if (stagecal_model_build_vle(m, own, &err) != STAGECAL_OK) {
        if (err.code == STAGECAL_EDATA) {
            cli_error("%s: %s", model_path, err.text);
            return CLI_EXIT_DATA;
        }
        return cli_fail(&err);
    }
    sys->vle = *own;
    return 0;
}

static void put_csv(FILE *f, const stagecal_batch_result *res)
{
    fprintf(f, "time[h],W[kmol],xB[mol/mol],xD[mol/mol],R[-],stages[-],cut,cut_amount[kmol],"
               "cut_x[mol/mol],distilled[kmol],outside_envelope\n");
    for (size_t i = 0; i < res->n_rows; i++) {
        const stagecal_batch_row *r = &res->rows[i];
        fprintf(f, "%.10g,%.10g,%.10g,%.10g,%.10g,%.10g,%s,%.10g,%.10g,%.10g,%d\n", H(r->t_s),
                KMOL(r->w_mol), r->xb, r->xd, r->reflux, r->stages, res->cuts[r->cut].name,
                KMOL(r->cut_mol), r->cut_x, KMOL(r->total_mol), r->outside ? 1 : 0);
    }
}

/* The trajectory as CSV on stdout ("-") or, atomically, in path (replacing a file of
 * that name, docs/cli.md). */
static int write_csv(const char *path, const stagecal_batch_result *res)
{
    stagecal_error err;
    atomic_file a;
    if (strcmp(path, "-") == 0) {
        put_csv(stdout, res);
        return fflush(stdout) == 0 && !ferror(stdout) ? 0 : CLI_EXIT_CANTCREAT;
    }
    FILE *f = NULL;
    int rc = atomic_open(&a, path, &err);
    if (rc == STAGECAL_OK && !(f = atomic_stream(&a, &err)))
        rc = STAGECAL_EWRITE;
    if (f)
        put_csv(f, res);
    if (rc == STAGECAL_OK)
        rc = atomic_publish(&a, path, ATOMIC_REPLACE, NULL, &err);
    atomic_discard(&a);
    return rc == STAGECAL_OK ? 0 : cli_fail(&err);
}

/* Where the latent heat came from, in the order of precedence; its JSON token
 * ("latent_heat_source") and its words for people. */
typedef enum { LATENT_NONE, LATENT_OPTION, LATENT_PLAN, LATENT_COLUMN, LATENT_MODEL } latent_from;
static const char *const latent_token[] = {"none", "option", "plan-file", "column-file",
                                           "model-file"};
static const char *const latent_words[] = {"nowhere", "--latent", "the plan file",
                                           "the column file", "the model file"};

static const char *policy_name(int kind)
{
    return kind == STAGECAL_BATCH_CONSTANT_REFLUX       ? "constant-reflux"
           : kind == STAGECAL_BATCH_CONSTANT_DISTILLATE ? "constant-distillate"
                                                        : "schedule";
}

static json_t *result_json(const stagecal_batch_problem *pb, const stagecal_batch_result *res,
                           const stagecal_batch_band *band, int have_band, const char *model_path,
                           latent_from latent_source, unsigned long seed, const struct dyn_view *dv)
{
    json_t *doc = json_object(), *cuts = json_array(), *rows = json_array(), *warn = json_array();
    for (size_t i = 0; i < res->n_cuts; i++) {
        const stagecal_batch_cut *c = &res->cuts[i];
        json_t *o = json_pack(
            "{s:s,s:s,s:s,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o}", "name", c->name, "target",
            stagecal_batch_target_name((int)pb->cuts[i].kind), "stop",
            stagecal_batch_stop_name(c->stop), "target_value",
            cli_json_real(pb->cuts[i].kind == STAGECAL_BATCH_UNTIL_TIME ? H(pb->cuts[i].value)
                                                                        : pb->cuts[i].value),
            "t_start_h", cli_json_real(H(c->t_start_s)), "t_end_h", cli_json_real(H(c->t_end_s)),
            "amount_kmol", cli_json_real(KMOL(c->amount_mol)), "x_mean", cli_json_real(c->x_mean),
            "yield", cli_json_real(c->yield), "recovery", cli_json_real(c->recovery), "xb_end",
            cli_json_real(c->xb_end), "reflux_end", cli_json_real(c->reflux_end));
        if (have_band)
            json_object_set_new(o, "band", predict_band_cut_json(&band->cuts[i]));
        predict_dyn_cut_json(o, c, dv, i);
        json_array_append_new(cuts, o);
    }
    for (size_t i = 0; i < res->n_rows; i++) {
        const stagecal_batch_row *r = &res->rows[i];
        json_array_append_new(
            rows,
            json_pack("{s:o,s:o,s:o,s:o,s:o,s:o,s:s,s:o,s:o,s:o,s:b}", "t_h",
                      cli_json_real(H(r->t_s)), "w_kmol", cli_json_real(KMOL(r->w_mol)), "xb",
                      cli_json_real(r->xb), "xd", cli_json_real(r->xd), "reflux",
                      cli_json_real(r->reflux), "stages", cli_json_real(r->stages), "cut",
                      res->cuts[r->cut].name, "cut_amount_kmol", cli_json_real(KMOL(r->cut_mol)),
                      "cut_x", cli_json_real(r->cut_x), "distilled_kmol",
                      cli_json_real(KMOL(r->total_mol)), "outside", r->outside != 0));
        if (r->startup)
            json_object_set_new(json_array_get(rows, i), "startup", json_true());
    }
    for (size_t i = 0; i < res->n_warnings; i++)
        json_array_append_new(warn, json_string(res->warnings[i]));
    json_object_set_new(doc, "format", json_string("stagecal-predict"));
    json_object_set_new(doc, "version", json_integer(1));
    json_object_set_new(doc, "status", json_string("ok"));
    json_object_set_new(doc, "stop", json_string(stagecal_batch_stop_name(res->stop)));
    json_object_set_new(doc, "model_file", json_string(model_path));
    json_object_set_new(doc, "units",
                        json_pack("{s:s,s:s,s:s,s:s,s:s}", "time", "h", "amount", "kmol", "boilup",
                                  "kmol/h", "energy", "GJ", "composition",
                                  "mole fraction of the light component"));
    json_object_set_new(
        doc, "charge",
        json_pack("{s:o,s:o,s:o,s:s}", "amount_kmol", cli_json_real(KMOL(pb->w0_mol)), "x_light",
                  cli_json_real(pb->xb0), "boilup_kmol_h", cli_json_real(KMOL_H(pb->v_mol_s)),
                  "policy", policy_name((int)pb->policy.kind)));
    json_object_set_new(doc, "batch_time_h", cli_json_real(H(res->t_end_s)));
    json_object_set_new(doc, "pot_end_kmol", cli_json_real(KMOL(res->w_end_mol)));
    json_object_set_new(doc, "pot_end_x", cli_json_real(res->xb_end));
    json_object_set_new(doc, "energy_gj",
                        pb->latent_j_mol > 0 ? cli_json_real(GJ(res->energy_j)) : json_null());
    json_object_set_new(doc, "latent_heat_kj_mol",
                        pb->latent_j_mol > 0 ? cli_json_real(KMOL(pb->latent_j_mol)) : json_null());
    json_object_set_new(doc, "latent_heat_source",
                        pb->latent_j_mol > 0 ? json_string(latent_token[latent_source])
                                             : json_null());
    json_object_set_new(doc, "mass_balance_error", cli_json_real(res->balance_error));
    json_object_set_new(doc, "reflux_range",
                        json_pack("{s:o,s:o}", "min", cli_json_real(res->r_min_used), "max",
                                  cli_json_real(res->r_max_used)));
    json_object_set_new(doc, "extrapolated", json_boolean(res->outside != 0));
    predict_dyn_json(doc, pb, res, dv);
    json_object_set_new(doc, "cuts", cuts);
    json_object_set_new(doc, "trajectory", rows);
    json_object_set_new(doc, "warnings", warn);
    json_object_set_new(doc, "seed", json_integer((json_int_t)seed));
    json_object_set_new(doc, "band", have_band ? predict_band_json(band, dv) : json_null());
    json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    return doc;
}

static void print_human(const stagecal_batch_problem *pb, const stagecal_batch_result *res,
                        const stagecal_batch_band *band, int have_band, latent_from latent_source,
                        const struct dyn_view *dv)
{
    printf("batch: %.4g kmol at x = %.4g, boil-up %.4g kmol/h, %s; ", KMOL(pb->w0_mol), pb->xb0,
           KMOL_H(pb->v_mol_s), policy_name((int)pb->policy.kind));
    predict_dyn_print_head(pb, res, dv);
    printf("%-12s %-14s %9s %9s %10s %8s %8s %8s %8s\n", "receiver", "ended by", "start[h]",
           "end[h]", "amount", "x_mean", "yield", "recovery", "R_end");
    for (size_t i = 0; i < res->n_cuts; i++) {
        const stagecal_batch_cut *c = &res->cuts[i];
        printf("%-12s %-14s %9.3f %9.3f %10.4g %8.5f %8.4f %8.4f %8.3g\n", c->name,
               stagecal_batch_stop_name(c->stop), H(c->t_start_s), H(c->t_end_s),
               KMOL(c->amount_mol), c->x_mean, c->yield, c->recovery, c->reflux_end);
        if (have_band)
            predict_band_print_cut(&band->cuts[i]);
        predict_dyn_print_cut(c, dv, i);
    }
    printf("batch time %.3f h", H(res->t_end_s));
    if (have_band)
        predict_band_print_time(band, dv);
    printf("; pot left %.4g kmol at x = %.4g\n", KMOL(res->w_end_mol), res->xb_end);
    if (pb->latent_j_mol > 0)
        printf("boil-up energy %.4g GJ (latent heat %.4g kJ/mol, from %s)\n", GJ(res->energy_j),
               KMOL(pb->latent_j_mol), latent_words[latent_source]);
    else
        printf("boil-up energy: unknown (give --latent or a column file with a latent heat)\n");
    printf("reflux ratio used: %.4g to %.4g%s\n", res->r_min_used, res->r_max_used,
           dv ? " (after the start-up at total reflux)" : "");
    if (dv)
        predict_dyn_print_model(dv);
    /* extrapolation beyond the fitted envelope belongs with the numbers, not only on stderr */
    for (size_t i = 0; i < res->n_warnings; i++)
        printf("warning: %s\n", res->warnings[i]);
}

/* The options; NAN where not given. */
struct request {
    const char *model, *plan, *out;
    const char *charge_s, *xb0_s, *boilup_s; /* as given: a number and a unit (units.h) */
    double charge, xb0, boilup;              /* their numbers, NAN when not given ... */
    stagecal_unit charge_u, xb0_u, boilup_u; /* ... and units */
    double reflux, xdset, rmax, f_load, latent, every, level;
    long samples, seed;
    int run_scatter;
    int scatter_part;             /* index into scatter_part_choices (0 process, 1 window); −1
                                     not given: window */
    int dynamics;                 /* DYN_DEFAULT, DYN_HOLDUP or DYN_QUASI */
    double startup_xd, startup_h; /* the dynamic start-up's end, NAN when not given */
    stagecal_batch_cut_spec cuts[STAGECAL_BATCH_MAXCUTS];
    size_t n_cuts;
};

/* "2100kg", "2100 kg" or "25" (the unit dflt) for option opt: a number > 0 and a unit of
 * qty (or of qty2 when it is not STAGECAL_QTY_LABEL). An exit code. */
static int parse_amount(const char *opt, const char *text, stagecal_quantity qty,
                        stagecal_quantity qty2, const char *dflt, double *v, stagecal_unit *u)
{
    char *end;
    errno = 0;
    *v = strtod(text, &end);
    while (*end == ' ')
        end++;
    const char *unit = *end ? end : dflt;
    stagecal_error e;
    if (end == text || errno || !isfinite(*v))
        return cli_usage_error("option '--%s': '%s' is not a number with a unit (e.g. %s)", opt,
                               text, qty == STAGECAL_QTY_FRACTION ? "48wt%" : "2100kg");
    if (stagecal_units_parse(qty, unit, u, &e) != 0 &&
        (qty2 == STAGECAL_QTY_LABEL || stagecal_units_parse(qty2, unit, u, &e) != 0))
        return cli_usage_error("option '--%s': unknown unit '%s' (expected %s%s%s)", opt, unit,
                               stagecal_units_expected(qty), qty2 != STAGECAL_QTY_LABEL ? ", " : "",
                               qty2 != STAGECAL_QTY_LABEL ? stagecal_units_expected(qty2) : "");
    if (!(*v > u->lo) || (qty == STAGECAL_QTY_FRACTION && !(*v < u->hi)))
        return cli_usage_error("option '--%s': '%s' is outside (%g, %g %s)", opt, text, u->lo,
                               u->hi, unit);
    return 0;
}

/* The options' charge, composition and boil-up in SI, with the molar masses ml, mh (kg/mol, 0
 * when unknown) for mass units and the latent heat (J/mol, 0 when unknown) for a duty; a line
 * for people saying what was converted when a unit was not the default. An exit code. */
static int convert_inputs(const struct request *q, double ml, double mh, stagecal_batch_problem *pb,
                          char *said, size_t said_len)
{
    int n = 0;
    said[0] = '\0';
    if (!isnan(q->xb0)) {
        double x = q->xb0 * q->xb0_u.scale;
        if (q->xb0_u.mass && !(ml > 0 && mh > 0))
            return cli_usage_error("option '--xb0': a mass fraction needs the molar masses (the "
                                   "model file records none; give --column FILE)");
        pb->xb0 = q->xb0_u.mass ? stagecal_vle_mass_to_mole(x, ml, mh) : x;
        if (strcmp(q->xb0_u.text, "mol/mol") != 0)
            n += snprintf(said + n, said_len - (size_t)n, "; xb0 %s = %.5g mol/mol", q->xb0_s,
                          pb->xb0);
    }
    if (!isnan(q->charge)) {
        double w = q->charge * q->charge_u.scale, x = pb->xb0;
        if (q->charge_u.mass && !(ml > 0 && mh > 0 && x >= 0 && x <= 1))
            return cli_usage_error("option '--charge': a mass needs the molar masses and the "
                                   "charge composition (--xb0; the model file records no molar "
                                   "masses: give --column FILE)");
        pb->w0_mol = q->charge_u.mass ? w / (x * ml + (1 - x) * mh) : w;
        if (strcmp(q->charge_u.text, "kmol") != 0 && n < (int)said_len)
            n += snprintf(said + n, said_len - (size_t)n, "; charge %s = %.5g kmol", q->charge_s,
                          pb->w0_mol / STAGECAL_UNIT_KMOL);
    }
    if (!isnan(q->boilup)) {
        double b = q->boilup * q->boilup_u.scale;
        if (q->boilup_u.qty == STAGECAL_QTY_DUTY) {
            if (!(pb->latent_j_mol > 0))
                return cli_usage_error("option '--boilup': a reboiler duty needs the latent heat "
                                       "(--latent, or a column or model file that records one)");
            pb->v_mol_s = b / pb->latent_j_mol;
        } else if (q->boilup_u.mass) {
            return cli_usage_error("option '--boilup': a mass boil-up needs the vapour's molar "
                                   "mass, which changes during the batch (expected kmol/h, mol/s "
                                   "or the reboiler duty in kW)");
        } else {
            pb->v_mol_s = b;
        }
        if (strcmp(q->boilup_u.text, "kmol/h") != 0 && n < (int)said_len)
            snprintf(said + n, said_len - (size_t)n, "; boil-up %s = %.5g kmol/h", q->boilup_s,
                     pb->v_mol_s / STAGECAL_UNIT_KMOL_H);
    }
    return 0;
}

/* The batch problem as the plan file states it (before the model is read: a bad plan is
 * named first). An exit code. */
static int start_problem(const struct request *q, stagecal_batch_problem *pb)
{
    stagecal_error err;
    stagecal_batch_problem_init(pb);
    pb->w0_mol = NAN;
    pb->xb0 = NAN;
    pb->v_mol_s = NAN;
    if (q->plan && stagecal_batch_plan_load(q->plan, pb, &err) != STAGECAL_OK)
        return cli_fail(&err);
    return 0;
}

/* The batch problem of start_problem with the options (options win); ml, mh and the latent
 * heat known so far convert options in mass units or a duty. An exit code. */
static int build_problem(const struct request *q, double ml, double mh, double latent,
                         stagecal_batch_problem *pb, latent_from *latent_source, char *said,
                         size_t said_len)
{
    stagecal_error err;
    /* the latent heat: --latent, else the plan's, else (from the caller) the column or
     * model file's */
    *latent_source = LATENT_NONE;
    if (!isnan(q->latent)) {
        pb->latent_j_mol = q->latent * STAGECAL_UNIT_KJ_MOL;
        *latent_source = LATENT_OPTION;
    } else if (pb->latent_j_mol > 0) {
        *latent_source = LATENT_PLAN;
    }
    double plan_latent = pb->latent_j_mol;
    if (!(pb->latent_j_mol > 0))
        pb->latent_j_mol = latent; /* for a duty only; the caller decides what is reported */
    int rc = convert_inputs(q, ml, mh, pb, said, said_len);
    if (isnan(q->latent))
        pb->latent_j_mol = plan_latent;
    if (rc)
        return rc;
    if (isnan(pb->w0_mol))
        return cli_usage_error("option '--charge' is required (or a charge in the plan)");
    if (isnan(pb->xb0))
        return cli_usage_error("option '--xb0' is required (or a charge in the plan)");
    if (isnan(pb->v_mol_s))
        return cli_usage_error("option '--boilup' is required (or boilup_kmol_h in the plan)");
    if (!isnan(q->reflux)) {
        pb->policy.kind = STAGECAL_BATCH_CONSTANT_REFLUX;
        pb->policy.reflux = q->reflux;
    } else if (!isnan(q->xdset)) {
        pb->policy.kind = STAGECAL_BATCH_CONSTANT_DISTILLATE;
        pb->policy.xd_set = q->xdset;
        pb->policy.reflux_max = isnan(q->rmax) ? 30 : q->rmax;
    }
    if (q->n_cuts) {
        memcpy(pb->cuts, q->cuts, q->n_cuts * sizeof q->cuts[0]);
        pb->n_cuts = q->n_cuts;
    }
    if (pb->n_cuts == 0)
        return cli_usage_error("no receiver: give at least one '--cut KIND=VALUE' (or cuts in "
                               "the plan)");
    if (stagecal_batch_check(pb, &err) != STAGECAL_OK) {
        if (!q->plan)
            return cli_usage_error("%s", err.text);
        cli_error("%s: %s", q->plan, err.text); /* the plan's content is bad data */
        return CLI_EXIT_DATA;
    }
    return 0;
}

/* The options that go together, before any file is read. An exit code. */
static int check_request(const struct request *q, const cli_ctx *ctx)
{
    if (!q->model)
        return cli_usage_error("option '--model' is required (see 'stagecal predict --help')");
    int npol = !isnan(q->reflux) + !isnan(q->xdset) + (q->plan != NULL);
    if (npol != 1)
        return cli_usage_error("give exactly one of '--reflux', '--xd-setpoint' or '--plan'");
    if (!isnan(q->rmax) && isnan(q->xdset))
        return cli_usage_error("option '--reflux-max' goes with '--xd-setpoint'");
    if (ctx->json && q->out && strcmp(q->out, "-") == 0)
        return cli_usage_error("'--output -' and '--json' would both write to standard output");
    const char *inputs[3] = {q->model, q->plan, ctx->sys.column_path};
    int rc = cli_check_output("output", q->out, inputs, 3);
    if (rc)
        return rc;
    if (q->samples == 1)
        return cli_usage_error("option '--samples': 1 draw gives no band (use 0 or >= 2)");
    return 0;
}

/* One prediction, from the model file to the outputs. */
struct prediction {
    stagecal_model m;
    stagecal_vle *own; /* the model file's equilibrium model when no option gave one */
    stagecal_batch_problem pb;
    latent_from latent_source;
    stagecal_batch_params par;
    stagecal_batch_result res, qs; /* the batch; dynamic: the quasi-steady one beside it */
    stagecal_batch_dynamics dy;
    int dyn; /* 1: the dynamic batch model */
    stagecal_batch_band band;
    int have_band;
};

/* The model's equilibrium model, set in sys by open_vle, given back. */
static void close_vle(struct prediction *p, cli_system *sys)
{
    stagecal_vle_free(p->own);
    if (p->own)
        sys->vle = NULL;
}

/* The plan, the model file, the equilibrium model and the batch problem with the options
 * (the line saying what was converted, for people), and where the latent heat comes from.
 * On success p->m and p->own are the caller's to free (release). An exit code. */
static int load_inputs(const struct request *q, cli_ctx *ctx, struct prediction *p)
{
    cli_system *sys = &ctx->sys;
    stagecal_error err;
    int rc;
    p->latent_source = LATENT_NONE;
    if ((rc = start_problem(q, &p->pb)))
        return rc;
    stagecal_model_init(&p->m);
    if (stagecal_model_load(q->model, &p->m, &err) != STAGECAL_OK)
        return cli_fail(&err);
    if (p->m.form.uses_load && isnan(q->f_load)) {
        /* the message before the free: the form's name lives in the model */
        rc = cli_usage_error("the model's form '%s' uses the vapour load: give '--f-factor F'",
                             p->m.form.name);
        stagecal_model_free(&p->m);
        return rc;
    }
    if ((rc = open_vle(sys, &p->m, q->model, &p->own))) {
        stagecal_model_free(&p->m);
        return rc;
    }
    /* molar masses and latent heat for options in mass units or a duty: the column file's
     * with --column, else the model file's */
    double ml = sys->have_column ? sys->col.system.m_light : p->m.m_light_kg_mol;
    double mh = sys->have_column ? sys->col.system.m_heavy : p->m.m_heavy_kg_mol;
    double lat = sys->have_column    ? sys->col.system.latent_j_mol
                 : !sys->column_path ? p->m.latent_j_mol
                                     : 0.0;
    char said[400];
    if ((rc = build_problem(q, ml, mh, lat, &p->pb, &p->latent_source, said, sizeof said))) {
        close_vle(p, sys);
        stagecal_model_free(&p->m);
        return rc;
    }
    if (said[0] && !ctx->json)
        printf("inputs converted: %s\n", said + 2);
    if (isnan(q->latent) && p->pb.latent_j_mol == 0 && sys->have_column) {
        p->pb.latent_j_mol = sys->col.system.latent_j_mol;
        p->latent_source = LATENT_COLUMN;
    } else if (isnan(q->latent) && p->pb.latent_j_mol == 0 && !sys->column_path) {
        p->pb.latent_j_mol = p->m.latent_j_mol; /* 0 when the model file does not record one */
        p->latent_source = LATENT_MODEL;
    }
    return 0;
}

/* The batch (dynamic: the quasi-steady batch first, for the delays) and its band from the
 * model's parameter covariance. An exit code. */
static int run_batch(const struct request *q, cli_system *sys, struct prediction *p)
{
    stagecal_batch_model_law law = {&p->m, NULL, q->f_load};
    stagecal_batch_column col = {sys->vle, stagecal_batch_model_stages, &law, NULL, NULL};
    stagecal_error err;
    int rc;
    if ((rc = predict_dyn_pick(q->dynamics, q->startup_xd, q->startup_h, sys, &p->dy, &p->dyn)))
        return rc;
    if (p->dyn && (rc = stagecal_batch_run(&p->pb, &col, &p->par, &p->qs, &err)) == STAGECAL_OK)
        p->par.dynamics = &p->dy;
    if (rc == STAGECAL_OK)
        rc = stagecal_batch_run(&p->pb, &col, &p->par, &p->res, &err);
    /* "at least N stages" (a one-sided model): the batch with the bound, no band */
    if (p->m.one_sided)
        cli_warn("%s: the evidence gives at least %.4g stages only (one-sided %.0f %%, an "
                 "analyser at its limit): the batch is predicted with that lower bound (the "
                 "column may separate better) and without a band",
                 q->model, p->m.theta[0], 100 * p->m.level);
    if (rc == STAGECAL_OK && q->samples >= 2 && !p->m.one_sided) {
        rc = stagecal_batch_band_sample_scatter(
            &p->pb, sys->vle, &p->m, q->f_load, &p->par, &p->res, (size_t)q->samples,
            (unsigned long)q->seed, q->level,
            !q->run_scatter        ? STAGECAL_BATCH_SCATTER_NONE
            : q->scatter_part == 0 ? STAGECAL_BATCH_SCATTER_PROCESS
                                   : STAGECAL_BATCH_SCATTER_WINDOW,
            &p->band, &err);
        p->have_band = rc == STAGECAL_OK;
        if (rc == STAGECAL_OK && q->run_scatter && q->scatter_part == 0 &&
            p->band.run_scatter != STAGECAL_BATCH_SCATTER_PROCESS)
            cli_warn("%s: the model file does not say how much of its scatter is the windows' "
                     "measurement error (no correlation.scatter.var_ratio: a file written "
                     "before 4 December 2026, or one sigma for every R): the band draws the "
                     "whole scatter, conservative for one batch; calibrate again to separate it",
                     q->model);
        if (rc == STAGECAL_ENOCONV) { /* the model file's covariance, not the program */
            cli_error("%s: %s; '--samples 0' runs the batch without the band", q->model, err.text);
            return CLI_EXIT_DATA;
        }
    }
    return rc == STAGECAL_OK ? 0 : cli_fail(&err);
}

/* The envelope's warnings, the trajectory's CSV, the chart (`plot trajectory`), and the
 * result as JSON or for people. An exit code. */
static int write_outputs(const struct request *q, cli_ctx *ctx, struct prediction *p)
{
    cli_system *sys = &ctx->sys;
    stagecal_error err;
    int rc;
    stagecal_batch_envelope_warnings(&p->m, q->f_load, &p->res);
    for (size_t i = 0; i < p->res.n_warnings; i++)
        cli_warn("%s", p->res.warnings[i]);
    if (q->out && (rc = write_csv(q->out, &p->res)))
        return rc;
    if (ctx->chart) { /* `plot trajectory`: the chart of this batch */
        stagecal_plot_chart *chart = NULL;
        stagecal_plot_trajectory_data td = {&p->res, p->have_band ? &p->band : NULL, NULL};
        int brc = stagecal_plot_trajectory(&td, &chart, &err);
        if ((rc = cli_chart_write(ctx, chart, brc, &err)))
            return rc;
    }
    struct dyn_view dview = {&p->dy, &p->qs, sys->have_column ? sys->col.holdup_u_rel : 0};
    const struct dyn_view *dv = p->dyn ? &dview : NULL;
    if (ctx->json) {
        json_t *doc = result_json(&p->pb, &p->res, &p->band, p->have_band, q->model,
                                  p->latent_source, (unsigned long)q->seed, dv);
        if (doc && p->m.one_sided)
            json_object_set_new(doc, "stages_bound",
                                json_pack("{s:s,s:f,s:n,s:f}", "side", "lower", "low",
                                          p->m.theta[0], "high", "level", p->m.level));
        return cli_json_print(doc);
    }
    if (!(ctx->data_on_stdout = q->out && strcmp(q->out, "-") == 0))
        print_human(&p->pb, &p->res, &p->band, p->have_band, p->latent_source, dv);
    return 0;
}

/* Checks the request, reads its files, runs the batch (and its band), writes. An exit code. */
static int run(const struct request *q, cli_ctx *ctx)
{
    struct prediction p;
    int rc;
    if ((rc = check_request(q, ctx)) || (rc = load_inputs(q, ctx, &p)))
        return rc;
    p.par = stagecal_batch_default_params();
    p.par.output_dt_s = q->every * STAGECAL_UNIT_H;
    stagecal_batch_result_init(&p.res);
    stagecal_batch_result_init(&p.qs);
    p.dyn = p.have_band = 0;
    if ((rc = run_batch(q, &ctx->sys, &p)) == 0)
        rc = write_outputs(q, ctx, &p);
    stagecal_batch_result_free(&p.res);
    stagecal_batch_result_free(&p.qs);
    close_vle(&p, &ctx->sys);
    stagecal_model_free(&p.m);
    return rc;
}

int cmd_predict(int argc, char **argv, cli_ctx *ctx)
{
    struct request q;
    memset(&q, 0, sizeof q);
    q.charge = q.xb0 = q.boilup = q.reflux = q.xdset = q.rmax = q.f_load = q.latent = NAN;
    q.startup_xd = q.startup_h = NAN;
    q.dynamics = DYN_DEFAULT;
    q.scatter_part = -1;
    q.every = 0.1;
    q.level = 0.95;
    q.samples = 200;
    q.seed = 1;
    const char *cut_text[STAGECAL_BATCH_MAXCUTS + 1] = {NULL};
    const struct cli_option opts[] = {
        OPT_STRING(0, "model", &q.model, "FILE", "model file written by 'stagecal calibrate'"),
        OPT_SYSTEM(&ctx->sys),
        OPT_STRING(0, "charge", &q.charge_s, "AMOUNT",
                   "charge > 0 with its unit as in run logs: kmol (the default),\n"
                   "mol, kg or lb (mass: with the molar masses at XB0)"),
        OPT_STRING(0, "xb0", &q.xb0_s, "X",
                   "charge composition of the light component: mol/mol (the\n"
                   "default), mol%, ppm, kg/kg, wt% or ppmw, e.g. 48wt%"),
        OPT_STRING(0, "boilup", &q.boilup_s, "RATE",
                   "constant boil-up > 0: kmol/h (the default) or mol/s, or the\n"
                   "reboiler duty in kW, W or MW (boil-up = duty / latent heat)"),
        OPT_DOUBLE("reflux", &q.reflux, "R", "constant reflux ratio, R >= 0", 0, INFINITY, 0,
                   "a finite reflux ratio >= 0"),
        OPT_FRACTION("xd-setpoint", &q.xdset, "X",
                     "constant distillate: R is raised so that xD = X ..."),
        OPT_DOUBLE("reflux-max", &q.rmax, "R",
                   "... up to this ceiling (default 30); then the cut ends and the\n"
                   "batch goes on at R = ceiling",
                   0, INFINITY, CLI_D_LO_OPEN, "a finite reflux ratio > 0"),
        OPT_STRING(0, "plan", &q.plan, "FILE",
                   "policy, cuts (and charge, boil-up) from a plan file\n"
                   "(docs/plan-file.md); options given as well override it"),
        OPT_LIST("cut", cut_text, STAGECAL_BATCH_MAXCUTS, "KIND=VALUE",
                 "a receiver, repeatable, in order (below)"),
        OPT_FFACTOR(&q.f_load, "vapour load [Pa^0.5] for models that use it"),
        OPT_DOUBLE("latent", &q.latent, "KJ_PER_MOL",
                   "molar latent heat for the boil-up energy (default: the plan's,\n"
                   "else with --column the column file's, else the model file's)",
                   0, INFINITY, CLI_D_LO_OPEN, "a latent heat in kJ/mol"),
        OPT_CHOICE("dynamics", &q.dynamics, "MODEL",
                   "the batch model: holdup (a dynamic batch model, stage by stage,\n"
                   "with the column file's liquid holdup; the default when the file\n"
                   "states one) or quasi-steady (holdup neglected; the default otherwise)",
                   dynamics_choices, "a batch model"),
        OPT_FRACTION("startup-xd", &q.startup_xd, "X",
                     "dynamic: the total-reflux start-up ends when xD reaches X, or ..."),
        OPT_DOUBLE("startup-time", &q.startup_h, "H",
                   "... after H hours (default: when xD has come 99 % of the way to\n"
                   "its total-reflux value, or has reached --xd-setpoint)",
                   0, INFINITY, CLI_D_LO_OPEN, "a time in hours > 0"),
        OPT_DOUBLE("every", &q.every, "H",
                   "a trajectory row at least every H hours, H >= 0.01 (default 0.1)", 0.01,
                   INFINITY, 0, "an interval of at least 0.01 h (36 s)"),
        OPT_OUTPUT(&q.out, "the trajectory as CSV ('-' = stdout)"),
        OPT_ALIAS("out", "output"),
        OPT_LONG("samples", &q.samples, "N",
                 "parameter draws for the band (default 200; 0 = no band)", 0, 100000),
        OPT_SEED(&q.seed),
        OPT_LEVEL(&q.level),
        OPT_FLAG(0, "run-scatter", &q.run_scatter,
                 "the band also carries the run-to-run scatter of the batch's stage\n"
                 "count: a prediction band for one batch, not a confidence band on the\n"
                 "mean law (what of the scatter: --scatter-part)"),
        OPT_CHOICE("scatter-part", &q.scatter_part, "PART",
                   "with --run-scatter: window (default; all of sigma(R), as one\n"
                   "window's count strays: conservative for a batch unless its run-to-run\n"
                   "variation is large) or process (sigma(R) less the windows' stated\n"
                   "measurement error: narrower, can fall short; docs/calibration.md)",
                   scatter_part_choices, "a part of the scatter"),
        OPT_END_COMMON(ctx),
    };
    int first, rc;
    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    if (first < argc)
        return cli_usage_error("unexpected argument '%s' (predict takes options only)",
                               argv[first]);
    if (q.scatter_part >= 0 && !q.run_scatter)
        return cli_usage_error("option '--scatter-part' needs '--run-scatter' (without it the "
                               "band carries no run-to-run scatter)");
    if ((q.charge_s && (rc = parse_amount("charge", q.charge_s, STAGECAL_QTY_AMOUNT,
                                          STAGECAL_QTY_LABEL, "kmol", &q.charge, &q.charge_u))) ||
        (q.xb0_s && (rc = parse_amount("xb0", q.xb0_s, STAGECAL_QTY_FRACTION, STAGECAL_QTY_LABEL,
                                       "mol/mol", &q.xb0, &q.xb0_u))) ||
        (q.boilup_s && (rc = parse_amount("boilup", q.boilup_s, STAGECAL_QTY_FLOW,
                                          STAGECAL_QTY_DUTY, "kmol/h", &q.boilup, &q.boilup_u))))
        return rc;
    for (const char *const *c = cut_text; *c; c++)
        if ((rc = parse_cut(*c, &q.cuts[q.n_cuts++])))
            return rc;
    return run(&q, ctx);
}

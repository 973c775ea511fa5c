/*
 * cmd_predict.c — `stagecal predict`: a batch predicted from a model file (the
 * planner's side of the calibration): trajectory, cuts, batch time, energy, and a band
 * from the model's parameter covariance. Numerics live in src/batch*.c.
 */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "fileio.h"
#include "cli.h"
#include "commands.h"
#include "stagecal/batch.h"
#include "stagecal/model.h"

static const char usage_text[] =
    "usage: stagecal predict --model FILE [--column FILE | --alpha A | --kvalue K]\n"
    "                        --charge KMOL --xb0 X --boilup KMOL_PER_H\n"
    "                        (--reflux R | --xd-setpoint X [--reflux-max R] | --plan FILE)\n"
    "                        [--cut KIND=VALUE ...] [--f-factor F] [--latent KJ_PER_MOL]\n"
    "                        [--every H] [--out FILE] [--samples N] [--seed S] [--level P]\n"
    "                        [--json] [--quiet]\n"
    "\n"
    "Predicts a batch rectification from a model file: the pot is charged with KMOL at\n"
    "mole fraction X and boiled up at a constant rate; at every instant the distillate\n"
    "follows from stepping the model's stages(R, F) up from the pot (column holdup\n"
    "neglected). Receivers (cuts) are filled in order, each until its target.\n"
    "\n"
    "  --model FILE        model file written by 'stagecal calibrate'\n"
    "  --column FILE       equilibrium model of a column file (default: the one the\n"
    "                      model file records); also gives the latent heat\n"
    "  --alpha A, --kvalue K  equilibrium model given directly\n"
    "  --charge KMOL       charge [kmol], > 0\n"
    "  --xb0 X             charge mole fraction of the light component, in (0, 1)\n"
    "  --boilup KMOL_PER_H boil-up [kmol/h], > 0, constant\n"
    "  --reflux R          constant reflux ratio, R >= 0\n"
    "  --xd-setpoint X     constant distillate: R is raised so that xD = X ...\n"
    "  --reflux-max R      ... up to this ceiling (default 30); then the cut ends and the\n"
    "                      batch goes on at R = ceiling\n"
    "  --plan FILE         policy, cuts (and charge, boil-up) from a plan file\n"
    "                      (docs/plan-file.md); options given as well override it\n"
    "  --cut KIND=VALUE    a receiver, repeatable, in order; KIND is one of\n"
    "                        pot-x         until the pot mole fraction <= VALUE\n"
    "                        mean-x        until the receiver's mean mole fraction <= VALUE\n"
    "                        distillate-x  until the distillate mole fraction <= VALUE\n"
    "                        fraction      until VALUE of the charge has been distilled\n"
    "                        time          until VALUE hours from the start\n"
    "                        reflux        until R reaches VALUE (--xd-setpoint only)\n"
    "                      NAME:KIND=VALUE names the receiver\n"
    "  --f-factor F        vapour load [Pa^0.5] for models that use it\n"
    "  --latent KJ_PER_MOL molar latent heat for the boil-up energy (default: the plan's,\n"
    "                      else with --column the column file's, else the model file's)\n"
    "  --every H           a trajectory row at least every H hours (default 0.1)\n"
    "  --out FILE          trajectory as CSV ('-' = stdout)\n"
    "  --samples N         parameter draws for the band (default 200; 0 = no band)\n"
    "  --seed S            seed of the draws (default 1)\n"
    "  --level P           coverage of the band (default 0.95: 2.5/97.5 percentiles)\n"
    "  --json              one JSON document on stdout\n"
    "  --quiet             no warnings on stderr\n"
    "  -h, --help          this text\n";

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
    spec->value = k == STAGECAL_BATCH_UNTIL_TIME ? v * 3600.0 : v;
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
        fprintf(f, "%.10g,%.10g,%.10g,%.10g,%.10g,%.10g,%s,%.10g,%.10g,%.10g,%d\n", r->t_s / 3600,
                r->w_mol / 1000, r->xb, r->xd, r->reflux, r->stages, res->cuts[r->cut].name,
                r->cut_mol / 1000, r->cut_x, r->total_mol / 1000, r->outside ? 1 : 0);
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

static json_t *interval_json(const stagecal_batch_interval *iv, double scale)
{
    return json_pack("{s:o,s:o,s:o}", "nominal", cli_json_real(iv->nominal * scale), "low",
                     cli_json_real(iv->low * scale), "high", cli_json_real(iv->high * scale));
}

static const char *policy_name(int kind)
{
    return kind == STAGECAL_BATCH_CONSTANT_REFLUX       ? "constant-reflux"
           : kind == STAGECAL_BATCH_CONSTANT_DISTILLATE ? "constant-distillate"
                                                        : "schedule";
}

static json_t *result_json(const stagecal_batch_problem *pb, const stagecal_batch_result *res,
                           const stagecal_batch_band *band, int have_band, const char *model_path,
                           latent_from latent_source, unsigned long seed)
{
    json_t *doc = json_object(), *cuts = json_array(), *rows = json_array(), *warn = json_array();
    for (size_t i = 0; i < res->n_cuts; i++) {
        const stagecal_batch_cut *c = &res->cuts[i];
        json_t *o = json_pack(
            "{s:s,s:s,s:s,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o}", "name", c->name, "target",
            stagecal_batch_target_name((int)pb->cuts[i].kind), "stop",
            stagecal_batch_stop_name(c->stop), "target_value",
            cli_json_real(pb->cuts[i].kind == STAGECAL_BATCH_UNTIL_TIME ? pb->cuts[i].value / 3600
                                                                        : pb->cuts[i].value),
            "t_start_h", cli_json_real(c->t_start_s / 3600), "t_end_h",
            cli_json_real(c->t_end_s / 3600), "amount_kmol", cli_json_real(c->amount_mol / 1000),
            "x_mean", cli_json_real(c->x_mean), "yield", cli_json_real(c->yield), "recovery",
            cli_json_real(c->recovery), "xb_end", cli_json_real(c->xb_end), "reflux_end",
            cli_json_real(c->reflux_end));
        if (have_band) {
            const stagecal_batch_cut_band *b = &band->cuts[i];
            json_object_set_new(o, "band",
                                json_pack("{s:o,s:o,s:o,s:o,s:o}", "t_end_h",
                                          interval_json(&b->t_end_s, 1.0 / 3600), "amount_kmol",
                                          interval_json(&b->amount_mol, 1e-3), "x_mean",
                                          interval_json(&b->x_mean, 1), "yield",
                                          interval_json(&b->yield, 1), "recovery",
                                          interval_json(&b->recovery, 1)));
        }
        json_array_append_new(cuts, o);
    }
    for (size_t i = 0; i < res->n_rows; i++) {
        const stagecal_batch_row *r = &res->rows[i];
        json_array_append_new(
            rows,
            json_pack("{s:o,s:o,s:o,s:o,s:o,s:o,s:s,s:o,s:o,s:o,s:b}", "t_h",
                      cli_json_real(r->t_s / 3600), "w_kmol", cli_json_real(r->w_mol / 1000), "xb",
                      cli_json_real(r->xb), "xd", cli_json_real(r->xd), "reflux",
                      cli_json_real(r->reflux), "stages", cli_json_real(r->stages), "cut",
                      res->cuts[r->cut].name, "cut_amount_kmol", cli_json_real(r->cut_mol / 1000),
                      "cut_x", cli_json_real(r->cut_x), "distilled_kmol",
                      cli_json_real(r->total_mol / 1000), "outside", r->outside != 0));
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
        json_pack("{s:o,s:o,s:o,s:s}", "amount_kmol", cli_json_real(pb->w0_mol / 1000), "x_light",
                  cli_json_real(pb->xb0), "boilup_kmol_h", cli_json_real(pb->v_mol_s * 3.6),
                  "policy", policy_name((int)pb->policy.kind)));
    json_object_set_new(doc, "batch_time_h", cli_json_real(res->t_end_s / 3600));
    json_object_set_new(doc, "pot_end_kmol", cli_json_real(res->w_end_mol / 1000));
    json_object_set_new(doc, "pot_end_x", cli_json_real(res->xb_end));
    json_object_set_new(doc, "energy_gj",
                        pb->latent_j_mol > 0 ? cli_json_real(res->energy_j / 1e9) : json_null());
    json_object_set_new(doc, "latent_heat_kj_mol",
                        pb->latent_j_mol > 0 ? cli_json_real(pb->latent_j_mol / 1000)
                                             : json_null());
    json_object_set_new(doc, "latent_heat_source",
                        pb->latent_j_mol > 0 ? json_string(latent_token[latent_source])
                                             : json_null());
    json_object_set_new(doc, "mass_balance_error", cli_json_real(res->balance_error));
    json_object_set_new(doc, "reflux_range",
                        json_pack("{s:o,s:o}", "min", cli_json_real(res->r_min_used), "max",
                                  cli_json_real(res->r_max_used)));
    json_object_set_new(doc, "extrapolated", json_boolean(res->outside != 0));
    json_object_set_new(doc, "column_holdup", json_string("neglected"));
    json_object_set_new(doc, "cuts", cuts);
    json_object_set_new(doc, "trajectory", rows);
    json_object_set_new(doc, "warnings", warn);
    json_object_set_new(doc, "seed", json_integer((json_int_t)seed));
    if (have_band)
        json_object_set_new(
            doc, "band",
            json_pack("{s:o,s:I,s:I,s:I,s:o,s:o,s:s}", "level", cli_json_real(band->level),
                      "samples", (json_int_t)band->n_samples, "ok", (json_int_t)band->n_ok,
                      "failed", (json_int_t)band->n_failed, "batch_time_h",
                      interval_json(&band->t_end_s, 1.0 / 3600), "energy_gj",
                      interval_json(&band->energy_j, 1e-9), "covers",
                      "parameter uncertainty of the mean law (not window-to-window scatter)"));
    else
        json_object_set_new(doc, "band", json_null());
    json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    return doc;
}

static void print_human(const stagecal_batch_problem *pb, const stagecal_batch_result *res,
                        const stagecal_batch_band *band, int have_band, latent_from latent_source)
{
    printf("batch: %.4g kmol at x = %.4g, boil-up %.4g kmol/h, %s; column holdup neglected\n",
           pb->w0_mol / 1000, pb->xb0, pb->v_mol_s * 3.6, policy_name((int)pb->policy.kind));
    printf("%-12s %-14s %9s %9s %10s %8s %8s %8s %8s\n", "receiver", "ended by", "start[h]",
           "end[h]", "amount", "x_mean", "yield", "recovery", "R_end");
    for (size_t i = 0; i < res->n_cuts; i++) {
        const stagecal_batch_cut *c = &res->cuts[i];
        printf("%-12s %-14s %9.3f %9.3f %10.4g %8.5f %8.4f %8.4f %8.3g\n", c->name,
               stagecal_batch_stop_name(c->stop), c->t_start_s / 3600, c->t_end_s / 3600,
               c->amount_mol / 1000, c->x_mean, c->yield, c->recovery, c->reflux_end);
        if (have_band) {
            const stagecal_batch_cut_band *b = &band->cuts[i];
            printf("%-12s %-14s %9s [%.3f, %.3f] h  amount [%.4g, %.4g] kmol  x_mean [%.5f, "
                   "%.5f]\n",
                   "", "  band", "", b->t_end_s.low / 3600, b->t_end_s.high / 3600,
                   b->amount_mol.low / 1000, b->amount_mol.high / 1000, b->x_mean.low,
                   b->x_mean.high);
        }
    }
    printf("batch time %.3f h", res->t_end_s / 3600);
    if (have_band)
        printf(" [%.3f, %.3f] (%.0f %% band, %zu draws)", band->t_end_s.low / 3600,
               band->t_end_s.high / 3600, 100 * band->level, band->n_ok);
    printf("; pot left %.4g kmol at x = %.4g\n", res->w_end_mol / 1000, res->xb_end);
    if (pb->latent_j_mol > 0)
        printf("boil-up energy %.4g GJ (latent heat %.4g kJ/mol, from %s)\n", res->energy_j / 1e9,
               pb->latent_j_mol / 1000, latent_words[latent_source]);
    else
        printf("boil-up energy: unknown (give --latent or a column file with a latent heat)\n");
    printf("reflux ratio used: %.4g to %.4g\n", res->r_min_used, res->r_max_used);
}

int cmd_predict(int argc, char **argv)
{
    enum {
        O_MODEL = 256,
        O_COLUMN,
        O_ALPHA,
        O_KVALUE,
        O_CHARGE,
        O_XB0,
        O_BOILUP,
        O_REFLUX,
        O_XDSET,
        O_RMAX,
        O_PLAN,
        O_CUT,
        O_FF,
        O_LATENT,
        O_EVERY,
        O_OUT,
        O_SAMPLES,
        O_SEED,
        O_LEVEL,
        O_JSON,
        O_QUIET
    };
    static const struct option opts[] = {{"model", required_argument, NULL, O_MODEL},
                                         {"column", required_argument, NULL, O_COLUMN},
                                         {"alpha", required_argument, NULL, O_ALPHA},
                                         {"kvalue", required_argument, NULL, O_KVALUE},
                                         {"charge", required_argument, NULL, O_CHARGE},
                                         {"xb0", required_argument, NULL, O_XB0},
                                         {"boilup", required_argument, NULL, O_BOILUP},
                                         {"reflux", required_argument, NULL, O_REFLUX},
                                         {"xd-setpoint", required_argument, NULL, O_XDSET},
                                         {"reflux-max", required_argument, NULL, O_RMAX},
                                         {"plan", required_argument, NULL, O_PLAN},
                                         {"cut", required_argument, NULL, O_CUT},
                                         {"f-factor", required_argument, NULL, O_FF},
                                         {"latent", required_argument, NULL, O_LATENT},
                                         {"every", required_argument, NULL, O_EVERY},
                                         {"out", required_argument, NULL, O_OUT},
                                         {"samples", required_argument, NULL, O_SAMPLES},
                                         {"seed", required_argument, NULL, O_SEED},
                                         {"level", required_argument, NULL, O_LEVEL},
                                         {"json", no_argument, NULL, O_JSON},
                                         {"quiet", no_argument, NULL, O_QUIET},
                                         {"help", no_argument, NULL, 'h'},
                                         {0, 0, 0, 0}};
    cli_system sys;
    const char *model_path = NULL, *plan_path = NULL, *out_path = NULL;
    double charge = NAN, xb0 = NAN, boilup = NAN, reflux = NAN, xdset = NAN, rmax = NAN;
    double f_load = NAN, latent = NAN, every = 0.1, level = 0.95;
    long samples = 200, seed = 1;
    int json = 0, c, rc;
    stagecal_batch_cut_spec cuts[STAGECAL_BATCH_MAXCUTS];
    size_t n_cuts = 0;

    cli_system_init(&sys);
    optind = 0;
    opterr = 0;
    while ((c = getopt_long(argc, argv, ":h", opts, NULL)) != -1) {
        switch (c) {
        case 'h':
            fputs(usage_text, stdout);
            return CLI_EXIT_OK;
        case O_MODEL:
            model_path = optarg;
            break;
        case O_COLUMN:
            sys.column_path = optarg;
            break;
        case O_ALPHA:
            if (cli_parse_double("alpha", optarg, 0, "a relative volatility > 1", &sys.alpha))
                return CLI_EXIT_USAGE;
            break;
        case O_KVALUE:
            if (cli_parse_double("kvalue", optarg, 0, "a K value > 1", &sys.kvalue))
                return CLI_EXIT_USAGE;
            break;
        case O_CHARGE:
            if (cli_parse_double("charge", optarg, 0, "an amount in kmol", &charge))
                return CLI_EXIT_USAGE;
            break;
        case O_XB0:
            if (cli_parse_double("xb0", optarg, 0, "a mole fraction in (0, 1)", &xb0))
                return CLI_EXIT_USAGE;
            break;
        case O_BOILUP:
            if (cli_parse_double("boilup", optarg, 0, "a rate in kmol/h", &boilup))
                return CLI_EXIT_USAGE;
            break;
        case O_REFLUX:
            if (cli_parse_double("reflux", optarg, 0, "a finite reflux ratio >= 0", &reflux))
                return CLI_EXIT_USAGE;
            break;
        case O_XDSET:
            if (cli_parse_double("xd-setpoint", optarg, 0, "a mole fraction in (0, 1)", &xdset))
                return CLI_EXIT_USAGE;
            break;
        case O_RMAX:
            if (cli_parse_double("reflux-max", optarg, 0, "a finite reflux ratio > 0", &rmax))
                return CLI_EXIT_USAGE;
            break;
        case O_PLAN:
            plan_path = optarg;
            break;
        case O_CUT:
            if (n_cuts >= STAGECAL_BATCH_MAXCUTS)
                return cli_usage_error("option '--cut': at most %d receivers",
                                       STAGECAL_BATCH_MAXCUTS);
            if ((rc = parse_cut(optarg, &cuts[n_cuts])))
                return rc;
            n_cuts++;
            break;
        case O_FF:
            if (cli_parse_double("f-factor", optarg, 0, "an F-factor in Pa^0.5", &f_load))
                return CLI_EXIT_USAGE;
            break;
        case O_LATENT:
            if (cli_parse_double("latent", optarg, 0, "a latent heat in kJ/mol", &latent))
                return CLI_EXIT_USAGE;
            break;
        case O_EVERY:
            if (cli_parse_double("every", optarg, 0, "an interval in hours", &every))
                return CLI_EXIT_USAGE;
            break;
        case O_OUT:
            out_path = optarg;
            break;
        case O_SAMPLES:
            if (cli_parse_long("samples", optarg, 0, 100000, &samples))
                return CLI_EXIT_USAGE;
            break;
        case O_SEED:
            if (cli_parse_long("seed", optarg, 0, 2147483647L, &seed))
                return CLI_EXIT_USAGE;
            break;
        case O_LEVEL:
            if (cli_parse_double("level", optarg, 0, "a coverage in (0, 1)", &level))
                return CLI_EXIT_USAGE;
            break;
        case O_JSON:
            json = 1;
            break;
        case O_QUIET:
            cli_quiet = 1;
            break;
        default:
            return cli_usage_getopt(c, argv, "predict");
        }
    }
    if (optind < argc)
        return cli_usage_error("unexpected argument '%s' (predict takes options only)",
                               argv[optind]);
    if (!model_path)
        return cli_usage_error("option '--model' is required (see 'stagecal predict --help')");
    int npol = !isnan(reflux) + !isnan(xdset) + (plan_path != NULL);
    if (npol != 1)
        return cli_usage_error("give exactly one of '--reflux', '--xd-setpoint' or '--plan'");
    if (!isnan(rmax) && isnan(xdset))
        return cli_usage_error("option '--reflux-max' goes with '--xd-setpoint'");
    if (!(every > 0))
        return cli_usage_error("option '--every': %g is not a positive interval in hours", every);
    if (!(level > 0 && level < 1))
        return cli_usage_error("option '--level': %g is outside (0, 1)", level);
    if (json && out_path && strcmp(out_path, "-") == 0)
        return cli_usage_error("'--out -' and '--json' would both write to standard output");
    {
        const char *inputs[3] = {model_path, plan_path, sys.column_path};
        if ((rc = cli_check_output("out", out_path, inputs, 3)))
            return rc;
    }
    if (samples == 1)
        return cli_usage_error("option '--samples': 1 draw gives no band (use 0 or >= 2)");

    stagecal_batch_problem pb;
    stagecal_error err;
    stagecal_batch_problem_init(&pb);
    pb.w0_mol = NAN;
    pb.xb0 = NAN;
    pb.v_mol_s = NAN;
    if (plan_path && stagecal_batch_plan_load(plan_path, &pb, &err) != STAGECAL_OK)
        return cli_fail(&err);
    if (!isnan(charge))
        pb.w0_mol = charge * 1000;
    if (!isnan(xb0))
        pb.xb0 = xb0;
    if (!isnan(boilup))
        pb.v_mol_s = boilup * 1000 / 3600;
    if (isnan(pb.w0_mol))
        return cli_usage_error("option '--charge' is required (or a charge in the plan)");
    if (isnan(pb.xb0))
        return cli_usage_error("option '--xb0' is required (or a charge in the plan)");
    if (isnan(pb.v_mol_s))
        return cli_usage_error("option '--boilup' is required (or boilup_kmol_h in the plan)");
    if (!isnan(reflux)) {
        pb.policy.kind = STAGECAL_BATCH_CONSTANT_REFLUX;
        pb.policy.reflux = reflux;
    } else if (!isnan(xdset)) {
        pb.policy.kind = STAGECAL_BATCH_CONSTANT_DISTILLATE;
        pb.policy.xd_set = xdset;
        pb.policy.reflux_max = isnan(rmax) ? 30 : rmax;
    }
    if (n_cuts) {
        memcpy(pb.cuts, cuts, n_cuts * sizeof cuts[0]);
        pb.n_cuts = n_cuts;
    }
    if (pb.n_cuts == 0)
        return cli_usage_error("no receiver: give at least one '--cut KIND=VALUE' (or cuts in "
                               "the plan)");
    /* the latent heat: --latent, else the plan's, else (below) the column file's with
     * --column, else the one the model file records */
    latent_from latent_source = LATENT_NONE;
    if (!isnan(latent)) {
        pb.latent_j_mol = latent * 1000;
        latent_source = LATENT_OPTION;
    } else if (pb.latent_j_mol > 0) {
        latent_source = LATENT_PLAN;
    }
    if (stagecal_batch_check(&pb, &err) != STAGECAL_OK) {
        if (!plan_path)
            return cli_usage_error("%s", err.text);
        cli_error("%s: %s", plan_path, err.text); /* the plan's content is bad data */
        return CLI_EXIT_DATA;
    }

    stagecal_model m;
    stagecal_model_init(&m);
    if (stagecal_model_load(model_path, &m, &err) != STAGECAL_OK)
        return cli_fail(&err);
    if (m.form.uses_load && isnan(f_load)) {
        /* the message before the free: the form's name lives in the model */
        rc = cli_usage_error("the model's form '%s' uses the vapour load: give '--f-factor F'",
                             m.form.name);
        stagecal_model_free(&m);
        return rc;
    }
    stagecal_vle *own = NULL;
    if ((rc = open_vle(&sys, &m, model_path, &own))) {
        stagecal_model_free(&m);
        return rc;
    }
    if (isnan(latent) && pb.latent_j_mol == 0 && sys.have_column) {
        pb.latent_j_mol = sys.col.system.latent_j_mol;
        latent_source = LATENT_COLUMN;
    } else if (isnan(latent) && pb.latent_j_mol == 0 && !sys.column_path) {
        pb.latent_j_mol = m.latent_j_mol; /* 0 when the model file does not record one */
        latent_source = LATENT_MODEL;
    }

    stagecal_batch_model_law law = {&m, NULL, f_load};
    stagecal_batch_column col = {sys.vle, stagecal_batch_model_stages, &law, NULL, NULL};
    stagecal_batch_params par = stagecal_batch_default_params();
    stagecal_batch_result res;
    stagecal_batch_band band;
    int have_band = 0;
    par.output_dt_s = every * 3600;
    stagecal_batch_result_init(&res);
    rc = stagecal_batch_run(&pb, &col, &par, &res, &err);
    if (rc == STAGECAL_OK && samples >= 2) {
        rc = stagecal_batch_band_sample(&pb, sys.vle, &m, f_load, &par, &res, (size_t)samples,
                                        (unsigned long)seed, level, &band, &err);
        have_band = rc == STAGECAL_OK;
    }
    if (rc != STAGECAL_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    stagecal_batch_envelope_warnings(&m, f_load, &res);
    for (size_t i = 0; i < res.n_warnings; i++)
        cli_warn("%s", res.warnings[i]);
    if (out_path && (rc = write_csv(out_path, &res)))
        goto done;
    if (json)
        rc = cli_json_print(result_json(&pb, &res, &band, have_band, model_path, latent_source,
                                        (unsigned long)seed));
    else if (!(out_path && strcmp(out_path, "-") == 0))
        print_human(&pb, &res, &band, have_band, latent_source);
done:
    stagecal_batch_result_free(&res);
    stagecal_vle_free(own);
    sys.vle = own ? NULL : sys.vle;
    cli_system_close(&sys);
    stagecal_model_free(&m);
    return rc;
}

/*
 * cmd_steps.c — `stagecal steps`: step a stated number of stages down from xD at a
 * reflux ratio and report the pot composition xB and the stage profile.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/stages.h"

static const struct cli_usage usage = {
    "usage: stagecal steps (--alpha A | --kvalue K | --column FILE) --xd XD\n"
    "                      --reflux R|inf --stages N [--murphree E] [--json] [--quiet]\n",
    "Steps N equilibrium stages (the pot included, fractional allowed, N >= 1) down from\n"
    "the distillate composition XD at reflux ratio R and prints the pot composition xB\n"
    "and the stage profile (stage 1 at the top, the pot last).\n",
    "Exit status: 0 success (stages that cannot be stepped are a status, not an error),\n"
    "2 usage error, 65 bad data (column file), 66 missing file, 70 internal.\n"};

/* A condition stepped: the request, the status, xB and the stage profile. */
struct stepped {
    double xd, reflux, nstages, murphree;
    int status; /* stagecal_stages_status */
    double xb;
    const stagecal_stage_point *prof;
    size_t len;
};

/* The result as JSON (stagecal-steps); bubble temperatures when the model has them. An exit
 * code. */
static int steps_json(const struct stepped *st, const cli_system *sys)
{
    int has_t = stagecal_vle_has_temperature(sys->vle);
    stagecal_condenser cond = sys->have_column ? sys->col.condenser : STAGECAL_CONDENSER_TOTAL;
    double lv = isinf(st->reflux) ? 1.0 : st->reflux / (st->reflux + 1.0);
    json_t *doc = json_object(), *arr = json_array();
    json_object_set_new(doc, "format", json_string("stagecal-steps"));
    json_object_set_new(doc, "version", json_integer(1));
    json_object_set_new(doc, "status", json_string(stagecal_stages_status_name(st->status)));
    json_object_set_new(doc, "xd", json_real(st->xd));
    json_object_set_new(doc, "reflux", cli_json_reflux(st->reflux));
    json_object_set_new(doc, "lv", json_real(lv));
    json_object_set_new(doc, "stages", json_real(st->nstages));
    json_object_set_new(doc, "column_stages",
                        cli_json_real(stagecal_convention_column_stages(st->nstages, cond)));
    json_object_set_new(doc, "stage_convention", json_string(stagecal_convention_text(cond)));
    json_object_set_new(doc, "murphree", json_real(st->murphree));
    json_object_set_new(doc, "xb",
                        st->status == STAGECAL_STAGES_OK ? json_real(st->xb) : json_null());
    json_object_set_new(doc, "model", cli_system_json(sys));
    json_object_set_new(
        doc, "units",
        json_pack("{s:s,s:s,s:s}", "x", "mol/mol (light)", "y", "mol/mol (light)", "t_k", "K"));
    for (size_t i = 0; st->status == STAGECAL_STAGES_OK && i < st->len; i++) {
        json_t *p = json_object();
        json_object_set_new(p, "stage", json_real(st->prof[i].stage));
        json_object_set_new(p, "x", json_real(st->prof[i].x));
        json_object_set_new(p, "y", json_real(st->prof[i].y));
        double t;
        if (has_t && stagecal_vle_tbubble(sys->vle, st->prof[i].x, &t) == STAGECAL_OK)
            json_object_set_new(p, "t_k", json_real(t));
        json_array_append_new(arr, p);
    }
    json_object_set_new(doc, "profile", arr);
    json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    return cli_json_print(doc);
}

/* The result for people: the profile table (T in degrees C when the model has it) and xB,
 * or the status. */
static void print_steps(const struct stepped *st, const cli_system *sys)
{
    int has_t = stagecal_vle_has_temperature(sys->vle);
    if (st->status != STAGECAL_STAGES_OK) {
        printf("status: %s — %g stages cannot be stepped from xD = %g at R = %g\n",
               stagecal_stages_status_name(st->status), st->nstages, st->xd, st->reflux);
        return;
    }
    printf("%g stages (the pot included) from xD = %.6f at R = %g, E_MV = %g\n", st->nstages,
           st->xd, st->reflux, st->murphree);
    printf("%8s  %12s  %12s%s\n", "stage", "x", "y", has_t ? "      T [C]" : "");
    for (size_t i = 0; i < st->len; i++) {
        double t;
        printf("%8.3f  %12.8f  %12.8f", st->prof[i].stage, st->prof[i].x, st->prof[i].y);
        if (has_t && stagecal_vle_tbubble(sys->vle, st->prof[i].x, &t) == STAGECAL_OK)
            printf("  %9.2f", t - 273.15);
        putchar('\n');
    }
    printf("pot: xB = %.10f\n", st->xb);
}

int cmd_steps(int argc, char **argv, cli_ctx *ctx)
{
    double xd = NAN, reflux = NAN, nstages = NAN, murphree = 1.0;
    const struct cli_option opts[] = {
        OPT_SYSTEM(&ctx->sys),
        OPT_XD(&xd),
        OPT_REFLUX(&reflux, "reflux ratio L/D >= 0, or 'inf' for total reflux"),
        OPT_STAGES(&nstages, "equilibrium stages including the pot, N >= 1"),
        OPT_MURPHREE(&murphree),
        OPT_END_COMMON(ctx),
    };
    cli_system *sys = &ctx->sys;
    int first, rc;

    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    if (first < argc)
        return cli_usage_error("unexpected argument '%s' (steps takes options only)", argv[first]);
    if ((rc = cli_require("xd", xd)) || (rc = cli_require("reflux", reflux)) ||
        (rc = cli_require("stages", nstages)))
        return rc;
    stagecal_stages_params par = stagecal_stages_default_params();
    /* Checked before sizing the profile: (size_t)ceil(N) of a huge N is undefined. */
    if (nstages > (double)par.max_stages)
        return cli_usage_error("option '--stages': %g is above %zu (expected at most the "
                               "stepping cap of whole stages)",
                               nstages, par.max_stages);
    if ((rc = cli_system_open(sys)))
        return rc;

    size_t cap = (size_t)ceil(nstages) + 1, len = 0;
    stagecal_stage_point *prof = calloc(cap, sizeof *prof);
    stagecal_error err;
    double xb = 0;
    int status = 0;
    if (!prof) {
        cli_error("out of memory");
        return CLI_EXIT_SOFTWARE;
    }
    stagecal_error_clear(&err);
    rc = stagecal_stages_step(sys->vle, xd, reflux, nstages, murphree, &par, &xb, prof, cap, &len,
                              &status, &err);
    if (rc != STAGECAL_OK) {
        free(prof);
        return cli_fail(&err);
    }
    struct stepped st = {xd, reflux, nstages, murphree, status, xb, prof, len > cap ? cap : len};
    if (ctx->json) {
        rc = steps_json(&st, sys);
    } else {
        print_steps(&st, sys);
        rc = CLI_EXIT_OK;
    }
    free(prof);
    return rc;
}

/*
 * predict_dynamic.c — `stagecal predict`'s dynamic batch model (predict.h): whether it
 * runs (--dynamics, the column file's holdup, the start-up options) and what it adds to
 * the outputs (the holdup, the start-up, each receiver's delay against the quasi-steady
 * batch run beside it). The model itself is the library's (src/batch_dynamic.c).
 */
#include <math.h>
#include <stdio.h>

#include "predict.h"

#include "banned.h" /* last: the system headers before it may use what it bans */

int predict_dyn_pick(int dynamics, double startup_xd, double startup_h, const cli_system *sys,
                     stagecal_batch_dynamics *dy, int *dyn)
{
    int stated = sys->have_column && sys->col.holdup_column_mol > 0;
    stagecal_batch_dynamics_init(dy);
    *dyn = dynamics == DYN_HOLDUP || (dynamics == DYN_DEFAULT && stated);
    if (!*dyn) {
        if (!isnan(startup_xd) || !isnan(startup_h))
            return cli_usage_error("options '--startup-xd' and '--startup-time' go with the "
                                   "dynamic model (a column file that states a holdup)");
        return 0;
    }
    if (!stated)
        return cli_usage_error("'--dynamics holdup' needs the column's liquid holdup: give "
                               "'--column FILE' with a 'holdup' (docs/column-file.md)");
    if (!isnan(startup_xd) && !isnan(startup_h))
        return cli_usage_error("give one of '--startup-xd' and '--startup-time'");
    dy->holdup_column_mol = sys->col.holdup_column_mol;
    dy->holdup_drum_mol = sys->col.holdup_drum_mol;
    /* the band draws the holdup too: the file's u_rel, 0.25 when it states none (column.h) */
    dy->holdup_u_rel = sys->col.holdup_u_rel > 0 ? sys->col.holdup_u_rel : 0.25;
    if (!isnan(startup_xd))
        dy->startup_xd = startup_xd;
    if (!isnan(startup_h))
        dy->startup_max_s = startup_h * STAGECAL_UNIT_H;
    return 0;
}

void predict_dyn_cut_json(json_t *o, const stagecal_batch_cut *c, const struct dyn_view *dv,
                          size_t i)
{
    json_object_set_new(o, "xd_first", cli_json_real(c->xd_first));
    json_object_set_new(o, "xd_last", cli_json_real(c->xd_last));
    json_object_set_new(o, "xd_sd", cli_json_real(c->xd_sd));
    if (!dv)
        return;
    const stagecal_batch_cut *q = &dv->qs->cuts[i];
    json_object_set_new(o, "delay_h", cli_json_real(H(c->t_end_s - q->t_end_s)));
    json_object_set_new(o, "quasi_steady",
                        json_pack("{s:o,s:o,s:o,s:o}", "t_end_h", cli_json_real(H(q->t_end_s)),
                                  "amount_kmol", cli_json_real(KMOL(q->amount_mol)), "x_mean",
                                  cli_json_real(q->x_mean), "xd_sd", cli_json_real(q->xd_sd)));
}

void predict_dyn_json(json_t *doc, const stagecal_batch_problem *pb,
                      const stagecal_batch_result *res, const struct dyn_view *dv)
{
    json_object_set_new(doc, "dynamics", json_string(dv ? "holdup" : "quasi-steady"));
    if (!dv) {
        json_object_set_new(doc, "column_holdup", json_string("neglected"));
        json_object_set_new(doc, "startup_h", json_null());
        return;
    }
    const stagecal_batch_dynamics *dy = dv->dy;
    json_object_set_new(
        doc, "column_holdup",
        json_pack(
            "{s:o,s:o,s:o,s:o,s:s}", "column_kmol", cli_json_real(KMOL(dy->holdup_column_mol)),
            "drum_kmol", cli_json_real(KMOL(dy->holdup_drum_mol)), "fraction_of_charge",
            cli_json_real((dy->holdup_column_mol + dy->holdup_drum_mol) / pb->w0_mol), "u_rel",
            dv->u_rel > 0 ? cli_json_real(dv->u_rel) : json_null(), "source", "column file"));
    json_object_set_new(doc, "startup_h", cli_json_real(H(res->t_startup_s)));
    json_object_set_new(doc, "xd_startup", cli_json_real(res->xd_startup));
    json_object_set_new(doc, "stage_count_changes", json_integer((json_int_t)res->n_remaps));
    json_object_set_new(doc, "quasi_steady_batch_time_h", cli_json_real(H(dv->qs->t_end_s)));
}

void predict_dyn_print_cut(const stagecal_batch_cut *c, const struct dyn_view *dv, size_t i)
{
    printf("%-12s   distillate x %.5f -> %.5f, smearing (sd of x) %.4f", "", c->xd_first,
           c->xd_last, c->xd_sd);
    if (dv)
        printf("; quasi-steady: end %.3f h (delay %+.3f h), x_mean %.5f, sd %.4f",
               H(dv->qs->cuts[i].t_end_s), H(c->t_end_s - dv->qs->cuts[i].t_end_s),
               dv->qs->cuts[i].x_mean, dv->qs->cuts[i].xd_sd);
    printf("\n");
}

void predict_dyn_print_head(const stagecal_batch_problem *pb, const stagecal_batch_result *res,
                            const struct dyn_view *dv)
{
    if (!dv)
        printf("quasi-steady, column holdup neglected\n");
    else
        printf("dynamic: column holdup %.4g kmol, drum %.4g kmol (%.3g %% of the charge)\n"
               "start-up at total reflux: %.3f h to the first draw (xD = %.5f)\n",
               KMOL(dv->dy->holdup_column_mol), KMOL(dv->dy->holdup_drum_mol),
               100 * (dv->dy->holdup_column_mol + dv->dy->holdup_drum_mol) / pb->w0_mol,
               H(res->t_startup_s), res->xd_startup);
}

void predict_dyn_print_model(const struct dyn_view *dv)
{
    printf("dynamic model: equal liquid holdup on the column stages (the column file's, "
           "u = %.0f %%), constant molar overflow, effective (ideal) stages from the model; "
           "the start-up and the delays scale with the holdup; quasi-steady batch time "
           "%.3f h\n",
           100 * dv->dy->holdup_u_rel, H(dv->qs->t_end_s));
}

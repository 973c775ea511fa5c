/*
 * predict_band.c — `stagecal predict`'s band in its outputs (predict.h): per receiver and
 * for the batch, as JSON members and as the lines under the table. The band itself is
 * the library's (stagecal_batch_band_sample_scatter, src/batch_band.c).
 */
#include <stdio.h>

#include "predict.h"

#include "banned.h" /* last: the system headers before it may use what it bans */

static json_t *interval_json(const stagecal_batch_interval *iv, double scale)
{
    return json_pack("{s:o,s:o,s:o}", "nominal", cli_json_real(iv->nominal * scale), "low",
                     cli_json_real(iv->low * scale), "high", cli_json_real(iv->high * scale));
}

json_t *predict_band_cut_json(const stagecal_batch_cut_band *b)
{
    return json_pack("{s:o,s:o,s:o,s:o,s:o}", "t_end_h", interval_json(&b->t_end_s, H(1.0)),
                     "amount_kmol", interval_json(&b->amount_mol, 1 / STAGECAL_UNIT_KMOL), "x_mean",
                     interval_json(&b->x_mean, 1), "yield", interval_json(&b->yield, 1), "recovery",
                     interval_json(&b->recovery, 1));
}

json_t *predict_band_json(const stagecal_batch_band *band, const struct dyn_view *dv)
{
    json_t *o = json_pack(
        "{s:o,s:I,s:I,s:I,s:o,s:o,s:s}", "level", cli_json_real(band->level), "samples",
        (json_int_t)band->n_samples, "ok", (json_int_t)band->n_ok, "failed",
        (json_int_t)band->n_failed, "batch_time_h", interval_json(&band->t_end_s, H(1.0)),
        "energy_gj", interval_json(&band->energy_j, 1 / STAGECAL_UNIT_GJ), "covers",
        band->run_scatter == STAGECAL_BATCH_SCATTER_PROCESS
            ? "parameter uncertainty (t draws) and the run-to-run variation of one batch's "
              "stage count (prediction band: the scatter function sigma(R) less the windows' "
              "stated measurement error, floored at 0 in every draw)"
        : band->run_scatter
            ? "parameter uncertainty (t draws) and the whole scatter of one window's stage "
              "count, sigma(R) (prediction band, conservative for one batch: sigma(R) holds the "
              "windows' measurement error too)"
            : "parameter uncertainty of the mean law, t draws (not the run-to-run "
              "scatter: --run-scatter)");
    if (band->run_scatter) /* which part of the scatter was drawn */
        json_object_set_new(o, "scatter_part",
                            json_string(band->run_scatter == STAGECAL_BATCH_SCATTER_PROCESS
                                            ? "process"
                                            : "window"));
    if (band->run_scatter) /* the dof of the run-to-run scatter's t draws */
        json_object_set_new(o, "scatter_dof", cli_json_real(band->dof_scatter));
    if (dv) /* the dynamic model's draws also draw the holdup */
        json_object_set_new(o, "holdup_u_rel", cli_json_real(dv->dy->holdup_u_rel));
    return o;
}

void predict_band_print_cut(const stagecal_batch_cut_band *b)
{
    printf("%-12s %-14s %9s [%.3f, %.3f] h  amount [%.4g, %.4g] kmol  x_mean [%.5f, "
           "%.5f]\n",
           "", "  band", "", H(b->t_end_s.low), H(b->t_end_s.high), KMOL(b->amount_mol.low),
           KMOL(b->amount_mol.high), b->x_mean.low, b->x_mean.high);
}

void predict_band_print_time(const stagecal_batch_band *band, const struct dyn_view *dv)
{
    printf(" [%.3f, %.3f] (%.0f %% %s band, t at %g dof, %zu draws)", H(band->t_end_s.low),
           H(band->t_end_s.high), 100 * band->level,
           band->run_scatter == STAGECAL_BATCH_SCATTER_PROCESS
               ? "prediction (the batch's run-to-run variation included)"
           : band->run_scatter ? "prediction (a window's whole scatter included: conservative)"
                               : "confidence (mean law; without run-to-run scatter)",
           band->dof, band->n_ok);
    if (band->run_scatter && band->dof_scatter != band->dof)
        printf(" (the run-to-run scatter sigma(R) at %.3g dof)", band->dof_scatter);
    if (dv)
        printf(" (holdup drawn too, u = %.0f %%)", 100 * dv->dy->holdup_u_rel);
}

/*
 * tool_history.c — coverage study of the history fit (include/stagecal/history.h) on
 * synthetic histories from tests/synth_history.h: 12–24 months, a repack in the
 * middle, a stated loss rate, 2–4 runs a month with 1–3 windows each at several R.
 *
 * For each history it fits form "saturating" with the repack as an event and checks
 * whether the 95 % intervals hold the truth: the loss rate at R = 3 (stages a month)
 * and the relative loss of the current segment, the stages at R = 3 at the last
 * window, and the Fieller band of the date the stages at R = 3 fall below a
 * requirement set so that the true crossing lies 1–6 months after the last window.
 *
 * usage: tool_history [N [SEED [RUN_SD [SE_MISSTATE]]]]   (defaults 400, 1, 0.15, 1)
 * Output: one table (coverage with its binomial standard error, mean half-widths).
 */
#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "synth_history.h"

int main(int argc, char **argv)
{
    int n_hist = argc > 1 ? atoi(argv[1]) : 400;
    unsigned long seed = argc > 2 ? strtoul(argv[2], NULL, 10) : 1;
    synth_history_cfg cfg = synth_history_default();
    if (argc > 3)
        cfg.run_sd = atof(argv[3]);
    if (argc > 4)
        cfg.se_misstate = atof(argv[4]);
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    stagecal_form form;
    stagecal_form_parse("saturating", &form, NULL);
    static stagecal_history_point pts[4000];
    size_t fits = 0, c_loss = 0, c_rel = 0, c_now = 0, c_cross = 0, n_cross = 0, failed = 0;
    size_t open_band = 0;
    double z2 = 0, w_loss = 0, w_now = 0, w_cross = 0;
    const double M = STAGECAL_TREND_MONTH_S, R = 3.0;
    for (int h = 0; h < n_hist; h++) {
        cfg.months = 12 + (int)gsl_rng_uniform_int(rng, 13);
        synth_history_truth tr;
        size_t n = synth_history_make(rng, &cfg, pts, 4000, &tr);
        double lead = 1 + 5 * gsl_rng_uniform(rng); /* months past the last window */
        double hr = cfg.a * (1 - exp(-cfg.b * R));
        double tau_now = (tr.last_s - tr.repack_s) / M;
        double req = hr * (1 - cfg.k * (tau_now + lead));
        stagecal_trend_event ev = synth_history_repack(&tr);
        stagecal_history_params par = stagecal_history_default_params();
        par.r_ref = R;
        par.required = req;
        stagecal_history_fit fit;
        stagecal_error err;
        if (stagecal_history_fit_points(&form, pts, n, &ev, 1, "sim", &par, &fit, &err) != 0) {
            fprintf(stderr, "history %d: %s\n", h, err.text);
            failed++;
            stagecal_history_free(&fit);
            continue;
        }
        fits++;
        const stagecal_history_segment *cur = &fit.segments[fit.current];
        double loss_true = hr * cfg.k;
        z2 += pow((cur->loss.value - hr * cfg.k) / cur->loss.se, 2);
        c_loss += cur->loss.low <= loss_true && loss_true <= cur->loss.high;
        c_rel += cur->rel_loss.low <= cfg.k && cfg.k <= cur->rel_loss.high;
        w_loss += 0.5 * (cur->loss.high - cur->loss.low);
        double now_true = hr * (1 - cfg.k * tau_now);
        c_now += fit.now.low <= now_true && now_true <= fit.now.high;
        w_now += 0.5 * (fit.now.high - fit.now.low);
        if (fit.has_crossing) {
            double t_true = tr.last_s + lead * M;
            const stagecal_trend_forecast *fc = &fit.crossing;
            n_cross++;
            if (fc->status == STAGECAL_FORECAST_NOT_DECLINING) {
                open_band++;
            } else {
                c_cross += fc->low_s <= t_true && t_true <= fc->high_s;
                if (fc->status == STAGECAL_FORECAST_OK)
                    w_cross += 0.5 * (fc->high_s - fc->low_s) / M;
                else
                    open_band++;
            }
        }
        stagecal_history_free(&fit);
    }
    gsl_rng_free(rng);
    double nf = (double)fits;
#define COV(c, m) (double)(c) / (double)(m), sqrt((double)(c) / (m) * (1 - (double)(c) / (m)) / (m))
    printf("history fit coverage study: %d histories (%zu fitted, %zu failed), seed %lu, run sd "
           "%.3g, stated/true se %.3g\n",
           n_hist, fits, failed, seed, cfg.run_sd, cfg.se_misstate);
    printf("| quantity | coverage of the 95 %% interval | mean half-width |\n|---|---|---|\n");
    printf("| loss rate at R = 3 [stages/month] | %.3f ± %.3f | %.4f |\n", COV(c_loss, nf),
           w_loss / nf);
    printf("| relative loss rate [1/month] | %.3f ± %.3f | |\n", COV(c_rel, nf));
    printf("| stages at R = 3 now | %.3f ± %.3f | %.3f |\n", COV(c_now, nf), w_now / nf);
    printf("| mean squared z of the loss rate | %.3f | |\n", z2 / nf);
    if (n_cross)
        printf("| crossing date (Fieller band) | %.3f ± %.3f | %.2f months (finite bands; %zu "
               "open or not declining) |\n",
               COV(c_cross, (double)n_cross),
               n_cross > open_band ? w_cross / (double)(n_cross - open_band) : 0.0, open_band);
    return failed > (size_t)n_hist / 100 ? 1 : 0;
}

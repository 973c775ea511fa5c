/*
 * bench_batch.c — speed of one batch prediction (not run by ctest; STYLE: no timed
 * unit tests). A 10-hour batch of the invented demo kind: 10 kmol of a 50 % charge,
 * α = 2.5, boil-up 2.4 kmol/h, the saturating law stages = 9·(1 − exp(−0.5 R)) from a
 * model, constant distillate 0.95 up to R = 20, then a slop cut at R = 20 down to a
 * pot of 0.02, one trajectory row every 0.1 h. Prints the batch time, the number of
 * ODE steps and right-hand-side evaluations, and the median wall time of 21 runs.
 * Target (issue 5): < 50 ms per prediction. Then the same batch with the dynamic model
 * (column holdup 4 % of the charge, drum 1 %; src/batch_dynamic.c): its start-up, runs/s and
 * rows/s, and the delay of the first cut against the quasi-steady batch.
 */
#include <math.h>
#include <stdio.h>
#include <sys/resource.h>
#include <stdlib.h>
#include <time.h>

#include "stagecal/batch.h"
#include "stagecal/form.h"
#include "stagecal/model.h"

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int main(void)
{
    enum { RUNS = 21 };
    stagecal_error err;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, &err);
    stagecal_model m;
    stagecal_batch_problem pb;
    stagecal_batch_params par = stagecal_batch_default_params();
    stagecal_batch_result res;
    double t[RUNS];
    if (!vle)
        return 1;
    stagecal_model_init(&m);
    if (stagecal_form_parse("saturating", &m.form, &err) != STAGECAL_OK)
        return 1;
    m.theta[0] = 9;
    m.theta[1] = 0.5;
    m.r_min = 1;
    m.r_max = 25;
    stagecal_batch_model_law law = {&m, NULL, NAN};
    stagecal_batch_column col = {vle, stagecal_batch_model_stages, &law, NULL, NULL};
    stagecal_batch_problem_init(&pb);
    pb.w0_mol = 10000;
    pb.xb0 = 0.5;
    pb.v_mol_s = 2400.0 / 3600;
    pb.latent_j_mol = 35000;
    pb.policy.kind = STAGECAL_BATCH_CONSTANT_DISTILLATE;
    pb.policy.xd_set = 0.95;
    pb.policy.reflux_max = 20;
    pb.n_cuts = 2;
    pb.cuts[0].kind = STAGECAL_BATCH_UNTIL_POT_X;
    pb.cuts[0].value = 0.01;
    pb.cuts[1].kind = STAGECAL_BATCH_UNTIL_POT_X;
    pb.cuts[1].value = 0.02;
    par.output_dt_s = 360;
    stagecal_batch_result_init(&res);
    for (int i = 0; i < RUNS; i++) {
        double t0 = now_s();
        if (stagecal_batch_run(&pb, &col, &par, &res, &err) != STAGECAL_OK) {
            fprintf(stderr, "bench_batch: %s\n", err.text);
            return 1;
        }
        t[i] = now_s() - t0;
    }
    qsort(t, RUNS, sizeof t[0], cmp);
    double qs_cut1 = res.cuts[0].t_end_s;
    printf("%.0f trajectory rows/s (median), %.1f predictions/s\n",
           (double)res.n_rows / t[RUNS / 2], 1.0 / t[RUNS / 2]);
    printf("batch time %.3f h, cuts: %s %.3f h (%s), %s %.3f h; rows %zu, steps %zu, rhs %zu\n",
           res.t_end_s / 3600, res.cuts[0].name, res.cuts[0].t_end_s / 3600,
           stagecal_batch_stop_name(res.cuts[0].stop), res.cuts[1].name, res.cuts[1].t_end_s / 3600,
           res.n_rows, res.n_steps, res.n_rhs);
    printf("prediction wall time: median %.2f ms, min %.2f ms, max %.2f ms (%d runs; target < "
           "50 ms)\n",
           1e3 * t[RUNS / 2], 1e3 * t[0], 1e3 * t[RUNS - 1], RUNS);
    stagecal_batch_dynamics dy;
    stagecal_batch_dynamics_init(&dy);
    dy.holdup_column_mol = 0.04 * pb.w0_mol;
    dy.holdup_drum_mol = 0.01 * pb.w0_mol;
    par.dynamics = &dy;
    for (int i = 0; i < RUNS; i++) {
        double t0 = now_s();
        if (stagecal_batch_run(&pb, &col, &par, &res, &err) != STAGECAL_OK) {
            fprintf(stderr, "bench_batch (dynamic): %s\n", err.text);
            return 1;
        }
        t[i] = now_s() - t0;
    }
    qsort(t, RUNS, sizeof t[0], cmp);
    printf("dynamic (holdup 4 %% + drum 1 %%): start-up %.3f h, batch time %.3f h, first cut "
           "%.3f h (%+.3f h against quasi-steady); rows %zu, steps %zu, rhs %zu, stage-count "
           "changes %zu\n",
           res.t_startup_s / 3600, res.t_end_s / 3600, res.cuts[0].t_end_s / 3600,
           (res.cuts[0].t_end_s - qs_cut1) / 3600, res.n_rows, res.n_steps, res.n_rhs,
           res.n_remaps);
    printf("dynamic wall time: median %.2f ms, min %.2f ms, max %.2f ms (%d runs); %.1f runs/s, "
           "%.0f rows/s (median)\n",
           1e3 * t[RUNS / 2], 1e3 * t[0], 1e3 * t[RUNS - 1], RUNS, 1.0 / t[RUNS / 2],
           (double)res.n_rows / t[RUNS / 2]);
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    printf("peak RSS %.1f MB\n", ru.ru_maxrss / 1024.0);
    stagecal_batch_result_free(&res);
    stagecal_model_free(&m);
    stagecal_vle_free(vle);
    return 0;
}

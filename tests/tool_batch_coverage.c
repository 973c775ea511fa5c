/*
 * tool_batch_coverage.c — batch-level coverage study of `stagecal predict`'s band: does the
 * 95 % band of a new batch's outcome (batch time, the product's mean composition) cover what
 * that batch actually does, with and without the run-to-run scatter, when the column's stage
 * count really varies from batch to batch by a known amount τ?
 *
 * Usage: [STUDY_COV=hc2-bm|cr2-run|...] tool_batch_coverage REPLICATIONS SEED TAU [SAMPLES] [both]
 * [dump] [runtest] TAU      sd of the per-batch random effect on the stage count [stages], ≥ 0
 * SAMPLES  draws per band (default 200, predict's default) both     problems A and B (below;
 * default A only) dump one line per data set on stderr (below) runtest  the calibrations only
 * (no batch, no band): the runs-differ test's rejections (below), quickly
 *
 * The runs-differ test (every mode): calibrate's cal.run_test (Wald's variance-component F test
 * on the stage-space fit, src/calibrate_runs.c) and, for comparison, the plain one-way analysis
 * of variance of the same windows' standardised residuals (stages − N(R; θ̂ of the stage-space
 * fit))/se grouped by run, F on G − 1 and n − G dof, computed here; each rejects at p < 0.05.
 * Printed: data sets tested, rejections with Wilson 95 % intervals (at τ = 0 the false-alarm
 * rate, near 0.05 for a calibrated test; at τ > 0 the power), the mean dof. Data sets are the
 * same for a seed with or without runtest (the bands draw from their own seeds).
 *
 * What it simulates (per data set; one GSL mt19937 stream seeded with SEED serves them all):
 *   - the column: constant α = 1.6 (Smoker's closed form for the pot, tests/oracle_smoker.h,
 *     independent of the stepping under test), total condenser, no holdup; the mean law
 *     N(R) = 10·(1 − exp(−0.45 R)) stages (pot included), the law of tests/tool_coverage.c's
 *     measured-r regime;
 *   - the per-batch random effect: each production run k has its own stage count
 *     N(R) + δ_k at every R it runs at, δ_k ~ N(0, τ²) drawn once per run (a column whose
 *     efficiency differs from batch to batch: fouling, load, packing wetting);
 *   - the logs (tests/synth_runlog.h's simulator, one run at a time, relabelled S1..S8):
 *     8 runs, each a 50-row total-reflux start-up and then 50 rows at each of two set points,
 *     run k at R = {1.5, 2.5, 4, 6, 10}[2k mod 5] and [(2k + 1) mod 5] (every set point in
 *     three or four runs), one row a minute; the pot follows the Rayleigh balance from 300 mol
 *     at xB = 0.35 (0.002 mol/s distillate); white analyser noise u(xD) = 0.0015,
 *     u(xB) = 0.0025; R logged as its set point;
 *   - calibrate: the whole chain (stagecal_calibrate_data: reading, windows, evidence, both
 *     fits, the scatter function), form "saturating", holdup compensation off; the model it
 *     would write (cal.model; the file round trip is tests/test_model.c's business);
 *   - a new batch of the same column with a fresh δ ~ N(0, τ²): 10 kmol at xB0 = 0.5, boil-up
 *     2.4 kmol/h, two problems: (A) constant R = 2.5 until the pot reaches xB = 0.3; (B)
 *     constant distillate xD = 0.93 with R raised up to 10, until R reaches 10;
 *     its true outcome is stagecal_batch_run with the true law plus that δ (the quantity
 *     predict's band is about: band.batch_time_h, and cuts[0].x_mean — the percentiles of
 *     the batch run at each draw of the law, src/batch_band.c); the mean-law outcome is the
 *     same with δ = 0 (what the confidence band, without --run-scatter, is about);
 *   - the bands: stagecal_batch_band_sample_scatter at level 0.95 with SAMPLES draws, seed
 *     the replication's number, without the scatter (0), with the window scatter σ(R) (1:
 *     STAGECAL_BATCH_SCATTER_WINDOW, predict --run-scatter's default) and with the batch's
 *     process part only (2: STAGECAL_BATCH_SCATTER_PROCESS, --scatter-part process: σ(R)
 *     less the windows' mean stated variance at R, from the model's var_ratio).
 * It prints, per problem, quantity and band, the coverage k/n of the new batch's true
 * outcome with its Wilson 95 % interval (Wilson 1927, JASA 22, 209; from memory), the same
 * for the mean-law outcome, and the mean band width; and the windows' mean stated se of the
 * stage count and the model's mean σ(R) at R = 2.5, the mean s² (var_ratio). Data sets the
 * calibration refuses or whose band fails are counted and left out.
 * dump: "ds REP OK τ δ_new var_ratio σ(2.5) se_fit(2.5) nominal truth mean-law lo0 hi0 lo1 hi1 lo2
 * hi2" (problem A's batch time, hours). Exit status 0, or 1 on bad arguments or a set-up failure.
 */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "stagecal/batch.h"
#include "study_cov.h"
#include "stagecal/calibrate.h"
#include "stagecal/column.h"
#include "synth_batch.h"

#define BC_NPROB 2 /* problems A, B */
#define BC_NQTY 2  /* batch time, product x_mean */
#define BC_NBAND 3 /* without, window scatter, process scatter */

/* The true column of the new batch: the law plus its δ (held at 1 stage, as the band). */
static int bc_true_stages(void *data, double r, double *stages, unsigned *outside,
                          stagecal_error *err)
{
    (void)err;
    *stages = fmax(bc_law(r) + *(const double *)data, 1.0);
    *outside = 0;
    return STAGECAL_OK;
}

static void bc_problem(int which, stagecal_batch_problem *pb)
{
    memset(pb, 0, sizeof *pb);
    pb->w0_mol = 10000;
    pb->xb0 = 0.5;
    pb->v_mol_s = 2400.0 / 3600.0;
    pb->n_cuts = 1;
    snprintf(pb->cuts[0].name, sizeof pb->cuts[0].name, "product");
    if (which == 0) {
        pb->policy.kind = STAGECAL_BATCH_CONSTANT_REFLUX;
        pb->policy.reflux = 2.5;
        pb->cuts[0].kind = STAGECAL_BATCH_UNTIL_POT_X;
        pb->cuts[0].value = 0.3;
    } else {
        pb->policy.kind = STAGECAL_BATCH_CONSTANT_DISTILLATE;
        pb->policy.xd_set = 0.93;
        pb->policy.reflux_max = 10;
        pb->cuts[0].kind = STAGECAL_BATCH_UNTIL_REFLUX;
        pb->cuts[0].value = 10;
    }
}

static void wilson(long k, long n, double *lo, double *hi)
{
    double z = gsl_cdf_ugaussian_Pinv(0.975), p = (double)k / (double)n, z2n = z * z / (double)n;
    double centre = (p + z2n / 2) / (1 + z2n);
    double half = z / (1 + z2n) * sqrt(p * (1 - p) / (double)n + z2n / (4.0 * (double)n));
    *lo = centre - half, *hi = centre + half;
}

struct acc {
    long n, hit, hit_mean;
    double width;
};

/* Quantity q of problem pr: 0 the batch time [h]; 1 the product's mean composition (A) or
 * its amount [kmol] (B: its composition is the set point). */
static double qty(const stagecal_batch_result *r, int pr, int q)
{
    return q == 0    ? r->t_end_s / 3600.0
           : pr == 0 ? r->cuts[0].x_mean
                     : r->cuts[0].amount_mol / 1000;
}

static void band_qty(const stagecal_batch_band *b, int pr, int q, double *lo, double *hi)
{
    const stagecal_batch_interval *iv = q == 0    ? &b->t_end_s
                                        : pr == 0 ? &b->cuts[0].x_mean
                                                  : &b->cuts[0].amount_mol;
    double f = q == 0 ? 1 / 3600.0 : pr == 0 ? 1.0 : 1 / 1000.0;
    *lo = iv->low * f, *hi = iv->high * f;
}

/* The runs-differ test's tally: calibrate's (Wald) and the plain one-way ANOVA's. */
struct rt_acc {
    long tested, rej, a_tested, a_rej;
    double dof1, dof2, a_dof1, a_dof2;
};

/* The plain one-way ANOVA of the stage-space windows' standardised residuals by run: F on
 * G − 1 and n − G dof; its p, or NAN when G < 3 or n − G < 1. */
static double plain_anova(const stagecal_calibration *cal, double *d1, double *d2)
{
    const stagecal_regress_result *sf = &cal->stage_fit;
    double sum[64] = {0}, tot = 0;
    size_t cnt[64] = {0}, n = 0, g = 0;
    const stagecal_evidence *ev = cal->evidence.ev;
    for (int pass = 0; pass < 2; pass++) {
        double ssb = 0, ssw = 0;
        for (size_t i = 0; i < cal->evidence.n; i++) {
            double val;
            if (!ev[i].stages_ok || ev[i].run >= 64 ||
                stagecal_form_eval(&sf->form, sf->theta, ev[i].r, ev[i].f_load, &val, NULL))
                continue;
            double e = (ev[i].stages - val) / ev[i].se_stages;
            if (pass == 0) {
                g += cnt[ev[i].run] == 0;
                cnt[ev[i].run]++, sum[ev[i].run] += e, tot += e, n++;
            } else {
                double m = sum[ev[i].run] / (double)cnt[ev[i].run];
                ssw += (e - m) * (e - m);
            }
        }
        if (pass == 1) {
            for (size_t k = 0; k < 64; k++)
                if (cnt[k] > 0) {
                    double m = sum[k] / (double)cnt[k] - tot / (double)n;
                    ssb += (double)cnt[k] * m * m;
                }
            *d1 = (double)g - 1, *d2 = (double)n - (double)g;
            if (g < 3 || !(*d2 >= 1) || !(ssw > 0))
                return NAN;
            return gsl_cdf_fdist_Q(ssb / *d1 / (ssw / *d2), *d1, *d2);
        }
    }
    return NAN;
}

static void rt_record(const stagecal_calibration *cal, struct rt_acc *rt)
{
    const stagecal_run_test *t = &cal->run_test;
    if (t->tested) {
        rt->tested++;
        rt->rej += t->p < 0.05;
        rt->dof1 += t->dof1, rt->dof2 += t->dof2;
    }
    double d1 = 0, d2 = 0, p = cal->stage_status == STAGECAL_OK ? plain_anova(cal, &d1, &d2) : NAN;
    if (isfinite(p)) {
        rt->a_tested++;
        rt->a_rej += p < 0.05;
        rt->a_dof1 += d1, rt->a_dof2 += d2;
    }
}

static void wilson(long k, long n, double *lo, double *hi);

static void rt_print(const struct rt_acc *rt, long calibrated)
{
    double lo = NAN, hi = NAN;
    if (rt->tested > 0)
        wilson(rt->rej, rt->tested, &lo, &hi);
    printf("  runs-differ test (calibrate's, Wald): tested %ld of %ld calibrations; rejected at "
           "0.05: %ld = %.3f [%.3f, %.3f]; mean dof %.2f / %.2f\n",
           rt->tested, calibrated, rt->rej, rt->tested ? (double)rt->rej / (double)rt->tested : NAN,
           lo, hi, rt->tested ? rt->dof1 / (double)rt->tested : NAN,
           rt->tested ? rt->dof2 / (double)rt->tested : NAN);
    lo = hi = NAN;
    if (rt->a_tested > 0)
        wilson(rt->a_rej, rt->a_tested, &lo, &hi);
    printf("  plain one-way ANOVA of the standardised residuals by run: tested %ld; rejected at "
           "0.05: %ld = %.3f [%.3f, %.3f]; mean dof %.2f / %.2f\n",
           rt->a_tested, rt->a_rej, rt->a_tested ? (double)rt->a_rej / (double)rt->a_tested : NAN,
           lo, hi, rt->a_tested ? rt->a_dof1 / (double)rt->a_tested : NAN,
           rt->a_tested ? rt->a_dof2 / (double)rt->a_tested : NAN);
}

int main(int argc, char **argv)
{
    char *e1 = NULL, *e3 = NULL, *e4 = NULL;
    int dump = 0, nprob = 1, only_test = 0; /* problem A only unless "both" */
    for (; argc > 4; argc--) {
        if (strcmp(argv[argc - 1], "dump") == 0)
            dump = 1;
        else if (strcmp(argv[argc - 1], "both") == 0)
            nprob = 2;
        else if (strcmp(argv[argc - 1], "runtest") == 0)
            only_test = 1;
        else
            break;
    }
    long reps = argc >= 4 ? strtol(argv[1], &e1, 10) : 0;
    unsigned long seed = argc >= 4 ? strtoul(argv[2], NULL, 10) : 0;
    double tau = argc >= 4 ? strtod(argv[3], &e3) : NAN;
    long samples = argc >= 5 ? strtol(argv[4], &e4, 10) : 200;
    if (argc < 4 || argc > 5 || *e1 || *e3 || (e4 && *e4) || reps < 1 || !(tau >= 0) ||
        samples < 2) {
        fprintf(stderr, "usage: tool_batch_coverage REPLICATIONS SEED TAU [SAMPLES] [both] [dump] "
                        "[runtest]\n");
        return 1;
    }
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    stagecal_column col;
    if (bc_column(&col) != 0 || !rng) {
        fprintf(stderr, "tool_batch_coverage: set-up failed\n");
        return 1;
    }
    gsl_rng_set(rng, seed);
    struct rt_acc rt;
    memset(&rt, 0, sizeof rt);
    struct acc a[BC_NPROB][BC_NQTY][BC_NBAND];
    memset(a, 0, sizeof a);
    long refused = 0, nobatch = 0, noband = 0, nscatter = 0, ok_sets = 0, n_cov = 0, n_stage = 0;
    double sum_se = 0, n_se = 0, sum_sig = 0, sum_s2 = 0, sum_dofs = 0;
    int nband = BC_NBAND;
    struct timespec t0, t1;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    for (long rep = 0; rep < reps; rep++) {
        double delta[BC_RUNS], dnew;
        for (int k = 0; k < BC_RUNS; k++)
            delta[k] = tau > 0 ? gsl_ran_gaussian(rng, tau) : 0.0;
        dnew = tau > 0 ? gsl_ran_gaussian(rng, tau) : 0.0;
        size_t len = 0;
        char *csv = bc_log(rng, delta, &len);
        stagecal_runlog *log = stagecal_runlog_alloc();
        if (!csv || !log ||
            stagecal_runlog_read_buffer(log, csv, len, "synthetic.csv", &col, NULL, NULL, NULL)) {
            fprintf(stderr, "tool_batch_coverage: replication %ld: log failed\n", rep);
            return 1;
        }
        free(csv);
        stagecal_calibrate_params par = stagecal_calibrate_default_params();
        par.form = "saturating";
        par.evidence.holdup = STAGECAL_HOLDUP_COMP_NONE;
        par.cov_kind = synth_cov_kind(); /* STUDY_COV (default: calibrate's) */
        stagecal_calibration cal;
        if (stagecal_calibrate_data(&col, NULL, log, &par, &cal, NULL) != STAGECAL_OK) {
            refused++;
            stagecal_runlog_free(log);
            continue;
        }
        rt_record(&cal, &rt);
        if (only_test) {
            stagecal_calibration_free(&cal);
            stagecal_runlog_free(log);
            continue;
        }
        const stagecal_model *m = &cal.model;
        nscatter += m->scatter.n > 0;
        n_cov += stagecal_calibration_fit(&cal)->cov_kind == par.cov_kind;
        n_stage += cal.used == STAGECAL_MODEL_STAGE_SPACE;
        for (size_t i = 0; i < cal.evidence.n; i++)
            if (cal.evidence.ev[i].stages_ok && isfinite(cal.evidence.ev[i].r) &&
                fabs(cal.evidence.ev[i].r - 2.5) < 0.2)
                sum_se += cal.evidence.ev[i].se_stages, n_se++;
        double sig25 = m->scatter.n > 0 ? stagecal_scatter_sd(&m->scatter, 2.5) : m->sigma,
               s2 = NAN;
#ifdef STAGECAL_BATCH_SCATTER_PROCESS
        s2 = m->scatter.var_ratio;
#else
        nband = 2;
#endif
        stagecal_model_point pt;
        double sefit =
            stagecal_model_eval(m, 2.5, 0, 0.95, &pt, NULL) == STAGECAL_OK ? pt.se_fit : NAN;
        int set_ok = 1;
        double dump_v[9] = {NAN, NAN, NAN, NAN, NAN, NAN, NAN, NAN, NAN};
        for (int pr = 0; pr < nprob && set_ok; pr++) {
            stagecal_batch_problem pb;
            bc_problem(pr, &pb);
            stagecal_batch_model_law law = {m, NULL, NAN};
            stagecal_batch_column cm = {col.system.vle, stagecal_batch_model_stages, &law, NULL,
                                        NULL};
            stagecal_batch_column ct = {col.system.vle, bc_true_stages, &dnew, NULL, NULL};
            double zero = 0;
            stagecal_batch_column c0 = {col.system.vle, bc_true_stages, &zero, NULL, NULL};
            stagecal_batch_result nom, tru, mean;
            stagecal_batch_result_init(&nom);
            stagecal_batch_result_init(&tru);
            stagecal_batch_result_init(&mean);
            if (stagecal_batch_run(&pb, &cm, NULL, &nom, NULL) != STAGECAL_OK ||
                stagecal_batch_run(&pb, &ct, NULL, &tru, NULL) != STAGECAL_OK ||
                stagecal_batch_run(&pb, &c0, NULL, &mean, NULL) != STAGECAL_OK) {
                nobatch++;
                set_ok = 0;
            }
            stagecal_batch_band band[BC_NBAND];
            for (int b = 0; b < nband && set_ok; b++)
                if (stagecal_batch_band_sample_scatter(&pb, col.system.vle, m, NAN, NULL, &nom,
                                                       (size_t)samples, (unsigned long)rep + 1,
                                                       0.95, b, &band[b], NULL) != STAGECAL_OK) {
                    noband++;
                    set_ok = 0;
                }
            for (int q = 0; q < BC_NQTY && set_ok; q++)
                for (int b = 0; b < nband; b++) {
                    double lo, hi, tv = qty(&tru, pr, q), mv = qty(&mean, pr, q);
                    band_qty(&band[b], pr, q, &lo, &hi);
                    struct acc *x = &a[pr][q][b];
                    x->n++;
                    x->hit += lo <= tv && tv <= hi;
                    x->hit_mean += lo <= mv && mv <= hi;
                    x->width += hi - lo;
                }
            if (set_ok && pr == 0) {
                dump_v[0] = qty(&nom, 0, 0), dump_v[1] = qty(&tru, 0, 0),
                dump_v[2] = qty(&mean, 0, 0);
                for (int b = 0; b < 3; b++) {
                    dump_v[3 + 2 * b] = b < nband ? band[b].t_end_s.low / 3600 : NAN;
                    dump_v[4 + 2 * b] = b < nband ? band[b].t_end_s.high / 3600 : NAN;
                }
                sum_dofs += band[1].dof_scatter;
            }
            stagecal_batch_result_free(&nom);
            stagecal_batch_result_free(&tru);
            stagecal_batch_result_free(&mean);
        }
        if (set_ok) {
            ok_sets++;
            sum_sig += sig25;
            sum_s2 += s2;
        }
        if (dump)
            fprintf(stderr,
                    "ds %ld %d %.4g %.5g %.4g %.5g %.5g %.6g %.6g %.6g %.6g %.6g %.6g %.6g %.6g "
                    "%.6g\n",
                    rep, set_ok, tau, dnew, s2, sig25, sefit, dump_v[0], dump_v[1], dump_v[2],
                    dump_v[3], dump_v[4], dump_v[5], dump_v[6], dump_v[7], dump_v[8]);
        stagecal_calibration_free(&cal);
        stagecal_runlog_free(log);
    }
    clock_gettime(CLOCK_MONOTONIC, &t1);
    static const char *pname[BC_NPROB] = {"A: R = 2.5 to pot xB 0.3",
                                          "B: xD = 0.93, R up to 10, to R = 10"};
    static const char *qname[BC_NPROB][BC_NQTY] = {{"batch time [h]", "product x_mean"},
                                                   {"batch time [h]", "product [kmol]"}};
    static const char *bname[BC_NBAND] = {"without scatter", "window scatter σ(R)",
                                          "process scatter"};
    printf("batch-level coverage of predict's 95 %% band: %ld data sets, seed %lu, tau %g "
           "stages, %ld draws per band (%.1f s)\n",
           reps, seed, tau, samples,
           (double)(t1.tv_sec - t0.tv_sec) + 1e-9 * (double)(t1.tv_nsec - t0.tv_nsec));
    if (only_test)
        printf("  calibration refused %ld (runtest: no batch, no band)\n", refused);
    else {
        printf("  calibration refused %ld, batch failed %ld, band failed %ld; %ld of %ld models "
               "with a scatter function\n",
               refused, nobatch, noband, nscatter, reps - refused);
        printf("  covariance %s (STUDY_COV): used by %ld of %ld models' fits (%ld stage-space)\n",
               stagecal_regress_cov_name(synth_cov_kind()), n_cov, reps - refused, n_stage);
    }
    if (ok_sets > 0)
        printf("  windows at R = 2.5: mean stated se %.4f stages; model: mean sigma(2.5) %.4f, "
               "mean var_ratio %.3f, mean scatter dof along A %.1f\n",
               sum_se / n_se, sum_sig / (double)ok_sets, sum_s2 / (double)ok_sets,
               sum_dofs / (double)ok_sets);
    rt_print(&rt, reps - refused);
    for (int pr = 0; pr < BC_NPROB; pr++)
        for (int q = 0; q < BC_NQTY; q++)
            for (int b = 0; b < nband; b++) {
                const struct acc *x = &a[pr][q][b];
                double lo, hi, lm, hm;
                if (x->n == 0)
                    continue;
                wilson(x->hit, x->n, &lo, &hi);
                wilson(x->hit_mean, x->n, &lm, &hm);
                printf("  %-36s %-15s %-20s new batch %.3f [%.3f, %.3f]  mean law %.3f "
                       "[%.3f, %.3f]  width %.4g (n %ld)\n",
                       pname[pr], qname[pr][q], bname[b], (double)x->hit / (double)x->n, lo, hi,
                       (double)x->hit_mean / (double)x->n, lm, hm, x->width / (double)x->n, x->n);
            }
    stagecal_vle_free(col.system.vle);
    gsl_rng_free(rng);
    return 0;
}

/*
 * tool_demo_coverage.c — coverage study of the README quick start's calibration on replicate
 * data sets of the demo scenario: tests/tool_demodata.c (included, its main renamed) writes
 * January–March of the invented column K-7 with seeds SEED0, SEED0 + 1, …; each is calibrated
 * as the quick start does (saturating-load, holdup 'auto' — a lag from the start-ups — runs
 * flagged for gross errors left out), and both fits' 95 % intervals at four conditions are
 * compared with the generator's law, a(t)·(1 − exp(−0.9·R))·(1 − 0.06·(F − 1.3)²) with
 * a = 9.5·(1 − LOSS·1.5) (mid-quarter; LOSS 0, the default, keeps a constant, so the law lies
 * inside the fitted form and any shortfall is the estimator's).
 *
 *   usage: tool_demo_coverage COLUMN.json REPLICATIONS SEED0 [MODE] [LOSS]
 *   MODE: line | quad | smoother | qstats, or one of them with -tobit or -drop (e.g. line-drop)
 *   (qstats: STAGECAL_EVIDENCE_NOISE_QUAD_STATS, quad's window errors with the straight-line
 *   Tobit trend, so the estimates are line's and only the errors differ)
 *   Diagnostics (environment): DEMOCOV_TAU=MIN the generator's distillate lag, DEMOCOV_STEP=0|1
 *   its reflux steps, DEMOCOV_CLIP=0|1 its clipping (0 writes readings above 1, which the
 *   reader refuses), DEMOCOV_HOLDUP=-1|0|1 the calibration's holdup compensation (auto, none,
 *   lag), DEMOCOV_VERBOSE=1 why a data set was not calibrated
 *   (COLUMN.json: datasets/columns/demo_benzene_toluene.json)
 *
 * line, quad, smoother: the window statistics (stagecal_evidence_params.noise: the default
 * straight line with ρ pooled, STAGECAL_EVIDENCE_NOISE_QUAD_POOLED, _SMOOTHER). What the demo
 * scenario has that the synthetic regimes of tool_coverage.c do not: a distillate read through
 * a 20-min lag and compensated, an analyser clipped at 1 (readings of 1.00000 are censored and
 * taken as censored observations by the windows' Tobit trend, stagecal_evidence_params.tobit_means,
 * the default; with -drop left out of the means), windows at a pinch, runs cut at a lean pot, a
 * reflux step after 4 h.
 *
 * With DEMOCOV_PREDICT=1 each data set's model file (the composition fit's) is also held
 * against the windows of the next data set (independent, the same scenario): how often one
 * new window's stage count falls inside the model's 95 % prediction band at the window's R
 * and F, with the scatter function (stagecal/scatter.h, model format 4) and with one σ for
 * every R (format ≤ 3), by R.
 *
 * Prints, per fit (composition space = the model file's, stage space) and condition, the
 * coverage with its Wilson 95 % interval (Wilson, JASA 22 (1927) 209 — citation from memory),
 * the median z = (estimate − truth)/se, se/sd (rms stated se over the empirical sd of the
 * estimates) and the mean error; and how often the two fits' largest parameter difference
 * exceeds 2 combined standard errors (the summary's "agree" test). Exit 0, or 1 on bad
 * arguments or a failure to write or calibrate a data set.
 */
#define DEMODATA_MAIN demodata_main
int demodata_main(int argc, char **argv);
#include "tool_demodata.c"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <unistd.h>

#include "stagecal/calibrate.h"
#include "stagecal/form.h"
#include "stagecal/regress.h"
#include "study_cov.h"

#define NCOND 4
static const double conds[NCOND][2] = {{1.5, 1.3}, {2.5, 1.5}, {5.0, 1.54}, {INFINITY, 1.3}};

struct cell {
    int n, hits;
    double *est, *z, sum_se2, sum_err;
};

static void wilson(int k, int n, double *lo, double *hi)
{
    double z = gsl_cdf_ugaussian_Pinv(0.975), p = (double)k / n, d = 1 + z * z / n;
    double c = (p + z * z / (2.0 * n)) / d;
    double h = z * sqrt(p * (1 - p) / n + z * z / (4.0 * n * n)) / d;
    *lo = c - h;
    *hi = c + h;
}

int main(int argc, char **argv)
{
    char *e1 = NULL, *e2 = NULL;
    long reps = argc >= 4 ? strtol(argv[2], &e1, 10) : 0;
    unsigned long seed0 = argc >= 4 ? strtoul(argv[3], &e2, 10) : 0;
    char mode[32];
    snprintf(mode, sizeof mode, "%s", argc >= 5 ? argv[4] : "line");
    double loss = argc >= 6 ? atof(argv[5]) : 0.0;
    /* MODE-tobit: censored xD readings taken as censored observations by the windows' Tobit
     * trend (stagecal_evidence_params.tobit_means, the default); MODE-drop: left out of the
     * window means (the rule before) */
    size_t ml = strlen(mode);
    int tobit = stagecal_evidence_default_params().tobit_means;
    if (ml > 6 && strcmp(mode + ml - 6, "-tobit") == 0)
        tobit = 1, mode[ml - 6] = '\0';
    else if (ml > 5 && strcmp(mode + ml - 5, "-drop") == 0)
        tobit = 0, mode[ml - 5] = '\0';
    int noise = strcmp(mode, "qstats") == 0     ? STAGECAL_EVIDENCE_NOISE_QUAD_STATS
                : strcmp(mode, "quad") == 0     ? STAGECAL_EVIDENCE_NOISE_QUAD_POOLED
                : strcmp(mode, "smoother") == 0 ? STAGECAL_EVIDENCE_NOISE_SMOOTHER
                : strcmp(mode, "line") == 0     ? STAGECAL_EVIDENCE_NOISE_LINE_POOLED
                                                : -1;
    if (argc < 4 || argc > 6 || *e1 || *e2 || reps < 10 || reps > 100000 || noise < 0 ||
        !(loss >= 0 && loss < 0.05)) {
        fprintf(stderr, "usage: tool_demo_coverage COLUMN.json REPLICATIONS(>=10) SEED0 "
                        "[line | quad | smoother | qstats][-tobit | -drop] [LOSS]\n");
        return 1;
    }
    gsl_set_error_handler_off();
    demo_quiet = 1;
    /* diagnostics: the generator's knobs (tool_demodata.c) from the environment */
    if (getenv("DEMOCOV_TAU"))
        demo_tau_min = atof(getenv("DEMOCOV_TAU"));
    if (getenv("DEMOCOV_CLIP"))
        demo_clip = atoi(getenv("DEMOCOV_CLIP"));
    if (getenv("DEMOCOV_STEP"))
        demo_step = atoi(getenv("DEMOCOV_STEP"));
    struct cell cells[2][NCOND];
    double *agree = calloc((size_t)reps, sizeof *agree);
    int nagree = 0, bad = 0;
    for (int q = 0; q < 2; q++)
        for (int c = 0; c < NCOND; c++) {
            cells[q][c] = (struct cell){0};
            cells[q][c].est = calloc((size_t)reps, sizeof(double));
            cells[q][c].z = calloc((size_t)reps, sizeof(double));
            if (!cells[q][c].est || !cells[q][c].z || !agree) {
                fprintf(stderr, "tool_demo_coverage: out of memory\n");
                return 1;
            }
        }
    stagecal_form form;
    if (stagecal_form_parse("saturating-load", &form, NULL) != STAGECAL_OK)
        return 1;
    /* prediction bands against the next data set's windows, by R: < 1.75, < 2.75, < 3.5, more */
    int predict = getenv("DEMOCOV_PREDICT") && atoi(getenv("DEMOCOV_PREDICT"));
    long pn[4] = {0}, phit[4] = {0}, phit1[4] = {0};
    double pw[4] = {0}, pw1[4] = {0}; /* sums of the bands' half-widths */
    stagecal_calibration prev;
    int have_prev = 0;
    double a_true = 9.5 * (1 - loss * 1.5);
    for (long rep = 0; rep < reps; rep++) {
        char dir[] = "/tmp/stagecal-demo-XXXXXX", seed[32], lossbuf[32];
        if (!mkdtemp(dir)) {
            fprintf(stderr, "tool_demo_coverage: cannot make a temporary folder\n");
            return 1;
        }
        snprintf(seed, sizeof seed, "%lu", seed0 + (unsigned long)rep);
        snprintf(lossbuf, sizeof lossbuf, "%.17g", loss);
        char prog[] = "tool_demodata", three[] = "3";
        char *gargv[] = {prog, argv[1], dir, seed, three, lossbuf, NULL};
        if (demodata_main(6, gargv) != 0) {
            demo_remove_set(dir, 3);
            return 1;
        }
        char p[3][1200];
        const char *logs[3];
        for (int i = 0; i < 3; i++) {
            snprintf(p[i], sizeof p[i], "%s/logs/2025-0%d.csv", dir, i + 1);
            logs[i] = p[i];
        }
        stagecal_calibrate_params par = stagecal_calibrate_default_params();
        par.cov_kind = synth_cov_kind(); /* STUDY_COV (default: calibrate's) */
        par.form = "saturating-load";
        par.evidence.noise = noise;
        if (getenv("DEMOCOV_HOLDUP")) /* diagnostics: -1 auto, 0 none, 1 lag */
            par.evidence.holdup = atoi(getenv("DEMOCOV_HOLDUP"));
        par.evidence.tobit_means = tobit;
        stagecal_calibration cal;
        stagecal_error err;
        int rc = stagecal_calibrate(argv[1], logs, 3, &par, &cal, &err);
        demo_remove_set(dir, 3);
        if (rc != STAGECAL_OK) { /* a data set the quick start cannot calibrate: counted */
            bad++;
            if (getenv("DEMOCOV_VERBOSE"))
                fprintf(stderr, "seed %lu: %s\n", seed0 + (unsigned long)rep, err.text);
            stagecal_calibration_free(&cal);
            continue;
        }
        const stagecal_regress_result *fit[2] = {&cal.comp_fit, &cal.stage_fit};
        int ok[2] = {cal.comp_status == STAGECAL_OK, cal.stage_status == STAGECAL_OK};
        if (ok[0] && ok[1]) {
            double d = 0;
            for (size_t j = 0; j < fit[0]->p; j++)
                d = fmax(d,
                         fabs(fit[0]->theta[j] - fit[1]->theta[j]) /
                             sqrt(fit[0]->se[j] * fit[0]->se[j] + fit[1]->se[j] * fit[1]->se[j]));
            agree[nagree++] = d;
        }
        for (int q = 0; q < 2; q++)
            for (int c = 0; c < NCOND && ok[q]; c++) {
                double r = conds[c][0], f = conds[c][1];
                stagecal_band b;
                if (stagecal_regress_band_clustered(&form, fit[q]->theta, fit[q]->cov,
                                                    fit[q]->sigma_obs, 1.0, fit[q]->dof,
                                                    fit[q]->design, fit[q]->cluster, fit[q]->n,
                                                    0.95, r, f, &b, NULL) != STAGECAL_OK)
                    continue;
                double truth = a_true * (isinf(r) ? 1.0 : -expm1(-0.9 * r)) *
                               (1 - 0.06 * (f - 1.3) * (f - 1.3));
                struct cell *cl = &cells[q][c];
                cl->hits += b.ci_low <= truth && truth <= b.ci_high;
                cl->est[cl->n] = b.value;
                cl->z[cl->n] = (b.value - truth) / b.se_fit;
                cl->sum_se2 += b.se_fit * b.se_fit;
                cl->sum_err += b.value - truth;
                cl->n++;
            }
        if (predict) {
            for (size_t i = 0; have_prev && i < cal.evidence.n; i++) {
                const stagecal_evidence *e = &cal.evidence.ev[i];
                stagecal_model one = prev.model; /* shallow: eval reads it only */
                stagecal_model_point pt, p1;
                one.scatter.n = 0;
                if (!e->stages_ok ||
                    stagecal_model_eval(&prev.model, e->r, e->f_load, 0.95, &pt, NULL) ||
                    stagecal_model_eval(&one, e->r, e->f_load, 0.95, &p1, NULL))
                    continue;
                int b = e->r < 1.75 ? 0 : e->r < 2.75 ? 1 : e->r < 3.5 ? 2 : 3;
                pn[b]++;
                phit[b] += pt.pi_low <= e->stages && e->stages <= pt.pi_high;
                phit1[b] += p1.pi_low <= e->stages && e->stages <= p1.pi_high;
                pw[b] += 0.5 * (pt.pi_high - pt.pi_low);
                pw1[b] += 0.5 * (p1.pi_high - p1.pi_low);
            }
            if (have_prev)
                stagecal_calibration_free(&prev);
            prev = cal;
            have_prev = 1;
            continue;
        }
        stagecal_calibration_free(&cal);
    }
    if (have_prev)
        stagecal_calibration_free(&prev);
    static const char *bin[4] = {"R < 1.75", "1.75 - 2.75", "2.75 - 3.5", "R >= 3.5"};
    for (int b = 0; b < 4 && predict; b++) {
        double lo, hi, lo1, hi1;
        if (pn[b] == 0)
            continue;
        wilson((int)phit[b], (int)pn[b], &lo, &hi);
        wilson((int)phit1[b], (int)pn[b], &lo1, &hi1);
        printf("new windows %-12s %5ld: in the prediction band %.3f [%.3f, %.3f] (mean half-width "
               "%.3f); with one sigma %.3f [%.3f, %.3f] (%.3f)\n",
               bin[b], pn[b], (double)phit[b] / pn[b], lo, hi, pw[b] / pn[b],
               (double)phit1[b] / pn[b], lo1, hi1, pw1[b] / pn[b]);
    }
    printf("demo scenario (tool_demodata, January-March), %ld data sets from seed %lu, window "
           "statistics '%s', censored xD %s, loss %g/month; %d not calibrated\n",
           reps, seed0, mode, tobit ? "Tobit" : "left out", loss, bad);
    static const char *fitname[2] = {"composition (model file)", "stage space"};
    for (int q = 0; q < 2; q++) {
        printf("%s\n  condition         coverage  Wilson 95 %%        med z   se/sd  mean err\n",
               fitname[q]);
        for (int c = 0; c < NCOND; c++) {
            struct cell *cl = &cells[q][c];
            if (cl->n < 2)
                continue;
            double lo, hi, sd = gsl_stats_sd(cl->est, 1, (size_t)cl->n);
            wilson(cl->hits, cl->n, &lo, &hi);
            gsl_sort(cl->z, 1, (size_t)cl->n);
            printf("  R=%-4g F=%-5g  %6.3f  [%.3f, %.3f]  %+6.2f  %6.3f  %+7.3f  (%d fits)\n",
                   conds[c][0], conds[c][1], (double)cl->hits / cl->n, lo, hi,
                   gsl_stats_median_from_sorted_data(cl->z, 1, (size_t)cl->n),
                   sqrt(cl->sum_se2 / cl->n) / sd, cl->sum_err / cl->n, cl->n);
        }
    }
    if (nagree > 0) {
        int over = 0;
        for (int i = 0; i < nagree; i++)
            over += agree[i] > 2;
        gsl_sort(agree, 1, (size_t)nagree);
        printf("fits' largest parameter difference: median %.2f combined se; > 2 in %.3f of %d\n",
               gsl_stats_median_from_sorted_data(agree, 1, (size_t)nagree), (double)over / nagree,
               nagree);
    }
    for (int q = 0; q < 2; q++)
        for (int c = 0; c < NCOND; c++)
            free(cells[q][c].est), free(cells[q][c].z);
    free(agree);
    return 0;
}

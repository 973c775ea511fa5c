/*
 * tool_holdup_coverage.c — coverage study of calibration on logs of a column WITH liquid
 * holdup (tests/sim_dynamic.h: stage-by-stage dynamic simulator, constant stage count,
 * column holdup 2–6 % of the charge), with and without the holdup compensation
 * (include/stagecal/holdup.h).
 *
 *   usage: tool_holdup_coverage STAGECAL_BIN WORKDIR [DATASETS [SEED [PER_SET.csv]]]
 *
 * Each data set: a constant true stage count N (6, 7 or 8 incl. the pot, drawn), α = 2.4,
 * 12 runs (R in {1.5, 2, 2.5, 3, 4}, V 0.7–1.3 mol/s, charge 22.5–27.5 kmol at xB0
 * 0.45–0.55, 60 min total-reflux start-up, then production for up to 7 h), rows every
 * 2 min with analyser noise u(xD) = 0.002, u(xB) = 0.003; the column file states the column
 * holdup (the mean charge's, so ±10 % off for a single run; u_rel 0.06, the standard deviation
 * of that spread). The logs are calibrated with the program (`calibrate --json --dry-run
 * --holdup none|lag|stages`, and `stages` once more with a column file that states no
 * holdup, so each run's holdup comes from its start-up), forms `constant`
 * (does the 95 % interval of a cover N?) and `linear:1+1/R` (does the interval of the 1/R
 * coefficient cover 0?). Prints the coverage with a Wilson 95 % interval, the mean error
 * of a and the mean 1/R coefficient, and per mode the runs the balance and drift checks
 * flagged and the calibrations that stopped. With `stages` the flagged runs are left out
 * (the default); `none` and `lag` keep them (--keep-flagged), so their figures show the
 * compensation's effect alone (HOLDUP_STUDY_KEEP keeps them with `stages` too).
 * HOLDUP_STUDY_N fixes the true count, HOLDUP_STUDY_STATED states the holdup times this factor
 * (exploring). Progress on stderr. Not run by ctest
 * (minutes of CPU).
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_rng.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "sim_dynamic.h"
#include "stagecal/column.h"
#include "stagecal/runlog.h"

#define NRUNS 12

#define COLUMN_FMT                                                                                 \
    "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"holdup-study\","                       \
    "\"description\":\"SYNTHETIC: study column for tests/tool_holdup_coverage.c\","                \
    "\"condenser\":\"total\",\"system\":{\"light\":{\"name\":\"light\"},"                          \
    "\"heavy\":{\"name\":\"heavy\"},\"model\":{\"kind\":\"alpha\",\"alpha\":2.4}},"                \
    "\"uncertainty\":{\"xd\":0.002,\"xb\":0.003}%s}"
#define HOLDUP_FMT ",\"holdup\":{\"column_mol\":%.1f,\"u_rel\":0.06}"
#define NMODES 4

struct tally {
    int n, cover, failed, flagged;
    double sum_err;
};

/* Writes one data set's logs to path; returns N or −1. */
static int simulate(gsl_rng *rng, const char *path, double *holdup)
{
    static const double rs[] = {1.5, 2.0, 2.5, 3.0, 4.0};
    FILE *f = fopen(path, "w");
    if (!f)
        return -1;
    fprintf(f, "run,time[h],W[mol],xD[mol/mol],xB[mol/mol],R[-],V[mol/s]\n");
    int n = 6 + (int)gsl_rng_uniform_int(rng, 3);
    *holdup = 0.02 + 0.04 * gsl_rng_uniform(rng);
    /* exploring: HOLDUP_STUDY_N fixes the true stage count */
    if (getenv("HOLDUP_STUDY_N"))
        n = atoi(getenv("HOLDUP_STUDY_N"));
    /* exploring: HOLDUP_STUDY_SCALE scales the holdup, HOLDUP_STUDY_NOISE the analyser noise */
    const char *hs = getenv("HOLDUP_STUDY_SCALE"), *ns = getenv("HOLDUP_STUDY_NOISE");
    double noise = ns ? atof(ns) : 1.0;
    /* exploring: HOLDUP_STUDY_EXACT_CHARGE gives every run the mean charge, so each run's column
     * holdup is the stated one */
    double exact = getenv("HOLDUP_STUDY_EXACT_CHARGE") ? 0.0 : 1.0;
    if (hs)
        *holdup *= atof(hs);
    for (int k = 0; k < NRUNS; k++) {
        sim_dyn_params p = {2.4,
                            n,
                            25000 * (0.9 + 0.2 * gsl_rng_uniform(rng)) * exact +
                                25000 * (1 - exact),
                            0.45 + 0.1 * gsl_rng_uniform(rng),
                            *holdup,
                            0,
                            0.7 + 0.6 * gsl_rng_uniform(rng),
                            3600,
                            rs[k % 5],
                            8 * 3600.0,
                            120,
                            0.002 * noise,
                            0.003 * noise,
                            0.08};
        char run[16];
        snprintf(run, sizeof run, "S%02d", k + 1);
        if (sim_dyn_run(&p, rng, f, run, 24.0 * k) < 0) {
            fclose(f);
            return -1;
        }
    }
    return fclose(f) == 0 ? n : -1;
}

/* Runs the calibration; fills value/lo/hi of parameter `name` of the fit; 0 on success. */
static int calibrate(const char *bin, const char *colpath, const char *logpath, const char *holdup,
                     const char *form, const char *name, double *v, double *lo, double *hi,
                     struct tally *t)
{
    char cmd[2048];
    const char *extra = getenv("HOLDUP_STUDY_ARGS"); /* more calibrate options, for exploring */
    /* --keep-flagged without the compensation (none, lag): the figures show what the
     * compensation changes, and the checks would leave out some of those runs; with it
     * (stages) the runs flagged by the drift and balance checks are left out, as by default */
    int keep = strcmp(holdup, "stages") != 0 || getenv("HOLDUP_STUDY_KEEP") != NULL;
    snprintf(cmd, sizeof cmd,
             "'%s' calibrate --json --dry-run --quiet %s --holdup %s --form '%s' %s "
             "--column '%s' "
             "'%s' 2>/dev/null",
             bin, keep ? "--keep-flagged" : "", holdup, form, extra ? extra : "", colpath, logpath);
    FILE *p = popen(cmd, "r");
    if (!p)
        return -1;
    json_error_t je;
    json_t *root = json_loadf(p, 0, &je);
    pclose(p);
    if (!root) {
        t->failed++; /* no JSON: the calibration stopped (exit 65 when every run is left out) */
        return -1;
    }
    t->flagged += (int)json_array_size(json_object_get(root, "flagged_runs"));
    int rc = -1;
    json_t *par = json_object_get(root, "parameters");
    size_t i;
    json_t *it;
    json_array_foreach(par, i, it)
    {
        const char *nm = json_string_value(json_object_get(it, "name"));
        json_t *l = json_object_get(it, "ci_low"), *h = json_object_get(it, "ci_high");
        if (nm && !strcmp(nm, name) && json_is_number(l) && json_is_number(h)) {
            *v = json_number_value(json_object_get(it, "value"));
            *lo = json_number_value(l);
            *hi = json_number_value(h);
            rc = 0;
        }
    }
    json_decref(root);
    return rc;
}

static void wilson(int k, int n, double *lo, double *hi)
{
    double z = 1.959963984540054, p = n ? (double)k / n : 0, d = 1 + z * z / n;
    double c = (p + z * z / (2.0 * n)) / d,
           h = z * sqrt(p * (1 - p) / n + z * z / (4.0 * n * n)) / d;
    *lo = c - h, *hi = c + h;
}

/* HOLDUP_STUDY_MODES, e.g. "23", runs those modes only; the summary leaves the others out. */
static int mode_on(int k)
{
    const char *only = getenv("HOLDUP_STUDY_MODES");
    return !only || strchr(only, '0' + k) != NULL;
}

static void report(const char *what, const struct tally *t)
{
    double lo, hi;
    if (t->n == 0) {
        printf("| %s | 0 | no fit | |\n", what);
        return;
    }
    wilson(t->cover, t->n, &lo, &hi);
    printf("| %s | %d | %.3f [%.3f, %.3f] | %+.3f |\n", what, t->n, (double)t->cover / t->n, lo, hi,
           t->sum_err / t->n);
}

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(
            stderr,
            "usage: tool_holdup_coverage STAGECAL_BIN WORKDIR [DATASETS [SEED [PER_SET.csv]]]\n");
        return 2;
    }
    gsl_set_error_handler_off();
    int sets = argc > 3 ? atoi(argv[3]) : 200;
    unsigned long seed = argc > 4 ? strtoul(argv[4], NULL, 10) : 14UL;
    char colpath[2][1024], paths[1][1024];
    static const char *const names[NMODES] = {"--holdup none", "--holdup lag (start-up tau)",
                                              "--holdup stages (column-file holdup)",
                                              "--holdup stages (holdup from the start-ups)"};
    static const char *const modes[NMODES] = {"none", "lag", "stages", "stages"};
    static const char *const tags[NMODES] = {"none", "lag", "stages", "stages-est"};
    snprintf(colpath[0], sizeof colpath[0], "%s/column.json", argv[2]);
    snprintf(colpath[1], sizeof colpath[1], "%s/column-no-holdup.json", argv[2]);
    snprintf(paths[0], sizeof paths[0], "%s/raw.csv", argv[2]);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    /* one line per data set and fit (argv[5]): for the note's figures */
    FILE *per = argc > 5 ? fopen(argv[5], "w") : NULL;
    if (per)
        fprintf(per, "set,n_true,holdup_frac,mode,form,value,ci_low,ci_high\n");
    struct tally ta[NMODES] = {{0}}, tc[NMODES] = {{0}};
    for (int s = 0; s < sets; s++) {
        double hold = 0;
        int n = simulate(rng, paths[0], &hold);
        char hpart[128];
        /* exploring: HOLDUP_STUDY_STATED states the holdup that times the true one */
        const char *st = getenv("HOLDUP_STUDY_STATED");
        snprintf(hpart, sizeof hpart, HOLDUP_FMT, hold * 25000 * (st ? strtod(st, NULL) : 1.0));
        for (int c = 0; c < 2; c++) {
            FILE *cf = fopen(colpath[c], "w");
            if (!cf || fprintf(cf, COLUMN_FMT, c ? "" : hpart) < 0 || fclose(cf) != 0)
                return 73;
            stagecal_column col;
            if (n < 0 || stagecal_column_load(colpath[c], &col, NULL) != 0)
                return 70;
            stagecal_column_free(&col);
        }
        for (int k = 0; k < NMODES; k++) {
            double v, lo, hi;
            if (!mode_on(k))
                continue;
            const char *cp = colpath[k == 3];
            if (calibrate(argv[1], cp, paths[0], modes[k], "constant", "a", &v, &lo, &hi, &ta[k]) ==
                0) {
                if (per)
                    fprintf(per, "%d,%d,%.4f,%s,constant,%.6g,%.6g,%.6g\n", s, n, hold, tags[k], v,
                            lo, hi);
                ta[k].n++;
                ta[k].cover += lo <= n && n <= hi;
                ta[k].sum_err += v - n;
            }
            if (calibrate(argv[1], cp, paths[0], modes[k], "linear:1+1/R", "1/R", &v, &lo, &hi,
                          &tc[k]) == 0) {
                if (per)
                    fprintf(per, "%d,%d,%.4f,%s,1+1/R,%.6g,%.6g,%.6g\n", s, n, hold, tags[k], v, lo,
                            hi);
                tc[k].n++;
                tc[k].cover += lo <= 0 && 0 <= hi;
                tc[k].sum_err += v;
            }
        }
        if (isatty(2))
            fprintf(stderr, "\r%d/%d data sets", s + 1, sets);
    }
    if (isatty(2))
        fprintf(stderr, "\n");
    printf("%d data sets (seed %lu)\n\n", sets, seed);
    printf("| quantity | fits | coverage of the 95 %% interval [Wilson 95 %%] | mean error |\n");
    printf("|---|---|---|---|\n");
    char what[160];
    for (int k = 0; k < NMODES; k++) {
        snprintf(what, sizeof what, "constant a vs true N, %s", names[k]);
        if (mode_on(k))
            report(what, &ta[k]);
    }
    for (int k = 0; k < NMODES; k++) {
        snprintf(what, sizeof what, "1/R coefficient vs 0, %s", names[k]);
        if (mode_on(k))
            report(what, &tc[k]);
    }
    printf("\nflagged runs (of %d per data set) and calibrations that stopped, per mode "
           "(constant fit; %s):\n",
           NRUNS, "left out by default with stages, kept with none and lag");
    for (int k = 0; k < NMODES; k++)
        if (mode_on(k))
            printf("  %s: %d flagged runs in %d data sets, %d stopped\n", names[k], ta[k].flagged,
                   sets, ta[k].failed);
    gsl_rng_free(rng);
    return per && fclose(per) != 0 ? 74 : 0;
}

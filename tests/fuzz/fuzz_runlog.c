/*
 * fuzz_runlog.c — libFuzzer harness for the run-log reader (stagecal_runlog_read_buffer)
 * and what runs on a log that was read: analysis (steady windows, closure) and, for
 * small logs, the per-row inversion. The first input byte picks the column file the
 * reader validates against (none, constant α, ideal benzene–toluene with molar masses
 * so mass and percent bases convert); the rest is the CSV text.
 */
#include "fuzz_common.h"
#include "runlog_internal.h"
#include "stagecal/physics.h"
#include "stagecal/runlog.h"
#include "stagecal/stages.h"

#include <math.h>

static stagecal_column col_alpha, col_ideal;
/* One physics object per column for the whole session, as the CLI's pipeline shares one
 * across the logs it inverts (runlog_pipeline.c): the equilibrium model at a logged
 * pressure is built once and found again in the cache (least recently used goes first),
 * instead of being rebuilt for every input (two thirds of the time when rebuilt). The
 * model at a pressure does not depend on what came before, so a saved input replays
 * alike on a fresh process. */
static stagecal_physics *ph_alpha, *ph_ideal;
/* Likewise the soft sensor's models (temperatures to compositions at the logged pressures,
 * runlog_soft.c) for the column that has temperatures, through params.soft_physics, as a
 * caller reading many logs of one column shares them: a reader building its own spent half
 * of each execution building models at pressures the previous inputs had already seen. */
static stagecal_physics *soft_ideal;

int LLVMFuzzerInitialize(int *argc, char ***argv)
{
    (void)argc;
    (void)argv;
    gsl_set_error_handler_off();
    fuzz_load_column("demo_alpha.json", &col_alpha);
    fuzz_load_column("demo_benzene_toluene.json", &col_ideal);
    stagecal_error err;
    ph_alpha = stagecal_physics_alloc(&col_alpha, NULL, &err);
    ph_ideal = ph_alpha ? stagecal_physics_alloc(&col_ideal, NULL, &err) : NULL;
    soft_ideal = ph_ideal ? stagecal_runlog_soft_physics_alloc(&col_ideal, &err) : NULL;
    if (!soft_ideal) {
        fprintf(stderr, "fuzz setup: %s\n", err.text);
        abort();
    }
    return 0;
}

/* A property of what was read or computed that does not hold: a defect worth a crash report
 * (issue 18: "the fuzz harnesses assert these properties"). */
#define FUZZ_PROPERTY(cond, ...)                                                                   \
    do {                                                                                           \
        if (!(cond)) {                                                                             \
            fprintf(stderr, "fuzz_runlog property: " __VA_ARGS__);                                 \
            fputc('\n', stderr);                                                                   \
            abort();                                                                               \
        }                                                                                          \
    } while (0)

/* What the reader stored: runs contiguous and covering every row, each row's run index its
 * run, compositions NaN or inside [0, 1] (censored ones too: the limit is a fraction),
 * censoring one of the three kinds and only on a value, an inferred reading's uncertainty
 * NaN (the analyser's) or >= 0. */
static void check_read(const stagecal_runlog *log)
{
    size_t next = 0;
    for (size_t k = 0; k < log->nruns; k++) {
        FUZZ_PROPERTY(log->runs[k].first == next, "run %zu starts at row %zu, expected %zu", k,
                      log->runs[k].first, next);
        next += log->runs[k].n;
    }
    FUZZ_PROPERTY(next == log->n, "runs hold %zu rows of %zu", next, log->n);
    for (size_t i = 0; i < log->n; i++) {
        const size_t k = log->run[i];
        FUZZ_PROPERTY(k < log->nruns && i >= log->runs[k].first &&
                          i < log->runs[k].first + log->runs[k].n,
                      "row %zu: run index %zu", i, k);
        const double x[2] = {log->xd[i], log->xb[i]};
        const unsigned char c[2] = {log->xd_cens[i], log->xb_cens[i]};
        const double *uinf[2] = {log->u_xd_inf, log->u_xb_inf};
        for (int j = 0; j < 2; j++) {
            FUZZ_PROPERTY(isnan(x[j]) || (x[j] >= 0 && x[j] <= 1), "row %zu: %s = %.17g", i,
                          j ? "xB" : "xD", x[j]);
            FUZZ_PROPERTY(c[j] <= STAGECAL_CENSOR_ABOVE && (c[j] == 0 || !isnan(x[j])),
                          "row %zu: %s censor %d on %.17g", i, j ? "xB" : "xD", c[j], x[j]);
            FUZZ_PROPERTY(!uinf[j] || isnan(uinf[j][i]) || uinf[j][i] >= 0,
                          "row %zu: u of the inferred %s %.17g", i, j ? "xB" : "xD", uinf[j][i]);
        }
    }
}

/* Windows inside one run, in order; after the inversion a row with status ok has a finite
 * stage count >= 0 and an uncertainty that is not NaN and not negative
 * (docs/methods.md "Stage counting": never a NaN in a result without a status saying why). */
static void check_result(const stagecal_runlog *log, const stagecal_runlog_result *res,
                         int inverted)
{
    for (size_t w = 0; w < res->nwindows; w++) {
        const stagecal_runlog_window *win = &res->windows[w];
        FUZZ_PROPERTY(win->run < log->nruns && win->first <= win->last &&
                          win->first >= log->runs[win->run].first &&
                          win->last < log->runs[win->run].first + log->runs[win->run].n,
                      "window %zu: rows %zu..%zu of run %zu", w, win->first, win->last, win->run);
    }
    for (size_t i = 0; inverted && i < log->n; i++)
        if (res->status[i] == STAGECAL_STAGES_OK)
            FUZZ_PROPERTY(isfinite(res->stages[i]) && res->stages[i] >= 0 &&
                              !isnan(res->u_stages[i]) && !(res->u_stages[i] < 0),
                          "row %zu: status ok with stages %.17g, u %.17g", i, res->stages[i],
                          res->u_stages[i]);
}

/* The reader is the target; analysis and inversion run only on small logs, and the
 * inversion only for inputs whose second byte is odd, to keep executions fast (the
 * steady-state analysis and the ideal-model inversion cost far more than parsing). */
#define FUZZ_MAX_ANALYSE_ROWS 32
#define FUZZ_MAX_INVERT_ROWS 16

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size < 1)
        return 0;
    const stagecal_column *col = NULL;
    stagecal_physics *ph = NULL;
    switch (data[0] % 3) {
    case 1:
        col = &col_alpha;
        ph = ph_alpha;
        break;
    case 2:
        col = &col_ideal;
        ph = ph_ideal;
        break;
    default:
        break;
    }
    char *text = fuzz_strndup(data + 1, size - 1);
    if (!text)
        return 0;
    stagecal_runlog_params rp = stagecal_runlog_default_params();
    if (col == &col_ideal)
        rp.soft_physics = soft_ideal;
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_findings *f = stagecal_findings_alloc(16);
    stagecal_error err;
    if (log && f) {
        int s = stagecal_runlog_read_buffer(log, text, size - 1, "fuzz.csv", col, &rp, f, &err);
        if (s == 0 || s == STAGECAL_EDATA)
            check_read(log);
        if ((s == 0 || s == STAGECAL_EDATA) && log->n > 0 && log->n <= FUZZ_MAX_ANALYSE_ROWS) {
            stagecal_runlog_result res;
            if (stagecal_runlog_analyse(log, col, NULL, &res, &err) == 0) {
                int inverted = col && log->n <= FUZZ_MAX_INVERT_ROWS && size > 1 && (data[1] & 1) &&
                               runlog_invert_with(log, col, 1.0, NULL, ph, &res, &err) == 0;
                check_result(log, &res, inverted);
                stagecal_runlog_result_free(&res);
            }
        }
    }
    stagecal_findings_free(f);
    stagecal_runlog_free(log);
    free(text);
    return 0;
}

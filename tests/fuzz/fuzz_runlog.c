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

static stagecal_column col_alpha, col_ideal;
/* One physics object per column for the whole session, as the CLI's pipeline shares one
 * across the logs it inverts (runlog_pipeline.c): the equilibrium model at a logged
 * pressure is built once and found again in the cache (least recently used goes first),
 * instead of being rebuilt for every input (two thirds of the time when rebuilt). The
 * model at a pressure does not depend on what came before, so a saved input replays
 * alike on a fresh process. */
static stagecal_physics *ph_alpha, *ph_ideal;

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
    if (!ph_ideal) {
        fprintf(stderr, "fuzz setup: %s\n", err.text);
        abort();
    }
    return 0;
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
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_findings *f = stagecal_findings_alloc(16);
    stagecal_error err;
    if (log && f) {
        int s = stagecal_runlog_read_buffer(log, text, size - 1, "fuzz.csv", col, &rp, f, &err);
        if ((s == 0 || s == STAGECAL_EDATA) && log->n > 0 && log->n <= FUZZ_MAX_ANALYSE_ROWS) {
            stagecal_runlog_result res;
            if (stagecal_runlog_analyse(log, col, NULL, &res, &err) == 0) {
                if (col && log->n <= FUZZ_MAX_INVERT_ROWS && size > 1 && (data[1] & 1))
                    (void)runlog_invert_with(log, col, 1.0, NULL, ph, &res, &err);
                stagecal_runlog_result_free(&res);
            }
        }
    }
    stagecal_findings_free(f);
    stagecal_runlog_free(log);
    free(text);
    return 0;
}

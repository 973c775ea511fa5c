/*
 * fuzz_column.c — libFuzzer harness for the column file parser (stagecal_column_parse).
 * A column that parses is exercised a little: its equilibrium model is evaluated at a
 * few compositions (the values must be finite whenever the call says ok).
 */
#include <math.h>

#include "fuzz_common.h"

int LLVMFuzzerInitialize(int *argc, char ***argv)
{
    (void)argc;
    (void)argv;
    gsl_set_error_handler_off();
    return 0;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    stagecal_column col;
    stagecal_error err;
    memset(&col, 0, sizeof col);
    if (stagecal_column_parse((const char *)data, size, "fuzz.json", &col, &err) != 0)
        return 0;
    if (col.system.vle) {
        static const double xs[] = {0.0, 1e-9, 0.3, 0.5, 0.97, 1.0};
        for (size_t i = 0; i < sizeof xs / sizeof xs[0]; i++) {
            double y;
            /* A model that says ok must give a finite y in [0, 1] (docs/methods.md "Stage
             * counting": never a silent NaN); anything else is a defect worth a crash report. */
            if (stagecal_vle_ystar(col.system.vle, xs[i], &y) == 0 && !(y >= 0.0 && y <= 1.0)) {
                fprintf(stderr, "y*(%g) = %g with status ok\n", xs[i], y);
                abort();
            }
        }
    }
    stagecal_column_free(&col);
    return 0;
}

/*
 * fuzz_column.c — libFuzzer harness for the column file parser (stagecal_column_parse).
 * A column that parses is exercised a little: its equilibrium model must be a curve that
 * rises inside [0, 1] (the reader's whole-curve check, issue 18), checked on a grid.
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
        /* A model the reader accepted passed the whole-curve check (issue 18): y* is ok,
         * finite, inside [0, 1] and never falls anywhere on [0, x_max] (checked here on
         * 257 points, independently of the nodes the check looks at), with y*(0) = 0;
         * anything else is a defect worth a crash report. */
        const stagecal_vle *v = col.system.vle;
        double top = stagecal_vle_x_max(v), last = 0.0;
        for (size_t i = 0; i <= 256; i++) {
            double x = i == 256 ? top : top * (double)i / 256.0, y;
            if (stagecal_vle_ystar(v, x, &y) != 0 || !(y >= 0.0 && y <= 1.0) ||
                (i == 0 && y != 0.0) || y < last) {
                fprintf(stderr, "accepted model: y*(%.17g) = %.17g after %.17g\n", x, y, last);
                abort();
            }
            last = y;
        }
    }
    stagecal_column_free(&col);
    return 0;
}

/*
 * tool_modelcheck.c — loads each model file named on the command line with
 * stagecal_model_load (format, version, checksum and every member checked) and exits 0
 * only when all of them load. Used by tests/cli/test_kill_calibrate.sh to tell a
 * complete model file from a damaged one. Prints one line per file that fails.
 */
#include <gsl/gsl_errno.h>
#include <stdio.h>

#include "stagecal/model.h"

int main(int argc, char **argv)
{
    int bad = 0;
    gsl_set_error_handler_off();
    for (int i = 1; i < argc; i++) {
        stagecal_model m;
        stagecal_error err;
        stagecal_model_init(&m);
        if (stagecal_model_load(argv[i], &m, &err) != STAGECAL_OK) {
            fprintf(stderr, "%s\n", err.text);
            bad = 1;
        }
        stagecal_model_free(&m);
    }
    return bad;
}

/*
 * tool_batch_model.c — writes an INVENTED demo model file for the predict CLI tests
 * (tests/cli/test_predict.sh): fictional column "demo-batch-T-7", constant α = 2.5,
 * saturating law stages = 9·(1 − exp(−0.5 R)) with a stated covariance, calibrated
 * (fictionally) on R in [1.5, 12]. The numbers are made up and say so.
 * usage: tool_batch_model DIR   (prints the path of the file written under DIR)
 */
#include <stdio.h>

#include "stagecal/form.h"
#include "stagecal/model.h"

int main(int argc, char **argv)
{
    stagecal_model m;
    stagecal_error err;
    char path[1024];
    const double alpha = 2.5;
    if (argc != 2) {
        fprintf(stderr, "usage: tool_batch_model DIR\n");
        return 2;
    }
    stagecal_model_init(&m);
    snprintf(m.column_id, sizeof m.column_id, "demo-batch-T-7");
    snprintf(m.light, sizeof m.light, "light-key");
    snprintf(m.heavy, sizeof m.heavy, "heavy-key");
    snprintf(m.vle_kind, sizeof m.vle_kind, "alpha");
    if (stagecal_model_add_vle_param(&m, "alpha", &alpha, 1, &err) != STAGECAL_OK ||
        stagecal_form_parse("saturating", &m.form, &err) != STAGECAL_OK)
        goto fail;
    m.theta[0] = 9;
    m.theta[1] = 0.5;
    m.cov[0] = 0.04;
    m.cov[1] = m.cov[2] = 0.001;
    m.cov[3] = 0.0009;
    m.sigma = 0.2;
    m.dof = 20;
    m.n_windows = 22;
    m.n_samples = 660;
    m.n_runs = 6;
    m.r_min = 1.5;
    m.r_max = 12;
    stagecal_model_stamp_now(&m);
    if (stagecal_model_add_warning(&m, "INVENTED demo model for tests; not a real column", &err) !=
            STAGECAL_OK ||
        stagecal_model_write(&m, argv[1], path, sizeof path, &err) != STAGECAL_OK)
        goto fail;
    printf("%s\n", path);
    stagecal_model_free(&m);
    return 0;
fail:
    fprintf(stderr, "tool_batch_model: %s\n", err.text);
    stagecal_model_free(&m);
    return 1;
}

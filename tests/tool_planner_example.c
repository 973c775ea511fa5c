/*
 * tool_planner_example.c — the worked example of docs/planner-api.md, kept here so that
 * it is compiled with every build. A batch planner loads a model file, checks that it
 * was fitted for the right column, and tabulates stages with their 95 % bands over
 * reflux ratios, warning when a condition lies outside the fitted envelope.
 *
 *   usage: tool_planner_example MODEL.json [F-factor in Pa^0.5]
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "stagecal/model.h"

int main(int argc, char **argv)
{
    stagecal_model model;
    stagecal_model_point pt;
    stagecal_error err;
    const double reflux[] = {0.5, 1.0, 2.0, 4.0, 8.0, INFINITY};
    double f_load = NAN; /* F-factor [Pa^0.5]; only needed for load forms */

    if (argc < 2 || argc > 3) {
        fprintf(stderr, "usage: %s MODEL.json [F-factor in Pa^0.5]\n", argv[0]);
        return 2;
    }
    if (argc == 3) {
        char *end;
        f_load = strtod(argv[2], &end);
        if (*end != '\0' || end == argv[2]) {
            fprintf(stderr, "%s: '%s' is not a number\n", argv[0], argv[2]);
            return 2;
        }
    }

    /* 1. Load: every field is validated and the checksum verified. */
    stagecal_model_init(&model);
    if (stagecal_model_load(argv[1], &model, &err) != STAGECAL_OK) {
        fprintf(stderr, "%s: %s\n", argv[0], err.text);
        return err.code == STAGECAL_ENOINPUT ? 66 : 65;
    }
    printf("column %s, %s/%s, form %s, fitted %s on %zu windows (%zu samples, %zu runs)\n",
           model.column_id, model.light, model.heavy, model.form.name, model.fitted_utc,
           model.n_windows, model.n_samples, model.n_runs);
    if (model.form.uses_load && isnan(f_load)) {
        fprintf(stderr, "%s: this model needs the F-factor (second argument)\n", argv[0]);
        stagecal_model_free(&model);
        return 2;
    }

    /* 2. Evaluate: stages with the confidence band (mean) and the prediction band (one
     *    new quasi-steady window) at the level stored in the file (0 = default). */
    printf("%8s %8s %8s %17s %17s  %s\n", "R", "stages", "column", "95% CI", "95% PI", "note");
    for (size_t i = 0; i < sizeof reflux / sizeof reflux[0]; i++) {
        if (stagecal_model_eval(&model, reflux[i], f_load, 0, &pt, &err) != STAGECAL_OK) {
            printf("%8g  %s\n", reflux[i], err.text);
            continue;
        }
        printf("%8g %8.3f %8.3f [%7.3f, %7.3f] [%7.3f, %7.3f]  %s\n", reflux[i], pt.stages,
               pt.column_stages, pt.ci_low, pt.ci_high, pt.pi_low, pt.pi_high,
               pt.extrapolated ? "EXTRAPOLATED" : "");
        /* 3. Outside the envelope the correlation is an extrapolation: say how far. */
        if (pt.outside & (STAGECAL_MODEL_R_BELOW | STAGECAL_MODEL_R_ABOVE))
            fprintf(stderr,
                    "warning: R = %g lies outside the fitted range [%g, %g] (by %g in L/V)\n",
                    reflux[i], model.r_min, model.r_max, pt.lv_beyond);
        if (pt.outside & (STAGECAL_MODEL_F_BELOW | STAGECAL_MODEL_F_ABOVE))
            fprintf(stderr, "warning: F = %g Pa^0.5 lies %g Pa^0.5 outside [%g, %g]\n", f_load,
                    pt.f_beyond, model.f_min, model.f_max);
    }
    if (model.has_hetp)
        printf("HETP %.4f m [%.4f, %.4f] at R = %g over %.3f m of packing\n", model.hetp_m,
               model.hetp_low_m, model.hetp_high_m, model.hetp_r, model.height_m);

    /* 4. Release what the model owns. */
    stagecal_model_free(&model);
    return 0;
}

/*
 * batch_law.c — the stage laws of a batch column (a constant, a model file's
 * correlation) and forward stepping through the column, for the batch driver.
 */
#include <math.h>

#include "batch_internal.h"
#include "internal.h"
#include "stagecal/form.h"
#include "stagecal/stages.h"

/* ---- stage laws ------------------------------------------------------------------------- */

int stagecal_batch_constant_stages(void *data, double r, double *stages, unsigned *outside,
                                   stagecal_error *err)
{
    (void)r, (void)err;
    *stages = *(const double *)data;
    *outside = 0;
    return STAGECAL_OK;
}

int stagecal_batch_model_stages(void *data, double r, double *stages, unsigned *outside,
                                stagecal_error *err)
{
    const stagecal_batch_model_law *law = data;
    const stagecal_model *m = law->m;
    const double *theta = law->theta ? law->theta : m->theta;
    unsigned o = 0;
    int rc = stagecal_form_eval(&m->form, theta, r, law->f_load, stages, NULL);
    if (rc != STAGECAL_OK || !isfinite(*stages))
        return error_set(err, rc != STAGECAL_OK ? rc : STAGECAL_EINVAL,
                         "correlation '%s' is undefined at R = %g, F = %g", m->form.name, r,
                         law->f_load);
    if (r < m->r_min)
        o |= STAGECAL_MODEL_R_BELOW;
    if (r > m->r_max)
        o |= STAGECAL_MODEL_R_ABOVE;
    if (m->has_load && isfinite(law->f_load)) {
        if (law->f_load < m->f_min)
            o |= STAGECAL_MODEL_F_BELOW;
        if (law->f_load > m->f_max)
            o |= STAGECAL_MODEL_F_ABOVE;
    }
    *outside = o;
    return STAGECAL_OK;
}

int batch_col_step(const stagecal_batch_column *col, double xd, double r, double n, double *xb,
                   stagecal_error *err)
{
    if (n <= 1 || r == 0) {
        int rc = stagecal_vle_xstar(col->vle, xd, xb);
        if (rc != STAGECAL_OK)
            return error_set(err, rc, "x*(y) failed at y = %.17g", xd);
        return STAGECAL_OK;
    }
    if (col->step)
        return col->step(col->step_data, col->vle, xd, r, n, xb, err);
    int status = 0;
    size_t len = 0;
    int rc = stagecal_stages_step(col->vle, xd, r, n, 1.0, NULL, xb, NULL, 0, &len, &status, err);
    if (rc != STAGECAL_OK)
        return rc;
    /* At a pinch the steps stopped making progress: stepping reports the composition
     * reached, the pinch of this operating line to rounding, which more stages cannot
     * lower (stages.h). */
    if (status == STAGECAL_STAGES_PINCH)
        return STAGECAL_OK;
    if (status != STAGECAL_STAGES_OK)
        return error_set(err, STAGECAL_ENOCONV,
                         "stepping %.6g stages down from xD = %.9g at R = %.6g gave status '%s'", n,
                         xd, r, stagecal_stages_status_name(status));
    return STAGECAL_OK;
}

int batch_law_stages(const stagecal_batch_column *col, double r, double *n, unsigned *outside,
                     int *clamped, stagecal_error *err)
{
    int rc = col->stages(col->stages_data, r, n, outside, err);
    if (rc != STAGECAL_OK)
        return rc;
    if (!isfinite(*n))
        return error_set(err, STAGECAL_EINVAL, "stage law gave %g stages at R = %g", *n, r);
    if (*n < 1) {
        *n = 1; /* fewer than the pot alone is not physical: the pot is an ideal stage */
        if (clamped)
            *clamped = 1;
    }
    return STAGECAL_OK;
}

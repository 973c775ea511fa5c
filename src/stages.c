/* stages.c — placeholder until the stages module lands (replaced wholesale). */
#include "stagecal/stages.h"

#include "internal.h"

const char *stagecal_stages_status_name(int status)
{
    static const char *const names[] = {"ok", "pinch", "azeotrope", "invalid"};
    return (status >= 0 && status <= 3) ? names[status] : "unknown";
}

stagecal_stages_params stagecal_stages_default_params(void)
{
    stagecal_stages_params p = {10000, 1e-12, 0};
    return p;
}

int stagecal_stages_invert(const stagecal_vle *vle, double xd, double xb, double reflux,
                           double murphree, const stagecal_stages_params *params,
                           stagecal_stages_result *res, stagecal_error *err)
{
    (void)vle, (void)xd, (void)xb, (void)reflux, (void)murphree, (void)params, (void)res;
    return error_set(err, STAGECAL_EINTERNAL, "not implemented yet");
}

int stagecal_stages_step(const stagecal_vle *vle, double xd, double reflux, double stages,
                         double murphree, const stagecal_stages_params *params, double *xb,
                         stagecal_stage_point *profile, size_t cap, size_t *len, int *status,
                         stagecal_error *err)
{
    (void)vle, (void)xd, (void)reflux, (void)stages, (void)murphree, (void)params, (void)xb;
    (void)profile, (void)cap, (void)len, (void)status;
    return error_set(err, STAGECAL_EINTERNAL, "not implemented yet");
}

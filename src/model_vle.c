/*
 * model_vle.c — the equilibrium model inside a model file: stagecal_model_set_vle records
 * a vle's complete definition as named parameters (the column file's names,
 * docs/column-file.md), stagecal_model_build_vle rebuilds the vle from them, so that a
 * planner needs the model file alone (docs/model-file.md, "The equilibrium model").
 */
#include "stagecal/model.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

/* Activity parameter names per kind, in stagecal_vle_definition.params order (the column
 * file's names, docs/column-file.md). */
static const char *const vle_param_names[][STAGECAL_VLE_MAXPARAM] = {
    [STAGECAL_VLE_WILSON] = {"a12_j_mol", "a21_j_mol", "v1_m3_mol", "v2_m3_mol"},
    [STAGECAL_VLE_NRTL] = {"tau12_a", "tau12_b_k", "tau21_a", "tau21_b_k", "alpha12"},
    [STAGECAL_VLE_VANLAAR] = {"a12", "a21"},
    [STAGECAL_VLE_MARGULES] = {"a12", "a21"},
};
static const char *const antoine_prefix[2] = {"antoine_light", "antoine_heavy"};
static const char *const antoine_member[5] = {"a", "b", "c", "t_min_k", "t_max_k"};

static void clear_vle_params(stagecal_model *m)
{
    for (size_t i = 0; i < m->n_vle_params; i++)
        free(m->vle_params[i].values);
    free(m->vle_params);
    m->vle_params = NULL;
    m->n_vle_params = 0;
}

static int add_scalar(stagecal_model *m, const char *name, double v, stagecal_error *err)
{
    return stagecal_model_add_vle_param(m, name, &v, 1, err);
}

int stagecal_model_set_vle(stagecal_model *m, const stagecal_vle *vle, stagecal_error *err)
{
    stagecal_vle_definition d;
    stagecal_vle_params dvp = stagecal_vle_default_params();
    char name[STAGECAL_MODEL_TEXT];
    int rc = STAGECAL_OK;
    stagecal_vle_get_definition(vle, &d);
    clear_vle_params(m);
    copy_text(m->vle_kind, sizeof m->vle_kind, stagecal_vle_kind_name(d.kind));
    switch (d.kind) {
    case STAGECAL_VLE_ALPHA:
        return add_scalar(m, "alpha", d.alpha, err);
    case STAGECAL_VLE_KVALUE:
        return add_scalar(m, "k", d.k, err);
    case STAGECAL_VLE_TABLE:
        if ((rc = stagecal_model_add_vle_param(m, "x", d.x, d.n, err)) ||
            (rc = stagecal_model_add_vle_param(m, "y", d.y, d.n, err)))
            return rc;
        return d.t_k ? stagecal_model_add_vle_param(m, "t_k", d.t_k, d.n, err) : STAGECAL_OK;
    default:
        break;
    }
    if ((rc = add_scalar(m, "pressure_pa", d.p_pa, err)))
        return rc;
    for (int c = 0; c < 2; c++) {
        const double v[5] = {d.ant[c].a, d.ant[c].b, d.ant[c].c, d.ant[c].t_min_k,
                             d.ant[c].t_max_k};
        for (int j = 0; j < 5; j++) {
            snprintf(name, sizeof name, "%s_%s", antoine_prefix[c], antoine_member[j]);
            if ((rc = add_scalar(m, name, v[j], err)))
                return rc;
        }
    }
    for (size_t i = 0; i < d.nparam; i++)
        if ((rc = add_scalar(m, vle_param_names[d.kind][i], d.params[i], err)))
            return rc;
    /* Tunables change the table's nodes, so a rebuild needs them; the defaults are left
     * out to keep files short. */
    if (d.vp.grid_n != dvp.grid_n && (rc = add_scalar(m, "grid_n", (double)d.vp.grid_n, err)))
        return rc;
    if (d.vp.t_epsrel != dvp.t_epsrel && (rc = add_scalar(m, "t_epsrel", d.vp.t_epsrel, err)))
        return rc;
    if (d.vp.max_iter != dvp.max_iter &&
        (rc = add_scalar(m, "max_iter", (double)d.vp.max_iter, err)))
        return rc;
    if (d.vp.exact != dvp.exact && (rc = add_scalar(m, "exact", d.vp.exact ? 1.0 : 0.0, err)))
        return rc;
    return STAGECAL_OK;
}

static const stagecal_model_vle_param *find_vle_param(const stagecal_model *m, const char *name)
{
    for (size_t i = 0; i < m->n_vle_params; i++)
        if (strcmp(m->vle_params[i].name, name) == 0)
            return &m->vle_params[i];
    return NULL;
}

#define VLE_FAIL(...) error_set(err, STAGECAL_EDATA, __VA_ARGS__)

/* One number named name (required unless dflt is given, i.e. not NAN). */
static int need_scalar(const stagecal_model *m, const char *name, double dflt, double *out,
                       stagecal_error *err)
{
    const stagecal_model_vle_param *p = find_vle_param(m, name);
    if (!p) {
        if (!isnan(dflt)) {
            *out = dflt;
            return STAGECAL_OK;
        }
        return VLE_FAIL("equilibrium model '%s': parameter '%s' is missing from "
                        "system.equilibrium.parameters (a model file written before the full "
                        "system was recorded? give the column file instead)",
                        m->vle_kind, name);
    }
    if (p->n != 1)
        return VLE_FAIL("equilibrium model '%s': parameter '%s' has %zu values, expected one "
                        "number",
                        m->vle_kind, name, p->n);
    *out = p->values[0];
    return STAGECAL_OK;
}

/* A whole number in [lo, hi] (a tunable stored as a JSON number). */
static int need_count(const stagecal_model *m, const char *name, size_t dflt, size_t lo, size_t hi,
                      size_t *out, stagecal_error *err)
{
    double v;
    int rc = need_scalar(m, name, (double)dflt, &v, err);
    if (rc)
        return rc;
    if (!(v >= (double)lo && v <= (double)hi) || v != floor(v))
        return VLE_FAIL("equilibrium model '%s': parameter '%s' = %g, expected a whole number "
                        "in [%zu, %zu]",
                        m->vle_kind, name, v, lo, hi);
    *out = (size_t)v;
    return STAGECAL_OK;
}

static int vle_kind_from_name(const char *name, stagecal_vle_kind *kind)
{
    for (int k = STAGECAL_VLE_ALPHA; k <= STAGECAL_VLE_MARGULES; k++)
        if (strcmp(name, stagecal_vle_kind_name((stagecal_vle_kind)k)) == 0) {
            *kind = (stagecal_vle_kind)k;
            return 0;
        }
    return -1;
}

int stagecal_model_build_vle(const stagecal_model *m, stagecal_vle **out, stagecal_error *err)
{
    stagecal_vle_definition d;
    const stagecal_model_vle_param *px, *py, *pt;
    char name[STAGECAL_MODEL_TEXT];
    int rc;
    *out = NULL;
    memset(&d, 0, sizeof d);
    d.vp = stagecal_vle_default_params();
    if (vle_kind_from_name(m->vle_kind, &d.kind) != 0)
        return VLE_FAIL("equilibrium model '%s' is unknown (expected alpha, kvalue, table, "
                        "ideal, wilson, nrtl, vanlaar or margules)",
                        m->vle_kind);
    switch (d.kind) {
    case STAGECAL_VLE_ALPHA:
        if ((rc = need_scalar(m, "alpha", NAN, &d.alpha, err)))
            return rc;
        break;
    case STAGECAL_VLE_KVALUE:
        if ((rc = need_scalar(m, "k", NAN, &d.k, err)))
            return rc;
        break;
    case STAGECAL_VLE_TABLE:
        px = find_vle_param(m, "x");
        py = find_vle_param(m, "y");
        pt = find_vle_param(m, "t_k");
        if (!px || !py)
            return VLE_FAIL("equilibrium model 'table': parameter '%s' is missing from "
                            "system.equilibrium.parameters (a model file written before the "
                            "full system was recorded? give the column file instead)",
                            px ? "y" : "x");
        if (py->n != px->n || (pt && pt->n != px->n))
            return VLE_FAIL("equilibrium model 'table': x has %zu values but y %zu%s; expected "
                            "the same number",
                            px->n, py->n, pt ? " or t_k differs" : "");
        d.n = px->n;
        d.x = px->values;
        d.y = py->values;
        d.t_k = pt ? pt->values : NULL;
        break;
    default:
        if ((rc = need_scalar(m, "pressure_pa", NAN, &d.p_pa, err)))
            return rc;
        for (int c = 0; c < 2; c++) {
            double v[5];
            for (int j = 0; j < 5; j++) {
                snprintf(name, sizeof name, "%s_%s", antoine_prefix[c], antoine_member[j]);
                /* an Antoine set without a stated range is written with 0, 0 */
                if ((rc = need_scalar(m, name, j >= 3 ? 0.0 : NAN, &v[j], err)))
                    return rc;
            }
            d.ant[c] = (stagecal_antoine){v[0], v[1], v[2], v[3], v[4]};
        }
        for (size_t i = 0; i < STAGECAL_VLE_MAXPARAM && vle_param_names[d.kind][i]; i++) {
            if ((rc = need_scalar(m, vle_param_names[d.kind][i], NAN, &d.params[i], err)))
                return rc;
            d.nparam = i + 1;
        }
        {
            stagecal_vle_params dvp = d.vp;
            double exact;
            if ((rc = need_count(m, "grid_n", dvp.grid_n, 17, 1000000, &d.vp.grid_n, err)) ||
                (rc = need_count(m, "max_iter", dvp.max_iter, 10, 1000000, &d.vp.max_iter, err)) ||
                (rc = need_scalar(m, "t_epsrel", dvp.t_epsrel, &d.vp.t_epsrel, err)) ||
                (rc = need_scalar(m, "exact", dvp.exact, &exact, err)))
                return rc;
            if (exact != 0.0 && exact != 1.0)
                return VLE_FAIL("equilibrium model '%s': parameter 'exact' = %g, expected 0 or 1",
                                m->vle_kind, exact);
            d.vp.exact = exact == 1.0;
        }
        break;
    }
    stagecal_error verr;
    stagecal_error_clear(&verr);
    *out = stagecal_vle_alloc_definition(&d, &verr);
    if (*out && stagecal_vle_validate(*out, NULL, &verr) != STAGECAL_OK) {
        stagecal_vle_free(*out);
        *out = NULL;
    }
    if (!*out) {
        int code =
            verr.code == STAGECAL_EINVAL || verr.code == STAGECAL_OK ? STAGECAL_EDATA : verr.code;
        return error_set(err, code, "equilibrium model '%s': %s", m->vle_kind, verr.text);
    }
    return STAGECAL_OK;
}

#undef VLE_FAIL

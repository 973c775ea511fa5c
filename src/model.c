/*
 * model.c — the model in memory: names, lifecycle, the add_* helpers, the rules every
 * model obeys (model_check) and evaluation. The document lives in model_json.c, the
 * file in model_file.c (format: docs/model-file.md, docs/model.schema.json).
 *
 * Covariance: finite, symmetric to rounding and positive semi-definite (Cholesky of
 * its correlation matrix plus a small ridge, GSL): a matrix such as [[1, 2], [2, 1]]
 * cannot be a covariance and would draw bands from nothing.
 *
 * Evaluation: stagecal_regress_band (delta method, include/stagecal/regress.h) with
 * the stored θ, covariance, σ (of one new observation, in stages) and dof.
 */
#include "stagecal/model.h"
#include "stagecal/convention.h"
#include "stagecal/regress.h"
#include "stagecal/version.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "internal.h"
#include "model_internal.h"

/* Relative asymmetry of the covariance accepted as rounding:
 * |C_ij − C_ji| ≤ MODEL_SYM_RTOL·sqrt(C_ii·C_jj). Covariances from GSL are
 * symmetric to a few ulps; a hand edit of one triangle is far larger. */
static const double MODEL_SYM_RTOL = 1e-12;
/* Ridge added to the covariance's correlation matrix before its Cholesky factorisation:
 * a fitted covariance that is singular to rounding (eigenvalues ~ -1e-16) passes, a
 * correlation beyond ±1 by more than this does not. */
static const double MODEL_PSD_TOL = 1e-10;

/* ---- names ------------------------------------------------------------------------ */

const char *stagecal_model_method_name(stagecal_model_method method)
{
    return method == STAGECAL_MODEL_COMPOSITION_SPACE ? "composition-space"
           : method == STAGECAL_MODEL_CENSORED        ? "censored-likelihood"
                                                      : "stage-space";
}

/* The optional physical data of the system: members of "system" (docs/model-file.md),
 * in the order of model_system_data(). 0 in the struct = not recorded = no member. */
const char *const model_system_key[MODEL_NSYSTEM] = {"latent_heat_j_mol", "molar_mass_light_kg_mol",
                                                     "molar_mass_heavy_kg_mol"};

void model_system_data(const stagecal_model *m, double v[MODEL_NSYSTEM])
{
    v[0] = m->latent_j_mol;
    v[1] = m->m_light_kg_mol;
    v[2] = m->m_heavy_kg_mol;
}

/* ---- lifecycle ---------------------------------------------------------------------- */

void stagecal_model_init(stagecal_model *m)
{
    memset(m, 0, sizeof *m);
    m->level = 0.95;
    m->condenser = STAGECAL_CONDENSER_TOTAL;
    m->method = STAGECAL_MODEL_STAGE_SPACE;
    snprintf(m->tool_version, sizeof m->tool_version, "%s", stagecal_version());
}

void stagecal_model_free(stagecal_model *m)
{
    if (!m)
        return;
    for (size_t i = 0; i < m->n_vle_params; i++)
        free(m->vle_params[i].values);
    free(m->vle_params);
    for (size_t i = 0; i < m->n_inputs; i++)
        free(m->inputs[i].path);
    free(m->inputs);
    for (size_t i = 0; i < m->n_warnings; i++)
        free(m->warnings[i]);
    free(m->warnings);
    free(m->command_line);
    free(m->design);
    free(m->design_run);
    stagecal_model_init(m);
}

int model_is_hex64(const char *s)
{
    size_t i;
    for (i = 0; s[i]; i++)
        if (!((s[i] >= '0' && s[i] <= '9') || (s[i] >= 'a' && s[i] <= 'f')))
            return 0;
    return i == 64;
}

int stagecal_model_add_vle_param(stagecal_model *m, const char *name, const double *values,
                                 size_t n, stagecal_error *err)
{
    if (!name || !name[0] || strlen(name) >= STAGECAL_MODEL_TEXT)
        return error_set(err, STAGECAL_EINVAL,
                         "equilibrium parameter name: expected 1 to %d characters",
                         STAGECAL_MODEL_TEXT - 1);
    if (n == 0 || !values)
        return error_set(err, STAGECAL_EINVAL,
                         "equilibrium parameter '%s': expected at least one value", name);
    double *v = malloc(n * sizeof *v);
    stagecal_model_vle_param *grown = realloc(m->vle_params, (m->n_vle_params + 1) * sizeof *grown);
    if (!v || !grown) {
        free(v);
        if (grown)
            m->vle_params = grown;
        return error_set(err, STAGECAL_ENOMEM, "out of memory adding equilibrium parameter");
    }
    m->vle_params = grown;
    memcpy(v, values, n * sizeof *v);
    stagecal_model_vle_param *p = &m->vle_params[m->n_vle_params++];
    memset(p, 0, sizeof *p);
    copy_text(p->name, sizeof p->name, name);
    p->n = n;
    p->values = v;
    return STAGECAL_OK;
}

/* ---- the equilibrium model ------------------------------------------------------------ */

int stagecal_model_add_input(stagecal_model *m, const char *path, const char *sha256, size_t rows,
                             stagecal_error *err)
{
    if (!path || !path[0])
        return error_set(err, STAGECAL_EINVAL, "input path: expected a non-empty path");
    if (!sha256 || !model_is_hex64(sha256))
        return error_set(err, STAGECAL_EINVAL, "input '%s': sha256 is not 64 lowercase hex digits",
                         path);
    char *copy = strdup(path);
    stagecal_model_input *grown = realloc(m->inputs, (m->n_inputs + 1) * sizeof *grown);
    if (!copy || !grown) {
        free(copy);
        if (grown)
            m->inputs = grown;
        return error_set(err, STAGECAL_ENOMEM, "out of memory adding input '%s'", path);
    }
    m->inputs = grown;
    stagecal_model_input *in = &m->inputs[m->n_inputs++];
    memset(in, 0, sizeof *in);
    in->path = copy;
    memcpy(in->sha256, sha256, 65);
    in->rows = rows;
    return STAGECAL_OK;
}

int stagecal_model_add_warning(stagecal_model *m, const char *text, stagecal_error *err)
{
    if (!text)
        return error_set(err, STAGECAL_EINVAL, "warning: expected a text");
    char *copy = strdup(text);
    char **grown = realloc(m->warnings, (m->n_warnings + 1) * sizeof *grown);
    if (!copy || !grown) {
        free(copy);
        if (grown)
            m->warnings = grown;
        return error_set(err, STAGECAL_ENOMEM, "out of memory adding a warning");
    }
    m->warnings = grown;
    m->warnings[m->n_warnings++] = copy;
    return STAGECAL_OK;
}

int stagecal_model_set_command_line(stagecal_model *m, const char *text, stagecal_error *err)
{
    char *copy = NULL;
    if (text && !(copy = strdup(text)))
        return error_set(err, STAGECAL_ENOMEM, "out of memory copying the command line");
    free(m->command_line);
    m->command_line = copy;
    return STAGECAL_OK;
}

int stagecal_model_set_design(stagecal_model *m, const double *x, size_t n, stagecal_error *err)
{
    double *copy = NULL;
    size_t k = n * m->form.p;
    if (k > 0 && !(copy = malloc(k * sizeof *copy)))
        return error_set(err, STAGECAL_ENOMEM, "out of memory copying the design");
    if (k > 0)
        memcpy(copy, x, k * sizeof *copy);
    free(m->design);
    free(m->design_run);
    m->design = copy;
    m->design_run = NULL;
    m->n_design = k > 0 ? n : 0;
    return STAGECAL_OK;
}

int stagecal_model_set_design_run(stagecal_model *m, const size_t *cl, stagecal_error *err)
{
    size_t *copy = NULL;
    if (cl && m->n_design > 0) {
        if (!(copy = malloc(m->n_design * sizeof *copy)))
            return error_set(err, STAGECAL_ENOMEM, "out of memory copying the design's runs");
        memcpy(copy, cl, m->n_design * sizeof *copy);
    }
    free(m->design_run);
    m->design_run = copy;
    return STAGECAL_OK;
}

void stagecal_model_stamp_now(stagecal_model *m)
{
    struct tm tm;
    time_t now = time(NULL);
    if (!gmtime_r(&now, &tm) ||
        strftime(m->fitted_utc, sizeof m->fitted_utc, "%Y-%m-%dT%H:%M:%SZ", &tm) == 0)
        m->fitted_utc[0] = '\0';
}

/* ---- validation of a model in memory ---------------------------------------------- */

/* Is the p x p covariance (finite, symmetric, variances >= 0: checked before) positive
 * semi-definite? It is scaled to its correlation matrix R (a zero variance must have a
 * zero row), and R + MODEL_PSD_TOL·I must have a Cholesky factor (GSL). Returns 1 yes,
 * 0 no, -1 out of memory. */
static int cov_psd(const double *cov, size_t p)
{
    if (p == 0)
        return 1;
    gsl_matrix *r = gsl_matrix_alloc(p, p);
    if (!r)
        return -1;
    int ok = 1;
    for (size_t i = 0; i < p && ok; i++)
        for (size_t j = 0; j < p; j++) {
            double si = sqrt(cov[i * p + i]), sj = sqrt(cov[j * p + j]);
            double v;
            if (i == j)
                v = 1.0 + MODEL_PSD_TOL;
            else if (si == 0 || sj == 0)
                v = cov[i * p + j] == 0 ? 0.0 : NAN; /* covariance without variance */
            else
                v = cov[i * p + j] / si / sj;
            if (isnan(v)) {
                ok = 0;
                break;
            }
            gsl_matrix_set(r, i, j, v);
        }
    if (ok && gsl_linalg_cholesky_decomp1(r) != GSL_SUCCESS)
        ok = 0;
    gsl_matrix_free(r);
    return ok;
}

/* "YYYY-MM-DDTHH:MM:SSZ" with plausible ranges; writes "YYYYMMDDTHHMMSSZ" to stamp. */
int model_parse_utc(const char *s, char stamp[17])
{
    static const char shape[] = "dddd-dd-ddTdd:dd:ddZ";
    if (strlen(s) != sizeof shape - 1)
        return -1;
    for (size_t i = 0; shape[i]; i++) {
        if (shape[i] == 'd' ? !(s[i] >= '0' && s[i] <= '9') : s[i] != shape[i])
            return -1;
    }
#define TWO(i) ((s[i] - '0') * 10 + (s[(i) + 1] - '0'))
    int mon = TWO(5), day = TWO(8), hour = TWO(11), min = TWO(14), sec = TWO(17);
#undef TWO
    if (mon < 1 || mon > 12 || day < 1 || day > 31 || hour > 23 || min > 59 || sec > 60)
        return -1;
    if (stamp) {
        size_t k = 0;
        for (size_t i = 0; s[i]; i++)
            if (s[i] != '-' && s[i] != ':')
                stamp[k++] = s[i];
        stamp[k] = '\0';
    }
    return 0;
}

/* Checks every rule of the format on m; messages are prefixed with source when it is
 * not NULL; code is EINVAL (writing) or EDATA (loading). */
int model_check(const stagecal_model *m, const char *source, int code, stagecal_error *err)
{
#define FAIL(...) return error_set_at(err, code, source, 0, 0, __VA_ARGS__)
    if (!stagecal_convention_id_valid(m->column_id))
        FAIL("column id '%s': expected %s", m->column_id, stagecal_convention_id_rule());
    if (!m->light[0] || !m->heavy[0])
        FAIL("system: component names must not be empty");
    if (!m->vle_kind[0])
        FAIL("system: equilibrium model name must not be empty");
    for (size_t i = 0; i < m->n_vle_params; i++) {
        const stagecal_model_vle_param *p = &m->vle_params[i];
        if (!p->name[0] || p->n == 0 || !p->values)
            FAIL("equilibrium parameter %zu: expected a name and at least one value", i + 1);
        for (size_t j = 0; j < p->n; j++)
            if (!isfinite(p->values[j]))
                FAIL("equilibrium parameter '%s': value %zu is not finite", p->name, j + 1);
        for (size_t j = 0; j < i; j++)
            if (strcmp(m->vle_params[j].name, p->name) == 0)
                FAIL("equilibrium parameter '%s' appears twice", p->name);
    }
    double sysdata[MODEL_NSYSTEM];
    model_system_data(m, sysdata);
    for (int k = 0; k < MODEL_NSYSTEM; k++)
        if (sysdata[k] != 0 && !(isfinite(sysdata[k]) && sysdata[k] > 0))
            FAIL("system: %s = %g: expected a finite number > 0", model_system_key[k], sysdata[k]);
    if (m->condenser != STAGECAL_CONDENSER_TOTAL && m->condenser != STAGECAL_CONDENSER_PARTIAL)
        FAIL("stage convention: unknown condenser type %d", (int)m->condenser);

    stagecal_form form;
    stagecal_error ferr;
    if (stagecal_form_parse(m->form.name, &form, &ferr) != STAGECAL_OK)
        FAIL("correlation form: %s", ferr.text);
    if (strcmp(form.name, m->form.name) != 0)
        FAIL("correlation form '%s' is not in canonical notation ('%s' expected)", m->form.name,
             form.name);
    if (form.p != m->form.p)
        FAIL("correlation form '%s' has %zu parameters, not %zu", form.name, form.p, m->form.p);
    size_t p = form.p;
    for (size_t i = 0; i < p; i++)
        if (!isfinite(m->theta[i]))
            FAIL("parameter '%s' is not finite", form.param_names[i]);
    for (size_t i = 0; i < p; i++) {
        for (size_t j = 0; j < p; j++)
            if (!isfinite(m->cov[i * p + j]))
                FAIL("covariance[%zu][%zu] is not finite", i, j);
        if (m->cov[i * p + i] < 0)
            FAIL("covariance[%zu][%zu] = %.17g: a variance must be >= 0", i, i, m->cov[i * p + i]);
    }
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < i; j++) {
            double a = m->cov[i * p + j], b = m->cov[j * p + i];
            double scale = sqrt(m->cov[i * p + i] * m->cov[j * p + j]);
            if (fabs(a - b) > MODEL_SYM_RTOL * scale)
                FAIL("covariance is not symmetric: [%zu][%zu] = %.17g but [%zu][%zu] = %.17g", i, j,
                     a, j, i, b);
        }
    int psd = cov_psd(m->cov, p);
    if (psd < 0)
        return error_set(err, STAGECAL_ENOMEM, "out of memory checking the covariance");
    if (psd == 0)
        FAIL("covariance is not positive semi-definite (its correlation matrix + %g I has no "
             "Cholesky factor): it cannot be the covariance of the parameters",
             MODEL_PSD_TOL);
    if (!isfinite(m->sigma) || m->sigma < 0)
        FAIL("sigma_stages = %g: expected a finite number >= 0", m->sigma);
    if (!isfinite(m->dof) || m->dof <= 0)
        FAIL("dof = %g: expected a finite number > 0", m->dof);
    if (!(m->level > 0 && m->level < 1))
        FAIL("confidence_level = %g: expected a number in (0, 1)", m->level);
    if (m->n_design > 0) {
        if (!m->design || m->n_design <= p)
            FAIL("design: %zu rows for %zu parameters (expected more rows than parameters)",
                 m->n_design, p);
        for (size_t i = 0; i < m->n_design * p; i++)
            if (!isfinite(m->design[i]))
                FAIL("design[%zu][%zu] is not finite", i / p, i % p);
        if (m->one_sided)
            FAIL("a one-sided bound has no design (its covariance means nothing)");
        /* full rank and no leverage of 1 (what every contrast's dof needs; one contrast,
         * here the first parameter, tests both) */
        double c[STAGECAL_FORM_MAXP] = {1}, dof;
        stagecal_error e2;
        if (stagecal_regress_bm_dof(m->design, m->n_design, p, c, &dof, &e2) != STAGECAL_OK)
            FAIL("design: %s", e2.text);
        if (m->design_run) {
            size_t G = 0;
            for (size_t i = 0; i < m->n_design; i++)
                G = m->design_run[i] + 1 > G ? m->design_run[i] + 1 : G;
            if (G < STAGECAL_CR2_MIN_CLUSTERS || G > m->n_design)
                FAIL("design_run: %zu runs for %zu rows (expected %d to the rows)", G, m->n_design,
                     STAGECAL_CR2_MIN_CLUSTERS);
            if (stagecal_regress_contrast_dof(m->design, m->n_design, p, m->design_run, c, &dof,
                                              &e2) != STAGECAL_OK)
                FAIL("design_run: %s", e2.text);
        }
    } else if (m->design_run) {
        FAIL("design_run without a design");
    }
    if (m->scatter.n > 0) {
        stagecal_error e2;
        if (stagecal_scatter_check(&m->scatter, &e2) != STAGECAL_OK)
            FAIL("%s", e2.text);
        if (m->one_sided)
            FAIL("a one-sided bound has no scatter function (it has no prediction band)");
    }
    if (m->method != STAGECAL_MODEL_STAGE_SPACE && m->method != STAGECAL_MODEL_COMPOSITION_SPACE &&
        m->method != STAGECAL_MODEL_CENSORED)
        FAIL("fit method %d is unknown", (int)m->method);
    if (m->one_sided && m->method != STAGECAL_MODEL_CENSORED)
        FAIL("a one-sided bound comes from the censored-likelihood fit only, not from '%s'",
             stagecal_model_method_name(m->method));
    for (size_t i = 0; m->one_sided && i < p; i++)
        if (!isfinite(m->theta_ml[i]))
            FAIL("one-sided bound: maximum-likelihood parameter %zu is %g (expected a finite "
                 "number)",
                 i, m->theta_ml[i]);

    if (!isfinite(m->r_min) || m->r_min < 0 || isnan(m->r_max) || m->r_max < m->r_min)
        FAIL("envelope: R range [%g, %g]: expected 0 <= r_min <= r_max (r_max may be inf)",
             m->r_min, m->r_max);
    if (form.uses_load && !m->has_load)
        FAIL("envelope: the form '%s' uses the F-factor but the envelope has no F range",
             form.name);
    if (m->has_load &&
        (!isfinite(m->f_min) || !isfinite(m->f_max) || m->f_min < 0 || m->f_max < m->f_min))
        FAIL("envelope: F range [%g, %g] Pa^0.5: expected finite 0 <= f_min <= f_max", m->f_min,
             m->f_max);

    for (size_t i = 0; i < m->n_inputs; i++) {
        const stagecal_model_input *in = &m->inputs[i];
        if (!in->path || !in->path[0])
            FAIL("provenance: input %zu has no path", i + 1);
        if (!model_is_hex64(in->sha256))
            FAIL("provenance: input '%s': sha256 is not 64 lowercase hex digits", in->path);
    }
    if (model_parse_utc(m->fitted_utc, NULL) != 0)
        FAIL("provenance: fitted_utc '%s': expected YYYY-MM-DDTHH:MM:SSZ", m->fitted_utc);
    if (m->data_first_utc[0] && model_parse_utc(m->data_first_utc, NULL) != 0)
        FAIL("provenance: data_first_utc '%s': expected YYYY-MM-DDTHH:MM:SSZ", m->data_first_utc);
    if (m->data_last_utc[0] && model_parse_utc(m->data_last_utc, NULL) != 0)
        FAIL("provenance: data_last_utc '%s': expected YYYY-MM-DDTHH:MM:SSZ", m->data_last_utc);
    if (!m->tool_version[0])
        FAIL("provenance: tool_version must not be empty");
    if (m->seed > (unsigned long long)LLONG_MAX)
        FAIL("provenance: seed %llu is larger than 2^63 - 1", m->seed);

    if (m->has_hetp) {
        if (!(isfinite(m->height_m) && m->height_m > 0))
            FAIL("hetp: height_m = %g: expected a finite number > 0", m->height_m);
        if (isnan(m->hetp_r) || m->hetp_r < 0)
            FAIL("hetp: reference R = %g: expected >= 0 (inf allowed)", m->hetp_r);
        if (m->has_load && !(isfinite(m->hetp_f) && m->hetp_f >= 0))
            FAIL("hetp: reference F = %g Pa^0.5: expected a finite number >= 0", m->hetp_f);
        if (!(isfinite(m->hetp_m) && m->hetp_m > 0))
            FAIL("hetp: hetp_m = %g: expected a finite number > 0", m->hetp_m);
        if (!(isfinite(m->hetp_low_m) && m->hetp_low_m >= 0 && m->hetp_low_m <= m->hetp_m) ||
            isnan(m->hetp_high_m) || m->hetp_high_m < m->hetp_m)
            FAIL("hetp: interval [%g, %g] m does not contain hetp_m = %g m", m->hetp_low_m,
                 m->hetp_high_m, m->hetp_m);
        if (!(m->hetp_level > 0 && m->hetp_level < 1))
            FAIL("hetp: level = %g: expected a number in (0, 1)", m->hetp_level);
    }
    for (size_t i = 0; i < m->n_warnings; i++)
        if (!m->warnings[i])
            FAIL("warning %zu is missing", i + 1);
#undef FAIL
    return STAGECAL_OK;
}

int stagecal_model_check(const stagecal_model *m, stagecal_error *err)
{
    return model_check(m, NULL, STAGECAL_EINVAL, err);
}

/* ---- evaluation ----------------------------------------------------------------------- */

int stagecal_model_param_dof(const stagecal_model *m, size_t k, double *dof, stagecal_error *err)
{
    if (!m || !dof || k >= m->form.p)
        return error_set(err, STAGECAL_EINVAL,
                         "parameter %zu of a model with %zu (expected one "
                         "of them)",
                         k, m ? m->form.p : 0);
    if (!m->design || m->n_design == 0) {
        *dof = m->dof;
        return STAGECAL_OK;
    }
    double c[STAGECAL_FORM_MAXP] = {0};
    c[k] = 1;
    return stagecal_regress_contrast_dof(m->design, m->n_design, m->form.p, m->design_run, c, dof,
                                         err);
}

int stagecal_model_eval(const stagecal_model *m, double r, double f_load, double level,
                        stagecal_model_point *out, stagecal_error *err)
{
    stagecal_band band;
    if (level == 0)
        level = m->level;
    if (isnan(r) || r < 0)
        return error_set(err, STAGECAL_EINVAL, "reflux ratio R = %g: expected R >= 0 or inf", r);
    if (!(level > 0 && level < 1))
        return error_set(err, STAGECAL_EINVAL, "level = %g: expected a number in (0, 1)", level);
    if (m->form.uses_load && !(isfinite(f_load) && f_load >= 0))
        return error_set(err, STAGECAL_EINVAL,
                         "F-factor = %g Pa^0.5: the form '%s' needs a finite F >= 0", f_load,
                         m->form.name);
    /* σ of one new window: the scatter function at r, with its own dof, where the file has
     * one (with a design the dof argument is σ's alone; without one it is also the
     * confidence band's, so the prediction band's t is redone below) */
    double sigma = m->sigma, sdof = m->dof;
    if (m->scatter.n > 0) {
        sigma = stagecal_scatter_sd(&m->scatter, r);
        double d = stagecal_scatter_dof(&m->scatter, r);
        sdof = isfinite(d) ? fmin(d, m->dof) : m->dof;
    }
    int rc = stagecal_regress_band_clustered(&m->form, m->theta, m->cov, sigma, 1.0,
                                             m->design ? sdof : m->dof, m->design, m->design_run,
                                             m->n_design, level, r, f_load, &band, err);
    if (rc != STAGECAL_OK)
        return rc;
    if (!m->design && m->scatter.n > 0) {
        band.dof_pred = sdof;
        double tp = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, sdof);
        band.pi_low = band.value - tp * band.se_pred;
        band.pi_high = band.value + tp * band.se_pred;
    }

    memset(out, 0, sizeof *out);
    out->stages = band.value;
    out->column_stages = stagecal_convention_column_stages(band.value, m->condenser);
    out->se_fit = band.se_fit;
    out->se_pred = band.se_pred;
    out->level = level;
    out->t = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, band.dof_fit);
    out->dof_fit = band.dof_fit;
    out->dof_pred = band.dof_pred;
    out->ci_low = band.ci_low;
    out->ci_high = band.ci_high;
    out->pi_low = band.pi_low;
    out->pi_high = band.pi_high;

    if (r < m->r_min) {
        out->outside |= STAGECAL_MODEL_R_BELOW;
        out->r_beyond = m->r_min - r;
        out->lv_beyond = lv_of(m->r_min) - lv_of(r);
    } else if (r > m->r_max) {
        out->outside |= STAGECAL_MODEL_R_ABOVE;
        out->r_beyond = r - m->r_max;
        out->lv_beyond = lv_of(r) - lv_of(m->r_max);
    }
    if (m->has_load && isfinite(f_load)) {
        if (f_load < m->f_min) {
            out->outside |= STAGECAL_MODEL_F_BELOW;
            out->f_beyond = m->f_min - f_load;
        } else if (f_load > m->f_max) {
            out->outside |= STAGECAL_MODEL_F_ABOVE;
            out->f_beyond = f_load - m->f_max;
        }
    }
    out->extrapolated = out->outside != 0;
    if (m->one_sided) { /* the bound, at the model's level: no standard error to give */
        out->lower_only = 1;
        out->level = m->level;
        out->se_fit = out->se_pred = out->t = NAN;
        out->ci_low = out->pi_low = band.value;
        out->ci_high = out->pi_high = INFINITY;
    }
    return STAGECAL_OK;
}

/*
 * model_json.c — the model file's document: model → JSON (build, canonical hash, the
 * pretty text with its checksum) and JSON → model (parse, every field checked).
 *
 * One JSON object, written with jansson (sorted keys, 2-space indent, reals with 17
 * significant digits so doubles round-trip bit for bit). Reflux ratios that may be
 * infinite are written as the string "inf". The integrity checksum is the SHA-256
 * (FIPS 180-4, src/sha256.c) of the canonical text: the document without its
 * "checksum" member, dumped by jansson with JSON_COMPACT | JSON_SORT_KEYS |
 * JSON_ENSURE_ASCII | JSON_REAL_PRECISION(17) (docs/model-file.md shows how to
 * reproduce it).
 */
#include "stagecal/model.h"
#include "stagecal/convention.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "internal_sha256.h"
#include "json_read.h"
#include "model_internal.h"

static const int DUMP_CANONICAL =
    JSON_COMPACT | JSON_SORT_KEYS | JSON_ENSURE_ASCII | JSON_REAL_PRECISION(17);
static const int DUMP_PRETTY =
    JSON_INDENT(2) | JSON_SORT_KEYS | JSON_ENSURE_ASCII | JSON_REAL_PRECISION(17);

/* ---- model → JSON ----------------------------------------------------------------- */

/* Reals that may be infinite (R) are written as the string "inf". */
static json_t *real_or_inf(double v)
{
    return isinf(v) ? json_string("inf") : json_real(v);
}

/* Builds the document without the checksum member; NULL on allocation failure. */
static json_t *build_doc(const stagecal_model *m)
{
    size_t p = m->form.p;
    json_t *doc = json_object();
    json_t *vle = json_object(), *vparams = json_object(), *params = json_array();
    json_t *cov = json_array(), *inputs = json_array(), *warnings = json_array();
    int bad = !doc || !vle || !vparams || !params || !cov || !inputs || !warnings;

    for (size_t i = 0; !bad && i < m->n_vle_params; i++) {
        const stagecal_model_vle_param *vp = &m->vle_params[i];
        json_t *v;
        if (vp->n == 1) {
            v = json_real(vp->values[0]);
        } else {
            v = json_array();
            for (size_t j = 0; v && j < vp->n; j++)
                bad |= json_array_append_new(v, json_real(vp->values[j]));
        }
        bad |= json_object_set_new(vparams, vp->name, v);
    }
    for (size_t i = 0; !bad && i < p; i++) {
        bad |= json_array_append_new(
            params, json_pack("{s:s, s:f}", "name", m->form.param_names[i], "value", m->theta[i]));
        json_t *row = json_array();
        for (size_t j = 0; row && j < p; j++)
            bad |= json_array_append_new(row, json_real(m->cov[i * p + j]));
        bad |= json_array_append_new(cov, row);
    }
    for (size_t i = 0; !bad && i < m->n_inputs; i++)
        bad |= json_array_append_new(inputs, json_pack("{s:s, s:s, s:I}", "path", m->inputs[i].path,
                                                       "sha256", m->inputs[i].sha256, "rows",
                                                       (json_int_t)m->inputs[i].rows));
    for (size_t i = 0; !bad && i < m->n_warnings; i++)
        bad |= json_array_append_new(warnings, json_string(m->warnings[i]));
    if (bad)
        goto fail;

    bad |= json_object_set_new(vle, "model", json_string(m->vle_kind));
    bad |= json_object_set_new(vle, "parameters", vparams);
    vparams = NULL;

    json_t *envelope = json_pack("{s:s, s:f, s:o}", "kind", "box", "r_min", m->r_min, "r_max",
                                 real_or_inf(m->r_max));
    if (envelope && m->has_load) {
        bad |= json_object_set_new(envelope, "f_min_sqrt_pa", json_real(m->f_min));
        bad |= json_object_set_new(envelope, "f_max_sqrt_pa", json_real(m->f_max));
    }
    json_t *hetp = json_null();
    if (m->has_hetp) {
        json_decref(hetp);
        hetp = json_pack("{s:f, s:{s:o}, s:f, s:f, s:o, s:f}", "height_m", m->height_m, "reference",
                         "r", real_or_inf(m->hetp_r), "hetp_m", m->hetp_m, "low_m", m->hetp_low_m,
                         "high_m", real_or_inf(m->hetp_high_m), "level", m->hetp_level);
        if (hetp && m->has_load)
            bad |= json_object_set_new(json_object_get(hetp, "reference"), "f_sqrt_pa",
                                       json_real(m->hetp_f));
    }
    json_t *prov =
        json_pack("{s:o, s:s, s:s, s:s, s:I, s:o}", "inputs", inputs, "fitted_utc", m->fitted_utc,
                  "tool", "stagecal", "tool_version", m->tool_version, "seed", (json_int_t)m->seed,
                  "command_line", m->command_line ? json_string(m->command_line) : json_null());
    if (prov) {
        bad |= json_object_set_new(prov, "data_first_utc",
                                   m->data_first_utc[0] ? json_string(m->data_first_utc)
                                                        : json_null());
        bad |=
            json_object_set_new(prov, "data_last_utc",
                                m->data_last_utc[0] ? json_string(m->data_last_utc) : json_null());
    }
    inputs = NULL;
    json_t *units =
        json_pack("{s:s, s:s, s:s, s:s, s:s}", "stages", "equilibrium stages including the pot [-]",
                  "R", "reflux ratio L/D [-], \"inf\" = total reflux", "F",
                  "F-factor, superficial vapour velocity times sqrt(vapour density) [Pa^0.5]",
                  "length", "m", "covariance", "of the parameters, in their own units");

    bad |= json_object_set_new(doc, "format", json_string(STAGECAL_MODEL_FORMAT));
    /* version 2, 3 or 4 only where it is needed, so that older readers refuse what they would
     * misread (a censored-likelihood fit, a one-sided bound; a design whose per-band dof
     * they would ignore; a scatter function whose per-R σ they would ignore) and read
     * everything else */
    bad |= json_object_set_new(doc, "version",
                               json_integer(m->design_run                          ? 5
                                            : m->scatter.n > 0                     ? 4
                                            : m->n_design > 0                      ? 3
                                            : m->method == STAGECAL_MODEL_CENSORED ? 2
                                                                                   : 1));
    bad |= json_object_set_new(doc, "column", json_string(m->column_id));
    json_t *sys =
        json_pack("{s:s, s:s, s:o}", "light", m->light, "heavy", m->heavy, "equilibrium", vle);
    vle = NULL;
    double sysdata[MODEL_NSYSTEM];
    model_system_data(m, sysdata);
    for (int k = 0; sys && k < MODEL_NSYSTEM; k++)
        if (sysdata[k] != 0) /* absent when not recorded (older readers ignore them) */
            bad |= json_object_set_new(sys, model_system_key[k], json_real(sysdata[k]));
    bad |= json_object_set_new(doc, "system", sys);
    bad |= json_object_set_new(doc, "stage_convention",
                               json_pack("{s:s, s:s}", "condenser",
                                         stagecal_condenser_name(m->condenser), "text",
                                         stagecal_convention_text(m->condenser)));
    bad |= json_object_set_new(
        doc, "correlation",
        json_pack("{s:s, s:o, s:o, s:f, s:f, s:f, s:s}", "form", m->form.name, "parameters", params,
                  "covariance", cov, "sigma_stages", m->sigma, "dof", m->dof, "confidence_level",
                  m->level, "method", stagecal_model_method_name(m->method)));
    params = cov = NULL;
    if (m->one_sided) {
        json_t *ml = json_array();
        for (size_t i = 0; ml && i < p; i++)
            bad |= json_array_append_new(ml, json_real(m->theta_ml[i]));
        bad |= json_object_set_new(
            json_object_get(doc, "correlation"), "one_sided",
            json_pack("{s:s, s:f, s:o, s:s}", "side", "lower", "level", m->level,
                      "maximum_likelihood", ml ? ml : json_null(), "meaning",
                      "the evidence bounds the stage count from below only: the parameters give "
                      "'at least N stages' at the confidence level, one-sided; the covariance "
                      "means nothing"));
    }
    if (m->n_design > 0) {
        /* the rows and (format version 5) each row's run */
        json_t *rows = json_array(), *runs = m->design_run ? json_array() : NULL;
        for (size_t i = 0; rows && i < m->n_design; i++) {
            json_t *row = json_array();
            for (size_t k = 0; row && k < p; k++)
                bad |= json_array_append_new(row, json_real(m->design[i * p + k]));
            bad |= json_array_append_new(rows, row ? row : json_null());
            if (runs)
                bad |= json_array_append_new(runs, json_integer((json_int_t)m->design_run[i]));
        }
        json_t *corr = json_object_get(doc, "correlation");
        bad |= json_object_set_new(corr, "design", rows ? rows : json_null());
        bad |= json_object_set_new(units, "design",
                                   json_string("standardised Jacobian of the fit at the "
                                               "parameters, one row per residual: the "
                                               "Bell-McCaffrey dof of every band comes from it"));
        if (m->design_run)
            bad |= json_object_set_new(corr, "design_run", runs ? runs : json_null()) |
                   json_object_set_new(units, "design_run",
                                       json_string("the run (cluster, from 0) of each design row: "
                                                   "the covariance is clustered by run and every "
                                                   "band's dof is the clustered Bell-McCaffrey "
                                                   "one"));
    }
    if (m->scatter.n > 0) {
        size_t n = m->scatter.n;
        json_t *cs = json_array(), *cv = json_array();
        for (size_t k = 0; cs && k < n; k++)
            bad |= json_array_append_new(cs, json_real(m->scatter.c[k]));
        for (size_t i = 0; cv && i < n; i++) {
            json_t *row = json_array();
            for (size_t k = 0; row && k < n; k++)
                bad |= json_array_append_new(row, json_real(m->scatter.cov[i * n + k]));
            bad |= json_array_append_new(cv, row ? row : json_null());
        }
        bad |= json_object_set_new(
            json_object_get(doc, "correlation"), "scatter",
            json_pack("{s:o, s:o, s:[f, f]}", "ln_sd_poly", cs ? cs : json_null(), "ln_sd_cov",
                      cv ? cv : json_null(), "range", m->scatter.lv_lo, m->scatter.lv_hi));
        if (m->scatter.var_ratio > 0) /* 0: not known (a fit before it); no member */
            bad |=
                json_object_set_new(json_object_get(json_object_get(doc, "correlation"), "scatter"),
                                    "var_ratio", json_real(m->scatter.var_ratio));
        bad |= json_object_set_new(units, "scatter",
                                   json_string("sigma of one new window at R: exp of the "
                                               "polynomial in R/(R+1), clamped to the range; "
                                               "var_ratio: sigma(R)^2 over the windows' mean "
                                               "stated variance at R"));
    }
    bad |= json_object_set_new(doc, "evidence",
                               json_pack("{s:I, s:I, s:I}", "windows", (json_int_t)m->n_windows,
                                         "samples", (json_int_t)m->n_samples, "runs",
                                         (json_int_t)m->n_runs));
    bad |= json_object_set_new(doc, "envelope", envelope);
    bad |= json_object_set_new(doc, "hetp", hetp);
    bad |= json_object_set_new(doc, "provenance", prov);
    bad |= json_object_set_new(doc, "warnings", warnings);
    warnings = NULL;
    bad |= json_object_set_new(doc, "units", units);
    bad |= json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    if (!bad)
        return doc;
fail:
    json_decref(doc);
    json_decref(vle);
    json_decref(vparams);
    json_decref(params);
    json_decref(cov);
    json_decref(inputs);
    json_decref(warnings);
    return NULL;
}

/* SHA-256 hex of the canonical text of doc (which must not hold "checksum"). */
static int canonical_hash(const json_t *doc, char hex[SHA256_HEX])
{
    char *text = json_dumps(doc, (size_t)DUMP_CANONICAL);
    if (!text)
        return -1;
    sha256_hex(text, strlen(text), hex);
    free(text);
    return 0;
}

/* The complete file text (pretty, with checksum, final newline); caller frees. */
char *model_render(const stagecal_model *m)
{
    char hex[SHA256_HEX];
    json_t *doc = build_doc(m);
    char *text = NULL;
    if (!doc || canonical_hash(doc, hex) != 0)
        goto done;
    if (json_object_set_new(doc, "checksum",
                            json_pack("{s:s, s:s}", "algorithm", "sha256", "value", hex)) != 0)
        goto done;
    char *body = json_dumps(doc, (size_t)DUMP_PRETTY);
    if (!body)
        goto done;
    size_t n = strlen(body);
    text = malloc(n + 2);
    if (text) {
        memcpy(text, body, n);
        text[n] = '\n';
        text[n + 1] = '\0';
    }
    free(body);
done:
    json_decref(doc);
    return text;
}

/* ---- JSON → model ----------------------------------------------------------------- */

typedef struct {
    json_reader jr; /* file name, docs/model-file.md, the caller's error record */
} reader;

#define RFAIL(rd, ...)                                                                             \
    error_set_at((rd)->jr.err, STAGECAL_EDATA, (rd)->jr.source, 0, 0, __VA_ARGS__)
#define J (&rd->jr)

#define TRY(expr)                                                                                  \
    do {                                                                                           \
        if ((rc = (expr)) != STAGECAL_OK)                                                          \
            return rc;                                                                             \
    } while (0)

static int read_system(reader *rd, const json_t *doc, stagecal_model *m)
{
    int rc;
    json_t *sys = NULL, *eq = NULL, *params = NULL; /* (set by jr_object; GCC -O3 cannot see it) */
    TRY(jr_object(J, doc, "system", NULL, 1, &sys));
    TRY(jr_string(J, sys, "light", "system.light", 1, 0, m->light, sizeof m->light));
    TRY(jr_string(J, sys, "heavy", "system.heavy", 1, 0, m->heavy, sizeof m->heavy));
    /* optional (absent in files written before they were recorded): 0 = not recorded */
    double *sysdata[MODEL_NSYSTEM] = {&m->latent_j_mol, &m->m_light_kg_mol, &m->m_heavy_kg_mol};
    for (int k = 0; k < MODEL_NSYSTEM; k++) {
        *sysdata[k] = 0;
        char at[64];
        snprintf(at, sizeof at, "system.%s", model_system_key[k]);
        if (!json_object_get(sys, model_system_key[k]))
            continue;
        TRY(jr_number(J, sys, model_system_key[k], at, 1, 0, sysdata[k], NULL));
        if (!(isfinite(*sysdata[k]) && *sysdata[k] > 0))
            return RFAIL(rd, "system: %s = %g: expected a finite number > 0", model_system_key[k],
                         *sysdata[k]);
    }
    TRY(jr_object(J, sys, "equilibrium", "system.equilibrium", 1, &eq));
    TRY(jr_string(J, eq, "model", "system.equilibrium.model", 1, 0, m->vle_kind,
                  sizeof m->vle_kind));
    TRY(jr_object(J, eq, "parameters", "system.equilibrium.parameters", 1, &params));
    const char *key;
    json_t *v = NULL;
    json_object_foreach(params, key, v)
    {
        double buf[1];
        stagecal_error aerr;
        if (json_is_number(v)) {
            buf[0] = json_number_value(v);
            rc = stagecal_model_add_vle_param(m, key, buf, 1, &aerr);
        } else if (json_is_array(v) && json_array_size(v) > 0) {
            size_t n = json_array_size(v);
            double *vals = malloc(n * sizeof *vals);
            if (!vals)
                return error_set(rd->jr.err, STAGECAL_ENOMEM, "out of memory");
            for (size_t i = 0; i < n; i++) {
                json_t *e = json_array_get(v, i);
                if (!json_is_number(e)) {
                    free(vals);
                    return RFAIL(rd, "equilibrium parameter '%s': element %zu is not a number", key,
                                 i + 1);
                }
                vals[i] = json_number_value(e);
            }
            rc = stagecal_model_add_vle_param(m, key, vals, n, &aerr);
            free(vals);
        } else {
            return RFAIL(rd,
                         "equilibrium parameter '%s': expected a number or a non-empty "
                         "array of numbers",
                         key);
        }
        if (rc == STAGECAL_ENOMEM)
            return error_set(rd->jr.err, rc, "%s", aerr.text);
        if (rc != STAGECAL_OK)
            return RFAIL(rd, "system.equilibrium.parameters: %s", aerr.text);
    }
    return STAGECAL_OK;
}

/* correlation.one_sided (format version 2; absent: two-sided). */
static int read_one_sided(reader *rd, const json_t *c, stagecal_model *m)
{
    int rc;
    json_t *o = NULL, *ml = NULL;
    char side[STAGECAL_MODEL_TEXT];
    double level;
    TRY(jr_object(J, c, "one_sided", "correlation.one_sided", 0, &o));
    if (!o || json_is_null(o))
        return STAGECAL_OK;
    TRY(jr_string(J, o, "side", "correlation.one_sided.side", 1, 0, side, sizeof side));
    if (strcmp(side, "lower") != 0)
        return RFAIL(rd, "correlation.one_sided.side '%s': expected 'lower'", side);
    TRY(jr_number(J, o, "level", "correlation.one_sided.level", 1, 0, &level, NULL));
    if (level != m->level)
        return RFAIL(rd, "correlation.one_sided.level %g differs from confidence_level %g", level,
                     m->level);
    TRY(jr_array(J, o, "maximum_likelihood", "correlation.one_sided.maximum_likelihood", 1, &ml));
    if (json_array_size(ml) != m->form.p)
        return RFAIL(rd,
                     "correlation.one_sided.maximum_likelihood: expected %zu numbers, found %zu",
                     m->form.p, json_array_size(ml));
    for (size_t i = 0; i < m->form.p; i++) {
        json_t *e = json_array_get(ml, i);
        if (!json_is_number(e))
            return RFAIL(rd, "correlation.one_sided.maximum_likelihood[%zu]: expected a number", i);
        m->theta_ml[i] = json_number_value(e);
    }
    m->one_sided = 1;
    return STAGECAL_OK;
}

/* rows × p numbers of the array arr (member `what`) into out, row-major. */
static int read_rows(reader *rd, const json_t *arr, const char *what, size_t rows, size_t p,
                     double *out)
{
    for (size_t i = 0; i < rows; i++) {
        json_t *row = json_array_get(arr, i);
        if (!json_is_array(row) || json_array_size(row) != p)
            return RFAIL(rd, "%s[%zu]: expected an array of %zu numbers", what, i, p);
        for (size_t k = 0; k < p; k++) {
            json_t *e = json_array_get(row, k);
            if (!json_is_number(e))
                return RFAIL(rd, "%s[%zu][%zu]: expected a number", what, i, k);
            out[i * p + k] = json_number_value(e);
        }
    }
    return STAGECAL_OK;
}

/* correlation.design (format version 3; absent: none): rows of form.p numbers. */
static int read_design(reader *rd, const json_t *c, stagecal_model *m)
{
    int rc;
    json_t *d = NULL;
    size_t p = m->form.p;
    TRY(jr_array(J, c, "design", "correlation.design", 0, &d));
    if (!d)
        return STAGECAL_OK;
    size_t n = json_array_size(d);
    if (n <= p)
        return RFAIL(rd, "correlation.design: %zu rows for %zu parameters (expected more rows)", n,
                     p);
    m->design = malloc(n * p * sizeof *m->design);
    if (!m->design)
        return error_set(rd->jr.err, STAGECAL_ENOMEM, "out of memory for %zu design rows", n);
    m->n_design = n;
    TRY(read_rows(rd, d, "correlation.design", n, p, m->design));
    /* correlation.design_run (format version 5; absent: windows independent) */
    json_t *cl = NULL;
    TRY(jr_array(J, c, "design_run", "correlation.design_run", 0, &cl));
    if (!cl)
        return STAGECAL_OK;
    if (json_array_size(cl) != n)
        return RFAIL(rd, "correlation.design_run: %zu entries for %zu design rows",
                     json_array_size(cl), n);
    m->design_run = malloc(n * sizeof *m->design_run);
    if (!m->design_run)
        return error_set(rd->jr.err, STAGECAL_ENOMEM, "out of memory for %zu design runs", n);
    for (size_t i = 0; i < n; i++) {
        json_t *v = json_array_get(cl, i);
        if (!json_is_integer(v) || json_integer_value(v) < 0 || (size_t)json_integer_value(v) >= n)
            return RFAIL(rd, "correlation.design_run[%zu]: expected an integer from 0 to %zu", i,
                         n - 1);
        m->design_run[i] = (size_t)json_integer_value(v);
    }
    return STAGECAL_OK;
}

/* correlation.scatter (format version 4; absent: one σ for every R). */
static int read_scatter(reader *rd, const json_t *c, stagecal_model *m)
{
    int rc;
    json_t *o = NULL, *cs = NULL, *range = NULL, *cv = NULL;
    TRY(jr_object(J, c, "scatter", "correlation.scatter", 0, &o));
    if (!o)
        return STAGECAL_OK;
    TRY(jr_array(J, o, "ln_sd_poly", "correlation.scatter.ln_sd_poly", 1, &cs));
    TRY(jr_array(J, o, "range", "correlation.scatter.range", 1, &range));
    TRY(jr_array(J, o, "ln_sd_cov", "correlation.scatter.ln_sd_cov", 1, &cv));
    size_t n = json_array_size(cs);
    if (n < 1 || n > STAGECAL_SCATTER_MAXC)
        return RFAIL(rd, "correlation.scatter.ln_sd_poly: %zu coefficients (expected 1 to %d)", n,
                     STAGECAL_SCATTER_MAXC);
    if (json_array_size(range) != 2)
        return RFAIL(rd, "correlation.scatter.range: %zu numbers (expected 2)",
                     json_array_size(range));
    double lr[2];
    for (size_t k = 0; k < n + 2; k++) {
        const json_t *e = k < n ? json_array_get(cs, k) : json_array_get(range, k - n);
        if (!json_is_number(e))
            return RFAIL(rd, "correlation.scatter.%s[%zu]: expected a number",
                         k < n ? "ln_sd_poly" : "range", k < n ? k : k - n);
        *(k < n ? &m->scatter.c[k] : &lr[k - n]) = json_number_value(e);
    }
    if (json_array_size(cv) != n)
        return RFAIL(rd, "correlation.scatter.ln_sd_cov: %zu rows (expected %zu)",
                     json_array_size(cv), n);
    TRY(read_rows(rd, cv, "correlation.scatter.ln_sd_cov", n, n, m->scatter.cov));
    m->scatter.var_ratio = 0; /* absent: not known */
    TRY(jr_number(J, o, "var_ratio", "correlation.scatter.var_ratio", 0, 0, &m->scatter.var_ratio,
                  NULL));
    if (!(m->scatter.var_ratio >= 0) || !isfinite(m->scatter.var_ratio))
        return RFAIL(rd, "correlation.scatter.var_ratio: %g (expected a finite number >= 0)",
                     m->scatter.var_ratio);
    m->scatter.n = n;
    m->scatter.lv_lo = lr[0];
    m->scatter.lv_hi = lr[1];
    return STAGECAL_OK;
}

static int read_correlation(reader *rd, const json_t *doc, stagecal_model *m)
{
    int rc;
    json_t *c = NULL, *params = NULL, *cov = NULL;
    char name[sizeof m->form.name], method[STAGECAL_MODEL_TEXT];
    stagecal_error ferr;
    TRY(jr_object(J, doc, "correlation", NULL, 1, &c));
    TRY(jr_string(J, c, "form", "correlation.form", 1, 0, name, sizeof name));
    if (stagecal_form_parse(name, &m->form, &ferr) != STAGECAL_OK)
        return RFAIL(rd, "correlation form: %s", ferr.text);
    if (strcmp(name, m->form.name) != 0)
        return RFAIL(rd, "correlation form '%s' is not in canonical notation ('%s' expected)", name,
                     m->form.name);
    size_t p = m->form.p;
    TRY(jr_array(J, c, "parameters", "correlation.parameters", 1, &params));
    if (json_array_size(params) != p)
        return RFAIL(rd, "correlation form '%s' has %zu parameters but the file lists %zu",
                     m->form.name, p, json_array_size(params));
    for (size_t i = 0; i < p; i++) {
        json_t *e = json_array_get(params, i);
        char pname[sizeof m->form.param_names[0]];
        if (!json_is_object(e))
            return RFAIL(rd, "correlation.parameters[%zu]: expected an object", i);
        TRY(jr_string(J, e, "name", "correlation.parameters[].name", 1, 0, pname, sizeof pname));
        if (strcmp(pname, m->form.param_names[i]) != 0)
            return RFAIL(rd,
                         "correlation.parameters[%zu] is named '%s', the form '%s' expects '%s'", i,
                         pname, m->form.name, m->form.param_names[i]);
        TRY(jr_number(J, e, "value", "correlation.parameters[].value", 1, 0, &m->theta[i], NULL));
    }
    TRY(jr_array(J, c, "covariance", "correlation.covariance", 1, &cov));
    if (json_array_size(cov) != p)
        return RFAIL(rd, "correlation.covariance: expected %zu rows (p x p), found %zu", p,
                     json_array_size(cov));
    TRY(read_rows(rd, cov, "correlation.covariance", p, p, m->cov));
    TRY(jr_number(J, c, "sigma_stages", "correlation.sigma_stages", 1, 0, &m->sigma, NULL));
    TRY(jr_number(J, c, "dof", "correlation.dof", 1, 0, &m->dof, NULL));
    TRY(jr_number(J, c, "confidence_level", "correlation.confidence_level", 1, 0, &m->level, NULL));
    TRY(jr_string(J, c, "method", "correlation.method", 1, 0, method, sizeof method));
    if (strcmp(method, "stage-space") == 0)
        m->method = STAGECAL_MODEL_STAGE_SPACE;
    else if (strcmp(method, "composition-space") == 0)
        m->method = STAGECAL_MODEL_COMPOSITION_SPACE;
    else if (strcmp(method, "censored-likelihood") == 0)
        m->method = STAGECAL_MODEL_CENSORED;
    else
        return RFAIL(rd,
                     "correlation.method '%s': expected 'stage-space', "
                     "'composition-space' or 'censored-likelihood'",
                     method);
    TRY(read_one_sided(rd, c, m));
    TRY(read_scatter(rd, c, m));
    return read_design(rd, c, m);
}

static int read_rest(reader *rd, const json_t *doc, stagecal_model *m)
{
    int rc;
    json_t *o, *arr, *v;
    char buf[STAGECAL_MODEL_TEXT];

    TRY(jr_string(J, doc, "column", NULL, 1, 0, m->column_id, sizeof m->column_id));

    TRY(jr_object(J, doc, "stage_convention", NULL, 1, &o));
    TRY(jr_string(J, o, "condenser", "stage_convention.condenser", 1, 0, buf, sizeof buf));
    if (strcmp(buf, "total") == 0)
        m->condenser = STAGECAL_CONDENSER_TOTAL;
    else if (strcmp(buf, "partial") == 0)
        m->condenser = STAGECAL_CONDENSER_PARTIAL;
    else
        return RFAIL(rd, "stage_convention.condenser '%s': expected 'total' or 'partial'", buf);
    TRY(jr_member(J, o, "text", "stage_convention.text", 1, "a string", &v));
    if (!json_is_string(v) ||
        strcmp(json_string_value(v), stagecal_convention_text(m->condenser)) != 0)
        return RFAIL(rd,
                     "stage_convention.text does not match the %s-condenser convention "
                     "('%s' expected)",
                     buf, stagecal_convention_text(m->condenser));

    TRY(jr_object(J, doc, "evidence", NULL, 1, &o));
    TRY(jr_count(J, o, "windows", "evidence.windows", &m->n_windows));
    TRY(jr_count(J, o, "samples", "evidence.samples", &m->n_samples));
    TRY(jr_count(J, o, "runs", "evidence.runs", &m->n_runs));

    TRY(jr_object(J, doc, "envelope", NULL, 1, &o));
    TRY(jr_string(J, o, "kind", "envelope.kind", 1, 0, buf, sizeof buf));
    if (strcmp(buf, "box") != 0)
        return RFAIL(rd, "envelope.kind '%s': expected 'box'", buf);
    TRY(jr_number(J, o, "r_min", "envelope.r_min", 1, 0, &m->r_min, NULL));
    TRY(jr_number(J, o, "r_max", "envelope.r_max", 1, 1, &m->r_max, NULL));
    m->has_load = json_object_get(o, "f_min_sqrt_pa") || json_object_get(o, "f_max_sqrt_pa");
    if (m->has_load) {
        TRY(jr_number(J, o, "f_min_sqrt_pa", "envelope.f_min_sqrt_pa", 1, 0, &m->f_min, NULL));
        TRY(jr_number(J, o, "f_max_sqrt_pa", "envelope.f_max_sqrt_pa", 1, 0, &m->f_max, NULL));
    }

    TRY(jr_member(J, doc, "hetp", NULL, 1, "an object or null", &o));
    if (!json_is_null(o)) {
        json_t *ref;
        if (!json_is_object(o))
            return RFAIL(rd, "member 'hetp': expected an object or null");
        m->has_hetp = 1;
        TRY(jr_number(J, o, "height_m", "hetp.height_m", 1, 0, &m->height_m, NULL));
        TRY(jr_object(J, o, "reference", "hetp.reference", 1, &ref));
        TRY(jr_number(J, ref, "r", "hetp.reference.r", 1, 1, &m->hetp_r, NULL));
        if (m->has_load)
            TRY(jr_number(J, ref, "f_sqrt_pa", "hetp.reference.f_sqrt_pa", 1, 0, &m->hetp_f, NULL));
        TRY(jr_number(J, o, "hetp_m", "hetp.hetp_m", 1, 0, &m->hetp_m, NULL));
        TRY(jr_number(J, o, "low_m", "hetp.low_m", 1, 0, &m->hetp_low_m, NULL));
        TRY(jr_number(J, o, "high_m", "hetp.high_m", 1, 1, &m->hetp_high_m, NULL));
        TRY(jr_number(J, o, "level", "hetp.level", 1, 0, &m->hetp_level, NULL));
    }

    TRY(jr_object(J, doc, "provenance", NULL, 1, &o));
    TRY(jr_array(J, o, "inputs", "provenance.inputs", 1, &arr));
    for (size_t i = 0; i < json_array_size(arr); i++) {
        json_t *e = json_array_get(arr, i);
        char hex[STAGECAL_MODEL_HEX];
        size_t rows;
        if (!json_is_object(e))
            return RFAIL(rd, "provenance.inputs[%zu]: expected an object", i);
        TRY(jr_member(J, e, "path", "provenance.inputs[].path", 1, "a string", &v));
        if (!json_is_string(v))
            return RFAIL(rd, "provenance.inputs[%zu].path: expected a string", i);
        TRY(jr_string(J, e, "sha256", "provenance.inputs[].sha256", 1, 0, hex, sizeof hex));
        TRY(jr_count(J, e, "rows", "provenance.inputs[].rows", &rows));
        stagecal_error aerr;
        rc = stagecal_model_add_input(m, json_string_value(v), hex, rows, &aerr);
        if (rc == STAGECAL_ENOMEM)
            return error_set(rd->jr.err, rc, "%s", aerr.text);
        if (rc != STAGECAL_OK)
            return RFAIL(rd, "provenance.inputs[%zu]: %s", i, aerr.text);
    }
    TRY(jr_string(J, o, "fitted_utc", "provenance.fitted_utc", 1, 0, m->fitted_utc,
                  sizeof m->fitted_utc));
    TRY(jr_string(J, o, "tool_version", "provenance.tool_version", 1, 0, m->tool_version,
                  sizeof m->tool_version));
    /* optional: the time span of the fitted data (absent in files without it) */
    static const char *const span_keys[2] = {"data_first_utc", "data_last_utc"};
    char *span_dst[2] = {m->data_first_utc, m->data_last_utc};
    for (int k = 0; k < 2; k++) {
        v = json_object_get(o, span_keys[k]);
        if (!v || json_is_null(v))
            span_dst[k][0] = '\0';
        else if (!json_is_string(v) ||
                 copy_text(span_dst[k], STAGECAL_MODEL_TEXT, json_string_value(v)) != 0)
            return RFAIL(rd, "member 'provenance.%s': expected a string or null", span_keys[k]);
    }
    TRY(jr_member(J, o, "seed", "provenance.seed", 1, "an integer >= 0", &v));
    if (!json_is_integer(v) || json_integer_value(v) < 0)
        return RFAIL(rd, "member 'provenance.seed': expected an integer >= 0");
    m->seed = (unsigned long long)json_integer_value(v);
    TRY(jr_member(J, o, "command_line", "provenance.command_line", 1, "a string or null", &v));
    if (json_is_string(v))
        TRY(stagecal_model_set_command_line(m, json_string_value(v), rd->jr.err));
    else if (!json_is_null(v))
        return RFAIL(rd, "member 'provenance.command_line': expected a string or null");

    TRY(jr_array(J, doc, "warnings", NULL, 1, &arr));
    for (size_t i = 0; i < json_array_size(arr); i++) {
        v = json_array_get(arr, i);
        if (!json_is_string(v))
            return RFAIL(rd, "warnings[%zu]: expected a string", i);
        TRY(stagecal_model_add_warning(m, json_string_value(v), rd->jr.err));
    }
    return STAGECAL_OK;
}

static int read_doc(reader *rd, json_t *doc, stagecal_model *m)
{
    int rc;
    json_t *v, *ck;
    char fmt[STAGECAL_MODEL_TEXT], want[SHA256_HEX], got[SHA256_HEX];

    if (!json_is_object(doc))
        return RFAIL(rd, "not a stagecal model file (the document is not a JSON object)");
    v = json_object_get(doc, "format");
    if (!json_is_string(v) || strcmp(json_string_value(v), STAGECAL_MODEL_FORMAT) != 0) {
        copy_text(fmt, sizeof fmt, json_is_string(v) ? json_string_value(v) : "");
        if (!json_is_string(v) || strlen(json_string_value(v)) >= sizeof fmt)
            return RFAIL(rd, "not a stagecal model file (no \"format\": \"%s\" member)",
                         STAGECAL_MODEL_FORMAT);
        return RFAIL(rd, "not a stagecal model file (format '%s', expected '%s')", fmt,
                     STAGECAL_MODEL_FORMAT);
    }
    v = json_object_get(doc, "version");
    if (!json_is_integer(v))
        return RFAIL(rd, "member 'version': expected an integer format version");
    json_int_t version = json_integer_value(v);
    if (version > STAGECAL_MODEL_VERSION)
        return error_set_at(rd->jr.err, STAGECAL_EVERSION, rd->jr.source, 0, 0,
                            "written by a newer stagecal (format version %lld > %d)",
                            (long long)version, STAGECAL_MODEL_VERSION);
    if (version < 1)
        return RFAIL(rd, "unknown format version %lld (expected 1 to %d)", (long long)version,
                     STAGECAL_MODEL_VERSION);

    /* Integrity before content: a hand edit is named as such, not as a field error. */
    TRY(jr_object(J, doc, "checksum", NULL, 1, &ck));
    TRY(jr_string(J, ck, "algorithm", "checksum.algorithm", 1, 0, fmt, sizeof fmt));
    if (strcmp(fmt, "sha256") != 0)
        return RFAIL(rd, "checksum algorithm '%s': expected 'sha256'", fmt);
    TRY(jr_string(J, ck, "value", "checksum.value", 1, 0, want, sizeof want));
    json_object_del(doc, "checksum");
    if (canonical_hash(doc, got) != 0)
        return error_set(rd->jr.err, STAGECAL_ENOMEM, "out of memory");
    if (strcmp(got, want) != 0)
        return RFAIL(rd, "checksum mismatch: the file was edited or damaged");

    TRY(read_rest(rd, doc, m));
    TRY(read_system(rd, doc, m));
    TRY(read_correlation(rd, doc, m));
    return model_check(m, rd->jr.source, STAGECAL_EDATA, rd->jr.err);
}

int stagecal_model_parse(const char *text, size_t len, const char *source, stagecal_model *m,
                         stagecal_error *err)
{
    reader rd = {{source ? source : "model", "docs/model-file.md", err}};
    json_t *doc;
    stagecal_model_free(m);
    if (jr_parse(&rd.jr, text, len, "not a valid JSON document (truncated or corrupt?): ", &doc))
        return STAGECAL_EDATA;
    int rc = read_doc(&rd, doc, m);
    json_decref(doc);
    if (rc != STAGECAL_OK)
        stagecal_model_free(m);
    return rc;
}

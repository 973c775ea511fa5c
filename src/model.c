/*
 * model.c — the model file: build, validate, write atomically, load, evaluate.
 *
 * Format: docs/model-file.md and docs/model.schema.json. One JSON object, written
 * with jansson (sorted keys, 2-space indent, reals with 17 significant digits so
 * doubles round-trip bit for bit). Reflux ratios that may be infinite are written as
 * the string "inf" (DESIGN §2). An integrity checksum is the SHA-256 (FIPS 180-4,
 * src/sha256.c) of the canonical text: the document without its "checksum" member,
 * dumped by jansson with JSON_COMPACT | JSON_SORT_KEYS | JSON_ENSURE_ASCII |
 * JSON_REAL_PRECISION(17).
 *
 * Writing: mkdir -p; the content goes to a file in the target directory that has no
 * name yet (Linux O_TMPFILE), is fsync'ed, and is then linked to its final name
 * (linkat through /proc/self/fd), so a writer killed at any moment leaves nothing
 * behind. Elsewhere (or when that fails) POSIX: mkstemp in the target directory;
 * write, fsync, close; link() to the final name; unlink the temporary name. link()
 * fails with EEXIST instead of replacing a file, so an earlier fit is never
 * overwritten (a numbered suffix is tried next). Where hard links are not supported
 * the name is reserved with O_CREAT|O_EXCL and the temporary file renamed onto the
 * reservation. Last, the directory is fsync'ed.
 *
 * Evaluation: stagecal_regress_band (delta method, include/stagecal/regress.h) with
 * the stored θ, covariance, σ (of one new observation, in stages) and dof.
 */
/* O_TMPFILE (Linux) is the one non-POSIX.1-2008 feature used here, and optional. */
#define _GNU_SOURCE

#include "stagecal/model.h"
#include "stagecal/regress.h"
#include "stagecal/version.h"

#include <errno.h>
#include <gsl/gsl_cdf.h>
#include <fcntl.h>
#include <jansson.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <time.h>
#include <unistd.h>

#include "internal.h"
#include "internal_sha256.h"

/* Relative asymmetry of the covariance accepted as rounding:
 * |C_ij − C_ji| ≤ MODEL_SYM_RTOL·sqrt(C_ii·C_jj). Covariances from GSL are
 * symmetric to a few ulps; a hand edit of one triangle is far larger. */
static const double MODEL_SYM_RTOL = 1e-12;
/* Numbered suffixes tried before giving up on a free file name. */
static const unsigned MODEL_MAX_SUFFIX = 10000;
/* Permissions of a written model file (the temporary file is created 0600). */
static const mode_t MODEL_FILE_MODE = 0644;
/* Largest model file read (bytes): far above any real one, refuses runaway input. */
static const size_t MODEL_MAX_BYTES = 64u << 20;

static const int DUMP_CANONICAL =
    JSON_COMPACT | JSON_SORT_KEYS | JSON_ENSURE_ASCII | JSON_REAL_PRECISION(17);
static const int DUMP_PRETTY =
    JSON_INDENT(2) | JSON_SORT_KEYS | JSON_ENSURE_ASCII | JSON_REAL_PRECISION(17);

/* ---- names ------------------------------------------------------------------------ */

const char *stagecal_model_method_name(stagecal_model_method method)
{
    return method == STAGECAL_MODEL_COMPOSITION_SPACE ? "composition-space" : "stage-space";
}

/* The optional physical data of the system: members of "system" (docs/model-file.md),
 * in the order of system_data(). 0 in the struct = not recorded = no member. */
enum { SYSTEM_NDATA = 3 };
static const char *const SYSTEM_DATA_KEY[SYSTEM_NDATA] = {
    "latent_heat_j_mol", "molar_mass_light_kg_mol", "molar_mass_heavy_kg_mol"};

static void system_data(const stagecal_model *m, double v[SYSTEM_NDATA])
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
    stagecal_model_init(m);
}

static int is_hex64(const char *s)
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
    if (!sha256 || !is_hex64(sha256))
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

void stagecal_model_stamp_now(stagecal_model *m)
{
    struct tm tm;
    time_t now = time(NULL);
    if (!gmtime_r(&now, &tm) ||
        strftime(m->fitted_utc, sizeof m->fitted_utc, "%Y-%m-%dT%H:%M:%SZ", &tm) == 0)
        m->fitted_utc[0] = '\0';
}

int stagecal_model_hash_file(const char *path, char hex[STAGECAL_MODEL_HEX], stagecal_error *err)
{
    unsigned char buf[65536], digest[SHA256_DIGEST];
    sha256_ctx c;
    size_t got;
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return error_set_at(err, STAGECAL_ENOINPUT, path, 0, 0, "cannot open: %s", strerror(errno));
    sha256_init(&c);
    while ((got = fread(buf, 1, sizeof buf, fp)) > 0)
        sha256_update(&c, buf, got);
    int bad = ferror(fp);
    fclose(fp);
    if (bad)
        return error_set_at(err, STAGECAL_ENOINPUT, path, 0, 0, "read error while hashing");
    sha256_final(&c, digest);
    sha256_to_hex(digest, hex);
    return STAGECAL_OK;
}

/* ---- validation of a model in memory ---------------------------------------------- */

/* "YYYY-MM-DDTHH:MM:SSZ" with plausible ranges; writes "YYYYMMDDTHHMMSSZ" to stamp. */
static int parse_utc(const char *s, char stamp[17])
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
static int check_model(const stagecal_model *m, const char *source, int code, stagecal_error *err)
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
    double sysdata[SYSTEM_NDATA];
    system_data(m, sysdata);
    for (int k = 0; k < SYSTEM_NDATA; k++)
        if (sysdata[k] != 0 && !(isfinite(sysdata[k]) && sysdata[k] > 0))
            FAIL("system: %s = %g: expected a finite number > 0", SYSTEM_DATA_KEY[k], sysdata[k]);
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
    if (!isfinite(m->sigma) || m->sigma < 0)
        FAIL("sigma_stages = %g: expected a finite number >= 0", m->sigma);
    if (!isfinite(m->dof) || m->dof <= 0)
        FAIL("dof = %g: expected a finite number > 0", m->dof);
    if (!(m->level > 0 && m->level < 1))
        FAIL("confidence_level = %g: expected a number in (0, 1)", m->level);
    if (m->method != STAGECAL_MODEL_STAGE_SPACE && m->method != STAGECAL_MODEL_COMPOSITION_SPACE)
        FAIL("fit method %d is unknown", (int)m->method);

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
        if (!is_hex64(in->sha256))
            FAIL("provenance: input '%s': sha256 is not 64 lowercase hex digits", in->path);
    }
    if (parse_utc(m->fitted_utc, NULL) != 0)
        FAIL("provenance: fitted_utc '%s': expected YYYY-MM-DDTHH:MM:SSZ", m->fitted_utc);
    if (m->data_first_utc[0] && parse_utc(m->data_first_utc, NULL) != 0)
        FAIL("provenance: data_first_utc '%s': expected YYYY-MM-DDTHH:MM:SSZ", m->data_first_utc);
    if (m->data_last_utc[0] && parse_utc(m->data_last_utc, NULL) != 0)
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
    return check_model(m, NULL, STAGECAL_EINVAL, err);
}

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
    bad |= json_object_set_new(doc, "version", json_integer(STAGECAL_MODEL_VERSION));
    bad |= json_object_set_new(doc, "column", json_string(m->column_id));
    json_t *sys =
        json_pack("{s:s, s:s, s:o}", "light", m->light, "heavy", m->heavy, "equilibrium", vle);
    vle = NULL;
    double sysdata[SYSTEM_NDATA];
    system_data(m, sysdata);
    for (int k = 0; sys && k < SYSTEM_NDATA; k++)
        if (sysdata[k] != 0) /* absent when not recorded (older readers ignore them) */
            bad |= json_object_set_new(sys, SYSTEM_DATA_KEY[k], json_real(sysdata[k]));
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
static char *render(const stagecal_model *m)
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

/* ---- writing ------------------------------------------------------------------------ */

/* mkdir -p: creates dir and missing parents (mode 0777 less umask). */
static int make_dirs(const char *dir, stagecal_error *err)
{
    char *path = strdup(dir);
    if (!path)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    size_t n = strlen(path);
    while (n > 1 && path[n - 1] == '/')
        path[--n] = '\0';
    for (char *s = path + 1;; s++) {
        int last = (*s == '\0');
        if (*s != '/' && !last)
            continue;
        *s = '\0';
        struct stat st;
        if (mkdir(path, 0777) != 0 &&
            !(errno == EEXIST && stat(path, &st) == 0 && S_ISDIR(st.st_mode))) {
            int e = errno == EEXIST ? ENOTDIR : errno;
            int rc = error_set(err, STAGECAL_EWRITE, "cannot create directory '%s': %s", path,
                               strerror(e));
            free(path);
            return rc;
        }
        if (last)
            break;
        *s = '/';
    }
    free(path);
    return STAGECAL_OK;
}

static int write_all(int fd, const char *buf, size_t n)
{
    while (n > 0) {
        ssize_t w = write(fd, buf, n);
        if (w < 0) {
            if (errno == EINTR)
                continue;
            return -1;
        }
        buf += w;
        n -= (size_t)w;
    }
    return 0;
}

/* fsync of a directory, so the new name survives a crash. Some file systems refuse
 * fsync on a directory (EINVAL); that is not a failure of ours. */
static int sync_dir(const char *dir)
{
    int fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (fd < 0)
        return -1;
    int rc = fsync(fd);
    int e = errno;
    close(fd);
    if (rc != 0 && e != EINVAL && e != ENOTSUP) {
        errno = e;
        return -1;
    }
    return 0;
}

/* Gives tmp the final name without replacing anything: link() (EEXIST when taken),
 * or, where hard links are unsupported, an O_EXCL reservation + rename(). Returns 1
 * when the name is taken, 0 on success, -1 on another failure (errno set). */
static int claim_name(const char *tmp, const char *final, int *linked)
{
    if (link(tmp, final) == 0) {
        *linked = 1;
        return 0;
    }
    if (errno == EEXIST)
        return 1;
    if (errno != EPERM && errno != ENOTSUP && errno != EOPNOTSUPP && errno != EMLINK &&
        errno != EXDEV && errno != ENOSYS)
        return -1;
    int fd = open(final, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, MODEL_FILE_MODE);
    if (fd < 0)
        return errno == EEXIST ? 1 : -1;
    close(fd);
    if (rename(tmp, final) != 0) {
        int e = errno;
        unlink(final);
        errno = e;
        return -1;
    }
    *linked = 0;
    return 0;
}

static void final_name(char *final, size_t cap, const char *dir, const char *column,
                       const char *stamp, unsigned n)
{
    if (n == 1)
        snprintf(final, cap, "%s/%s-%s.json", dir, column, stamp);
    else
        snprintf(final, cap, "%s/%s-%s-%u.json", dir, column, stamp, n);
}

/* Linux: writes text to an unnamed file in dir and links it to the first free final
 * name. Returns STAGECAL_OK (placed, name in final), -1 when this route is not
 * available here (the caller falls back to a named temporary file), or EWRITE. */
static int place_unnamed(const char *dir, const char *text, const char *column, const char *stamp,
                         char *final, size_t cap, stagecal_error *err)
{
#if defined(__linux__) && defined(O_TMPFILE)
    char self[64];
    int fd = open(dir, O_TMPFILE | O_WRONLY | O_CLOEXEC, MODEL_FILE_MODE);
    if (fd < 0)
        return -1;
    if (write_all(fd, text, strlen(text)) != 0 || fsync(fd) != 0) {
        int e = errno;
        close(fd); /* an unnamed file vanishes with its last descriptor */
        return error_set(err, STAGECAL_EWRITE, "cannot write a new file in '%s': %s", dir,
                         strerror(e));
    }
    snprintf(self, sizeof self, "/proc/self/fd/%d", fd);
    for (unsigned n = 1; n <= MODEL_MAX_SUFFIX; n++) {
        final_name(final, cap, dir, column, stamp, n);
        if (linkat(AT_FDCWD, self, AT_FDCWD, final, AT_SYMLINK_FOLLOW) == 0) {
            close(fd);
            return STAGECAL_OK;
        }
        if (errno != EEXIST) {
            close(fd);
            return -1;
        }
    }
    close(fd);
    return error_set(err, STAGECAL_EWRITE, "no free file name for '%s-%s' in '%s' after %u tries",
                     column, stamp, dir, MODEL_MAX_SUFFIX);
#else
    (void)dir, (void)text, (void)column, (void)stamp, (void) final, (void)cap, (void)err;
    return -1;
#endif
}

int stagecal_model_write(const stagecal_model *m, const char *dir, char *path_out, size_t cap,
                         stagecal_error *err)
{
    char stamp[17];
    int rc = check_model(m, NULL, STAGECAL_EINVAL, err);
    if (rc != STAGECAL_OK)
        return rc;
    if (!dir || !dir[0])
        return error_set(err, STAGECAL_EINVAL, "model directory: expected a path");
    parse_utc(m->fitted_utc, stamp);

    char *text = render(m);
    if (!text)
        return error_set(err, STAGECAL_ENOMEM, "out of memory rendering the model file");
    /* Whatever is written must load again: refuse to write what we would refuse to read. */
    {
        stagecal_model back;
        stagecal_error berr;
        stagecal_model_init(&back);
        int brc = stagecal_model_parse(text, strlen(text), "model", &back, &berr);
        stagecal_model_free(&back);
        if (brc != STAGECAL_OK) {
            free(text);
            return error_set(err, STAGECAL_EINTERNAL, "rendered model does not load: %s",
                             berr.text);
        }
    }

    size_t nd = strlen(dir), nc = strlen(m->column_id);
    size_t cap_path = nd + nc + 64;
    char *tmp = malloc(cap_path), *final = malloc(cap_path);
    if (!tmp || !final) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
        goto out;
    }
    if ((rc = make_dirs(dir, err)) != STAGECAL_OK)
        goto out;
    rc = place_unnamed(dir, text, m->column_id, stamp, final, cap_path, err);
    if (rc == STAGECAL_OK)
        goto placed;
    if (rc != -1)
        goto out;
    snprintf(tmp, cap_path, "%s/.%s.tmp-XXXXXX", dir, m->column_id);
    int fd = mkstemp(tmp);
    if (fd < 0) {
        rc = error_set(err, STAGECAL_EWRITE, "cannot create a file in '%s': %s", dir,
                       strerror(errno));
        goto out;
    }
    if (write_all(fd, text, strlen(text)) != 0 || fchmod(fd, MODEL_FILE_MODE) != 0 ||
        fsync(fd) != 0) {
        int e = errno;
        close(fd);
        unlink(tmp);
        rc = error_set(err, STAGECAL_EWRITE, "cannot write '%s': %s", tmp, strerror(e));
        goto out;
    }
    if (close(fd) != 0) {
        int e = errno;
        unlink(tmp);
        rc = error_set(err, STAGECAL_EWRITE, "cannot write '%s': %s", tmp, strerror(e));
        goto out;
    }

    int claimed = -1, linked = 0;
    for (unsigned n = 1; n <= MODEL_MAX_SUFFIX; n++) {
        final_name(final, cap_path, dir, m->column_id, stamp, n);
        claimed = claim_name(tmp, final, &linked);
        if (claimed != 1)
            break;
    }
    if (claimed != 0) {
        int e = errno;
        unlink(tmp);
        rc = claimed == 1
                 ? error_set(err, STAGECAL_EWRITE,
                             "no free file name for '%s-%s' in '%s' after %u tries", m->column_id,
                             stamp, dir, MODEL_MAX_SUFFIX)
                 : error_set(err, STAGECAL_EWRITE, "cannot create '%s': %s", final, strerror(e));
        goto out;
    }
    if (linked)
        unlink(tmp);
placed:
    if (sync_dir(dir) != 0) {
        int e = errno;
        unlink(final);
        rc = error_set(err, STAGECAL_EWRITE, "cannot sync directory '%s': %s", dir, strerror(e));
        goto out;
    }
    if (path_out) {
        if (copy_text(path_out, cap, final) != 0) {
            unlink(final);
            rc = error_set(err, STAGECAL_EWRITE,
                           "path '%s' does not fit the caller's buffer (%zu bytes); the file "
                           "was removed again",
                           final, cap);
            goto out;
        }
    }
    rc = STAGECAL_OK;
out:
    free(text);
    free(tmp);
    free(final);
    return rc;
}

/* ---- JSON → model ----------------------------------------------------------------- */

typedef struct {
    const char *source;
    stagecal_error *err;
} reader;

#define RFAIL(rd, ...) error_set_at((rd)->err, STAGECAL_EDATA, (rd)->source, 0, 0, __VA_ARGS__)

static int get_member(reader *rd, const json_t *obj, const char *where, const char *key,
                      json_t **out)
{
    json_t *v = json_object_get(obj, key);
    if (!v)
        return RFAIL(rd, "missing member '%s%s%s'", where, where[0] ? "." : "", key);
    *out = v;
    return STAGECAL_OK;
}

static int get_object(reader *rd, const json_t *obj, const char *where, const char *key,
                      json_t **out)
{
    int rc = get_member(rd, obj, where, key, out);
    if (rc == STAGECAL_OK && !json_is_object(*out))
        return RFAIL(rd, "member '%s%s%s': expected an object", where, where[0] ? "." : "", key);
    return rc;
}

static int get_array(reader *rd, const json_t *obj, const char *where, const char *key,
                     json_t **out)
{
    int rc = get_member(rd, obj, where, key, out);
    if (rc == STAGECAL_OK && !json_is_array(*out))
        return RFAIL(rd, "member '%s%s%s': expected an array", where, where[0] ? "." : "", key);
    return rc;
}

static int get_string(reader *rd, const json_t *obj, const char *where, const char *key, char *buf,
                      size_t cap)
{
    json_t *v = NULL;
    int rc = get_member(rd, obj, where, key, &v);
    if (rc != STAGECAL_OK)
        return rc;
    if (!json_is_string(v))
        return RFAIL(rd, "member '%s%s%s': expected a string", where, where[0] ? "." : "", key);
    if (buf && copy_text(buf, cap, json_string_value(v)) != 0)
        return RFAIL(rd, "member '%s%s%s': longer than %zu characters", where, where[0] ? "." : "",
                     key, cap - 1);
    return STAGECAL_OK;
}

/* A number; with allow_inf also the string "inf". */
static int get_real(reader *rd, const json_t *obj, const char *where, const char *key,
                    int allow_inf, double *out)
{
    json_t *v = NULL;
    int rc = get_member(rd, obj, where, key, &v);
    if (rc != STAGECAL_OK)
        return rc;
    if (json_is_number(v)) {
        *out = json_number_value(v);
        return STAGECAL_OK;
    }
    if (allow_inf && json_is_string(v) && strcmp(json_string_value(v), "inf") == 0) {
        *out = INFINITY;
        return STAGECAL_OK;
    }
    return RFAIL(rd, "member '%s%s%s': expected a number%s", where, where[0] ? "." : "", key,
                 allow_inf ? " or \"inf\"" : "");
}

static int get_count(reader *rd, const json_t *obj, const char *where, const char *key, size_t *out)
{
    json_t *v = NULL;
    int rc = get_member(rd, obj, where, key, &v);
    if (rc != STAGECAL_OK)
        return rc;
    if (!json_is_integer(v) || json_integer_value(v) < 0)
        return RFAIL(rd, "member '%s%s%s': expected an integer >= 0", where, where[0] ? "." : "",
                     key);
    *out = (size_t)json_integer_value(v);
    return STAGECAL_OK;
}

#define TRY(expr)                                                                                  \
    do {                                                                                           \
        if ((rc = (expr)) != STAGECAL_OK)                                                          \
            return rc;                                                                             \
    } while (0)

static int read_system(reader *rd, const json_t *doc, stagecal_model *m)
{
    int rc;
    json_t *sys = NULL, *eq = NULL, *params = NULL; /* (set by get_object; GCC -O3 cannot see it) */
    TRY(get_object(rd, doc, "", "system", &sys));
    TRY(get_string(rd, sys, "system", "light", m->light, sizeof m->light));
    TRY(get_string(rd, sys, "system", "heavy", m->heavy, sizeof m->heavy));
    /* optional (absent in files written before they were recorded): 0 = not recorded */
    double *sysdata[SYSTEM_NDATA] = {&m->latent_j_mol, &m->m_light_kg_mol, &m->m_heavy_kg_mol};
    for (int k = 0; k < SYSTEM_NDATA; k++) {
        *sysdata[k] = 0;
        if (!json_object_get(sys, SYSTEM_DATA_KEY[k]))
            continue;
        TRY(get_real(rd, sys, "system", SYSTEM_DATA_KEY[k], 0, sysdata[k]));
        if (!(isfinite(*sysdata[k]) && *sysdata[k] > 0))
            return RFAIL(rd, "system: %s = %g: expected a finite number > 0", SYSTEM_DATA_KEY[k],
                         *sysdata[k]);
    }
    TRY(get_object(rd, sys, "system", "equilibrium", &eq));
    TRY(get_string(rd, eq, "system.equilibrium", "model", m->vle_kind, sizeof m->vle_kind));
    TRY(get_object(rd, eq, "system.equilibrium", "parameters", &params));
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
                return error_set(rd->err, STAGECAL_ENOMEM, "out of memory");
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
            return error_set(rd->err, rc, "%s", aerr.text);
        if (rc != STAGECAL_OK)
            return RFAIL(rd, "system.equilibrium.parameters: %s", aerr.text);
    }
    return STAGECAL_OK;
}

static int read_correlation(reader *rd, const json_t *doc, stagecal_model *m)
{
    int rc;
    json_t *c = NULL, *params = NULL, *cov = NULL;
    char name[sizeof m->form.name], method[STAGECAL_MODEL_TEXT];
    stagecal_error ferr;
    TRY(get_object(rd, doc, "", "correlation", &c));
    TRY(get_string(rd, c, "correlation", "form", name, sizeof name));
    if (stagecal_form_parse(name, &m->form, &ferr) != STAGECAL_OK)
        return RFAIL(rd, "correlation form: %s", ferr.text);
    if (strcmp(name, m->form.name) != 0)
        return RFAIL(rd, "correlation form '%s' is not in canonical notation ('%s' expected)", name,
                     m->form.name);
    size_t p = m->form.p;
    TRY(get_array(rd, c, "correlation", "parameters", &params));
    if (json_array_size(params) != p)
        return RFAIL(rd, "correlation form '%s' has %zu parameters but the file lists %zu",
                     m->form.name, p, json_array_size(params));
    for (size_t i = 0; i < p; i++) {
        json_t *e = json_array_get(params, i);
        char pname[sizeof m->form.param_names[0]];
        if (!json_is_object(e))
            return RFAIL(rd, "correlation.parameters[%zu]: expected an object", i);
        TRY(get_string(rd, e, "correlation.parameters[]", "name", pname, sizeof pname));
        if (strcmp(pname, m->form.param_names[i]) != 0)
            return RFAIL(rd,
                         "correlation.parameters[%zu] is named '%s', the form '%s' expects '%s'", i,
                         pname, m->form.name, m->form.param_names[i]);
        TRY(get_real(rd, e, "correlation.parameters[]", "value", 0, &m->theta[i]));
    }
    TRY(get_array(rd, c, "correlation", "covariance", &cov));
    if (json_array_size(cov) != p)
        return RFAIL(rd, "correlation.covariance: expected %zu rows (p x p), found %zu", p,
                     json_array_size(cov));
    for (size_t i = 0; i < p; i++) {
        json_t *row = json_array_get(cov, i);
        if (!json_is_array(row) || json_array_size(row) != p)
            return RFAIL(rd, "correlation.covariance[%zu]: expected an array of %zu numbers", i, p);
        for (size_t j = 0; j < p; j++) {
            json_t *e = json_array_get(row, j);
            if (!json_is_number(e))
                return RFAIL(rd, "correlation.covariance[%zu][%zu]: expected a number", i, j);
            m->cov[i * p + j] = json_number_value(e);
        }
    }
    TRY(get_real(rd, c, "correlation", "sigma_stages", 0, &m->sigma));
    TRY(get_real(rd, c, "correlation", "dof", 0, &m->dof));
    TRY(get_real(rd, c, "correlation", "confidence_level", 0, &m->level));
    TRY(get_string(rd, c, "correlation", "method", method, sizeof method));
    if (strcmp(method, "stage-space") == 0)
        m->method = STAGECAL_MODEL_STAGE_SPACE;
    else if (strcmp(method, "composition-space") == 0)
        m->method = STAGECAL_MODEL_COMPOSITION_SPACE;
    else
        return RFAIL(rd,
                     "correlation.method '%s': expected 'stage-space' or "
                     "'composition-space'",
                     method);
    return STAGECAL_OK;
}

static int read_rest(reader *rd, const json_t *doc, stagecal_model *m)
{
    int rc;
    json_t *o, *arr, *v;
    char buf[STAGECAL_MODEL_TEXT];

    TRY(get_string(rd, doc, "", "column", m->column_id, sizeof m->column_id));

    TRY(get_object(rd, doc, "", "stage_convention", &o));
    TRY(get_string(rd, o, "stage_convention", "condenser", buf, sizeof buf));
    if (strcmp(buf, "total") == 0)
        m->condenser = STAGECAL_CONDENSER_TOTAL;
    else if (strcmp(buf, "partial") == 0)
        m->condenser = STAGECAL_CONDENSER_PARTIAL;
    else
        return RFAIL(rd, "stage_convention.condenser '%s': expected 'total' or 'partial'", buf);
    TRY(get_member(rd, o, "stage_convention", "text", &v));
    if (!json_is_string(v) ||
        strcmp(json_string_value(v), stagecal_convention_text(m->condenser)) != 0)
        return RFAIL(rd,
                     "stage_convention.text does not match the %s-condenser convention "
                     "('%s' expected)",
                     buf, stagecal_convention_text(m->condenser));

    TRY(get_object(rd, doc, "", "evidence", &o));
    TRY(get_count(rd, o, "evidence", "windows", &m->n_windows));
    TRY(get_count(rd, o, "evidence", "samples", &m->n_samples));
    TRY(get_count(rd, o, "evidence", "runs", &m->n_runs));

    TRY(get_object(rd, doc, "", "envelope", &o));
    TRY(get_string(rd, o, "envelope", "kind", buf, sizeof buf));
    if (strcmp(buf, "box") != 0)
        return RFAIL(rd, "envelope.kind '%s': expected 'box'", buf);
    TRY(get_real(rd, o, "envelope", "r_min", 0, &m->r_min));
    TRY(get_real(rd, o, "envelope", "r_max", 1, &m->r_max));
    m->has_load = json_object_get(o, "f_min_sqrt_pa") || json_object_get(o, "f_max_sqrt_pa");
    if (m->has_load) {
        TRY(get_real(rd, o, "envelope", "f_min_sqrt_pa", 0, &m->f_min));
        TRY(get_real(rd, o, "envelope", "f_max_sqrt_pa", 0, &m->f_max));
    }

    TRY(get_member(rd, doc, "", "hetp", &o));
    if (!json_is_null(o)) {
        json_t *ref;
        if (!json_is_object(o))
            return RFAIL(rd, "member 'hetp': expected an object or null");
        m->has_hetp = 1;
        TRY(get_real(rd, o, "hetp", "height_m", 0, &m->height_m));
        TRY(get_object(rd, o, "hetp", "reference", &ref));
        TRY(get_real(rd, ref, "hetp.reference", "r", 1, &m->hetp_r));
        if (m->has_load)
            TRY(get_real(rd, ref, "hetp.reference", "f_sqrt_pa", 0, &m->hetp_f));
        TRY(get_real(rd, o, "hetp", "hetp_m", 0, &m->hetp_m));
        TRY(get_real(rd, o, "hetp", "low_m", 0, &m->hetp_low_m));
        TRY(get_real(rd, o, "hetp", "high_m", 1, &m->hetp_high_m));
        TRY(get_real(rd, o, "hetp", "level", 0, &m->hetp_level));
    }

    TRY(get_object(rd, doc, "", "provenance", &o));
    TRY(get_array(rd, o, "provenance", "inputs", &arr));
    for (size_t i = 0; i < json_array_size(arr); i++) {
        json_t *e = json_array_get(arr, i);
        char hex[STAGECAL_MODEL_HEX];
        size_t rows;
        if (!json_is_object(e))
            return RFAIL(rd, "provenance.inputs[%zu]: expected an object", i);
        TRY(get_member(rd, e, "provenance.inputs[]", "path", &v));
        if (!json_is_string(v))
            return RFAIL(rd, "provenance.inputs[%zu].path: expected a string", i);
        TRY(get_string(rd, e, "provenance.inputs[]", "sha256", hex, sizeof hex));
        TRY(get_count(rd, e, "provenance.inputs[]", "rows", &rows));
        stagecal_error aerr;
        rc = stagecal_model_add_input(m, json_string_value(v), hex, rows, &aerr);
        if (rc == STAGECAL_ENOMEM)
            return error_set(rd->err, rc, "%s", aerr.text);
        if (rc != STAGECAL_OK)
            return RFAIL(rd, "provenance.inputs[%zu]: %s", i, aerr.text);
    }
    TRY(get_string(rd, o, "provenance", "fitted_utc", m->fitted_utc, sizeof m->fitted_utc));
    TRY(get_string(rd, o, "provenance", "tool_version", m->tool_version, sizeof m->tool_version));
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
    TRY(get_member(rd, o, "provenance", "seed", &v));
    if (!json_is_integer(v) || json_integer_value(v) < 0)
        return RFAIL(rd, "member 'provenance.seed': expected an integer >= 0");
    m->seed = (unsigned long long)json_integer_value(v);
    TRY(get_member(rd, o, "provenance", "command_line", &v));
    if (json_is_string(v))
        TRY(stagecal_model_set_command_line(m, json_string_value(v), rd->err));
    else if (!json_is_null(v))
        return RFAIL(rd, "member 'provenance.command_line': expected a string or null");

    TRY(get_array(rd, doc, "", "warnings", &arr));
    for (size_t i = 0; i < json_array_size(arr); i++) {
        v = json_array_get(arr, i);
        if (!json_is_string(v))
            return RFAIL(rd, "warnings[%zu]: expected a string", i);
        TRY(stagecal_model_add_warning(m, json_string_value(v), rd->err));
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
        return error_set_at(rd->err, STAGECAL_EVERSION, rd->source, 0, 0,
                            "written by a newer stagecal (format version %lld > %d)",
                            (long long)version, STAGECAL_MODEL_VERSION);
    if (version < 1)
        return RFAIL(rd, "unknown format version %lld (expected %d)", (long long)version,
                     STAGECAL_MODEL_VERSION);

    /* Integrity before content: a hand edit is named as such, not as a field error. */
    TRY(get_object(rd, doc, "", "checksum", &ck));
    TRY(get_string(rd, ck, "checksum", "algorithm", fmt, sizeof fmt));
    if (strcmp(fmt, "sha256") != 0)
        return RFAIL(rd, "checksum algorithm '%s': expected 'sha256'", fmt);
    TRY(get_string(rd, ck, "checksum", "value", want, sizeof want));
    json_object_del(doc, "checksum");
    if (canonical_hash(doc, got) != 0)
        return error_set(rd->err, STAGECAL_ENOMEM, "out of memory");
    if (strcmp(got, want) != 0)
        return RFAIL(rd, "checksum mismatch: the file was edited or damaged");

    TRY(read_rest(rd, doc, m));
    TRY(read_system(rd, doc, m));
    TRY(read_correlation(rd, doc, m));
    return check_model(m, rd->source, STAGECAL_EDATA, rd->err);
}

int stagecal_model_parse(const char *text, size_t len, const char *source, stagecal_model *m,
                         stagecal_error *err)
{
    json_error_t jerr;
    reader rd = {source ? source : "model", err};
    stagecal_model_free(m);
    json_t *doc = json_loadb(text, len, JSON_REJECT_DUPLICATES, &jerr);
    if (!doc)
        return error_set_at(err, STAGECAL_EDATA, rd.source, jerr.line > 0 ? jerr.line : 0,
                            jerr.column > 0 ? jerr.column : 0,
                            "not a valid JSON document (truncated or corrupt?): %s", jerr.text);
    int rc = read_doc(&rd, doc, m);
    json_decref(doc);
    if (rc != STAGECAL_OK)
        stagecal_model_free(m);
    return rc;
}

int stagecal_model_load(const char *path, stagecal_model *m, stagecal_error *err)
{
    stagecal_model_free(m);
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return error_set_at(err, STAGECAL_ENOINPUT, path, 0, 0, "cannot open: %s", strerror(errno));
    size_t cap = 8192, n = 0;
    char *buf = malloc(cap);
    while (buf) {
        size_t got = fread(buf + n, 1, cap - n, fp);
        n += got;
        if (n < cap)
            break;
        if (cap >= MODEL_MAX_BYTES) {
            free(buf);
            fclose(fp);
            return error_set_at(err, STAGECAL_EDATA, path, 0, 0,
                                "larger than %zu bytes: not a model file", MODEL_MAX_BYTES);
        }
        char *grown = realloc(buf, cap * 2);
        if (!grown) {
            free(buf);
            buf = NULL;
            break;
        }
        buf = grown;
        cap *= 2;
    }
    int bad = ferror(fp);
    fclose(fp);
    if (!buf)
        return error_set(err, STAGECAL_ENOMEM, "out of memory reading '%s'", path);
    if (bad) {
        free(buf);
        return error_set_at(err, STAGECAL_ENOINPUT, path, 0, 0, "read error");
    }
    int rc = stagecal_model_parse(buf, n, path, m, err);
    free(buf);
    return rc;
}

/* ---- evaluation ----------------------------------------------------------------------- */

static double lv_of(double r)
{
    return isinf(r) ? 1.0 : r / (r + 1.0);
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
    int rc = stagecal_regress_band(&m->form, m->theta, m->cov, m->sigma, m->dof, level, r, f_load,
                                   &band, err);
    if (rc != STAGECAL_OK)
        return rc;

    memset(out, 0, sizeof *out);
    out->stages = band.value;
    out->column_stages = stagecal_convention_column_stages(band.value, m->condenser);
    out->se_fit = band.se_fit;
    out->se_pred = band.se_pred;
    out->level = level;
    out->t = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, m->dof);
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
    return STAGECAL_OK;
}

/*
 * fuzz_model.c — libFuzzer harness for the model file parser (stagecal_model_parse).
 * A model that parses must pass stagecal_model_check (parse promises a valid model),
 * must hold a covariance that is one (issue 18: symmetric positive semi-definite —
 * checked here with GSL's symmetric eigensolver, independently of the loader's
 * Cholesky test) and is evaluated at a few conditions, inside and outside its envelope.
 *
 * Model files carry a SHA-256 checksum of their canonical text, which random mutation
 * never matches, so half of the inputs (first byte odd) get their checksum recomputed
 * before parsing: the input is read as JSON, "checksum"."value" is replaced by the hash
 * of the document without it, dumped the way src/model.c does (compact, sorted keys,
 * ASCII, 17 digits — keep in step with DUMP_CANONICAL there). That lets mutations reach
 * the member-by-member reader behind the integrity check.
 */
#include <gsl/gsl_eigen.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_vector.h>
#include <jansson.h>
#include <math.h>

#include "fuzz_common.h"
#include "internal_sha256.h"
#include "stagecal/model.h"

int LLVMFuzzerInitialize(int *argc, char ***argv)
{
    (void)argc;
    (void)argv;
    gsl_set_error_handler_off();
    return 0;
}

/* The input with its checksum recomputed (malloc'd text, *len set); NULL when the input
 * is not a JSON object with a "checksum" object. */
static char *with_checksum(const char *text, size_t size, size_t *len)
{
    json_error_t jerr;
    json_t *doc = json_loadb(text, size, JSON_REJECT_DUPLICATES, &jerr);
    json_t *ck = json_object_get(doc, "checksum");
    char *out = NULL;
    if (json_is_object(ck)) {
        json_incref(ck);
        json_object_del(doc, "checksum");
        char *canon = json_dumps(doc, JSON_COMPACT | JSON_SORT_KEYS | JSON_ENSURE_ASCII |
                                          JSON_REAL_PRECISION(17));
        if (canon) {
            char hex[SHA256_HEX];
            sha256_hex(canon, strlen(canon), hex);
            free(canon);
            json_object_set_new(ck, "value", json_string(hex));
            json_object_set(doc, "checksum", ck);
            out = json_dumps(doc, JSON_INDENT(2) | JSON_SORT_KEYS | JSON_REAL_PRECISION(17));
        }
        json_decref(ck);
    }
    json_decref(doc);
    if (out)
        *len = strlen(out);
    return out;
}

/* Smallest eigenvalue of the covariance scaled to a correlation matrix (zero variances
 * left as a unit row); NAN when out of memory. */
static double min_corr_eigenvalue(const stagecal_model *m)
{
    size_t p = m->form.p;
    double lo = NAN;
    gsl_matrix *r = gsl_matrix_alloc(p, p);
    gsl_vector *ev = gsl_vector_alloc(p);
    gsl_eigen_symm_workspace *w = gsl_eigen_symm_alloc(p);
    if (r && ev && w) {
        for (size_t i = 0; i < p; i++)
            for (size_t j = 0; j < p; j++) {
                double si = sqrt(m->cov[i * p + i]), sj = sqrt(m->cov[j * p + j]);
                gsl_matrix_set(r, i, j,
                               i == j ? 1.0 : (si > 0 && sj > 0 ? m->cov[i * p + j] / si / sj : 0));
            }
        if (gsl_eigen_symm(r, ev, w) == 0)
            lo = gsl_vector_min(ev);
    }
    gsl_eigen_symm_free(w);
    gsl_vector_free(ev);
    gsl_matrix_free(r);
    return lo;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    stagecal_model m;
    stagecal_error err;
    if (size < 1)
        return 0;
    const char *text = (const char *)data + 1;
    size_t len = size - 1;
    char *fixed = NULL;
    if (data[0] & 1) {
        fixed = with_checksum(text, len, &len);
        if (!fixed)
            return 0;
        text = fixed;
    }
    stagecal_model_init(&m);
    if (stagecal_model_parse(text, len, "fuzz.json", &m, &err) == 0) {
        if (stagecal_model_check(&m, &err) != 0) {
            fprintf(stderr, "parsed model fails its own check: %s\n", err.text);
            abort();
        }
        /* the loader's ridge is 1e-10 on the correlation matrix; rounding in the
         * eigensolver is ~1e-15 per entry for p <= 8, so -1e-9 leaves room for both */
        double lo = min_corr_eigenvalue(&m);
        if (m.form.p > 0 && !(lo >= -1e-9)) {
            fprintf(stderr, "loaded a covariance that is not one: eigenvalue %g\n", lo);
            abort();
        }
        static const double rs[] = {0.0, 0.5, 3.0, 1e6, INFINITY};
        for (size_t i = 0; i < sizeof rs / sizeof rs[0]; i++) {
            stagecal_model_point pt;
            double f = m.has_load ? m.f_max : NAN;
            /* docs/methods.md "Stage counting": never a NaN or inf in a result without a status
             * saying why. */
            if (stagecal_model_eval(&m, rs[i], f, 0.0, &pt, &err) == 0 && !isfinite(pt.stages)) {
                fprintf(stderr, "eval at R = %g: stages %g with status ok\n", rs[i], pt.stages);
                abort();
            }
        }
    }
    stagecal_model_free(&m);
    free(fixed);
    return 0;
}

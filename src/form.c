/*
 * form.c — correlation forms: parsing of the form notation (docs/forms.md) and
 * evaluation of stages(R, F; θ) with its gradient in θ.
 *
 * R is the reflux ratio (dimensionless, ≥ 0, INFINITY = total reflux); F is the
 * F-factor (Pa^0.5, ≥ 0). At total reflux 1 − exp(−b·R) = 1 for b > 0, 1/R = 0 and
 * L/V = 1. 1 − exp(−b·R) is computed as −expm1(−b·R) so that small b·R keeps its
 * relative accuracy (the NIST Misra1a problem has b·R ≈ 0.04).
 */
#include "stagecal/form.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "internal.h"

/* The linear basis terms in canonical order (bit i of stagecal_form.terms). */
static const char *const term_text[] = {"1", "1/R", "L/V", "lnR", "F", "F^2", "1/F"};
#define NTERMS (sizeof term_text / sizeof term_text[0])

static const char accepted[] =
    "expected 'constant', 'saturating', 'saturating-load' or 'linear:' followed by "
    "terms from 1, 1/R, L/V, lnR, F, F^2, 1/F joined with '+'";

static void set_names(stagecal_form *form, const char *const *names)
{
    for (size_t i = 0; i < form->p; i++)
        snprintf(form->param_names[i], sizeof form->param_names[i], "%s", names[i]);
}

static int parse_linear(const char *spec, stagecal_form *form, stagecal_error *err)
{
    unsigned terms = 0;
    const char *s = spec;
    if (*s == '\0')
        return error_set(err, STAGECAL_EINVAL, "form 'linear:' has no terms (%s)", accepted);
    for (;;) {
        const char *end = strchr(s, '+');
        size_t len = end ? (size_t)(end - s) : strlen(s);
        size_t k = NTERMS;
        for (size_t i = 0; i < NTERMS; i++)
            if (strlen(term_text[i]) == len && strncmp(s, term_text[i], len) == 0)
                k = i;
        if (k == NTERMS)
            return error_set(err, STAGECAL_EINVAL,
                             "form 'linear:%s': unknown term '%.*s' (expected one of 1, 1/R, "
                             "L/V, lnR, F, F^2, 1/F)",
                             spec, (int)len, s);
        if (terms & (1u << k))
            return error_set(err, STAGECAL_EINVAL,
                             "form 'linear:%s': term '%s' appears twice (each term once)", spec,
                             term_text[k]);
        terms |= 1u << k;
        if (!end)
            break;
        s = end + 1;
    }
    form->kind = STAGECAL_FORM_LINEAR;
    form->terms = terms;
    form->uses_load = (terms & (STAGECAL_TERM_F | STAGECAL_TERM_F2 | STAGECAL_TERM_INVF)) != 0;
    /* Canonical name and parameter order follow the term order above. */
    size_t used = (size_t)snprintf(form->name, sizeof form->name, "linear:");
    form->p = 0;
    for (size_t i = 0; i < NTERMS; i++) {
        if (!(terms & (1u << i)))
            continue;
        used += (size_t)snprintf(form->name + used, sizeof form->name - used, "%s%s",
                                 form->p ? "+" : "", term_text[i]);
        snprintf(form->param_names[form->p], sizeof form->param_names[0], "%s", term_text[i]);
        form->p++;
    }
    return STAGECAL_OK;
}

int stagecal_form_parse(const char *text, stagecal_form *form, stagecal_error *err)
{
    static const char *const sat_names[] = {"a", "b", "c", "d"};
    if (!text || !form)
        return error_set(err, STAGECAL_EINVAL, "form: no form name given (%s)", accepted);
    memset(form, 0, sizeof *form);
    if (strcmp(text, "constant") == 0) {
        form->kind = STAGECAL_FORM_CONSTANT;
        form->p = 1;
    } else if (strcmp(text, "saturating") == 0) {
        form->kind = STAGECAL_FORM_SATURATING;
        form->p = 2;
    } else if (strcmp(text, "saturating-load") == 0) {
        form->kind = STAGECAL_FORM_SATURATING_LOAD;
        form->p = 4;
        form->uses_load = 1;
    } else if (strncmp(text, "linear:", 7) == 0) {
        int rc = parse_linear(text + 7, form, err);
        if (rc != STAGECAL_OK)
            memset(form, 0, sizeof *form);
        return rc;
    } else {
        return error_set(err, STAGECAL_EINVAL, "unknown form '%s' (%s)", text, accepted);
    }
    snprintf(form->name, sizeof form->name, "%s", text);
    set_names(form, sat_names);
    return STAGECAL_OK;
}

int stagecal_form_is_linear(const stagecal_form *form)
{
    return form->kind == STAGECAL_FORM_CONSTANT || form->kind == STAGECAL_FORM_LINEAR;
}

/* s = 1 − exp(−b·R) and ∂s/∂b = R·exp(−b·R), with the total-reflux limit. */
static int saturation(double b, double r, double *s, double *ds_db)
{
    if (isinf(r)) {
        if (!(b > 0))
            return STAGECAL_EINVAL; /* 1 − exp(−b·∞) has no finite limit for b ≤ 0 */
        *s = 1.0;
        *ds_db = 0.0;
        return STAGECAL_OK;
    }
    *s = -expm1(-b * r);
    *ds_db = r * exp(-b * r);
    return STAGECAL_OK;
}

static int linear_term(unsigned bit, double r, double f, double *t)
{
    switch (bit) {
    case STAGECAL_TERM_ONE:
        *t = 1.0;
        return STAGECAL_OK;
    case STAGECAL_TERM_INVR:
        if (!(r > 0))
            return STAGECAL_EINVAL;
        *t = isinf(r) ? 0.0 : 1.0 / r;
        return STAGECAL_OK;
    case STAGECAL_TERM_LV:
        *t = isinf(r) ? 1.0 : r / (r + 1.0);
        return STAGECAL_OK;
    case STAGECAL_TERM_LNR:
        if (!(r > 0) || isinf(r))
            return STAGECAL_EINVAL;
        *t = log(r);
        return STAGECAL_OK;
    case STAGECAL_TERM_F:
        *t = f;
        return STAGECAL_OK;
    case STAGECAL_TERM_F2:
        *t = f * f;
        return STAGECAL_OK;
    case STAGECAL_TERM_INVF:
        if (!(f > 0))
            return STAGECAL_EINVAL;
        *t = 1.0 / f;
        return STAGECAL_OK;
    default:
        return STAGECAL_EINTERNAL;
    }
}

int stagecal_form_eval(const stagecal_form *form, const double *theta, double r, double f_load,
                       double *value, double *grad)
{
    double v = 0.0, g[STAGECAL_FORM_MAXP] = {0};
    int rc;
    if (!form || !theta || !value || form->p < 1 || form->p > STAGECAL_FORM_MAXP)
        return STAGECAL_EINVAL;
    if (isnan(r) || r < 0)
        return STAGECAL_EINVAL;
    if (form->uses_load && !(isfinite(f_load) && f_load >= 0))
        return STAGECAL_EINVAL;
    switch (form->kind) {
    case STAGECAL_FORM_CONSTANT:
        v = theta[0];
        g[0] = 1.0;
        break;
    case STAGECAL_FORM_SATURATING: {
        double s, ds;
        if ((rc = saturation(theta[1], r, &s, &ds)) != STAGECAL_OK)
            return rc;
        v = theta[0] * s;
        g[0] = s;
        g[1] = theta[0] * ds;
        break;
    }
    case STAGECAL_FORM_SATURATING_LOAD: {
        double s, ds, f = f_load;
        double amp = theta[0] + theta[2] * f + theta[3] * f * f;
        if ((rc = saturation(theta[1], r, &s, &ds)) != STAGECAL_OK)
            return rc;
        v = amp * s;
        g[0] = s;
        g[1] = amp * ds;
        g[2] = f * s;
        g[3] = f * f * s;
        break;
    }
    case STAGECAL_FORM_LINEAR: {
        size_t k = 0;
        for (size_t i = 0; i < NTERMS; i++) {
            double t;
            if (!(form->terms & (1u << i)))
                continue;
            if ((rc = linear_term(1u << i, r, f_load, &t)) != STAGECAL_OK)
                return rc;
            g[k] = t;
            v += theta[k] * t;
            k++;
        }
        if (k != form->p)
            return STAGECAL_EINVAL;
        break;
    }
    default:
        return STAGECAL_EINVAL;
    }
    if (!isfinite(v))
        return STAGECAL_EINVAL;
    for (size_t i = 0; i < form->p; i++)
        if (!isfinite(g[i]))
            return STAGECAL_EINVAL;
    *value = v;
    if (grad)
        memcpy(grad, g, form->p * sizeof *grad);
    return STAGECAL_OK;
}

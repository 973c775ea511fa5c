/*
 * hetp.c — HETP from a column-stage estimate with a confidence interval, Welch
 * comparisons of two estimates, checks against a design figure and rules of thumb,
 * overall tray efficiency.
 *
 * The interval of HETP = H/N maps the Student-t interval of N through the decreasing
 * function N ↦ H/N. For a strictly monotone transform the mapped interval has exactly
 * the coverage of the original one, so no linearisation enters the interval; the
 * delta-method standard error H·se/N² is only used for Welch comparisons of two HETPs
 * (where a single standard error per estimate is needed). When the lower end of the
 * stage interval is not positive the data bound HETP from below only; that is a flag,
 * not an error. Sources: docs/hetp-trend.md.
 */
#include "stagecal/hetp.h"

#include <gsl/gsl_cdf.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "internal.h"

static int check_level(double level, stagecal_error *err)
{
    if (!(level > 0 && level < 1))
        return error_set(err, STAGECAL_EINVAL,
                         "confidence level %g is outside (0, 1) (expected e.g. 0.95)", level);
    return STAGECAL_OK;
}

static int check_stages(const stagecal_hetp_stages *s, stagecal_error *err)
{
    if (!(isfinite(s->column_stages) && s->column_stages > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "column stages %g is not positive (expected a fitted count > 0)",
                         s->column_stages);
    if (!s->lower_only && !(isfinite(s->se) && s->se >= 0))
        return error_set(err, STAGECAL_EINVAL,
                         "standard error %g of the column stages is invalid (expected >= 0)",
                         s->se);
    if (!(isfinite(s->dof) && s->dof > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "degrees of freedom %g are invalid (expected a positive number)", s->dof);
    return STAGECAL_OK;
}

int stagecal_hetp_stages_from_model(const stagecal_model *m, double r, double f_load,
                                    stagecal_hetp_stages *s, stagecal_model_point *pt,
                                    stagecal_error *err)
{
    stagecal_model_point p;
    int rc = stagecal_model_eval(m, r, f_load, 0, &p, err);
    if (rc)
        return rc;
    if (pt)
        *pt = p;
    s->column_stages = p.column_stages;
    s->se = p.se_fit;
    s->dof = p.dof_fit; /* the model's, or this condition's Bell–McCaffrey dof */
    s->lower_only = p.lower_only;
    if (!(isfinite(p.column_stages) && p.column_stages > 0))
        return error_set(err, STAGECAL_EDATA,
                         "column %s: the model predicts %g column stages at R = %g (expected > 0 "
                         "for an HETP)",
                         m->column_id, p.column_stages, r);
    if (!p.lower_only && !(isfinite(p.se_fit) && p.se_fit >= 0 && s->dof > 0))
        return error_set(err, STAGECAL_EDATA,
                         "column %s: no standard error at R = %g (se %g, dof %g)", m->column_id, r,
                         p.se_fit, s->dof);
    return STAGECAL_OK;
}

int stagecal_hetp_compute(double height_m, const stagecal_hetp_stages *s, double level,
                          stagecal_hetp_result *out, stagecal_error *err)
{
    int rc;
    memset(out, 0, sizeof *out);
    if (!(isfinite(height_m) && height_m > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "packed height %g m is not positive (expected the bed height in m)",
                         height_m);
    if ((rc = check_stages(s, err)) || (rc = check_level(level, err)))
        return rc;
    double n = s->column_stages;
    out->level = level;
    if (s->lower_only) { /* at least n column stages: HETP at most H/n */
        out->at_most = 1;
        out->t = out->se_m = NAN;
        out->hetp_m = out->high_m = height_m / n;
        out->low_m = 0;
        return STAGECAL_OK;
    }
    out->t = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, s->dof);
    out->hetp_m = height_m / n;
    out->se_m = height_m * s->se / (n * n);
    out->low_m = height_m / (n + out->t * s->se);
    double lo_n = n - out->t * s->se;
    if (lo_n > 0) {
        out->high_m = height_m / lo_n;
    } else {
        out->high_m = INFINITY;
        out->unbounded = 1;
    }
    return STAGECAL_OK;
}

const char *stagecal_hetp_undetermined(const stagecal_hetp_stages *s, const stagecal_hetp_result *r)
{
    if (s->lower_only)
        return "bounded from above only: the evidence gives at least N stages (an analyser at "
               "its limit), so HETP at most high_m";
    if (!(s->dof >= 2))
        return "not determined: the fit has fewer than 2 degrees of freedom";
    if (r->unbounded || !isfinite(r->high_m))
        return "not bounded above: the evidence gives a lower bound only";
    return NULL;
}

int stagecal_hetp_welch(double a, double se_a, double dof_a, double b, double se_b, double dof_b,
                        double level, stagecal_hetp_diff *out, stagecal_error *err)
{
    int rc;
    memset(out, 0, sizeof *out);
    if (!(isfinite(a) && isfinite(b) && a != 0))
        return error_set(err, STAGECAL_EINVAL,
                         "values %g and %g cannot be compared (expected finite numbers, the "
                         "first non-zero)",
                         a, b);
    if (!(isfinite(se_a) && isfinite(se_b) && se_a >= 0 && se_b >= 0 && se_a + se_b > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "standard errors %g and %g are invalid (expected >= 0, not both 0)", se_a,
                         se_b);
    if (!(isfinite(dof_a) && isfinite(dof_b) && dof_a > 0 && dof_b > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "degrees of freedom %g and %g are invalid (expected positive numbers)",
                         dof_a, dof_b);
    if ((rc = check_level(level, err)))
        return rc;
    double va = se_a * se_a, vb = se_b * se_b, v = va + vb;
    out->diff = b - a;
    out->rel_change = (b - a) / a;
    out->se = sqrt(v);
    /* Satterthwaite (1946): the dof of a sum of scaled chi-squares matched in its
     * first two moments. A term with se = 0 contributes nothing. */
    out->dof = v * v / (va * va / dof_a + vb * vb / dof_b);
    out->t_stat = out->diff / out->se;
    out->p_value = 2.0 * gsl_cdf_tdist_Q(fabs(out->t_stat), out->dof);
    out->level = level;
    out->t_crit = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, out->dof);
    out->low = out->diff - out->t_crit * out->se;
    out->high = out->diff + out->t_crit * out->se;
    out->significant = out->p_value < 1 - level;
    return STAGECAL_OK;
}

const char *stagecal_hetp_verdict_name(stagecal_hetp_verdict v)
{
    static const char *const names[] = {[STAGECAL_HETP_CONSISTENT] = "consistent",
                                        [STAGECAL_HETP_WORSE] = "worse",
                                        [STAGECAL_HETP_BETTER] = "better"};
    return NAME_OF(names, v);
}

static stagecal_hetp_verdict verdict_for(double low, double high, double ref_low, double ref_high)
{
    if (low > ref_high)
        return STAGECAL_HETP_WORSE;
    if (high < ref_low)
        return STAGECAL_HETP_BETTER;
    return STAGECAL_HETP_CONSISTENT;
}

int stagecal_hetp_vs_design(const stagecal_hetp_result *r, double design_m,
                            stagecal_hetp_design_check *out, stagecal_error *err)
{
    memset(out, 0, sizeof *out);
    if (!(isfinite(design_m) && design_m > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "design HETP %g m is not positive (expected the data-sheet value in m)",
                         design_m);
    out->design_m = design_m;
    out->ratio = r->hetp_m / design_m;
    out->ratio_low = r->low_m / design_m;
    out->ratio_high = r->unbounded ? INFINITY : r->high_m / design_m;
    out->verdict = verdict_for(r->low_m, r->high_m, design_m, design_m);
    return STAGECAL_OK;
}

const char *stagecal_packing_kind_name(stagecal_packing_kind k)
{
    return k == STAGECAL_PACKING_RANDOM ? "random" : "structured";
}

int stagecal_packing_kind_parse(const char *text, stagecal_packing_kind *k)
{
    if (strcmp(text, "structured") == 0)
        *k = STAGECAL_PACKING_STRUCTURED;
    else if (strcmp(text, "random") == 0)
        *k = STAGECAL_PACKING_RANDOM;
    else
        return -1;
    return 0;
}

/* Size ranges the rules are quoted for (examples in Kister 1992, "Distillation Design", ch. 11,
 * after Harrison & France 1989, from memory: they span a_p 125–750 m²/m³ and d_p 25–50 mm; the
 * limits below widen that modestly — common practice, no source). */
#define AP_MIN 50.0
#define AP_MAX 1000.0
#define DP_MIN 0.006
#define DP_MAX 0.1

int stagecal_hetp_rule_of_thumb(stagecal_packing_kind kind, double size, stagecal_hetp_rule *out,
                                stagecal_error *err)
{
    memset(out, 0, sizeof *out);
    out->kind = kind;
    out->size = size;
    if (kind == STAGECAL_PACKING_STRUCTURED) {
        if (!(size >= AP_MIN && size <= AP_MAX))
            return error_set(err, STAGECAL_EINVAL,
                             "specific area %g m2/m3 is outside [%g, %g] (expected the "
                             "packing's a_p in m2/m3)",
                             size, AP_MIN, AP_MAX);
        out->hetp_m = 100.0 / size + 0.10;
        out->rule = "HETP = 100/a_p + 0.10 m (a_p in m2/m3), structured packing";
        out->source = "Harrison & France 1989, quoted in Kister 1992, Distillation Design, "
                      "ch. 11 (from memory, unconfirmed)";
    } else if (kind == STAGECAL_PACKING_RANDOM) {
        if (!(size >= DP_MIN && size <= DP_MAX))
            return error_set(err, STAGECAL_EINVAL,
                             "nominal packing size %g m is outside [%g, %g] (expected d_p in m)",
                             size, DP_MIN, DP_MAX);
        out->hetp_m = 18.0 * size;
        out->rule = "HETP = 18 d_p (HETP [ft] = 1.5 d_p [in]), random packing";
        out->source = "Kister 1992, Distillation Design, ch. 11, after Frank 1977 and Harrison "
                      "& France 1989 (from memory, unconfirmed)";
    } else {
        return error_set(err, STAGECAL_EINVAL, "unknown packing kind %d", (int)kind);
    }
    out->low_m = out->hetp_m * (1 - STAGECAL_HETP_RULE_BAND);
    out->high_m = out->hetp_m * (1 + STAGECAL_HETP_RULE_BAND);
    return STAGECAL_OK;
}

stagecal_hetp_verdict stagecal_hetp_vs_rule(const stagecal_hetp_result *r,
                                            const stagecal_hetp_rule *rule)
{
    return verdict_for(r->low_m, r->high_m, rule->low_m, rule->high_m);
}

int stagecal_hetp_tray_efficiency(const stagecal_hetp_stages *s, int trays, double level,
                                  stagecal_hetp_tray *out, stagecal_error *err)
{
    int rc;
    memset(out, 0, sizeof *out);
    if (trays < 1)
        return error_set(err, STAGECAL_EINVAL,
                         "tray count %d is invalid (expected the number of actual trays >= 1)",
                         trays);
    if ((rc = check_stages(s, err)) || (rc = check_level(level, err)))
        return rc;
    out->level = level;
    out->t = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, s->dof);
    out->efficiency = s->column_stages / trays;
    out->se = s->se / trays;
    out->low = out->efficiency - out->t * out->se;
    out->high = out->efficiency + out->t * out->se;
    return STAGECAL_OK;
}

/* ---- equivalence ----------------------------------------------------------------- */

const char *stagecal_equiv_verdict_name(stagecal_equiv_verdict v)
{
    static const char *const names[] = {[STAGECAL_EQUIV_EQUIVALENT] = "equivalent",
                                        [STAGECAL_EQUIV_NOT_SHOWN] = "not-shown",
                                        [STAGECAL_EQUIV_WORSE] = "worse",
                                        [STAGECAL_EQUIV_BETTER] = "better",
                                        [STAGECAL_EQUIV_NOT_DETERMINED] = "not-determined"};
    return NAME_OF(names, v);
}

static int check_equiv(double margin, double alpha, stagecal_error *err)
{
    if (!(isfinite(margin) && margin > 0 && margin < 10))
        return error_set(err, STAGECAL_EINVAL,
                         "equivalence margin %g is invalid (expected a fraction, e.g. 0.10)",
                         margin);
    if (!(alpha > 0 && alpha < 0.5))
        return error_set(err, STAGECAL_EINVAL,
                         "test level %g is outside (0, 0.5) (expected e.g. 0.05)", alpha);
    return STAGECAL_OK;
}

/* Why one side's evidence cannot decide, or NULL. */
static const char *thin(const stagecal_hetp_stages *s, double alpha)
{
    if (s->lower_only)
        return "the evidence gives at least N stages only (an analyser at its limit), so HETP "
               "is bounded from above only";
    if (s->dof < 2)
        return "the fit has fewer than 2 degrees of freedom";
    if (!(s->se > 0))
        return "the fit gives no standard error";
    if (s->column_stages - gsl_cdf_tdist_Pinv(1 - alpha, s->dof) * s->se <= 0)
        return "the evidence bounds HETP from below only (its interval is open upwards)";
    return NULL;
}

/* Verdict and words from the interval and the p values; `what` names the reference. */
static void equiv_verdict(stagecal_hetp_equiv *o, const char *what)
{
    double up = 1 + o->margin, lo = 1 / up;
    int pct = (int)lround(100 * (1 - 2 * o->alpha));
    if (o->p < o->alpha) {
        o->verdict = STAGECAL_EQUIV_EQUIVALENT;
        snprintf(o->text, sizeof o->text,
                 "as good as %s: the %d %% interval of the HETP ratio, %.3f to %.3f, lies within "
                 "the margin %.3f to %.3f (TOST p = %.3g)",
                 what, pct, o->low, o->high, lo, up, o->p);
    } else if (o->low > up) {
        o->verdict = STAGECAL_EQUIV_WORSE;
        snprintf(o->text, sizeof o->text,
                 "worse than %s by more than the margin: the %d %% interval of the HETP ratio, "
                 "%.3f to %.3f, lies above %.3f",
                 what, pct, o->low, o->high, up);
    } else if (o->high < lo) {
        o->verdict = STAGECAL_EQUIV_BETTER;
        snprintf(o->text, sizeof o->text,
                 "better than %s by more than the margin: the %d %% interval of the HETP ratio, "
                 "%.3f to %.3f, lies below %.3f",
                 what, pct, o->low, o->high, lo);
    } else {
        o->verdict = STAGECAL_EQUIV_NOT_SHOWN;
        snprintf(o->text, sizeof o->text,
                 "not shown to be as good as %s: the %d %% interval of the HETP ratio, %.3f to "
                 "%.3f, reaches beyond the margin %.3f to %.3f (TOST p = %.3g); more evidence "
                 "is needed to decide",
                 what, pct, o->low, o->high, lo, up, o->p);
    }
}

static void equiv_undetermined(stagecal_hetp_equiv *o, const char *what, const char *why)
{
    o->verdict = STAGECAL_EQUIV_NOT_DETERMINED;
    o->low = o->high = o->p = o->p_worse = o->p_better = NAN;
    snprintf(o->text, sizeof o->text, "not determined whether it is as good as %s: %s", what, why);
}

int stagecal_hetp_equiv_design(double height_m, const stagecal_hetp_stages *s, double design_m,
                               double margin, double alpha, stagecal_hetp_equiv *out,
                               stagecal_error *err)
{
    int rc;
    stagecal_hetp_result r;
    memset(out, 0, sizeof *out);
    if ((rc = stagecal_hetp_compute(height_m, s, 0.5, &r, err)) ||
        (rc = check_equiv(margin, alpha, err)))
        return rc;
    if (!(isfinite(design_m) && design_m > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "design HETP %g m is not positive (expected the data-sheet value in m)",
                         design_m);
    const char *what = "the design figure";
    out->margin = margin;
    out->alpha = alpha;
    out->dof = s->dof;
    out->ratio = r.hetp_m / design_m;
    const char *why = thin(s, alpha);
    if (why) {
        equiv_undetermined(out, what, why);
        return STAGECAL_OK;
    }
    /* HETP/D ∈ [1/(1+δ), 1+δ] ⟺ N ∈ [n_lo, n_hi]: exact t tests on N */
    double n = s->column_stages, n_lo = height_m / (design_m * (1 + margin));
    double n_hi = height_m * (1 + margin) / design_m, t = gsl_cdf_tdist_Pinv(1 - alpha, s->dof);
    out->p_worse = gsl_cdf_tdist_Q((n - n_lo) / s->se, s->dof);
    out->p_better = gsl_cdf_tdist_Q((n_hi - n) / s->se, s->dof);
    out->p = fmax(out->p_worse, out->p_better);
    out->low = height_m / (design_m * (n + t * s->se));
    out->high = height_m / (design_m * (n - t * s->se));
    equiv_verdict(out, what);
    return STAGECAL_OK;
}

int stagecal_hetp_equiv_pair(double height_a, const stagecal_hetp_stages *a, double height_b,
                             const stagecal_hetp_stages *b, double margin, double alpha,
                             stagecal_hetp_equiv *out, stagecal_error *err)
{
    int rc;
    stagecal_hetp_result ra, rb;
    memset(out, 0, sizeof *out);
    if ((rc = stagecal_hetp_compute(height_a, a, 0.5, &ra, err)) ||
        (rc = stagecal_hetp_compute(height_b, b, 0.5, &rb, err)) ||
        (rc = check_equiv(margin, alpha, err)))
        return rc;
    const char *what = "the old bed";
    out->margin = margin;
    out->alpha = alpha;
    out->ratio = rb.hetp_m / ra.hetp_m;
    const char *why = thin(a, alpha);
    if (!why)
        why = thin(b, alpha);
    if (why) {
        out->dof = fmin(a->dof, b->dof);
        equiv_undetermined(out, what, why);
        return STAGECAL_OK;
    }
    /* ln ratio = ln(H_b/H_a) − ln N_b + ln N_a, se² = (se_a/N_a)² + (se_b/N_b)² */
    double va = a->se / a->column_stages, vb = b->se / b->column_stages;
    va *= va;
    vb *= vb;
    double dof = (va + vb) * (va + vb) / (va * va / a->dof + vb * vb / b->dof);
    return stagecal_hetp_equiv_log(log(out->ratio), sqrt(va + vb), dof, margin, alpha, what, out,
                                   err);
}

int stagecal_hetp_equiv_log(double log_ratio, double se, double dof, double margin, double alpha,
                            const char *what, stagecal_hetp_equiv *out, stagecal_error *err)
{
    int rc;
    if ((rc = check_equiv(margin, alpha, err)))
        return rc;
    memset(out, 0, sizeof *out);
    if (!(isfinite(log_ratio) && isfinite(se) && se >= 0 && isfinite(dof)))
        return error_set(err, STAGECAL_EINVAL, "log HETP ratio %g with se %g and dof %g is invalid",
                         log_ratio, se, dof);
    out->margin = margin;
    out->alpha = alpha;
    out->ratio = exp(log_ratio);
    out->dof = dof;
    if (dof < 2 || !(se > 0)) {
        equiv_undetermined(out, what,
                           dof < 2 ? "the evidence has fewer than 2 degrees of freedom"
                                   : "the evidence gives no standard error");
        return STAGECAL_OK;
    }
    double lm = log(1 + margin), t = gsl_cdf_tdist_Pinv(1 - alpha, dof);
    out->p_worse = gsl_cdf_tdist_P((log_ratio - lm) / se, dof);
    out->p_better = gsl_cdf_tdist_Q((log_ratio + lm) / se, dof);
    out->p = fmax(out->p_worse, out->p_better);
    out->low = exp(log_ratio - t * se);
    out->high = exp(log_ratio + t * se);
    equiv_verdict(out, what);
    return STAGECAL_OK;
}

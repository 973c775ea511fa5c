/*
 * stagecal/hetp.h — height equivalent to a theoretical plate (HETP) with a confidence
 * interval, before/after comparisons, and checks against a design figure and against
 * rules of thumb; overall tray efficiency for trayed columns.
 *
 * Everything here takes plain numbers: an estimate of the column stages at a stated
 * condition (R, F) with its standard error and the residual degrees of freedom of the
 * fit that produced it (stagecal_model_eval gives all three). Methods and sources are
 * in docs/hetp-trend.md:
 *   - HETP = H / column stages (docs/methods.md "Stage counting"; Kister 1992, "Distillation
 *     Design", ch. 11, after Harrison & France 1989, from memory).
 *   - Interval: the Student-t interval of the column stages mapped through the
 *     decreasing map N ↦ H/N (exact for a monotone transform: the coverage of the
 *     stage interval carries over unchanged); the delta-method standard error
 *     se(HETP) = H·se(N)/N² is reported beside it and feeds the comparisons.
 *   - Two estimates: Welch's unequal-variance t statistic with Satterthwaite's
 *     degrees of freedom (Welch 1947, Biometrika 34, 28–35; Satterthwaite 1946,
 *     Biometrics Bulletin 2, 110–114).
 *   - Rules of thumb (Kister 1992, from memory): structured packing
 *     HETP ≈ 100/a_p + 0.10 m (Harrison & France 1989, quoted by Kister 1992), random
 *     packing HETP ≈ 18·d_p (Kister 1992); the ±30 % band is common practice, no source.
 *
 * Units: heights in m, specific area in m²/m³, nominal packing size in m.
 */
#ifndef STAGECAL_HETP_H
#define STAGECAL_HETP_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/model.h"

#ifdef __cplusplus
extern "C" {
#endif

/* An estimate of the column stages (stages − 1, or − 2 with a partial condenser) at
 * one condition, as a fit gives it. */
typedef struct {
    double column_stages; /* estimate [-], > 0 */
    double se;            /* standard error of that estimate (mean prediction) [-], ≥ 0 */
    double dof;           /* residual degrees of freedom of the fit, > 0 (may be fractional) */
    int lower_only;       /* 1: column_stages is a one-sided lower bound at the model's level
                             ("at least N", a one-sided model file); se is NAN. HETP is then
                             bounded from above only, and every comparison is not determined */
} stagecal_hetp_stages;

/* Column stages at (r, f_load) from a loaded model file: s gets the model's column
 * stages, the standard error of the mean prediction and the fit's residual dof; pt
 * (may be NULL) gets the whole evaluation (extrapolation flags, bands). Errors of
 * stagecal_model_eval pass through; EDATA when the model predicts no column stages
 * (≤ 0) or a zero dof there. */
int stagecal_hetp_stages_from_model(const stagecal_model *m, double r, double f_load,
                                    stagecal_hetp_stages *s, stagecal_model_point *pt,
                                    stagecal_error *err);

/* HETP with its interval. */
typedef struct {
    double hetp_m; /* H / column stages [m] */
    double se_m;   /* delta-method standard error H·se/N² [m] */
    double level;  /* confidence level, in (0, 1) */
    double t;      /* Student t quantile at (1 + level)/2 with the fit's dof */
    double low_m;  /* H / (N + t·se) [m] */
    double high_m; /* H / (N − t·se) [m]; INFINITY when unbounded = 1 */
    int unbounded; /* 1 when N − t·se ≤ 0: the data do not bound HETP from above */
    int at_most;   /* 1 (s->lower_only): HETP is at most high_m = H/N at the model's level;
                      hetp_m = high_m, low_m = 0, se_m and t NAN */
} stagecal_hetp_result;

/* HETP = height_m / s->column_stages with the endpoint-mapped t interval at `level`.
 * EINVAL for height_m ≤ 0, column_stages ≤ 0, se < 0, dof ≤ 0, level outside (0, 1)
 * or any non-finite input. */
int stagecal_hetp_compute(double height_m, const stagecal_hetp_stages *s, double level,
                          stagecal_hetp_result *out, stagecal_error *err);

/* Why an HETP result must not be shown as a two-sided interval of numbers, or NULL when
 * it may: "fewer than 2 degrees of freedom" (the t quantile explodes), or "not bounded
 * above" (r->unbounded: the evidence gives "at least low_m" only; show it that way).
 * The text is static. */
const char *stagecal_hetp_undetermined(const stagecal_hetp_stages *s,
                                       const stagecal_hetp_result *r);

/* Welch–Satterthwaite comparison of two independent estimates a and b. */
typedef struct {
    double diff;       /* b − a */
    double rel_change; /* (b − a)/a, 0 when a = 0 is not allowed (a ≠ 0 required) */
    double se;         /* sqrt(se_a² + se_b²) */
    double dof;        /* Satterthwaite: se⁴ / (se_a⁴/dof_a + se_b⁴/dof_b) */
    double t_stat;     /* diff / se */
    double p_value;    /* two-sided, 2·P(T_dof > |t_stat|) */
    double level;      /* confidence level of the interval, in (0, 1) */
    double t_crit;     /* t quantile at (1 + level)/2 with dof */
    double low, high;  /* diff ∓ t_crit·se */
    int significant;   /* 1 when p_value < 1 − level (the interval excludes 0) */
} stagecal_hetp_diff;

/* Compares b with a (b − a). EINVAL for a non-finite value, a = 0, se < 0, both se
 * = 0 (no test possible), dof ≤ 0 or level outside (0, 1). */
int stagecal_hetp_welch(double a, double se_a, double dof_a, double b, double se_b, double dof_b,
                        double level, stagecal_hetp_diff *out, stagecal_error *err);

/* Where a measured interval [low, high] lies relative to a reference value or range. */
typedef enum {
    STAGECAL_HETP_CONSISTENT = 0, /* the interval contains the reference (or overlaps the range) */
    STAGECAL_HETP_WORSE,          /* the whole interval lies above: taller HETP, fewer stages */
    STAGECAL_HETP_BETTER          /* the whole interval lies below: shorter HETP */
} stagecal_hetp_verdict;

/* "consistent" / "worse" / "better". */
const char *stagecal_hetp_verdict_name(stagecal_hetp_verdict v);

/* Measured HETP against a design figure (e.g. from the supplier's data sheet):
 * ratio = hetp/design with its interval [low/design, high/design]; the verdict is the
 * two-sided test of HETP = design at 1 − level. EINVAL for design_m ≤ 0. */
typedef struct {
    double design_m;              /* the design HETP [m] */
    double ratio;                 /* measured / design */
    double ratio_low, ratio_high; /* interval of the ratio (high INFINITY when unbounded) */
    stagecal_hetp_verdict verdict;
} stagecal_hetp_design_check;

int stagecal_hetp_vs_design(const stagecal_hetp_result *r, double design_m,
                            stagecal_hetp_design_check *out, stagecal_error *err);

typedef enum {
    STAGECAL_PACKING_STRUCTURED = 0, /* corrugated-sheet structured packing, size = a_p [m²/m³] */
    STAGECAL_PACKING_RANDOM          /* rings/saddles, size = nominal size d_p [m] */
} stagecal_packing_kind;

/* "structured" / "random"; parse returns -1 for anything else. */
const char *stagecal_packing_kind_name(stagecal_packing_kind k);
int stagecal_packing_kind_parse(const char *text, stagecal_packing_kind *k);

/* A rule-of-thumb HETP and the range compared against. */
typedef struct {
    stagecal_packing_kind kind;
    double size;          /* a_p [m²/m³] (structured) or d_p [m] (random) */
    double hetp_m;        /* the rule's value [m] */
    double low_m, high_m; /* hetp_m·(1 ∓ STAGECAL_HETP_RULE_BAND) [m] */
    const char *rule;     /* the formula in words */
    const char *source;   /* where it comes from, with its confidence ("from memory") */
} stagecal_hetp_rule;

/* Relative half-width of the rule-of-thumb band (common practice, no source). */
#define STAGECAL_HETP_RULE_BAND 0.30

/* Structured: HETP = 100/a_p + 0.10 m, a_p in [50, 1000] m²/m³; random: HETP = 18·d_p,
 * d_p in [0.006, 0.1] m (the sizes the rules are quoted for; EINVAL outside). */
int stagecal_hetp_rule_of_thumb(stagecal_packing_kind kind, double size, stagecal_hetp_rule *out,
                                stagecal_error *err);

/* Verdict of a measured interval [r->low_m, r->high_m] against a rule's range. */
stagecal_hetp_verdict stagecal_hetp_vs_rule(const stagecal_hetp_result *r,
                                            const stagecal_hetp_rule *rule);

/* Overall tray efficiency E_O = column stages / actual trays (standard definition, common practice,
 * no source), with the t interval of the stages divided by the tray count (a linear map, exact). */
typedef struct {
    double efficiency; /* E_O [-] (may exceed 1) */
    double se;         /* se / trays */
    double level, t;   /* level and t quantile */
    double low, high;  /* interval */
} stagecal_hetp_tray;

/* EINVAL for trays < 1 or invalid s/level (as stagecal_hetp_compute). */
int stagecal_hetp_tray_efficiency(const stagecal_hetp_stages *s, int trays, double level,
                                  stagecal_hetp_tray *out, stagecal_error *err);

/* ---- equivalence: "as good as" (two one-sided tests) ------------------------------- */

/* Default relative margin of the equivalence tests: HETP within a factor 1.10 of the
 * reference either way. Why 10 %: it is about the smallest HETP change a batch planner
 * acts on (0.7 column stages on a 7-stage bed changes the reflux a cut needs), and the
 * usual repeatability of packed-column HETP tests is of that order (common practice,
 * no source). docs/hetp-trend.md §4a. */
#define STAGECAL_HETP_EQUIV_MARGIN 0.10

typedef enum {
    STAGECAL_EQUIV_EQUIVALENT = 0, /* both one-sided tests reject: within the margin */
    STAGECAL_EQUIV_NOT_SHOWN,      /* the (1 − 2α) interval reaches beyond the margin */
    STAGECAL_EQUIV_WORSE,          /* the whole interval lies above (1 + δ): taller HETP */
    STAGECAL_EQUIV_BETTER,         /* the whole interval lies below 1/(1 + δ) */
    STAGECAL_EQUIV_NOT_DETERMINED  /* the evidence cannot decide: see text */
} stagecal_equiv_verdict;

/* "equivalent" / "not-shown" / "worse" / "better" / "not-determined". */
const char *stagecal_equiv_verdict_name(stagecal_equiv_verdict v);

/* Result of a TOST on the HETP ratio measured/reference. */
typedef struct {
    double margin;            /* δ: equivalent when the ratio lies in [1/(1 + δ), 1 + δ] */
    double alpha;             /* level of each one-sided test (the interval is 1 − 2α) */
    double ratio;             /* HETP measured / reference */
    double low, high;         /* (1 − 2α) interval of the ratio (NAN when not determined) */
    double dof;               /* t degrees of freedom */
    double p_worse, p_better; /* p of H0 "ratio ≥ 1 + δ" and of H0 "ratio ≤ 1/(1 + δ)" */
    double p;                 /* max of the two: equivalence is shown when p < α */
    stagecal_equiv_verdict verdict;
    char text[256]; /* the verdict in words, with the reason when not determined */
} stagecal_hetp_equiv;

/* "As good as the design figure": TOST of HETP = height_m/N against design_m, exact on
 * the t law of the column stages (the margin maps to a range of N). Not determined
 * when dof < 2, se = 0, or the evidence bounds HETP from one side only (N − t·se ≤ 0
 * at 1 − α). EINVAL for bad arguments (as stagecal_hetp_compute; margin ≤ 0; alpha
 * outside (0, 0.5)). */
int stagecal_hetp_equiv_design(double height_m, const stagecal_hetp_stages *s, double design_m,
                               double margin, double alpha, stagecal_hetp_equiv *out,
                               stagecal_error *err);

/* "As good as the old bed": TOST of HETP_b/HETP_a on the log scale (delta method,
 * se(ln N) = se/N, Welch–Satterthwaite dof). a is the old (reference) bed. Not
 * determined under the same conditions on either side. EINVAL as above. */
int stagecal_hetp_equiv_pair(double height_a, const stagecal_hetp_stages *a, double height_b,
                             const stagecal_hetp_stages *b, double margin, double alpha,
                             stagecal_hetp_equiv *out, stagecal_error *err);

/* The TOST on an estimate of ln(HETP ratio) with its standard error and t dof (e.g. a
 * contrast of the history fit); `what` names the reference in the verdict's words
 * ("the old bed"). Not determined when dof < 2 or se = 0. EINVAL for non-finite
 * arguments or a bad margin/alpha. */
int stagecal_hetp_equiv_log(double log_ratio, double se, double dof, double margin, double alpha,
                            const char *what, stagecal_hetp_equiv *out, stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif

/*
 * stagecal/design.h — where to run the next tests: the correlation's Fisher information,
 * the information one more quasi-steady window adds, and the K test conditions that
 * shrink the confidence band at the conditions a planner cares about most.
 *
 * Model of the evidence. Each quasi-steady window i gives one stage count
 *   y_i = stages(R_i, F_i; θ) + e_i,  e_i independent, var(e_i) = σ²,
 * with σ the standard deviation of one new window (the model file's scatter function σ(R)
 * at the window's R, include/stagecal/scatter.h; sigma_stages where it has none). To
 * first order in θ (Gauss–Newton; exact for forms linear in θ) the Fisher information of
 * a set of windows is Σ g_i g_iᵀ / σ(R_i)² with g = ∂stages/∂θ at the current estimate, and
 * the information the fit already holds is the inverse of its covariance, I₀ = C⁻¹. After K
 * new windows at x_1 … x_K the information is M = I₀ + Σ_k g(x_k) g(x_k)ᵀ / σ(R_k)², and the
 * variance of the fitted stages at a condition x₀ is g(x₀)ᵀ M⁻¹ g(x₀).
 *
 * Criteria (Atkinson, Donev & Tobias 2007, "Optimum Experimental Designs, with SAS",
 * Oxford University Press, ch. 10; for a nonlinear form the design is locally optimal at
 * the current θ, Chernoff 1953, Ann. Math. Statist. 24:586–602):
 *   I-optimal (default): minimise the weighted average prediction variance over the
 *     conditions of interest, Σ_j w_j g_jᵀ M⁻¹ g_j / Σ_j w_j (ADT 2007 §10.6);
 *   D-optimal: maximise log det M (Kiefer 1959, "Optimum experimental designs",
 *     J. R. Statist. Soc. B 21:272–319).
 * The K conditions are optimised together inside the bounds with NLopt's BOBYQA
 * (Powell 2009, "The BOBYQA algorithm for bound constrained optimization without
 * derivatives", Cambridge NA Report NA2009/06) from several starts (deterministic ones
 * plus random ones from a seeded GSL generator); for many tests by coordinate exchange
 * (Meyer & Nachtsheim 1995, Technometrics 37:60–69), one test at a time by BOBYQA. The reflux ratio
 * is searched in L/V = R/(R + 1), so total reflux (R = inf, L/V = 1) is an ordinary bound.
 *
 * Singular information: when I₀ has rank < p (the current evidence cannot identify the
 * form at all), the search runs on the information in scaled coordinates plus a small
 * ridge, the result says so, and names the single condition that adds the most
 * information in the missing direction. Variances at conditions whose gradient has a
 * component in the missing direction are "not determined", never a number.
 *
 * Duration of a test: one production period at one reflux ratio long enough for one
 * quasi-steady window, (settle + window) samples × the sampling interval, where settle is
 * the run-log analysis warm-up (the R-statistic filters' memory after a change of reflux)
 * and window the mean samples per window behind the model (so the new window carries the
 * σ the model records), at least the analysis' shortest window. docs/design.md.
 *
 * Units: R dimensionless (INFINITY = total reflux), F-factor Pa^0.5, durations s.
 */
#ifndef STAGECAL_DESIGN_H
#define STAGECAL_DESIGN_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/form.h"
#include "stagecal/model.h"

#ifdef __cplusplus
extern "C" {
#endif

#define STAGECAL_DESIGN_MAXK 64 /* most test conditions proposed at once */

typedef enum {
    STAGECAL_DESIGN_I = 0, /* I-optimal: weighted average prediction variance (default) */
    STAGECAL_DESIGN_D      /* D-optimal: log determinant of the information */
} stagecal_design_criterion;

/* The current state of knowledge about a correlation. Fill with stagecal_design_from_model,
 * or stagecal_design_init and stagecal_design_add_window. */
typedef struct {
    stagecal_form form;
    double theta[STAGECAL_FORM_MAXP];                     /* current estimate (p values) */
    double info[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP]; /* Fisher information, p×p
                                                             row-major [1/stages²] */
    double sigma;             /* standard deviation of one new window [stages], > 0: the
                                 window's when scatter below has none */
    stagecal_scatter scatter; /* σ of one new window by R (stagecal/scatter.h; n = 0: sigma
                                 at every R). A window at R adds g gᵀ/σ(R)² */
    double dof;               /* residual degrees of freedom of the current fit, > 0 (with a
                                 design below: σ's only) */
    double level;             /* confidence level of the bands, in (0, 1) */
    size_t window_samples;    /* mean logged samples per window behind the fit (0: unknown) */
    double rank_tol;          /* an eigenvalue of the information scaled to unit diagonal below
                                 rank_tol·largest counts as zero (not identified), and stages at
                                 a condition are determined when the gradient's component in
                                 that null space is below sqrt(rank_tol) of its length; 1e-9 */
    /* The fit's design where the model file has one (format 3; borrowed from the model,
     * which must outlive the problem; NULL: none): n_design rows of form.p values and, for a
     * covariance clustered by run (format 5), each row's run (NULL: rows independent). With
     * it the half-width at a condition uses Student t at the dof of that condition's own
     * contrast, as the model file's band does (stagecal_regress_contrast_dof), not dof. */
    const double *design;
    size_t n_design;
    const size_t *design_run;
} stagecal_design_problem;

/* Tunables. */
typedef struct {
    stagecal_design_criterion criterion; /* I */
    size_t tests;             /* K, number of test conditions, 1..STAGECAL_DESIGN_MAXK; 4 */
    double r_lo, r_hi;        /* reflux range, 0 < r_lo < r_hi ≤ INFINITY; NAN: see propose */
    double f_lo, f_hi;        /* F-factor range [Pa^0.5] for load forms, 0 ≤ f_lo ≤ f_hi */
    size_t starts;            /* local searches (multistart); 24 */
    unsigned long seed;       /* seed of the random starts (gsl_rng_mt19937); 1 */
    double xtol_rel;          /* BOBYQA relative step tolerance on the scaled variables; 1e-10 */
    size_t max_eval;          /* objective evaluations per local search; 4000 */
    size_t joint_max;         /* up to this many search variables (K, or 2K with F) all move
                                 together; beyond, coordinate exchange; 12 */
    size_t exchange_starts;   /* starts of the coordinate exchange; 4 */
    size_t exchange_sweeps;   /* most sweeps over the tests per start; 50 */
    size_t exchange_max_eval; /* evaluations per test and local search in the exchange; 200 */
    double exchange_tol;      /* stop sweeping when a sweep improves the criterion by less
                                 than this, relative; 1e-9 */
    double ridge;             /* ridge added to the scaled information while searching when
                                 I₀ is singular; 1e-6 */
    double sample_interval_s; /* one logged sample every this many seconds; 600 */
    size_t settle_samples;    /* samples before a window can start; 0: the run-log analysis
                                 warm-up (stagecal_runlog_analysis_default_params) */
    size_t window_samples;    /* samples of the window itself; 0: the problem's mean, at least
                                 the analysis' shortest window */
    double f_max;             /* largest F-factor a test may use [Pa^0.5]: the column's flooding
                                 F-factor times its margin (column.h flood_f_pa05,
                                 flood_margin); NAN (default): no limit. A default F range is
                                 cut at it; a stated f_hi above it is EINVAL */
} stagecal_design_params;

stagecal_design_params stagecal_design_default_params(void);

/* A condition of interest. */
typedef struct {
    double r;      /* reflux ratio, > 0, INFINITY allowed */
    double f_load; /* F-factor [Pa^0.5]; ignored (pass NAN) unless the form uses the load */
    double weight; /* > 0; weights are normalised to sum 1 */
} stagecal_design_point;

/* One proposed test. */
typedef struct {
    double r;          /* reflux ratio (INFINITY = total reflux) */
    double f_load;     /* F-factor [Pa^0.5], NAN when the form does not use the load */
    double duration_s; /* production time at this condition for one window [s] */
} stagecal_design_test;

/* The band at one condition of interest before and after the proposed tests. */
typedef struct {
    double r, f_load, weight;       /* as given (weight normalised) */
    double stages;                  /* predicted stages at the current θ */
    int determined_before;          /* 0: the current evidence does not determine stages here */
    int determined_after;           /* 0: not even after the tests */
    double se_before, se_after;     /* standard error of the fitted stages [stages], NAN when
                                       not determined */
    double half_before, half_after; /* half-width of the confidence interval at the level:
                                       t(dof_before)·se_before, t(dof_after)·se_after; NAN
                                       when not determined */
    double dof_before, dof_after;   /* their t dof: without a design dof and dof + K (K more
                                       windows, K more residual dof); with one the dof of this
                                       condition's contrast (run-clustered when the design has
                                       runs) for both: the model file's own band before, and
                                       after no credit for the new windows (what they add to a
                                       small-sample dof depends on the runs they come from) */
} stagecal_design_at;

typedef struct {
    stagecal_design_criterion criterion;
    size_t k;                                         /* tests proposed */
    stagecal_design_test tests[STAGECAL_DESIGN_MAXK]; /* sorted by R ascending */
    size_t p;                                         /* parameters */
    size_t rank_before, rank_after;                   /* numerical rank of I₀ and of M */
    double crit_before, crit_after; /* I: weighted mean prediction variance [stages²] (INFINITY
                                       when not determined); D: log det of the information */
    double log_det_ratio;           /* log det M − log det I₀ (INFINITY when I₀ is singular
                                       and M is not) */
    double t_before, t_after;       /* Student t quantiles: dof, dof + K; NAN with a design
                                       (each condition has its own: stagecal_design_at) */
    /* identification (rank_before < p): the single condition that adds the most information
     * in the missing direction, and the rank it would give */
    double identify_r, identify_f; /* NAN when rank_before = p */
    size_t identify_rank;
    /* search */
    double r_lo, r_hi, f_lo, f_hi; /* the bounds used */
    size_t settle_samples, window_samples;
    size_t evaluations; /* objective evaluations, all starts */
    size_t starts;
    int nlopt_result; /* NLopt's return code of the best local search (> 0 success) */
} stagecal_design_result;

/* Zero information for form at theta: sigma > 0, dof > 0, level in (0, 1), no scatter
 * function (σ = sigma at every R; set pb->scatter after it for one). EINVAL. */
int stagecal_design_init(stagecal_design_problem *pb, const stagecal_form *form,
                         const double *theta, double sigma, double dof, double level,
                         stagecal_error *err);
/* Adds weight (> 0) windows at (r, f_load) to pb->info. EINVAL when the form is undefined
 * there. */
int stagecal_design_add_window(stagecal_design_problem *pb, double r, double f_load, double weight,
                               stagecal_error *err);
/* The information one window at (r, f_load) adds: g gᵀ/σ(r)², p×p into out (stride p).
 * EINVAL when the form is undefined there. */
int stagecal_design_window_info(const stagecal_design_problem *pb, double r, double f_load,
                                double *out, stagecal_error *err);

/* The current information of a model file: I₀ = C⁻¹ (through the eigen-decomposition of
 * the correlation matrix of C), σ = sigma_stages and the scatter function σ(R) where the
 * file has one (format 4), dof, level, the mean samples per window (n_samples /
 * n_windows), and the design with its runs where the file has them (borrowed: m must
 * outlive pb). EDATA when C is not positive definite or sigma_stages is 0 (a new window's
 * information is then undefined). */
int stagecal_design_from_model(const stagecal_model *m, stagecal_design_problem *pb,
                               stagecal_error *err);

/* Variance of the fitted stages at (r, f_load) with the current information plus the
 * tests (k may be 0): g(x₀)ᵀ M⁺ g(x₀). *determined is 0 (and *var NAN) when g has a
 * component in the null space of M. EINVAL when the form is undefined at a condition. */
int stagecal_design_variance(const stagecal_design_problem *pb, const stagecal_design_test *tests,
                             size_t k, double r, double f_load, double *var, int *determined,
                             stagecal_error *err);

/* Proposes par->tests conditions inside the bounds and evaluates the band at each of the
 * n_at conditions of interest (at_out: n_at entries, caller's). Default bounds (NAN):
 * R from the smallest to the largest R among the conditions of interest and lo_hint/hi_hint
 * (normally the model's envelope; pass NAN for none); F likewise from f_lo_hint/f_hi_hint.
 * EINVAL for a bad argument (k out of range, bounds out of order, a weight ≤ 0, an F
 * missing for a load form, a form undefined at a bound — e.g. ln R at total reflux);
 * EINTERNAL when NLopt fails; ENOMEM. */
int stagecal_design_propose(const stagecal_design_problem *pb, const stagecal_design_point *at,
                            size_t n_at, const stagecal_design_params *par, double r_lo_hint,
                            double r_hi_hint, double f_lo_hint, double f_hi_hint,
                            stagecal_design_result *res, stagecal_design_at *at_out,
                            stagecal_error *err);

/* The same before/after numbers for tests the caller chooses (k may be 0), e.g. k windows
 * at the most common production condition for comparison: res gets the tests (durations
 * NAN), ranks, criteria (of `criterion`), t quantiles and log det ratio; the search fields
 * stay 0 / NAN. EINVAL for k > STAGECAL_DESIGN_MAXK, n_at = 0, a weight <= 0 or a
 * condition where the form is undefined. */
int stagecal_design_evaluate(const stagecal_design_problem *pb, const stagecal_design_test *tests,
                             size_t k, const stagecal_design_point *at, size_t n_at,
                             stagecal_design_criterion criterion, stagecal_design_result *res,
                             stagecal_design_at *at_out, stagecal_error *err);

/* The numbers of the chart of a proposal (`stagecal probe --chart`; drawn by plot.h's
 * stagecal_plot_design): over STAGECAL_DESIGN_CURVE_N reflux ratios evenly spaced from the
 * smallest to the largest finite R among the search bounds, the proposed tests and the
 * conditions of interest (the upper search bound, when it is total reflux, replaced by the
 * model's largest fitted R), the fitted stages of m at F = at[0].f_load (load forms; the
 * chart is a section at that F) and the band at the level of pb before and after the
 * tests: stages ∓ t·sqrt(variance) (NAN where not determined), t at each R's dof as
 * stagecal_design_at's dof_before and dof_after. Tests and conditions at
 * total reflux have no place on the R axis: they are counted, not drawn. */
#define STAGECAL_DESIGN_CURVE_N 121
#define STAGECAL_DESIGN_CURVE_MAXAT 64
typedef struct {
    size_t n;                          /* grid points (STAGECAL_DESIGN_CURVE_N) */
    double r[STAGECAL_DESIGN_CURVE_N]; /* reflux ratios, ascending */
    double stages[STAGECAL_DESIGN_CURVE_N];
    double now_lo[STAGECAL_DESIGN_CURVE_N], now_hi[STAGECAL_DESIGN_CURVE_N];
    double after_lo[STAGECAL_DESIGN_CURVE_N], after_hi[STAGECAL_DESIGN_CURVE_N];
    size_t n_tests; /* proposed tests at finite R, and their fitted stages */
    double test_r[STAGECAL_DESIGN_MAXK], test_stages[STAGECAL_DESIGN_MAXK];
    size_t n_at; /* conditions of interest at finite R */
    double at_r[STAGECAL_DESIGN_CURVE_MAXAT], at_stages[STAGECAL_DESIGN_CURVE_MAXAT];
    size_t skipped_tests, skipped_at; /* at total reflux: not drawn */
    double f_load;                    /* the F of the section (NAN when the form does not use it) */
    double env_lo, env_hi;            /* the model's fitted envelope in R (NAN: open) */
    double level;                     /* of the bands */
    const char *column_id;            /* borrowed from m */
} stagecal_design_curves;

/* Fills c for the proposal res (stagecal_design_propose or _evaluate on pb, the problem
 * of m) with its n_at conditions of interest at (n_at ≤ STAGECAL_DESIGN_CURVE_MAXAT, ≥ 1).
 * EINVAL for a bad argument; statuses of stagecal_design_variance pass through. */
int stagecal_design_chart_curves(const stagecal_model *m, const stagecal_design_problem *pb,
                                 const stagecal_design_result *res, const stagecal_design_at *at,
                                 size_t n_at, stagecal_design_curves *c, stagecal_error *err);

/* "I-optimal" / "D-optimal"; "i" / "d". */
const char *stagecal_design_criterion_name(stagecal_design_criterion c);
const char *stagecal_design_criterion_key(stagecal_design_criterion c);

#ifdef __cplusplus
}
#endif
#endif

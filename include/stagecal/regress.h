/*
 * stagecal/regress.h — regression of effective stages on reflux ratio R and vapour
 * load F: weighted (non)linear least squares, covariance, confidence and prediction
 * bands, information criteria, bootstrap and robust reweighting.
 *
 * Model: stages_i = m(R_i, F_i; θ) + e_i, e_i independent, var(e_i) = σ²·sigma_i²
 * (sigma_i = 1 when the points carry no sigma). Weights w_i = 1/sigma_i².
 *   - Linear-in-θ forms (constant, linear:…): gsl_multifit_wlinear.
 *   - Other forms: gsl_multifit_nlinear (trust region, Levenberg–Marquardt), analytic
 *     Jacobian from stagecal_form_eval, then Gauss–Newton polish steps (QR on the
 *     weighted Jacobian), as recommended for NIST StRD accuracy.
 *   - Covariance C = s²·(JᵀWJ)⁻¹ with s² = RSS_w/(n − p) (NIST StRD definition); with
 *     params.scale_cov = 0 and known sigma_i, C = (JᵀWJ)⁻¹ (sigma_i taken as absolute).
 *   - Confidence interval θ_i ± t(1−α/2, n−p)·sqrt(C_ii).
 *   - Bands (delta method): var_fit = gᵀCg with g = ∂m/∂θ; prediction adds the variance
 *     of one new observation (σ_obs², see stagecal_regress_band_obs).
 * docs/regress.md gives the formulas with their published sources.
 * All quantities are dimensionless except F (F-factor, Pa^0.5).
 */
#ifndef STAGECAL_REGRESS_H
#define STAGECAL_REGRESS_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/form.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Points to fit. Arrays of n entries, owned by whoever filled them (the reader's
 * arrays are released with stagecal_regress_data_free). */
typedef struct {
    size_t n;       /* number of points, ≥ 1 */
    double *r;      /* reflux ratio, > 0, INFINITY = total reflux */
    double *f_load; /* F-factor, Pa^0.5, ≥ 0; NULL when absent */
    double *stages; /* effective stages including the pot, finite, > 0 */
    double *sigma;  /* standard uncertainty of stages, > 0; NULL = unweighted */
} stagecal_regress_data;

/* Reads a points file (CSV, header `R,stages` with optional `F` and `sigma`, any
 * order; `R` may be `inf`; names may carry a unit in brackets: R[-], stages[-],
 * F[Pa^0.5], sigma[-]). path "-" reads stdin. Fills data with arrays allocated here;
 * free them with stagecal_regress_data_free. Statuses: ENOINPUT (cannot open),
 * EDATA (bad header or cell, "file:line: …"), ENOMEM. */
int stagecal_regress_data_read(const char *path, stagecal_regress_data *data, stagecal_error *err);
/* Frees the reader's arrays and zeroes data; NULL-safe. */
void stagecal_regress_data_free(stagecal_regress_data *data);

typedef enum {
    STAGECAL_ROBUST_NONE = 0,
    STAGECAL_ROBUST_HUBER,   /* Huber's ψ, tuning constant params.huber_k */
    STAGECAL_ROBUST_BISQUARE /* Tukey's bisquare, tuning constant params.bisquare_c */
} stagecal_robust_kind;

typedef enum {
    STAGECAL_BOOT_CASE = 0, /* resample (R, F, stages, sigma) points with replacement */
    STAGECAL_BOOT_RESIDUAL, /* resample standardised residuals onto the fitted values */
    STAGECAL_BOOT_RUN       /* resample whole clusters (params.cluster: a calibration's runs) with
                               replacement, every point of a drawn cluster kept (the cluster
                               bootstrap: Davison & Hinkley 1997, §3.8; Field & Welsh 2007); with
                               fewer than STAGECAL_CR2_MIN_CLUSTERS clusters, or none, it is CASE
                               (result.boot_kind says so) */
} stagecal_boot_kind;

/* Which covariance of the estimate (params.cov_kind). */
typedef enum {
    STAGECAL_COV_MODEL = 0, /* the model's: s²(JᵀWJ)⁻¹, or (JᵀWJ)⁻¹ (params.scale_cov) */
    STAGECAL_COV_HC3, /* the HC3 sandwich (JᵀWJ)⁻¹ JᵀW diag(e_i²/(1 − h_i)²) WJ (JᵀWJ)⁻¹:
                         e_i the residuals, h_i the leverages (MacKinnon & White 1985);
                         valid when the stated sigma_i are right only in proportion
                         within parts of the data, or the form is misspecified */
    STAGECAL_COV_HC2,    /* the same with e_i²/(1 − h_i): unbiased when the errors are equal */
    STAGECAL_COV_HC2_BM, /* HC2 with Student t at the Bell–McCaffrey degrees of freedom of each
                           contrast (Bell & McCaffrey 2002; Imbens & Kolesár 2016): the
                           result keeps the standardised Jacobian (result.design) that the
                           dof of any later contrast needs (stagecal_regress_bm_dof) */
    STAGECAL_COV_CR2_RUN /* the CR2 sandwich clustered by params.cluster (a calibration's runs:
                            windows of one run may share an error, e.g. the batch's own
                            offset) with Student t at the Bell–McCaffrey dof of each contrast
                            (Bell & McCaffrey 2002; Pustejovsky & Tipton 2018, "Small-sample
                            methods for cluster-robust variance estimation and hypothesis
                            testing in fixed effects models", J. Bus. Econ. Stat. 36,
                            672–683), at most G − 1 for G clusters; the result keeps the design
                            and the clusters (result.cluster). With fewer than
                            STAGECAL_CR2_MIN_CLUSTERS clusters the fit falls back to HC2_BM
                            (result.cov_kind says so) */
} stagecal_cov_kind;

/* The fewest clusters (runs with windows) for STAGECAL_COV_CR2_RUN: with 3 the dof of a
 * contrast is at most 2 and the covariance rests on 3 outer products. */
#define STAGECAL_CR2_MIN_CLUSTERS 4

typedef struct {
    double level;  /* confidence level of intervals and bands, (0, 1); 0.95 */
    int scale_cov; /* 1: C = s²(JᵀWJ)⁻¹ (default); 0: C = (JᵀWJ)⁻¹, sigma absolute */
    stagecal_cov_kind cov_kind;  /* STAGECAL_COV_MODEL (default), _HC3 or _HC2; a sandwich falls
                                    back to the model's covariance where a point has leverage
                                    h_i > 0.99 (result.cov_kind says which was used) */
    const double *theta0;        /* start values (p entries) or NULL for automatic starts */
    size_t max_iter;             /* trust-region iterations per start; 500 */
    double xtol;                 /* trust-region step tolerance; 1e-10 */
    double gtol;                 /* trust-region gradient tolerance; 1e-10 */
    double ftol;                 /* trust-region residual tolerance; 1e-15 */
    size_t stall_iter;           /* stop when RSS falls by < 4ε relative this many times; 5 */
    double rank_tol;             /* relative pivot below which JᵀWJ counts as singular (QR
                                    with pivoting on unit-norm columns); 1e-10 */
    int allow_undetermined;      /* 0 (default): a fit whose evidence does not determine a
                                    parameter (stagecal_regress_identify) fails with EDATA;
                                    1: it succeeds with result.undetermined set */
    size_t polish_steps;         /* Gauss–Newton polish steps after the trust region; 8 */
    double polish_tol;           /* stop polishing when |δθ_i| ≤ polish_tol·|θ_i|; 1e-15 */
    stagecal_robust_kind robust; /* robust reweighting; NONE */
    double huber_k;              /* Huber tuning constant; 1.345 (95 % efficiency) */
    double bisquare_c;           /* bisquare tuning constant; 4.685 (95 % efficiency) */
    size_t robust_max_iter;      /* IRLS iterations; 100 */
    double robust_tol; /* IRLS stop: |Δθ_i| ≤ robust_tol·(|θ_i| + robust_tol) for all i; 1e-10 */
    size_t bootstrap;             /* number of bootstrap resamples B; 0 = none */
    unsigned long seed;           /* seed of the bootstrap RNG (gsl_rng_mt19937); 1 */
    stagecal_boot_kind boot_kind; /* case, residual or run resampling; CASE */
    double boot_xtol;             /* step and gradient tolerance of the bootstrap refits; 1e-8 */
    size_t threads;               /* threads refitting resamples beside the calling one (the
                                     intervals do not depend on it); 0 */
    size_t band_points;           /* grid points in R for the band; 25 (0 = no band grid) */
    const size_t *cluster; /* cov_kind CR2_RUN, boot_kind RUN: residual i's cluster (any labels, one
                              per point of the data, e.g. the window's run; for
                              stagecal_fit_composition one per window ev[i]); NULL =
                              none (CR2_RUN then falls back to HC2_BM, RUN to CASE) */
} stagecal_regress_params;

stagecal_regress_params stagecal_regress_default_params(void);

/* One evaluation of the fitted correlation with its uncertainty. */
typedef struct {
    double r;               /* reflux ratio (INFINITY allowed) */
    double f_load;          /* F-factor, Pa^0.5 (ignored by forms without load) */
    double value;           /* fitted stages */
    double se_fit;          /* standard error of the fitted mean, sqrt(gᵀCg) */
    double se_pred;         /* standard error for one new observation, sqrt(se_fit² + σ_obs²) */
    double ci_low, ci_high; /* value ∓ t(dof_fit)·se_fit */
    double pi_low, pi_high; /* value ∓ t(dof_pred)·se_pred */
    double dof_fit;         /* t dof of the confidence band: the dof given, or with a design the
                               Bell–McCaffrey dof of this contrast */
    double dof_pred;        /* t dof of the prediction band: the dof given, or with a design the
                               Welch–Satterthwaite combination of dof_fit and the dof of σ */
} stagecal_band;

/* Band at (r, f_load) from the stored numbers alone: form, θ (p), covariance C (p×p,
 * row-major), residual σ (the σ of one new observation, ≥ 0), degrees of freedom
 * dof > 0 (t quantile; non-integer allowed), level in (0, 1). EINVAL when an argument
 * is outside its domain or the form is undefined at (r, f_load); EDATA when C gives
 * a negative variance there (not positive semi-definite). */
int stagecal_regress_band(const stagecal_form *form, const double *theta, const double *cov,
                          double sigma, double dof, double level, double r, double f_load,
                          stagecal_band *out, stagecal_error *err);
/* As stagecal_regress_band, for a new observation whose own relative uncertainty is
 * obs_sigma (weighted fits: var_new = σ²·obs_sigma²; pass 1 for unweighted fits). */
int stagecal_regress_band_obs(const stagecal_form *form, const double *theta, const double *cov,
                              double sigma, double obs_sigma, double dof, double level, double r,
                              double f_load, stagecal_band *out, stagecal_error *err);

/* As stagecal_regress_band_obs, with the fit's standardised Jacobian x (n_x rows of form.p
 * values, row-major, in the parameters' units; NULL or n_x = 0: none): the confidence band
 * then uses Student t at the Bell–McCaffrey dof of the contrast gᵀθ (stagecal_regress_bm_dof)
 * and the prediction band t at the Welch–Satterthwaite dof of se_fit² (that dof) + (σ·obs)²
 * (dof, the dof of σ). EDATA when x is rank deficient.
 * The rows are taken as independent: that is HC2's dof. Given the design of a CR2_RUN fit
 * (clustered covariance) it overstates the dof and narrows the band: pass the clusters
 * (stagecal_regress_band_clustered), or band a fit with stagecal_regress_result_band and a
 * model file with stagecal_model_eval, which take the covariance and its dof together. */
int stagecal_regress_band_design(const stagecal_form *form, const double *theta, const double *cov,
                                 double sigma, double obs_sigma, double dof, const double *x,
                                 size_t n_x, double level, double r, double f_load,
                                 stagecal_band *out, stagecal_error *err);
/* As stagecal_regress_band_design with the design's rows' clusters (n_x entries; NULL: none):
 * the confidence band's dof is then stagecal_regress_contrast_dof's clustered one. */
int stagecal_regress_band_clustered(const stagecal_form *form, const double *theta,
                                    const double *cov, double sigma, double obs_sigma, double dof,
                                    const double *x, const size_t *cluster, size_t n_x,
                                    double level, double r, double f_load, stagecal_band *out,
                                    stagecal_error *err);

/* The Bell–McCaffrey degrees of freedom of the contrast cᵀθ of a fit whose standardised
 * Jacobian (weighted residuals' rows, in the parameters' units) is x, n rows of p values
 * (Imbens & Kolesár 2016, "Robust standard errors in small samples: some practical
 * advice", Rev. Econ. Stat. 98(4), 701–712, the K_BM of their §III): with A = (XᵀX)⁻¹,
 * h_i = x_iᵀAx_i, a_i = x_iᵀAc, d_i = a_i/√(1 − h_i) and M = I − XAXᵀ,
 * K = (Σ λ)²/Σ λ² over the eigenvalues λ of D M D (D = diag d), i.e. tr(DMD)²/‖DMD‖²_F,
 * computed as (cᵀAc)² / [Σ d_i⁴(1 − 2h_i) + tr(A S A S)], S = Σ d_i² x_i x_iᵀ, in O(n p²).
 * Between 1 and n − p. EINVAL (sizes, NULL), EDATA (XᵀX singular, a leverage ≥ 1, c with
 * no variance). Allocates nothing. */
int stagecal_regress_bm_dof(const double *x, size_t n, size_t p, const double *c, double *dof,
                            stagecal_error *err);

/* The dof of the contrast cᵀθ of a fit with design x (as stagecal_regress_bm_dof): with
 * cluster NULL stagecal_regress_bm_dof; otherwise (row i in cluster[i], any labels, at
 * least 2 clusters) the Bell–McCaffrey dof of the CR2 sandwich clustered so (Bell &
 * McCaffrey 2002; Pustejovsky & Tipton 2018, its Satterthwaite dof), in [1, G − 1].
 * EINVAL, EDATA as stagecal_regress_bm_dof; ENOMEM (clustered: allocates O(n·G)). */
int stagecal_regress_contrast_dof(const double *x, size_t n, size_t p, const size_t *cluster,
                                  const double *c, double *dof, stagecal_error *err);

/* Why the solver stopped. */
typedef enum {
    STAGECAL_STOP_LINEAR = 0, /* direct linear least squares solution */
    STAGECAL_STOP_XTOL,       /* trust region: small step */
    STAGECAL_STOP_GTOL,       /* trust region: small gradient */
    STAGECAL_STOP_FTOL,       /* trust region: small change of residual */
    STAGECAL_STOP_NOPROGRESS  /* trust region could not improve further (at the optimum
                                 to rounding; accepted after the Gauss–Newton polish) */
} stagecal_stop;

/* Text of a stop reason, e.g. "small step (xtol)". */
const char *stagecal_regress_stop_text(stagecal_stop stop);

/* Name of a covariance kind: "model", "hc3" or "hc2" (the --json value), and its label in
 * words: "s^2 times the inverse information", "the HC3 sandwich", "the HC2 sandwich". */
const char *stagecal_regress_cov_name(stagecal_cov_kind kind);
const char *stagecal_regress_cov_label(stagecal_cov_kind kind);

typedef struct {
    stagecal_form form;
    size_t n, p; /* points used, parameters */
    double dof;  /* n − p */
    double theta[STAGECAL_FORM_MAXP];
    double se[STAGECAL_FORM_MAXP];
    double ci_low[STAGECAL_FORM_MAXP], ci_high[STAGECAL_FORM_MAXP];
    double cov[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP]; /* row-major p×p */
    double tquant;                                       /* t(1 − (1 − level)/2, dof) */
    double param_dof[STAGECAL_FORM_MAXP]; /* t dof of each parameter's interval: dof, or its
                                             Bell–McCaffrey dof (cov_kind HC2_BM) */
    double *design;  /* n×p standardised Jacobian at θ̂ in the parameters' units (cov_kind
                        HC2_BM or CR2_RUN; NULL otherwise), result owns */
    size_t *cluster; /* n clusters 0..G−1 of the design's rows (cov_kind CR2_RUN; NULL
                        otherwise), result owns */
    double level;
    int weighted;               /* 1 when the points carried sigma */
    int cov_scaled;             /* 1 when C includes s² (see params.scale_cov) */
    stagecal_cov_kind cov_kind; /* the covariance in cov (params.cov_kind, or MODEL where
                                   HC3 was asked for but a leverage reached 0.99) */
    double rss;                 /* Σ w_i·r_i² (w_i = 1 unweighted; includes robust weights) */
    double sigma;               /* residual σ = sqrt(rss/dof) (a ratio to sigma_i when weighted) */
    double sigma_obs;           /* σ of one typical new observation in stages: σ (unweighted),
                                   σ·rms(sigma_i) (weighted, scaled), rms(sigma_i) (unscaled) */
    double sigma_dof;           /* degrees of freedom behind sigma_obs: dof, except for the
                                   composition-space fit (windows with stage counts − p; 0 when
                                   sigma_obs could not be estimated) */
    double r2;                  /* 1 − RSS_w/TSS_w, TSS about the weighted mean */
    double loglik;              /* Gaussian log-likelihood at the optimum */
    size_t k_ic;                /* parameters counted by AICc/BIC (p, + 1 when σ is estimated) */
    int ic_defined;             /* 1 when n > k_ic + 1 so that AICc is defined */
    double aicc;                /* AIC + 2k(k+1)/(n−k−1); 0 when !ic_defined */
    double bic;                 /* −2 lnL + k ln n */
    unsigned undetermined;      /* bit j set: parameter j is not determined by the evidence
                                   (stagecal_regress_identify; only with allow_undetermined) */
    double condition;           /* condition number of the information matrix in relative units */
    stagecal_stop stop;
    size_t iterations; /* trust-region iterations of the best start */
    size_t starts;     /* starts tried */
    size_t polish;     /* accepted Gauss–Newton polish steps */
    /* envelope of the data */
    double r_min, r_max;  /* finite R range */
    int has_total_reflux; /* some points at R = inf */
    double f_min, f_max;  /* F range (0 when no load) */
    /* robust reweighting (params.robust) */
    stagecal_robust_kind robust;
    double robust_scale; /* MAD scale of the standardised residuals at the end */
    size_t robust_iter;
    double *weights; /* n robust weights in [0, 1] (NULL unless robust); result owns */
    /* bootstrap (params.bootstrap > 0) */
    size_t boot_b;  /* resamples requested */
    size_t boot_ok; /* resamples whose refit succeeded (intervals use these) */
    unsigned long boot_seed;
    stagecal_boot_kind boot_kind; /* the resampling used (RUN with too few clusters: CASE) */
    size_t boot_clusters;         /* RUN: the clusters resampled (0 otherwise) */
    double boot_low[STAGECAL_FORM_MAXP], boot_high[STAGECAL_FORM_MAXP]; /* percentile CI */
    double boot_se[STAGECAL_FORM_MAXP]; /* standard deviation of the bootstrap θ */
    /* band grid over the envelope (params.band_points), result owns */
    size_t nband;
    stagecal_band *band;
} stagecal_regress_result;

/* The band of a fit at (r, f_load) from the result alone, so that the covariance and the
 * dof are of one kind: res->cov, σ of one new observation res->sigma_obs·obs_sigma (pass 1
 * for a typical one) with the dof of σ (res->dof, or res->sigma_dof where smaller, as the
 * model file stores it), and with a design (HC2_BM, CR2_RUN) the contrast's Bell–McCaffrey
 * dof, clustered by res->cluster for CR2_RUN (stagecal_regress_band_clustered); without one
 * t at res->dof. The band grid (res->band) is this at each grid point. Errors of
 * stagecal_regress_band_clustered. */
int stagecal_regress_result_band(const stagecal_regress_result *res, double r, double f_load,
                                 double obs_sigma, stagecal_band *out, stagecal_error *err);

/* ---- the nonlinear least-squares driver (regress_nlin.c) ------------------------------ */

/* A least-squares problem, min Σ f_i(θ)², kept apart from the solver (the idea of GSL's
 * gsl_multifit_nlinear_fdf): the residuals carry their own weights, f_i = (model_i −
 * data_i)/σ_i. The stage-space fit supplies one from a form and points, the
 * composition-space fit (stagecal_fit_composition) one that steps stages. */
typedef struct {
    /* The n residuals at theta (p values) into f. Returns 0, or non-zero when θ lies
     * outside the model's domain: the solver then rejects the step. */
    int (*f)(const double *theta, void *params, double *f);
    /* The n×p Jacobian ∂f_i/∂θ_k at theta into J (row-major); returns 0, or non-zero
     * outside the domain. NULL: central finite differences of f (GSL's). */
    int (*df)(const double *theta, void *params, double *J);
    size_t n, p;  /* residuals, parameters: 1 ≤ p ≤ STAGECAL_FORM_MAXP, p ≤ n */
    void *params; /* handed to f and df */
} stagecal_regress_fdf;

/* Trust-region workspace (GSL multifit_nlinear, Levenberg–Marquardt steps), reused
 * across starts. */
typedef struct stagecal_regress_nlin stagecal_regress_nlin;

/* NULL when out of memory or when the sizes break stagecal_regress_fdf's bounds. */
stagecal_regress_nlin *stagecal_regress_nlin_alloc(size_t n, size_t p);
void stagecal_regress_nlin_free(stagecal_regress_nlin *w); /* NULL ok */

/* Starts a solve of fdf (same n, p as the workspace; borrowed until the next init) from
 * theta0 with params' max_iter, xtol, gtol, ftol, stall_iter, polish_steps and
 * polish_tol (NULL: defaults). A start that already passes the xtol test on its
 * Gauss–Newton step is accepted as it is (stop XTOL, no iteration): started at the optimum,
 * every trust-region step is rejected by rounding. EINVAL (sizes), ENOCONV (the residuals
 * or Jacobian are undefined at theta0), ENOMEM. */
int stagecal_regress_nlin_init(stagecal_regress_nlin *w, const stagecal_regress_fdf *fdf,
                               const double *theta0, const stagecal_regress_params *params,
                               stagecal_error *err);
/* One trust-region iteration. ENOCONV with GSL's text when the step fails. */
int stagecal_regress_nlin_iterate(stagecal_regress_nlin *w, stagecal_error *err);
/* After an iteration: 1 when converged: GSL's xtol/gtol/ftol tests, or RSS has not fallen by more
 * than 4ε relative for stall_iter consecutive calls (ill-conditioned problems whose last steps are
 * rounding noise); the reason is then stagecal_regress_nlin_stop. 0: iterate on. */
int stagecal_regress_nlin_test(stagecal_regress_nlin *w);
/* init's start, then iterate and test until converged. ENOCONV after max_iter
 * iterations or a failed step. */
int stagecal_regress_nlin_driver(stagecal_regress_nlin *w, stagecal_error *err);
/* Gauss–Newton steps from theta (QR on the Jacobian), accepted while the RSS *rss does
 * not grow, at most polish_steps, stopping when |δθ_i| ≤ polish_tol·|θ_i|: the last digits
 * a trust region leaves (NIST StRD Misra1a from LRE ≈ 8.5 to ≥ 11). Uses the fdf of the
 * last init; theta and *rss are updated. Returns the number of accepted steps. */
size_t stagecal_regress_nlin_polish(stagecal_regress_nlin *w, double *theta, double *rss);
const double *stagecal_regress_nlin_position(const stagecal_regress_nlin *w); /* p values */
double stagecal_regress_nlin_rss(const stagecal_regress_nlin *w);             /* Σ f_i² */
size_t stagecal_regress_nlin_niter(const stagecal_regress_nlin *w);
stagecal_stop stagecal_regress_nlin_stop(const stagecal_regress_nlin *w);

/* The statistics of a least-squares estimate theta of fdf, computed the same way for
 * every fit: rss, dof = n − p, σ = sqrt(rss/dof), covariance C = s²·(JᵀJ)⁻¹ (s² = σ² when
 * scale, else 1) from QR with column pivoting on the column-equilibrated Jacobian (rank
 * test params.rank_tol, so it does not depend on the parameters' units), se, the t
 * quantile at params.level with dof degrees of freedom and the intervals. result->form
 * must be set (its names go into messages); fills n, p, dof, theta, rss, sigma,
 * sigma_dof, cov, se, tquant, ci_low, ci_high, level, cov_scaled, cov_kind, param_dof
 * and design (which must be NULL or owned by result on entry: it is replaced). EDATA when the
 * residuals are undefined at theta or a parameter is not identifiable; ENOMEM;
 * EINTERNAL. */
int stagecal_regress_covar(const stagecal_regress_fdf *fdf, const double *theta, int scale,
                           const stagecal_regress_params *params, stagecal_regress_result *result,
                           stagecal_error *err);

/* The envelope of the data into result: finite R range, has_total_reflux, F range
 * (f_load NULL: 0, 0). */
/* ---- identifiability (regress_ident.c) ----------------------------------------------- */

/* Which parameters the evidence determines, from the fitted covariance C: in relative
 * units S = D⁻¹CD⁻¹ with D_j = max(|θ_j|, 1), GSL's SVD of S gives the condition number
 * of the information matrix (largest/smallest singular value of S) and parameter j is
 * not determined when its confidence interval's half-width t·se_j exceeds
 * STAGECAL_IDENT_MAX_REL·D_j (the evidence leaves it anywhere over a range a hundred
 * times its own size) or se_j is not finite. Sets res->undetermined and res->condition;
 * returns the number of undetermined parameters. */
#define STAGECAL_IDENT_MAX_REL 100.0
int stagecal_regress_identify(stagecal_regress_result *res);
/* "parameter 'b' of form 'saturating' is not determined by the evidence (95 % interval
 * ±2.5e+09, 3.8e+08 times its size; condition number 1e+21); <what would determine it>"
 * for the first undetermined parameter. */
void stagecal_regress_ident_text(const stagecal_regress_result *res, char *buf, size_t len);

void stagecal_regress_envelope(const double *r, const double *f_load, size_t n,
                               stagecal_regress_result *result);

/* Fits form to data. result is filled on success; release with
 * stagecal_regress_result_free. Statuses: EINVAL (bad params, form undefined at a
 * point, NULL), EDATA (too few points, non-finite values, singular design,
 * degenerate data), ENOCONV (no start converged), ENOMEM, EINTERNAL (GSL failure,
 * its text in the message). */
int stagecal_regress_fit(const stagecal_regress_data *data, const stagecal_form *form,
                         const stagecal_regress_params *params, stagecal_regress_result *result,
                         stagecal_error *err);
/* Frees what the result owns (weights, band, design) and zeroes those fields; NULL-safe. */
void stagecal_regress_result_free(stagecal_regress_result *result);

/* One row of a model-selection table. */
typedef struct {
    stagecal_form form;
    int status;                        /* STAGECAL_OK or why the form could not be fitted */
    char message[STAGECAL_ERROR_TEXT]; /* the error text when status != OK */
    size_t p;
    double rss, sigma, aicc, bic, r2;
    double delta_aicc;    /* aicc − smallest aicc among fitted forms */
    double akaike_weight; /* exp(−Δ/2) / Σ exp(−Δ/2) */
} stagecal_regress_rank_row;

/* Fits each form name in forms (NULL: the default candidate list, with load forms
 * only when data has F) and ranks them by AICc (ascending; failed forms last).
 * rows must hold nforms entries (STAGECAL_REGRESS_MAXRANK for the default list);
 * *nrows gets how many were written. Bootstrap, robust and band options of params
 * are ignored here. EDATA when no form could be fitted or AICc is undefined (too
 * few points). */
#define STAGECAL_REGRESS_MAXRANK 16
int stagecal_regress_rank(const stagecal_regress_data *data, const char *const *forms,
                          size_t nforms, const stagecal_regress_params *params,
                          stagecal_regress_rank_row *rows, size_t *nrows, stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif

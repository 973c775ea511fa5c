/*
 * stagecal/scatter.h — how far one new window's stage count scatters about the fitted
 * curve, as a function of the reflux ratio (the σ of a prediction band).
 *
 * A window's count is read through the equilibrium curve, and how much analyser noise
 * moves it depends strongly on R: near total reflux a window of the same analysers
 * scatters several times as far as at moderate R. One σ for every R (the windows' root
 * mean square about the curve) then gives prediction bands that are too wide at moderate R
 * and too narrow near total reflux (docs/calibration.md, "Prediction bands"). The scatter
 * function takes its shape from the windows' stated standard errors and its size from
 * their residuals about the curve: ln se of the windows by least squares on a polynomial
 * in λ = R/(R + 1) of degree 0, 1 or 2, chosen by the Bayesian information criterion
 * (Schwarz 1978), and
 *
 *     σ(R) = exp(c0 + c1·λ + c2·λ²),  λ = R/(R + 1) clamped to the fitted range,
 *
 * with c0 carrying ln s, s² = Σ r_i²/se(λ_i)² / (m − p) over the windows' residuals r_i
 * about the curve and the smooth se(λ_i): a multiplicative variance model Var(count −
 * curve) = s²·se(λ)² (Carroll & Ruppert 1988, "Transformation and Weighting in
 * Regression", ch. 3: variance functions estimated from the data — from memory). Scaled by
 * the smooth rather than by each window's own se, s absorbs the spread of single windows'
 * se about the shape (a new window's is unknown), and one window with a wild se moves the
 * shape only through its logarithm. Degree 0 is one σ for every R: the residuals' root
 * mean square on m − p dof. σ(R)² over the windows' mean stated variance is kept (var_ratio):
 * what of σ(R)² their stated errors do not account for is the column's own run-to-run variation,
 * the part a batch's stage count carries (stagecal_scatter_process_factor; docs/calibration.md,
 * "What --run-scatter draws").
 */
#ifndef STAGECAL_SCATTER_H
#define STAGECAL_SCATTER_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/evidence.h"
#include "stagecal/form.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

#define STAGECAL_SCATTER_MAXC 3 /* coefficients of the polynomial at most (a quadratic) */

/* A scatter function; n = 0: none (one σ for every R). */
typedef struct {
    size_t n;                        /* coefficients, 0 to STAGECAL_SCATTER_MAXC */
    double c[STAGECAL_SCATTER_MAXC]; /* ln σ = Σ c[k]·λ^k */
    double lv_lo, lv_hi;             /* the fitted range of λ, 0 ≤ lv_lo ≤ lv_hi ≤ 1 */
    double cov[STAGECAL_SCATTER_MAXC * STAGECAL_SCATTER_MAXC]; /* covariance of c (n×n,
                                         row-major, stride n): the polynomial's least-squares
                                         covariance plus Var(ln s) = 1/(2(m − p)) on c[0] */
    double var_ratio; /* s²/k, s² = Σ r_i²/se(λ_i)² / (m − p) and k = Σ se_i²/se(λ_i)² / m:
                         σ(R)² over the windows' mean stated variance at R (k·se(λ)², the
                         shape being a fit of ln se, below their mean se² by k). 1: the stated
                         errors account for all of the scatter; above 1: the rest is the
                         column's own run-to-run variation. 0: not known (a file written before
                         it); see stagecal_scatter_process_factor */
} stagecal_scatter;

/* The scatter function of the n windows of evidence about the curve form(θ): the windows
 * with a stage count and a positive finite standard error take part (m of them); the
 * polynomial's degree is at most 2 with 8 or more such windows at 3 or more distinct λ, at
 * most 1 with 4 or more at 2 or more, else 0, chosen by BIC. out->n = 0 when m ≤ p or m < 3 (too
 * few to say). EINVAL on NULL arguments; EDATA when the least squares fail. */
int stagecal_scatter_fit(const stagecal_evidence *ev, size_t n, const stagecal_form *form,
                         const double *theta, stagecal_scatter *out, stagecal_error *err);

/* The same with the shape taken from se (n entries: window i's standard error of its stage
 * count, as stagecal_scatter_window_se gives it) instead of ev[i].se_stages; se NULL: the
 * windows' own (stagecal_scatter_fit). A window takes part when it has a count and se[i] is
 * positive and finite. */
int stagecal_scatter_fit_se(const stagecal_evidence *ev, size_t n, const double *se,
                            const stagecal_form *form, const double *theta, stagecal_scatter *out,
                            stagecal_error *err);

/* The windows' standard errors with the straight line's detrend swapped for a quadratic's:
 * each window's own u_xd, u_xb (with whatever the builder added to them) times the ratio of
 * the quadratic's error of the mean (stagecal_evidence_mean_quad, ρ pooled per analyser over
 * the windows by lag pairs: each window's own first, then all again at the pooled one) to the
 * straight line's (stagecal_evidence_mean_rho, stagecal_evidence_pool_rho) on its carried
 * samples (ev[i].s_t, s_xd, s_xb, m), propagated to the count by stagecal_evidence_stages on a
 * copy of the window (its u_r, conditions and Murphree efficiency as they are). Why: a batch
 * pot curves through a window, the straight line leaves that curvature in the residuals,
 * where it reads as noise by a different factor at each R, and the shape of σ(R) taken from
 * those errors is then too flat. A study option, not calibrate's (docs/calibration.md,
 * *Prediction bands*: it brings the drifting synthetic regimes to 0.93 at total reflux, and
 * the demo scenario's lowest reflux ratios down from 0.92 to 0.86). u_xd, u_xb (n entries
 * each, NULL: 0): the stated per-reading uncertainty of each window's analysers, a floor under
 * the estimated noise as in the builder. se[i] = ev[i].se_stages where a window carries fewer
 * than 3 samples or its count cannot be redone. EINVAL on NULL arguments, ENOMEM. */
int stagecal_scatter_window_se(const stagecal_vle *vle, double murphree,
                               const stagecal_evidence *ev, size_t n, const double *u_xd,
                               const double *u_xb, double *se, stagecal_error *err);

/* σ at reflux ratio r (≥ 0, INFINITY = total reflux), λ clamped to the fitted range; NAN
 * when s->n is 0. */
double stagecal_scatter_sd(const stagecal_scatter *s, double r);

/* The degrees of freedom of σ(r)² (a χ² approximation of the estimate's sampling error):
 * 1/(2·Var(ln σ(r))), Var from cov at λ(r) clamped; NAN when s->n is 0 or the variance is
 * not positive. */
double stagecal_scatter_dof(const stagecal_scatter *s, double r);

/* The run-to-run (process) part of the scatter, for one draw of σ's scale: σ(R)² holds the
 * column's own batch-to-batch variation τ(R)² and the windows' measurement error, the latter
 * their mean stated variance at R, σ(R)²/v (v = var_ratio), so
 *
 *     τ(R) = σ(R)·√max(0, 1 − 1/v)  at the estimate, and, for a draw of σ(R)² scaled by
 *     w² = ν/χ²_ν (the band's t draws), τ(R)_draw = σ(R)·√max(0, w² − 1/v),
 *
 * the measurement part held at its stated size. Returns √max(0, w2 − 1/v) (τ of the draw in
 * units of σ(R)); NAN when s is NULL, has no function (n = 0) or no var_ratio (≤ 0 or not
 * finite), or w2 is not positive and finite. The floor at 0 in every draw makes the draws a
 * generalised pivotal quantity of a variance component (Weerahandi, S. 1993, "Generalized
 * confidence intervals", J. Am. Stat. Assoc. 88, 899–905; Hannig, J., Iyer, H. & Patterson, P.
 * 2006, "Fiducial generalized confidence intervals", J. Am. Stat. Assoc. 101, 254–269 — from
 * memory) with the measurement variance taken as known: its spread carries the uncertainty of
 * σ(R)² (ν dof), including the chance that the process part is nil. */
double stagecal_scatter_process_factor(const stagecal_scatter *s, double w2);

/* 0 when s is a valid scatter function (n ≤ 3, finite coefficients, a range inside
 * [0, 1], σ finite and positive over the range, a finite symmetric covariance with a
 * non-negative diagonal), else EINVAL with what is wrong in err. */
int stagecal_scatter_check(const stagecal_scatter *s, stagecal_error *err);

#ifdef __cplusplus
}
#endif

#endif

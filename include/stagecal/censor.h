/*
 * stagecal/censor.h — a fit that takes censored readings as what they are: an
 * errors-in-variables likelihood with the true compositions latent and a Tobit-type
 * term for every reading beyond an analyser's limit (Tobin 1958, "Estimation of
 * relationships for limited dependent variables", Econometrica 26(1):24-36).
 *
 * Model (window i at reflux R_i, load F_i): the true distillate composition of the
 * window is a latent ζ_i = logit xD_i, constant over the window; the correlation gives
 * N_i = stages(R_i, F_i; θ); stepping N_i stages down from xD_i gives the true pot
 * composition x̂B_i(θ, ζ_i). Every reading y of the window, with its standard
 * uncertainty u (stagecal_runlog_u_xd/_u_xb of the column), contributes
 *     a value:            log φ((y − x)/u) − log u
 *     above its limit L:  log Φ((x − L)/u)      (P(reading ≥ L))
 *     below its limit L:  log Φ((L − x)/u)      (P(reading ≤ L))
 * with x = xD_i for distillate readings and x̂B_i for pot readings. ζ_i is profiled out
 * window by window (GSL Brent minimiser after a scan), which leaves the profile
 * log-likelihood ℓ(θ). The model needs steady windows (the latent composition does not
 * drift); the windows' readings are taken as independent.
 *
 * Every form (p parameters): θ̂ maximises ℓ — for `constant` a scan of the stage range
 * and GSL's Brent minimiser, for the others GSL's Nelder–Mead simplex (nmsimplex2) from a
 * start the caller gives (the stage-space estimate). The interval of a scalar ψ — one
 * parameter, or the stage count at a condition — is the profile-likelihood interval
 * {ψ: 2(ℓ_max − max_{θ: ψ(θ)=ψ} ℓ(θ)) ≤ χ²₁(level)} (Wilks 1938; Venzon & Moolgavkar
 * 1988, "A method for computing profile-likelihood-based confidence intervals", Applied
 * Statistics 37(1):87-94): the other parameters are maximised out by the same simplex
 * (for the stage count at (R, F), the first parameter the form is linear in is solved for
 * from the count). The ends are found by walking out from ψ̂ and GSL's Brent root finder
 * on the crossing step. An end is NOT DETERMINED when the deviance does not rise to the
 * cut before the stage count at some window leaves the stage range, or when beyond the
 * crossing (on the side of more stages) a window's distillate readings do not exclude a
 * pure distillate (their log-likelihood at xD = 1 within χ²₁(0.95)/2 of its value at the
 * latent xD; e.g. all readings at an analyser's limit: more stages with a purer
 * distillate fit the data as well; a likelihood-ratio interval is not to be
 * trusted at that boundary). With one end not determined, the other is the one-sided
 * bound at the same level, {ψ: 2(ℓ_max − ℓ_p(ψ)) ≤ χ²₁(2·level − 1)}: "at least N stages".
 * With both ends determined, the fit also gives the inverse of the observed information
 * (central second differences of ℓ at θ̂) as the covariance a model file carries.
 */
#ifndef STAGECAL_CENSOR_H
#define STAGECAL_CENSOR_H

#include <stddef.h>

#include "stagecal/column.h"
#include "stagecal/error.h"
#include "stagecal/evidence.h"
#include "stagecal/form.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct {
    double value;     /* the estimate (ψ at θ̂) */
    double low, high; /* interval ends at level; NAN for an end the evidence does not bound */
    int low_bounded;  /* 1: low is a number */
    int high_bounded; /* 1: high is a number */
    double level;     /* confidence level of low/high (two-sided, or one-sided when an end is
                         not bounded) */
} stagecal_censored_interval;

typedef struct {
    size_t p;                                            /* parameters of the form */
    double theta[STAGECAL_FORM_MAXP];                    /* maximum-likelihood θ̂ */
    stagecal_censored_interval par[STAGECAL_FORM_MAXP];  /* profile interval of each */
    int one_sided;                                       /* some parameter's end is open */
    int has_cov;                                         /* cov below is set (both ends of
                                                            every parameter determined) */
    double cov[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP]; /* inverse observed information */
    double loglik;                                       /* ℓ(θ̂) */
    double level;                                        /* level asked for */
    double stages_lo, stages_hi;                         /* the stage range searched */
    size_t n_windows;                                    /* windows used */
    size_t n_readings;                                   /* readings used (both analysers) */
    size_t n_censored;                                   /* of them censored */
} stagecal_censored_fit;

/* Fits form to the windows ev[0..nev−1], each with m ≥ 1 carried samples (s_xd, s_xb,
 * s_cens; e->cond, when set, gives the window's conditions). col gives the equilibrium
 * model and the readings' uncertainties; a stage count outside [stages_lo, stages_hi]
 * (1 ≤ stages_lo < stages_hi, e.g. 1 to 200) at any window is outside the model.
 * theta0 (form->p values) starts the search of forms other than `constant` (NULL: a
 * start from the windows' readings is not attempted, EINVAL for such forms). EINVAL (bad
 * arguments, a reading without uncertainty), EDATA (no window with samples, or ℓ is not
 * finite at the start), ENOMEM. */
int stagecal_fit_censored(const stagecal_column *col, double murphree, const stagecal_evidence *ev,
                          size_t nev, const stagecal_form *form, const double *theta0, double level,
                          double stages_lo, double stages_hi, stagecal_censored_fit *fit,
                          stagecal_error *err);

/* The profile-likelihood interval of the stage count at (r, f_load) after
 * stagecal_fit_censored on the same windows (fit), at level. EINVAL when the form is not
 * defined there. */
int stagecal_censored_stages_at(const stagecal_column *col, double murphree,
                                const stagecal_evidence *ev, size_t nev, const stagecal_form *form,
                                const stagecal_censored_fit *fit, double r, double f_load,
                                double level, stagecal_censored_interval *out, stagecal_error *err);

/* The profile log-likelihood ℓ(θ) of the same model (for studies and tests). */
int stagecal_censored_loglik(const stagecal_column *col, double murphree,
                             const stagecal_evidence *ev, size_t nev, const stagecal_form *form,
                             const double *theta, double *loglik, stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif

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
 * One-parameter forms (`constant`: stages = a). The interval is the profile-likelihood
 * interval {θ: 2(ℓ_max − ℓ(θ)) ≤ χ²₁(level)} (Wilks 1938). When ℓ does not fall by that
 * much on one side before the search range ends, or only where a window's latent xD is
 * within 3 standard uncertainties of its analyser of pure (all readings at an analyser's
 * limit: more stages with a purer distillate fit the data as well), that end is not
 * determined and the other
 * end is the one-sided bound at the same level, {θ: 2(ℓ_max − ℓ(θ)) ≤ χ²₁(2·level − 1)}:
 * "at least N stages".
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
    double theta;      /* maximum-likelihood value (the search range's end when ℓ rises to it) */
    double low, high;  /* interval ends at level; NAN for an end the evidence does not bound */
    int low_bounded;   /* 1: low is a number */
    int high_bounded;  /* 1: high is a number */
    double loglik;     /* ℓ at theta */
    double level;      /* confidence level of low/high (two-sided, or one-sided when an end
                          is not bounded) */
    size_t n_windows;  /* windows used */
    size_t n_readings; /* readings used (both analysers) */
    size_t n_censored; /* of them censored */
} stagecal_censored_fit;

/* Fits a one-parameter form to the windows ev[0..nev−1], each with m ≥ 1 carried samples
 * (s_xd, s_xb, s_cens). col gives the equilibrium model and the readings' uncertainties;
 * theta_lo < theta_hi is the search range of the parameter (for `constant`, stages: e.g.
 * 1 to 200). EINVAL (bad arguments, a form with p ≠ 1, a reading without uncertainty),
 * EDATA (no window with samples), ENOMEM. */
int stagecal_fit_censored(const stagecal_column *col, double murphree, const stagecal_evidence *ev,
                          size_t nev, const stagecal_form *form, double level, double theta_lo,
                          double theta_hi, stagecal_censored_fit *fit, stagecal_error *err);

/* The profile log-likelihood ℓ(θ) of the same model (for studies and tests). */
int stagecal_censored_loglik(const stagecal_column *col, double murphree,
                             const stagecal_evidence *ev, size_t nev, const stagecal_form *form,
                             double theta, double *loglik, stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif

/*
 * stagecal/softsensor.h — compositions from temperatures (a soft sensor).
 *
 * Many batch columns log the pot and top temperatures every minute and analyse the
 * compositions only in a few lab samples a batch. At a known pressure the pot liquid boils at
 * its bubble point, T_pot = T_bubble(xB, P_pot), and the top vapour (composition xD with a
 * total condenser) condenses at its dew point, T_top = T_dew(xD, P_top) = T_bubble(x*(xD)).
 * Inverting these with the column's equilibrium model gives the composition of every row that
 * has a temperature and no analyser reading; its standard uncertainty is the temperature
 * sensor's, divided by the slope of the curve: u(x) = u(T)/|dT/dx| (first order; the Guide to
 * the Expression of Uncertainty in Measurement, JCGM 100:2008, §5.1). Where the slope is tiny
 * (near a pure end the composition's interval reaches the physical bound; near an azeotrope
 * dT/dx → 0) the temperature does not resolve the composition: the value is censored, a
 * one-sided reading (runlog.h), never invented.
 *
 * The same curves check logged temperatures against the bubble (dew) points of the logged
 * compositions: a per-run weighted mean offset with its standard error (a generalised
 * likelihood ratio test for a constant sensor bias under Gaussian errors) flags a wrong
 * pressure, a miscalibrated sensor or a wrong equilibrium model.
 *
 * Root finding: GSL's Brent solver (Brent 1973, "Algorithms for Minimization without
 * Derivatives", Prentice-Hall, ch. 4) on x over the monotone branch of the bubble curve from
 * x = 0 to 1 or to the first azeotrope; slopes by GSL's adaptive central differences.
 * Methods, assumptions and measured numbers: docs/methods.md "Compositions from temperatures".
 */
#ifndef STAGECAL_SOFTSENSOR_H
#define STAGECAL_SOFTSENSOR_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/runlog.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct {
    double z;     /* a reading within z·u(T) of the unresolved end (pure light for the top, pure
                     heavy for the pot, or an azeotrope) is censored; the censored limit is the
                     composition at the temperature moved z·u(T) away from that end: a one-sided
                     95 % bound (STAGECAL_RUNLOG_BOUND_Z) */
    double max_u; /* a resolved composition whose u(x) exceeds this is censored the same way
                     (the curve too flat to resolve it; 0.05) */
    double alpha; /* two-sided false-alarm rate of each run's consistency test of a sensor
                     (0.001: |z| > 3.29) */
} stagecal_softsensor_params;

stagecal_softsensor_params stagecal_softsensor_default_params(void);

/* Forward curves at vle's pressure (vle needs temperatures: IDEAL, activity, TABLE with T).
 * Bubble point T(x) of liquid x in [0, x_max] and dT/dx; dew point T(y) of vapour y (the
 * liquid x*(y) in equilibrium, then its bubble point) and dT/dy. EINVAL (no temperatures, x
 * outside the domain), ENOCONV. dtdx may be NULL. */
int stagecal_softsensor_bubble_t(const stagecal_vle *vle, double x, double *t_k, double *dtdx,
                                 stagecal_error *err);
int stagecal_softsensor_dew_t(const stagecal_vle *vle, double y, double *t_k, double *dtdy,
                              stagecal_error *err);

/* Inverse curves: the liquid x whose bubble point is t_k, with dT/dx there, and the vapour y
 * whose dew point is t_k, with dT/dy. Searched on the branch from x = 0 to the end of the
 * curve (1, or the first azeotrope). EDATA when t_k lies outside the branch's temperatures
 * (message says which end), EINVAL (no temperatures), ENOCONV. dtdx may be NULL. */
int stagecal_softsensor_bubble_x(const stagecal_vle *vle, double t_k, double *x, double *dtdx,
                                 stagecal_error *err);
int stagecal_softsensor_dew_y(const stagecal_vle *vle, double t_k, double *y, double *dtdy,
                              stagecal_error *err);

/* What a temperature says about a composition. */
typedef enum {
    STAGECAL_SOFT_RESOLVED = 0, /* a value with u = u(T)/|slope| */
    STAGECAL_SOFT_CENSORED,     /* one-sided: the top "at least", the pot "at most" */
    STAGECAL_SOFT_OUTSIDE       /* the temperature lies beyond the curve's far end by more than
                                   z·u(T) (hotter than the heavy component boils for the top,
                                   colder than the light one for the pot): nothing inferred */
} stagecal_soft_status;

/* The composition a temperature t_k with standard uncertainty u_t_k (0: not stated) gives:
 * top = 1: the distillate from the top (dew point), top = 0: the pot liquid (bubble point).
 * out->value/censor/u as a run-log reading (censor ABOVE for the top, BELOW for the pot when
 * censored; u = 0 then). *status receives a stagecal_soft_status. params may be NULL.
 * EINVAL, ENOCONV. */
int stagecal_softsensor_infer(const stagecal_vle *vle, double t_k, double u_t_k, int top,
                              const stagecal_softsensor_params *params, stagecal_reading *out,
                              int *status, stagecal_error *err);

/* The consistency of one temperature sensor with the logged compositions over one run: the
 * weighted mean of r_j = T_j − T_model(x_j) over the rows with both, weights 1/σ_j² with
 * σ_j² = u(T)² + (dT/dx·u(x_j))². */
typedef struct {
    size_t n;        /* rows with both a temperature and an analyser reading */
    double offset_k; /* weighted mean offset [K] (NaN when n = 0) */
    double se_k;     /* its standard error [K] (NaN when no uncertainty is stated) */
    double z;        /* offset/se */
    double chi2;     /* Σ r_j²/σ_j² (n degrees of freedom without a bias) */
    double sw, swr;  /* accumulators: Σ 1/σ_j², Σ r_j/σ_j² */
} stagecal_softsensor_check;

/* Accumulates one row into c (start from a zeroed struct): temperature t_k
 * with u_t_k, analyser reading x with u_x, the model's temperature t_model and its slope.
 * stagecal_softsensor_check_end turns the sums into offset, se and z. */
void stagecal_softsensor_check_add(stagecal_softsensor_check *c, double t_k, double u_t_k,
                                   double t_model, double slope, double u_x);
void stagecal_softsensor_check_end(stagecal_softsensor_check *c);

/* ---- fusion of inferred and lab readings over a run: a Kalman smoother ------------------- *
 * State x(t) (one composition), a random walk: x_k = x_(k−1) + w_k, w_k ~ N(0, q·(t_k − t_(k−1)));
 * readings z_k = x_k + v_k, v_k ~ N(0, u_k²) — the inferred ones with u(T)/|dT/dx|, the lab
 * samples with the analyser's u. The Kalman filter (Kalman 1960, "A new approach to linear
 * filtering and prediction problems", J. Basic Eng. 82:35-45) runs forward, the
 * Rauch–Tung–Striebel smoother (Rauch, Tung & Striebel 1965, "Maximum likelihood estimates of
 * linear dynamic systems", AIAA J. 3:1445-1450) backward; q is chosen by maximum likelihood of
 * the innovations (the prediction-error decomposition, Schweppe 1965, IEEE Trans. Inf. Theory
 * 11:61-70, citation from memory) over log10 q in [−14, 0] (a grid of 57, then GSL's Brent
 * minimiser). Gives every row the fused composition and its standard uncertainty; rows
 * without a reading are interpolated with the uncertainty that says so. */
typedef struct {
    double q;      /* process noise [1/s] (mole fraction² per s): the ML value, or the one given */
    double loglik; /* log-likelihood of the innovations at q */
    size_t n_used; /* readings used */
} stagecal_softsensor_smooth_info;

/* Smooths z[0..n) with standard uncertainties u[0..n) at times t_s[0..n) (increasing); a
 * reading with z or u not finite, or u ≤ 0, is no reading. q > 0 fixes the process noise;
 * q ≤ 0 estimates it. xs, us receive the smoothed value and its standard uncertainty at every
 * t (NaN before the first and after the last reading is not possible: the walk extends them,
 * with the uncertainty growing). info may be NULL. EDATA with fewer than 2 readings, ENOMEM. */
int stagecal_softsensor_smooth(const double *t_s, const double *z, const double *u, size_t n,
                               double q, double *xs, double *us,
                               stagecal_softsensor_smooth_info *info, stagecal_error *err);

/* The two-sided critical |z| of the check for ntests tests at family-wise rate alpha. */
double stagecal_softsensor_check_zcrit(double alpha, size_t ntests);

#ifdef __cplusplus
}
#endif
#endif

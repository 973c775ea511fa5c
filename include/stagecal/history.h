/*
 * stagecal/history.h — one fit over all the window evidence of a column: the
 * correlation stages(R, F) times a straight-line degradation term per segment, the
 * segments cut by repack/maintenance events, with run-clustered standard errors.
 *
 * Model (docs/hetp-trend.md §9). Window i of run c(i), in segment s(i), at reflux R_i
 * and F-factor F_i, τ_i months after the event that opened its segment (the first
 * window's time for the first segment when no event precedes it):
 *
 *     stages_i = h(R_i, F_i; θ) · (m_s − k_s·τ_i) + e_i
 *
 * h is a correlation form (form.h), θ shared by all segments; m_s is the segment's
 * level relative to the first fitted segment (m = 1 there: the form's scale carries
 * it) and k_s its relative loss per month. A multiplicative loss is what fouling of a
 * packed bed gives when the effective height shrinks; the loss in stages per month at
 * a stated condition (R, F) is h(R, F; θ)·k_s.
 *
 * Estimation: weighted nonlinear least squares (GSL multifit_nlinear, trust region)
 * with working weights 1/(se_i² + τ̂²), τ̂² the method-of-moments excess variance of
 * the windows beyond their stated errors (DerSimonian & Laird 1986, Controlled Clinical
 * Trials 7, 177–188, in its regression form). Inference does not rest on those weights
 * being right: the covariance is the cluster-robust sandwich over runs (Liang & Zeger
 * 1986, Biometrika 73, 13–22) with the bias-reduced "CR2" correction of Bell &
 * McCaffrey (2002, Survey Methodology 28, 169–181), and intervals use Student t with
 * G − 1 degrees of freedom, G the runs that inform the quantity (the current segment's
 * runs for its level, loss and forecast; Cameron & Miller 2015, J. Human Resources 50,
 * 317–372). The crossing date's band is the Fieller set of the segment's line at the
 * stated condition (stagecal_trend_forecast_crossing).
 *
 * Input is a plain array of window evidence (time, run, R, F, stages, se), as the
 * calibration chain produces it. Times in s since 1970 UTC; rates per mean Gregorian
 * month (STAGECAL_TREND_MONTH_S).
 */
#ifndef STAGECAL_HISTORY_H
#define STAGECAL_HISTORY_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/evidence.h"
#include "stagecal/form.h"
#include "stagecal/trend.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One window of evidence. */
typedef struct {
    double t_s;    /* mid time of the window [s since 1970 UTC] */
    long run;      /* run id: windows of one production run share it (clusters) */
    double r;      /* reflux ratio, > 0, INFINITY = total reflux */
    double f_load; /* F-factor [Pa^0.5]; NAN when unknown (then the form must not use it) */
    double stages; /* effective stages, the pot included, > 0 */
    double se;     /* standard error of stages, > 0 */
} stagecal_history_point;

/* The windows of an evidence set (evidence.h, the one definition of a window) that have
 * a stage count, as history points: time = the window's mid time, run = its run index.
 * out holds set->n entries; returns the number written. */
size_t stagecal_history_points_from_evidence(const stagecal_evidence_set *set,
                                             stagecal_history_point *out);

/* Longest "not determined" reason. */
#define STAGECAL_HISTORY_REASON 160

/* A quantity with its interval, or the reason it is not determined. */
typedef struct {
    int determined; /* 1: value, se and the interval are numbers; 0: see reason */
    double value;   /* estimate (a number even when not determined, for diagnostics) */
    double se;      /* cluster-robust standard error */
    double dof;     /* t degrees of freedom */
    double low, high;
    char reason[STAGECAL_HISTORY_REASON]; /* why not determined, "" when determined */
} stagecal_history_estimate;

typedef struct {
    double level;    /* confidence level, in (0, 1); 0.95 */
    double r_ref;    /* stated reflux ratio for the answers (INFINITY allowed) */
    double f_ref;    /* stated F-factor (NAN when the form does not use it) */
    double now_s;    /* "now" for the current stage count; NAN: the last window's time */
    double required; /* stages the product needs, for the crossing date; NAN: none */
    size_t min_runs; /* runs a segment needs for its own level and loss; 3 (≥ 2) */
} stagecal_history_params;

stagecal_history_params stagecal_history_default_params(void);

/* One segment of the history. */
typedef struct {
    double origin_s;                 /* τ = 0: the opening event's time, or the first window's */
    long event;                      /* index of the opening event, −1 when none */
    size_t n_points;                 /* windows in the segment */
    size_t n_runs;                   /* distinct runs */
    int fitted;                      /* 1 when the segment had enough runs to enter the fit */
    double first_s, last_s;          /* time of its first and last window */
    stagecal_history_estimate level; /* m_s (1 for the reference segment, se 0) */
    stagecal_history_estimate rel_loss; /* k_s/m_s: fraction of the segment's starting level
                                           lost per month */
    stagecal_history_estimate loss;     /* h(R_ref, F_ref)·k_s, stages per month */
    stagecal_history_estimate start;    /* stages at (R_ref, F_ref) at τ = 0 */
} stagecal_history_segment;

typedef struct {
    stagecal_form form;
    size_t n;                           /* windows used */
    size_t n_runs;                      /* runs used */
    size_t n_segments;                  /* segments (fitted or not) */
    stagecal_history_segment *segments; /* owned */
    size_t *segment_of;                 /* n: segment of each input point (owned) */
    size_t n_beta;                      /* parameters: θ, then (m_s, k_s) per fitted segment */
    double *beta;                       /* owned */
    double *cov;                        /* n_beta², cluster-robust (CR2), owned */
    double *resid;                 /* n: stages_i − fitted_i (owned; NAN for windows left out) */
    double tau2;                   /* excess variance in the working weights [stages²] */
    double chi2_dof;               /* Σ w·r²/(n − n_beta) with the final weights */
    size_t ref_segment;            /* the segment with m = 1 */
    size_t current;                /* the last segment (the one "now" lies in) */
    double now_s;                  /* the time "now" */
    stagecal_history_estimate now; /* stages at (R_ref, F_ref) now, current segment */
    int has_crossing;              /* 1 when required was given and the current segment is fitted */
    stagecal_trend_forecast crossing; /* date the stages at (R_ref, F_ref) fall below required */
    double level;
    struct cr2_work *work; /* what later contrasts need (owned, opaque; src/cr2.h) */
} stagecal_history_fit;

/* Fits the history. form: the correlation; pts: n windows in any order; events (may
 * be NULL when n_events = 0): only repack/maintenance events of column_id split.
 * Segments with fewer than par->min_runs runs (or all their windows at one time)
 * do not enter the fit: their estimates say "not determined" and why. EINVAL for bad
 * arguments or points; EDATA when no segment can be fitted or the design is
 * singular; ENOCONV when the solver fails; ENOMEM. fit must be released with
 * stagecal_history_free in every case. */
int stagecal_history_fit_points(const stagecal_form *form, const stagecal_history_point *pts,
                                size_t n, const stagecal_trend_event *events, size_t n_events,
                                const char *column_id, const stagecal_history_params *par,
                                stagecal_history_fit *fit, stagecal_error *err);

/* Stages at (r, f) at time t_s (segment of t_s) with the cluster-robust interval.
 * EINVAL when the form is undefined there. */
int stagecal_history_stages_at(const stagecal_history_fit *fit, double r, double f, double t_s,
                               stagecal_history_estimate *out, stagecal_error *err);

/* Before and after the event that opened `segment` (≥ 1), at (r, f), from the one fit:
 * every difference is a contrast of the fit's parameters with its own cluster-robust
 * se and Bell–McCaffrey dof (the two sides share θ, so they are not independent). */
typedef struct {
    size_t segment;                      /* the segment the event opened */
    double t_s;                          /* the event's time */
    stagecal_history_estimate before;    /* stages just before: the previous segment at t_s */
    stagecal_history_estimate after;     /* stages just after: the segment's start (τ = 0) */
    stagecal_history_estimate change;    /* after − before [stages] */
    stagecal_history_estimate old_new;   /* the previous segment's start: the old bed when new */
    stagecal_history_estimate log_ratio; /* ln(column stages of the old bed when new / column
                                            stages after) = ln(HETP after / HETP old new) */
    stagecal_history_estimate after_col; /* column stages after (stages − column_offset) */
} stagecal_history_repack;

/* column_offset: stages − column stages (1 with a total condenser, 2 with a partial
 * one). EINVAL when segment is 0 or out of range or the form is undefined at (r, f);
 * a side that was not fitted gives "not determined" estimates. */
int stagecal_history_repack_at(const stagecal_history_fit *fit, size_t segment, double r, double f,
                               double column_offset, stagecal_history_repack *out,
                               stagecal_error *err);

void stagecal_history_free(stagecal_history_fit *fit);

/* Marks e not determined when its dof < 2, its interval is not finite, or the interval
 * is wider than the physical range [lo_phys, hi_phys] (either may be ±INFINITY). The
 * reason names what failed. Returns e->determined. */
int stagecal_history_check(stagecal_history_estimate *e, double lo_phys, double hi_phys,
                           const char *what);

#ifdef __cplusplus
}
#endif
#endif

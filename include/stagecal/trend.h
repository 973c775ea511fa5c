/*
 * stagecal/trend.h — a column's history of fits: stages (or HETP) at a reference
 * condition against fit date, a weighted straight-line trend with its interval, an
 * EWMA control chart, a forecast of the date the stages fall below a requirement,
 * and repack/maintenance events that split the history into segments.
 *
 * Everything takes plain numbers: per fit a time (s since 1970-01-01T00:00:00Z), an
 * estimate and its standard error. Methods and sources (docs/hetp-trend.md):
 *   - Trend: weighted least squares with weights 1/se² (gsl_fit_wlinear), covariance
 *     scaled by χ²/(n − 2) and Student-t intervals with n − 2 degrees of freedom
 *     (weights known up to a common factor; Draper & Smith 1998, Applied Regression
 *     Analysis, 3rd ed., ch. 9). This is what statsmodels' WLS reports.
 *   - Control chart: EWMA of standardised deviations from a baseline with asymptotic
 *     limits ±L·sqrt(λ/(2 − λ)) (Lucas & Saccucci 1990, Technometrics 32, 1–12). The
 *     default design λ = 0.2, L = 2.962 has an in-control ARL of 500 points. ARLs
 *     are computed with the Markov-chain approximation of Brook & Evans 1972
 *     (Biometrika 59, 539–549).
 *   - Forecast: the crossing time of the fitted line with the requirement, and its
 *     band from inverting the line's confidence band (Fieller's theorem, Fieller 1954,
 *     JRSS B 16, 175–185; the "inverse prediction" of Draper & Smith §3.2). This is a
 *     fiducial-style confidence set for the crossing date of the mean line.
 *
 * Times are in s; slopes in stages per s (STAGECAL_TREND_MONTH_S converts to months).
 */
#ifndef STAGECAL_TREND_H
#define STAGECAL_TREND_H

#include <stddef.h>

#include "stagecal/convention.h"
#include "stagecal/error.h"
#include "stagecal/model.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One mean Gregorian month, 365.2425 d / 12, in s. */
#define STAGECAL_TREND_MONTH_S 2629746.0

/* One fit of the history. */
typedef struct {
    double t_s;   /* time of the fit [s since 1970 UTC] */
    double value; /* estimate at the reference condition (stages, or HETP in m) */
    double se;    /* its standard error, > 0 */
} stagecal_trend_point;

/* The point of one model file: time = its fitted_utc; value = stages (pot included) at
 * (r, f_load), or HETP [m] = height_m / column stages when want_hetp (needs
 * m->has_hetp); se = the standard error of the mean prediction (delta method for
 * HETP). Errors of stagecal_model_eval pass through; EDATA for a bad time stamp, a
 * zero se, or HETP asked of a model without a packed height. */
int stagecal_trend_point_from_model(const stagecal_model *m, double r, double f_load, int want_hetp,
                                    stagecal_trend_point *out, stagecal_error *err);

/* Why a stage count's interval [low, high] from a fit with `dof` degrees of freedom must
 * not be shown as numbers, or NULL when it may: fewer than 2 dof, a non-finite end, or
 * an interval reaching beyond the physical range (stages ≥ 1: the pot alone) — e.g.
 * [-6116333.6, 6116349.8] from a one-dof fit. The text is static. */
const char *stagecal_trend_undetermined(double dof, double low, double high);

/* ---- fits that share run logs ---------------------------------------------------------- */

/* What the selection decided for one model file. */
typedef struct {
    long by;      /* −1: kept (a point of the trend); otherwise the index of the accepted,
                     newer fit that supersedes this one */
    size_t input; /* when by ≥ 0: index into this model's inputs[] of the shared run log,
                     the first of its run logs (in its own order) that fit `by` also read */
} stagecal_trend_selection;

/* Sets aside fits that re-use run logs of a newer fit, so that no log is counted twice
 * in a trend (two fits on the same logs have correlated errors; docs/hetp-trend.md).
 *
 * Rule: the n fits are considered in order of time of fit (fitted_utc), newest first.
 * A fit is accepted when none of its run logs is a run log of an already accepted fit;
 * otherwise it is superseded by the newest accepted fit that shares a log. A run log is
 * an input with rows > 0, identified by its SHA-256 (the path is not compared); inputs
 * with rows = 0 (the column file) never count. A fit without run logs is always kept.
 * Only accepted fits block older ones: a superseded fit's other logs stay free.
 *
 * Ties in time of fit (fitted_utc has whole seconds) are broken by file name: names[i]
 * is the file of models[i] (directories and a ".json" ending are ignored). A name of
 * the writer's form STEM-N (N decimal digits, up to 9) counts as copy N of STEM and a
 * name without such a suffix as copy 1, so STEM, STEM-2, …, STEM-10 rank as the model
 * writer numbers files fitted within one second (stagecal_model_write): the higher copy
 * is the newer. Different stems, or equal (stem, N), compare by bytes (strcmp), the
 * greater counted newer. names may be NULL: ties then rank by index, the higher newer.
 *
 * out holds n entries; *n_kept (may be NULL) counts the kept fits, ≥ 1 when n ≥ 1.
 * n = 0 is no work. EDATA when a fitted_utc is not a timestamp (message names the
 * fit); ENOMEM. */
int stagecal_trend_select(const stagecal_model *models, const char *const *names, size_t n,
                          stagecal_trend_selection *out, size_t *n_kept, stagecal_error *err);

/* A weighted straight line value(t) = a + b·(t − t0_s). */
typedef struct {
    size_t n;             /* points used, ≥ 3 */
    double t0_s;          /* reference time of the line: the weighted mean time [s] */
    double a;             /* value at t0_s */
    double b;             /* slope [value per s] */
    double c00, c01, c11; /* covariance of (a, b), scaled by χ²/(n − 2) */
    double chisq;         /* Σ w·residual² */
    double dof;           /* n − 2 */
    double scale;         /* sqrt(χ²/(n − 2)) (Birge ratio): about 1 when the stated se
                             explain the scatter, > 1 with between-fit variation, well
                             below 1 when the stated se are too large */
    double level;         /* confidence level, in (0, 1) */
    double t_crit;        /* t quantile at (1 + level)/2 with n − 2 dof */
    double b_low, b_high; /* interval of the slope [value per s] */
    double p_value;       /* two-sided test of b = 0 */
} stagecal_trend_fit;

/* Fits the line to n ≥ 3 points (any order; distinct times needed). EINVAL for n < 3,
 * a non-finite value, se ≤ 0, all times equal, level outside (0, 1); EINTERNAL when
 * GSL fails. */
int stagecal_trend_fit_line(const stagecal_trend_point *pts, size_t n, double level,
                            stagecal_trend_fit *out, stagecal_error *err);

/* The line at t_s with the standard error of the mean and the confidence band
 * value ± t_crit·se (any pointer but f may be NULL). */
void stagecal_trend_line_eval(const stagecal_trend_fit *f, double t_s, double *value, double *se,
                              double *low, double *high);

/* How a forecast ended. */
typedef enum {
    STAGECAL_FORECAST_OK = 0,       /* a declining line crosses; the band is finite */
    STAGECAL_FORECAST_UNBOUNDED,    /* the slope is not significant at the level: the band is
                                       open-ended (high_s = INFINITY, low_s may be -INFINITY) */
    STAGECAL_FORECAST_NOT_DECLINING /* slope ≥ 0: no crossing is forecast (all three NAN) */
} stagecal_forecast_status;

typedef struct {
    stagecal_forecast_status status;
    double required;  /* the requirement [value units] */
    double t_cross_s; /* a + b·(t − t0) = required [s]; may lie in the past */
    double low_s;     /* band: {t : |a + b(t − t0) − required| ≤ t_crit·se(t)} */
    double high_s;
    int past; /* 1 when the estimate lies before the last point used (already below) */
} stagecal_trend_forecast;

/* "ok" / "unbounded" / "not-declining". */
const char *stagecal_forecast_status_name(stagecal_forecast_status s);

/* Forecast of the crossing of f with `required`. last_t_s is the time of the latest
 * point (sets `past`). EINVAL for a non-finite requirement. */
int stagecal_trend_forecast_crossing(const stagecal_trend_fit *f, double required, double last_t_s,
                                     stagecal_trend_forecast *out, stagecal_error *err);

/* EWMA chart design. */
typedef struct {
    double lambda; /* smoothing weight, in (0, 1]; default 0.2 */
    double L;      /* limit width in σ of the asymptotic EWMA, > 0; default 2.962 */
} stagecal_trend_ewma_params;

/* λ = 0.2, L = 2.962: in-control ARL 500 (Lucas & Saccucci 1990). */
stagecal_trend_ewma_params stagecal_trend_ewma_default_params(void);

/* One point of the chart. */
typedef struct {
    double z;     /* (value − baseline)/sqrt(se² + baseline_se²) */
    double ewma;  /* E_i = λ z_i + (1 − λ) E_(i−1), E_0 = 0 */
    double limit; /* L·sqrt(λ/(2 − λ)) (asymptotic limit, the same for every point) */
    int alarm;    /* −1: below the lower limit (loss); +1: above the upper (gain); 0 */
} stagecal_trend_ewma_point;

/* Runs the chart over n points in time order against baseline (known value, or an
 * estimate with standard error baseline_se ≥ 0). out holds n entries. *n_alarms (may be
 * NULL) counts points with alarm ≠ 0. EINVAL for bad parameters or se ≤ 0. */
int stagecal_trend_ewma(const stagecal_trend_point *pts, size_t n, double baseline,
                        double baseline_se, const stagecal_trend_ewma_params *par,
                        stagecal_trend_ewma_point *out, size_t *n_alarms, stagecal_error *err);

/* Average run length of the two-sided EWMA chart (start E_0 = 0, asymptotic limits)
 * for a mean shift of `shift` standard deviations, by the Markov chain of Brook & Evans
 * (1972) with m_states transient states (odd, ≥ 11; 201 gives 3–4 significant digits).
 * EINVAL for bad arguments; ENOMEM; EINTERNAL when the linear solve fails. */
int stagecal_trend_ewma_arl(const stagecal_trend_ewma_params *par, double shift, size_t m_states,
                            double *arl, stagecal_error *err);

/* P(run length ≤ k) for the same chain: the chance that a shift of `shift` σ raises an
 * alarm within k points. */
int stagecal_trend_ewma_rl_cdf(const stagecal_trend_ewma_params *par, double shift, size_t m_states,
                               size_t k, double *prob, stagecal_error *err);

/* ---- events ------------------------------------------------------------------------ */

typedef enum {
    STAGECAL_EVENT_REPACK = 0,  /* bed repacked or trays replaced: opens a segment */
    STAGECAL_EVENT_MAINTENANCE, /* cleaning, distributor work, …: opens a segment */
    STAGECAL_EVENT_NOTE         /* remark only: shown, does not split */
} stagecal_event_kind;

#define STAGECAL_EVENT_NOTE_MAX 160

typedef struct {
    double t_s;                        /* when [s since 1970 UTC] */
    char column_id[STAGECAL_NAME_MAX]; /* the column it applies to */
    stagecal_event_kind kind;
    char note[STAGECAL_EVENT_NOTE_MAX]; /* free text, may be empty */
    long line;                          /* line in the events file */
} stagecal_trend_event;

/* "repack" / "maintenance" / "note"; parse returns -1 for anything else. */
const char *stagecal_event_kind_name(stagecal_event_kind k);
int stagecal_event_kind_parse(const char *text, stagecal_event_kind *k);

/* Reads an events file (docs/events-file.md): CSV with the header
 * time,column,kind[,note]; time is ISO 8601 ("2026-03-14" or "2026-03-14T06:00Z").
 * Lines starting with '#' and blank lines are skipped. On success *events is a
 * malloc'd array of *n events sorted by time (caller frees with free()); *events is
 * NULL when n = 0. ENOINPUT when the file cannot be read; EDATA with "path:line: …"
 * for a bad header, field or value; ENOMEM. */
int stagecal_trend_events_read(const char *path, stagecal_trend_event **events, size_t *n,
                               stagecal_error *err);

/* ---- a whole history ---------------------------------------------------------------- */

typedef struct {
    double level;                    /* confidence level, default 0.95 */
    double required;                 /* requirement for the forecast; NAN: no forecast */
    stagecal_trend_ewma_params ewma; /* chart design */
    size_t baseline_n;               /* points at the start of each segment that set the
                                        baseline (weighted mean), default 3, ≥ 1 */
    double baseline;                 /* known baseline for the current segment; NAN: estimate */
} stagecal_trend_params;

stagecal_trend_params stagecal_trend_default_params(void);

typedef struct {
    size_t first, n; /* points [first, first + n) of the (time-sorted) history */
    double start_s;  /* time of the event that opened it, or of its first point */
    long event;      /* index of the opening event in the events array, −1 if none */
    int has_fit;     /* 1 when n ≥ 3 and the fit succeeded */
    stagecal_trend_fit fit;
    double baseline;    /* the chart's baseline in this segment */
    double baseline_se; /* its standard error (0 when given) */
    size_t n_alarms;    /* chart points beyond the limits in this segment */
    long first_alarm;   /* index (into the history) of the first alarm, −1 if none */
} stagecal_trend_segment;

typedef struct {
    size_t n;                         /* points */
    stagecal_trend_point *points;     /* n, sorted by time (owned) */
    size_t *order;                    /* n: points[i] was input point order[i] (owned) */
    size_t *segment_of;               /* n: segment index of each point (owned) */
    stagecal_trend_ewma_point *chart; /* n: chart, restarted in every segment (owned) */
    stagecal_trend_segment *segments; /* owned */
    size_t n_segments;
    int has_forecast;                 /* 1 when required was given and the current segment
                                         has a fit */
    stagecal_trend_forecast forecast; /* from the current (last) segment */
    double arl0;                      /* in-control ARL of the chart design */
} stagecal_trend_history;

/* Sorts the points by time, splits them at the repack/maintenance events of
 * column_id (events may be NULL when n_events = 0; events of other columns and notes
 * are ignored), fits a line per segment with ≥ 3 points, runs the chart per segment
 * and forecasts from the last segment. h is filled (free it with
 * stagecal_trend_history_free, also after a failure). EINVAL for n = 0 or bad points
 * or parameters; ENOMEM; EINTERNAL. */
int stagecal_trend_analyse(const stagecal_trend_point *pts, size_t n,
                           const stagecal_trend_event *events, size_t n_events,
                           const char *column_id, const stagecal_trend_params *par,
                           stagecal_trend_history *h, stagecal_error *err);

/* Releases what stagecal_trend_analyse allocated and zeroes h. NULL is a no-op. */
void stagecal_trend_history_free(stagecal_trend_history *h);

#ifdef __cplusplus
}
#endif
#endif

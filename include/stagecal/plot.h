/*
 * stagecal/plot.h — charts for people: PNG and PDF through PLplot's cairo driver, SVG
 * through PLplot's own svg driver (its labels are <text> elements: selectable, searchable,
 * readable by other tools; cairo's SVG stores glyphs as outlines).
 *
 * One generic renderer draws a stagecal_plot_chart: axes that carry a quantity and its
 * unit, and a list of series given as plain arrays (lines, markers, shaded bands). It
 * knows nothing about other modules' internals; the builders below turn domain data
 * (a stage profile, fitted points with bands, a trend, batch curves) into charts.
 *
 * Style (our own): white page, dark grey axes and text, series colours from the
 * Okabe–Ito colour-blind-safe palette (Okabe & Ito, "Color Universal Design", 2008),
 * ordered blue, vermillion, bluish green, orange, reddish purple, sky blue, black,
 * yellow; every series also carries its own line style or marker shape so that the
 * chart reads in greyscale. Bands are filled with a light tint of their colour.
 *
 * PLplot keeps global state: the renderer opens its own stream (plmkstrm) and ends it
 * (plend1), restoring the caller's current stream, but it is not thread-safe — render
 * from one thread at a time. The library stays silent: PLplot's abort messages are
 * routed to a silent handler (plsabort) and every input is validated before PLplot
 * sees it (the handler is process-wide and stays installed: PLplot cannot report the
 * previous one, so a program that also uses PLplot directly and wants its own handler
 * must set it again after rendering). PLplot's plexit (fatal: out of memory inside PLplot) still
 * prints to stderr and ends the process; stagecal cannot intercept that (see docs/plots.md).
 *
 * Units: the charts draw numbers as given; the builders convert SI to the display
 * units named on their axes (time in h or as dates, compositions in mol/mol).
 */
#ifndef STAGECAL_PLOT_H
#define STAGECAL_PLOT_H

#include <stddef.h>

#include "stagecal/batch.h"
#include "stagecal/calibrate.h"
#include "stagecal/chart.h"
#include "stagecal/design.h"
#include "stagecal/error.h"
#include "stagecal/evidence.h"
#include "stagecal/model.h"
#include "stagecal/runlog.h"
#include "stagecal/stages.h"
#include "stagecal/trend.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

#define STAGECAL_PLOT_LEGEND_HIDDEN 2

/* Output formats, chosen by file extension (.png, .svg, .pdf; case-insensitive). */
typedef enum { STAGECAL_PLOT_PNG = 0, STAGECAL_PLOT_SVG, STAGECAL_PLOT_PDF } stagecal_plot_format;

/* What a series draws. */
typedef enum {
    STAGECAL_PLOT_LINE = 0, /* polyline through (x, y); non-finite points break the line */
    STAGECAL_PLOT_POINTS,   /* a marker at each (x, y); non-finite points are skipped */
    STAGECAL_PLOT_BAND,     /* shaded region between y (lower) and y_hi (upper) over x; line 1
                               draws it in a lighter tint (an extrapolated part) */
    STAGECAL_PLOT_ERRBAR,   /* a vertical bar from y to y_hi at each x (non-finite: none) */
    STAGECAL_PLOT_SPAN,     /* vertical stripes over the whole height of the plot box, from
                               x[k] to y[k] (both in x units), in the colour's tint (line 1:
                               the lighter tint); they do not widen the y range */
    STAGECAL_PLOT_TEXT      /* the label written at x[0], just below the top of the plot box
                               (y unused), in the colour; never in the legend */
} stagecal_plot_kind;

#define STAGECAL_PLOT_NCOLOURS 8 /* palette size (Okabe–Ito) */
#define STAGECAL_PLOT_NLINES 4   /* distinct line styles: solid, dashed, dotted, dash-dot */
#define STAGECAL_PLOT_NMARKERS 8 /* distinct marker shapes */
#define STAGECAL_PLOT_MAXPANELS 8

/* One series. Arrays are borrowed (not copied) and must outlive the render call. */
typedef struct {
    stagecal_plot_kind kind;
    const char *label;  /* legend text; NULL or "" keeps the series out of the legend */
    const double *x;    /* n abscissae (axis units) */
    const double *y;    /* n ordinates; for BAND the lower edge */
    const double *y_hi; /* BAND: n upper edges; NULL otherwise */
    size_t n;           /* number of points, ≥ 1 */
    int colour;         /* palette index 0..STAGECAL_PLOT_NCOLOURS−1 */
    int line;           /* LINE: line style 0..STAGECAL_PLOT_NLINES−1 */
    int marker;         /* POINTS: marker shape 0..STAGECAL_PLOT_NMARKERS−1 */
    double width;       /* LINE: line width in PLplot units (1 = thin), 0 → 2;
                           POINTS: marker size relative to the default, 0 → 1 */
} stagecal_plot_series;

/* One panel of a chart of stacked panels that share the x axis (the run chart). */
typedef struct {
    const char *y_label;                /* quantity and unit */
    double y_min, y_max;                /* NAN: from the data, padded 4 % */
    double weight;                      /* relative height (0 → 1) */
    const stagecal_plot_series *series; /* n_series series of this panel */
    size_t n_series;
    double x_min, x_max; /* an inset's own x range (NAN: from its data); stacked panels
                            share the chart's */
    double inset[4];     /* x0, x1, y0, y1 as fractions of the first panel's plot box:
                            x1 > x0 draws this panel as an inset there (white background,
                            its y_label as caption), on top of the first panel; 0: stacked */
} stagecal_plot_panel;

/* A chart: title, axes and series. Fields marked "caller" are borrowed. */
typedef struct {
    const char *title;   /* caller: heading above the plot area, may be NULL */
    const char *x_label; /* caller: quantity and unit, e.g. "reflux ratio R [-]" */
    const char *y_label; /* caller: quantity and unit, e.g. "stages incl. pot [-]" */
    double x_min, x_max; /* axis range; NAN (either end) → from the finite data, padded 4 % */
    double y_min, y_max;
    int x_time;     /* 1: x is seconds since 1970-01-01 UTC, the axis shows dates */
    int legend;     /* 1: draw a legend of the labelled series; STAGECAL_PLOT_LEGEND_HIDDEN:
                       place it (the plot boxes leave its room, exactly as with 1) but do
                       not draw it — a chart that differs from the one with its legend only
                       in the legend's pixels, for tests that compare the two */
    int legend_pos; /* the corner tried first: 0 top left, 1 bottom right, 2 top right,
                       3 bottom left. The legend goes into the first corner of the plot box
                       (from this one on) where its box covers no data — no marker, line,
                       band, bar or stripe — and outside the plot box, on the right, when
                       every corner is taken (below it instead when the right would leave
                       the plot less than half the drawing's width); for stacked panels
                       always below them, in columns */
    const stagecal_plot_series *series; /* caller or builder-owned: n_series series, drawn in
                                           order, bands first */
    size_t n_series;
    void *storage; /* internal: memory owned by a builder (NULL for caller-built charts);
                      released by stagecal_plot_chart_free */
    const stagecal_plot_panel *panels; /* n_panels ≥ 1: stacked panels sharing x (top first),
                                          the chart's own series and y_label unused; the
                                          x label, title and legend are the chart's */
    size_t n_panels;                   /* 0: one plot of the chart's series */
} stagecal_plot_chart;

/* Where things went on the page, in fractions of the page (x rightwards, y upwards). */
typedef struct {
    double x0, x1, y0, y1;
} stagecal_plot_box;

typedef struct {
    size_t n_panels;                                   /* plot boxes drawn (1 without panels) */
    stagecal_plot_box box[STAGECAL_PLOT_MAXPANELS];    /* plot boxes, top first */
    stagecal_plot_box ground[STAGECAL_PLOT_MAXPANELS]; /* an inset's white ground (its box
                                                          with its labels); 0 otherwise */
    double x_min, x_max;                               /* the x range (world units) */
    double px_min[STAGECAL_PLOT_MAXPANELS], px_max[STAGECAL_PLOT_MAXPANELS]; /* per panel
                                                       (an inset's own; else x_min, x_max) */
    double y_min[STAGECAL_PLOT_MAXPANELS], y_max[STAGECAL_PLOT_MAXPANELS];
    int has_legend;    /* 1: a legend was drawn */
    int legend_inside; /* 1: in a corner of a plot box */
    int legend_below;  /* 1: below stacked panels, in legend_cols columns */
    size_t legend_cols, legend_rows;
    int legend_corner;               /* that corner (legend_pos numbering) */
    size_t legend_panel;             /* the panel whose corner holds it */
    stagecal_plot_box legend;        /* the legend's box as PLplot drew it */
    stagecal_plot_box legend_est;    /* the box the placement reserved (an
                                        estimate of the drawn one) */
    stagecal_plot_box legend_region; /* outside: the region right of the
                                        boxes that holds the legend */
    double marker_w, marker_h;       /* a default marker's size [page] */
} stagecal_plot_layout;

/* Rendering parameters. */
typedef struct {
    size_t width;                 /* PNG: pixels; SVG/PDF: points (1/72 in). Default 800 */
    size_t height;                /* default 560 */
    double char_scale;            /* text size relative to PLplot's default (default 0.9) */
    const char *tmp_dir;          /* directory for the temporary file of stagecal_plot_svg; NULL →
                                     $TMPDIR or /tmp */
    stagecal_plot_layout *layout; /* not NULL: receives where the chart's boxes and its
                                     legend went (for tests and for callers that annotate) */
} stagecal_plot_params;

stagecal_plot_params stagecal_plot_default_params(void);

/* Palette colour i (0..7) as 0xRRGGBB, and its band tint. Out-of-range i wraps. */
unsigned long stagecal_plot_colour(int i);
unsigned long stagecal_plot_tint(int i);
unsigned long stagecal_plot_tint_light(int i); /* the lighter tint (extrapolated parts) */
/* "blue", "vermillion", … (Okabe–Ito names) for colour i (wraps). */
const char *stagecal_plot_colour_name(int i);

/* Format from a file name's extension. EINVAL when it is not .png, .svg or .pdf. */
int stagecal_plot_format_from_path(const char *path, stagecal_plot_format *fmt,
                                   stagecal_error *err);

/* The page position of the world point (x, y) of panel p of a layout. */
void stagecal_plot_layout_map(const stagecal_plot_layout *l, size_t p, double x, double y,
                              double *px, double *py);

/* Checks a chart before rendering: every series has n ≥ 1 and its arrays, palette and
 * style indices in range, at least one finite point, and finite given axis limits with
 * min < max. EINVAL with a message naming the series ("series 3 ('fit'): …"). */
int stagecal_plot_check(const stagecal_plot_chart *chart, stagecal_error *err);

/* Renders chart to path; the format follows the extension. Atomic: drawn into a
 * temporary file next to path and renamed over it, so a failure leaves no partial
 * file. params may be NULL (defaults). Errors: EINVAL (chart fails the check, unknown
 * extension, size 0); EWRITE (the directory is not writable, rename fails);
 * EINTERNAL (PLplot produced an empty file). */
int stagecal_plot_write(const stagecal_plot_chart *chart, const char *path,
                        const stagecal_plot_params *params, stagecal_error *err);

/* Renders chart as SVG into memory: *svg receives a NUL-terminated malloc'd document
 * (caller frees with free()), *len its length (may be NULL). PLplot has no in-memory
 * SVG output, so this draws into a temporary file and reads it back. Errors as for
 * stagecal_plot_write, plus ENOMEM. */
int stagecal_plot_svg(const stagecal_plot_chart *chart, const stagecal_plot_params *params,
                      char **svg, size_t *len, stagecal_error *err);

/* Releases a builder-made chart (its storage and the chart itself). NULL is a no-op. Do
 * not call it on caller-built charts on the stack. */
void stagecal_plot_chart_free(stagecal_plot_chart *chart);

/* ---- builders ----------------------------------------------------------------------
 * Each returns a heap chart through *out (free with stagecal_plot_chart_free); the
 * chart copies every array it needs, so the inputs may go away afterwards. Titles and
 * labels given by the caller are copied too. Errors: EINVAL (inputs outside their
 * domain, named in the message), ENOMEM. */

/* McCabe–Thiele stage diagram from a stepped profile (plain data).
 * Series, in order: diagonal y = x; equilibrium curve y*(x); pseudo-equilibrium curve
 * y = op(x) + E_MV·(y*(x) − op(x)) when murphree < 1; operating line from the pinch
 * (or x = 0) up to xD; the steps; the pinch marker when the operating line meets the
 * equilibrium curve inside (0, xD) at finite reflux; the distillate and pot markers. */
typedef struct {
    const stagecal_vle *vle;             /* equilibrium model (borrowed during the call) */
    double xd;                           /* distillate mole fraction, in (0, x_max) */
    double reflux;                       /* R ≥ 0, INFINITY = total reflux */
    double murphree;                     /* E_MV in (0, 1] */
    const stagecal_stage_point *profile; /* stagecal_stages_step's profile: column stages,
                                            partial end point, pot last */
    size_t n_profile;                    /* ≥ 1 */
    double stages;       /* stages incl. the pot, shown in the title; NAN: not shown */
    const char *title;   /* NULL → "McCabe–Thiele stage diagram" */
    size_t curve_points; /* points per curve; 0 → 201 */
} stagecal_plot_mccabe_data;

/* From STAGECAL_PLOT_MCCABE_INSET_STAGES profile points on, the top quarter of the steps
 * (at least 4) is drawn again, zoomed, in an inset in the lower right of the diagram (below
 * the diagonal, where it is empty), and a dotted box on the diagram marks the zoomed region:
 * at 30 stages the top steps are otherwise a smudge in the corner. The chart then has two
 * panels (the diagram, the inset). The pinch is a large ring drawn last, so that it shows
 * around the pot marker when the pot sits at the pinch. */
#define STAGECAL_PLOT_MCCABE_INSET_STAGES 12
int stagecal_plot_mccabe(const stagecal_plot_mccabe_data *d, stagecal_plot_chart **out,
                         stagecal_error *err);

/* Convenience: steps `stages` (≥ 1; or, when stages is NAN, inverts xb to get them) with
 * stagecal_stages_step and draws the diagram for that sample or condition. Statuses of
 * the stages module pass through; a pinch / azeotrope / invalid outcome of the sample is
 * EDATA with its reason. */
int stagecal_plot_mccabe_condition(const stagecal_vle *vle, double xd, double xb, double reflux,
                                   double stages, double murphree, stagecal_plot_chart **out,
                                   stagecal_error *err);

/* Stages against a predictor (R or the F-factor) with the samples, the fitted curve,
 * its confidence and prediction bands and the fitted envelope. */
typedef struct {
    const char *predictor_label; /* axis text, e.g. "reflux ratio R [-]" or
                                    "F-factor [Pa^0.5]"; NULL → "reflux ratio R [-]" */
    const double *x;             /* n samples: predictor (INFINITY drawn at the right edge) */
    const double *stages;        /* n samples: stages incl. the pot */
    const size_t *group;         /* n group indices (run or window) < n_groups; NULL → one */
    size_t n;
    const char *const *group_names; /* n_groups legend names; NULL → "group 1", … */
    size_t n_groups;                /* ≤ 32 */
    const double *grid;             /* n_grid predictor values of the curve (ascending), or
                                       NULL for no fit */
    const double *fit;              /* n_grid fitted stages */
    const double *ci_lo, *ci_hi;    /* confidence band (may be NULL) */
    const double *pi_lo, *pi_hi;    /* prediction band (may be NULL) */
    size_t n_grid;
    double env_lo, env_hi; /* fitted envelope on this predictor; NAN → not drawn */
    double level;          /* confidence level for the legend (e.g. 0.95) */
    const char *title;     /* NULL → "Stages against ..." */
} stagecal_plot_fit_data;

int stagecal_plot_fit(const stagecal_plot_fit_data *d, stagecal_plot_chart **out,
                      stagecal_error *err);

/* A curve (and its bands) split at the fitted envelope [lo, hi] (NAN: open on that side):
 * in_* holds the points inside, out_* those beyond, the parts left and right of the
 * envelope separated by a NaN. Where the grid crosses an edge the curves are interpolated
 * linearly onto the edge, and that point ends the inside part and starts (or ends) the
 * outside part: the extrapolated part starts exactly at the envelope's edge. The fit
 * chart draws in_* as the fit and out_* dashed with lighter bands. */
#define STAGECAL_PLOT_SPLIT_MAX 8
typedef struct {
    size_t k; /* curves */
    double *in_x, *in_y[STAGECAL_PLOT_SPLIT_MAX];
    size_t n_in;
    double *out_x, *out_y[STAGECAL_PLOT_SPLIT_MAX];
    size_t n_out;
} stagecal_plot_split;

/* grid: n ascending abscissae; ys: k ≤ STAGECAL_PLOT_SPLIT_MAX arrays of n values (a NULL
 * array gives NaN). EINVAL, ENOMEM. Free with stagecal_plot_split_free. */
int stagecal_plot_split_envelope(const double *grid, const double *const *ys, size_t k, size_t n,
                                 double lo, double hi, stagecal_plot_split *sp);
void stagecal_plot_split_free(stagecal_plot_split *sp);

/* Residuals (observed − fitted stages) against the fitted value (time_s NULL) or against
 * time (time_s given: seconds since 1970 UTC, dates on the axis), by group, with the
 * zero line. */
typedef struct {
    const double *fitted; /* n fitted stages */
    const double *resid;  /* n residuals [stages] */
    const double *time_s; /* n sample times [s since 1970 UTC] or NULL */
    const size_t *group;  /* as in stagecal_plot_fit_data */
    size_t n;
    const char *const *group_names;
    size_t n_groups;
    const char *title;
} stagecal_plot_resid_data;

int stagecal_plot_resid(const stagecal_plot_resid_data *d, stagecal_plot_chart **out,
                        stagecal_error *err);

/* Trend of a column's stages over months: the fitted stages of each calibration with
 * its trend line, control limits, alarm points, forecast with band and the stage count
 * below which the product misses specification. */
typedef struct {
    const double *time_s; /* n calibration times [s since 1970 UTC], ascending */
    const double *stages; /* n stages at the reference condition */
    size_t n;
    const int *alarm;     /* n flags (1 = alarm) or NULL */
    const double *line_t; /* n_line times of the trend line [s] (NULL: none) */
    const double *line;   /* n_line stages on the trend line */
    size_t n_line;
    double lcl, ucl;             /* control limits [stages]; NAN: not drawn */
    const double *fc_t;          /* n_fc forecast times [s] (NULL: none) */
    const double *fc;            /* forecast stages */
    const double *fc_lo, *fc_hi; /* forecast band (may be NULL) */
    size_t n_fc;
    double spec_stages; /* minimum stages meeting specification; NAN: not drawn */
    const char *title;
} stagecal_plot_trend_data;

int stagecal_plot_trend(const stagecal_plot_trend_data *d, stagecal_plot_chart **out,
                        stagecal_error *err);

/* Batch prediction: one or more curves of a quantity over batch time with bands. */
typedef struct {
    const char *name;   /* legend name, e.g. "xD" */
    const double *y;    /* n_t values */
    const double *y_lo; /* band lower edge (may be NULL) */
    const double *y_hi; /* band upper edge (may be NULL) */
} stagecal_plot_batch_curve;

typedef struct {
    const double *t_s; /* n_t times since the start of the batch [s], shown in h */
    size_t n_t;
    const stagecal_plot_batch_curve *curves; /* n_curves curves (≤ 8) */
    size_t n_curves;
    const char *y_label; /* e.g. "mole fraction of light component [mol/mol]" */
    double spec;         /* a horizontal specification line; NAN: none */
    const char *title;
} stagecal_plot_batch_data;

int stagecal_plot_batch(const stagecal_plot_batch_data *d, stagecal_plot_chart **out,
                        stagecal_error *err);

/* A column's fits over time (`stagecal trend`'s analysis, trend.h): each fit at the
 * reference condition with ± 2 se bars, each segment's trend line with its band (between
 * its first and last fit), the current segment's line beyond its last fit as the forecast
 * (extrapolated: dashed, light band, from exactly the last fit's time), EWMA alarms
 * (rings), the requirement, the forecast crossing with its band, and the events (repack,
 * maintenance, notes) as vertical lines with their kind. Dates on the x axis. */
typedef struct {
    const stagecal_trend_history *h;    /* stagecal_trend_analyse's result */
    const stagecal_trend_event *events; /* may be NULL */
    size_t n_events;
    const char *column_id; /* events of other columns are left out; NULL: all drawn */
    const char *y_label;   /* NULL: "stages incl. pot at the reference condition [-]" */
    const char *title;     /* NULL: "Column <id>: stages over time, trend and forecast" */
} stagecal_plot_trend_history_data;

int stagecal_plot_trend_history(const stagecal_plot_trend_history_data *d,
                                stagecal_plot_chart **out, stagecal_error *err);

/* The self-starting EWMA and CUSUM charts of runs over time (chart.h, `stagecal history`):
 * three panels over dates — each run's stage count at the condition with ± 2 se bars and
 * the alarms ringed; the EWMA of the Q statistics with its asymptotic limits
 * ±L·sqrt(λ/(2 − λ)); the upper CUSUM and the lower one drawn below zero against ±h. The
 * first two points only start the estimates (no Q): they are not drawn on the charts. */
typedef struct {
    const stagecal_trend_point *pts;   /* n runs (time, stages, se), in time order */
    const stagecal_chart_point *chart; /* n: stagecal_chart_selfstart's output */
    size_t n;
    stagecal_chart_params par; /* the design the chart ran with */
    const char *y_label;       /* NULL: "stages incl. pot [-]" */
    const char *title;
} stagecal_plot_selfstart_data;

int stagecal_plot_selfstart(const stagecal_plot_selfstart_data *d, stagecal_plot_chart **out,
                            stagecal_error *err);

/* A predicted batch (batch.h's result) in three panels over batch time [h]: distillate
 * xD and pot xB, pot holdup W [kmol], reflux ratio R. The cuts are stripes in alternating
 * tints with their names; with a band, each cut's end time band is shaded. Rows outside
 * the model's fitted envelope (row.outside) are drawn dashed: an extrapolation. */
typedef struct {
    const stagecal_batch_result *res;
    const stagecal_batch_band *band; /* may be NULL */
    const char *title;               /* NULL: "Batch prediction: compositions and cuts" */
} stagecal_plot_trajectory_data;

int stagecal_plot_trajectory(const stagecal_plot_trajectory_data *d, stagecal_plot_chart **out,
                             stagecal_error *err);

/* Where to run the next tests (`stagecal probe --chart`): stages against R with the
 * confidence band now (sky blue) and the band expected after the proposed tests (blue),
 * the fitted stages, the proposed tests (vermillion) and the conditions of interest
 * (green) on the curve; beyond the fitted envelope the curve is dashed and both bands
 * lighter (extrapolated). c: stagecal_design_chart_curves' result (design.h; plain
 * numbers: the charts library does not link the design library). */
int stagecal_plot_design(const stagecal_design_curves *c, stagecal_plot_chart **out,
                         stagecal_error *err);

/* The run chart: the raw runs against time in five stacked panels — distillate xD, pot
 * xB, pot holdup W, reflux ratio R, stage counts — with the quasi-steady windows shaded in
 * every panel (blue: windows with a stage count, the fits' evidence; vermillion: windows of
 * a run left out of the fit; light: windows without a count), the samples' stage counts
 * with ± 2 u bars, the windows' stage counts (the evidence's, ± 2 se), censored readings
 * (▲ at or above, ▽ at or below the limit) and one-sided sample bounds, xB outliers (×),
 * samples without a count (× at the foot of the stage panel), total-reflux rows, and run
 * names (left-out runs say so). Nothing is recomputed: rows from the log, flags, statuses
 * and counts from the analysis (after stagecal_runlog_invert), window counts from the
 * evidence set. One run: hours from its start; all runs: side by side in log order, each
 * in hours from its own start (stagecal_plot_run_hours gives a row's abscissa). Drawn
 * best at about 900 × 1100. */
#define STAGECAL_PLOT_ALL_RUNS ((size_t)-1)
typedef struct {
    const stagecal_runlog *log;            /* the rows */
    const stagecal_runlog_result *res;     /* their analysis and inversion */
    const stagecal_evidence_set *evidence; /* the windows' counts; NULL: none drawn */
    const stagecal_flagged_run *flagged;   /* runs flagged (calibrate.h); may be NULL */
    size_t nflagged;
    size_t run;        /* a run index, or STAGECAL_PLOT_ALL_RUNS */
    const char *title; /* NULL: the run's name and start, or the runs' range */
} stagecal_plot_run_data;

int stagecal_plot_run(const stagecal_plot_run_data *d, stagecal_plot_chart **out,
                      stagecal_error *err);
/* From a calibration (also one whose fit failed, once its windows were built). */
int stagecal_plot_run_calibration(const stagecal_calibration *cal, size_t run,
                                  stagecal_plot_chart **out, stagecal_error *err);
/* The abscissa [h] of a row on the run chart of d; 0 when d or row is out of range. */
int stagecal_plot_run_hours(const stagecal_plot_run_data *d, size_t row, double *h);

#ifdef __cplusplus
}
#endif
#endif

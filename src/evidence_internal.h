/*
 * evidence_internal.h — what evidence.c takes from evidence_physics.c and
 * evidence_cens.c, and what it shares with evidence_stats.c; not installed.
 */
#ifndef STAGECAL_EVIDENCE_INTERNAL_H
#define STAGECAL_EVIDENCE_INTERNAL_H

#include "stagecal/evidence.h"

/* Bounds on the lag-1 autocorrelation used for n_eff: negative ρ would claim more
 * information than samples; ρ → 1 would make n_eff vanish. */
#define EVIDENCE_RHO_MAX 0.99

/* Points in each local fit of the window smoother (evidence.c, evidence_stats.c). */
#define SMOOTH_POINTS 9

/* Most samples the stage count and the window statistics use (the first ones carried). */
#define EV_MAX_SMOOTH 64

/* The distillate each row contributes (xd, one per log row; NAN where a row is still
 * settling), the extra variance of its compensation common to its run (u2) and the shift per
 * unit slope (gs; holdup_compensate_split); fills set's holdup members. */
int evidence_holdup(const stagecal_runlog *log, const stagecal_column *col,
                    const stagecal_evidence_params *par, stagecal_evidence_set *set, double *xd,
                    double *u2, double *gs, stagecal_error *err);
/* Each window's conditions (after the means): set->conds, ev[k].cond, at the windows' mean
 * logged pressure p[k·stride] and reflux temperature t[k·stride] (NAN: not logged). */
int evidence_conditions(const stagecal_column *col, stagecal_evidence_set *set, const double *p,
                        const double *t, size_t stride, stagecal_error *err);
/* Frees what the two above allocated. */
void evidence_physics_free(stagecal_evidence_set *set);
/* set->cens (stagecal/evidence.h): every window's readings, with the window's own numbers
 * (evidence_collect_cens, from the rows; xd_src as evidence_holdup gave it; ENOMEM), then
 * those of the evidence entry of the same window where there is one, once set->ev is complete
 * (evidence_fill_cens). */
int evidence_collect_cens(const stagecal_runlog *log, const double *xd_src,
                          const stagecal_runlog_result *res, size_t cap, stagecal_evidence_set *set,
                          stagecal_error *err);
void evidence_fill_cens(stagecal_evidence_set *set);

/* stagecal_evidence_build in two parts, so that a log can be given run by run (calibrate's
 * streaming): what needs the rows (the compensation, each window's means and carried samples,
 * what its stage count and conditions take from the rows, the censored likelihood's readings:
 * nothing pooled over windows or runs, except under the QUAD noise options, which take the
 * rows again at the pooled ρ), then what works on the windows alone (conditions, the pooled ρ,
 * the noise, the stage counts). Parts built run by run go together with evidence_set_append
 * (runs in order: the window, run and row numbers offset by those before) and, after the last,
 * evidence_set_point; the result is the set the whole log gives, bit for bit. cens 0: set->cens
 * is left empty (a calibration that takes no censored likelihood, on a log without censored
 * readings, has no use for it: calibrate_censoring_matters looks for censored ones). */
int evidence_build_windows(const stagecal_runlog *log, const stagecal_runlog_result *res,
                           const stagecal_column *col, const stagecal_evidence_params *params,
                           int cens, stagecal_evidence_set *set, stagecal_error *err);
int evidence_build_finish(const stagecal_column *col, double murphree,
                          const stagecal_evidence_params *params, stagecal_evidence_set *set,
                          stagecal_error *err);
/* The allocated sizes of a set being appended to (start at zero). */
typedef struct {
    size_t ev, samples, rows, cens, cens_samples, cens_flags, tau;
} evidence_caps;
/* Appends the parts of src (one run's, or several) to dst; run: the run index src's entries
 * get (src holds one run); cap: max_samples. ENOMEM. */
int evidence_set_append(stagecal_evidence_set *dst, evidence_caps *caps,
                        const stagecal_evidence_set *src, size_t cap, size_t run,
                        size_t window_base, size_t row_base, stagecal_error *err);
/* Points the entries' carried samples into the set's storage (after the last append). */
int evidence_set_point(stagecal_evidence_set *set, size_t cap, stagecal_error *err);
/* σ of the windows' stage counts about the curve theta of form, with its degrees of freedom
 * m − p over the m windows with stage counts (0, 0 when m ≤ p). */
void evidence_stage_scatter(const stagecal_evidence *ev, size_t n, const stagecal_form *form,
                            const double *theta, double *sigma, double *dof);

/* The composition fit's carried-samples factor of a window (src/regress_composition.c): how much
 * noisier the mean of its carried samples is than the mean of all m_all readings, under the lag-1
 * autocorrelation rho per reading interval. Shared with tests/tool_demo_windows.c. */
double regress_carried_factor(const stagecal_evidence *e, double rho, size_t m_all);

#endif

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
/* Each window's conditions (after the means): set->conds, ev[k].cond. */
int evidence_conditions(const stagecal_runlog *log, const stagecal_column *col,
                        stagecal_evidence_set *set, stagecal_error *err);
/* Frees what the two above allocated. */
void evidence_physics_free(stagecal_evidence_set *set);
/* set->cens (stagecal/evidence.h) after the evidence set->ev is complete; xd_src as
 * evidence_holdup gave it. ENOMEM. */
int evidence_build_cens(const stagecal_runlog *log, const double *xd_src,
                        const stagecal_runlog_result *res, size_t cap, stagecal_evidence_set *set,
                        stagecal_error *err);
/* σ of the windows' stage counts about the curve theta of form, with its degrees of freedom
 * m − p over the m windows with stage counts (0, 0 when m ≤ p). */
void evidence_stage_scatter(const stagecal_evidence *ev, size_t n, const stagecal_form *form,
                            const double *theta, double *sigma, double *dof);

/* The composition fit's carried-samples factor of a window (src/regress_composition.c): how much
 * noisier the mean of its carried samples is than the mean of all m_all readings, under the lag-1
 * autocorrelation rho per reading interval. Shared with tests/tool_demo_windows.c. */
double regress_carried_factor(const stagecal_evidence *e, double rho, size_t m_all);

#endif

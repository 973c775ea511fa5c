/*
 * runlog_invert.c — effective stages at every sample of a run log, with their
 * standard uncertainty, L/V and the vapour load as F-factor; the CSV writer.
 *
 * Uncertainty: first-order propagation of the column file's standard
 * uncertainties u(xD), u(xB), u(R) through the inversion's sensitivities,
 * independent errors:
 *     u(N)² = (∂N/∂xD·u(xD))² + (∂N/∂xB·u(xB))² + (∂N/∂R·u(R))²,
 *     u(R)² = u_abs(R)² + (u_rel(R)·R)²   (0 at total reflux: ∂N/∂R = 0 there),
 * R and u(R) being the row's reflux set point and its uncertainty (runlog_setpoint.c).
 * Near a pinch ∂N/∂xB grows without bound and so does u(N): the number says how
 * little such a sample tells.
 *
 * F-factor (standard definition, common practice, no source): F = u_G·√ρ_G, u_G = V·M/(ρ_G·A), ρ_G
 * = P·M/(R·T), A = π·d²/4. M is the molar mass of the top vapour, which has the distillate's
 * composition (total condenser). T is T_top from the log, else the bubble point
 * of xD from the equilibrium model; P is P from the log, else the column file's.
 */
#include "stagecal/runlog.h"

#include <gsl/gsl_math.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "parallel.h"
#include "runlog_internal.h"
#include "stagecal/physics.h"
#include "stagecal/stages.h"

/* Molar gas constant [J/(mol·K)], exact since the 2019 SI (N_A·k); GSL 2.7's
 * GSL_CONST_MKSA_MOLAR_GAS is the older 8.314472. */
#define MOLAR_GAS 8.31446261815324

static const char *const note_text[STAGECAL_NOTE_COUNT] = {
    [STAGECAL_NOTE_NONE] = "",
    [STAGECAL_NOTE_MISSING_XD] = "missing xD",
    [STAGECAL_NOTE_MISSING_XB] = "missing xB",
    [STAGECAL_NOTE_MISSING_R] = "missing R",
    [STAGECAL_NOTE_XD_BELOW_XB] = "xD below xB",
    [STAGECAL_NOTE_REFLUX_ZERO] = "R = 0 (not identifiable)",
    [STAGECAL_NOTE_STAGES] = "see status",
    [STAGECAL_NOTE_NO_DISTILLATE] = "no distillate drawn: counted at total reflux",
    [STAGECAL_NOTE_NO_LOAD] = "no F-factor (needs V, diameter, molar masses and a temperature)",
    [STAGECAL_NOTE_FAILED] = "inversion failed",
    [STAGECAL_NOTE_AT_LEAST] = "censored reading: at least this many stages (one-sided 95 %)",
    [STAGECAL_NOTE_AT_MOST] = "censored reading: at most this many stages (one-sided 95 %)",
    [STAGECAL_NOTE_OPPOSITE] = "xD and xB censored in opposite senses: no bound",
    [STAGECAL_NOTE_UNBOUNDED] = ("censored reading: no finite bound (at the physical bound "
                                 "without a stated uncertainty, or a pinch)"),
};

const char *stagecal_runlog_status_name(int status)
{
    return status == STAGECAL_RUNLOG_CENSORED ? "censored" : stagecal_stages_status_name(status);
}

const char *stagecal_runlog_note_text(int note)
{
    if (note < 0 || note >= STAGECAL_NOTE_COUNT)
        return "";
    return note_text[note];
}

const char *stagecal_runlog_row_note_text(int note, int status)
{
    if (note != STAGECAL_NOTE_STAGES)
        return stagecal_runlog_note_text(note);
    switch (status) {
    case STAGECAL_STAGES_PINCH:
        return "pinch: xB is out of reach at this R with any number of stages (no count)";
    case STAGECAL_STAGES_AZEOTROPE:
        return "azeotrope between xB and xD: the stepping cannot cross it (no count)";
    default:
        return "inputs outside the inversion's domain (no count)";
    }
}

int stagecal_runlog_f_factor(double v_mol_s, double m_kg_mol, double p_pa, double t_k, double d_m,
                             double *f, stagecal_error *err)
{
    if (!(v_mol_s >= 0 && isfinite(v_mol_s)) || !(m_kg_mol > 0 && isfinite(m_kg_mol)) ||
        !(p_pa > 0 && isfinite(p_pa)) || !(t_k > 0 && isfinite(t_k)) || !(d_m > 0 && isfinite(d_m)))
        return error_set(err, STAGECAL_EINVAL,
                         "F-factor needs V >= 0 and positive molar mass, pressure, temperature "
                         "and diameter");
    double rho = p_pa * m_kg_mol / (MOLAR_GAS * t_k);
    double area = M_PI * d_m * d_m / 4.0;
    double u_g = v_mol_s * m_kg_mol / (rho * area);
    *f = u_g * sqrt(rho);
    return STAGECAL_OK;
}

/* Rows per item of the threaded row loop: large enough that handing out blocks costs
 * nothing, small enough that the two threads finish together. */
#define INVERT_BLOCK_ROWS 512

/* Rows inverted together (row_block_batched): a part of a block, so that the batch (~34 kB)
 * stays in the first-level cache's neighbourhood and below malloc's mmap threshold (it is
 * allocated for each run of a stream). */
#define INVERT_BATCH_ROWS 128

/* The plain rows of a part of a block, inverted together. */
struct inv_batch {
    double xd[INVERT_BATCH_ROWS], xb[INVERT_BATCH_ROWS], r[INVERT_BATCH_ROWS];
    size_t row[INVERT_BATCH_ROWS];
    int rc[INVERT_BATCH_ROWS], no_draw[INVERT_BATCH_ROWS];
    stagecal_stages_result sr[INVERT_BATCH_ROWS];
};

struct inv_ctx {
    const stagecal_runlog *log;
    const stagecal_column *col;
    double murphree;
    stagecal_stages_params sp;
    stagecal_runlog_result *res;
    stagecal_physics *ph;    /* logged pressure, subcooled reflux (physics.h) */
    struct inv_batch *batch; /* NULL: every row alone */
};

/* Row i with a censored reading (xD and xB present, R > 0): a one-sided bound. A reading
 * above its limit (xD) or below it (xB) says the column did at least this well, so the
 * count is bounded below; the other senses bound it above. The bound is the count at
 * the compositions moved by STAGECAL_RUNLOG_BOUND_Z standard uncertainties each, the
 * way that weakens it: with both moved it holds with at least 95 %. */
static void invert_censored(struct inv_ctx *c, size_t i, double r)
{
    const stagecal_runlog *log = c->log;
    stagecal_runlog_result *res = c->res;
    int cd = log->xd_cens[i], cb = log->xb_cens[i];
    res->status[i] = STAGECAL_RUNLOG_CENSORED;
    res->note[i] =
        (unsigned char)stagecal_runlog_bound(c->col, c->col->system.vle, log->xd[i], cd, log->xb[i],
                                             cb, r, c->murphree, &res->stages[i]);
}

int stagecal_runlog_bound(const stagecal_column *col, const stagecal_vle *vle, double xd, int cd,
                          double xb, int cb, double r, double murphree, double *stages)
{
    int lower = cd == STAGECAL_CENSOR_ABOVE || cb == STAGECAL_CENSOR_BELOW;
    int upper = cd == STAGECAL_CENSOR_BELOW || cb == STAGECAL_CENSOR_ABOVE;
    *stages = NAN;
    if (lower && upper)
        return STAGECAL_NOTE_OPPOSITE;
    double z = lower ? -STAGECAL_RUNLOG_BOUND_Z : STAGECAL_RUNLOG_BOUND_Z;
    double xdb = xd + z * stagecal_runlog_u_xd(col, xd);
    double xbb = xb - z * stagecal_runlog_u_xb(col, xb);
    stagecal_stages_params sp = stagecal_stages_default_params();
    stagecal_stages_result sr;
    if (!(xdb < 1 && xbb > 0 && xbb < xdb) ||
        stages_invert_quiet(vle, xdb, xbb, r, murphree, &sp, &sr, NULL) != STAGECAL_OK ||
        sr.status != STAGECAL_STAGES_OK)
        return STAGECAL_NOTE_UNBOUNDED;
    *stages = sr.stages;
    return lower ? STAGECAL_NOTE_AT_LEAST : STAGECAL_NOTE_AT_MOST;
}

/* invert_row up to the inversion: 1 with the row's conditions in *pc when row i is to be
 * inverted at reflux r, 0 when it is done (a value missing, R = 0, a censored reading, xD below
 * xB, the conditions failed). */
static int invert_row_cond(struct inv_ctx *c, size_t i, double r, stagecal_physics_cond *pc)
{
    const stagecal_runlog *log = c->log;
    stagecal_runlog_result *res = c->res;
    double xd = log->xd[i], xb = log->xb[i];
    res->stages[i] = 0;
    res->u_stages[i] = 0;
    res->dn_dxd[i] = res->dn_dxb[i] = 0;
    res->status[i] = STAGECAL_STAGES_INVALID;
    res->lv[i] = isinf(r) ? 1.0 : (r >= 0 ? r / (r + 1.0) : NAN);
    if (isnan(xd)) {
        res->note[i] = STAGECAL_NOTE_MISSING_XD;
        return 0;
    }
    if (isnan(xb)) {
        res->note[i] = STAGECAL_NOTE_MISSING_XB;
        return 0;
    }
    if (isnan(r)) {
        res->note[i] = STAGECAL_NOTE_MISSING_R;
        res->lv[i] = NAN; /* written as an empty cell */
        return 0;
    }
    if (r == 0) {
        res->note[i] = STAGECAL_NOTE_REFLUX_ZERO;
        return 0;
    }
    if (log->xd_cens[i] != STAGECAL_CENSOR_NONE || log->xb_cens[i] != STAGECAL_CENSOR_NONE) {
        invert_censored(c, i, r);
        return 0;
    }
    if (xd < xb) {
        res->note[i] = STAGECAL_NOTE_XD_BELOW_XB;
        return 0;
    }
    if (stagecal_physics_cond_at(c->ph, log->p_pa ? log->p_pa[i] : NAN, xd, r,
                                 log->t_reflux_k ? log->t_reflux_k[i] : NAN, pc, NULL) != 0) {
        res->note[i] = STAGECAL_NOTE_FAILED;
        return 0;
    }
    return 1;
}

/* invert_row after the inversion: row i's count sr under the conditions pc (rc the
 * inversion's return value) at reflux r into res. */
static void invert_row_store(struct inv_ctx *c, size_t i, double r, const stagecal_physics_cond *pc,
                             int rc, const stagecal_stages_result *sr)
{
    const stagecal_runlog *log = c->log;
    stagecal_runlog_result *res = c->res;
    if (rc != STAGECAL_OK) {
        res->note[i] = STAGECAL_NOTE_FAILED;
        return;
    }
    res->lv[i] = isinf(pc->r_int) ? 1.0 : pc->r_int / (pc->r_int + 1.0); /* internal L/V */
    res->status[i] = (unsigned char)sr->status;
    if (sr->status != STAGECAL_STAGES_OK) {
        res->note[i] = STAGECAL_NOTE_STAGES;
        return;
    }
    const stagecal_uncertainty *u = &c->col->u;
    /* a measured R: its set point's uncertainty (runlog_setpoint.c); a logged set point: the
     * stated u(R) */
    double ur = log->u_r_set && log->u_r_set[i] > 0 ? log->u_r_set[i] : hypot(u->r, u->r_rel * r);
    double ur2 = isinf(r) ? 0.0 : ur * ur;
    double a = sr->dstages_dxd * runlog_u_row(log, c->col, i, 1);
    double b = sr->dstages_dxb * runlog_u_row(log, c->col, i, 0);
    double tr2 = sr->dstages_dr * sr->dstages_dr * ur2;
    if (!isfinite(tr2)) { /* R near 1e308: u(R)² overflows where ∂N/∂R underflows to 0 (a
                             fuzzed log gave u(N) NaN with status ok); the product first, and
                             an exactly zero slope adds nothing */
        double t = sr->dstages_dr == 0 ? 0.0 : sr->dstages_dr * ur;
        tr2 = t * t;
    }
    res->stages[i] = sr->stages;
    res->u_stages[i] = sqrt(a * a + b * b + tr2);
    res->dn_dxd[i] = sr->dstages_dxd;
    res->dn_dxb[i] = sr->dstages_dxb;
    res->note[i] = STAGECAL_NOTE_NONE;
}

/* Inverts row i at reflux r (its set point, or INFINITY for no-distillate). */
static void invert_row(struct inv_ctx *c, size_t i, double r)
{
    stagecal_physics_cond pc;
    if (!invert_row_cond(c, i, r, &pc))
        return;
    stagecal_stages_result sr;
    int rc =
        physics_invert_quiet(&pc, c->log->xd[i], c->log->xb[i], c->murphree, &c->sp, &sr, NULL);
    invert_row_store(c, i, r, &pc, rc, &sr);
}

int stagecal_runlog_invert(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                           const stagecal_runlog_analysis_params *params,
                           stagecal_runlog_result *res, stagecal_error *err)
{
    return runlog_invert_with(log, col, murphree, params, NULL, res, err);
}

int stagecal_runlog_invert_physics(const stagecal_runlog *log, const stagecal_column *col,
                                   double murphree, const stagecal_runlog_analysis_params *params,
                                   stagecal_physics *ph, stagecal_runlog_result *res,
                                   stagecal_error *err)
{
    return runlog_invert_with(log, col, murphree, params, ph, res, err);
}

struct row_job {
    struct inv_ctx *ctx; /* one per thread (its own physics models; the log, the column) */
    size_t n;            /* rows of the log */
    int have_m;
};

/* row_work after the inversion: the no-distillate note and the vapour load of row i. */
static void row_load(struct inv_ctx *c, int have_m, size_t i, int no_draw)
{
    const stagecal_runlog *log = c->log;
    const stagecal_column *col = c->col;
    stagecal_runlog_result *res = c->res;
    const stagecal_system *sys = &col->system;
    if (no_draw && res->status[i] == STAGECAL_STAGES_OK)
        res->note[i] = STAGECAL_NOTE_NO_DISTILLATE;
    /* vapour load */
    double v = log->v_mol_s ? log->v_mol_s[i] : NAN;
    double p = log->p_pa && isfinite(log->p_pa[i]) ? log->p_pa[i] : sys->p_pa;
    double t = log->t_top_k ? log->t_top_k[i] : NAN;
    double xd = log->xd[i];
    /* the bubble point (a root solve for activity models) only when it can be used */
    if (isnan(t) && isfinite(xd) && isfinite(v) && have_m &&
        stagecal_vle_tbubble(sys->vle, xd, &t) != STAGECAL_OK)
        t = NAN;
    double f;
    if (have_m && isfinite(xd) &&
        stagecal_runlog_f_factor(v, xd * sys->m_light + (1 - xd) * sys->m_heavy, p, t,
                                 col->diameter_m, &f, NULL) == STAGECAL_OK) {
        res->f_factor[i] = f;
    } else {
        res->f_factor[i] = NAN;
        if (res->note[i] == STAGECAL_NOTE_NONE)
            res->note[i] = STAGECAL_NOTE_NO_LOAD;
    }
}

/* Inversion and vapour load of row i (writes res at i alone). */
static void row_work(struct inv_ctx *c, int have_m, size_t i)
{
    const stagecal_runlog *log = c->log;
    double r = runlog_rset(log, i); /* the set point of a measured R */
    int no_draw = isfinite(r) && (c->res->flags[i] & STAGECAL_SAMPLE_TOTAL_REFLUX);
    invert_row(c, i, no_draw ? INFINITY : r);
    row_load(c, have_m, i, no_draw);
}

/* row_work on rows i0..i1 − 1 (at most INVERT_BATCH_ROWS) of a model with c->batch: the rows
 * whose conditions are plain (the column's own model, no pseudo-moles, the pot at the top's
 * pressure, no subcooling: stagecal_physics_invert is then stages_invert_quiet with its
 * derivatives scaled by exactly 1) are inverted together by stages_invert_many_quiet (the
 * same doubles as one at a time) and finished after it; every other row as in row_work. Each
 * row's outputs depend on that row alone, so the order does not change them. */
static void row_block_batched(struct inv_ctx *c, int have_m, size_t i0, size_t i1)
{
    const stagecal_runlog *log = c->log;
    stagecal_runlog_result *res = c->res;
    const stagecal_vle *vle = c->col->system.vle;
    struct inv_batch *b = c->batch;
    size_t nb = 0;
    for (size_t i = i0; i < i1; i++) {
        double r = runlog_rset(log, i);
        int no_draw = isfinite(r) && (res->flags[i] & STAGECAL_SAMPLE_TOTAL_REFLUX);
        r = no_draw ? INFINITY : r;
        stagecal_physics_cond pc;
        if (!invert_row_cond(c, i, r, &pc)) {
            row_load(c, have_m, i, no_draw);
            continue;
        }
        if (pc.vle == vle && pc.vle_pot == vle && !(pc.pseudo_ratio > 0) && pc.r_int == r) {
            b->xd[nb] = log->xd[i], b->xb[nb] = log->xb[i], b->r[nb] = r, b->row[nb] = i;
            b->no_draw[nb++] = no_draw;
            continue;
        }
        stagecal_stages_result sr;
        int rc = physics_invert_quiet(&pc, log->xd[i], log->xb[i], c->murphree, &c->sp, &sr, NULL);
        invert_row_store(c, i, r, &pc, rc, &sr);
        row_load(c, have_m, i, no_draw);
    }
    stages_invert_many_quiet(vle, nb, b->xd, b->xb, b->r, c->murphree, &c->sp, b->sr, b->rc, NULL);
    for (size_t k = 0; k < nb; k++) {
        size_t i = b->row[k];
        stagecal_physics_cond pc = {.r_int = b->r[k]}; /* what invert_row_store reads */
        invert_row_store(c, i, b->r[k], &pc, b->rc[k], &b->sr[k]);
        row_load(c, have_m, i, b->no_draw[k]);
    }
}

static int row_block(void *ctx, size_t item, size_t worker, stagecal_error *err)
{
    const struct row_job *j = ctx;
    size_t i0 = item * INVERT_BLOCK_ROWS, i1 = i0 + INVERT_BLOCK_ROWS;
    if (i1 > j->n)
        i1 = j->n;
    (void)err;
    if (j->ctx[worker].batch) {
        for (size_t k = i0; k < i1; k += INVERT_BATCH_ROWS)
            row_block_batched(&j->ctx[worker], j->have_m, k,
                              i1 - k < INVERT_BATCH_ROWS ? i1 : k + INVERT_BATCH_ROWS);
        return STAGECAL_OK;
    }
    for (size_t i = i0; i < i1; i++)
        row_work(&j->ctx[worker], j->have_m, i);
    return STAGECAL_OK;
}

int runlog_invert_with(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                       const stagecal_runlog_analysis_params *params, stagecal_physics *ph,
                       stagecal_runlog_result *res, stagecal_error *err)
{
    return runlog_invert_threads(log, col, murphree, params, ph, 0, res, err);
}

int runlog_invert_threads(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                          const stagecal_runlog_analysis_params *params, stagecal_physics *ph,
                          size_t nthreads, stagecal_runlog_result *res, stagecal_error *err)
{
    if (!col || !col->system.vle)
        return error_set(err, STAGECAL_EINVAL, "the inversion needs a column with a VLE model");
    if (res->n != log->n || !res->stages)
        return error_set(err, STAGECAL_EINVAL, "run stagecal_runlog_analyse on this log first");
    stagecal_runlog_analysis_params par =
        params ? *params : stagecal_runlog_analysis_default_params();
    if (nthreads > 64)
        nthreads = 64;
    size_t nt = nthreads + 1;
    struct inv_ctx *cs = calloc(nt, sizeof *cs);
    stagecal_physics **phs = calloc(nt, sizeof *phs), *own = NULL;
    if (!cs || !phs) {
        free(cs), free(phs);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    if (!(phs[0] = ph) && !(phs[0] = own = stagecal_physics_alloc(col, NULL, err))) {
        free(cs), free(phs);
        return err ? err->code : STAGECAL_ENOMEM;
    }
    int rc = STAGECAL_OK;
    for (size_t t = 1; t < nt && rc == STAGECAL_OK; t++) /* the other threads' own models */
        if (!(phs[t] = stagecal_physics_alloc(col, NULL, err)))
            rc = err ? err->code : STAGECAL_ENOMEM;
    /* constant α without a pressure dependence, or a table model at E_MV = 1: the rows of a
     * block inverted together (the plain rows; row_block_batched) */
    int batch = (stagecal_vle_get_kind(col->system.vle) == STAGECAL_VLE_ALPHA &&
                 !stagecal_vle_has_pressure(col->system.vle)) ||
                stages_many_by_table(col->system.vle, murphree);
    for (size_t t = 0; t < nt; t++) {
        cs[t] = (struct inv_ctx){log, col,    murphree, stagecal_stages_default_params(),
                                 res, phs[t], NULL};
        cs[t].sp.want_sensitivities = 1;
        if (rc == STAGECAL_OK && batch && !(cs[t].batch = malloc(sizeof *cs[t].batch)))
            rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    const stagecal_system *sys = &col->system;
    int have_m = sys->m_light > 0 && sys->m_heavy > 0;
    size_t maxrun = 1;
    for (size_t k = 0; k < log->nruns; k++)
        if (log->runs[k].n > maxrun)
            maxrun = log->runs[k].n;
    double *st = rc ? NULL : malloc(maxrun * sizeof *st),
           *sw = st ? malloc(maxrun * sizeof *sw) : NULL;
    if (rc == STAGECAL_OK && (!st || !sw))
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
    if (rc == STAGECAL_OK) {
        runlog_mark_no_distillate(log, &par, res, st, sw);
        struct row_job j = {cs, log->n, have_m};
        rc = parallel_for((log->n + INVERT_BLOCK_ROWS - 1) / INVERT_BLOCK_ROWS, nthreads, row_block,
                          &j, err);
    }
    int inverted = st && sw;
    free(st), free(sw);
    if (rc == STAGECAL_OK)
        rc = runlog_windows(log, col, &par, res, err);
    if (rc == STAGECAL_OK) /* the same physics objects: their models at the logged pressures */
        rc = runlog_drift_threads(log, col, murphree, &par, phs, nthreads, res, err);
    stagecal_physics_free(own);
    for (size_t t = 1; t < nt; t++)
        stagecal_physics_free(phs[t]);
    for (size_t t = 0; t < nt; t++)
        free(cs[t].batch);
    free(cs), free(phs);
    if (!inverted)
        return rc; /* nothing was inverted */
    memset(res->count, 0, sizeof res->count);
    for (size_t i = 0; i < log->n; i++)
        if (res->status[i] < STAGECAL_RUNLOG_NSTATUS)
            res->count[res->status[i]]++;
    return rc;
}

/*
 * runlog_drift.c — which analyser drifts, and whether the pot holdup falls as the boil-up
 * and the reflux ratio say (include/stagecal/runlog.h; docs/methods.md, "Analyser drift and
 * balance checks").
 *
 * Two signatures. The Rayleigh balance of the pot (Rayleigh 1902) conserves the light
 * holdup h_k = W_k·xB_k + I_k (+ the column's and drum's light holdup when the column file
 * states them), I_k = Σ ½(xD_j + xD_(j−1))(W_(j−1) − W_j). A distillate analyser reading
 * xD + d·(t − t0) adds d·a_k to h_k, a_k = Σ ½(t_j + t_(j−1) − 2t0)(W_(j−1) − W_j); a pot
 * analyser reading xB + d·(t − t0) adds d·b_k, b_k = W_k·(t_k − t0). The stage relation: at
 * one reflux ratio the column has one stage count, so after the warm-up each row of a
 * stretch at one logged R satisfies N(xD, xB, R) = N_s. Its residual in distillate space,
 * r_k = xD_k − X(xB_k; N_s, R) (X the distillate N_s stages give from the row's xB), is
 * linear in the analysers' errors: a distillate drift adds d·(t − t0), a pot drift
 * d·(∂N/∂xB / ∂N/∂xD)·(t − t0), which has the opposite sign (∂N/∂xD > 0 > ∂N/∂xB). Both
 * drifts raise h alike; they move the stage relation in opposite directions, and a pot drift
 * moves it far less (near a pure distillate ∂N/∂xD ≫ |∂N/∂xB|): the pair of signatures names
 * the analyser.
 *
 * Test. Gross-error detection by the generalized likelihood ratio (Narasimhan, S. & Mah,
 * R. S. H. (1987), "Generalized likelihood ratio method for gross error identification",
 * AIChE J. 33, 1514–1521; Narasimhan, S. & Jordache, C. (2000), Data Reconciliation and
 * Gross Error Detection, Gulf Publishing, ch. 7; both from memory): for each hypothesis j
 * (one analyser drifting at an unknown rate d) the rate is estimated by weighted least
 * squares from each signature — the balance (intercept H and d, weights 1/(W·u(xB))²) and
 * the stage relation (one intercept per stretch and d, weights 1/(u(xD)² + (∂X/∂xB·u(xB))²);
 * the free-count fit adds a slope on ∂X/∂N per stretch, runlog_drift_fit.c),
 * each covariance scaled up by χ²/dof when the scatter exceeds the stated noise. The two
 * independent estimates are combined by inverse variance; T_j = (d/se)² is the GLR statistic
 * of the hypothesis (χ²(1) under no drift). A drift is flagged when the larger T ≥ drift_t²
 * and the drift over the run exceeds drift_u·u(analyser). The analyser is the hypothesis the
 * data support best (the GLR identification rule) by t_name, the same statistic with the
 * stage relation's estimate fitted with each stretch's count free (unbiased under either
 * drift; the median-count estimate in T is attenuated by a distillate drift), see decide();
 * it stays unattributed when the named hypothesis' two estimates contradict each other
 * (opposite signs, each beyond drift_sign_z standard errors) or, without any stage
 * estimate, when the balance's evidence between the two is not strong. The homogeneity
 * statistic Q_j = (d_b − d_s)²/(se_b² + se_s²) is reported but does not decide: model errors
 * of either signature (column holdup, the lag compensation) make it large on clean runs at
 * the precision of long logs (docs/methods.md has the figures).
 *
 * The stage relation uses the distillate compensated for the column holdup (the evidence
 * module's compensation, holdup.h): the lag of xD behind a depleting pot makes the raw
 * counts rise through a run, which would read as a distillate drift.
 */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_fit.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "holdup_internal.h"
#include "internal.h"
#include "parallel.h"
#include "runlog_internal.h"
#include "stagecal/holdup.h"
#include "stagecal/physics.h"
#include "stagecal/stages.h"

const char *stagecal_drift_analyser_name(int analyser)
{
    switch (analyser) {
    case STAGECAL_DRIFT_NONE:
        return "none";
    case STAGECAL_DRIFT_DISTILLATE:
        return "distillate analyser (xD)";
    case STAGECAL_DRIFT_POT:
        return "pot analyser (xB)";
    case STAGECAL_DRIFT_UNATTRIBUTED:
        return "unattributed";
    default:
        return "unknown";
    }
}

static int row_usable(const stagecal_runlog_result *res, size_t i, double r)
{
    return isfinite(r) && r > 0 && !(res->flags[i] & STAGECAL_SAMPLE_TOTAL_REFLUX);
}

double runlog_holdup_light(const stagecal_column *col, double xd, double xb)
{
    if (!col)
        return 0;
    return col->holdup_column_mol * 0.5 * (xd + xb) + col->holdup_drum_mol * xd;
}

/* 1 when row i can end an interval of the boil-up check: W and V logged, a finite R > 0, not
 * counted at total reflux. The interval (i − 1, i) enters the check when both its rows can and
 * time increases. */
static int boilup_row(const stagecal_runlog *log, const stagecal_runlog_result *res, size_t i)
{
    return isfinite(log->w_mol[i]) && isfinite(log->v_mol_s[i]) && row_usable(res, i, log->r[i]);
}

void runlog_boilup(const stagecal_runlog *log, const stagecal_column *col,
                   const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                   size_t k)
{
    stagecal_runlog_closure *c = &res->closures[k];
    const stagecal_runlog_run *run = &log->runs[k];
    c->has_boilup = 0;
    c->w_fall_mol = c->w_pred_mol = c->u_w_diff_mol = c->boilup_ratio = NAN;
    c->boilup_mismatch = 0;
    if (!log->v_mol_s || run->n < 2)
        return;
    double uw = col ? col->u.w_mol : 0, uv = col ? col->u.v_mol_s : 0;
    double ur = col ? col->u.r : 0, urr = col ? col->u.r_rel : 0;
    double fall = 0, pred = 0, var = 0;
    size_t nint = 0, end = run->first + run->n;
    int right = 0, next_ok = boilup_row(log, res, run->first);
    double d_prev = 0; /* V/(R + 1) of the row before, when it entered */
    for (size_t i = run->first; i < end; i++) {
        /* interval (i − 1, i) was the previous row's right one */
        int left = i > run->first && right, ok = next_ok;
        next_ok = i + 1 < end && boilup_row(log, res, i + 1);
        right = ok && next_ok && log->t_s[i + 1] > log->t_s[i];
        if (!left && !right)
            continue;
        double r = log->r[i], v = log->v_mol_s[i], d = v / (r + 1);
        if (left) {
            pred += 0.5 * (d_prev + d) * (log->t_s[i] - log->t_s[i - 1]);
            fall += log->w_mol[i - 1] - log->w_mol[i];
            nint++;
        }
        d_prev = d;
        /* row i's weight in the prediction (half of each adjacent interval) and in the fall
         * (+1 as an interval's start, −1 as its end); u(D) from u(V) and u(R) */
        double cw = 0.5 * ((left ? log->t_s[i] - log->t_s[i - 1] : 0) +
                           (right ? log->t_s[i + 1] - log->t_s[i] : 0));
        double ur2 = ur * ur + urr * r * urr * r, r1 = r + 1;
        double ud2 = uv * uv / (r1 * r1) + v * v / (r1 * r1 * r1 * r1) * ur2;
        double e = (double)(right - left);
        var += cw * cw * ud2 + e * e * uw * uw;
    }
    if (nint == 0 || !(pred > 0))
        return;
    c->has_boilup = 1;
    c->w_fall_mol = fall;
    c->w_pred_mol = pred;
    c->u_w_diff_mol = sqrt(var);
    c->boilup_ratio = fall / pred;
    c->boilup_mismatch =
        c->u_w_diff_mol > 0 && fabs(fall - pred) > par->boilup_sigmas * c->u_w_diff_mol;
}

/* Weighted straight line y = c0 + d·x; d and its se (scaled
 * up by χ²/dof when above 1). 0 on success. */
static int line_fit(const double *x, const double *w, const double *y, size_t n, double *d,
                    double *se)
{
    double c0, c1, c00, c01, c11, chisq;
    if (n < 4 ||
        gsl_fit_wlinear(x, 1, w, 1, y, 1, n, &c0, &c1, &c00, &c01, &c11, &chisq) != GSL_SUCCESS ||
        !isfinite(c1) || !(c11 > 0))
        return -1;
    double scale = chisq / (double)(n - 2);
    *d = c1;
    *se = sqrt(c11 * (scale > 1 ? scale : 1));
    return 0;
}

/* The column's light holdup behind the balance, per row of run k: light[i − first] [mol]
 * (NAN where the column's content is not modelled: the row is left out of the balance fit) and
 * lh[i − first] = ∂light/∂(column holdup) [-] (0 when the holdup is taken as exact). With the
 * stage-holdup compensation (STAGES) the content is the pseudo-steady profile of the row
 * (holdup_column_light: the liquids down the holdup-corrected operating line from the logged
 * xD at the row's reflux set point, each run's own holdup), on the rows whose distillate the
 * compensation could take as settled (a finite xd_ss): a column still filling at start-up,
 * or moving to a new set point, holds an unknown profile. Otherwise the straight profile of
 * runlog_holdup_light, on every row. Per run, so that it needs the run's length only. */
static void column_light(const stagecal_runlog *log, const stagecal_column *col,
                         const holdup_resolved *hr, const double *xd_ss, size_t k, double *light,
                         double *lh)
{
    size_t first = log->runs[k].first, end = first + log->runs[k].n;
    for (size_t i = first; i < end; i++) {
        light[i - first] = runlog_holdup_light(col, log->xd[i], log->xb[i]);
        lh[i - first] = 0;
    }
    if (hr->kind != STAGECAL_HOLDUP_COMP_STAGES)
        return;
    double hk = hr->run_h[k];
    for (size_t s = first; s < end;) {
        size_t e = s + 1;
        while (e < end && runlog_rset(log, e) == runlog_rset(log, s))
            e++;
        for (size_t i = s; i < e; i++) {
            double r = runlog_rset(log, i), se, l;
            double v = log->v_mol_s ? log->v_mol_s[i] : NAN;
            double d = isfinite(r) ? holdup_row_slope(log, s, e, i, NULL, col->u.xd, &se) : 0;
            stagecal_holdup_state st = {isfinite(hk) ? hk : 0, hr->drum_mol, v, d};
            light[i - first] = lh[i - first] = NAN;
            if (isfinite(xd_ss[i]) && isfinite(log->xb[i]) && (isinf(r) || isfinite(d)) &&
                holdup_column_light(col->system.vle, log->xd[i], log->xb[i],
                                    isfinite(r) ? r : INFINITY, &st, &l) == STAGECAL_OK) {
                light[i - first] = l;
                lh[i - first] =
                    st.holdup_mol > 0 ? (l - st.drum_mol * log->xd[i]) / st.holdup_mol : 0;
            }
        }
        s = e;
    }
}

/* Balance estimates of run k for both hypotheses (light, lh: column_light; u_hold the
 * relative standard uncertainty of the run's holdup h_run [mol], whose error moves every
 * row's light holdup alike and so the drift estimates by u·h_run·∂d/∂h_run, added to their
 * variance). The closure is taken again between the first and the last row of the fit when
 * the column's content is modelled (the rows before have an unknown column profile).
 * light, lh: column_light of the run (indexed from its first row). Scratch: 5 arrays of the
 * run's length. */
static void balance_sigs(const stagecal_runlog *log, const stagecal_column *col,
                         const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                         size_t k, const double *light, const double *lh, double h_run,
                         double u_hold, int modelled, double *h, double *a, double *b, double *w,
                         double *q)
{
    const stagecal_runlog_run *run = &log->runs[k];
    stagecal_runlog_closure *c = &res->closures[k];
    double uxb = col ? col->u.xb : 0;
    double integral = 0, ta = 0, t0 = NAN;
    size_t m = 0, prev = SIZE_MAX;
    for (size_t i = run->first; i < run->first + run->n; i++) {
        if (!(isfinite(log->w_mol[i]) && isfinite(log->xd[i]) && isfinite(log->xb[i])))
            continue;
        double t = log->t_s[i] / 3600.0;
        if (isnan(t0))
            t0 = t;
        if (prev != SIZE_MAX) {
            double dw = log->w_mol[prev] - log->w_mol[i], tp = log->t_s[prev] / 3600.0;
            integral += 0.5 * (log->xd[i] + log->xd[prev]) * dw;
            ta += 0.5 * (t + tp - 2 * t0) * dw;
        }
        prev = i;
        double li = light[i - run->first];
        if ((res->flags[i] & STAGECAL_SAMPLE_OUTLIER) || !isfinite(li))
            continue;
        double s = uxb > 0 ? uxb : stagecal_runlog_u_xb(col, log->xb[i]);
        h[m] = log->w_mol[i] * log->xb[i] + integral + li;
        a[m] = ta;
        b[m] = log->w_mol[i] * (t - t0);
        w[m] = s > 0 ? 1.0 / (log->w_mol[i] * s * log->w_mol[i] * s) : 1.0;
        q[m] = u_hold * h_run * lh[i - run->first];
        m++;
    }
    stagecal_runlog_drift_sig *sd = &c->sig[0], *sb = &c->sig[1];
    double dq, sq;
    int hq = u_hold > 0 && h_run > 0;
    if (line_fit(a, w, h, m, &sd->d_bal, &sd->se_bal) == 0) {
        sd->n_bal = m;
        if (hq && line_fit(a, w, q, m, &dq, &sq) == 0)
            sd->se_bal = hypot(sd->se_bal, dq);
    }
    if (line_fit(b, w, h, m, &sb->d_bal, &sb->se_bal) == 0) {
        sb->n_bal = m;
        if (hq && line_fit(b, w, q, m, &dq, &sq) == 0)
            sb->se_bal = hypot(sb->se_bal, dq);
    }
    if (modelled && m >= 2 && h[0] > 0) {
        c->closure = (h[0] - h[m - 1]) / h[0];
        c->u_closure = hypot(c->u_closure, (q[0] - q[m - 1]) / h[0]);
        c->gross = c->u_closure > 0 && fabs(c->closure) > par->gross_sigmas * c->u_closure;
    }
}

/* Median of v[0..n) (v is reordered): GSL's selection (runlog_median), the same double a sort
 * gives (the middle value, or the mean of the two middle values), in linear time. */
static double median_of(double *v, size_t n)
{
    return runlog_median(v, n);
}

/* The conditions of the rows of one stretch (one reflux r), kept from row to row. */
typedef struct {
    stagecal_physics_cond pc;
    double p;  /* the logged pressure they were taken at */
    int valid; /* 1: pc holds them */
} stretch_cond;

/* Row a's conditions at distillate xd and reflux r (physics.h) in sc->pc; 1 when there are
 * some to use. stagecal_physics_cond_at reads xd only to check its range and, with a logged
 * reflux temperature at a finite R > 0, for the subcooling; without that they are a function
 * of the pressure and r alone: a row at the pressure of the last call (or both without one)
 * takes its conditions (the same bytes) instead of a call (row_cond_kept). */
static int row_cond(const stagecal_runlog *log, stagecal_physics *ph, size_t a, double xd, double r,
                    stretch_cond *sc)
{
    double p = log->p_pa ? log->p_pa[a] : NAN, tr = log->t_reflux_k ? log->t_reflux_k[a] : NAN;
    int ok = stagecal_physics_cond_at(ph, p, xd, r, tr, &sc->pc, NULL) == STAGECAL_OK;
    sc->valid = ok && !(isfinite(tr) && isfinite(r) && r != 0);
    sc->p = p;
    return ok;
}

/* As row_cond when the row's conditions are those in sc (1, or 0 for an xd out of range);
 * −1 when row_cond must be called. */
static int row_cond_kept(const stagecal_runlog *log, size_t a, double xd, double r,
                         const stretch_cond *sc)
{
    double p = log->p_pa ? log->p_pa[a] : NAN, tr = log->t_reflux_k ? log->t_reflux_k[a] : NAN;
    int same_p = p == sc->p || (!(isfinite(p) && p > 0) && !(isfinite(sc->p) && sc->p > 0));
    int by_xd = isfinite(tr) && isfinite(r) && r != 0;
    if (sc->valid && same_p && !by_xd && r >= 0)
        return xd >= 0 && xd <= 1;
    return -1;
}

/* The stage relation's estimates of run k, in distillate space (see the top): the rows after
 * the warm-up, grouped by stretches of one logged R; a stretch's count N_s is the median of
 * its ok rows' counts at the compensated distillate (the median is unbiased under the
 * monotone, skewed map from xD to N; a mean of counts is not); each ok row's residual
 * r = xD − X(xB; N_s, R) (xd_for_count). The per-sample counts are not regressed on directly:
 * near a pure distillate a count is a logarithm of 1 − xD, skewed and heavy-tailed under the
 * analyser's noise, and a slope fitted to counts is biased. Scratch: 8 arrays of the run's
 * length and win. */
static void stage_sigs(const stagecal_runlog *log, const stagecal_column *col, stagecal_physics *ph,
                       double murphree, const stagecal_runlog_result *res, const double *xd_ss,
                       const double *u2, double u_hold, size_t k, double *scr, size_t len,
                       int32_t *win)
{
    const stagecal_runlog_run *run = &log->runs[k];
    stagecal_runlog_closure *c = &res->closures[k];
    double t0 = log->t_s[run->first] / 3600.0;
    double *rr = scr, *t = scr + len, *sens = scr + 2 * len, *w = scr + 3 * len, *g = scr + 4 * len,
           *tmp = scr + 5 * len, *dl = scr + 6 * len, *hx = scr + 7 * len, *dgs = scr + 8 * len,
           *es = scr + 9 * len;
    size_t m = 0;
    int32_t *key = malloc(run->n * sizeof *key);
    xd_row *xr = malloc(run->n * sizeof *xr);
    if (!key || !xr) {
        free(key), free(xr);
        return;
    }
    /* the inversion's parameters, built once per run rather than at every Newton step */
    stagecal_stages_params sp = stagecal_stages_default_params();
    sp.want_sensitivities = 1;
    for (size_t i = 0, s = 0; i < run->n; i++) {
        size_t row = run->first + i;
        double rs = runlog_rset(log, row), rp = i > 0 ? runlog_rset(log, row - 1) : rs;
        if (i > 0 && !(rs == rp || (isnan(rs) && isnan(rp))))
            s++;
        key[i] = (res->flags[row] & STAGECAL_SAMPLE_WARMUP) ? -1 : (int32_t)s;
    }
    for (size_t i = run->first; i < run->first + run->n;) {
        int32_t wk = key[i - run->first];
        size_t e = i + 1;
        while (e < run->first + run->n && key[e - run->first] == wk)
            e++;
        if (wk < 0) {
            i = e;
            continue;
        }
        /* the stretch's count: median over its ok rows at the compensated distillate */
        size_t q = 0;
        for (size_t a = i; a < e; a++)
            if (res->status[a] == STAGECAL_STAGES_OK && !(res->flags[a] & STAGECAL_SAMPLE_OUTLIER))
                tmp[q++] = res->stages[a] +
                           (isfinite(xd_ss[a]) ? res->dn_dxd[a] * (xd_ss[a] - log->xd[a]) : 0);
        if (q < 4) {
            i = e;
            continue;
        }
        double nw = median_of(tmp, q);
        double r = (res->flags[i] & STAGECAL_SAMPLE_TOTAL_REFLUX) ? INFINITY : runlog_rset(log, i);
        stretch_cond sc = {.valid = 0};
        size_t nx = 0; /* rows waiting for their search (the conditions in sc) */
        for (size_t a = i; a <= e; a++) {
            int cr = 1;
            if (a < e) {
                /* a row the compensation takes as still settling (NAN) is not in the relation:
                 * with its raw xD it made a trend on 2-min logs of a holdup column */
                double xd = xd_ss[a];
                if (!(isfinite(xd) && isfinite(log->xb[a])) ||
                    log->xd_cens[a] != STAGECAL_CENSOR_NONE ||
                    log->xb_cens[a] != STAGECAL_CENSOR_NONE ||
                    res->status[a] != STAGECAL_STAGES_OK ||
                    (res->flags[a] & STAGECAL_SAMPLE_OUTLIER))
                    continue;
                cr = ph ? row_cond_kept(log, a, xd, r, &sc) : 1;
            }
            /* the waiting rows are searched before the conditions are taken again (the models
             * they point to live in ph's cache until then) and at the stretch's end; their
             * results go in in row order */
            if (a == e || cr < 0) {
                runlog_drift_xd_for_count(col->system.vle, ph ? &sc.pc : NULL, murphree, &sp, log,
                                          res, xd_ss, r, nw, xr, nx);
                for (size_t b = 0; b < nx; b++) {
                    const xd_row *o = &xr[b];
                    size_t ra = o->a;
                    if (!o->ok)
                        continue;
                    double ud = stagecal_runlog_u_xd(col, log->xd[ra]);
                    double ub = stagecal_runlog_u_xb(col, log->xb[ra]) * o->sens;
                    /* the compensation's shift Δ: its holdup part (u_hold·Δ) is common to the
                     * run's rows and enters through dl below; the rest (the slope's noise) is
                     * the row's own */
                    double sh = isfinite(xd_ss[ra]) ? xd_ss[ra] - log->xd[ra] : 0;
                    double uc = isfinite(u2[ra]) ? fmax(u2[ra] - sh * u_hold * sh * u_hold, 0) : 0;
                    rr[m] = xd_ss[ra] - o->x;
                    t[m] = log->t_s[ra] / 3600.0 - t0;
                    sens[m] = o->sens;
                    hx[m] = o->dxdn;
                    w[m] = ud * ud + ub * ub + uc > 0 ? 1.0 / (ud * ud + ub * ub + uc) : 1.0;
                    dl[m] = u_hold * sh;
                    win[m] = wk;
                    m++;
                }
                nx = 0;
                if (a == e)
                    break;
                cr = row_cond(log, ph, a, xd_ss[a], r, &sc);
            }
            if (!cr)
                continue;
            /* Newton's first point is the row's own count when the compensation left its xD
             * as logged and the row was counted at this R (runlog_invert.c: the same physics
             * call with the same parameters): the count and its derivatives from res, the
             * same doubles */
            double rs_a = runlog_rset(log, a);
            double r_row =
                isfinite(rs_a) && (res->flags[a] & STAGECAL_SAMPLE_TOTAL_REFLUX) ? INFINITY : rs_a;
            xr[nx].a = a;
            xr[nx].own = ph && xd_ss[a] == log->xd[a] && r_row == r;
            nx++;
        }
        i = e;
    }
    free(key), free(xr);
    for (int j = 0; j < 2; j++) {
        for (size_t a = 0; a < m; a++)
            g[a] = j == 0 ? t[a] : sens[a] * t[a];
        stagecal_runlog_drift_sig *sg = &c->sig[j];
        double dq, sq;
        if (runlog_drift_within_fit(rr, g, w, win, m, &sg->d_stg, &sg->se_stg) == 0) {
            sg->n_stg = m;
            /* the holdup's error shifts the compensated rows alike: its effect on d */
            if (u_hold > 0 && runlog_drift_within_fit(dl, g, w, win, m, &dq, &sq) == 0)
                sg->se_stg = hypot(sg->se_stg, dq);
            sg->se_stg *= runlog_drift_collinear_factor(g, hx, w, win, m);
            if (runlog_drift_free_fit(rr, g, hx, w, win, m, &sg->d_free, &sg->se_free, dgs, es) !=
                0)
                sg->d_free = sg->se_free = NAN;
            else if (u_hold > 0 &&
                     runlog_drift_free_fit(dl, g, hx, w, win, m, &dq, &sq, dgs, es) == 0)
                sg->se_free = hypot(sg->se_free, dq);
            if (!isfinite(sg->se_stg)) {
                sg->d_stg = sg->se_stg = NAN;
                sg->n_stg = 0;
            }
        } else {
            sg->d_stg = sg->se_stg = NAN;
        }
    }
}

/* The trend of the share of distillate readings at the analyser's upper limit in run k
 * (stagecal_runlog_closure.z_limit): the Cochran–Armitage trend statistic (Armitage, P.
 * (1955), "Tests for linear trends in proportions and frequencies", Biometrics 11, 375–386;
 * from memory), stratified by the production stretches of one reflux set point after the
 * warm-up: U = Σ (t − t̄_s)(c − c̄_s), c = 1 for a reading at the limit, with its permutation
 * variance Σ_s c̄_s(1 − c̄_s)·n_s/(n_s − 1)·Σ (t − t̄_s)²; z = U/√var. Total reflux is left
 * out (the distillate still rises there). NaN when no stretch has readings both at and below
 * the limit. */
static double limit_trend(const stagecal_runlog *log, const stagecal_runlog_result *res, size_t k)
{
    const stagecal_runlog_run *run = &log->runs[k];
    size_t end = run->first + run->n;
    double u = 0, var = 0;
    for (size_t s = run->first; s < end;) {
        size_t e = s + 1;
        double rs = runlog_rset(log, s);
        while (e < end && runlog_rset(log, e) == rs)
            e++;
        double st = 0, sc = 0, n = 0;
        for (int pass = 0; pass < 2 && isfinite(rs); pass++) {
            double mt = n > 0 ? st / n : 0, mc = n > 0 ? sc / n : 0, stt = 0, stc = 0;
            for (size_t i = s; i < e; i++) {
                if ((res->flags[i] & (STAGECAL_SAMPLE_WARMUP | STAGECAL_SAMPLE_TOTAL_REFLUX |
                                      STAGECAL_SAMPLE_OUTLIER)) ||
                    !isfinite(log->xd[i]))
                    continue;
                double t = log->t_s[i] / 3600.0, c = log->xd_cens[i] == STAGECAL_CENSOR_ABOVE;
                if (pass == 0) {
                    st += t, sc += c, n++;
                } else {
                    stt += (t - mt) * (t - mt);
                    stc += (t - mt) * (c - mc);
                }
            }
            if (pass == 1 && n > 1 && mc > 0 && mc < 1) {
                u += stc;
                var += mc * (1 - mc) * n / (n - 1) * stt;
            }
        }
        s = e;
    }
    return var > 0 ? u / sqrt(var) : NAN;
}

/* 1 when a hypothesis' two estimates contradict each other: opposite signs, each beyond zc
 * standard errors. The two analysers move the stage relation in opposite directions for one
 * direction of the balance (see the top), so at most one of them is contradicted by a real
 * drift's residual trend, however much of it the stretch counts take up. */
static int contradicts(const stagecal_runlog_drift_sig *s, double zc)
{
    return s->n_bal > 0 && s->n_stg > 0 && s->d_bal * s->d_stg < 0 &&
           fabs(s->d_bal) > zc * s->se_bal && fabs(s->d_stg) > zc * s->se_stg;
}

/* The share of distillate readings at the physical bound 1 in run k's production rows after
 * the warm-up (stagecal_runlog_closure.z_bound): the sign test (Dixon, W. J. & Mood, A. M.
 * (1946), "The statistical sign test", J. Amer. Statist. Assoc. 41, 557–566; from memory)
 * against the bound. A distillate is below 1, so an analyser whose errors are symmetric
 * about 0 (the stated noise) reads 1 or more — and reports 1, censored — with probability
 * below ½ on every row, whatever the column's stage count; c of n such rows has a tail
 * P(C ≥ c) ≤ P(Binomial(n, ½) ≥ c). Returned as the one-sided normal quantile of that tail
 * (Φ⁻¹(1 − P), ≥ 4 at P ≤ 3.2e-5); readings censored at a limit below 1 (">0.999") are
 * counted as not at the bound (the true distillate may exceed such a limit), which only
 * lowers c. NaN without production rows. A pot drift leaves the distillate readings alone;
 * a distillate analyser reading high puts more than half of them at 1. */
static double bound_sign(const stagecal_runlog *log, const stagecal_runlog_result *res, size_t k)
{
    const stagecal_runlog_run *run = &log->runs[k];
    unsigned int n = 0, c = 0;
    for (size_t i = run->first; i < run->first + run->n; i++) {
        if ((res->flags[i] &
             (STAGECAL_SAMPLE_WARMUP | STAGECAL_SAMPLE_TOTAL_REFLUX | STAGECAL_SAMPLE_OUTLIER)) ||
            !isfinite(log->xd[i]) || !(isfinite(log->r[i]) && log->r[i] > 0))
            continue;
        n++;
        c += log->xd_cens[i] == STAGECAL_CENSOR_ABOVE && log->xd[i] >= 1;
    }
    if (n == 0)
        return NAN;
    if (c == 0)
        return -INFINITY;
    double p = gsl_cdf_binomial_Q(c - 1, 0.5, n); /* P(C > c − 1) = P(C ≥ c) */
    return p > 0 ? gsl_cdf_ugaussian_Qinv(p) : INFINITY;
}

/* The likelihood ratio of one simple hypothesis against another that counts as strong
 * evidence for it (Royall, R. (1997), Statistical Evidence: A Likelihood Paradigm, Chapman &
 * Hall, ch. 1: 8 "fairly strong", 32 "strong"; from memory). */
#define DRIFT_STRONG_LR 32.0

static void decide(const stagecal_column *col, const stagecal_runlog_analysis_params *par,
                   double span_h, stagecal_runlog_closure *c)
{
    double u[2] = {col ? col->u.xd : 0, col ? col->u.xb : 0};
    int best = -1;
    for (int j = 0; j < 2; j++) {
        stagecal_runlog_drift_sig *s = &c->sig[j];
        int hb = s->n_bal > 0, hs = s->n_stg > 0;
        if (hb && hs) {
            double wb = 1 / (s->se_bal * s->se_bal), ws = 1 / (s->se_stg * s->se_stg);
            s->d = (wb * s->d_bal + ws * s->d_stg) / (wb + ws);
            s->se = 1 / sqrt(wb + ws);
            double dd = s->d_bal - s->d_stg;
            s->q_stat = dd * dd / (s->se_bal * s->se_bal + s->se_stg * s->se_stg);
        } else if (hb || hs) {
            s->d = hb ? s->d_bal : s->d_stg;
            s->se = hb ? s->se_bal : s->se_stg;
        } else {
            continue;
        }
        s->t_stat = s->se > 0 ? (s->d / s->se) * (s->d / s->se) : 0;
        if (hb && isfinite(s->d_free) && s->se_free > 0) {
            double wb = 1 / (s->se_bal * s->se_bal), wf = 1 / (s->se_free * s->se_free);
            double df = (wb * s->d_bal + wf * s->d_free) / (wb + wf);
            s->t_name = df * df * (wb + wf);
        }
        if (best < 0 || s->t_stat > c->sig[best].t_stat)
            best = j;
    }
    /* Detection and identification take different stage estimates. Detection (is there a
     * drift?) takes the larger T, whose stage estimate is the median-count fit: a stretch's
     * median count takes up part of a distillate drift (an attenuated estimate, with the se
     * of the free-count model: collinear_factor), which costs power but keeps the false-alarm
     * rate where the holdup compensation's own model error makes the free-count estimate
     * significant on clean 2-min logs (docs/methods.md has the figures). Identification (which
     * analyser?) takes the GLR statistic with the free-count estimate (t_name, unbiased under
     * either drift): the attenuated one tipped the choice to the pot analyser, the GLR's
     * identification rule (Narasimhan & Mah 1987) needs the hypotheses' maximised likelihoods.
     * Without it for either hypothesis, the earlier rule: the balance's statistics among the
     * hypotheses whose stage estimate does not contradict their balance; without any stage
     * estimate, the balance alone names an analyser only on strong evidence (below). */
    double tmax = best < 0 ? 0 : c->sig[best].t_stat;
    int bal_only = 0; /* named by the balance alone: strong evidence, or unattributed */
    if (isfinite(c->sig[0].t_name) && isfinite(c->sig[1].t_name)) {
        best = c->sig[0].t_name >= c->sig[1].t_name ? 0 : 1;
    } else if (c->sig[0].n_bal > 0 && c->sig[1].n_bal > 0) {
        double z0 = c->sig[0].d_bal / c->sig[0].se_bal, z1 = c->sig[1].d_bal / c->sig[1].se_bal;
        int k0 = contradicts(&c->sig[0], par->drift_sign_z);
        int k1 = contradicts(&c->sig[1], par->drift_sign_z);
        best = k0 != k1 ? k0 : (z0 * z0 >= z1 * z1 ? 0 : 1);
        /* no stage estimate for either: the likelihood ratio of the two hypotheses'
         * maximised likelihoods, exp(|z0² − z1²|/2), must reach DRIFT_STRONG_LR, and the
         * weighings the two signatures rest on (a_k against W_k·t_k) must pass their own
         * check (W's fall against V/(R + 1)) */
        if (c->sig[0].n_stg == 0 && c->sig[1].n_stg == 0)
            bal_only = fabs(z0 * z0 - z1 * z1) >= 2 * log(DRIFT_STRONG_LR) && c->has_boilup &&
                               !c->boilup_mismatch
                           ? 1
                           : -1;
    }
    c->drift_analyser = STAGECAL_DRIFT_NONE;
    c->drift = 0;
    /* distillate readings running into the analyser's limit more and more often: only a
     * distillate analyser drifting up does that (a pot drift leaves the xD readings alone),
     * and the readings at the limit hide it from both signatures */
    if ((isfinite(c->z_limit) && c->z_limit >= par->drift_t) || c->z_bound >= par->drift_t) {
        c->drift = 1;
        c->drift_analyser = STAGECAL_DRIFT_DISTILLATE;
        return;
    }
    if (best < 0)
        return;
    const stagecal_runlog_drift_sig *s = &c->sig[best];
    int big = u[best] > 0 ? fabs(s->d) * span_h > par->drift_u * u[best] : 1;
    if (!(tmax >= par->drift_t * par->drift_t) || !big)
        return;
    c->drift = 1;
    int both = s->n_bal > 0 && s->n_stg > 0;
    /* the two estimates of the named hypothesis must not contradict each other: opposite
     * signs, each significant */
    int ok = bal_only ? bal_only > 0 : both && !contradicts(s, par->drift_sign_z);
    c->drift_analyser = ok ? (best == 0 ? STAGECAL_DRIFT_DISTILLATE : STAGECAL_DRIFT_POT)
                           : STAGECAL_DRIFT_UNATTRIBUTED;
}

/* The relative standard uncertainty of the compensation's shift in run k: the holdup's
 * (STAGES) or the time constant's (LAG); 0 without a compensation. */
static double hold_u_rel(const holdup_resolved *hr, size_t k)
{
    if (hr->kind == STAGECAL_HOLDUP_COMP_STAGES)
        return isfinite(hr->run_u[k]) ? hr->run_u[k] : 0;
    if (hr->kind == STAGECAL_HOLDUP_COMP_LAG) {
        const stagecal_holdup_tau *t = hr->tau[k].ok ? &hr->tau[k] : &hr->pooled;
        return t->ok && t->tau_s > 0 ? t->se_tau_s / t->tau_s : 0;
    }
    return 0;
}

struct drift_job {
    const stagecal_runlog *log;
    const stagecal_column *col;
    double murphree;
    const stagecal_runlog_analysis_params *par;
    stagecal_physics *const *phs; /* one per thread */
    stagecal_runlog_result *res;
    const holdup_resolved *hr;
    const double *xd_ss, *u2;
    size_t maxrun;
    double *scr;  /* 12·maxrun per thread */
    int32_t *win; /* maxrun per thread */
};

/* Run k's boil-up check, signatures and decision, in res->closures[k] alone. */
static int drift_run(void *ctx, size_t k, size_t worker, stagecal_error *err)
{
    const struct drift_job *j = ctx;
    const stagecal_runlog *log = j->log;
    const holdup_resolved *hr = j->hr;
    size_t maxrun = j->maxrun;
    double *scr = j->scr + worker * 12 * maxrun;
    double *light = scr + 10 * maxrun, *lh = scr + 11 * maxrun;
    int32_t *win = j->win + worker * maxrun;
    stagecal_runlog_closure *c = &j->res->closures[k];
    const stagecal_runlog_run *run = &log->runs[k];
    (void)err;
    /* The analysis checked the boil-up (close_run) before any row was flagged at total reflux
     * (runlog_mark_no_distillate and runlog_windows flag them after it), and the check reads
     * no other flag: unless a row of the run is flagged now, its sums stand (the same log and
     * column, runlog.h) and only the decision is taken again, with these parameters. */
    const unsigned char *fl = j->res->flags + run->first;
    int tr = 0;
    for (size_t i = 0; i < run->n; i++)
        tr |= fl[i] & STAGECAL_SAMPLE_TOTAL_REFLUX;
    if (tr)
        runlog_boilup(log, j->col, j->par, j->res, k);
    else
        c->boilup_mismatch =
            c->has_boilup && c->u_w_diff_mol > 0 &&
            fabs(c->w_fall_mol - c->w_pred_mol) > j->par->boilup_sigmas * c->u_w_diff_mol;
    runlog_drift_clear(c);
    if (run->n < 2)
        return STAGECAL_OK;
    double uh = hold_u_rel(hr, k);
    int stg = hr->kind == STAGECAL_HOLDUP_COMP_STAGES;
    column_light(log, j->col, hr, j->xd_ss, k, light, lh);
    balance_sigs(log, j->col, j->par, j->res, k, light, lh, stg ? hr->run_h[k] : 0, stg ? uh : 0,
                 stg, scr, scr + maxrun, scr + 2 * maxrun, scr + 3 * maxrun, scr + 4 * maxrun);
    stage_sigs(log, j->col, j->phs[worker], j->murphree, j->res, j->xd_ss, j->u2, uh, k, scr,
               maxrun, win);
    c->z_limit = limit_trend(log, j->res, k);
    c->z_bound = bound_sign(log, j->res, k);
    double span = (log->t_s[run->first + run->n - 1] - log->t_s[run->first]) / 3600.0;
    decide(j->col, j->par, span, c);
    return STAGECAL_OK;
}

int runlog_drift_threads(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                         const stagecal_runlog_analysis_params *par, stagecal_physics *const *phs,
                         size_t nthreads, stagecal_runlog_result *res, stagecal_error *err)
{
    size_t maxrun = 1, n = log->n ? log->n : 1, nt = nthreads + 1;
    for (size_t k = 0; k < log->nruns; k++)
        maxrun = log->runs[k].n > maxrun ? log->runs[k].n : maxrun;
    /* per thread 10 arrays of scratch, the run's light and lh: per run; the compensated
     * distillate and its variance: per row of the log (the compensation pools across runs) */
    double *scr = malloc(nt * 12 * maxrun * sizeof *scr);
    int32_t *win = malloc(nt * maxrun * sizeof *win);
    double *xd_ss = malloc(2 * n * sizeof *xd_ss), *u2 = xd_ss ? xd_ss + n : NULL;
    if (!scr || !win || !xd_ss) {
        free(scr), free(win), free(xd_ss);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    /* the compensated distillate the evidence will use (the same compensation) */
    holdup_resolved hr;
    int rc = holdup_resolve(log, col, par->holdup, par->holdup_pooled, &hr, xd_ss, u2, NULL, err);
    if (rc == STAGECAL_OK) {
        struct drift_job j = {log, col, murphree, par, phs, res, &hr, xd_ss, u2, maxrun, scr, win};
        rc = parallel_for(log->nruns, nthreads, drift_run, &j, err);
    }
    holdup_resolved_free(&hr);
    free(scr), free(win), free(xd_ss);
    return rc;
}

int runlog_drift(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                 const stagecal_runlog_analysis_params *par, stagecal_physics *ph,
                 stagecal_runlog_result *res, stagecal_error *err)
{
    stagecal_physics *own = ph ? NULL : stagecal_physics_alloc(col, NULL, NULL);
    if (!ph)
        ph = own; /* NULL when that failed: the plain model */
    int rc = runlog_drift_threads(log, col, murphree, par, &ph, 0, res, err);
    stagecal_physics_free(own);
    return rc;
}

void runlog_drift_clear(stagecal_runlog_closure *c)
{
    for (int j = 0; j < 2; j++) {
        stagecal_runlog_drift_sig *s = &c->sig[j];
        s->d_bal = s->se_bal = s->d_stg = s->se_stg = s->d = s->se = NAN;
        s->d_free = s->se_free = s->t_name = NAN;
        s->t_stat = 0;
        s->q_stat = NAN;
        s->n_bal = s->n_stg = 0;
    }
    c->z_limit = c->z_bound = NAN;
}

/*
 * runlog_drift_search.c — the drift check's distillate searches (runlog_drift.c, the stage
 * relation): for each row of a stretch, the distillate X at which the count at the row's xB
 * and the stretch's reflux equals the stretch's count N_s, by safeguarded Newton; four rows'
 * searches side by side, their constant-α counts through the closed form's four lanes
 * (stages_alpha_closed4_avx2, xd_alpha), each search taking the same points and counts as it
 * would alone.
 */
#include <math.h>

#include "stagecal/physics.h"
#include "stagecal/stages.h"
#include "stages_internal.h" /* (its GSL header first: banned.h, in internal.h, renames libc names) */

#include "internal.h"
#include "runlog_internal.h"

/* Searches side by side in runlog_drift_xd_for_count (the closed form's four lanes). */
#define XD_LANES 4

/* One search in progress: the bracket [lo, hi], the point x, the iteration it. */
typedef struct {
    xd_row *row;
    double lo, hi, x, x0, xb;
    int it;
} xd_search;

/* The distillate X at which the plain count at (xb, r) equals target: safeguarded Newton
 * on N(x) − target from x0 (N rises with xD; a pinch means x too high, an invalid count x
 * too low), with the bracket halved when a step leaves it. xd_start sets the search up,
 * xd_step takes the count at s->x (rc: the call's code) and returns 1 when X is found, −1
 * when the search failed, 0 with the next point in s->x. */
static void xd_start(xd_search *s, xd_row *row, double xb, double x0)
{
    s->row = row;
    s->lo = xb, s->hi = 1.0;
    s->x = x0 > s->lo && x0 < s->hi ? x0 : 0.5 * (s->lo + s->hi);
    s->x0 = x0, s->xb = xb;
    s->it = 0;
}

static int xd_step(xd_search *s, double target, int rc, int status, double n, double dxd,
                   double dxb)
{
    double x = s->x, xn;
    if (rc != STAGECAL_OK || status != STAGECAL_STAGES_OK) {
        if (rc == STAGECAL_OK && status == STAGECAL_STAGES_PINCH)
            s->hi = x;
        else
            s->lo = x;
        xn = 0.5 * (s->lo + s->hi);
    } else {
        double f = n - target;
        if (fabs(f) < 1e-9 || s->hi - s->lo < 1e-14) {
            xd_row *o = s->row;
            o->x = x;
            o->sens = dxd > 0 ? dxb / dxd : NAN;
            o->dxdn = dxd > 0 ? 1.0 / dxd : NAN;
            return isfinite(o->sens) && isfinite(o->dxdn) ? 1 : -1;
        }
        if (f > 0)
            s->hi = x;
        else
            s->lo = x;
        xn = dxd > 0 ? x - f / dxd : NAN;
        if (!(xn > s->lo && xn < s->hi))
            xn = 0.5 * (s->lo + s->hi);
    }
    s->x = xn;
    return ++s->it < 60 ? 0 : -1;
}

/* The counts at the points of the searches s[j] with bit j of busy set, into sr[j] and rc[j]:
 * stagecal_stages_invert (quiet) of vle at reflux r, one row a call (the constant-α rows the
 * four-row path takes go through xd_alpha instead). */
static void xd_counts(const stagecal_vle *vle, double r, double murphree,
                      const stagecal_stages_params *sp, const xd_search *s, unsigned busy,
                      stagecal_stages_result *sr, int *rc)
{
    for (int j = 0; j < XD_LANES; j++)
        if (busy >> j & 1)
            rc[j] = stages_invert_quiet(vle, s[j].x, s[j].xb, r, murphree, sp, &sr[j], NULL);
}

/* A free lane j takes the next row of rows[0..n) (*next) and its search starts; a search whose
 * first point is the row's own count takes it from res (no call). Returns 1 when lane j holds
 * a search waiting for its count at s[j].x, 0 when the rows are used up. */
static int xd_fill(xd_search *s, int j, unsigned *busy, const stagecal_runlog *log,
                   const stagecal_runlog_result *res, const double *xd_ss, double target,
                   xd_row *rows, size_t n, size_t *next)
{
    for (;;) {
        if (!(*busy >> j & 1)) {
            if (*next == n)
                return 0;
            xd_row *row = &rows[(*next)++];
            row->ok = 0;
            xd_start(&s[j], row, log->xb[row->a], xd_ss[row->a]);
            *busy |= 1u << j;
        }
        const xd_row *row = s[j].row;
        if (!(s[j].it == 0 && row->own && s[j].x == s[j].x0))
            return 1;
        int d = xd_step(&s[j], target, STAGECAL_OK, STAGECAL_STAGES_OK, res->stages[row->a],
                        res->dn_dxd[row->a], res->dn_dxb[row->a]);
        if (d) {
            s[j].row->ok = d > 0;
            *busy &= ~(1u << j);
        }
    }
}

/* runlog_drift_xd_for_count's searches where every count is the constant-α closed form's
 * four-row path (stages_fast4_applies: alpha, cap): the four lanes' points in x[], xb[] as the
 * kernel reads them, its results taken as stages_invert_quiet would give them (internal.h), a
 * lane it does not take through stages_invert_quiet; the same points and counts as xd_counts.
 * An idle lane keeps its last point (its result is not read). */
static void xd_alpha(const stagecal_vle *vle, double alpha, double cap, double r, double murphree,
                     const stagecal_stages_params *sp, const stagecal_runlog *log,
                     const stagecal_runlog_result *res, const double *xd_ss, double target,
                     xd_row *rows, size_t n)
{
    int want = sp->want_sensitivities;
    xd_search s[XD_LANES];
    double x[XD_LANES], xb[XD_LANES], rr[XD_LANES];
    unsigned busy = 0;
    size_t next = 0;
    for (int j = 0; j < XD_LANES; j++)
        x[j] = 0.5, xb[j] = 0.25, rr[j] = r;
    for (;;) {
        for (int j = 0; j < XD_LANES; j++)
            if (!(busy >> j & 1) && xd_fill(s, j, &busy, log, res, xd_ss, target, rows, n, &next))
                x[j] = s[j].x, xb[j] = s[j].xb;
        if (!busy)
            return;
        alpha_closed_out o[XD_LANES];
        unsigned on = stages_alpha_closed4_avx2(alpha, x, xb, rr, cap, want, o);
        for (int j = 0; j < XD_LANES; j++) {
            if (!(busy >> j & 1))
                continue;
            int d;
            if (on >> j & 1) {
                d = xd_step(&s[j], target, STAGECAL_OK, STAGECAL_STAGES_OK, o[j].count + 1.0,
                            want == 1 ? o[j].d[0] : 0.0, want == 1 ? o[j].d[1] : 0.0);
            } else {
                stagecal_stages_result sr;
                int rc = stages_invert_quiet(vle, s[j].x, s[j].xb, r, murphree, sp, &sr, NULL);
                d = xd_step(&s[j], target, rc,
                            rc == STAGECAL_OK ? sr.status : STAGECAL_STAGES_INVALID, sr.stages,
                            sr.dstages_dxd, sr.dstages_dxb);
            }
            if (d) {
                s[j].row->ok = d > 0;
                busy &= ~(1u << j);
            } else {
                x[j] = s[j].x;
            }
        }
    }
}

/* runlog_drift_xd_for_count (runlog_internal.h): the rows rows[0..n) of a stretch at reflux r with
 * the stretch count target and the conditions cond (NULL: none), XD_LANES searches at a time: each
 * takes the same points and counts as it would alone (the counts at the row's own point from res,
 * the others by the one call below), only the calls are made side by side. cond with neither
 * pseudo-moles nor a pot at its own pressure is inverted by stagecal_stages_invert directly:
 * stagecal_physics_invert would scale the derivatives used here by 1.0, so the doubles are the
 * same. The counts' reasons are not read (the _quiet variants, internal.h). */
void runlog_drift_xd_for_count(const stagecal_vle *vle, const stagecal_physics_cond *cond,
                               double murphree, const stagecal_stages_params *sp,
                               const stagecal_runlog *log, const stagecal_runlog_result *res,
                               const double *xd_ss, double r, double target, xd_row *rows, size_t n)
{
    if (n == 0) /* (cond is then not read: the caller may not have set it) */
        return;
    int plain = cond && !(cond->pseudo_ratio > 0) && cond->vle_pot == cond->vle;
    const stagecal_vle *cv = plain ? cond->vle : vle;
    double cr = plain ? cond->r_int : r, alpha, cap;
    if ((plain || !cond) && stagecal_vle_get_kind(cv) == STAGECAL_VLE_ALPHA &&
        stages_fast4_applies(cv, murphree, sp, &alpha, &cap)) {
        xd_alpha(cv, alpha, cap, cr, murphree, sp, log, res, xd_ss, target, rows, n);
        return;
    }
    xd_search s[XD_LANES];
    unsigned busy = 0;
    size_t next = 0;
    for (;;) {
        for (int j = 0; j < XD_LANES; j++)
            if (!(busy >> j & 1))
                xd_fill(s, j, &busy, log, res, xd_ss, target, rows, n, &next);
        if (!busy)
            return;
        stagecal_stages_result sr[XD_LANES];
        int rc[XD_LANES];
        if (plain || !cond)
            xd_counts(cv, cr, murphree, sp, s, busy, sr, rc);
        else
            for (int j = 0; j < XD_LANES; j++)
                if (busy >> j & 1)
                    rc[j] = physics_invert_quiet(cond, s[j].x, s[j].xb, murphree, sp, &sr[j], NULL);
        for (int j = 0; j < XD_LANES; j++) {
            if (!(busy >> j & 1))
                continue;
            int status = rc[j] == STAGECAL_OK ? sr[j].status : STAGECAL_STAGES_INVALID;
            int d = xd_step(&s[j], target, rc[j], status, sr[j].stages, sr[j].dstages_dxd,
                            sr[j].dstages_dxb);
            if (d) {
                s[j].row->ok = d > 0;
                busy &= ~(1u << j);
            }
        }
    }
}

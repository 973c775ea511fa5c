/*
 * runlog_soft.c — the soft sensor in the run-log reader (softsensor.h; docs/runlog.md
 * "Compositions from temperatures", docs/methods.md).
 *
 * At the end of every run, each row without an xD (xB) reading and with a T_top (T_pot)
 * gets its composition from the temperature through the column's equilibrium at the row's
 * pressure (the pot at top + pressure_drop_pa), with the uncertainty u(T)/|dT/dx| from the
 * column file's uncertainty.t_top (t_pot); where the temperature cannot resolve it the
 * reading is censored (one-sided), as an analyser at its limit would give it. The rows that
 * carry both a temperature and an analyser reading check the sensor: the weighted mean
 * offset of T − T_model(x) over the run against its standard error, a warning when |z|
 * exceeds the two-sided critical value at the params' false-alarm rate.
 * Workload: one inversion (~40 bubble-point solves) per row without a reading.
 */
#include <math.h>
#include <stdio.h>

#include "runlog_internal.h"
#include "stagecal/softsensor.h"

/* Models kept by the soft sensor's physics: a pressure transmitter's noise of ±50 Pa rounds
 * to ~200 distinct pressures (1 Pa resolution), a vacuum batch drifting over a few kPa to
 * thousands; each model ~10 kB with the coarse table, interpolated in ln P from the coarse exact
 * models on the pressure grid (physics.c; ~20x cheaper than building it), found by a hash. */
#define SOFT_PHYSICS_CACHE 1024

stagecal_physics *stagecal_runlog_soft_physics_alloc(const stagecal_column *col,
                                                     stagecal_error *err)
{
    /* models at the logged pressures that answer by solving (a few queries per pressure:
     * one inference or check per row), many of them kept (each is small) */
    stagecal_physics_params pp = stagecal_physics_default_params();
    pp.exact = 1;
    pp.cache_size = SOFT_PHYSICS_CACHE;
    return stagecal_physics_alloc(col, &pp, err);
}

int runlog_soft_wanted(const stagecal_column *col, const stagecal_runlog_params *par)
{
    return par->infer && col && col->system.vle && stagecal_vle_has_temperature(col->system.vle);
}

int runlog_soft_enabled(const struct reader *rd)
{
    return runlog_soft_wanted(rd->col, &rd->par);
}

stagecal_physics *runlog_soft_share(const stagecal_column *col, stagecal_runlog_params *par)
{
    if (par->soft_physics || !runlog_soft_wanted(col, par))
        return NULL;
    return par->soft_physics = stagecal_runlog_soft_physics_alloc(col, NULL);
}

/* One sensor: the top (xD from T_top) or the pot (xB from T_pot). */
struct sensor {
    int top;
    double *x;
    unsigned char *cens;
    const double *t;
    double *u_inf;
    double u_t;
    int role;
    stagecal_softsensor_check chk;
    size_t ninf; /* readings inferred in this run */
};

/* Row i of one sensor; 1 when the row's reading was inferred. */
static int soft_row(struct reader *rd, struct sensor *s, size_t i)
{
    stagecal_runlog *log = rd->log;
    double t = s->t[i], p = log->p_pa ? log->p_pa[i] : NAN;
    const stagecal_vle *vle;
    if (!isfinite(t) || stagecal_physics_vle_at(rd->ph, p, !s->top, &vle, NULL) != STAGECAL_OK)
        return 0;
    if (isfinite(s->x[i])) { /* an analyser reading: check the sensor against it */
        double tm, slope, x = s->x[i];
        int rc = s->top ? stagecal_softsensor_dew_t(vle, x, &tm, &slope, NULL)
                        : stagecal_softsensor_bubble_t(vle, x, &tm, &slope, NULL);
        if (s->cens[i] == STAGECAL_CENSOR_NONE && rc == STAGECAL_OK)
            stagecal_softsensor_check_add(&s->chk, t, s->u_t, tm, slope,
                                          s->top ? stagecal_runlog_u_xd(rd->col, x)
                                                 : stagecal_runlog_u_xb(rd->col, x));
        return 0;
    }
    if (!s->u_inf)
        return 0;
    stagecal_reading r;
    int status;
    if (stagecal_softsensor_infer(vle, t, s->u_t, s->top, NULL, &r, &status, NULL) != STAGECAL_OK)
        return 0;
    if (status == STAGECAL_SOFT_OUTSIDE) {
        log->soft.outside++;
        return 0;
    }
    s->x[i] = r.value;
    s->cens[i] = (unsigned char)r.censor;
    s->u_inf[i] = r.u;
    s->ninf++;
    if (rd->nmissing[s->role] > 0)
        rd->nmissing[s->role]--;
    int cens = status == STAGECAL_SOFT_CENSORED;
    if (s->top)
        log->soft.xd_inferred++, log->soft.xd_censored += (size_t)cens;
    else
        log->soft.xb_inferred++, log->soft.xb_censored += (size_t)cens;
    return 1;
}

/* The sensor's consistency over the run: a warning when it disagrees. */
static void soft_check(struct reader *rd, struct sensor *s, const stagecal_runlog_run *run)
{
    stagecal_softsensor_check *c = &s->chk;
    stagecal_softsensor_check_end(c);
    if (!isfinite(c->z))
        return;
    stagecal_softsensor_params par = stagecal_softsensor_default_params();
    double zc = stagecal_softsensor_check_zcrit(par.alpha, 1);
    rd->log->soft.checks++;
    if (!(fabs(c->z) > zc))
        return;
    rd->log->soft.inconsistent++;
    rd->log->soft.inconsistent_top += (size_t)s->top;
    int h = rd->field_of[s->top ? STAGECAL_RL_TTOP : STAGECAL_RL_TPOT];
    reader_finding(rd, STAGECAL_FINDING_WARNING, run->first_line, rd->hdr[h],
                   "run '%s': %s reads %+.2f K (standard error %.2f K, %zu rows with a reading) "
                   "from the %s of the logged %s at the %s pressure: a wrong pressure, a "
                   "miscalibrated sensor or a wrong equilibrium model (expected |offset| < %.2f "
                   "standard errors)",
                   run->name, s->top ? "T_top" : "T_pot", c->offset_k, c->se_k, c->n,
                   s->top ? "dew point" : "bubble point", s->top ? "xD" : "xB",
                   s->top ? "top" : "pot", zc);
}

void runlog_soft_run(struct reader *rd)
{
    stagecal_runlog *log = rd->log;
    if (!runlog_soft_enabled(rd) || (!log->t_top_k && !log->t_pot_k) || rd->oom)
        return;
    if (!rd->ph && !(rd->ph = rd->par.soft_physics) &&
        !(rd->ph = rd->ph_own = stagecal_runlog_soft_physics_alloc(rd->col, NULL))) {
        rd->oom = 1;
        return;
    }
    const stagecal_uncertainty *u = &rd->col->u;
    struct sensor s[2] = {
        {1, log->xd, log->xd_cens, log->t_top_k, log->u_xd_inf, u->t_top_k, STAGECAL_RL_XD, {0}, 0},
        {0,
         log->xb,
         log->xb_cens,
         log->t_pot_k,
         log->u_xb_inf,
         u->t_pot_k,
         STAGECAL_RL_XB,
         {0},
         0}};
    const stagecal_runlog_run *run = &log->runs[rd->cur_run];
    for (size_t i = run->first; i < run->first + run->n; i++) {
        int was = !isnan(log->t_s[i]) && !isnan(log->w_mol[i]) && !isnan(log->xd[i]) &&
                  !isnan(log->xb[i]) && !isnan(log->r[i]);
        int inferred = 0;
        for (int k = 0; k < 2; k++)
            if (s[k].t)
                inferred |= soft_row(rd, &s[k], i);
        if (inferred && !was && !isnan(log->t_s[i]) && !isnan(log->w_mol[i]) &&
            !isnan(log->xd[i]) && !isnan(log->xb[i]) && !isnan(log->r[i]))
            rd->complete_rows++;
    }
    for (int k = 0; k < 2; k++) {
        if (!s[k].t)
            continue;
        soft_check(rd, &s[k], run);
        if (s[k].u_t > 0 || s[k].ninf == 0 || rd->soft_unstated & (1 << k))
            continue;
        rd->soft_unstated |= 1 << k;
        int h = rd->field_of[k == 0 ? STAGECAL_RL_TTOP : STAGECAL_RL_TPOT];
        reader_finding(rd, STAGECAL_FINDING_WARNING, 0, rd->hdr[h],
                       "column '%s': the column file states no uncertainty.%s, so the "
                       "compositions read from it carry no uncertainty of the sensor and are "
                       "never censored near a pure end (expected the sensor's standard "
                       "uncertainty in K)",
                       rd->hdr[h], k == 0 ? "t_top" : "t_pot");
    }
}

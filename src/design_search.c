/*
 * design_search.c — the K next test conditions: I- or D-optimal augmentation of the
 * current information inside the operating bounds, searched with NLopt's BOBYQA from
 * several starts, and the band before and after at the conditions of interest.
 *
 * Variables: for each test its L/V = R/(R + 1) (so total reflux is the bound L/V = 1)
 * and, for forms that use the vapour load, its F-factor, each mapped to [0, 1]. The
 * objective works on the information scaled to unit diagonal of a reference matrix (the
 * current information plus the mean information of a window over a grid of the bounds):
 * the I-criterion is scale-free, and the scaled log det differs from the true one by a
 * constant, so neither optimum moves. When the current information is singular a small
 * ridge (params.ridge on the scaled matrix) keeps the objective finite and smooth; the
 * reported numbers are always computed without it. Criteria and sources:
 * include/stagecal/design.h, docs/design.md.
 */
#include "stagecal/design.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <nlopt.h>
#include <stdlib.h>
#include <string.h>

#include "design_internal.h"
#include "internal.h"
#include "stagecal/runlog.h"

#define P_MAX STAGECAL_FORM_MAXP
#define GRID_LV 9 /* reference grid for the scaling: L/V points ... */
#define GRID_F 3  /* ... times F points (load forms) */

typedef struct {
    const stagecal_design_problem *pb;
    stagecal_design_criterion crit;
    size_t k, p, n_at;
    int load_free;                   /* F is searched */
    double lv_lo, lv_hi, f_lo, f_hi; /* bounds */
    double r_lo, r_hi;               /* the reflux bounds as given (returned at the ends) */
    double s[P_MAX];                 /* scaling */
    double base[P_MAX * P_MAX];      /* scaled current information (+ ridge) */
    const double *gat;               /* n_at scaled gradients at the conditions of interest */
    const double *w;                 /* n_at normalised weights */
    size_t evals;
} search;

static double r_of(double lv)
{
    return lv >= 1 ? INFINITY : lv / (1 - lv);
}

static void z_to_test(const search *s, const double *z, size_t t, stagecal_design_test *out)
{
    size_t stride = s->load_free ? 2 : 1;
    double u = fmin(1, fmax(0, z[t * stride]));
    double lv = s->lv_lo + u * (s->lv_hi - s->lv_lo);
    /* at a bound return the bound itself: R → L/V → R is not exact in floating point */
    out->r = u <= 0 ? s->r_lo : u >= 1 ? s->r_hi : fmax(s->r_lo, fmin(s->r_hi, r_of(lv)));
    out->f_load = NAN;
    if (s->pb->form.uses_load) {
        double v = s->load_free ? fmin(1, fmax(0, z[t * stride + 1])) : 0;
        out->f_load = v >= 1 ? s->f_hi : s->f_lo + v * (s->f_hi - s->f_lo);
    }
    out->duration_s = NAN;
}

/* The criterion to minimise at z: I: weighted mean of gᵀM⁻¹g; D: −log det of the scaled
 * M. A design where the form is undefined or M is not positive definite gets a huge value
 * (never chosen over a real one). */
static double objective(unsigned n, const double *z, double *grad, void *data)
{
    search *s = data;
    size_t p = s->p;
    double m[P_MAX * P_MAX], g[P_MAX];
    const double bad = 1e300;
    (void)n;
    (void)grad; /* derivative-free */
    s->evals++;
    memcpy(m, s->base, p * p * sizeof *m);
    for (size_t t = 0; t < s->k; t++) {
        stagecal_design_test x;
        z_to_test(s, z, t, &x);
        if (design_grad(s->pb, x.r, x.f_load, g, NULL))
            return bad;
        double w = design_weight(s->pb, x.r); /* 1/σ(R)² of a window at this test's R */
        for (size_t i = 0; i < p; i++)
            g[i] *= s->s[i];
        for (size_t i = 0; i < p; i++)
            for (size_t j = 0; j < p; j++)
                m[i * p + j] += w * g[i] * g[j];
    }
    gsl_matrix_view mv = gsl_matrix_view_array(m, p, p);
    if (gsl_linalg_cholesky_decomp1(&mv.matrix) != GSL_SUCCESS)
        return bad;
    if (s->crit == STAGECAL_DESIGN_D) {
        double ld = 0;
        for (size_t i = 0; i < p; i++)
            ld += 2 * log(m[i * p + i]);
        return -ld;
    }
    double total = 0;
    for (size_t j = 0; j < s->n_at; j++) {
        /* gᵀM⁻¹g = |L⁻¹g|² with M = LLᵀ (forward substitution on the lower triangle) */
        double y[P_MAX], q = 0;
        const double *gj = s->gat + j * p;
        for (size_t i = 0; i < p; i++) {
            double v = gj[i];
            for (size_t l = 0; l < i; l++)
                v -= m[i * p + l] * y[l];
            y[i] = v / m[i * p + i];
            q += y[i] * y[i];
        }
        total += s->w[j] * q;
    }
    return isfinite(total) ? total : bad;
}

/* Start points: 0 spreads the tests over the range, 1 alternates the ends, the rest
 * are uniform random. */
static void start_point(const search *s, size_t start, gsl_rng *rng, double *z)
{
    size_t stride = s->load_free ? 2 : 1;
    for (size_t t = 0; t < s->k; t++) {
        double u, v;
        if (start == 0) {
            u = (t + 0.5) / (double)s->k;
            v = fmod((t + 0.5) * 0.6180339887498949, 1.0);
        } else if (start == 1) {
            u = (double)(t % 2);
            v = (double)((t / 2) % 2);
        } else {
            u = gsl_rng_uniform(rng);
            v = gsl_rng_uniform(rng);
        }
        z[t * stride] = u;
        if (s->load_free)
            z[t * stride + 1] = v;
    }
}

/* A bounded BOBYQA on [0, 1]^n for fn; NULL when NLopt refuses a setting. */
static nlopt_opt make_opt(unsigned n, nlopt_func fn, void *data, const stagecal_design_params *par)
{
    nlopt_opt o = nlopt_create(NLOPT_LN_BOBYQA, n);
    if (o &&
        (nlopt_set_lower_bounds1(o, 0.0) < 0 || nlopt_set_upper_bounds1(o, 1.0) < 0 ||
         nlopt_set_min_objective(o, fn, data) < 0 || nlopt_set_xtol_rel(o, par->xtol_rel) < 0 ||
         nlopt_set_maxeval(o, (int)par->max_eval) < 0)) {
        nlopt_destroy(o);
        o = NULL;
    }
    return o;
}

/* One test's variables moved while the others stay (coordinate exchange). */
typedef struct {
    search *s;
    double *z;       /* the whole design */
    size_t off, dim; /* this test's variables: z[off .. off + n) of dim */
} sub_ctx;

static double sub_objective(unsigned n, const double *x, double *grad, void *data)
{
    sub_ctx *c = data;
    memcpy(c->z + c->off, x, n * sizeof *x);
    return objective((unsigned)c->dim, c->z, grad, c->s);
}

/* Coordinate exchange (Meyer & Nachtsheim 1995, Technometrics 37:60–69): sweep over the
 * tests, each optimised over its own L/V (and F) by BOBYQA from where it is and from
 * the ends, the others fixed, until a sweep gains less than exchange_tol (relative). On return z
 * holds the design and *f its criterion. */
static nlopt_result exchange(search *s, const stagecal_design_params *par, double *z, size_t dim,
                             double *f)
{
    size_t stride = s->load_free ? 2 : 1;
    sub_ctx c = {s, z, 0, dim};
    nlopt_opt o = make_opt((unsigned)stride, sub_objective, &c, par);
    nlopt_result last = NLOPT_SUCCESS;
    if (!o)
        return NLOPT_OUT_OF_MEMORY;
    /* one or two variables: a few hundred evaluations settle them */
    nlopt_set_maxeval(o, (int)par->exchange_max_eval);
    *f = objective((unsigned)dim, z, NULL, s);
    for (size_t sweep = 0; sweep < par->exchange_sweeps; sweep++) {
        double f_old = *f;
        for (size_t t = 0; t < s->k; t++) {
            double keep[2], x[2], fx;
            c.off = t * stride;
            memcpy(keep, z + c.off, stride * sizeof *z);
            for (int from = 0; from < 3; from++) {
                for (size_t i = 0; i < stride; i++)
                    x[i] = from == 0 ? keep[i] : from == 1 ? 0.0 : 1.0;
                nlopt_result r = nlopt_optimize(o, x, &fx);
                if ((r > 0 || r == NLOPT_ROUNDOFF_LIMITED) && fx < *f) {
                    *f = fx;
                    memcpy(keep, x, stride * sizeof *x);
                    last = r;
                }
            }
            memcpy(z + c.off, keep, stride * sizeof *z);
        }
        if (!(f_old - *f > par->exchange_tol * fabs(f_old)))
            break;
    }
    nlopt_destroy(o);
    return last;
}

/* Minimises the objective over the K tests from several starts; best tests into out.
 * Up to par->joint_max variables all move together; beyond that, coordinate exchange. */
static int run_search(search *s, const stagecal_design_params *par, stagecal_design_test *out,
                      int *nl_result, size_t *starts_done, stagecal_error *err)
{
    size_t dim = s->k * (s->load_free ? 2 : 1);
    int joint = dim <= par->joint_max;
    double *z = malloc(2 * dim * sizeof *z), best_f = INFINITY;
    double *zbest = z ? z + dim : NULL;
    nlopt_opt o = joint ? make_opt((unsigned)dim, objective, s, par) : NULL;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    int rc = STAGECAL_OK, any = 0;
    if (!z || (joint && !o) || !rng) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory (design search)");
        goto done;
    }
    gsl_rng_set(rng, par->seed);
    size_t nstarts = joint ? par->starts : par->exchange_starts;
    if (nstarts < 1)
        nstarts = 1;
    for (size_t st = 0; st < nstarts; st++) {
        double f;
        nlopt_result r;
        start_point(s, st, rng, z);
        r = joint ? nlopt_optimize(o, z, &f) : exchange(s, par, z, dim, &f);
        /* ROUNDOFF_LIMITED still leaves the best point found so far in z */
        if (r < 0 && r != NLOPT_ROUNDOFF_LIMITED)
            continue;
        any = 1;
        if (f < best_f) {
            best_f = f;
            memcpy(zbest, z, dim * sizeof *z);
            *nl_result = (int)r;
        }
    }
    *starts_done = nstarts;
    if (!any || !(best_f < 1e300)) {
        rc = error_set(err, STAGECAL_EINTERNAL,
                       "the design search found no admissible set of tests (NLopt: %s)",
                       o && nlopt_get_errmsg(o) ? nlopt_get_errmsg(o) : "no message");
        goto done;
    }
    for (size_t t = 0; t < s->k; t++)
        z_to_test(s, zbest, t, &out[t]);
done:
    free(z);
    nlopt_destroy(o);
    gsl_rng_free(rng);
    return rc;
}

static int cmp_test(const void *a, const void *b)
{
    const stagecal_design_test *x = a, *y = b;
    if (x->r != y->r)
        return x->r < y->r ? -1 : 1;
    if (x->f_load != y->f_load)
        return x->f_load < y->f_load ? -1 : 1;
    return 0;
}

/* A bound not given (NAN) spans the hints (NAN: none) and the conditions of interest'
 * R (load = 0) or F (load = 1). */
static void default_span(const stagecal_design_point *at, size_t n_at, int load,
                         const double hint[2], double *lo, double *hi)
{
    double a = hint[0], b = hint[1];
    for (size_t j = 0; j < n_at; j++) {
        double v = load ? at[j].f_load : at[j].r;
        a = isnan(a) ? v : fmin(a, v);
        b = isnan(b) ? v : fmax(b, v);
    }
    if (isnan(*lo))
        *lo = a;
    if (isnan(*hi))
        *hi = b;
}

/* Fills the bounds of res from par, the hints and the conditions of interest. */
static int set_bounds(const stagecal_design_problem *pb, const stagecal_design_point *at,
                      size_t n_at, const stagecal_design_params *par, const double hint[4],
                      stagecal_design_result *res, stagecal_error *err)
{
    double lo = par->r_lo, hi = par->r_hi, flo = par->f_lo, fhi = par->f_hi;
    default_span(at, n_at, 0, hint, &lo, &hi);
    if (!(lo > 0) || !(hi >= lo))
        return error_set(err, STAGECAL_EINVAL,
                         "reflux range %g:%g is invalid (expected 0 < LO <= HI, HI may be inf)", lo,
                         hi);
    if (pb->form.uses_load) {
        if (isfinite(par->f_max) && par->f_hi > par->f_max)
            return error_set(err, STAGECAL_EINVAL,
                             "F-factor range up to %g Pa^0.5 goes beyond the flooding margin "
                             "(tests at most %g Pa^0.5: the column file's flooding F-factor "
                             "times its margin)",
                             par->f_hi, par->f_max);
        default_span(at, n_at, 1, hint + 2, &flo, &fhi);
        if (isfinite(par->f_max) && fhi > par->f_max) /* a default span: cut at the margin */
            fhi = par->f_max;
        if (isfinite(par->f_max) && flo > fhi)
            return error_set(err, STAGECAL_EINVAL,
                             "no F-factor range below the flooding margin: the range starts at "
                             "%g Pa^0.5, tests may reach %g Pa^0.5",
                             flo, par->f_max);
        if (!(isfinite(flo) && isfinite(fhi) && flo >= 0 && fhi >= flo))
            return error_set(err, STAGECAL_EINVAL,
                             "F-factor range %g:%g is invalid (expected finite 0 <= LO <= HI "
                             "[Pa^0.5]; form '%s' uses the vapour load)",
                             flo, fhi, pb->form.name);
    } else {
        flo = fhi = NAN;
    }
    res->r_lo = lo;
    res->r_hi = hi;
    res->f_lo = flo;
    res->f_hi = fhi;
    /* the form must be defined over the whole box: try its corners */
    double g[P_MAX];
    double rs[2] = {lo, hi}, fs[2] = {flo, fhi};
    for (int i = 0; i < 2; i++)
        for (int j = 0; j < 2; j++)
            if (design_grad(pb, rs[i], fs[j], g, NULL))
                return error_set(err, STAGECAL_EINVAL,
                                 "form '%s' is undefined at R = %g%s%g of the search range "
                                 "(narrow the reflux range)",
                                 pb->form.name, rs[i], pb->form.uses_load ? ", F = " : "",
                                 pb->form.uses_load ? fs[j] : 0.0);
    return STAGECAL_OK;
}

/* The conditions of interest: at least one, weights > 0, R > 0, the form defined there. */
static int check_at(const stagecal_design_problem *pb, const stagecal_design_point *at, size_t n_at,
                    stagecal_error *err)
{
    double g[P_MAX];
    if (n_at < 1)
        return error_set(err, STAGECAL_EINVAL, "no condition of interest given");
    for (size_t j = 0; j < n_at; j++) {
        if (!(isfinite(at[j].weight) && at[j].weight > 0))
            return error_set(err, STAGECAL_EINVAL, "weight %g of condition %zu is not positive",
                             at[j].weight, j + 1);
        if (!(at[j].r > 0))
            return error_set(err, STAGECAL_EINVAL,
                             "reflux ratio %g of condition %zu is invalid (expected > 0 or inf)",
                             at[j].r, j + 1);
        int rc = design_grad(pb, at[j].r, at[j].f_load, g, err);
        if (rc)
            return rc;
    }
    return STAGECAL_OK;
}

static int check_args(const stagecal_design_problem *pb, const stagecal_design_point *at,
                      size_t n_at, const stagecal_design_params *par, stagecal_error *err)
{
    if (par->tests < 1 || par->tests > STAGECAL_DESIGN_MAXK)
        return error_set(err, STAGECAL_EINVAL,
                         "number of tests %zu is out of range (expected 1..%d)", par->tests,
                         STAGECAL_DESIGN_MAXK);
    if (par->criterion != STAGECAL_DESIGN_I && par->criterion != STAGECAL_DESIGN_D)
        return error_set(err, STAGECAL_EINVAL, "unknown design criterion %d", (int)par->criterion);
    if (!(par->sample_interval_s > 0 && isfinite(par->sample_interval_s)))
        return error_set(err, STAGECAL_EINVAL, "sampling interval %g s is not positive",
                         par->sample_interval_s);
    if (!(par->ridge > 0) || !(par->xtol_rel > 0) || par->max_eval < 10 ||
        par->exchange_sweeps < 1 || par->exchange_max_eval < 10 || !(par->exchange_tol >= 0))
        return error_set(err, STAGECAL_EINVAL,
                         "search tunables out of range (ridge > 0, xtol_rel > 0, max_eval >= 10, "
                         "exchange_sweeps >= 1)");
    return check_at(pb, at, n_at, err);
}

/* Scaling and base matrix of the search (see the file comment). */
static int prepare(search *s, const stagecal_design_params *par, int singular, stagecal_error *err)
{
    const stagecal_design_problem *pb = s->pb;
    size_t p = s->p;
    double ref[P_MAX], g[P_MAX];
    size_t nf = s->load_free ? GRID_F : 1, n = 0;
    for (size_t i = 0; i < p; i++)
        ref[i] = 0;
    for (size_t a = 0; a < GRID_LV; a++)
        for (size_t b = 0; b < nf; b++) {
            double lv = s->lv_lo + (s->lv_hi - s->lv_lo) * a / (GRID_LV - 1.0);
            double f = !pb->form.uses_load ? NAN
                       : nf > 1            ? s->f_lo + (s->f_hi - s->f_lo) * b / (nf - 1.0)
                                           : s->f_lo;
            int rc = design_grad(pb, r_of(lv), f, g, err);
            if (rc)
                return rc;
            double w = design_weight(pb, r_of(lv));
            for (size_t i = 0; i < p; i++)
                ref[i] += w * g[i] * g[i];
            n++;
        }
    for (size_t i = 0; i < p; i++) {
        double d = pb->info[i * p + i] + ref[i] / (double)n;
        s->s[i] = d > 0 ? 1.0 / sqrt(d) : 1.0;
    }
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++)
            s->base[i * p + j] =
                s->s[i] * 0.5 * (pb->info[i * p + j] + pb->info[j * p + i]) * s->s[j] +
                (singular && i == j ? par->ridge : 0);
    return STAGECAL_OK;
}

static void durations(const stagecal_design_problem *pb, const stagecal_design_params *par,
                      stagecal_design_result *res)
{
    stagecal_runlog_analysis_params an = stagecal_runlog_analysis_default_params();
    size_t win = par->window_samples ? par->window_samples : pb->window_samples;
    if (win < an.min_window)
        win = an.min_window;
    res->settle_samples = par->settle_samples ? par->settle_samples : an.warmup;
    res->window_samples = win;
    for (size_t t = 0; t < res->k; t++)
        res->tests[t].duration_s =
            (double)(res->settle_samples + res->window_samples) * par->sample_interval_s;
}

/* Before/after numbers at the conditions of interest and the criteria. */
static int evaluate(const stagecal_design_problem *pb, const stagecal_design_point *at, size_t n_at,
                    double wsum, stagecal_design_result *res, stagecal_design_at *out,
                    stagecal_error *err)
{
    double m[P_MAX * P_MAX], g[P_MAX], val;
    design_eig e0, e1;
    int rc = design_eig_compute(pb->info, pb->form.p, pb->rank_tol, &e0, err);
    if (!rc)
        rc = design_info_with(pb, res->tests, res->k, m, err);
    if (!rc)
        rc = design_eig_compute(m, pb->form.p, pb->rank_tol, &e1, err);
    if (rc)
        return rc;
    res->rank_before = e0.rank;
    res->rank_after = e1.rank;
    /* one t for every condition without a design; with one each condition's own */
    int per_at = pb->design && pb->n_design > 0;
    res->t_before = per_at ? NAN : design_tquant(pb->level, pb->dof);
    res->t_after = per_at ? NAN : design_tquant(pb->level, pb->dof + (double)res->k);
    double ib = 0, ia = 0;
    for (size_t j = 0; j < n_at; j++) {
        stagecal_design_at *o = &out[j];
        if ((rc = design_grad(pb, at[j].r, at[j].f_load, g, err)))
            return rc;
        stagecal_form_eval(&pb->form, pb->theta, at[j].r, at[j].f_load, &val, NULL);
        o->r = at[j].r;
        o->f_load = pb->form.uses_load ? at[j].f_load : NAN;
        o->weight = at[j].weight / wsum;
        o->stages = val;
        double vb = design_eig_quad(&e0, g, pb->rank_tol, &o->determined_before);
        double va = design_eig_quad(&e1, g, pb->rank_tol, &o->determined_after);
        o->se_before = sqrt(vb);
        o->se_after = sqrt(va);
        design_dof(pb, g, res->k, &o->dof_before, &o->dof_after);
        o->half_before = design_tquant(pb->level, o->dof_before) * o->se_before;
        o->half_after = design_tquant(pb->level, o->dof_after) * o->se_after;
        ib += o->weight * (o->determined_before ? vb : INFINITY);
        ia += o->weight * (o->determined_after ? va : INFINITY);
    }
    if (res->criterion == STAGECAL_DESIGN_D) {
        res->crit_before = e0.log_det;
        res->crit_after = e1.log_det;
    } else {
        res->crit_before = ib;
        res->crit_after = ia;
    }
    res->log_det_ratio = isfinite(e1.log_det) && isfinite(e0.log_det) ? e1.log_det - e0.log_det
                         : isfinite(e1.log_det)                       ? INFINITY
                                                                      : NAN;
    return STAGECAL_OK;
}

int stagecal_design_propose(const stagecal_design_problem *pb, const stagecal_design_point *at,
                            size_t n_at, const stagecal_design_params *par, double r_lo_hint,
                            double r_hi_hint, double f_lo_hint, double f_hi_hint,
                            stagecal_design_result *res, stagecal_design_at *at_out,
                            stagecal_error *err)
{
    const double hint[4] = {r_lo_hint, r_hi_hint, f_lo_hint, f_hi_hint};
    size_t p = pb->form.p;
    double *gat = NULL, *w = NULL, wsum = 0;
    design_eig e0;
    int rc;
    memset(res, 0, sizeof *res);
    res->criterion = par->criterion;
    res->p = p;
    res->identify_r = res->identify_f = NAN;
    if ((rc = check_args(pb, at, n_at, par, err)) ||
        (rc = set_bounds(pb, at, n_at, par, hint, res, err)) ||
        (rc = design_eig_compute(pb->info, p, pb->rank_tol, &e0, err)))
        return rc;
    res->k = par->tests;

    search s;
    memset(&s, 0, sizeof s);
    s.pb = pb;
    s.p = p;
    s.n_at = n_at;
    s.crit = par->criterion;
    s.r_lo = res->r_lo;
    s.r_hi = res->r_hi;
    s.lv_lo = lv_of(res->r_lo);
    s.lv_hi = lv_of(res->r_hi);
    s.f_lo = res->f_lo;
    s.f_hi = res->f_hi;
    s.load_free = pb->form.uses_load && res->f_hi > res->f_lo;
    int singular = e0.rank < p;
    if ((rc = prepare(&s, par, singular, err)))
        return rc;
    gat = malloc(n_at * p * sizeof *gat);
    w = malloc(n_at * sizeof *w);
    if (!gat || !w) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory (design)");
        goto done;
    }
    for (size_t j = 0; j < n_at; j++)
        wsum += at[j].weight;
    for (size_t j = 0; j < n_at; j++) {
        design_grad(pb, at[j].r, at[j].f_load, gat + j * p, NULL); /* checked above */
        for (size_t i = 0; i < p; i++)
            gat[j * p + i] *= s.s[i];
        w[j] = at[j].weight / wsum;
    }
    s.gat = gat;
    s.w = w;

    if (singular) {
        /* which single condition would identify the form: the one-window D-optimal
         * augmentation (largest information added in the missing direction) */
        stagecal_design_test one;
        double m[P_MAX * P_MAX];
        design_eig e1;
        int nl;
        size_t st;
        s.k = 1;
        s.crit = STAGECAL_DESIGN_D;
        if ((rc = run_search(&s, par, &one, &nl, &st, err)) ||
            (rc = design_info_with(pb, &one, 1, m, err)) ||
            (rc = design_eig_compute(m, p, pb->rank_tol, &e1, err)))
            goto done;
        res->identify_r = one.r;
        res->identify_f = one.f_load;
        res->identify_rank = e1.rank;
        s.crit = par->criterion;
    }
    s.k = res->k;
    if ((rc = run_search(&s, par, res->tests, &res->nlopt_result, &res->starts, err)))
        goto done;
    res->evaluations = s.evals;
    qsort(res->tests, res->k, sizeof res->tests[0], cmp_test);
    durations(pb, par, res);
    rc = evaluate(pb, at, n_at, wsum, res, at_out, err);
done:
    free(gat);
    free(w);
    return rc;
}

int stagecal_design_evaluate(const stagecal_design_problem *pb, const stagecal_design_test *tests,
                             size_t k, const stagecal_design_point *at, size_t n_at,
                             stagecal_design_criterion criterion, stagecal_design_result *res,
                             stagecal_design_at *at_out, stagecal_error *err)
{
    double wsum = 0;
    memset(res, 0, sizeof *res);
    res->criterion = criterion;
    res->p = pb->form.p;
    res->identify_r = res->identify_f = NAN;
    res->r_lo = res->r_hi = res->f_lo = res->f_hi = NAN;
    if (k > STAGECAL_DESIGN_MAXK)
        return error_set(err, STAGECAL_EINVAL,
                         "number of tests %zu is out of range (expected 0..%d)", k,
                         STAGECAL_DESIGN_MAXK);
    int rc = check_at(pb, at, n_at, err);
    if (rc)
        return rc;
    for (size_t j = 0; j < n_at; j++)
        wsum += at[j].weight;
    res->k = k;
    for (size_t t = 0; t < k; t++) {
        res->tests[t] = tests[t];
        res->tests[t].duration_s = NAN;
    }
    return evaluate(pb, at, n_at, wsum, res, at_out, err);
}

/*
 * physics.c — logged pressure and subcooled reflux around the plain McCabe–Thiele
 * inversion (include/stagecal/physics.h).
 *
 * Pressure. An IDEAL or activity model is rebuilt at each new pressure from its own
 * definition (stagecal_vle_get_definition, same Antoine sets and tunables), so a row
 * logged at 20 kPa is stepped with exactly the model a column file at 20 kPa would give.
 * Building a model costs ~5 ms (its bubble-point table), so the models are cached,
 * least recently used out; pressures are first rounded to params.p_resolution_pa so a
 * noisy transmitter does not build a model per row.
 *
 * Pot pressure. The pot is an ideal stage at P_top + pressure_drop_pa, the column stages
 * at P_top. Only the pot's vapour y_pot = y*_pot(xB) enters the stepping (the pot fixes
 * x_target from it), so the inversion is the plain one with xB replaced by the liquid
 * that gives the same vapour under the column's model, xB' = x*_top(y*_pot(xB)); the count
 * is the same number, by construction. Forward stepping undoes it: xB = x*_pot(y*_top(xB')).
 *
 * Subcooled reflux. The top stage condenses the vapour that heats the returning liquid to
 * its bubble point: L_int = L·(1 + cp_L·ΔT/λ), V_int = V + (L_int − L) below the top stage,
 * so L_int/V_int = R_int/(R_int + 1) with R_int = R·(1 + cp_L·ΔT/λ) and ΔT = T_bubble(xD) −
 * T_reflux (Wankat, P. C. (2012), Separation Process Engineering, 3rd ed., Prentice Hall,
 * ch. 4, from memory). λ is the distillate's molar latent heat: x·λ_light + (1 − x)·λ_heavy
 * when both are given, else system.latent_heat_j_mol. T_bubble is at the top pressure.
 *
 * Unequal latent heats. With both components' latent heats given (and different) the rows
 * are stepped in pseudo-moles (src/vle_pseudo.c): xD and xB are transformed, the model is
 * the transformed one, R is unchanged (reflux and distillate share one composition, so
 * their pseudo-molar ratio is the molar one), and xB of a forward step is transformed back.
 */
#include "stagecal/physics.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

int stagecal_internal_reflux(double reflux, double cp_j_mol_k, double dt_k, double latent_j_mol,
                             double *r_int, stagecal_error *err)
{
    if (!r_int || !(reflux >= 0) || !(cp_j_mol_k >= 0) || !(latent_j_mol > 0) ||
        !isfinite(cp_j_mol_k) || !isfinite(latent_j_mol) || !isfinite(dt_k))
        return error_set(err, STAGECAL_EINVAL,
                         "internal reflux needs R >= 0, cp >= 0, latent heat > 0 and a finite "
                         "subcooling");
    *r_int =
        isinf(reflux) || dt_k <= 0 ? reflux : reflux * (1.0 + cp_j_mol_k * dt_k / latent_j_mol);
    return STAGECAL_OK;
}

int stagecal_vle_has_pressure(const stagecal_vle *vle)
{
    return vle && stagecal_vle_pressure(vle) > 0;
}

stagecal_vle *stagecal_vle_at_pressure(const stagecal_vle *vle, double p_pa, stagecal_error *err)
{
    if (!stagecal_vle_has_pressure(vle)) {
        error_set(err, STAGECAL_EINVAL, "the equilibrium model has no pressure dependence");
        return NULL;
    }
    if (!(p_pa > 0) || !isfinite(p_pa)) {
        error_set(err, STAGECAL_EINVAL, "pressure %g Pa is not positive", p_pa);
        return NULL;
    }
    stagecal_vle_definition def;
    stagecal_vle_get_definition(vle, &def);
    def.p_pa = p_pa;
    return stagecal_vle_alloc_definition(&def, err);
}

stagecal_physics_params stagecal_physics_default_params(void)
{
    stagecal_physics_params p = {1.0, 32, 0, STAGECAL_PHYSICS_GRID_REL};
    return p;
}

/* Models on the pressure grid P0·exp(k·r), built once each (2049 bubble solves, ~2 ms); 128
 * kept (up to ~20 MB, allocated as met): a log whose rows jump between pressures over a factor
 * 13 (r = 0.02) builds each grid model once. With params.exact the grid models are the coarse
 * exact ones (STAGECAL_PHYSICS_EXACT_GRID nodes, ~10 kB each): 1024 kept (a factor 8e8). */
#define GRID_CACHE 128
#define GRID_CACHE_EXACT 1024

/* Where a cache keeps each key: open addressing with linear probing over at least twice as many
 * slots as entries (deletion by backward shift, Knuth 1998, The Art of Computer Programming
 * vol. 3, 2nd ed., §6.4 Algorithm R, from memory). A lookup is one or two probes; the linear scan
 * it replaces read every entry (up to 1024) on every query, a fifth of the fuzzed reader's time. */
struct index {
    uint64_t *key;
    uint32_t *ent; /* entry + 1; 0: empty slot */
    size_t mask;
};

static int index_alloc(struct index *ix, size_t entries)
{
    size_t n = 16;
    while (n < 2 * entries)
        n *= 2;
    ix->key = calloc(n, sizeof *ix->key);
    ix->ent = calloc(n, sizeof *ix->ent);
    ix->mask = n - 1;
    return ix->key && ix->ent;
}

static void index_free(struct index *ix)
{
    free(ix->key);
    free(ix->ent);
}

static size_t index_home(const struct index *ix, uint64_t k)
{
    k ^= k >> 33; /* the finaliser of MurmurHash3 (Appleby 2011, public domain, from memory) */
    k *= 0xff51afd7ed558ccdULL;
    k ^= k >> 33;
    return (size_t)k & ix->mask;
}

/* Slot of key, or of the empty slot where it would go. */
static size_t index_slot(const struct index *ix, uint64_t k)
{
    size_t h = index_home(ix, k);
    while (ix->ent[h] && ix->key[h] != k)
        h = (h + 1) & ix->mask;
    return h;
}

/* The entry holding k, or -1. */
static long index_find(const struct index *ix, uint64_t k)
{
    size_t h = index_slot(ix, k);
    return ix->ent[h] ? (long)ix->ent[h] - 1 : -1;
}

static void index_put(struct index *ix, uint64_t k, size_t entry)
{
    size_t h = index_slot(ix, k);
    ix->key[h] = k;
    ix->ent[h] = (uint32_t)entry + 1;
}

static void index_remove(struct index *ix, uint64_t k)
{
    size_t h = index_slot(ix, k);
    if (!ix->ent[h])
        return;
    for (size_t j = (h + 1) & ix->mask; ix->ent[j]; j = (j + 1) & ix->mask) {
        /* slot j moves into the hole when its home is not cyclically inside (h, j] */
        if (((j - index_home(ix, ix->key[j])) & ix->mask) >= ((j - h) & ix->mask)) {
            ix->key[h] = ix->key[j];
            ix->ent[h] = ix->ent[j];
            h = j;
        }
    }
    ix->ent[h] = 0;
}

static uint64_t pressure_key(double p)
{
    uint64_t k;
    memcpy(&k, &p, sizeof k);
    return k;
}

struct grid_entry {
    long k;
    stagecal_vle *vle; /* owned */
    unsigned long used;
};

struct cache_entry {
    double p_pa;          /* pressure the model was built at (after rounding) */
    stagecal_vle *vle;    /* owned */
    stagecal_vle *pseudo; /* owned: vle in pseudo-moles (NULL without unequal latent heats) */
    unsigned long used;   /* stamp of the last use (least recently used goes first) */
};

struct stagecal_physics {
    const stagecal_column *col;
    stagecal_physics_params par;
    struct cache_entry *e;     /* par.cache_size entries */
    double ratio;              /* λ_light/λ_heavy for the pseudo-mole transform (0 = none) */
    stagecal_vle *base_pseudo; /* the column's own model in pseudo-moles (owned) */
    size_t n;                  /* entries filled */
    unsigned long clock;
    struct grid_entry *grid; /* ngmax entries */
    size_t ng, ngmax;        /* grid entries filled, kept */
    struct index ie, ig;     /* where e and grid keep each pressure, grid index */
};

stagecal_physics *stagecal_physics_alloc(const stagecal_column *col,
                                         const stagecal_physics_params *params, stagecal_error *err)
{
    if (!col || !col->system.vle) {
        error_set(err, STAGECAL_EINVAL, "the physics needs a column with an equilibrium model");
        return NULL;
    }
    stagecal_physics *ph = calloc(1, sizeof *ph);
    if (!ph) {
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    ph->col = col;
    ph->par = params ? *params : stagecal_physics_default_params();
    if (ph->par.cache_size < 2)
        ph->par.cache_size = 2; /* a row needs two models at once (top and pot) */
    ph->e = calloc(ph->par.cache_size, sizeof *ph->e);
    ph->ngmax = ph->par.exact ? GRID_CACHE_EXACT : GRID_CACHE;
    ph->grid = ph->e ? calloc(ph->ngmax, sizeof *ph->grid) : NULL;
    int ix = index_alloc(&ph->ie, ph->par.cache_size) & index_alloc(&ph->ig, ph->ngmax);
    if (!ph->grid || !ix) {
        index_free(&ph->ie);
        index_free(&ph->ig);
        free(ph->grid);
        free(ph->e);
        free(ph);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    const stagecal_system *s = &col->system;
    if (s->latent_light_j_mol > 0 && s->latent_heavy_j_mol > 0 &&
        s->latent_light_j_mol != s->latent_heavy_j_mol) {
        ph->ratio = s->latent_light_j_mol / s->latent_heavy_j_mol;
        if (!(ph->base_pseudo = stagecal_vle_alloc_pseudo(s->vle, ph->ratio, err))) {
            stagecal_physics_free(ph);
            return NULL;
        }
    }
    return ph;
}

void stagecal_physics_free(stagecal_physics *ph)
{
    if (!ph)
        return;
    for (size_t i = 0; i < ph->n; i++) {
        stagecal_vle_free(ph->e[i].pseudo);
        stagecal_vle_free(ph->e[i].vle);
    }
    for (size_t i = 0; i < ph->ng; i++)
        stagecal_vle_free(ph->grid[i].vle);
    stagecal_vle_free(ph->base_pseudo);
    index_free(&ph->ie);
    index_free(&ph->ig);
    free(ph->grid);
    free(ph->e);
    free(ph);
}

/* base rebuilt at pressure p: with params.exact on the coarse table that answers by solving
 * the model (the default table: stagecal_vle_at_pressure). A reader's soft sensor meets one
 * pressure per row in a log whose transmitter is noisy; building the dense table (2049 bubble
 * solves) per pressure made a 4 kB log of 367 rows take 10 s under the fuzzer's sanitizers
 * (a timeout of fuzz_runlog), and a 2000-row log with 50 Pa of pressure noise 17 s. */
static stagecal_vle *model_at(const stagecal_physics *ph, const stagecal_vle *base, double p,
                              stagecal_error *err)
{
    if (!ph->par.exact)
        return stagecal_vle_at_pressure(base, p, err);
    if (!(p > 0) || !isfinite(p)) {
        error_set(err, STAGECAL_EINVAL, "pressure %g Pa is not positive", p);
        return NULL;
    }
    stagecal_vle_definition def;
    stagecal_vle_get_definition(base, &def);
    def.p_pa = p;
    def.vp.grid_n = STAGECAL_PHYSICS_EXACT_GRID;
    def.vp.exact = 1;
    return stagecal_vle_alloc_definition(&def, err);
}

/* Grid model k (P0·exp(k·r); k = 0 is the column's own, or with params.exact its coarse exact
 * twin), built on first use. */
static const stagecal_vle *grid_model(stagecal_physics *ph, long k, stagecal_error *err)
{
    const stagecal_vle *base = ph->col->system.vle;
    if (k == 0 && !ph->par.exact)
        return base;
    long at = index_find(&ph->ig, (uint64_t)k);
    if (at >= 0) {
        ph->grid[at].used = ph->clock;
        return ph->grid[at].vle;
    }
    size_t victim = 0;
    for (size_t i = 1; i < ph->ng; i++)
        if (ph->grid[i].used < ph->grid[victim].used)
            victim = i;
    if (ph->ng < ph->ngmax)
        victim = ph->ng;
    double p = stagecal_vle_pressure(base) * exp((double)k * ph->par.p_grid_rel);
    stagecal_vle *v = model_at(ph, base, p, err);
    if (!v)
        return NULL;
    if (victim < ph->ng) {
        index_remove(&ph->ig, (uint64_t)ph->grid[victim].k);
        stagecal_vle_free(ph->grid[victim].vle);
    } else {
        ph->ng++;
    }
    ph->grid[victim] = (struct grid_entry){k, v, ph->clock};
    index_put(&ph->ig, (uint64_t)k, victim);
    return v;
}

/* The model at p: its table interpolated in ln P through the four grid models around p
 * (cubic Lagrange weights at t = ln(p/P_k)/r in [0, 1) over nodes k−1 … k+2; T_bubble and the
 * azeotropes still solved at p); the model built at p when a grid model or the blend fails
 * (a pressure where the Antoine sets give no bubble point). */
static stagecal_vle *blend_at(stagecal_physics *ph, double p, stagecal_error *err)
{
    const stagecal_vle *base = ph->col->system.vle;
    double t = log(p / stagecal_vle_pressure(base)) / ph->par.p_grid_rel, kf = floor(t);
    if (fabs(kf) < 1e9) {
        long k = (long)kf;
        double s = fmin(fmax(t - kf, 0.0), 1.0);
        double w[4] = {-s * (s - 1) * (s - 2) / 6, (s + 1) * (s - 1) * (s - 2) / 2,
                       -(s + 1) * s * (s - 2) / 2, (s + 1) * s * (s - 1) / 6};
        const stagecal_vle *m[4];
        int ok = 1;
        for (int pass = 0; pass < 2 && ok; pass++) /* again: a build may evict an earlier one */
            for (int j = 0; j < 4 && ok; j++)
                ok = (m[j] = grid_model(ph, k - 1 + j, NULL)) != NULL;
        stagecal_vle *v = ok ? vle_alloc_blend(m, w, 4, p, NULL) : NULL;
        if (v)
            return v;
    }
    return model_at(ph, base, p, err);
}

/* The column's model at p_pa (the column's own when the pressure rounds to its one);
 * *pseudo receives its pseudo-mole twin (NULL without unequal latent heats). */
static const stagecal_vle *vle_at(stagecal_physics *ph, double p_pa, const stagecal_vle **pseudo,
                                  stagecal_error *err)
{
    const stagecal_vle *base = ph->col->system.vle;
    int grid = ph->par.p_grid_rel > 0;
    double res = grid && !ph->par.exact ? 0.0 : ph->par.p_resolution_pa;
    double p = res > 0 ? res * nearbyint(p_pa / res) : p_pa;
    if (!(p > 0))
        p = res > 0 ? res : p_pa;
    *pseudo = ph->base_pseudo;
    if (p == stagecal_vle_pressure(base))
        return base;
    ph->clock++;
    long at = index_find(&ph->ie, pressure_key(p));
    if (at >= 0) {
        ph->e[at].used = ph->clock;
        *pseudo = ph->e[at].pseudo;
        return ph->e[at].vle;
    }
    size_t victim = 0;
    for (size_t i = 1; i < ph->n; i++)
        if (ph->e[i].used < ph->e[victim].used)
            victim = i;
    if (ph->n < ph->par.cache_size)
        victim = ph->n;
    stagecal_vle *v = grid ? blend_at(ph, p, err) : model_at(ph, base, p, err), *vp = NULL;
    if (!v || (ph->ratio > 0 && !(vp = stagecal_vle_alloc_pseudo(v, ph->ratio, err)))) {
        stagecal_vle_free(v);
        return NULL;
    }
    if (victim < ph->n) {
        index_remove(&ph->ie, pressure_key(ph->e[victim].p_pa));
        stagecal_vle_free(ph->e[victim].pseudo);
        stagecal_vle_free(ph->e[victim].vle);
    } else {
        ph->n++;
    }
    ph->e[victim] = (struct cache_entry){p, v, vp, ph->clock};
    index_put(&ph->ie, pressure_key(p), victim);
    *pseudo = vp;
    return v;
}

/* Molar latent heat [J/mol] of a liquid of composition x (0 = not known). */
static double latent_at(const stagecal_system *s, double x)
{
    if (s->latent_light_j_mol > 0 && s->latent_heavy_j_mol > 0)
        return x * s->latent_light_j_mol + (1 - x) * s->latent_heavy_j_mol;
    return s->latent_j_mol;
}

int stagecal_physics_cond_at(stagecal_physics *ph, double p_top_pa, double xd, double reflux,
                             double t_reflux_k, stagecal_physics_cond *cond, stagecal_error *err)
{
    if (!ph || !cond)
        return error_set(err, STAGECAL_EINVAL, "NULL argument");
    if (!(reflux >= 0) || !(xd >= 0 && xd <= 1))
        return error_set(err, STAGECAL_EINVAL, "conditions need R >= 0 and 0 <= xD <= 1");
    const stagecal_column *col = ph->col;
    const stagecal_system *s = &col->system;
    memset(cond, 0, sizeof *cond);
    cond->reflux = cond->r_int = reflux;
    const stagecal_vle *top = s->vle, *pot = s->vle, *top_ps = ph->base_pseudo,
                       *pot_ps = ph->base_pseudo;
    int logged = isfinite(p_top_pa) && p_top_pa > 0;
    if (stagecal_vle_has_pressure(s->vle)) {
        double p = logged ? p_top_pa : stagecal_vle_pressure(s->vle);
        if (!(top = vle_at(ph, p, &top_ps, err)))
            return err ? err->code : STAGECAL_ENOMEM;
        pot = top, pot_ps = top_ps;
        if (col->pressure_drop_pa > 0) {
            if (!(pot = vle_at(ph, p + col->pressure_drop_pa, &pot_ps, err)))
                return err ? err->code : STAGECAL_ENOMEM;
            cond->flags |= STAGECAL_PHYS_POT_DROP;
        }
        cond->p_top_pa = stagecal_vle_pressure(top);
        if (logged)
            cond->flags |= STAGECAL_PHYS_PRESSURE;
    } else if (logged) {
        cond->flags |= STAGECAL_PHYS_PRESSURE_UNUSED;
    }
    cond->vle = top, cond->vle_pot = pot;
    if (ph->ratio > 0) { /* step in pseudo-moles */
        cond->vle = top_ps, cond->vle_pot = pot_ps;
        cond->pseudo_ratio = ph->ratio;
        cond->flags |= STAGECAL_PHYS_PSEUDO;
    }
    if (!isfinite(t_reflux_k) || !isfinite(reflux) || reflux == 0)
        return STAGECAL_OK;
    double lam = latent_at(s, xd), tb;
    if (!(s->cp_liquid_j_mol_k > 0) || !(lam > 0) || !stagecal_vle_has_temperature(top)) {
        cond->flags |= STAGECAL_PHYS_SUBCOOL_UNUSED;
        return STAGECAL_OK;
    }
    int rc = stagecal_vle_tbubble(top, xd, &tb);
    if (rc != STAGECAL_OK)
        return error_set(err, rc, "bubble point of xD = %g failed", xd);
    if ((rc = stagecal_internal_reflux(reflux, s->cp_liquid_j_mol_k, tb - t_reflux_k, lam,
                                       &cond->r_int, err)))
        return rc;
    if (cond->r_int != reflux)
        cond->flags |= STAGECAL_PHYS_SUBCOOLED;
    return STAGECAL_OK;
}

int stagecal_physics_vle_at(stagecal_physics *ph, double p_top_pa, int pot,
                            const stagecal_vle **vle, stagecal_error *err)
{
    if (!ph || !vle)
        return error_set(err, STAGECAL_EINVAL, "NULL argument");
    const stagecal_vle *base = ph->col->system.vle, *ps;
    *vle = base;
    if (!stagecal_vle_has_pressure(base))
        return STAGECAL_OK;
    double p = isfinite(p_top_pa) && p_top_pa > 0 ? p_top_pa : stagecal_vle_pressure(base);
    if (pot && ph->col->pressure_drop_pa > 0)
        p += ph->col->pressure_drop_pa;
    if (!(*vle = vle_at(ph, p, &ps, err)))
        return err ? err->code : STAGECAL_ENOMEM;
    return STAGECAL_OK;
}

/* d(x')/dx of the pseudo-mole transform with ratio a. */
static double pseudo_slope(double a, double x)
{
    double d = a * x + 1.0 - x;
    return a / (d * d);
}

/* The liquid under the column's model whose vapour equals the pot's vapour over xb. */
static int pot_equivalent(const stagecal_physics_cond *c, double xb, double *xb_eq,
                          double *dxeq_dxb)
{
    double y, s_pot, s_top;
    if (stagecal_vle_ystar(c->vle_pot, xb, &y) != STAGECAL_OK ||
        stagecal_vle_xstar(c->vle, y, xb_eq) != STAGECAL_OK ||
        stagecal_vle_dydx(c->vle_pot, xb, &s_pot) != STAGECAL_OK ||
        stagecal_vle_dydx(c->vle, *xb_eq, &s_top) != STAGECAL_OK || !(s_top > 0))
        return -1;
    *dxeq_dxb = s_pot / s_top;
    return 0;
}

/* stagecal_physics_invert; quiet: the reason of a count that is not ok left empty (the
 * inversion's own texts; physics_invert_quiet). */
static int physics_invert(const stagecal_physics_cond *cond, double xd, double xb, double murphree,
                          const stagecal_stages_params *params, int quiet,
                          stagecal_stages_result *res, stagecal_error *err)
{
    if (!cond || !res)
        return error_set(err, STAGECAL_EINVAL, "NULL argument");
    double a = cond->pseudo_ratio, scale_xd = 1.0, scale_xb = 1.0;
    if (a > 0) { /* to pseudo-moles: the count is the same number of stages */
        scale_xd = pseudo_slope(a, xd), scale_xb = pseudo_slope(a, xb);
        xd = stagecal_vle_to_pseudo(a, xd), xb = stagecal_vle_to_pseudo(a, xb);
    }
    double xb_in = xb, scale_pot = 1.0;
    if (cond->vle_pot != cond->vle && xb < xd && pot_equivalent(cond, xb, &xb_in, &scale_pot)) {
        memset(res, 0, sizeof *res);
        res->status = STAGECAL_STAGES_INVALID;
        if (!quiet)
            snprintf(res->reason, sizeof res->reason,
                     "xB = %g has no equivalent liquid at the top pressure", xb);
        return STAGECAL_OK;
    }
    int rc =
        quiet
            ? stages_invert_quiet(cond->vle, xd, xb_in, cond->r_int, murphree, params, res, err)
            : stagecal_stages_invert(cond->vle, xd, xb_in, cond->r_int, murphree, params, res, err);
    if (rc != STAGECAL_OK || res->status != STAGECAL_STAGES_OK)
        return rc;
    res->dstages_dxb *= scale_pot * scale_xb;
    res->dstages_dxd *= scale_xd;
    if (a > 0) /* x_target back in true moles */
        res->x_target = stagecal_vle_from_pseudo(a, res->x_target);
    if (isfinite(cond->reflux) && cond->reflux > 0)
        res->dstages_dr *= cond->r_int / cond->reflux; /* ∂R_int/∂R at fixed ΔT, λ */
    return STAGECAL_OK;
}

int stagecal_physics_invert(const stagecal_physics_cond *cond, double xd, double xb,
                            double murphree, const stagecal_stages_params *params,
                            stagecal_stages_result *res, stagecal_error *err)
{
    return physics_invert(cond, xd, xb, murphree, params, 0, res, err);
}

int physics_invert_quiet(const stagecal_physics_cond *cond, double xd, double xb, double murphree,
                         const stagecal_stages_params *params, stagecal_stages_result *res,
                         stagecal_error *err)
{
    return physics_invert(cond, xd, xb, murphree, params, 1, res, err);
}

int stagecal_physics_step(const stagecal_physics_cond *cond, double xd, double stages,
                          double murphree, const stagecal_stages_params *params, double *xb,
                          int *status, stagecal_error *err)
{
    if (!cond || !xb || !status)
        return error_set(err, STAGECAL_EINVAL, "NULL argument");
    size_t len;
    double a = cond->pseudo_ratio;
    int rc =
        stagecal_stages_step(cond->vle, a > 0 ? stagecal_vle_to_pseudo(a, xd) : xd, cond->r_int,
                             stages, murphree, params, xb, NULL, 0, &len, status, err);
    if (rc != STAGECAL_OK || *status != STAGECAL_STAGES_OK)
        return rc;
    double y;
    if (cond->vle_pot != cond->vle && ((rc = stagecal_vle_ystar(cond->vle, *xb, &y)) ||
                                       (rc = stagecal_vle_xstar(cond->vle_pot, y, xb))))
        return error_set(err, rc, "the pot's liquid at its own pressure failed");
    if (a > 0) /* outputs in true moles */
        *xb = stagecal_vle_from_pseudo(a, *xb);
    return STAGECAL_OK;
}

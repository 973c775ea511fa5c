/*
 * column.c — the column file reader (JSON via jansson); format in docs/column-file.md.
 *
 * The file names the unit of every quantity in its key (height_m, pressure_pa,
 * molar_mass_kg_mol, ...) and stores SI, so reading converts nothing; plausibility
 * checks catch the usual unit slips (g/mol in a kg/mol field, kJ/mol for J/mol).
 * Parse errors carry jansson's line and column; semantic errors name the member's path
 * ("system.model.alpha"), since jansson keeps no positions for values (src/json_read.c,
 * shared with the model and plan files). Unknown keys
 * are errors: a misspelt optional field would otherwise be silently ignored.
 */
#include "stagecal/column.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>

#include "fileio.h"
#include "internal.h"
#include "json_read.h"
#include "stagecal/units.h"

#define COLUMN_FORMAT "stagecal-column"
#define COLUMN_VERSION 1

typedef struct {
    json_reader jr; /* file name, this format's page, the caller's error record */
} rd;

static int check_keys(const rd *r, json_t *obj, const char *path, const char *const *keys)
{
    return jr_only(&r->jr, obj, path, keys);
}

static json_t *get_obj(const rd *r, json_t *parent, const char *key, const char *path, int need,
                       int *rc)
{
    json_t *o;
    *rc = jr_object(&r->jr, parent, key, path, need, &o);
    return o;
}

/* Reads a number into *out when present. lo/hi: open (lo_open) or closed bounds; hint
 * (units, an example) follows "expected a number" and the range. */
static int get_num(const rd *r, json_t *parent, const char *key, const char *path, int need,
                   double lo, int lo_open, double hi, double *out, const char *hint)
{
    char expected[160];
    json_t *o;
    snprintf(expected, sizeof expected, "a number%s", hint);
    int rc = jr_member(&r->jr, parent, key, path, need, expected, &o);
    if (rc != STAGECAL_OK || !o)
        return rc;
    if (!json_is_number(o))
        return jr_fail(&r->jr, path, "expected %s", expected);
    double v = json_number_value(o);
    if (!isfinite(v) || (lo_open ? !(v > lo) : !(v >= lo)) || !(v <= hi)) {
        char hi_txt[40];
        if (isinf(hi))
            snprintf(hi_txt, sizeof hi_txt, "inf)");
        else
            snprintf(hi_txt, sizeof hi_txt, "%g]", hi);
        return jr_fail(&r->jr, path, "%.15g is outside %s%g, %s%s", v, lo_open ? "(" : "[", lo,
                       hi_txt, hint);
    }
    *out = v;
    return STAGECAL_OK;
}

static int get_str(const rd *r, json_t *parent, const char *key, const char *path, int need,
                   char *buf, size_t cap)
{
    return jr_string(&r->jr, parent, key, path, need, buf != NULL, buf, cap);
}

static int read_antoine(const rd *r, json_t *comp, const char *path, stagecal_antoine *a, int need,
                        int *present)
{
    static const char *const keys[] = {"a", "b", "c", "t_min_k", "t_max_k", "source", NULL};
    char p[128];
    int rc;
    snprintf(p, sizeof p, "%s.antoine", path);
    json_t *o = get_obj(r, comp, "antoine", p, need, &rc);
    *present = o != NULL;
    if (!o)
        return rc;
    if ((rc = check_keys(r, o, p, keys)))
        return rc;
    char f[160];
    const char *hint = " (log10(P/bar) = a - b/(T/K + c))";
    snprintf(f, sizeof f, "%s.a", p);
    if ((rc = get_num(r, o, "a", f, 1, -INFINITY, 1, INFINITY, &a->a, hint)))
        return rc;
    snprintf(f, sizeof f, "%s.b", p);
    if ((rc = get_num(r, o, "b", f, 1, 0.0, 1, INFINITY, &a->b, hint)))
        return rc;
    snprintf(f, sizeof f, "%s.c", p);
    if ((rc = get_num(r, o, "c", f, 1, -INFINITY, 1, INFINITY, &a->c, hint)))
        return rc;
    a->t_min_k = a->t_max_k = 0.0;
    snprintf(f, sizeof f, "%s.t_min_k", p);
    if ((rc = get_num(r, o, "t_min_k", f, 0, 0.0, 1, 10000.0, &a->t_min_k, " K")))
        return rc;
    snprintf(f, sizeof f, "%s.t_max_k", p);
    if ((rc = get_num(r, o, "t_max_k", f, 0, a->t_min_k, 1, 10000.0, &a->t_max_k,
                      " K, above t_min_k")))
        return rc;
    if ((a->t_min_k > 0.0) != (a->t_max_k > 0.0))
        return jr_fail(&r->jr, p, "give both t_min_k and t_max_k, or neither");
    snprintf(f, sizeof f, "%s.source", p);
    return get_str(r, o, "source", f, 0, NULL, 0);
}

static int read_component(const rd *r, json_t *sys, const char *key, char *name, double *m,
                          double *latent, stagecal_antoine *ant, int need_ant)
{
    static const char *const keys[] = {"name", "molar_mass_kg_mol", "latent_heat_j_mol", "antoine",
                                       NULL};
    char p[64], f[128];
    int rc, present;
    snprintf(p, sizeof p, "system.%s", key);
    json_t *o = get_obj(r, sys, key, p, 1, &rc);
    if (!o)
        return rc;
    if ((rc = check_keys(r, o, p, keys)))
        return rc;
    snprintf(f, sizeof f, "%s.name", p);
    if ((rc = get_str(r, o, "name", f, 1, name, STAGECAL_NAME_MAX)))
        return rc;
    snprintf(f, sizeof f, "%s.molar_mass_kg_mol", p);
    if ((rc = get_num(r, o, "molar_mass_kg_mol", f, 0, 0.0, 1, 1.0, m,
                      " kg/mol (e.g. 0.018015 for water)")))
        return rc;
    snprintf(f, sizeof f, "%s.latent_heat_j_mol", p);
    if ((rc = get_num(r, o, "latent_heat_j_mol", f, 0, 1000.0, 1, 1e6, latent,
                      " J/mol (not kJ/mol)")))
        return rc;
    return read_antoine(r, o, p, ant, need_ant, &present);
}

/* Reads a number array of length n (n = 0: any length ≥ 3, returned in *n). */
static int get_array(const rd *r, json_t *o, const char *key, const char *path, int need,
                     double **out, size_t *n)
{
    json_t *a;
    *out = NULL;
    int rc = jr_member(&r->jr, o, key, path, need, "an array of numbers", &a);
    if (rc != STAGECAL_OK || !a)
        return rc;
    size_t len = json_is_array(a) ? json_array_size(a) : 0;
    if (!json_is_array(a) || (*n && len != *n) || len < 3)
        return jr_fail(&r->jr, path, "expected an array of %s numbers",
                       *n ? "as many" : "at least 3");
    double *v = calloc(len, sizeof *v);
    if (!v)
        return error_set(r->jr.err, STAGECAL_ENOMEM, "out of memory");
    for (size_t i = 0; i < len; i++) {
        json_t *e = json_array_get(a, i);
        if (!json_is_number(e)) {
            free(v);
            char at[96];
            snprintf(at, sizeof at, "%s[%zu]", path, i);
            return jr_fail(&r->jr, at, "expected a number");
        }
        v[i] = json_number_value(e);
    }
    *out = v;
    *n = len;
    return STAGECAL_OK;
}

static int read_model(const rd *r, json_t *sys, stagecal_system *s, const stagecal_antoine ant[2],
                      int *need_ant, int phase)
{
    int rc;
    json_t *o = get_obj(r, sys, "model", "system.model", 1, &rc);
    if (!o)
        return rc;
    char kind[32];
    if ((rc = get_str(r, o, "kind", "system.model.kind", 1, kind, sizeof kind)))
        return rc;
    static const char *const k_alpha[] = {"kind", "source", "alpha", NULL};
    static const char *const k_k[] = {"kind", "source", "k", NULL};
    static const char *const k_tab[] = {"kind", "source", "x", "y", "t_k", NULL};
    static const char *const k_ideal[] = {"kind", "source", NULL};
    static const char *const k_wil[] = {"kind",      "source",    "a12_j_mol", "a21_j_mol",
                                        "v1_m3_mol", "v2_m3_mol", NULL};
    static const char *const k_nrtl[] = {"kind",    "source",    "tau12_a", "tau12_b_k",
                                         "tau21_a", "tau21_b_k", "alpha12", NULL};
    static const char *const k_vl[] = {"kind", "source", "a12", "a21", NULL};
    static const struct {
        const char *name;
        stagecal_vle_kind kind;
        const char *const *keys;
    } kinds[] = {
        {"alpha", STAGECAL_VLE_ALPHA, k_alpha},  {"kvalue", STAGECAL_VLE_KVALUE, k_k},
        {"table", STAGECAL_VLE_TABLE, k_tab},    {"ideal", STAGECAL_VLE_IDEAL, k_ideal},
        {"wilson", STAGECAL_VLE_WILSON, k_wil},  {"nrtl", STAGECAL_VLE_NRTL, k_nrtl},
        {"vanlaar", STAGECAL_VLE_VANLAAR, k_vl}, {"margules", STAGECAL_VLE_MARGULES, k_vl}};
    size_t ik = 0, nk = sizeof kinds / sizeof kinds[0];
    while (ik < nk && strcmp(kind, kinds[ik].name) != 0)
        ik++;
    if (ik == nk)
        return jr_fail(&r->jr, "system.model.kind",
                       "'%s' is not one of alpha, kvalue, table, "
                       "ideal, wilson, nrtl, vanlaar, margules",
                       kind);
    stagecal_vle_kind kd = kinds[ik].kind;
    const char *const *keys = kinds[ik].keys;
    *need_ant = kd >= STAGECAL_VLE_IDEAL;
    if (phase == 0) /* first pass: only learn whether Antoine sets are required */
        return STAGECAL_OK;
    if ((rc = check_keys(r, o, "system.model", keys)) ||
        (rc = get_str(r, o, "source", "system.model.source", 0, NULL, 0)))
        return rc;
    stagecal_error ve;
    stagecal_error_clear(&ve);
    double p[STAGECAL_VLE_MAXPARAM] = {0};
    size_t np = 0;
    switch (kd) {
    case STAGECAL_VLE_ALPHA:
        if ((rc = get_num(r, o, "alpha", "system.model.alpha", 1, 1.0, 1, INFINITY, &p[0], "")))
            return rc;
        s->vle = stagecal_vle_alloc_alpha(p[0], &ve);
        break;
    case STAGECAL_VLE_KVALUE:
        if ((rc = get_num(r, o, "k", "system.model.k", 1, 1.0, 1, INFINITY, &p[0], "")))
            return rc;
        s->vle = stagecal_vle_alloc_kvalue(p[0], &ve);
        break;
    case STAGECAL_VLE_TABLE: {
        double *x = NULL, *y = NULL, *t = NULL;
        size_t n = 0;
        if ((rc = get_array(r, o, "x", "system.model.x", 1, &x, &n)) ||
            (rc = get_array(r, o, "y", "system.model.y", 1, &y, &n)) ||
            (rc = get_array(r, o, "t_k", "system.model.t_k", 0, &t, &n))) {
            free(x);
            free(y);
            return rc;
        }
        s->vle = stagecal_vle_alloc_table(x, y, t, n, &ve);
        free(x);
        free(y);
        free(t);
        break;
    }
    default: {
        static const char *const names[][5] = {
            [STAGECAL_VLE_WILSON] = {"a12_j_mol", "a21_j_mol", "v1_m3_mol", "v2_m3_mol", NULL},
            [STAGECAL_VLE_NRTL] = {"tau12_a", "tau12_b_k", "tau21_a", "tau21_b_k", "alpha12"},
            [STAGECAL_VLE_VANLAAR] = {"a12", "a21", NULL, NULL, NULL},
            [STAGECAL_VLE_MARGULES] = {"a12", "a21", NULL, NULL, NULL},
        };
        if (kd != STAGECAL_VLE_IDEAL)
            for (np = 0; np < 5 && names[kd][np]; np++) {
                char f[64];
                snprintf(f, sizeof f, "system.model.%s", names[kd][np]);
                if ((rc = get_num(r, o, names[kd][np], f, 1, -INFINITY, 1, INFINITY, &p[np], "")))
                    return rc;
            }
        if (!(s->p_pa > 0.0))
            return jr_fail(&r->jr, "pressure_pa", "missing, the '%s' model needs the pressure",
                           kind);
        s->vle = stagecal_vle_alloc_activity(kd, ant, p, np, s->p_pa, NULL, &ve);
    }
    }
    if (s->vle && stagecal_vle_validate(s->vle, NULL, &ve) != STAGECAL_OK) {
        stagecal_vle_free(s->vle);
        s->vle = NULL;
    }
    if (!s->vle)
        return error_set_at(r->jr.err,
                            ve.code == STAGECAL_ENOMEM ? STAGECAL_ENOMEM : STAGECAL_EDATA,
                            r->jr.source, 0, 0, "member 'system.model': %s", ve.text);
    return STAGECAL_OK;
}

/* pressure_drop_pa and the holdup object (docs/column-file.md). */
static int read_holdup(const rd *r, json_t *root, stagecal_column *col)
{
    int rc;
    if ((rc = get_num(r, root, "pressure_drop_pa", "pressure_drop_pa", 0, 0.0, 0, 1e7,
                      &col->pressure_drop_pa, " Pa (top to pot)")))
        return rc;
    json_t *h = get_obj(r, root, "holdup", "holdup", 0, &rc);
    if (!h)
        return rc;
    static const char *const hkeys[] = {"column_mol",      "per_metre_mol", "per_tray_mol",
                                        "reflux_drum_mol", "u_rel",         NULL};
    double col_mol = 0, per_m = 0, per_tray = 0;
    if ((rc = check_keys(r, h, "holdup", hkeys)) ||
        (rc = get_num(r, h, "column_mol", "holdup.column_mol", 0, 0.0, 0, 1e9, &col_mol, " mol")) ||
        (rc = get_num(r, h, "per_metre_mol", "holdup.per_metre_mol", 0, 0.0, 0, 1e9, &per_m,
                      " mol/m")) ||
        (rc = get_num(r, h, "per_tray_mol", "holdup.per_tray_mol", 0, 0.0, 0, 1e9, &per_tray,
                      " mol")) ||
        (rc = get_num(r, h, "reflux_drum_mol", "holdup.reflux_drum_mol", 0, 0.0, 0, 1e9,
                      &col->holdup_drum_mol, " mol")) ||
        (rc = get_num(r, h, "u_rel", "holdup.u_rel", 0, 0.0, 0, 1.0, &col->holdup_u_rel,
                      " (relative standard uncertainty)")))
        return rc;
    if ((col_mol > 0) + (per_m > 0) + (per_tray > 0) > 1)
        return jr_fail(&r->jr, "holdup", "give one of column_mol, per_metre_mol, per_tray_mol");
    if (per_m > 0 && !(col->height_m > 0))
        return jr_fail(&r->jr, "holdup.per_metre_mol", "needs packed_height_m");
    if (per_tray > 0 && col->trays < 1)
        return jr_fail(&r->jr, "holdup.per_tray_mol", "needs trays");
    col->holdup_column_mol = col_mol > 0 ? col_mol
                             : per_m > 0 ? per_m * col->height_m
                                         : per_tray * col->trays;
    return STAGECAL_OK;
}

/* The flooding object (docs/column-file.md): the F-factor at flooding and the margin. */
static int read_flooding(const rd *r, json_t *root, stagecal_column *col)
{
    int rc;
    json_t *fl = get_obj(r, root, "flooding", "flooding", 0, &rc);
    if (!fl)
        return rc;
    static const char *const fkeys[] = {"f_factor", "margin", NULL};
    col->flood_margin = 0.8; /* common practice, no source: design at 70-85 % of flooding */
    if ((rc = check_keys(r, fl, "flooding", fkeys)) ||
        (rc = get_num(r, fl, "f_factor", "flooding.f_factor", 1, 0.0, 1, 100.0, &col->flood_f_pa05,
                      " Pa^0.5 (the F-factor at flooding)")) ||
        (rc = get_num(r, fl, "margin", "flooding.margin", 0, 0.0, 1, 1.0, &col->flood_margin,
                      " (fraction of the flooding F-factor tests may reach)")))
        return rc;
    return STAGECAL_OK;
}

/* Uncertainties with a unit, written like a run-log header cell: "xd[wt%]", "xb[ppm]",
 * "w[kg]", "v[kg/h]" (docs/column-file.md). Each is converted to the plain key's unit
 * (mole fraction, mol, mol/s). A mass basis goes to moles with the bound that holds at every
 * composition: dx/dw ≤ max(M)/min(M) for a fraction, 1/min(M) per kg for an amount or a
 * flow, so the stated uncertainty is never made smaller. *plain receives a copy of u
 * without these keys (NULL when there were none; the caller frees it, also on an error). An
 * error when a plain key is given as well,
 * a unit is unknown or a mass basis has no molar masses. */
static int read_unit_uncertainties(const rd *r, json_t *u, stagecal_column *col, json_t **plain)
{
    static const struct {
        const char *name, *plain;
        stagecal_quantity qty;
        double hi;
    } map[] = {{"xd", "xd", STAGECAL_QTY_FRACTION, 0.5},
               {"xb", "xb", STAGECAL_QTY_FRACTION, 0.5},
               {"w", "w_mol", STAGECAL_QTY_AMOUNT, INFINITY},
               {"v", "v_mol_s", STAGECAL_QTY_FLOW, INFINITY}};
    const char *key;
    json_t *val;
    *plain = NULL;
    double ml = col->system.m_light, mh = col->system.m_heavy;
    json_object_foreach(u, key, val)
    {
        if (!strchr(key, '['))
            continue;
        char path[96], name[48], unit[48];
        int has_unit;
        stagecal_error e;
        snprintf(path, sizeof path, "uncertainty.%s", key);
        if (stagecal_units_split(key, name, sizeof name, unit, sizeof unit, &has_unit, &e) != 0)
            return jr_fail(&r->jr, path, "%s", e.text);
        size_t k = 0;
        while (k < sizeof map / sizeof map[0] && strcmp(map[k].name, name) != 0)
            k++;
        if (k == sizeof map / sizeof map[0])
            return jr_fail(&r->jr, path,
                           "unknown key (expected xd, xb, w or v with a unit, e.g. xd[wt%%])");
        if (json_object_get(u, map[k].plain))
            return jr_fail(&r->jr, path, "'%s' is given as well (expected one of the two)",
                           map[k].plain);
        stagecal_unit un;
        if (stagecal_units_parse(map[k].qty, unit, &un, &e) != 0)
            return jr_fail(&r->jr, path, "%s", e.text);
        if (!json_is_number(val) || !(json_number_value(val) >= 0))
            return jr_fail(&r->jr, path, "expected a number >= 0 in %s", unit);
        double x = json_number_value(val) * un.scale;
        if (un.mass) {
            if (!(ml > 0 && mh > 0))
                return jr_fail(&r->jr, path,
                               "a mass basis needs the molar masses (expected "
                               "system.light/heavy.molar_mass_kg_mol)");
            double lo = ml < mh ? ml : mh, hi = ml < mh ? mh : ml;
            x = map[k].qty == STAGECAL_QTY_FRACTION ? x * hi / lo : x / lo;
        }
        if (!(x <= map[k].hi))
            return jr_fail(&r->jr, path, "%g %s is more than %g mol/mol", json_number_value(val),
                           unit, map[k].hi);
        double *dst = k == 0   ? &col->u.xd
                      : k == 1 ? &col->u.xb
                      : k == 2 ? &col->u.w_mol
                               : &col->u.v_mol_s;
        *dst = x;
        if (!*plain && !(*plain = json_copy(u)))
            return jr_fail(&r->jr, "uncertainty", "out of memory");
        json_object_del(*plain, key);
    }
    return STAGECAL_OK;
}

static int read_root(const rd *r, json_t *root, stagecal_column *col)
{
    static const char *const keys[] = {
        "format", "version",   "id",          "description", "packed_height_m", "inside_diameter_m",
        "trays",  "condenser", "pressure_pa", "system",      "uncertainty",     "pressure_drop_pa",
        "holdup", "flooding",  NULL};
    int rc;
    if (!json_is_object(root))
        return error_set_at(r->jr.err, STAGECAL_EDATA, r->jr.source, 0, 0,
                            "expected a JSON object at the top level");
    json_t *fmt = json_object_get(root, "format");
    if (!json_is_string(fmt) || strcmp(json_string_value(fmt), COLUMN_FORMAT) != 0)
        return jr_fail(&r->jr, "format", "expected \"%s\"", COLUMN_FORMAT);
    json_t *ver = json_object_get(root, "version");
    if (!json_is_integer(ver) || json_integer_value(ver) < 1)
        return jr_fail(&r->jr, "version", "expected an integer >= 1");
    if (json_integer_value(ver) > COLUMN_VERSION)
        return error_set_at(r->jr.err, STAGECAL_EVERSION, r->jr.source, 0, 0,
                            "member 'version': %lld is newer than this program reads (%d)",
                            (long long)json_integer_value(ver), COLUMN_VERSION);
    if ((rc = check_keys(r, root, "", keys)))
        return rc;
    if ((rc = get_str(r, root, "id", "id", 1, col->id, sizeof col->id)))
        return rc;
    if (!stagecal_convention_id_valid(col->id))
        return jr_fail(&r->jr, "id", "'%s' may hold only %s", col->id,
                       stagecal_convention_id_rule());
    if ((rc = get_str(r, root, "description", "description", 0, NULL, 0)) == STAGECAL_OK &&
        json_is_string(json_object_get(root, "description")))
        snprintf(col->description, sizeof col->description, "%s",
                 json_string_value(json_object_get(root, "description")));
    if (rc ||
        (rc = get_num(r, root, "packed_height_m", "packed_height_m", 0, 0.0, 1, 1000.0,
                      &col->height_m, " m")) ||
        (rc = get_num(r, root, "inside_diameter_m", "inside_diameter_m", 0, 0.0, 1, 100.0,
                      &col->diameter_m, " m")))
        return rc;
    json_t *tr = json_object_get(root, "trays");
    if (tr) {
        if (!json_is_integer(tr) || json_integer_value(tr) < 1 || json_integer_value(tr) > 10000)
            return jr_fail(&r->jr, "trays", "expected an integer in [1, 10000]");
        col->trays = (int)json_integer_value(tr);
        if (col->height_m > 0.0)
            return jr_fail(&r->jr, "trays", "a column has trays or a packed height, not both");
    }
    char cond[16];
    if ((rc = get_str(r, root, "condenser", "condenser", 1, cond, sizeof cond)))
        return rc;
    if (!strcmp(cond, "total"))
        col->condenser = STAGECAL_CONDENSER_TOTAL;
    else if (!strcmp(cond, "partial"))
        col->condenser = STAGECAL_CONDENSER_PARTIAL;
    else
        return jr_fail(&r->jr, "condenser", "'%s' is not \"total\" or \"partial\"", cond);
    stagecal_system *s = &col->system;
    if ((rc = get_num(r, root, "pressure_pa", "pressure_pa", 0, 0.0, 1, 1e8, &s->p_pa, " Pa")))
        return rc;

    json_t *sys = get_obj(r, root, "system", "system", 1, &rc);
    if (!sys)
        return rc;
    static const char *const skeys[] = {"light", "heavy", "latent_heat_j_mol", "cp_liquid_j_mol_k",
                                        "model", NULL};
    if ((rc = check_keys(r, sys, "system", skeys)))
        return rc;
    int need_ant = 0;
    stagecal_antoine ant[2];
    memset(ant, 0, sizeof ant);
    if ((rc = read_model(r, sys, s, ant, &need_ant, 0)) ||
        (rc = read_component(r, sys, "light", s->light, &s->m_light, &s->latent_light_j_mol,
                             &ant[0], need_ant)) ||
        (rc = read_component(r, sys, "heavy", s->heavy, &s->m_heavy, &s->latent_heavy_j_mol,
                             &ant[1], need_ant)) ||
        (rc = get_num(r, sys, "latent_heat_j_mol", "system.latent_heat_j_mol", 0, 1000.0, 1, 1e6,
                      &s->latent_j_mol, " J/mol (not kJ/mol)")) ||
        (rc = get_num(r, sys, "cp_liquid_j_mol_k", "system.cp_liquid_j_mol_k", 0, 0.0, 1, 2000.0,
                      &s->cp_liquid_j_mol_k, " J/(mol K)")))
        return rc;
    if ((s->latent_light_j_mol > 0) != (s->latent_heavy_j_mol > 0))
        return error_set_at(r->jr.err, STAGECAL_EDATA, r->jr.source, 0, 0,
                            "member 'system.%s.latent_heat_j_mol': give the latent heats of both "
                            "components, or neither",
                            s->latent_light_j_mol > 0 ? "heavy" : "light");
    if ((rc = read_holdup(r, root, col)) || (rc = read_flooding(r, root, col)))
        return rc;
    if (!strcmp(s->light, s->heavy))
        return jr_fail(&r->jr, "system.heavy.name", "'%s' is also the light component", s->heavy);
    if ((rc = read_model(r, sys, s, ant, &need_ant, 1)))
        return rc;

    json_t *u = get_obj(r, root, "uncertainty", "uncertainty", 0, &rc);
    if (rc)
        return rc;
    json_t *plain = NULL; /* u without the keys that carry a unit */
    if (u && (rc = read_unit_uncertainties(r, u, col, &plain))) {
        json_decref(plain); /* (a copy made before the failing key) */
        return rc;
    }
    if (plain)
        u = plain;
    if (u) {
        static const char *const ukeys[] = {"xd",      "xb",           "w_mol",  "r",     "r_rel",
                                            "v_mol_s", "xd_heavy_rel", "xb_rel", "t_top", "t_pot",
                                            NULL};
        stagecal_uncertainty *q = &col->u;
        if ((rc = check_keys(r, u, "uncertainty", ukeys)) ||
            (rc = get_num(r, u, "xd", "uncertainty.xd", 0, 0.0, 0, 0.5, &q->xd,
                          " (mole fraction)")) ||
            (rc = get_num(r, u, "xb", "uncertainty.xb", 0, 0.0, 0, 0.5, &q->xb,
                          " (mole fraction)")) ||
            (rc = get_num(r, u, "w_mol", "uncertainty.w_mol", 0, 0.0, 0, INFINITY, &q->w_mol,
                          " mol")) ||
            (rc = get_num(r, u, "r", "uncertainty.r", 0, 0.0, 0, INFINITY, &q->r, "")) ||
            (rc = get_num(r, u, "r_rel", "uncertainty.r_rel", 0, 0.0, 0, 1.0, &q->r_rel,
                          " (fraction of R)")) ||
            (rc = get_num(r, u, "v_mol_s", "uncertainty.v_mol_s", 0, 0.0, 0, INFINITY, &q->v_mol_s,
                          " mol/s")) ||
            (rc = get_num(r, u, "xd_heavy_rel", "uncertainty.xd_heavy_rel", 0, 0.0, 0, 1.0,
                          &q->xd_heavy_rel, " (fraction of the heavy content 1 - xD)")) ||
            (rc = get_num(r, u, "xb_rel", "uncertainty.xb_rel", 0, 0.0, 0, 1.0, &q->xb_rel,
                          " (fraction of xB)")) ||
            (rc =
                 get_num(r, u, "t_top", "uncertainty.t_top", 0, 0.0, 0, 50.0, &q->t_top_k, " K")) ||
            (rc =
                 get_num(r, u, "t_pot", "uncertainty.t_pot", 0, 0.0, 0, 50.0, &q->t_pot_k, " K"))) {
            json_decref(plain);
            return rc;
        }
    }
    json_decref(plain);
    return STAGECAL_OK;
}

int stagecal_column_parse(const char *text, size_t len, const char *source, stagecal_column *col,
                          stagecal_error *err)
{
    rd r = {{source ? source : "<column>", "docs/column-file.md", err}};
    json_t *root;
    memset(col, 0, sizeof *col);
    if (jr_parse(&r.jr, text, len, "", &root) != STAGECAL_OK)
        return STAGECAL_EDATA;
    int rc = read_root(&r, root, col);
    json_decref(root);
    if (rc != STAGECAL_OK)
        stagecal_column_free(col);
    else
        stagecal_column_warnings(col);
    return rc;
}

int stagecal_column_load(const char *path, stagecal_column *col, stagecal_error *err)
{
    fileio_data in;
    memset(col, 0, sizeof *col);
    int rc = read_all(path, FILEIO_CAP_COLUMN, "column file", 0, &in, err);
    if (rc != STAGECAL_OK)
        return rc;
    rc = stagecal_column_parse(in.data, in.len, path, col, err);
    if (rc == STAGECAL_OK)
        memcpy(col->sha256, in.sha256, sizeof col->sha256);
    free(in.data);
    return rc;
}

void stagecal_column_free(stagecal_column *col)
{
    if (!col)
        return;
    stagecal_vle_free(col->system.vle);
    col->system.vle = NULL;
}

/*
 * batch_plan.c — the plan file (docs/plan-file.md): a small JSON document of our own,
 * format "stagecal-plan", version 1, giving the charge, boil-up, reflux policy and the
 * receivers of a batch to predict. Units in the file are those of the command line
 * (kmol, kmol/h, h, kJ/mol) and named in each member; they are converted to SI here.
 * Unknown members are refused so that a misspelt one is not silently ignored.
 */
#include "stagecal/batch.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fileio.h"
#include "internal.h"

#define PLAN_FORMAT "stagecal-plan"
#define PLAN_VERSION 1

/* Refuses members of obj not in the NULL-terminated list `allowed`. */
static int only_members(json_t *obj, const char *const *allowed, const char *where, const char *src,
                        stagecal_error *err)
{
    const char *key;
    json_t *val;
    json_object_foreach(obj, key, val)
    {
        size_t i = 0;
        while (allowed[i] && strcmp(allowed[i], key) != 0)
            i++;
        if (!allowed[i])
            return error_set_at(err, STAGECAL_EDATA, src, 0, 0,
                                "%s: unknown member '%s' (see docs/plan-file.md)", where, key);
    }
    return STAGECAL_OK;
}

/* A number member; *have = 0 when absent and not required. */
static int get_number(json_t *obj, const char *name, const char *where, int required, double *out,
                      int *have, const char *src, stagecal_error *err)
{
    json_t *v = json_object_get(obj, name);
    if (have)
        *have = v != NULL;
    if (!v) {
        if (required)
            return error_set_at(err, STAGECAL_EDATA, src, 0, 0,
                                "%s: member '%s' is missing (expected a number)", where, name);
        return STAGECAL_OK;
    }
    if (!json_is_number(v))
        return error_set_at(err, STAGECAL_EDATA, src, 0, 0, "%s: member '%s' is not a number",
                            where, name);
    *out = json_number_value(v);
    return STAGECAL_OK;
}

static int parse_policy(json_t *po, stagecal_batch_policy *out, const char *src,
                        stagecal_error *err)
{
    json_t *kind = json_object_get(po, "kind");
    const char *k = json_string_value(kind);
    int rc;
    if (!json_is_object(po))
        return error_set_at(err, STAGECAL_EDATA, src, 0, 0, "member 'policy' is not an object");
    if (!k)
        return error_set_at(err, STAGECAL_EDATA, src, 0, 0,
                            "policy: member 'kind' is missing or not a string (expected "
                            "'constant-reflux', 'constant-distillate' or 'schedule')");
    memset(out, 0, sizeof *out);
    if (strcmp(k, "constant-reflux") == 0) {
        static const char *const ok[] = {"kind", "reflux", NULL};
        out->kind = STAGECAL_BATCH_CONSTANT_REFLUX;
        if ((rc = only_members(po, ok, "policy", src, err)) ||
            (rc = get_number(po, "reflux", "policy", 1, &out->reflux, NULL, src, err)))
            return rc;
    } else if (strcmp(k, "constant-distillate") == 0) {
        static const char *const ok[] = {"kind", "x_distillate", "reflux_max", NULL};
        out->kind = STAGECAL_BATCH_CONSTANT_DISTILLATE;
        if ((rc = only_members(po, ok, "policy", src, err)) ||
            (rc = get_number(po, "x_distillate", "policy", 1, &out->xd_set, NULL, src, err)) ||
            (rc = get_number(po, "reflux_max", "policy", 1, &out->reflux_max, NULL, src, err)))
            return rc;
    } else if (strcmp(k, "schedule") == 0) {
        static const char *const ok[] = {"kind", "by", "steps", NULL};
        const char *by = json_string_value(json_object_get(po, "by"));
        json_t *steps = json_object_get(po, "steps");
        if ((rc = only_members(po, ok, "policy", src, err)))
            return rc;
        out->kind = STAGECAL_BATCH_SCHEDULE;
        if (!by || (strcmp(by, "time_h") != 0 && strcmp(by, "pot_x") != 0))
            return error_set_at(err, STAGECAL_EDATA, src, 0, 0,
                                "policy: member 'by' must be 'time_h' or 'pot_x'");
        out->key = strcmp(by, "time_h") == 0 ? STAGECAL_BATCH_BY_TIME : STAGECAL_BATCH_BY_POT_X;
        if (!json_is_array(steps) || json_array_size(steps) < 1 ||
            json_array_size(steps) > STAGECAL_BATCH_MAXSTEPS)
            return error_set_at(err, STAGECAL_EDATA, src, 0, 0,
                                "policy: member 'steps' must be an array of 1 to %d objects",
                                STAGECAL_BATCH_MAXSTEPS);
        out->n_steps = json_array_size(steps);
        for (size_t i = 0; i < out->n_steps; i++) {
            static const char *const oks[] = {"from", "reflux", NULL};
            json_t *s = json_array_get(steps, i);
            char where[48];
            snprintf(where, sizeof where, "policy.steps[%zu]", i);
            if (!json_is_object(s))
                return error_set_at(err, STAGECAL_EDATA, src, 0, 0, "%s: not an object", where);
            if ((rc = only_members(s, oks, where, src, err)) ||
                (rc = get_number(s, "from", where, 1, &out->steps[i].at, NULL, src, err)) ||
                (rc = get_number(s, "reflux", where, 1, &out->steps[i].reflux, NULL, src, err)))
                return rc;
            if (out->key == STAGECAL_BATCH_BY_TIME)
                out->steps[i].at *= 3600.0; /* h → s */
        }
    } else {
        return error_set_at(err, STAGECAL_EDATA, src, 0, 0,
                            "policy: unknown kind '%s' (expected 'constant-reflux', "
                            "'constant-distillate' or 'schedule')",
                            k);
    }
    return STAGECAL_OK;
}

static int parse_cuts(json_t *cuts, stagecal_batch_problem *pb, const char *src,
                      stagecal_error *err)
{
    if (!json_is_array(cuts) || json_array_size(cuts) < 1 ||
        json_array_size(cuts) > STAGECAL_BATCH_MAXCUTS)
        return error_set_at(err, STAGECAL_EDATA, src, 0, 0,
                            "member 'cuts' must be an array of 1 to %d objects",
                            STAGECAL_BATCH_MAXCUTS);
    pb->n_cuts = json_array_size(cuts);
    for (size_t i = 0; i < pb->n_cuts; i++) {
        static const char *const ok[] = {"name", "until", "value", NULL};
        json_t *c = json_array_get(cuts, i);
        char where[32];
        int rc, kind;
        snprintf(where, sizeof where, "cuts[%zu]", i);
        if (!json_is_object(c))
            return error_set_at(err, STAGECAL_EDATA, src, 0, 0, "%s: not an object", where);
        if ((rc = only_members(c, ok, where, src, err)))
            return rc;
        const char *name = json_string_value(json_object_get(c, "name"));
        const char *until = json_string_value(json_object_get(c, "until"));
        if (json_object_get(c, "name") && (!name || strlen(name) >= sizeof pb->cuts[i].name))
            return error_set_at(err, STAGECAL_EDATA, src, 0, 0,
                                "%s: member 'name' must be a string of at most %zu bytes", where,
                                sizeof pb->cuts[i].name - 1);
        snprintf(pb->cuts[i].name, sizeof pb->cuts[i].name, "%s", name ? name : "");
        if (!until || (kind = stagecal_batch_target_from_name(until)) < 0)
            return error_set_at(err, STAGECAL_EDATA, src, 0, 0,
                                "%s: member 'until' must be one of 'pot-x', 'mean-x', "
                                "'distillate-x', 'fraction', 'time', 'reflux'",
                                where);
        pb->cuts[i].kind = (stagecal_batch_target_kind)kind;
        if ((rc = get_number(c, "value", where, 1, &pb->cuts[i].value, NULL, src, err)))
            return rc;
        if (kind == STAGECAL_BATCH_UNTIL_TIME)
            pb->cuts[i].value *= 3600.0; /* h → s */
    }
    return STAGECAL_OK;
}

int stagecal_batch_plan_parse(const char *text, size_t len, const char *source,
                              stagecal_batch_problem *pb, stagecal_error *err)
{
    static const char *const ok[] = {
        "format", "version", "charge", "boilup_kmol_h", "latent_heat_kj_mol", "policy",
        "cuts",   "comment", NULL};
    json_error_t jerr;
    json_t *doc = json_loadb(text, len, 0, &jerr);
    int rc = STAGECAL_OK, have;
    double v = 0; /* (set by get_number when present; GCC -O3 cannot see it) */
    stagecal_batch_problem tmp = *pb;
    if (!doc)
        return error_set_at(err, STAGECAL_EDATA, source, jerr.line, jerr.column,
                            "not a JSON plan: %s", jerr.text);
    if (!json_is_object(doc)) {
        rc = error_set_at(err, STAGECAL_EDATA, source, 0, 0, "the plan is not a JSON object");
        goto done;
    }
    const char *fmt = json_string_value(json_object_get(doc, "format"));
    if (!fmt || strcmp(fmt, PLAN_FORMAT) != 0) {
        rc = error_set_at(err, STAGECAL_EDATA, source, 0, 0, "member 'format' must be \"%s\"",
                          PLAN_FORMAT);
        goto done;
    }
    json_t *ver = json_object_get(doc, "version");
    if (!json_is_integer(ver) || json_integer_value(ver) < 1) {
        rc = error_set_at(err, STAGECAL_EDATA, source, 0, 0,
                          "member 'version' must be an integer >= 1");
        goto done;
    }
    if (json_integer_value(ver) > PLAN_VERSION) {
        rc = error_set_at(err, STAGECAL_EVERSION, source, 0, 0,
                          "written for a newer stagecal (plan version %lld > %d)",
                          (long long)json_integer_value(ver), PLAN_VERSION);
        goto done;
    }
    if ((rc = only_members(doc, ok, "plan", source, err)))
        goto done;
    json_t *charge = json_object_get(doc, "charge");
    if (charge) {
        static const char *const okc[] = {"amount_kmol", "x_light", NULL};
        if (!json_is_object(charge)) {
            rc =
                error_set_at(err, STAGECAL_EDATA, source, 0, 0, "member 'charge' is not an object");
            goto done;
        }
        if ((rc = only_members(charge, okc, "charge", source, err)) ||
            (rc = get_number(charge, "amount_kmol", "charge", 1, &v, NULL, source, err)))
            goto done;
        tmp.w0_mol = v * 1000.0;
        if ((rc = get_number(charge, "x_light", "charge", 1, &tmp.xb0, NULL, source, err)))
            goto done;
    }
    if ((rc = get_number(doc, "boilup_kmol_h", "plan", 0, &v, &have, source, err)))
        goto done;
    if (have)
        tmp.v_mol_s = v * 1000.0 / 3600.0;
    if ((rc = get_number(doc, "latent_heat_kj_mol", "plan", 0, &v, &have, source, err)))
        goto done;
    if (have)
        tmp.latent_j_mol = v * 1000.0;
    json_t *po = json_object_get(doc, "policy");
    if (!po) {
        rc = error_set_at(err, STAGECAL_EDATA, source, 0, 0,
                          "member 'policy' is missing (see docs/plan-file.md)");
        goto done;
    }
    if ((rc = parse_policy(po, &tmp.policy, source, err)))
        goto done;
    json_t *cuts = json_object_get(doc, "cuts");
    if (cuts && (rc = parse_cuts(cuts, &tmp, source, err)))
        goto done;
    *pb = tmp;
done:
    json_decref(doc);
    return rc;
}

int stagecal_batch_plan_load(const char *path, stagecal_batch_problem *pb, stagecal_error *err)
{
    fileio_data in;
    int rc = read_all(path, FILEIO_CAP_PLAN, "plan file", 0, &in, err);
    if (rc != STAGECAL_OK)
        return rc;
    rc = stagecal_batch_plan_parse(in.data, in.len, path, pb, err);
    free(in.data);
    return rc;
}

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
#include "json_read.h"

#define PLAN_FORMAT "stagecal-plan"
#define PLAN_VERSION 1

static int bad_kind(const json_reader *r, const char *k)
{
    return jr_fail(r, "policy.kind",
                   "%s%s%sexpected 'constant-reflux', 'constant-distillate' or "
                   "'schedule'",
                   k ? "'" : "missing or not a string, ", k ? k : "", k ? "' is not known, " : "");
}

static int parse_policy(const json_reader *r, json_t *po, stagecal_batch_policy *out)
{
    const char *k = json_string_value(json_object_get(po, "kind"));
    int rc;
    memset(out, 0, sizeof *out);
    if (!k)
        return bad_kind(r, NULL);
    if (strcmp(k, "constant-reflux") == 0) {
        static const char *const ok[] = {"kind", "reflux", NULL};
        out->kind = STAGECAL_BATCH_CONSTANT_REFLUX;
        if ((rc = jr_only(r, po, "policy", ok)) ||
            (rc = jr_number(r, po, "reflux", "policy.reflux", 1, 0, &out->reflux, NULL)))
            return rc;
    } else if (strcmp(k, "constant-distillate") == 0) {
        static const char *const ok[] = {"kind", "x_distillate", "reflux_max", NULL};
        out->kind = STAGECAL_BATCH_CONSTANT_DISTILLATE;
        if ((rc = jr_only(r, po, "policy", ok)) ||
            (rc = jr_number(r, po, "x_distillate", "policy.x_distillate", 1, 0, &out->xd_set,
                            NULL)) ||
            (rc =
                 jr_number(r, po, "reflux_max", "policy.reflux_max", 1, 0, &out->reflux_max, NULL)))
            return rc;
    } else if (strcmp(k, "schedule") == 0) {
        static const char *const ok[] = {"kind", "by", "steps", NULL};
        const char *by = json_string_value(json_object_get(po, "by"));
        json_t *steps = json_object_get(po, "steps");
        if ((rc = jr_only(r, po, "policy", ok)))
            return rc;
        out->kind = STAGECAL_BATCH_SCHEDULE;
        if (!by || (strcmp(by, "time_h") != 0 && strcmp(by, "pot_x") != 0))
            return jr_fail(r, "policy.by", "expected 'time_h' or 'pot_x'");
        out->key = strcmp(by, "time_h") == 0 ? STAGECAL_BATCH_BY_TIME : STAGECAL_BATCH_BY_POT_X;
        if (!json_is_array(steps) || json_array_size(steps) < 1 ||
            json_array_size(steps) > STAGECAL_BATCH_MAXSTEPS)
            return jr_fail(r, "policy.steps", "expected an array of 1 to %d objects",
                           STAGECAL_BATCH_MAXSTEPS);
        out->n_steps = json_array_size(steps);
        for (size_t i = 0; i < out->n_steps; i++) {
            static const char *const oks[] = {"from", "reflux", NULL};
            json_t *s = json_array_get(steps, i);
            char where[48], from[64], reflux[64];
            snprintf(where, sizeof where, "policy.steps[%zu]", i);
            snprintf(from, sizeof from, "%s.from", where);
            snprintf(reflux, sizeof reflux, "%s.reflux", where);
            if (!json_is_object(s))
                return jr_fail(r, where, "expected an object");
            if ((rc = jr_only(r, s, where, oks)) ||
                (rc = jr_number(r, s, "from", from, 1, 0, &out->steps[i].at, NULL)) ||
                (rc = jr_number(r, s, "reflux", reflux, 1, 0, &out->steps[i].reflux, NULL)))
                return rc;
            if (out->key == STAGECAL_BATCH_BY_TIME)
                out->steps[i].at *= 3600.0; /* h → s */
        }
    } else {
        return bad_kind(r, k);
    }
    return STAGECAL_OK;
}

static int parse_cuts(const json_reader *r, json_t *cuts, stagecal_batch_problem *pb)
{
    if (!json_is_array(cuts) || json_array_size(cuts) < 1 ||
        json_array_size(cuts) > STAGECAL_BATCH_MAXCUTS)
        return jr_fail(r, "cuts", "expected an array of 1 to %d objects", STAGECAL_BATCH_MAXCUTS);
    pb->n_cuts = json_array_size(cuts);
    for (size_t i = 0; i < pb->n_cuts; i++) {
        static const char *const ok[] = {"name", "until", "value", NULL};
        json_t *c = json_array_get(cuts, i);
        char where[32], at[48];
        int rc, kind;
        snprintf(where, sizeof where, "cuts[%zu]", i);
        if (!json_is_object(c))
            return jr_fail(r, where, "expected an object");
        if ((rc = jr_only(r, c, where, ok)))
            return rc;
        const char *name = json_string_value(json_object_get(c, "name"));
        const char *until = json_string_value(json_object_get(c, "until"));
        snprintf(at, sizeof at, "%s.name", where);
        if (json_object_get(c, "name") && (!name || strlen(name) >= sizeof pb->cuts[i].name))
            return jr_fail(r, at, "expected a string of at most %zu bytes",
                           sizeof pb->cuts[i].name - 1);
        snprintf(pb->cuts[i].name, sizeof pb->cuts[i].name, "%s", name ? name : "");
        snprintf(at, sizeof at, "%s.until", where);
        if (!until || (kind = stagecal_batch_target_from_name(until)) < 0)
            return jr_fail(r, at,
                           "expected one of 'pot-x', 'mean-x', 'distillate-x', 'fraction', "
                           "'time', 'reflux'");
        pb->cuts[i].kind = (stagecal_batch_target_kind)kind;
        snprintf(at, sizeof at, "%s.value", where);
        if ((rc = jr_number(r, c, "value", at, 1, 0, &pb->cuts[i].value, NULL)))
            return rc;
        if (kind == STAGECAL_BATCH_UNTIL_TIME)
            pb->cuts[i].value *= 3600.0; /* h → s */
    }
    return STAGECAL_OK;
}

/* The members of the plan after format and version; fills tmp. */
static int parse_members(const json_reader *r, json_t *doc, stagecal_batch_problem *tmp)
{
    static const char *const ok[] = {
        "format", "version", "charge", "boilup_kmol_h", "latent_heat_kj_mol", "policy",
        "cuts",   "comment", NULL};
    static const char *const okc[] = {"amount_kmol", "x_light", NULL};
    json_t *charge, *po, *cuts;
    double v = 0; /* (set by jr_number when present; GCC -O3 cannot see it) */
    int rc, have;
    if ((rc = jr_only(r, doc, "", ok)) || (rc = jr_object(r, doc, "charge", NULL, 0, &charge)))
        return rc;
    if (charge) {
        if ((rc = jr_only(r, charge, "charge", okc)) ||
            (rc = jr_number(r, charge, "amount_kmol", "charge.amount_kmol", 1, 0, &v, NULL)))
            return rc;
        tmp->w0_mol = v * 1000.0;
        if ((rc = jr_number(r, charge, "x_light", "charge.x_light", 1, 0, &tmp->xb0, NULL)))
            return rc;
    }
    if ((rc = jr_number(r, doc, "boilup_kmol_h", NULL, 0, 0, &v, &have)))
        return rc;
    if (have)
        tmp->v_mol_s = v * 1000.0 / 3600.0;
    if ((rc = jr_number(r, doc, "latent_heat_kj_mol", NULL, 0, 0, &v, &have)))
        return rc;
    if (have)
        tmp->latent_j_mol = v * 1000.0;
    if ((rc = jr_object(r, doc, "policy", NULL, 1, &po)) ||
        (rc = parse_policy(r, po, &tmp->policy)))
        return rc;
    cuts = json_object_get(doc, "cuts");
    return cuts ? parse_cuts(r, cuts, tmp) : STAGECAL_OK;
}

int stagecal_batch_plan_parse(const char *text, size_t len, const char *source,
                              stagecal_batch_problem *pb, stagecal_error *err)
{
    json_reader r = {source, "docs/plan-file.md", err};
    json_t *doc;
    stagecal_batch_problem tmp = *pb;
    int rc = jr_parse(&r, text, len, "not a JSON plan: ", &doc);
    if (rc != STAGECAL_OK)
        return rc;
    json_t *ver = json_object_get(doc, "version");
    const char *fmt = json_string_value(json_object_get(doc, "format"));
    if (!json_is_object(doc))
        rc = error_set_at(err, STAGECAL_EDATA, source, 0, 0, "the plan is not a JSON object");
    else if (!fmt || strcmp(fmt, PLAN_FORMAT) != 0)
        rc = jr_fail(&r, "format", "expected \"%s\"", PLAN_FORMAT);
    else if (!json_is_integer(ver) || json_integer_value(ver) < 1)
        rc = jr_fail(&r, "version", "expected an integer >= 1");
    else if (json_integer_value(ver) > PLAN_VERSION)
        rc = error_set_at(err, STAGECAL_EVERSION, source, 0, 0,
                          "written for a newer stagecal (plan version %lld > %d)",
                          (long long)json_integer_value(ver), PLAN_VERSION);
    else if ((rc = parse_members(&r, doc, &tmp)) == STAGECAL_OK)
        *pb = tmp;
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

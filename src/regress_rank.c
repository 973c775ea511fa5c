/*
 * regress_rank.c — model selection: each candidate form fitted and ranked by AICc
 * (Hurvich & Tsai 1989), with Akaike weights (see stagecal/regress.h).
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "stagecal/regress.h"

static int cmp_rows(const void *a, const void *b)
{
    const stagecal_regress_rank_row *x = a, *y = b;
    if ((x->status == STAGECAL_OK) != (y->status == STAGECAL_OK))
        return x->status == STAGECAL_OK ? -1 : 1;
    if (x->status != STAGECAL_OK)
        return 0;
    return (x->aicc > y->aicc) - (x->aicc < y->aicc);
}

int stagecal_regress_rank(const stagecal_regress_data *data, const char *const *forms,
                          size_t nforms, const stagecal_regress_params *params,
                          stagecal_regress_rank_row *rows, size_t *nrows, stagecal_error *err)
{
    const char *list[STAGECAL_REGRESS_MAXRANK];
    size_t nl = 0;
    if (!data || !rows || !nrows)
        return error_set(err, STAGECAL_EINVAL, "rank: data, rows and nrows are required");
    *nrows = 0;
    if (forms) {
        if (nforms == 0 || nforms > STAGECAL_REGRESS_MAXRANK)
            return error_set(err, STAGECAL_EINVAL, "rank: %zu forms (expected 1 to %d)", nforms,
                             STAGECAL_REGRESS_MAXRANK);
        for (size_t i = 0; i < nforms; i++)
            list[nl++] = forms[i];
    } else {
        int all_finite = 1;
        for (size_t i = 0; data->r && i < data->n; i++)
            if (isinf(data->r[i]))
                all_finite = 0;
        list[nl++] = "constant";
        list[nl++] = "saturating";
        list[nl++] = "linear:1+1/R";
        list[nl++] = "linear:1+L/V";
        if (all_finite)
            list[nl++] = "linear:1+lnR";
        if (data->f_load) {
            list[nl++] = "saturating-load";
            list[nl++] = "linear:1+1/R+F";
            list[nl++] = "linear:1+1/R+F+F^2";
            list[nl++] = "linear:1+L/V+F+F^2";
        }
    }
    stagecal_regress_params prm = params ? *params : stagecal_regress_default_params();
    prm.bootstrap = 0;
    prm.robust = STAGECAL_ROBUST_NONE;
    prm.band_points = 0;
    prm.theta0 = NULL;
    size_t fitted = 0;
    double best = INFINITY;
    for (size_t i = 0; i < nl; i++) {
        stagecal_regress_rank_row *row = &rows[i];
        stagecal_error e;
        stagecal_regress_result res;
        memset(row, 0, sizeof *row);
        stagecal_error_clear(&e);
        row->status = stagecal_form_parse(list[i], &row->form, &e);
        if (row->status == STAGECAL_OK) {
            row->status = stagecal_regress_fit(data, &row->form, &prm, &res, &e);
            if (row->status == STAGECAL_OK && !res.ic_defined)
                row->status = error_set(&e, STAGECAL_EDATA,
                                        "AICc undefined: %zu points for %zu counted parameters",
                                        res.n, res.k_ic);
        } else {
            snprintf(row->form.name, sizeof row->form.name, "%s", list[i]);
        }
        if (row->status != STAGECAL_OK) {
            snprintf(row->message, sizeof row->message, "%s", e.text);
            continue;
        }
        row->p = res.p;
        row->rss = res.rss;
        row->sigma = res.sigma;
        row->aicc = res.aicc;
        row->bic = res.bic;
        row->r2 = res.r2;
        stagecal_regress_result_free(&res);
        best = fmin(best, row->aicc);
        fitted++;
    }
    *nrows = nl;
    if (fitted == 0)
        return error_set(err, STAGECAL_EDATA, "rank: none of the %zu forms could be fitted (%s)",
                         nl, rows[0].message);
    double sum = 0;
    for (size_t i = 0; i < nl; i++)
        if (rows[i].status == STAGECAL_OK) {
            rows[i].delta_aicc = rows[i].aicc - best;
            sum += exp(-0.5 * rows[i].delta_aicc);
        }
    for (size_t i = 0; i < nl; i++)
        if (rows[i].status == STAGECAL_OK)
            rows[i].akaike_weight = exp(-0.5 * rows[i].delta_aicc) / sum;
    qsort(rows, nl, sizeof *rows, cmp_rows);
    return STAGECAL_OK;
}

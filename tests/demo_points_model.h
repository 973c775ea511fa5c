/*
 * demo_points_model.h — a model fitted to the demo points (datasets/points/demo_points.csv,
 * invented data), for the tests that need a fitted model with its covariance: the design
 * tests (tests/test_design.c) and the proposal's chart (tests/test_plot_design.c).
 */
#ifndef STAGECAL_DEMO_POINTS_MODEL_H
#define STAGECAL_DEMO_POINTS_MODEL_H

#include <string.h>

#include "testutil.h"
#include "stagecal/model.h"
#include "stagecal/regress.h"

/* The form named `form` fitted to the demo points: parameters, covariance, sigma and dof
 * of the fit, its envelope (R and F ranges); 20 windows of 800 samples. The caller frees
 * m with stagecal_model_free. */
static inline void demo_points_model(stagecal_model *m, const char *form)
{
    stagecal_regress_data d;
    stagecal_regress_result r;
    stagecal_regress_params par = stagecal_regress_default_params();
    par.band_points = 0;
    memset(&d, 0, sizeof d);
    memset(&r, 0, sizeof r);
    assert_int_equal(
        stagecal_regress_data_read(STAGECAL_DATASETS "/points/demo_points.csv", &d, NULL),
        STAGECAL_OK);
    stagecal_model_init(m);
    assert_int_equal(stagecal_form_parse(form, &m->form, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_regress_fit(&d, &m->form, &par, &r, NULL), STAGECAL_OK);
    size_t p = m->form.p;
    memcpy(m->theta, r.theta, p * sizeof *r.theta);
    memcpy(m->cov, r.cov, p * p * sizeof *r.cov);
    m->sigma = r.sigma_obs;
    m->dof = r.dof;
    m->n_windows = 20;
    m->n_samples = 800;
    m->r_min = r.r_min;
    m->r_max = r.r_max;
    m->f_min = r.f_min;
    m->f_max = r.f_max;
    stagecal_regress_result_free(&r);
    stagecal_regress_data_free(&d);
}

#endif

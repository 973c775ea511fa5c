/*
 * nist_misra1a.h — NIST StRD nonlinear regression Misra1a (NIST ITL Statistical Reference
 * Datasets, nonlinear regression, Misra1a, Misra 1978): the certified values and a reader of the
 * data (datasets/reference/misra1a.csv), shared by tests/test_regress.c and
 * tests/test_regress_nlin.c. Include after cmocka and testutil.h.
 */
#ifndef STAGECAL_NIST_MISRA1A_H
#define STAGECAL_NIST_MISRA1A_H

#include "stagecal/regress.h"
#include "testutil.h"

/* NIST StRD Misra1a certified values (NIST ITL Statistical Reference Datasets,
 * nonlinear regression, Misra1a). */
#define MISRA_B1 2.3894212918E+02
#define MISRA_B2 5.5015643181E-04
#define MISRA_SD1 2.7070075241E+00
#define MISRA_SD2 7.2668688436E-06
#define MISRA_RSS 1.2455138894E-01
#define MISRA_RSD 1.0187876330E-01

static inline void read_misra(stagecal_regress_data *d)
{
    stagecal_error e;
    int rc = stagecal_regress_data_read(STAGECAL_DATASETS "/reference/misra1a.csv", d, &e);
    if (rc != STAGECAL_OK)
        print_error("%s\n", e.text);
    assert_int_equal(rc, STAGECAL_OK);
    assert_int_equal(d->n, 14);
    assert_null(d->sigma);
    assert_null(d->f_load);
}

#endif

/*
 * test_report.c — the HTML report: self-contained (no script, no external resource),
 * text escaped, every section present when filled and absent when not, the caution
 * always there, inline SVG ids unique across figures, printable (A4 print CSS), files
 * written atomically. Rendering in a browser is checked by tests/report_render.sh.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>

#include "stagecal/form.h"
#include "stagecal/model.h"
#include "stagecal/report.h"
#include "stagecal/stages.h"
#include "lsan_fontconfig.h"
#include "testutil.h"

#define OUTDIR STAGECAL_BUILD_DIR "/report_out"

static int group_setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    mkdir(OUTDIR, 0755);
    return 0;
}

static size_t count(const char *hay, const char *needle)
{
    size_t n = 0;
    for (const char *p = strstr(hay, needle); p; p = strstr(p + 1, needle))
        n++;
    return n;
}

static const double x5[5] = {0, 1, 2, 3, 4};
static const double y5[5] = {1, 2, 2.5, 2.8, 3.0};
static const double z5[5] = {1.3, 1.8, 2.9, 2.6, 3.2};

static stagecal_plot_series ser_a[2] = {
    {STAGECAL_PLOT_LINE, "fit", x5, y5, NULL, 5, 0, 0, 0, 0},
    {STAGECAL_PLOT_POINTS, "samples <A&B>", x5, z5, NULL, 5, 1, 0, 0, 0}};
static stagecal_plot_series ser_b[1] = {{STAGECAL_PLOT_LINE, "trend", x5, z5, NULL, 5, 2, 1, 0, 0}};

static void report_caution_matches_design(void **state)
{
    (void)state;
    const char *c = stagecal_caution_text();
    /* The caution (README.md) names the hazard, the envelope/extrapolation, and that
     * the output does not replace procedures, codes or a licensed engineer's review */
    assert_non_null(strstr(c, "flammable"));
    assert_non_null(strstr(c, "toxic"));
    assert_non_null(strstr(c, "extrapolation"));
    assert_non_null(strstr(c, "licensed engineer"));
    assert_non_null(strstr(c, "site procedures"));
}

static void report_minimal_has_caution_only(void **state)
{
    (void)state;
    stagecal_report r;
    memset(&r, 0, sizeof r);
    char *html = NULL;
    size_t len = 0;
    stagecal_error err;
    assert_int_equal(stagecal_report_html(&r, NULL, &html, &len, &err), STAGECAL_OK);
    assert_int_equal(strlen(html), len);
    assert_true(strncmp(html, "<!DOCTYPE html>", 15) == 0);
    assert_non_null(strstr(html, "<meta charset=\"utf-8\">"));
    assert_non_null(strstr(html, stagecal_caution_text()));
    assert_non_null(strstr(html, "<title>Stage calibration report</title>"));
    static const char *const absent[] = {"id=\"warnings\"", "id=\"job\"",  "id=\"validation\"",
                                         "id=\"windows\"",  "id=\"fit\"",  "id=\"plots\"",
                                         "id=\"hetp\"",     "id=\"trend\""};
    for (size_t i = 0; i < sizeof absent / sizeof absent[0]; i++)
        assert_null(strstr(html, absent[i]));
    /* printable to A4 */
    assert_non_null(strstr(html, "@media print"));
    assert_non_null(strstr(html, "size:A4"));
    free(html);
}

static void report_full_is_self_contained(void **state)
{
    (void)state;
    stagecal_plot_chart ca = {"chart A", "R [-]", "stages [-]", NAN, NAN,  NAN,  NAN, 0,
                              1,         0,       ser_a,        2,   NULL, NULL, 0};
    stagecal_plot_chart cb = {"chart B", "time [h]", "stages [-]", NAN, NAN,  NAN,  NAN, 0,
                              1,         2,          ser_b,        1,   NULL, NULL, 0};
    stagecal_report_figure figs[2] = {{&ca, "first <figure>"}, {&cb, NULL}};
    stagecal_report_item job[1] = {{"column", "X-1 & friends (fictional)"}};
    const char *head[2] = {"R [-]", "stages [-]"};
    const char *cells[4] = {"1.5", "4.2", "inf", NULL};
    stagecal_report_table tab = {"windows", head, 2, cells, 2};
    const char *findings[1] = {"<script>alert(1)</script>"};
    const char *warnings[1] = {"R = 9 is outside the envelope"};
    stagecal_report_item hetp[1] = {{"HETP", "0.5 m"}};
    stagecal_report_item trend[1] = {{"loss", "0.1 stages/month"}};
    stagecal_report_item cond[1] = {{"stages", "7.2"}};
    stagecal_report r = {.title = "Report \"T\"",
                         .subtitle = "sub",
                         .demo_notice = "demo: invented",
                         .job = job,
                         .n_job = 1,
                         .inputs = &tab,
                         .findings = findings,
                         .n_findings = 1,
                         .windows = &tab,
                         .fit = &tab,
                         .fit_summary = job,
                         .n_fit_summary = 1,
                         .figures = figs,
                         .n_figures = 2,
                         .condition = cond,
                         .n_condition = 1,
                         .hetp = hetp,
                         .n_hetp = 1,
                         .trend = trend,
                         .n_trend = 1,
                         .warnings = warnings,
                         .n_warnings = 1,
                         .generator = "test 1"};
    char *html = NULL;
    stagecal_error err;
    int rc = stagecal_report_html(&r, NULL, &html, NULL, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    /* every section present */
    static const char *const present[] = {"id=\"warnings\"", "id=\"job\"",   "id=\"validation\"",
                                          "id=\"windows\"",  "id=\"fit\"",   "id=\"plots\"",
                                          "id=\"hetp\"",     "id=\"trend\"", "id=\"caution\"",
                                          "id=\"condition\""};
    for (size_t i = 0; i < sizeof present / sizeof present[0]; i++)
        assert_non_null(strstr(html, present[i]));
    /* escaped text; no script, no external resource */
    assert_non_null(strstr(html, "&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert_non_null(strstr(html, "X-1 &amp; friends"));
    assert_non_null(strstr(html, "<title>Report &quot;T&quot;</title>"));
    assert_null(strstr(html, "<script"));
    assert_null(strstr(html, "<link"));
    assert_null(strstr(html, "src="));
    assert_null(strstr(html, "@import"));
    /* the only URLs are the SVG/XLink namespace names, which load nothing */
    size_t urls = count(html, "http://") + count(html, "https://");
    size_t ns =
        count(html, "http://www.w3.org/2000/svg") + count(html, "http://www.w3.org/1999/xlink");
    assert_int_equal(urls, ns);
    /* two inline figures, tagged with their series counts */
    assert_int_equal(count(html, "<svg class=\"stagecal-figure\""), 2);
    assert_non_null(strstr(html, "data-series=\"2\""));
    assert_non_null(strstr(html, "data-series=\"1\""));
    assert_null(strstr(html, "<?xml"));
    /* element ids unique across the page (cairo reuses glyph/clip ids per file) */
    size_t nid = 0, cap = count(html, " id=\"");
    char **ids = calloc(cap + 1, sizeof *ids);
    assert_non_null(ids);
    for (const char *p = strstr(html, " id=\""); p; p = strstr(p + 1, " id=\"")) {
        const char *q = p + 5, *e = strchr(q, '"');
        assert_non_null(e);
        ids[nid] = strndup(q, (size_t)(e - q));
        for (size_t k = 0; k < nid; k++)
            if (strcmp(ids[k], ids[nid]) == 0)
                fail_msg("duplicate id '%s'", ids[nid]);
        nid++;
    }
    assert_true(nid > 10);
    for (size_t k = 0; k < nid; k++)
        free(ids[k]);
    free(ids);
    /* local references (the svg driver writes none; any other SVG would) point at
     * prefixed ids */
    for (const char *p = strstr(html, "href=\"#"); p; p = strstr(p + 1, "href=\"#"))
        assert_true(p[7] == 'f' && p[8] >= '0' && p[8] <= '9');
    free(html);
}

static void report_refuses_bad_content(void **state)
{
    (void)state;
    stagecal_report r;
    char *html = NULL;
    stagecal_error err;
    memset(&r, 0, sizeof r);
    const char *head[1] = {NULL};
    stagecal_report_table bad = {NULL, head, 1, NULL, 0};
    r.fit = &bad;
    assert_int_equal(stagecal_report_html(&r, NULL, &html, NULL, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "fit table: heading 1"));
    assert_null(html);
    r.fit = NULL;
    stagecal_plot_series s = ser_b[0];
    s.n = 0;
    stagecal_plot_chart c = {"c", "x", "y", NAN, NAN, NAN, NAN, 0, 0, 0, &s, 1, NULL, NULL, 0};
    stagecal_report_figure f = {&c, NULL};
    r.figures = &f;
    r.n_figures = 1;
    assert_int_equal(stagecal_report_html(&r, NULL, &html, NULL, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "report figure 1: series 1"));
}

static void report_write_is_atomic(void **state)
{
    (void)state;
    stagecal_report r;
    stagecal_error err;
    memset(&r, 0, sizeof r);
    assert_int_equal(stagecal_report_write(&r, NULL, OUTDIR "/min.html", &err), STAGECAL_OK);
    struct stat st;
    assert_int_equal(stat(OUTDIR "/min.html", &st), 0);
    assert_true(st.st_size > 500);
    assert_int_equal(st.st_mode & 0777, 0644);
    assert_int_equal(stagecal_report_write(&r, NULL, OUTDIR "/missing/dir/r.html", &err),
                     STAGECAL_EWRITE);
    assert_non_null(strstr(err.text, "cannot create"));
}

/* A model in memory (invented numbers): saturating, a = 9.2, b = 0.55, diagonal
 * covariance, σ = 0.3 with 10 dof, envelope R in [0.6, 6], HETP known. */
static void demo_model(stagecal_model *m)
{
    stagecal_error err;
    stagecal_model_init(m);
    snprintf(m->column_id, sizeof m->column_id, "D-101");
    snprintf(m->light, sizeof m->light, "light");
    snprintf(m->heavy, sizeof m->heavy, "heavy");
    snprintf(m->vle_kind, sizeof m->vle_kind, "alpha");
    double alpha = 2.4;
    assert_int_equal(stagecal_model_add_vle_param(m, "alpha", &alpha, 1, &err), STAGECAL_OK);
    assert_int_equal(stagecal_form_parse("saturating", &m->form, &err), STAGECAL_OK);
    m->theta[0] = 9.2, m->theta[1] = 0.55;
    m->cov[0] = 0.04, m->cov[1] = m->cov[2] = 0, m->cov[3] = 0.0025;
    m->sigma = 0.3, m->dof = 10, m->level = 0.95;
    m->n_windows = 12, m->n_samples = 340, m->n_runs = 3;
    m->r_min = 0.6, m->r_max = 6.0;
    m->has_hetp = 1, m->height_m = 4.2, m->hetp_r = 3, m->hetp_m = 0.52, m->hetp_low_m = 0.47;
    m->hetp_high_m = 0.58, m->hetp_level = 0.95;
    assert_int_equal(stagecal_model_add_input(m, "run_a.csv",
                                              "0f1e2d3c4b5a69788796a5b4c3d2e1f00f1e2d3c4b5a6978"
                                              "8796a5b4c3d2e1f0",
                                              412, &err),
                     STAGECAL_OK);
    snprintf(m->fitted_utc, sizeof m->fitted_utc, "2026-11-30T14:02:11Z");
    if (stagecal_model_check(m, &err) != STAGECAL_OK)
        fail_msg("demo model: %s", err.text);
}

/* The HETP item on page one at reflux r: H/(N(r) − 1) with N = a·(1 − exp(−b·R)) (the
 * saturating form, form.h) and the endpoint-mapped interval H/(N − 1 ± t·se) with se =
 * sqrt(gᵀCg), g = (1 − e^(−bR), a·R·e^(−bR)) (delta method; at R = inf g = (1, 0)) and
 * t(0.975, 10) = 2.228138851986274 (Student t table). The report prints three decimals:
 * tolerance 6e-4 m (half a unit plus rounding of the inputs). */
static void check_answer_hetp(const stagecal_report *rep, double r)
{
    const double a = 9.2, b = 0.55, h = 4.2, t = 2.228138851986274;
    double e = isinf(r) ? 0 : exp(-b * r);
    double n = a * (1 - e) - 1, g0 = 1 - e, g1 = isinf(r) ? 0 : a * r * e;
    double se = sqrt(0.04 * g0 * g0 + 0.0025 * g1 * g1);
    const char *v = NULL;
    for (size_t i = 0; i < rep->n_answer; i++)
        if (strncmp(rep->answer[i].key, "HETP at R = ", 12) == 0)
            v = rep->answer[i].value;
    if (!v)
        fail_msg("no HETP item on page one");
    double got, lo, hi;
    if (sscanf(v, "%lf m (95 %% interval %lf \xe2\x80\x93 %lf m)", &got, &lo, &hi) != 3)
        fail_msg("HETP item '%s'", v);
    assert_abs(got, h / n, 6e-4, "HETP = H/(N - 1) at the answer's R");
    assert_abs(lo, h / (n + t * se), 6e-4, "HETP low end");
    assert_abs(hi, h / (n - t * se), 6e-4, "HETP high end");
}

/* The fit table of a model that carries its design with the rows' runs (calibrate
 * --covariance cr2-run, format 5): each parameter's interval is θ ∓ t·se with t at that
 * parameter's own run-clustered Bell–McCaffrey dof (the calibration's), here against numpy
 * (tests/cr2_crosscheck.py, Pustejovsky & Tipton 2018), and the t quantile from GSL; not
 * at the band's dof at the reference R (another contrast). Formatted as the report does
 * (%.6g): the dof agree to 1e-9, far below the printed digits. */
static void report_fit_table_takes_each_parameters_dof(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    double x[20], r[10], ref[3];
    size_t run[10];
    demo_model(&m);
    assert_int_equal(stagecal_form_parse("linear:1+1/R", &m.form, &err), STAGECAL_OK);
    m.theta[0] = 8, m.theta[1] = -3;
    m.cov[0] = 0.04, m.cov[1] = m.cov[2] = -0.01, m.cov[3] = 0.09;
    for (size_t i = 0; i < 10; i++) {
        r[i] = 0.7 + 0.55 * (double)i;
        x[2 * i] = 1;
        x[2 * i + 1] = 1 / r[i];
        run[i] = i % 4;
    }
    testutil_cr2_dof(r, run, 10, ref);
    assert_int_equal(stagecal_model_set_design(&m, x, 10, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_set_design_run(&m, run, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_check(&m, &err), STAGECAL_OK);
    stagecal_report_doc *doc = NULL;
    assert_int_equal(stagecal_report_from_model(&m, NULL, &doc, &err), STAGECAL_OK);
    const stagecal_report *rep = stagecal_report_doc_content(doc);
    const double se[2] = {0.2, 0.3};
    for (size_t k = 0; k < 2; k++) {
        char want[64];
        double t = gsl_cdf_tdist_Pinv(0.975, ref[k]);
        assert_true(ref[k] <= 3); /* 4 runs */
        snprintf(want, sizeof want, "[%.6g, %.6g]", m.theta[k] - t * se[k], m.theta[k] + t * se[k]);
        assert_string_equal(rep->fit->cells[4 * k + 3], want);
    }
    stagecal_report_doc_free(doc);
    stagecal_model_free(&m);
}

static void report_from_model_fills_sections(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    demo_model(&m);
    double r[3] = {1.0, 3.0, 9.0}, st[3] = {4.0, 7.3, 9.1};
    stagecal_regress_data pts = {3, r, NULL, st, NULL};
    stagecal_report_doc *doc = NULL;
    int rc = stagecal_report_from_model(&m, &pts, &doc, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    const stagecal_report *rep = stagecal_report_doc_content(doc);
    assert_int_equal(rep->n_figures, 2); /* stages against R, residuals */
    /* prediction band, confidence band, fit inside the envelope, the same three beyond it
     * (extrapolated: lighter bands, dashed), envelope, points */
    assert_int_equal(stagecal_report_doc_chart(doc, 0)->n_series, 8);
    assert_null(stagecal_report_doc_chart(doc, 2));
    /* one point (R = 9) lies above the envelope's r_max = 6 */
    assert_int_equal(rep->n_warnings, 1);
    assert_non_null(strstr(rep->warnings[0], "R = 9"));
    /* fit table: a ± t·se with t(0.975, 10 dof) = 2.228138851986274 (Student t table,
     * e.g. NIST/SEMATECH e-Handbook 1.3.6.7.2: 2.228); formatted as the report does */
    char want[64];
    snprintf(want, sizeof want, "[%.6g, %.6g]", 9.2 - 2.228138851986274 * 0.2,
             9.2 + 2.228138851986274 * 0.2);
    assert_string_equal(rep->fit->cells[3], want);
    assert_string_equal(rep->fit->cells[2], "0.2");
    /* page one: HETP at the answer's condition, the model's reference R = 3 */
    assert_int_equal(rep->n_hetp, 0);
    assert_non_null(strstr(rep->answer_heading, "R = 3"));
    check_answer_hetp(rep, 3.0);
    assert_true(rep->signoff);
    char *html = NULL;
    assert_int_equal(stagecal_report_html(rep, NULL, &html, NULL, &err), STAGECAL_OK);
    assert_non_null(strstr(html, "D-101"));
    assert_non_null(strstr(html, "0f1e2d3c4b5a6978"));
    assert_non_null(strstr(html, "id=\"answer\""));
    assert_non_null(strstr(html, "Prepared by"));
    assert_non_null(strstr(html, "Checked by"));
    assert_non_null(strstr(html, "Approved by"));
    /* the answer comes first, then the caution, then the sign-off; no demo banner for a
     * column file that does not say its data are invented */
    assert_true(strstr(html, "id=\"answer\"") < strstr(html, "id=\"caution\""));
    assert_true(strstr(html, "id=\"caution\"") < strstr(html, "id=\"signoff\""));
    assert_true(strstr(html, "id=\"signoff\"") < strstr(html, "id=\"fit\""));
    assert_null(strstr(html, "INVENTED DEMO DATA"));
    /* human labels, not the model file's keys */
    assert_null(strstr(html, ">alpha<"));
    assert_non_null(strstr(html, "relative volatility"));
    assert_int_equal(count(html, "<svg class=\"stagecal-figure\""), 2);
    free(html);
    stagecal_report_doc_free(doc);
    stagecal_model_free(&m);
}

/* The xB an item reports ("0.1234" or "0.1234 – 0.2345": the first number). */
static double item_xb(const stagecal_report *rep, const char *key)
{
    for (size_t i = 0; i < rep->n_condition; i++)
        if (strcmp(rep->condition[i].key, key) == 0)
            return strtod(rep->condition[i].value, NULL);
    fail_msg("no condition item '%s'", key);
    return NAN;
}

/* The stated condition: the model's stages stepped on its constant-α equilibrium must
 * reach the xB that the closed forms give for that many stages: Fenske at total reflux
 * (Fenske 1932, "Fractionation of straight-run Pennsylvania gasoline", Ind. Eng. Chem. 24, citation
 * from memory: N = ln[xD/(1−xD)·(1−xB)/xB] / ln α, solved for xB), Smoker at finite R (Smoker 1938,
 * "Analytic determination of plates in fractionating columns", Trans. AIChE 34, citation from
 * memory, stagecal_smoker checked against its published rows in test_stages.c). Tolerance 6e-5: the
 * report prints xB with four decimals (half a unit is 5e-5). */
static void report_condition_matches_closed_forms(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    demo_model(&m);
    const double alpha = 2.4, xd = 0.95;
    for (int k = 0; k < 2; k++) {
        double r = k == 0 ? INFINITY : 3.0;
        stagecal_report_doc *doc = NULL;
        assert_int_equal(stagecal_report_from_model(&m, NULL, &doc, &err), STAGECAL_OK);
        int rc = stagecal_report_doc_add_condition(doc, &m, NULL, xd, r, NAN, &err);
        if (rc)
            fail_msg("%s", err.text);
        const stagecal_report *rep = stagecal_report_doc_content(doc);
        stagecal_model_point p;
        assert_int_equal(stagecal_model_eval(&m, r, NAN, 0, &p, &err), STAGECAL_OK);
        double xb = item_xb(rep, "pot composition reached, xB");
        double xb_lo = item_xb(rep, "xB over the prediction interval");
        if (k == 0) {
            double q = xd / (1 - xd) * pow(alpha, -p.stages);
            assert_abs(xb, q / (1 + q), 6e-5, "Fenske xB at the model's stages");
            q = xd / (1 - xd) * pow(alpha, -p.pi_high);
            assert_abs(xb_lo, q / (1 + q), 6e-5, "Fenske xB at the interval's high end");
            /* R = inf lies above the envelope (r_max = 6): flagged */
            assert_int_equal(rep->n_warnings, 1);
            assert_non_null(strstr(rep->warnings[0], "outside the fitted envelope"));
        } else {
            double n_back;
            assert_int_equal(stagecal_smoker(alpha, r, xd, xb, &n_back, &err), STAGECAL_OK);
            /* dN/dxB is about 60 stages per unit xB here, so 6e-5 in xB is 4e-3 stages */
            assert_abs(n_back, p.stages, 5e-3, "Smoker stages at the reported xB");
            assert_int_equal(rep->n_warnings, 0);
        }
        /* page one answers at the stated condition, HETP at that same R */
        check_answer_hetp(rep, r);
        assert_non_null(strstr(rep->answer_heading, k == 0 ? "R = inf" : "R = 3"));
        assert_true(xb_lo < xb);             /* more stages, leaner pot */
        assert_int_equal(rep->n_figures, 2); /* the fit, the McCabe–Thiele chart */
        char *html = NULL;
        assert_int_equal(stagecal_report_html(rep, NULL, &html, NULL, &err), STAGECAL_OK);
        assert_non_null(strstr(html, "id=\"condition\""));
        free(html);
        /* one condition per document; a load given to a form without it is refused */
        assert_int_equal(stagecal_report_doc_add_condition(doc, &m, NULL, xd, r, NAN, &err),
                         STAGECAL_EINVAL);
        stagecal_report_doc_free(doc);
    }
    stagecal_report_doc *doc = NULL;
    assert_int_equal(stagecal_report_from_model(&m, NULL, &doc, &err), STAGECAL_OK);
    assert_int_equal(stagecal_report_doc_add_condition(doc, &m, NULL, xd, 3, 1.2, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text, "report condition: the form 'saturating' does not use the "
                                  "vapour load (expected no F-factor)");
    assert_int_equal(stagecal_report_doc_add_condition(doc, &m, NULL, 1.5, 3, NAN, &err),
                     STAGECAL_EINVAL);
    stagecal_report_doc_free(doc);
    stagecal_model_free(&m);
}

/* The CLI end to end: a model file written by the model module, then `report` and
 * `plot` on it (exit codes and files). */
/* The fit summary gives one new window's σ by R at the envelope's ends where the model has a
 * scatter function (format 4): σ(R) = exp(c0 + c1·λ), λ = R/(R + 1), and its dof
 * 1/(2·(V00 + 2λV01 + λ²V11)) capped at the model's 10 (closed forms from
 * include/stagecal/scatter.h). Printed to 3 significant digits: tolerance 5e-3 relative
 * (half a unit in the last digit, plus rounding). Without a function: no such item. */
static void report_sigma_by_r(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    demo_model(&m); /* envelope R 0.6 to 6 */
    const double c0 = -2.5, c1 = 1.6, v00 = 0.09, v01 = -0.06, v11 = 0.08;
    for (int with = 0; with < 2; with++) {
        m.scatter.n = with ? 2 : 0;
        m.scatter.c[0] = c0, m.scatter.c[1] = c1;
        m.scatter.cov[0] = v00, m.scatter.cov[1] = m.scatter.cov[2] = v01, m.scatter.cov[3] = v11;
        m.scatter.lv_lo = 0.375, m.scatter.lv_hi = 6.0 / 7;
        assert_int_equal(stagecal_model_check(&m, &err), STAGECAL_OK);
        stagecal_report_doc *doc = NULL;
        assert_int_equal(stagecal_report_from_model(&m, NULL, &doc, &err), STAGECAL_OK);
        const stagecal_report *rep = stagecal_report_doc_content(doc);
        const char *v = NULL;
        for (size_t i = 0; i < rep->n_fit_summary; i++)
            if (strcmp(rep->fit_summary[i].key, "one new window") == 0)
                v = rep->fit_summary[i].value;
        if (!with) {
            assert_null(v);
            stagecal_report_doc_free(doc);
            continue;
        }
        assert_non_null(v);
        double s_lo, d_lo, s_hi, d_hi;
        if (sscanf(v,
                   "scatters about the curve by %lf stages at R = 0.6 (%lf degrees of freedom) "
                   "and %lf at R = 6 (%lf)",
                   &s_lo, &d_lo, &s_hi, &d_hi) != 4)
            fail_msg("sigma by R item '%s'", v);
        const double lv[2] = {0.375, 6.0 / 7}, got_s[2] = {s_lo, s_hi}, got_d[2] = {d_lo, d_hi};
        for (int e = 0; e < 2; e++) {
            double var = v00 + 2 * lv[e] * v01 + lv[e] * lv[e] * v11;
            assert_rel(got_s[e], exp(c0 + c1 * lv[e]), 5e-3, "sigma at an envelope end");
            assert_rel(got_d[e], fmin(1 / (2 * var), 10), 5e-3, "its dof");
        }
        stagecal_report_doc_free(doc);
    }
    stagecal_model_free(&m);
}

static void report_cli_writes_files(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    char path[1024], cmd[4096];
    demo_model(&m);
    /* the program in a sanitizer build: the same fontconfig suppression as above */
    FILE *supp = fopen(OUTDIR "/lsan.supp", "w");
    assert_non_null(supp);
    fputs("leak:libfontconfig.so\n", supp);
    fclose(supp);
    setenv("LSAN_OPTIONS", "suppressions=" OUTDIR "/lsan.supp", 1);
    int rc = stagecal_model_write(&m, OUTDIR "/fits", path, sizeof path, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    stagecal_model_free(&m);
    FILE *f = fopen(OUTDIR "/pts.csv", "w");
    assert_non_null(f);
    fputs("R,stages\n1,4.0\n3,7.3\ninf,9.1\n", f);
    fclose(f);
    snprintf(cmd, sizeof cmd,
             "%s report '%s' --points " OUTDIR "/pts.csv -o " OUTDIR "/cli.html --json "
             "> " OUTDIR "/cli.json 2>" OUTDIR "/cli.err",
             STAGECAL_BIN, path);
    assert_int_equal(system(cmd), 0);
    struct stat st;
    assert_int_equal(stat(OUTDIR "/cli.html", &st), 0);
    assert_true(st.st_size > 10000);
    char *js = NULL;
    f = fopen(OUTDIR "/cli.json", "r");
    assert_non_null(f);
    js = calloc(1, 4096);
    assert_non_null(js);
    assert_true(fread(js, 1, 4095, f) > 0);
    fclose(f);
    assert_non_null(strstr(js, "\"figures\": 2"));
    assert_non_null(strstr(js, "\"status\": \"ok\""));
    free(js);
    /* total reflux lies above r_max = 6: a warning on stderr */
    snprintf(cmd, sizeof cmd, "grep -q 'outside the fitted envelope' " OUTDIR "/cli.err");
    assert_int_equal(system(cmd), 0);
    snprintf(cmd, sizeof cmd, "%s plot model '%s' -o " OUTDIR "/cli_fit.svg --quiet >/dev/null",
             STAGECAL_BIN, path);
    assert_int_equal(system(cmd), 0);
    assert_int_equal(stat(OUTDIR "/cli_fit.svg", &st), 0);
    snprintf(cmd, sizeof cmd,
             "%s plot mccabe --alpha 2.5 --xd 0.95 --reflux 3 --stages 6 --murphree 0.8 "
             "-o " OUTDIR "/cli_mc.pdf >/dev/null",
             STAGECAL_BIN);
    assert_int_equal(system(cmd), 0);
    assert_int_equal(stat(OUTDIR "/cli_mc.pdf", &st), 0);
    /* usage errors exit 2 (docs/cli.md): unknown extension, missing output */
    snprintf(cmd, sizeof cmd,
             "%s plot mccabe --alpha 2.5 --xd 0.95 --reflux 3 --stages 6 -o x.gif 2>/dev/null",
             STAGECAL_BIN);
    rc = system(cmd);
    assert_true(WIFEXITED(rc) && WEXITSTATUS(rc) == 2);
    /* a sample below the pinch is bad data: 65 */
    snprintf(cmd, sizeof cmd,
             "%s plot mccabe --alpha 2.5 --xd 0.95 --reflux 1 --xb 0.01 -o " OUTDIR
             "/p.png 2>/dev/null",
             STAGECAL_BIN);
    rc = system(cmd);
    assert_true(WIFEXITED(rc) && WEXITSTATUS(rc) == 65);
    /* a missing model: 66 */
    snprintf(cmd, sizeof cmd, "%s report " OUTDIR "/nope.json 2>/dev/null", STAGECAL_BIN);
    rc = system(cmd);
    assert_true(WIFEXITED(rc) && WEXITSTATUS(rc) == 66);
}

/* Words a reviewer signs: a fit with no residual scatter says so in words (never
 * "σ 0"), and a column file that calls its data invented puts the banner on page one. */
static void report_words_for_a_reviewer(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    demo_model(&m);
    m.sigma = 0;
    stagecal_report_doc *doc = NULL;
    assert_int_equal(stagecal_report_from_model(&m, NULL, &doc, &err), STAGECAL_OK);
    assert_int_equal(stagecal_report_doc_set_description(doc, "Plant column D-101, repacked"),
                     STAGECAL_OK);
    const stagecal_report *rep = stagecal_report_doc_content(doc);
    assert_null(rep->demo_notice);
    assert_int_equal(stagecal_report_doc_set_description(
                         doc, "INVENTED DEMO: a fictional column of a fictional site"),
                     STAGECAL_OK);
    char *html = NULL;
    assert_int_equal(stagecal_report_html(rep, NULL, &html, NULL, &err), STAGECAL_OK);
    assert_null(strstr(html, "\xcf\x83 0"));
    assert_null(strstr(html, "sigma 0"));
    assert_non_null(strstr(html, "none measurable"));
    assert_non_null(strstr(html, "No residual scatter"));
    const char *banner = strstr(html, "INVENTED DEMO DATA");
    assert_non_null(banner);
    assert_true(banner < strstr(html, "id=\"answer\""));
    free(html);
    stagecal_report_doc_free(doc);
    stagecal_model_free(&m);
}

/* A one-sided model (analysers at their limit: "at least N stages") answers "at least"
 * on page one, gives no prediction interval, and HETP "at most" H/(N − 1) at the same
 * condition (hetp.h: a lower bound on stages bounds HETP from above). */
static void report_one_sided_answer(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    demo_model(&m);
    assert_int_equal(stagecal_form_parse("constant", &m.form, &err), STAGECAL_OK);
    m.method = STAGECAL_MODEL_CENSORED;
    m.one_sided = 1;
    m.theta[0] = 8.2, m.theta_ml[0] = 8.6;
    memset(m.cov, 0, sizeof m.cov);
    if (stagecal_model_check(&m, &err) != STAGECAL_OK)
        fail_msg("one-sided model: %s", err.text);
    stagecal_report_doc *doc = NULL;
    assert_int_equal(stagecal_report_from_model(&m, NULL, &doc, &err), STAGECAL_OK);
    const stagecal_report *rep = stagecal_report_doc_content(doc);
    int stages = 0, hetp = 0;
    for (size_t i = 0; i < rep->n_answer; i++) {
        const char *k = rep->answer[i].key, *v = rep->answer[i].value;
        assert_null(strstr(k, "new window")); /* no prediction interval for a bound */
        if (strcmp(k, "equilibrium stages, pot included") == 0)
            stages = strncmp(v, "at least 8.20 ", 14) == 0;
        if (strncmp(k, "HETP at R = 3", 13) == 0) /* 4.2 m / (8.2 − 1) = 0.5833 m */
            hetp = strncmp(v, "at most 0.583 m", 15) == 0;
    }
    assert_true(stages);
    assert_true(hetp);
    char *html = NULL;
    assert_int_equal(stagecal_report_html(rep, NULL, &html, NULL, &err), STAGECAL_OK);
    assert_non_null(strstr(html, "One-sided"));
    assert_null(strstr(html, "\xcf\x83 0"));
    free(html);
    stagecal_report_doc_free(doc);
    stagecal_model_free(&m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(report_caution_matches_design),
        cmocka_unit_test(report_words_for_a_reviewer),
        cmocka_unit_test(report_one_sided_answer),
        cmocka_unit_test(report_minimal_has_caution_only),
        cmocka_unit_test(report_full_is_self_contained),
        cmocka_unit_test(report_refuses_bad_content),
        cmocka_unit_test(report_write_is_atomic),
        cmocka_unit_test(report_from_model_fills_sections),
        cmocka_unit_test(report_fit_table_takes_each_parameters_dof),
        cmocka_unit_test(report_condition_matches_closed_forms),
        cmocka_unit_test(report_sigma_by_r),
        cmocka_unit_test(report_cli_writes_files),
    };
    return cmocka_run_group_tests(tests, group_setup, NULL);
}

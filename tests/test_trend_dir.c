/*
 * test_trend_dir.c — the model files of a column's fits folder (src/trend_dir.c): only
 * "*.json" files that are not hidden, in byte order of their names whatever the order
 * the directory lists them in, each checked to be of the column; the refusals (missing
 * folder, empty folder, a model of another column) with their statuses.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include "stagecal/trend_dir.h"

/* A model file of column demo-bt-K-7 from the bad-input catalogue (a valid one). */
#define GOOD_MODEL STAGECAL_TESTS_DIR "/badinput/model_good.json"
#define DIR_ROOT STAGECAL_BUILD_DIR "/trend_dir_test"

static char *slurp(const char *path, size_t *n)
{
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    fseek(f, 0, SEEK_END);
    long len = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *buf = malloc((size_t)len);
    assert_non_null(buf);
    assert_int_equal(fread(buf, 1, (size_t)len, f), (size_t)len);
    fclose(f);
    *n = (size_t)len;
    return buf;
}

static void put(const char *dir, const char *name, const char *text, size_t n)
{
    char path[1024];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(text, 1, n, f), n);
    fclose(f);
}

static void fresh_dir(const char *dir)
{
    char cmd[1200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s' && mkdir -p '%s'", dir, dir);
    assert_int_equal(system(cmd), 0);
}

static void trend_dir_lists_sorted_json_only(void **state)
{
    (void)state;
    const char *dir = DIR_ROOT "/demo-bt-K-7";
    size_t n;
    char *model = slurp(GOOD_MODEL, &n);
    fresh_dir(dir);
    /* written out of order; a hidden file and a non-JSON file are skipped */
    put(dir, "b-2.json", model, n);
    put(dir, "a-1.json", model, n);
    put(dir, "c-3.json", model, n);
    put(dir, ".hidden.json", "not a model", 11);
    put(dir, "notes.txt", "not a model", 11);
    stagecal_trend_dir d;
    stagecal_error err;
    assert_int_equal(stagecal_trend_dir_load(dir, "demo-bt-K-7", &d, &err), STAGECAL_OK);
    assert_int_equal(d.n, 3);
    assert_string_equal(d.paths[0], DIR_ROOT "/demo-bt-K-7/a-1.json");
    assert_string_equal(d.paths[1], DIR_ROOT "/demo-bt-K-7/b-2.json");
    assert_string_equal(d.paths[2], DIR_ROOT "/demo-bt-K-7/c-3.json");
    for (size_t i = 0; i < d.n; i++)
        assert_string_equal(d.models[i].column_id, "demo-bt-K-7");
    stagecal_trend_dir_free(&d);
    assert_int_equal(d.n, 0);
    assert_null(d.paths);
    stagecal_trend_dir_free(NULL);
    free(model);
}

static void trend_dir_refusals(void **state)
{
    (void)state;
    stagecal_trend_dir d;
    stagecal_error err;
    size_t n;
    char *model = slurp(GOOD_MODEL, &n);
    /* a missing folder: ENOINPUT naming it */
    assert_int_equal(stagecal_trend_dir_load(DIR_ROOT "/no-such", "no-such", &d, &err),
                     STAGECAL_ENOINPUT);
    assert_non_null(strstr(err.text, "expected the fits folder of the column"));
    assert_int_equal(d.n, 0);
    /* a folder without model files: ENOINPUT */
    fresh_dir(DIR_ROOT "/empty");
    put(DIR_ROOT "/empty", "readme.txt", "x", 1);
    assert_int_equal(stagecal_trend_dir_load(DIR_ROOT "/empty", "empty", &d, &err),
                     STAGECAL_ENOINPUT);
    assert_non_null(strstr(err.text, "no model files in"));
    /* a model of another column in the folder: EDATA naming the file and both ids */
    fresh_dir(DIR_ROOT "/other");
    put(DIR_ROOT "/other", "m.json", model, n);
    assert_int_equal(stagecal_trend_dir_load(DIR_ROOT "/other", "other", &d, &err), STAGECAL_EDATA);
    assert_non_null(strstr(err.text, "column id 'demo-bt-K-7' does not match its folder 'other'"));
    assert_int_equal(d.n, 0);
    /* a damaged file: the loader's status (bad data) */
    fresh_dir(DIR_ROOT "/bad");
    put(DIR_ROOT "/bad", "m.json", model, n / 2);
    assert_int_equal(stagecal_trend_dir_load(DIR_ROOT "/bad", "demo-bt-K-7", &d, &err),
                     STAGECAL_EDATA);
    free(model);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(trend_dir_lists_sorted_json_only),
        cmocka_unit_test(trend_dir_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

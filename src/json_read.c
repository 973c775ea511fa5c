/*
 * json_read.c — typed access to members of our JSON files, one message style
 * (contracts in json_read.h). jansson keeps no positions for values, so messages name
 * the member's path instead; parse errors carry jansson's line and column.
 */
#include "json_read.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

int jr_parse(const json_reader *r, const char *text, size_t len, const char *what, json_t **out)
{
    json_error_t je;
    *out = json_loadb(text, len, JSON_REJECT_DUPLICATES, &je);
    if (*out)
        return STAGECAL_OK;
    return error_set_at(r->err, STAGECAL_EDATA, r->source, je.line > 0 ? je.line : 0,
                        je.column > 0 ? je.column : 0, "%s%s", what, je.text);
}

int jr_fail(const json_reader *r, const char *path, const char *fmt, ...)
{
    char text[STAGECAL_ERROR_TEXT];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(text, sizeof text, fmt, ap);
    va_end(ap);
    return error_set_at(r->err, STAGECAL_EDATA, r->source, 0, 0, "member '%s': %s", path, text);
}

int jr_member(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
              const char *expected, json_t **out)
{
    *out = json_object_get(obj, key);
    if (!*out && need)
        return jr_fail(r, path ? path : key, "missing, expected %s", expected);
    return STAGECAL_OK;
}

/* A member that must have the JSON type test() accepts (named what). */
static int typed(const json_reader *r, const json_t *obj, const char *key, const char *path,
                 int need, json_t **out, int (*test)(const json_t *), const char *what)
{
    int rc = jr_member(r, obj, key, path, need, what, out);
    if (rc == STAGECAL_OK && *out && !test(*out)) {
        *out = NULL;
        return jr_fail(r, path ? path : key, "expected %s", what);
    }
    return rc;
}

static int is_object(const json_t *v)
{
    return json_is_object(v);
}

static int is_array(const json_t *v)
{
    return json_is_array(v);
}

int jr_object(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
              json_t **out)
{
    return typed(r, obj, key, path, need, out, is_object, "an object");
}

int jr_array(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
             json_t **out)
{
    return typed(r, obj, key, path, need, out, is_array, "an array");
}

int jr_string(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
              int nonempty, char *buf, size_t cap)
{
    json_t *v;
    int rc = jr_member(r, obj, key, path, need, "a string", &v);
    if (rc != STAGECAL_OK || !v)
        return rc;
    path = path ? path : key;
    if (!json_is_string(v))
        return jr_fail(r, path, "expected a string");
    const char *s = json_string_value(v);
    size_t n = strlen(s);
    if (buf && nonempty && (n == 0 || n >= cap))
        return jr_fail(r, path, "'%.40s%s' must have 1 to %zu characters", s, n > 40 ? "…" : "",
                       cap - 1);
    if (buf && n >= cap)
        return jr_fail(r, path, "longer than %zu characters", cap - 1);
    if (nonempty && n == 0)
        return jr_fail(r, path, "'' must not be empty");
    if (buf)
        memcpy(buf, s, n + 1);
    return STAGECAL_OK;
}

int jr_number(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
              int allow_inf, double *out, int *have)
{
    json_t *v;
    const char *expected = allow_inf ? "a number or \"inf\"" : "a number";
    int rc = jr_member(r, obj, key, path, need, expected, &v);
    if (have)
        *have = v != NULL;
    if (rc != STAGECAL_OK || !v)
        return rc;
    if (json_is_number(v))
        *out = json_number_value(v);
    else if (allow_inf && json_is_string(v) && strcmp(json_string_value(v), "inf") == 0)
        *out = INFINITY;
    else
        return jr_fail(r, path ? path : key, "expected %s", expected);
    return STAGECAL_OK;
}

int jr_count(const json_reader *r, const json_t *obj, const char *key, const char *path,
             size_t *out)
{
    json_t *v;
    int rc = jr_member(r, obj, key, path, 1, "an integer >= 0", &v);
    if (rc != STAGECAL_OK)
        return rc;
    if (!json_is_integer(v) || json_integer_value(v) < 0)
        return jr_fail(r, path ? path : key, "expected an integer >= 0");
    *out = (size_t)json_integer_value(v);
    return STAGECAL_OK;
}

int jr_only(const json_reader *r, json_t *obj, const char *path, const char *const *keys)
{
    const char *k;
    json_t *v;
    char full[256];
    json_object_foreach(obj, k, v)
    {
        size_t i = 0;
        while (keys[i] && strcmp(keys[i], k) != 0)
            i++;
        if (!keys[i]) {
            snprintf(full, sizeof full, "%s%s%s", path, path[0] ? "." : "", k);
            return jr_fail(r, full, "unknown member, see %s", r->doc);
        }
    }
    return STAGECAL_OK;
}

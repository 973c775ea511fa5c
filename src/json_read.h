/*
 * json_read.h — reading our JSON files (column, model, plan) with one message style
 * (internal; no jr_ user outside src/).
 *
 * Every message names the member by its path from the top of the document and says
 * what was expected, after the file name:
 *   "col.json: member 'system.model.alpha': 0.9 is outside (1, inf)"
 *   "m.json: member 'correlation.dof': missing, expected a number"
 *   "p.json: member 'policy.reflx': unknown member, see docs/plan-file.md"
 * Each getter takes the member's key (looked up in obj) and its path for messages
 * (NULL = the key itself, for members at the top level). A member that is absent and not
 * required leaves the output untouched and returns STAGECAL_OK (*have = 0 where taken).
 */
#ifndef STAGECAL_JSON_READ_H
#define STAGECAL_JSON_READ_H

#include <jansson.h>
#include <stddef.h>

#include "internal.h"

typedef struct {
    const char *source; /* file name for messages */
    const char *doc;    /* the format's page, named for unknown members ("docs/plan-file.md") */
    stagecal_error *err;
} json_reader;

/* Parses text (duplicate keys refused) into *out (caller json_decref's); EDATA with
 * jansson's line and column otherwise, the message prefixed with what ("" allowed). */
int jr_parse(const json_reader *r, const char *text, size_t len, const char *what, json_t **out);

/* EDATA: "source: member '<path>': <text>". */
int jr_fail(const json_reader *r, const char *path, const char *fmt, ...) SC_PRINTF(3, 4);

/* Member key of obj into *out (NULL when absent); with need, absence is "missing,
 * expected <expected>". */
int jr_member(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
              const char *expected, json_t **out);
int jr_object(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
              json_t **out);
int jr_array(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
             json_t **out);
/* A string copied into buf[cap] (buf NULL: only the type is checked); with nonempty, ""
 * is refused. */
int jr_string(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
              int nonempty, char *buf, size_t cap);
/* A number; with allow_inf also the string "inf" (= INFINITY). have may be NULL. */
int jr_number(const json_reader *r, const json_t *obj, const char *key, const char *path, int need,
              int allow_inf, double *out, int *have);
/* A required integer >= 0. */
int jr_count(const json_reader *r, const json_t *obj, const char *key, const char *path,
             size_t *out);
/* Refuses members of obj (at path; "" = top level) that are not in the NULL-terminated
 * list keys: "unknown member, see <doc>". */
int jr_only(const json_reader *r, json_t *obj, const char *path, const char *const *keys);

#endif

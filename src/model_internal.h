/*
 * model_internal.h — what the three files of the model module share (not installed):
 * model.c (the struct, add_*, checks, evaluation), model_json.c (the document, its
 * canonical hash, parsing) and model_file.c (write, load). Includes run one way only:
 * model_file.c → model_json.c → model.c.
 */
#ifndef STAGECAL_MODEL_INTERNAL_H
#define STAGECAL_MODEL_INTERNAL_H

#include "stagecal/model.h"

/* The optional physical data of the system: members of "system" (docs/model-file.md),
 * in the order of model_system_data(). 0 in the struct = not recorded = no member. */
enum { MODEL_NSYSTEM = 3 };
extern const char *const model_system_key[MODEL_NSYSTEM];
void model_system_data(const stagecal_model *m, double v[MODEL_NSYSTEM]);

/* 1 when s is 64 lowercase hex digits. */
int model_is_hex64(const char *s);
/* "YYYY-MM-DDTHH:MM:SSZ" with plausible ranges: 0, and "YYYYMMDDTHHMMSSZ" in stamp
 * (when not NULL); −1 otherwise. */
int model_parse_utc(const char *s, char stamp[17]);
/* Every rule of the format on m; messages are prefixed with source when not NULL; the
 * status is code (EINVAL when writing, EDATA when loading). */
int model_check(const stagecal_model *m, const char *source, int code, stagecal_error *err);

/* model_json.c: the complete file text (pretty, with checksum, final newline); NULL when
 * out of memory. The caller frees. */
char *model_render(const stagecal_model *m);

#endif

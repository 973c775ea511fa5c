/*
 * stagecal/convention.h — the stage convention every module shares, in one place:
 * the condenser type, how stages, column stages and theoretical trays relate, the
 * sentence that names the convention in outputs, the rule for column ids and the
 * caution that outputs whose numbers feed a decision carry.
 *
 * Convention: stages are equilibrium stages including the pot (stage N, an ideal
 * stage). A total condenser is not a stage; a partial condenser is one equilibrium
 * stage. The column section (trays or packing) holds
 *
 *     column stages = stages − 1            (total condenser)
 *     column stages = stages − 2            (partial condenser)
 *
 * and the theoretical trays of the column section are its column stages; HETP =
 * packed height / column stages; overall tray efficiency = column stages / actual
 * trays. Everything else in stagecal asks this header.
 */
#ifndef STAGECAL_CONVENTION_H
#define STAGECAL_CONVENTION_H

#include "stagecal/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Size of name buffers (column ids, component names), the terminating NUL included. */
#define STAGECAL_NAME_MAX 64

typedef enum {
    STAGECAL_CONDENSER_TOTAL = 0, /* not an equilibrium stage */
    STAGECAL_CONDENSER_PARTIAL    /* one equilibrium stage */
} stagecal_condenser;

/* "total" or "partial" (the spelling of column and model files). */
const char *stagecal_condenser_name(stagecal_condenser c);
/* Reads "total" or "partial" into *c; EINVAL (err says what was expected) otherwise. */
int stagecal_condenser_parse(const char *text, stagecal_condenser *c, stagecal_error *err);

/* Ideal stages outside the column section: 1 (the pot), 2 with a partial condenser. */
double stagecal_convention_outside(stagecal_condenser c);
/* Column stages (= theoretical trays of the column section) from stages:
 * stages − stagecal_convention_outside(c). Returns NAN when stages is not finite or
 * is below stagecal_convention_outside(c) (less separation than the pot and the partial
 * condenser give as ideal stages: there is no column count); callers print that as
 * "not determined" (JSON null, an empty CSV cell), never as a negative count. */
double stagecal_convention_column_stages(double stages, stagecal_condenser c);
/* Stages from column stages: column_stages + stagecal_convention_outside(c). */
double stagecal_convention_stages(double column_stages, stagecal_condenser c);

/* The convention in one sentence for a condenser type, as written into model files
 * (their "stage_convention.text"); never NULL. */
const char *stagecal_convention_text(stagecal_condenser c);
/* The convention when no condenser is known (a points file, --alpha/--kvalue): both
 * rules in one sentence; never NULL. */
const char *stagecal_convention_text_any(void);

/* The column-id rule: 1 when id is a usable column id — 1 to STAGECAL_NAME_MAX − 1
 * characters from [A-Za-z0-9_.-], not starting with '.' (ids name folders, fits/<id>/,
 * so "." and ".." and hidden names are refused) — else 0. NULL gives 0. */
int stagecal_convention_id_valid(const char *id);
/* The rule above in words, for messages ("expected ..."); never NULL. */
const char *stagecal_convention_id_rule(void);

/* The caution every output whose numbers feed a decision carries, one paragraph;
 * never NULL. */
const char *stagecal_caution_text(void);

#ifdef __cplusplus
}
#endif
#endif

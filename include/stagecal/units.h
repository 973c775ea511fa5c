/*
 * stagecal/units.h — units at the edges: `name[unit]` headers of run logs and
 * ISO 8601 timestamps. Everything inside stagecal is SI (s, mol, mol/s, W, Pa, K,
 * mole fractions); a stagecal_unit says how to get there from a logged number:
 *
 *     si = value·scale + offset        (mole basis)
 *
 * Mass-based quantities (kg, lb, kg/kg, wt%, kg/h) need the molar masses of the
 * system and, for amounts and flows, the composition of the material; `mass` is
 * set for them and `scale` then converts to kg (or kg/kg, kg/s), not to mol.
 * Accepted units per quantity (case-sensitive, as written here):
 *   time         h, min, s, iso8601 (also "ISO 8601"): timestamps → s since 1970 UTC
 *   amount (W)   kmol, mol, kg, lb
 *   fraction     mol/mol, mol%, ppm (µmol/mol), kg/kg, wt%, ppmw (mg/kg)
 *   ratio (R)    -, or no brackets at all
 *   flow (V)     kmol/h, mol/s, kg/h
 *   duty (Q)     kW, W, MW (needs a latent heat to become a boil-up)
 *   pressure (P) kPa, Pa, bar, mbar
 *   temperature  C, K
 *   label (run)  no brackets
 */
#ifndef STAGECAL_UNITS_H
#define STAGECAL_UNITS_H

#include <stddef.h>

#include "stagecal/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Display units at the edges (options, outputs) of batch planning: the factor that takes a
 * number in the unit named to SI (multiply on input, divide on output). The run-log
 * header table (stagecal_units_parse) uses the same factors. */
#define STAGECAL_UNIT_H 3600.0                 /* h → s */
#define STAGECAL_UNIT_KMOL 1000.0              /* kmol → mol */
#define STAGECAL_UNIT_KMOL_H (1000.0 / 3600.0) /* kmol/h → mol/s */
#define STAGECAL_UNIT_KJ_MOL 1000.0            /* kJ/mol → J/mol */
#define STAGECAL_UNIT_GJ 1e9                   /* GJ → J */

typedef enum {
    STAGECAL_QTY_TIME = 0,
    STAGECAL_QTY_AMOUNT,
    STAGECAL_QTY_FRACTION,
    STAGECAL_QTY_RATIO,
    STAGECAL_QTY_FLOW,
    STAGECAL_QTY_DUTY,
    STAGECAL_QTY_PRESSURE,
    STAGECAL_QTY_TEMPERATURE,
    STAGECAL_QTY_LABEL
} stagecal_quantity;

typedef struct {
    stagecal_quantity qty; /* what is measured */
    double scale;          /* si = value·scale + offset (mass basis: to kg, kg/kg, kg/s) */
    double offset;         /* additive part (°C → K), 0 otherwise */
    int mass;              /* 1: mass basis, needs molar masses to become moles */
    int iso8601;           /* 1: time given as ISO 8601 timestamps (scale 1, offset 0) */
    double lo, hi;         /* valid range of the logged number (fractions: [0, 1], [0, 100] or
                              [0, 1e6];
                              others: lo = 0 or -inf, hi = +inf) */
    char text[24];         /* the unit as written ("" when there were no brackets) */
} stagecal_unit;

/* Splits a header cell "name[unit]" into name and unit (surrounding blanks
 * removed). A cell without brackets gives an empty unit and *has_unit = 0.
 * EINVAL when the brackets are malformed ("xB[mol/mol", "x]y") or a part does not
 * fit its buffer. */
int stagecal_units_split(const char *cell, char *name, size_t name_len, char *unit, size_t unit_len,
                         int *has_unit, stagecal_error *err);

/* Looks up unit text for a quantity. EINVAL with message
 * "unknown unit 'ppb' (expected mol/mol, mol%, ppm, kg/kg, wt% or ppmw)" when not accepted. */
int stagecal_units_parse(stagecal_quantity qty, const char *text, stagecal_unit *u,
                         stagecal_error *err);

/* The accepted units of a quantity as a human list ("h, min, s or iso8601"). */
const char *stagecal_units_expected(stagecal_quantity qty);

/* Parses an ISO 8601 timestamp "YYYY-MM-DDThh:mm[:ss[.fff]][Z|±hh[:mm]]" (a space
 * may replace the T; no zone means UTC) into seconds since 1970-01-01T00:00:00Z.
 * Returns 0 on success, -1 when the text is not such a timestamp or a field is
 * out of range (month 13, 31 April, hour 25, ...). Leap seconds are not accepted. */
int stagecal_units_parse_iso8601(const char *text, double *t_s);

#ifdef __cplusplus
}
#endif
#endif

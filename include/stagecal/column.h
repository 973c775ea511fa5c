/*
 * stagecal/column.h — the column file (JSON): the column, its binary system and the
 * standard uncertainties of the signals a run log carries. Format: docs/column-file.md.
 *
 * SI inside: heights and diameters in m, pressure in Pa, molar masses in kg/mol,
 * latent heat in J/mol. Uncertainties are standard (1σ) uncertainties in the
 * signal's SI unit (mole fraction for xD/xB, mol for W, mol/s for V, − for R).
 */
#ifndef STAGECAL_COLUMN_H
#define STAGECAL_COLUMN_H

#include <stddef.h>

#include "stagecal/convention.h"
#include "stagecal/error.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Column warnings: at most this many, each at most this long (NUL included). */
#define STAGECAL_COLUMN_MAX_WARNINGS 4
#define STAGECAL_COLUMN_WARNING_MAX 320

/* The binary system. */
typedef struct {
    char light[STAGECAL_NAME_MAX]; /* light (more volatile) component name */
    char heavy[STAGECAL_NAME_MAX]; /* heavy component name */
    double m_light;                /* molar mass of light [kg/mol], > 0 (0 = not given) */
    double m_heavy;                /* molar mass of heavy [kg/mol], > 0 (0 = not given) */
    double p_pa;                   /* operating pressure [Pa], > 0 (0 = not given) */
    double latent_j_mol;           /* molar latent heat [J/mol] for Q → V (0 = not given) */
    double latent_light_j_mol;     /* light component's molar latent heat [J/mol] (0 = not
                                      given); with the heavy one: unequal latent heats */
    double latent_heavy_j_mol;     /* heavy component's molar latent heat [J/mol] (0 = not given) */
    double cp_liquid_j_mol_k;      /* liquid molar heat capacity [J/(mol·K)] of the reflux, for
                                      subcooled reflux (0 = not given) */
    stagecal_vle *vle;             /* owned equilibrium model */
} stagecal_system;

/* Standard uncertainties of logged signals (0 = not stated). A composition reading's
 * absolute and relative parts combine in quadrature: u² = u_abs² + (u_rel·value)². */
typedef struct {
    double xd;           /* distillate mole fraction [-] */
    double xb;           /* pot mole fraction [-] */
    double w_mol;        /* pot holdup [mol] */
    double r;            /* reflux ratio [-], absolute */
    double r_rel;        /* reflux ratio, relative to R [-] */
    double v_mol_s;      /* boil-up [mol/s] */
    double xd_heavy_rel; /* distillate reading, relative to its heavy content 1 − xD [-] */
    double xb_rel;       /* pot reading, relative to xB [-] */
    double t_top_k;      /* top temperature sensor (T_top) [K]: the soft sensor's u(T) */
    double t_pot_k;      /* pot temperature sensor (T_pot) [K] */
} stagecal_uncertainty;

typedef struct {
    char id[STAGECAL_NAME_MAX];   /* column id, stagecal_convention_id_valid (fits/<id>/) */
    char description[512];        /* the file's free text ("" when absent; cut at 511 bytes) */
    double height_m;              /* packed height [m] (0 = trayed or unknown) */
    double diameter_m;            /* inside diameter [m] (0 = unknown) */
    int trays;                    /* number of actual trays (0 = packed or unknown) */
    stagecal_condenser condenser; /* condenser type */
    stagecal_system system;       /* the binary system */
    stagecal_uncertainty u;       /* measurement uncertainties */
    double pressure_drop_pa;      /* pot pressure − top pressure [Pa], ≥ 0 (0 = not given) */
    double holdup_column_mol;     /* liquid held up in the column section [mol] (0 = not given);
                                     from holdup.column_mol, or per_metre_mol × packed height, or
                                     per_tray_mol × trays */
    double holdup_drum_mol;       /* liquid in the reflux drum and condenser [mol] (0 = none) */
    double holdup_u_rel;          /* relative standard uncertainty of the stated holdups
                                     (holdup.u_rel; 0 = not stated: 0.25 is assumed) */
    double flood_f_pa05;          /* F-factor at which the column floods [Pa^0.5]
                                     (flooding.f_factor; 0 = not stated) */
    double flood_margin;          /* the fraction of flood_f_pa05 tests may reach
                                     (flooding.margin, in (0, 1]; 0.8 when only f_factor is
                                     given; 0 when flooding is not stated) */
    /* Warnings about the file's content that do not stop its use (an Antoine set used
     * outside its stated temperature range, ...), filled by the loader: every command that
     * uses the column shows them and calibration carries them into the model file. */
    size_t n_warnings;
    char warnings[STAGECAL_COLUMN_MAX_WARNINGS][STAGECAL_COLUMN_WARNING_MAX];
    char sha256[65]; /* SHA-256 (lowercase hex) of the bytes parsed; "" = not read from a
                        file (stagecal_column_parse) */
} stagecal_column;

/* Reads a column file (a regular file of at most 16 MiB) once: the bytes parsed are the
 * bytes hashed into col->sha256. On success *col owns its vle (free with stagecal_column_free)
 * and col->warnings holds what stagecal_column_warnings found. Errors: ENOINPUT (cannot open, not a
 * regular file),
 * EDATA (malformed JSON or a field outside its domain, with "path:line: field 'x': ..." messages),
 * ENOMEM. */
int stagecal_column_load(const char *path, stagecal_column *col, stagecal_error *err);
/* Same from an in-memory JSON text; source names it in messages. */
int stagecal_column_parse(const char *text, size_t len, const char *source, stagecal_column *col,
                          stagecal_error *err);
void stagecal_column_free(stagecal_column *col); /* releases owned memory; NULL ok */

/* Fills col->warnings (after clearing them) from the loaded column: an Antoine set whose
 * stated temperature range does not cover the bubble curve at the column pressure
 * (stagecal_vle_antoine_flags, stagecal_vle_t_range). Called by the loaders; the texts
 * name the column id, not the file. */
void stagecal_column_warnings(stagecal_column *col);

#ifdef __cplusplus
}
#endif
#endif

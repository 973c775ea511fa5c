/*
 * stagecal/model.h — the model file a batch planner consumes (format in
 * docs/model-file.md, JSON Schema in docs/model.schema.json).
 *
 * A model file is one JSON document, format name "stagecal-model", version
 * STAGECAL_MODEL_VERSION. It holds the fitted correlation stages(R, F; θ)
 * (include/stagecal/form.h) with its covariance, residual σ and degrees of freedom,
 * the envelope of conditions it was fitted on, the stage convention, the binary
 * system, provenance (SHA-256 of every input) and, where the packed height is known,
 * HETP at a reference condition. An integrity checksum (SHA-256 of the canonical
 * compact JSON without the checksum member) detects hand edits and damage.
 *
 * Writing is atomic (temporary file, fsync, link to a fresh name, fsync of the
 * directory) and never replaces an earlier file. Loading validates every field.
 * Evaluation gives stages with delta-method confidence and prediction bands and
 * flags extrapolation outside the fitted envelope.
 *
 * Units are SI: R dimensionless (INFINITY = total reflux), F-factor in Pa^0.5
 * (= m/s·(kg/m³)^0.5), heights in m.
 */
#ifndef STAGECAL_MODEL_H
#define STAGECAL_MODEL_H

#include <stddef.h>

#include "stagecal/convention.h"
#include "stagecal/error.h"
#include "stagecal/form.h"
#include "stagecal/scatter.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

#define STAGECAL_MODEL_FORMAT "stagecal-model" /* the "format" member */
#define STAGECAL_MODEL_VERSION                                                                     \
    5                          /* the newest "version" this library reads and                      \
                                  writes: 5 for a design with its rows' runs                       \
                                  (run-clustered dof per band), 4 for a fit that                   \
                                  carries its scatter                                              \
                                  function (σ of the prediction band by R), 3 for                 \
                                  one that carries its design (Bell–McCaffrey dof                \
                                  per band), 2 for a censored-likelihood fit (a                    \
                                  method and a one-sided bound older readers must                  \
                                  refuse), 1 otherwise */
#define STAGECAL_MODEL_TEXT 64 /* size of short text fields */
#define STAGECAL_MODEL_HEX 65  /* SHA-256 lowercase hex + NUL */

/* How the correlation's parameters were fitted. */
typedef enum {
    STAGECAL_MODEL_STAGE_SPACE = 0,   /* "stage-space": stage counts per window regressed */
    STAGECAL_MODEL_COMPOSITION_SPACE, /* "composition-space": measured xB predicted */
    STAGECAL_MODEL_CENSORED           /* "censored-likelihood": the readings, censored ones as
                                         bounds, in a likelihood with the true compositions
                                         latent (stagecal/censor.h); format version 2 */
} stagecal_model_method;

/* One parameter of the equilibrium model, as read from the column file: a number
 * (n = 1) or a list of numbers (n > 1, e.g. a tabulated x–y curve). */
typedef struct {
    char name[STAGECAL_MODEL_TEXT]; /* e.g. "alpha", "antoine_light_a" */
    size_t n;                       /* number of values, ≥ 1 */
    double *values;                 /* n values, owned (malloc) */
} stagecal_model_vle_param;

/* One input file of the fit. */
typedef struct {
    char *path;                      /* as given to the fit, owned (malloc) */
    char sha256[STAGECAL_MODEL_HEX]; /* lowercase hex digest of the file's bytes */
    size_t rows;                     /* data rows read from it */
} stagecal_model_input;

/* Everything a model file holds. Initialise with stagecal_model_init, release with
 * stagecal_model_free. Pointer members are owned by the struct (malloc'd); the
 * stagecal_model_add_* helpers fill them. */
typedef struct {
    char column_id[STAGECAL_NAME_MAX]; /* [A-Za-z0-9_.-]+, not starting with '.' */

    /* binary system */
    char light[STAGECAL_NAME_MAX];        /* light component name */
    char heavy[STAGECAL_NAME_MAX];        /* heavy component name */
    char vle_kind[STAGECAL_MODEL_TEXT];   /* "alpha", "nrtl", … (stagecal_vle_kind_name) */
    stagecal_model_vle_param *vle_params; /* equilibrium parameters, owned */
    size_t n_vle_params;
    /* optional physical data of the system, as the column file states them (0 = not
     * recorded; the file then has no such member). When set: finite and > 0. */
    double latent_j_mol;   /* molar latent heat of vaporisation [J/mol], for boil-up energy */
    double m_light_kg_mol; /* molar mass of the light component [kg/mol] */
    double m_heavy_kg_mol; /* molar mass of the heavy component [kg/mol] */

    /* stage convention: with a total condenser column stages = stages − 1, with a
     * partial condenser (an equilibrium stage) column stages = stages − 2. */
    stagecal_condenser condenser;

    /* correlation */
    stagecal_form form;                                  /* parsed form (form.name is canonical) */
    double theta[STAGECAL_FORM_MAXP];                    /* parameter values, form.p of them */
    double cov[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP]; /* p×p row-major, stride form.p */
    double sigma;                 /* residual standard deviation [stages], ≥ 0 */
    double dof;                   /* residual degrees of freedom, > 0 (may be fractional) */
    double level;                 /* default confidence level, in (0, 1), e.g. 0.95 */
    stagecal_model_method method; /* fit method */
    int one_sided;                /* 1: the evidence bounds the stage count from below only
                                     ("at least N stages", analyser at its limit): theta is the
                                     one-sided lower bound at `level`, cov is 0 and means
                                     nothing, theta_ml holds the maximum-likelihood estimate;
                                     evaluation gives the bound, never a standard error
                                     (format version 2, member correlation.one_sided) */
    double theta_ml[STAGECAL_FORM_MAXP];
    double *design;     /* the fit's standardised Jacobian at θ, n_design rows of form.p values
                           (row-major, parameters' units), owned; NULL when the file has none.
                           With it every band uses Student t at the Bell–McCaffrey dof of its
                           own contrast (stagecal_regress_bm_dof) and dof is that of σ only
                           (format version 3, member correlation.design) */
    size_t n_design;    /* rows of design: 0, or more than form.p */
    size_t *design_run; /* n_design clusters (runs, 0..G−1) of the design's rows, owned; NULL:
                           none. With it every band's dof is the run-clustered CR2 one
                           (stagecal_regress_contrast_dof; format version 5, member
                           correlation.design_run) */
    stagecal_scatter scatter; /* σ of one new window by R (stagecal/scatter.h); scatter.n = 0:
                                 sigma for every R (format version 4, member
                                 correlation.scatter) */

    /* evidence */
    size_t n_windows; /* quasi-steady windows (units of evidence) that carried the fit */
    size_t n_samples; /* logged samples in those windows */
    size_t n_runs;    /* production runs */

    /* envelope of conditions (a box: one range per variable, see docs/model-file.md) */
    double r_min; /* smallest fitted reflux ratio [-], ≥ 0 */
    double r_max; /* largest fitted reflux ratio [-], ≥ r_min, INFINITY allowed */
    int has_load; /* 1 when the F-factor range below is known (always when form uses F) */
    double f_min; /* smallest fitted F-factor [Pa^0.5], ≥ 0 */
    double f_max; /* largest fitted F-factor [Pa^0.5], ≥ f_min, finite */

    /* provenance */
    stagecal_model_input *inputs; /* input files, owned */
    size_t n_inputs;
    char fitted_utc[STAGECAL_MODEL_TEXT];     /* time of fit, "YYYY-MM-DDTHH:MM:SSZ" */
    char data_first_utc[STAGECAL_MODEL_TEXT]; /* first logged sample fitted, same form;
                                                 "" when the logs carry relative times */
    char data_last_utc[STAGECAL_MODEL_TEXT];  /* last logged sample fitted, or "" */
    char tool_version[STAGECAL_MODEL_TEXT];   /* stagecal version that fitted */
    unsigned long long seed;                  /* RNG seed used (bootstrap), ≤ 2^63 − 1 */
    char *command_line;                       /* command line of the fit, owned, may be NULL */

    /* HETP, where the packed height is known (has_hetp = 1) */
    int has_hetp;
    double height_m;    /* packed height [m], > 0 */
    double hetp_r;      /* reference reflux ratio [-] (INFINITY allowed) */
    double hetp_f;      /* reference F-factor [Pa^0.5] (used when has_load) */
    double hetp_m;      /* HETP at the reference condition [m], > 0 */
    double hetp_low_m;  /* lower end of its interval [m], ≤ hetp_m */
    double hetp_high_m; /* upper end of its interval [m], ≥ hetp_m, INFINITY allowed */
    double hetp_level;  /* confidence level of that interval, in (0, 1) */

    char **warnings; /* warnings carried from the fit, owned */
    size_t n_warnings;
} stagecal_model;

/* Zeroes m and sets defaults: level 0.95, total condenser, method stage-space,
 * tool_version = stagecal_version(). */
void stagecal_model_init(stagecal_model *m);
/* Releases owned memory and re-initialises m. NULL is a no-op. */
void stagecal_model_free(stagecal_model *m);

/* The equilibrium model in a model file. stagecal_model_set_vle records vle in m:
 * vle_kind = stagecal_vle_kind_name(kind) and, replacing any parameters m held, the
 * complete definition (stagecal_vle_get_definition) under these names (SI, the column
 * file's names where it has them; docs/model-file.md):
 *   alpha: "alpha"; kvalue: "k"; table: "x", "y" (the interpolation nodes, end points
 *   included) and "t_k" when the table has temperatures;
 *   ideal and activity models: "pressure_pa", "antoine_light_a", "_b", "_c",
 *   "_t_min_k", "_t_max_k" and the same for "antoine_heavy_…", plus the activity
 *   parameters wilson "a12_j_mol", "a21_j_mol", "v1_m3_mol", "v2_m3_mol"; nrtl
 *   "tau12_a", "tau12_b_k", "tau21_a", "tau21_b_k", "alpha12"; vanlaar and margules
 *   "a12", "a21"; and the table tunables "grid_n", "t_epsrel", "max_iter", "exact"
 *   only where they differ from stagecal_vle_default_params().
 * ENOMEM (m then holds a partial list). */
int stagecal_model_set_vle(stagecal_model *m, const stagecal_vle *vle, stagecal_error *err);
/* Rebuilds the equilibrium model recorded in m (stagecal_model_set_vle's names) into a
 * new *out, which the caller frees with stagecal_vle_free; it answers y*(x) exactly
 * like the model that was recorded. Parameters not used by the kind are ignored
 * ("pressure_pa" of an alpha model, say). EDATA when the kind is unknown, a parameter
 * the kind needs is missing (files written before the full system was recorded carry
 * only alpha's) or has the wrong number of values, or the values are outside the
 * model's domain; ENOCONV / ENOMEM from building the model. *out is NULL on failure. */
int stagecal_model_build_vle(const stagecal_model *m, stagecal_vle **out, stagecal_error *err);

/* Appends to the owned lists (copies the arguments). EINVAL for an empty name or
 * n = 0, or a sha256 that is not 64 lowercase hex digits; ENOMEM. */
int stagecal_model_add_vle_param(stagecal_model *m, const char *name, const double *values,
                                 size_t n, stagecal_error *err);
int stagecal_model_add_input(stagecal_model *m, const char *path, const char *sha256, size_t rows,
                             stagecal_error *err);
int stagecal_model_add_warning(stagecal_model *m, const char *text, stagecal_error *err);
/* Replaces command_line with a copy of text (NULL clears it). ENOMEM. */
int stagecal_model_set_command_line(stagecal_model *m, const char *text, stagecal_error *err);
/* Copies n rows of form.p values into m->design (replacing any); ENOMEM. For a fit with
 * cov_kind STAGECAL_COV_CR2_RUN also give its clusters (stagecal_model_set_design_run with
 * result.cluster): without them every band takes HC2's dof (rows independent) with the
 * clustered covariance, more dof than it has. */
int stagecal_model_set_design(stagecal_model *m, const double *x, size_t n, stagecal_error *err);
/* Copies n_design clusters into m->design_run (cl NULL: none); call after
 * stagecal_model_set_design. ENOMEM. */
int stagecal_model_set_design_run(stagecal_model *m, const size_t *cl, stagecal_error *err);
/* Sets fitted_utc to the current UTC time. */
void stagecal_model_stamp_now(stagecal_model *m);

/* SHA-256 of a file's bytes as lowercase hex (for the provenance of inputs).
 * ENOINPUT when it cannot be opened or read. */
int stagecal_model_hash_file(const char *path, char hex[STAGECAL_MODEL_HEX], stagecal_error *err);

/* Checks a model in memory with the same rules stagecal_model_load applies.
 * EINVAL with a message naming the field. */
int stagecal_model_check(const stagecal_model *m, stagecal_error *err);

/* Writes m as a new file under dir (normally fits/<column_id>/), creating dir and
 * its parents as needed. The file name is <column_id>-<yyyymmddTHHMMSSZ>.json from
 * fitted_utc, or <column_id>-<stamp>-<n>.json (n = 2, 3, …) when that exists: an
 * existing file is never replaced. Atomic: the content goes to a temporary file in
 * dir, is fsync'ed, linked to its final name, and dir is fsync'ed; on any failure
 * nothing is left behind. On success the path is copied to path_out (cap bytes;
 * path_out may be NULL). EINVAL when m fails stagecal_model_check; EWRITE when
 * the directory or file cannot be written or path_out is too small (the file is
 * then removed again); ENOMEM. */
int stagecal_model_write(const stagecal_model *m, const char *dir, char *path_out, size_t cap,
                         stagecal_error *err);

/* Reads and validates a model file into m (which must be initialised or zeroed;
 * any previous content is freed). Errors, with "path: …" messages: ENOINPUT (cannot
 * open); EDATA (not JSON, truncated, wrong format name, missing or mistyped member,
 * inconsistent values, checksum mismatch); EVERSION (a newer format version); ENOMEM.
 * On failure m is left initialised and empty. */
int stagecal_model_load(const char *path, stagecal_model *m, stagecal_error *err);
/* Same from an in-memory text; source names it in messages. */
int stagecal_model_parse(const char *text, size_t len, const char *source, stagecal_model *m,
                         stagecal_error *err);

/* Flags of stagecal_model_point.outside. */
enum {
    STAGECAL_MODEL_R_BELOW = 1u << 0, /* R < r_min */
    STAGECAL_MODEL_R_ABOVE = 1u << 1, /* R > r_max */
    STAGECAL_MODEL_F_BELOW = 1u << 2, /* F < f_min */
    STAGECAL_MODEL_F_ABOVE = 1u << 3  /* F > f_max */
};

/* The correlation evaluated at one condition. */
typedef struct {
    double stages;        /* predicted stages, pot included [-] */
    double column_stages; /* stagecal_convention_column_stages(stages): stages − 1 (total
                             condenser) or − 2 (partial); NAN below that (no column count) */
    double se_fit;        /* standard error of the mean prediction, sqrt(gᵀCg) [stages] */
    double se_pred;  /* standard error of a new observation, sqrt(gᵀCg + σ²), σ the scatter
                        function at R when the model has one, else sigma */
    double level;    /* confidence level used */
    double t;        /* Student t quantile at (1 + level)/2 with dof_fit */
    double dof_fit;  /* its dof: the model's, or with a design the Bell–McCaffrey dof
                        of this condition's contrast */
    double dof_pred; /* dof of the prediction band (Welch–Satterthwaite with a design) */
    double ci_low, ci_high; /* confidence band on the mean [stages] */
    double pi_low, pi_high; /* prediction band for a new window [stages] */
    int extrapolated;       /* 1 when (R, F) lies outside the envelope */
    unsigned outside;       /* STAGECAL_MODEL_R_BELOW | … */
    double r_beyond;        /* how far R lies outside [r_min, r_max], 0 inside; INFINITY when
                             * R = inf and r_max is finite (see lv_beyond) */
    double lv_beyond;       /* the same distance in L/V = R/(R+1), 0 inside, always finite */
    double f_beyond;        /* how far F lies outside [f_min, f_max] [Pa^0.5], 0 inside */
    int lower_only;         /* 1 (a one_sided model): stages is a one-sided lower bound at the
                               model's level — "at least N stages"; ci_low = pi_low = stages,
                               ci_high = pi_high = INFINITY, se_fit = se_pred = t = NAN */
} stagecal_model_point;

/* Evaluates stages(R, F) with delta-method bands at confidence level `level`
 * (0 → m->level). r ≥ 0 (INFINITY allowed); f_load [Pa^0.5] is used when the form
 * uses the load (and for the envelope check when m->has_load), else ignored (pass
 * NAN). Extrapolation is a result, not an error: out->extrapolated says so.
 * EINVAL for r < 0 or NaN, a level outside (0, 1), a missing F for a load form, or a
 * condition where the form is undefined (e.g. ln R at R = 0). */
int stagecal_model_eval(const stagecal_model *m, double r, double f_load, double level,
                        stagecal_model_point *out, stagecal_error *err);

/* The t dof of parameter k's interval θ_k ∓ t·sqrt(C_kk): the model's dof, or with a
 * design the Bell–McCaffrey dof of θ_k's own contrast, run-clustered when the file has
 * design_run (stagecal_regress_contrast_dof) — the dof the calibration gave the parameter
 * (stagecal_regress_result.param_dof). Not the dof of a band at some condition: that is
 * another contrast's (stagecal_model_eval). EINVAL (k ≥ form.p, NULL); EDATA, ENOMEM from
 * stagecal_regress_contrast_dof. */
int stagecal_model_param_dof(const stagecal_model *m, size_t k, double *dof, stagecal_error *err);

/* "stage-space" / "composition-space" / "censored-likelihood". */
const char *stagecal_model_method_name(stagecal_model_method method);

#ifdef __cplusplus
}
#endif
#endif

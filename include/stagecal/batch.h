/*
 * stagecal/batch.h — forward prediction of a batch rectification from a stage law.
 *
 * Quasi-steady batch rectifier (Smoker & Rose 1940, "Graphic determination of batch distillation
 * curves for binary mixtures", Trans. AIChE 36, citation from memory): a pot charged with W0 mol at
 * pot mole fraction xB0 is boiled up at a constant V [mol/s]; the column above it delivers, at
 * every instant, the distillate xD that stepping stages(R, F) equilibrium stages (pot included)
 * down from xD reaches the current pot composition xB. The pot balances are
 *
 *     dW/dt = −D = −V/(R + 1),        d(W·xB)/dt = −D·xD,
 *
 * integrated with GSL's adaptive Runge–Kutta (gsl_odeiv2, rk8pd by default) in the
 * dimensionless time τ = t·V/W0 (charges boiled up). Column and condenser holdup are
 * neglected, constant molar overflow is assumed, V is constant.
 *
 * A batch is a sequence of cuts (receivers). Each cut ends on its own target (pot
 * composition, mean composition of the cut, instantaneous distillate composition,
 * fraction of the charge distilled, time, or a reflux ceiling); targets are events
 * located by Brent root finding on the length of the last step (see docs/methods.md,
 * "Batch prediction"). Reflux policies: constant R, constant distillate composition
 * (R raised so that xD stays at a set point, up to a ceiling), or a schedule of
 * (time or pot composition, R) steps.
 *
 * The stage law is a callback (a model file's correlation, a constant, or anything
 * else); forward stepping is a callback too, by default stagecal_stages_step with
 * E_MV = 1 (the law gives effective equilibrium stages).
 *
 * Units: SI inside (mol, mol/s, s, J). Lifecycle: stagecal_batch_alloc /
 * stagecal_batch_iterate / stagecal_batch_test / stagecal_batch_free, with the
 * driver stagecal_batch_run on top; results own their rows (stagecal_batch_result_free).
 */
#ifndef STAGECAL_BATCH_H
#define STAGECAL_BATCH_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/model.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

#define STAGECAL_BATCH_MAXCUTS 16  /* receivers per batch */
#define STAGECAL_BATCH_MAXSTEPS 64 /* entries of a reflux schedule */
#define STAGECAL_BATCH_MAXWARN 8   /* warnings kept in a result */
#define STAGECAL_BATCH_WARNLEN 200 /* length of one warning */

/* Stage law: effective stages (pot included) at reflux ratio r (≥ 0, INFINITY =
 * total reflux). *outside receives STAGECAL_MODEL_R_BELOW | … flags when (r, F) lies
 * outside the law's envelope (0 otherwise). Values below 1 are clamped to 1 by the
 * caller (and flagged in the result). Returns STAGECAL_OK or an error code. */
typedef int (*stagecal_batch_stages_fn)(void *data, double r, double *stages, unsigned *outside,
                                        stagecal_error *err);

/* Forward stepping: the pot composition *xb reached by stepping `stages` stages down
 * from xd at reflux r > 0. Must be continuous and increasing in xd. */
typedef int (*stagecal_batch_step_fn)(void *data, const stagecal_vle *vle, double xd, double r,
                                      double stages, double *xb, stagecal_error *err);

/* The column: equilibrium model, stage law, stepping. */
typedef struct {
    const stagecal_vle *vle;         /* equilibrium model, not owned; read-only */
    stagecal_batch_stages_fn stages; /* stage law (required) */
    void *stages_data;               /* passed to stages */
    stagecal_batch_step_fn step;     /* NULL: stagecal_stages_step with E_MV = 1 */
    void *step_data;                 /* passed to step */
} stagecal_batch_column;

/* Stage law from a model file's correlation: stagecal_form_eval(&m->form, theta, r,
 * f_load) with the envelope check of m. Use as stages_data with
 * stagecal_batch_model_stages. */
typedef struct {
    const stagecal_model *m; /* the model (not owned) */
    const double *theta;     /* parameters (form.p values); NULL = m->theta */
    double f_load;           /* F-factor [Pa^0.5] during the batch (load forms; else NAN) */
} stagecal_batch_model_law;
int stagecal_batch_model_stages(void *data, double r, double *stages, unsigned *outside,
                                stagecal_error *err);
/* Constant stage law: data points at one double (stages ≥ 1). */
int stagecal_batch_constant_stages(void *data, double r, double *stages, unsigned *outside,
                                   stagecal_error *err);

typedef enum {
    STAGECAL_BATCH_CONSTANT_REFLUX = 0, /* R fixed */
    STAGECAL_BATCH_CONSTANT_DISTILLATE, /* R raised so that xD = xd_set, up to reflux_max */
    STAGECAL_BATCH_SCHEDULE             /* R stepped by time or by pot composition */
} stagecal_batch_policy_kind;

typedef enum {
    STAGECAL_BATCH_BY_TIME = 0, /* schedule entry applies from t ≥ at [s] */
    STAGECAL_BATCH_BY_POT_X     /* schedule entry applies from xB ≤ at [-] */
} stagecal_batch_schedule_key;

typedef struct {
    double at;     /* switch point: time [s] or pot mole fraction [-] */
    double reflux; /* R from there on, ≥ 0, finite */
} stagecal_batch_schedule_step;

typedef struct {
    stagecal_batch_policy_kind kind;
    double reflux;                   /* CONSTANT_REFLUX: R ≥ 0, finite */
    double xd_set;                   /* CONSTANT_DISTILLATE: set point, in (xB0, 1) */
    double reflux_max;               /* CONSTANT_DISTILLATE: ceiling, > 0, finite; once reached, the
                                        batch goes on at R = reflux_max (the set point is lost) */
    stagecal_batch_schedule_key key; /* SCHEDULE */
    size_t n_steps;                  /* SCHEDULE: 1..MAXSTEPS */
    stagecal_batch_schedule_step steps[STAGECAL_BATCH_MAXSTEPS]; /* first applies at the
                          start (at = 0 s, or at ≥ xB0); times increasing / xB decreasing */
} stagecal_batch_policy;

typedef enum {
    STAGECAL_BATCH_UNTIL_POT_X = 0,    /* pot xB ≤ value */
    STAGECAL_BATCH_UNTIL_MEAN_X,       /* mean mole fraction of this cut ≤ value */
    STAGECAL_BATCH_UNTIL_DISTILLATE_X, /* instantaneous xD ≤ value */
    STAGECAL_BATCH_UNTIL_FRACTION,     /* (W0 − W)/W0 ≥ value (of the whole charge) */
    STAGECAL_BATCH_UNTIL_TIME,         /* time since the start ≥ value [s] */
    STAGECAL_BATCH_UNTIL_REFLUX        /* CONSTANT_DISTILLATE only: R needed ≥ value */
} stagecal_batch_target_kind;

typedef struct {
    char name[32];                   /* receiver name ("" = "cut<n>") */
    stagecal_batch_target_kind kind; /* what ends the cut */
    double value;                    /* threshold (unit per kind above) */
} stagecal_batch_cut_spec;

/* Why a cut (or the batch) ended. */
typedef enum {
    STAGECAL_BATCH_STOP_TARGET = 0, /* the cut's target was reached */
    STAGECAL_BATCH_STOP_CEILING,    /* CONSTANT_DISTILLATE: R reached reflux_max */
    STAGECAL_BATCH_STOP_POT_EMPTY,  /* W/W0 fell to params.min_pot_fraction */
    STAGECAL_BATCH_STOP_TIME_LIMIT, /* t reached params.t_max_s */
    STAGECAL_BATCH_STOP_NOT_STARTED /* an earlier cut ended the batch */
} stagecal_batch_stop;

/* "target", "reflux-ceiling", "pot-empty", "time-limit", "not-started". */
const char *stagecal_batch_stop_name(int stop);
/* "pot-x", "mean-x", "distillate-x", "fraction", "time", "reflux". */
const char *stagecal_batch_target_name(int kind);
/* Parses a target name as above; returns -1 when unknown. */
int stagecal_batch_target_from_name(const char *name);

/* The batch to predict. */
typedef struct {
    double w0_mol;       /* charge [mol], > 0 */
    double xb0;          /* charge mole fraction of the light component, in (0, 1) */
    double v_mol_s;      /* boil-up [mol/s], > 0 */
    double latent_j_mol; /* molar latent heat [J/mol] for the energy (0 = unknown) */
    stagecal_batch_policy policy;
    size_t n_cuts; /* 1..MAXCUTS */
    stagecal_batch_cut_spec cuts[STAGECAL_BATCH_MAXCUTS];
} stagecal_batch_problem;

/* Zeroes pb: constant R = 0 policy, no cuts, no latent heat. */
void stagecal_batch_problem_init(stagecal_batch_problem *pb);

/* The column's liquid holdup for the dynamic model (stagecal_batch_params.dynamics;
 * batch_dynamic.c, docs/methods.md "Dynamic batch prediction"). A stage-by-stage batch
 * column after Distefano (1968, "Mathematical modeling and numerical integration of
 * multicomponent batch distillation equations", AIChE J. 14, 190–199, from memory):
 * constant molar liquid holdup on every column stage and in the reflux drum, constant
 * molar overflow, ideal stages (E_MV = 1: the law gives effective stages), the column and
 * drum full of charge liquid when the boil-up starts; a total-reflux start-up, then the
 * policy. The charge w0_mol is pot + column + drum. */
typedef struct {
    double holdup_column_mol; /* liquid on the column stages [mol], >= 0 */
    double holdup_drum_mol;   /* liquid in the condenser and reflux drum [mol], >= 0 */
    double startup_xd;        /* the start-up ends when xD >= this (0 = not used) ... */
    double startup_max_s;     /* ... or at this time [s] (0 = not used); neither given: */
    double startup_fraction;  /* when xD has come this fraction of the way from the pot's
                                 composition to the total-reflux distillate (0.99), or has
                                 reached a constant-distillate set point, which comes first */
    double holdup_u_rel;      /* relative standard uncertainty of the holdups: the band draws
                                 one common factor 1 + u·z (z ~ N(0, 1), held >= 0.05) for
                                 column and drum per draw (0 = held fixed) */
} stagecal_batch_dynamics;

/* Zero holdups, no start-up purity or time, startup_fraction 0.99. */
void stagecal_batch_dynamics_init(stagecal_batch_dynamics *d);

/* Tunables (GSL "Arbitrary Constants"). */
typedef struct {
    double epsabs;           /* ODE absolute tolerance on W/W0 and W·xB/W0 (default 1e-12) */
    double epsrel;           /* ODE relative tolerance (default 1e-10) */
    int rk8pd;               /* 1: rk8pd (default), 0: rkf45 */
    double x_epsabs;         /* tolerance of the xD and R root solves [-] (default 1e-14) */
    double event_epsabs;     /* tolerance of the event location in τ = t·V/W0 (1e-13) */
    size_t max_iter;         /* iteration cap of each root solve (default 200) */
    double output_dt_s;      /* a trajectory row at least every this [s]; 0 = one per step */
    double min_pot_fraction; /* the batch stops when W/W0 falls to this (default 1e-3) */
    double t_max_s;          /* the batch stops at this time [s] (default 30 days) */
    size_t max_steps;        /* cap on accepted ODE steps (default 100000) */
    const stagecal_batch_dynamics *dynamics; /* NULL (default): the quasi-steady model; else
                                the dynamic model with this holdup (not owned), integrated
                                with GSL's implicit msbdf at dyn_epsabs/dyn_epsrel */
    double dyn_epsabs;                       /* dynamic model: absolute tolerance (default 1e-11) */
    double dyn_epsrel;                       /* dynamic model: relative tolerance (default 1e-9) */
} stagecal_batch_params;

stagecal_batch_params stagecal_batch_default_params(void);

/* One trajectory row (state at the end of an accepted step, an output time or an
 * event). */
typedef struct {
    double t_s;       /* time since the start [s] */
    double w_mol;     /* pot holdup [mol] */
    double xb;        /* pot mole fraction [-] */
    double xd;        /* distillate mole fraction [-] */
    double reflux;    /* reflux ratio [-] */
    double stages;    /* stages of the law at R (pot included, ≥ 1) */
    size_t cut;       /* index of the receiver being filled (0-based) */
    double cut_mol;   /* collected in this receiver so far [mol] */
    double cut_x;     /* its mean mole fraction [-] (xD while cut_mol = 0) */
    double light_mol; /* light component in all receivers so far [mol] (integrated) */
    double total_mol; /* all distillate so far [mol] (integrated) */
    unsigned outside; /* STAGECAL_MODEL_R_BELOW | … at this row */
    int startup;      /* 1: the dynamic model's total-reflux start-up (reflux INFINITY) */
} stagecal_batch_row;

/* One receiver. */
typedef struct {
    char name[32];
    int stop;          /* stagecal_batch_stop */
    double t_start_s;  /* when the receiver was put on [s] */
    double t_end_s;    /* when it was taken off [s] */
    double amount_mol; /* distillate collected [mol] */
    double light_mol;  /* of which light component [mol] */
    double x_mean;     /* mean mole fraction (light_mol/amount_mol; xD at the end if empty) */
    double yield;      /* amount / W0 [-] */
    double recovery;   /* light_mol / (W0·xB0) [-] */
    double xb_end;     /* pot mole fraction at the end [-] */
    double reflux_end; /* R at the end [-] */
    double xd_first;   /* distillate mole fraction when the receiver was put on [-] */
    double xd_last;    /* ... when it was taken off [-] */
    double xd_sd;      /* smearing: standard deviation of the distillate's mole fraction
                          over the receiver's contents [-] (0 when empty) */
} stagecal_batch_cut;

typedef struct {
    stagecal_batch_row *rows; /* n_rows rows, owned (free with stagecal_batch_result_free) */
    size_t n_rows;
    size_t cap_rows;
    size_t n_cuts;
    stagecal_batch_cut cuts[STAGECAL_BATCH_MAXCUTS];
    int stop;             /* why the batch ended (that of the last cut that ran) */
    double t_end_s;       /* batch time [s] */
    double w_end_mol;     /* pot holdup left [mol] */
    double xb_end;        /* pot mole fraction left [-] */
    double energy_j;      /* boil-up energy V·t·latent heat [J] (0 when latent unknown) */
    double balance_error; /* max over rows of |W0·xB0 − W·xB − light| / (W0·xB0) */
    double r_min_used;    /* smallest R along the trajectory [-] */
    double r_max_used;    /* largest R along the trajectory [-] */
    unsigned outside;     /* OR of the rows' envelope flags */
    int clamped;          /* 1 when the law gave stages < 1 somewhere (clamped to 1) */
    int dynamic;          /* 1: the dynamic model (params.dynamics) ran */
    double t_startup_s;   /* dynamic: total-reflux start-up to the first draw [s] (0 else) */
    double xd_startup;    /* dynamic: distillate mole fraction at the first draw [-] */
    size_t n_remaps;      /* dynamic: changes of the whole-stage count (law at a new R) */
    size_t n_steps;       /* accepted ODE steps */
    size_t n_rhs;         /* right-hand side evaluations */
    size_t n_warnings;
    char warnings[STAGECAL_BATCH_MAXWARN][STAGECAL_BATCH_WARNLEN];
} stagecal_batch_result;

/* Empties res (no rows). */
void stagecal_batch_result_init(stagecal_batch_result *res);
/* Releases the rows and re-initialises res. NULL is a no-op. */
void stagecal_batch_result_free(stagecal_batch_result *res);

/* Checks a problem: EINVAL with a message naming the field. */
int stagecal_batch_check(const stagecal_batch_problem *pb, stagecal_error *err);

typedef struct stagecal_batch_workspace stagecal_batch_workspace; /* opaque */

/* Allocates a workspace for one batch (pb and col are copied by value; col's
 * pointees must outlive the workspace). params may be NULL (defaults). Returns NULL
 * and fills err on EINVAL / ENOMEM. */
stagecal_batch_workspace *stagecal_batch_alloc(const stagecal_batch_problem *pb,
                                               const stagecal_batch_column *col,
                                               const stagecal_batch_params *params,
                                               stagecal_error *err);
void stagecal_batch_free(stagecal_batch_workspace *w); /* NULL is a no-op */

/* Starts the batch: records the first row into res (which must be initialised;
 * earlier content is freed). */
int stagecal_batch_init(stagecal_batch_workspace *w, stagecal_batch_result *res,
                        stagecal_error *err);
/* Advances by one accepted ODE step (shortened to an output time or an event) and
 * appends rows. ENOCONV when the integration or a root solve fails, ENOMEM. */
int stagecal_batch_iterate(stagecal_batch_workspace *w, stagecal_batch_result *res,
                           stagecal_error *err);
/* 1 when the batch has ended, 0 otherwise. */
int stagecal_batch_test(const stagecal_batch_workspace *w);

/* Driver: init, iterate until test, then fills the summary. With params->dynamics the
 * dynamic model runs (targets other than time count from the first draw; time targets and
 * time schedules from the start of the boil-up); the balances then include the liquid
 * on the column and in the drum. */
int stagecal_batch_run(const stagecal_batch_problem *pb, const stagecal_batch_column *col,
                       const stagecal_batch_params *params, stagecal_batch_result *res,
                       stagecal_error *err);

/* Distillate composition at a pot composition xb and reflux r (the inner solve of the
 * integration, exposed for planners and tests): Brent root finding on
 * f(xD) = xB(xD) − xb over (xb, x_hi), x_hi the lowest azeotrope above xb or the
 * model's x_max. At r = 0 (no liquid in the column) or stages = 1, xD = y*(xb). */
int stagecal_batch_distillate(const stagecal_batch_column *col, const stagecal_batch_params *params,
                              double xb, double r, double *xd, double *stages, stagecal_error *err);

/* ---- uncertainty ------------------------------------------------------------------- */

/* Percentile band of one predicted quantity over the parameter draws. */
typedef struct {
    double nominal; /* at θ̂ */
    double low;     /* lower percentile ((1 − level)/2) */
    double high;    /* upper percentile ((1 + level)/2) */
} stagecal_batch_interval;

typedef struct {
    stagecal_batch_interval t_end_s; /* time the receiver is taken off [s] */
    stagecal_batch_interval amount_mol;
    stagecal_batch_interval x_mean;
    stagecal_batch_interval yield;
    stagecal_batch_interval recovery;
} stagecal_batch_cut_band;

typedef struct {
    double level;       /* central coverage, e.g. 0.95 (2.5 / 97.5 percentiles) */
    size_t n_samples;   /* draws requested */
    size_t n_ok;        /* draws whose batch ran to the same cuts */
    size_t n_failed;    /* draws that failed (law < 1 everywhere, solve failure) */
    unsigned long seed; /* GSL mt19937 seed */
    double dof;         /* degrees of freedom of the t draws (the model's dof, or with a
                           design the smallest of its parameters' Bell–McCaffrey dof; INFINITY:
                           normal draws) */
    int run_scatter;    /* STAGECAL_BATCH_SCATTER_*, as drawn. WINDOW (1): each draw also
                           carries the scatter of one window's stage count (the model's σ, or
                           its scatter function σ(R) at each R the batch runs at); PROCESS (2):
                           its run-to-run part only (σ(R)² less the windows' measurement
                           error): a prediction band for one batch; NONE (0): a confidence
                           band on the mean law */
    double dof_scatter; /* run_scatter: the dof of the scatter's t draws (dof above, or with a
                           scatter function stagecal_batch_scatter_dof); NAN otherwise */
    size_t n_cuts;
    stagecal_batch_cut_band cuts[STAGECAL_BATCH_MAXCUTS];
    stagecal_batch_interval t_end_s; /* batch time [s] */
    stagecal_batch_interval energy_j;
} stagecal_batch_band;

/* Propagates the model's parameter covariance: n_samples draws from the multivariate t
 * at the model's dof ν, θ = θ̂ + S·z·√(ν/χ²_ν) (S·Sᵀ = C by eigen-decomposition,
 * negative eigenvalues from rounding set to 0; z ~ N(0, I); GSL mt19937 seeded with
 * seed), so that the percentiles of a quantity linear in θ are θ̂ ± t_ν·se, the
 * intervals the fit states; one batch per draw with stagecal_batch_model_stages,
 * percentiles at level. nominal is the batch at θ̂ (pass it, already run). This call
 * leaves out the run-to-run scatter σ of the model: the band is on the mean law
 * (stagecal_batch_band_sample_scatter includes it). EINVAL (n_samples < 2, level
 * outside (0, 1)), ENOMEM, ENOCONV when fewer than half the draws succeed. */
int stagecal_batch_band_sample(const stagecal_batch_problem *pb, const stagecal_vle *vle,
                               const stagecal_model *m, double f_load,
                               const stagecal_batch_params *params,
                               const stagecal_batch_result *nominal, size_t n_samples,
                               unsigned long seed, double level, stagecal_batch_band *band,
                               stagecal_error *err);
/* What of the run-to-run scatter a band carries (run_scatter of
 * stagecal_batch_band_sample_scatter and stagecal_batch_band). */
#define STAGECAL_BATCH_SCATTER_NONE 0    /* none: a confidence band on the mean law */
#define STAGECAL_BATCH_SCATTER_WINDOW 1  /* the whole scatter of one window about the law */
#define STAGECAL_BATCH_SCATTER_PROCESS 2 /* its run-to-run (process) part only */

/* The same; with run_scatter = 1 every draw also shifts the batch's stage count by
 * σ·ε·√(ν/χ²_ν) (ε ~ N(0, 1), the same χ² draw: a joint t), the scatter of one run about
 * the law, so the band is a prediction band for one batch (stage counts below 1 are
 * held at 1). With a scatter function (m->scatter.n > 0) the shift at R is
 * σ(R)·ε·√(ν_s/χ²_s): σ(R) at every R the batch runs at (constant reflux: the batch's R;
 * a varying R: along its policy), ν_s = stagecal_batch_scatter_dof, and χ²_s at the same
 * quantile of its distribution as θ's χ²_ν (ν_s = ν: the same draw).
 * run_scatter = STAGECAL_BATCH_SCATTER_PROCESS: the shift is the batch's own run-to-run
 * part only, σ(R)·ε·stagecal_scatter_process_factor(&m->scatter, ν_s/χ²_s) (the windows'
 * measurement error taken out of σ(R)², floored at 0 in every draw); where the model has no
 * scatter function or no var_ratio the whole scatter is drawn (as run_scatter = 1) and
 * band->run_scatter says STAGECAL_BATCH_SCATTER_WINDOW. */
int stagecal_batch_band_sample_scatter(const stagecal_batch_problem *pb, const stagecal_vle *vle,
                                       const stagecal_model *m, double f_load,
                                       const stagecal_batch_params *params,
                                       const stagecal_batch_result *nominal, size_t n_samples,
                                       unsigned long seed, double level, int run_scatter,
                                       stagecal_batch_band *band, stagecal_error *err);

/* The dof of a batch's run-to-run scatter: the model's dof without a scatter function;
 * with one, the smallest of stagecal_scatter_dof at the reflux ratios of nominal (its rows,
 * the dynamic start-up's total reflux among them, and r_min_used, r_max_used), each capped
 * at the model's dof (as stagecal_model_eval caps it). */
double stagecal_batch_scatter_dof(const stagecal_model *m, const stagecal_batch_result *nominal);

/* Warnings about the envelope: appends to res->warnings one line per way the
 * trajectory left m's envelope (R below r_min, above r_max, F outside), with the
 * range used and the range fitted. */
void stagecal_batch_envelope_warnings(const stagecal_model *m, double f_load,
                                      stagecal_batch_result *res);

/* ---- plan file (docs/plan-file.md) -------------------------------------------------- */

/* Reads a plan file (JSON, format "stagecal-plan", version 1) into pb: charge and
 * boil-up when present (otherwise pb's values are kept), the policy and the cuts.
 * ENOINPUT (cannot open), EDATA ("path: member 'x': …"), EVERSION (newer version). */
int stagecal_batch_plan_load(const char *path, stagecal_batch_problem *pb, stagecal_error *err);
/* Same from an in-memory text; source names it in messages. */
int stagecal_batch_plan_parse(const char *text, size_t len, const char *source,
                              stagecal_batch_problem *pb, stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif

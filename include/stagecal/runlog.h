/*
 * stagecal/runlog.h — production run logs: reading (libcsv, streaming), validation
 * findings with file:line messages, quasi-steady windows (Cao & Rhinehart's
 * R-statistic), the Rayleigh pot balance per run (closure, gross errors, analyser
 * drift, reconciled xB) and per-sample effective stages with their uncertainty,
 * L/V and F-factor. Format of the CSV: docs/runlog.md; methods: docs/methods.md.
 *
 * Storage is columnar: one array of doubles per logged signal, grown
 * geometrically, so a 10^6-row log costs a few tens of MB. Everything is SI:
 * time in s, W in mol, V in mol/s, P in Pa, temperatures in K, compositions as
 * mole fractions of the light component. A blank cell is a missing value; it is
 * held as NaN in the arrays (an optional signal that no file logged has a NULL array) and
 * never emitted: a row with a missing required value gets the status `invalid`
 * with the note "missing xB" (etc.) when inverted.
 */
#ifndef STAGECAL_RUNLOG_H
#define STAGECAL_RUNLOG_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>

#include "stagecal/column.h"
#include "stagecal/error.h"
#include "stagecal/physics.h"
#include "stagecal/units.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- findings (validation) ------------------------------------------------------- */

typedef enum { STAGECAL_FINDING_ERROR = 0, STAGECAL_FINDING_WARNING = 1 } stagecal_severity;

typedef struct {
    int severity;     /* stagecal_severity */
    long line;        /* 1-based line in the file; 0 = the file as a whole */
    char source[160]; /* file name as given */
    char column[48];  /* header cell concerned ("xB[mol/mol]"), "" when none */
    char text[400];   /* full message, "source:line: what is wrong, what was expected" */
} stagecal_finding;

/* A bounded list: the first max_items findings are kept, all are counted. */
typedef struct {
    stagecal_finding *items; /* kept findings, in file order */
    size_t n;                /* number kept */
    size_t max_items;        /* most kept, fixed at alloc */
    size_t cap;              /* items allocated: grows on demand up to max_items */
    size_t n_errors;         /* errors seen (kept or not) */
    size_t n_warnings;       /* warnings seen (kept or not) */
} stagecal_findings;

/* max_items ≥ 1 (0 is taken as 1); items are allocated as findings arrive. NULL on
 * allocation failure. Free with stagecal_findings_free. */
stagecal_findings *stagecal_findings_alloc(size_t max_items);
void stagecal_findings_free(stagecal_findings *f); /* NULL ok */

/* ---- the log ----------------------------------------------------------------------- */

/* Signals a log may carry (column roles). */
typedef enum {
    STAGECAL_RL_TIME = 0,
    STAGECAL_RL_W,
    STAGECAL_RL_XD,
    STAGECAL_RL_XB,
    STAGECAL_RL_R,
    STAGECAL_RL_V,
    STAGECAL_RL_Q,
    STAGECAL_RL_P,
    STAGECAL_RL_TTOP,
    STAGECAL_RL_TPOT,
    STAGECAL_RL_RUN,
    STAGECAL_RL_TREFLUX, /* reflux return temperature (subcooled reflux) */
    STAGECAL_RL_XDH,     /* xD_heavy: heavy component in the distillate (xD = 1 − xD_heavy) */
    STAGECAL_RL_NCOL
} stagecal_rl_column;

/* ---- readings: value, censoring, uncertainty ---------------------------------------- *
 * A composition cell is a number, "<v" (below v: a detection limit) or ">v" (above v:
 * the analyser's full scale). A number exactly at the physical bound (0, or the whole:
 * 1 mol/mol, 100 %, 10^6 ppm) is censored there: xD = 1 reads "xD at or above 1", xB = 0
 * reads "xB at or below 0". A censored reading says the analyser's (noisy) reading lay
 * beyond its limit; it enters a likelihood as P(reading beyond the limit) (a Tobit-type
 * term, Tobin 1958, "Estimation of relationships for limited dependent variables",
 * Econometrica 26:24-36), is never `invalid` and never ends a window. */
typedef enum {
    STAGECAL_CENSOR_NONE = 0, /* a value */
    STAGECAL_CENSOR_BELOW,    /* at or below value */
    STAGECAL_CENSOR_ABOVE     /* at or above value */
} stagecal_censor;

typedef struct {
    double value; /* mole fraction of the light component (the limit when censored); NaN
                     when missing */
    int censor;   /* stagecal_censor */
    double u;     /* standard uncertainty of the reading [-] */
} stagecal_reading;

/* Compositions inferred from temperatures by the reader (the soft sensor, softsensor.h;
 * docs/runlog.md "Compositions from temperatures"): counts over every file read. */
typedef struct {
    size_t xd_inferred, xb_inferred; /* readings inferred from T_top / T_pot (censored included) */
    size_t xd_censored, xb_censored; /* of which censored: the temperature does not resolve
                                        the composition (near a pure end or an azeotrope) */
    size_t outside;                  /* temperatures beyond the curve's far end: nothing
                                        inferred (the cell stays missing) */
    size_t checks;                   /* consistency tests made (one per run and sensor with
                                        rows that carry both a temperature and a reading) */
    size_t inconsistent;             /* of which flagged (a warning finding names each) */
    size_t inconsistent_top;         /* of those, the top sensor's (T_top) */
} stagecal_runlog_soft;

/* One production run: a contiguous range of rows of one file. */
typedef struct {
    char name[64];   /* value of the run column, or the file name when there is none */
    size_t file;     /* index into files[] */
    size_t first;    /* first row index */
    size_t n;        /* rows in the run */
    long first_line; /* line of its first row */
} stagecal_runlog_run;

typedef struct {
    size_t n;                  /* rows stored */
    size_t cap;                /* allocated rows */
    double *t_s;               /* time [s] (timestamps: s since 1970 UTC) */
    double *w_mol;             /* pot holdup [mol] */
    double *xd;                /* distillate mole fraction [-] (the limit when censored; from
                                  xD_heavy when the log has it) */
    double *xb;                /* pot mole fraction [-] (the limit when censored) */
    unsigned char *xd_cens;    /* stagecal_censor of each xD reading */
    unsigned char *xb_cens;    /* stagecal_censor of each xB reading */
    double *r;                 /* reflux ratio [-], INFINITY = total reflux */
    double *r_set;             /* the reflux set point each row belongs to [-]: the mean of its
                                  stretch of steady R (stagecal_runlog_setpoints; exactly r where
                                  R is logged as a set point; INFINITY at total reflux, NaN where
                                  R is missing); NULL until set (then users read r) */
    double *u_r_set;           /* standard uncertainty of r_set [-] (0 at total reflux) */
    double *v_mol_s;           /* boil-up [mol/s] (from V, or Q / latent heat); NULL if neither */
    double *p_pa;              /* top pressure [Pa]; NULL when not logged */
    double *t_top_k;           /* top temperature [K]; NULL when not logged */
    double *t_pot_k;           /* pot temperature [K]; NULL when not logged */
    double *t_reflux_k;        /* reflux return temperature [K]; NULL when not logged */
    double *u_xd_inf;          /* a row whose xD was inferred from T_top (soft sensor): its
                                  standard uncertainty u(T)/|dT/dxD| (0 when censored); NaN where
                                  xD is the analyser's or missing; NULL when the reader inferred
                                  none (no T_top, no temperature model, or params.infer 0) */
    double *u_xb_inf;          /* the same for xB from T_pot */
    stagecal_runlog_soft soft; /* what the soft sensor did */
    uint32_t *line;            /* source line of each row */
    uint32_t *run;             /* run index of each row */
    stagecal_runlog_run *runs; /* nruns runs, rows contiguous */
    size_t nruns;
    char (*files)[160];      /* nfiles source names */
    char (*sha256)[65];      /* SHA-256 of each file's bytes as read, lowercase hex ("" when the
                                reading params asked for none) */
    uint64_t (*checksum)[2]; /* each file's byte count and a 64-bit checksum of its bytes
                                (not cryptographic): a file given twice is found by it */
    size_t nfiles;
    size_t nfiles_iso; /* files whose time column holds ISO 8601 timestamps (absolute) */
} stagecal_runlog;

typedef struct {
    size_t min_rows;      /* fewer rows in a run is an error (default 5) */
    double w_rise_sigmas; /* W rising by more than this many √2·u(W) while R is finite:
                             warning (default 3); u(W) from the column file, 0 → any rise */
    size_t max_findings;  /* findings kept by stagecal_findings_alloc in the CLI (1000) */
    int sha256;           /* 1: SHA-256 of each file's bytes into log->sha256, for provenance
                             (default 1); 0 saves its cost where nothing records it */
    /* Runs found by themselves in a file without a run column (docs/runlog.md, "Runs"):
     * a row starts a new run after a time gap longer than
     * max(split_gap_s, split_gap_samples x the file's median spacing over its first 20
     * spacings), or when W rises by more than max(split_rise_frac x W,
     * split_rise_sigmas x sqrt(2) x u(W)) (a pot recharge). 0 switches a rule off. */
    double split_gap_s;       /* 7200 (2 h) */
    double split_gap_samples; /* 20 */
    double split_rise_frac;   /* 0.10 */
    double split_rise_sigmas; /* 10 (u(W) from the column file; 0 there: the fraction alone) */
    int csv_separator;        /* ',', ';' or '\t'; 0 (default): detected from the header
                                 line. With ';' or a tab, a comma may be the decimal mark. */
    int infer;                /* 1 (default): a row without an xD (xB) reading gets it from
                                 T_top (T_pot) through the column's equilibrium at the row's
                                 pressure, marked inferred (u_xd_inf, u_xb_inf), and every run
                                 checks its temperatures against its analyser readings (a
                                 warning when they disagree); 0: temperatures are not read for
                                 compositions. Needs a column whose model has temperatures. */
    stagecal_physics *soft_physics; /* NULL (default): each read builds the soft sensor's
                                       models at the logged pressures itself; else one from
                                       stagecal_runlog_soft_physics_alloc for the same column,
                                       shared by the reads that get these params (a model at a
                                       pressure seen before is found again; one read at a
                                       time: not thread-safe) */
} stagecal_runlog_params;

stagecal_runlog_params stagecal_runlog_default_params(void);
/* The soft sensor's physics for col (exact models, many pressures kept) to share across
 * reads through params.soft_physics; free with stagecal_physics_free after the last read.
 * NULL with err set when col's model cannot be built (or on allocation failure). */
stagecal_physics *stagecal_runlog_soft_physics_alloc(const stagecal_column *col,
                                                     stagecal_error *err);

/* NULL on allocation failure. */
stagecal_runlog *stagecal_runlog_alloc(void);
void stagecal_runlog_free(stagecal_runlog *log); /* NULL ok */

/* Appends the rows of one CSV file (path; "-" = stdin) to log, validating as it
 * reads. col gives molar masses (mass and percent-by-mass units), latent heat
 * (Q) and u(W); it may be NULL when the log is mole-based without Q. params may be
 * NULL (defaults). Every data problem becomes a finding in f (which may be NULL);
 * the call still returns STAGECAL_OK if the file could be read, even with error
 * findings — bad cells are stored as missing values. Returns ENOINPUT when the
 * file cannot be opened, EDATA when its header makes the file unusable (the same
 * text is also a finding), ENOMEM. */
int stagecal_runlog_read(stagecal_runlog *log, const char *path, const stagecal_column *col,
                         const stagecal_runlog_params *params, stagecal_findings *f,
                         stagecal_error *err);
/* Same for an in-memory CSV text; source names it in messages. */
int stagecal_runlog_read_buffer(stagecal_runlog *log, const char *text, size_t len,
                                const char *source, const stagecal_column *col,
                                const stagecal_runlog_params *params, stagecal_findings *f,
                                stagecal_error *err);
/* Same from an open stream (not closed). */
int stagecal_runlog_read_stream(stagecal_runlog *log, FILE *in, const char *source,
                                const stagecal_column *col, const stagecal_runlog_params *params,
                                stagecal_findings *f, stagecal_error *err);

/* ---- streaming: one run at a time ---------------------------------------------------- *
 * For logs larger than memory: the files are read in order and each run is handed out as
 * soon as it is complete (a run's rows are contiguous), so memory holds one run and the
 * row being read, whatever the number of rows. Every check of stagecal_runlog_read is made
 * the same way, into the same findings, in the same order. */
typedef struct stagecal_runlog_stream stagecal_runlog_stream;

/* A stream over the files paths[0..npaths) ("-" = stdin), which must outlive it; col,
 * params and f as for stagecal_runlog_read (f may be NULL). NULL on allocation failure. */
stagecal_runlog_stream *stagecal_runlog_stream_alloc(const char *const *paths, size_t npaths,
                                                     const stagecal_column *col,
                                                     const stagecal_runlog_params *params,
                                                     stagecal_findings *f);
void stagecal_runlog_stream_free(stagecal_runlog_stream *s); /* NULL ok */

/* Replaces the rows of run (a log from stagecal_runlog_alloc, reused from call to call)
 * by the next complete run: run->nruns = 1, rows 0..run->n − 1, run->files every file
 * opened so far (runs[0].file indexes them). At the end run->n = 0 and STAGECAL_OK.
 * A file that cannot be read returns the code stagecal_runlog_read gives (ENOINPUT,
 * EDATA; also a finding), with run->n = 0; the next call goes on with the next file.
 * ENOMEM. */
int stagecal_runlog_stream_next(stagecal_runlog_stream *s, stagecal_runlog *run,
                                stagecal_error *err);

/* What the soft sensor did over the rows read so far (runlog.h stagecal_runlog_soft). */
stagecal_runlog_soft stagecal_runlog_stream_soft(const stagecal_runlog_stream *s);

/* Standard uncertainty of a distillate reading xd: u² = u.xd² + (u.xd_heavy_rel·(1 − xd))²
 * (the relative part is relative to the heavy content, what a purity analyser reads).
 * col NULL: 0. */
double stagecal_runlog_u_xd(const stagecal_column *col, double xd);
/* Same for a pot reading: u² = u.xb² + (u.xb_rel·xb)². */
double stagecal_runlog_u_xb(const stagecal_column *col, double xb);
/* The xD (role STAGECAL_RL_XD) or xB (STAGECAL_RL_XB) reading of a row with its
 * censoring and uncertainty (col may be NULL: u = 0); an inferred reading carries its own u
 * (log->u_xd_inf, u_xb_inf). */
stagecal_reading stagecal_runlog_reading(const stagecal_runlog *log, const stagecal_column *col,
                                         size_t row, int role);

/* ---- reflux set points -------------------------------------------------------------- */

/* Segments each run's logged R into stretches of one set point and fills log->r_set and
 * log->u_r_set (allocated on first use). A measured R scatters about its set point, so a
 * change of the reading is not a change of the set point: each stretch of finite R is split
 * by binary segmentation (Vostrikova 1981) with the standardised CUSUM statistic of a change
 * in mean with known variance (Hinkley 1970), max_k |m_left − m_right| / σ·√(1/n_l + 1/n_r),
 * against the two-sided normal quantile at α/(2(n − 1)) (Bonferroni over the n − 1 split
 * points; α = STAGECAL_SETPOINT_ALPHA). σ per row is the larger of the stated u(R) (u.r,
 * u.r_rel of col) and the reading noise estimated from the successive differences
 * (1.4826·median|ΔR|/√2, in stretches of more than 20 rows); where both are 0, or where at least
 * half of the successive readings are equal (R logged as set points), every change of R is a
 * change of set point. Rows with R = 0,
 * inf or missing are their own stretches, as logged. A set point is the stretch's mean; its
 * uncertainty is max(s, u(R))/√n_eff with s the readings' standard deviation and
 * n_eff = n(1 − ρ)/(1 + ρ) from their lag-1 autocorrelation ρ ∈ [0, 0.99] (the stated u of a
 * reading that scatters taken as random per reading), and 0 where every reading is the same
 * (R logged as a set point is taken as exact for the windows; each row's u(N) still has the
 * stated u(R)).
 * Called by the reader at the end of every run; call it again after changing log->r or
 * with another column. col may be NULL (no stated u). ENOMEM. docs/runlog.md. */
#define STAGECAL_SETPOINT_ALPHA 0.01
int stagecal_runlog_setpoints(stagecal_runlog *log, const stagecal_column *col,
                              stagecal_error *err);

/* ---- analysis ---------------------------------------------------------------------- */

/* Cao & Rhinehart R-statistic (Cao & Rhinehart 1995, "An efficient method for on-line
 * identification of steady state", J. Process Control 5) of x[0..n−1] with filter factors l1, l2,
 * l3 in (0, 1]. R is undefined at the first sample, so r receives n − 1 values: r[i − 1] is R at
 * sample i (i = 1..n−1). floor_var ≥ 0 is added to both filtered variances in the ratio's
 * proportion — (2−l1)(v² + a)/(δ² + (2−l1)a) with a = 2·floor_var/(2−l1) — so a signal that is
 * exactly constant (a set point) or quieter than its stated noise reads R → 1 instead of 0/0;
 * floor_var = 0 gives the published statistic. Samples with x NaN hold the filters and repeat the
 * previous R (1 at the start). EINVAL for bad λ or n < 2. */
int stagecal_runlog_rstat(const double *x, size_t n, double l1, double l2, double l3,
                          double floor_var, double *r, stagecal_error *err);

/* Per-sample flags. */
enum {
    STAGECAL_SAMPLE_STEADY = 1u << 0,       /* quasi-steady by the R-statistic */
    STAGECAL_SAMPLE_TOTAL_REFLUX = 1u << 1, /* R = inf, or no distillate drawn (W constant) */
    STAGECAL_SAMPLE_OUTLIER = 1u << 2,      /* xB far from the reconciled xB (gross error) */
    STAGECAL_SAMPLE_WARMUP = 1u << 3        /* within the filters' warm-up at run start */
};

typedef struct {
    size_t run;         /* run index */
    size_t first, last; /* row indices, inclusive */
    int total_reflux;   /* 1: R = inf throughout, or finite R with no distillate drawn */
    double r_median;    /* median R over the window (INFINITY at total reflux) */
    double r_mean;      /* the window's reflux: its set point's estimated mean R (r_set;
                           = r_median where R is logged as a set point; INFINITY at total
                           reflux) */
    double u_r;         /* standard uncertainty of r_mean (u_r_set; 0 at total reflux) */
    size_t n_ok;        /* ok samples in the window (their stage count and standard
                           error are the evidence module's: stagecal_evidence_build) */
} stagecal_runlog_window;

/* Which analyser a drift is put down to. */
typedef enum {
    STAGECAL_DRIFT_NONE = 0,     /* no drift flagged */
    STAGECAL_DRIFT_DISTILLATE,   /* the xD analyser */
    STAGECAL_DRIFT_POT,          /* the xB analyser */
    STAGECAL_DRIFT_UNATTRIBUTED, /* a drift the best hypothesis does not explain (its two
                                    estimates disagree), or balance only (no stage counts) */
} stagecal_drift_analyser;

/* "none", "distillate analyser (xD)", "pot analyser (xB)", "unattributed". */
const char *stagecal_drift_analyser_name(int analyser);

/* One drift hypothesis of one run. */
typedef struct {
    double d_bal, se_bal;   /* drift rate from the Rayleigh balance [1/h] and its se */
    double d_stg, se_stg;   /* from the stage counts' trend within windows [1/h] */
    double d_free, se_free; /* the stage relation's estimate with each stretch's count free
                               (fitted with d; unbiased under a drift, wider) [1/h] */
    double t_name;          /* GLR statistic with d_free in place of d_stg: names the
                               analyser (NaN without both estimates) */
    double d, se;           /* inverse-variance combination (balance alone without stages) */
    double t_stat;          /* (d/se)²: GLR statistic for a bias of this signature */
    double q_stat;          /* (d_bal − d_stg)²/(se_bal² + se_stg²): consistency (NaN when one
                               of the two is missing) */
    size_t n_bal, n_stg;    /* rows in each estimate */
} stagecal_runlog_drift_sig;

typedef struct {
    size_t run;           /* run index */
    size_t n_used;        /* samples with W, xD, xB present */
    double closure;       /* (W0·xB0 − W·xB − ∫xD dW_removed)/(W0·xB0) [-] */
    double u_closure;     /* its standard uncertainty from u(W), u(xD), u(xB) */
    int gross;            /* 1: |closure| > gross_sigmas·u_closure */
    double drift_per_h;   /* estimated xB analyser drift d [1/h]: weighted fit of the light
                             holdup h_k = H + d·W_k·t_k (see docs/methods.md) */
    double u_drift_per_h; /* its standard error */
    int drift;            /* 1: analyser drift flagged (see params; after stagecal_runlog_invert
                             the two-signature test below decides it) */
    size_t n_outliers;    /* samples flagged OUTLIER */
    /* Two drift signatures (src/runlog_drift.c, docs/methods.md "Analyser drift and balance
     * checks"): for each hypothesis j (a distillate or a pot analyser reading x + d·(t − t0))
     * the drift rate d from the balance (b) and from the per-sample stage counts (s), their
     * inverse-variance combination, the GLR statistic T = (d/se)² and the consistency
     * Q = (d_b − d_s)²/(se_b² + se_s²). Set by stagecal_runlog_invert (NaN/0 before). */
    stagecal_runlog_drift_sig sig[2]; /* [0] distillate (xD), [1] pot (xB) analyser */
    int drift_analyser;               /* stagecal_drift_analyser: which analyser is named */
    /* Boil-up/reflux consistency: the fall of W over the production rows against
     * Σ V/(R+1)·Δt (trapezoid), with the uncertainty of the prediction from u(V), u(R) and
     * of the fall from u(W). */
    int has_boilup;      /* 1: the run has production rows with W, V and R */
    double w_fall_mol;   /* observed fall of W [mol] */
    double w_pred_mol;   /* Σ V/(R+1)·Δt [mol] */
    double u_w_diff_mol; /* standard uncertainty of w_fall − w_pred [mol] */
    double boilup_ratio; /* w_fall / w_pred */
    int boilup_mismatch; /* 1: |w_fall − w_pred| > boilup_sigmas·u_w_diff */
    double u_w_mol;      /* u(W) used for the closure and the outlier scale [mol]: the
                            column file's, else the load-cell noise estimated from the run
                            (1.4826·MAD of W's second differences / √6) */
    int u_w_estimated;   /* 1: u_w_mol was estimated from the log */
    /* The share of distillate readings at the analyser's upper limit (censored above, e.g.
     * 1.000): its trend with time within the run's production stretches, a stratified
     * Cochran–Armitage z (one-sided: > 0 when the share rises). A distillate falls through a
     * batch at one reflux ratio, so a rising share is a distillate analyser drifting up
     * (which readings at the limit no longer show); NaN when no stretch has readings both at
     * and below the limit. Set by stagecal_runlog_invert. */
    double z_limit;
    /* The share of production distillate readings at the physical bound 1: the sign test's
     * one-sided z (> 4: more than half the readings at 1 beyond chance; a distillate below 1
     * read with symmetric noise reaches 1 on fewer than half the rows). NaN without
     * production rows. Set by stagecal_runlog_invert. */
    double z_bound;
} stagecal_runlog_closure;

typedef struct {
    double lambda1, lambda2,
        lambda3;            /* R-statistic filters (0.2, 0.1, 0.1, Cao & Rhinehart 1995) */
    double r_enter;         /* transient → steady when every signal's R < r_enter (1.44, the
                               α = 0.05 critical value for (0.2, 0.1, 0.1)) */
    double r_leave;         /* steady → transient when any signal's R > r_leave (2.5) */
    size_t warmup;          /* samples at run start that cannot be steady (15 ≈ 3/λ2) */
    size_t min_window;      /* shortest window in samples (6); shorter stretches stay
                               flagged steady but form no window */
    double warmup_s;        /* warm-up as a time [s]; > 0 replaces warmup by
                               ceil(warmup_s/Δt) samples, Δt the run's median sample spacing
                               (0, the default: warmup samples, at most a third of the run) */
    double min_window_s;    /* shortest window as a time [s]; > 0 replaces min_window by
                               ceil(min_window_s/Δt) samples, at least 3 (0, the default:
                               min_window samples, at most an eighth of the run and at least 4) */
    double gross_sigmas;    /* closure gross error threshold in standard uncertainties (3) */
    double drift_t;         /* drift flagged when |slope|/se > drift_t (4) ... */
    double drift_u;         /* ... and |slope|·duration > drift_u·u(xB) (2) */
    double outlier_sigmas;  /* |xB − xB_rec| > outlier_sigmas·u(xB): outlier (4) */
    double no_distillate_t; /* finite-R window whose W slope has |t| < this: no distillate (2) */
    double drift_sign_z;    /* the drift stays unattributed when the named hypothesis' two
                               estimates (balance, stage relation) have opposite signs and each
                               exceeds this many standard errors (3) */
    double boilup_sigmas;   /* boil-up/reflux mismatch when |ΔW − ΣV/(R+1)Δt| > this many
                               standard uncertainties (3) */
    int holdup;             /* the column-holdup compensation the drift and balance checks
                               take (a stagecal_holdup_comp of stagecal/holdup.h, or −1, the
                               default: STAGES when the column file states a holdup, else LAG
                               when the start-ups give a time constant); calibration sets it
                               to the evidence's (AUTO when that is NONE), so both see the
                               same compensated xD */
    const struct stagecal_holdup_tau *holdup_pooled; /* the start-up time constant pooled over
                               the runs of a log given in parts (calibrate's streaming gives
                               each run the whole log's pool); NULL (default): this log's */
} stagecal_runlog_analysis_params;

stagecal_runlog_analysis_params stagecal_runlog_analysis_default_params(void);

/* Per-sample notes (why a row has no stage count or what is special). */
typedef enum {
    STAGECAL_NOTE_NONE = 0,
    STAGECAL_NOTE_MISSING_XD,
    STAGECAL_NOTE_MISSING_XB,
    STAGECAL_NOTE_MISSING_R,
    STAGECAL_NOTE_XD_BELOW_XB,
    STAGECAL_NOTE_REFLUX_ZERO,
    STAGECAL_NOTE_STAGES,        /* status from the stage inversion (pinch, azeotrope, …) */
    STAGECAL_NOTE_NO_DISTILLATE, /* inverted at total reflux: W constant at finite R */
    STAGECAL_NOTE_NO_LOAD,       /* F-factor not available (no V, diameter or temperature) */
    STAGECAL_NOTE_FAILED,        /* the inversion's inner solve failed */
    STAGECAL_NOTE_AT_LEAST,      /* censored: stages holds a one-sided 95 % lower bound */
    STAGECAL_NOTE_AT_MOST,       /* censored: stages holds a one-sided 95 % upper bound */
    STAGECAL_NOTE_OPPOSITE,      /* xD and xB censored in opposite senses: no bound */
    STAGECAL_NOTE_UNBOUNDED,     /* censored, and the bound is not finite */
    STAGECAL_NOTE_COUNT
} stagecal_runlog_note;

const char *stagecal_runlog_note_text(int note); /* "", "missing xD", ... */
/* A row's note with its stage status (res->note[i], res->status[i]): STAGECAL_NOTE_STAGES
 * says what the status means ("pinch: ...", "azeotrope ...") instead of "see status";
 * every other note as stagecal_runlog_note_text. */
const char *stagecal_runlog_row_note_text(int note, int status);

/* A row's status beyond the stage inversion's four (stagecal_stages_status): a censored
 * reading bounds the count from one side only (see the note and stages). */
#define STAGECAL_RUNLOG_CENSORED 4
#define STAGECAL_RUNLOG_NSTATUS 5
/* "ok", "pinch", "azeotrope", "invalid", "censored"; "unknown" otherwise. */
const char *stagecal_runlog_status_name(int status);

/* One-sided 95 % allowance for a censored row: the bound is the stage count at the
 * compositions moved by this many standard uncertainties each, towards fewer stages for
 * a lower bound and more for an upper one (the standard normal 0.95 quantile). */
#define STAGECAL_RUNLOG_BOUND_Z 1.6448536269514722

/* The one-sided bound of one censored reading pair (xd, xb with their stagecal_censor
 * cd, cb) at reflux r: the stage count at the compositions moved by
 * STAGECAL_RUNLOG_BOUND_Z standard uncertainties each (col's, NULL: none) the way that
 * weakens it. Returns the stagecal_runlog_note: AT_LEAST or AT_MOST with *stages the
 * bound, OPPOSITE (censored in opposite senses) or UNBOUNDED (no finite bound) with
 * *stages NAN. Used for censored log rows and `invert --xd '>v'`. */
int stagecal_runlog_bound(const stagecal_column *col, const stagecal_vle *vle, double xd, int cd,
                          double xb, int cb, double r, double murphree, double *stages);

/* Everything computed for a log; one entry per row (arrays of length n). */
typedef struct {
    size_t n;
    unsigned char *flags;  /* STAGECAL_SAMPLE_* */
    int32_t *window;       /* window index or −1 */
    double *xb_rec;        /* reconciled xB (NaN where it cannot be formed; never emitted) */
    unsigned char *status; /* stagecal_stages_status (INVALID for missing values), or
                              STAGECAL_RUNLOG_CENSORED */
    unsigned char *note;   /* stagecal_runlog_note */
    double *stages;        /* stages incl. the pot (0 unless ok); censored: the one-sided
                              bound the note names (NaN when there is none) */
    double *u_stages;      /* standard uncertainty of stages (0 unless ok) */
    double *lv;            /* L/V = R/(R+1) (1 at total reflux; NaN when R is missing) */
    double *f_factor;      /* F = u_G·√ρ_G [Pa^0.5]; NaN when not available (note says) */
    double *dn_dxd;        /* ∂stages/∂xD and ∂stages/∂xB of ok rows (0 otherwise; after */
    double *dn_dxb;        /* stagecal_runlog_invert) */
    stagecal_runlog_window *windows;
    size_t nwindows;
    stagecal_runlog_closure *closures; /* one per run */
    size_t nruns;
    size_t count[STAGECAL_RUNLOG_NSTATUS]; /* samples per status (4: censored) */
} stagecal_runlog_result;

/* Flags, windows and closure for every run (no column model needed; u(·) from
 * col->u when col is not NULL). Allocates res (free with
 * stagecal_runlog_result_free). params may be NULL. ENOMEM, EINVAL. */
int stagecal_runlog_analyse(const stagecal_runlog *log, const stagecal_column *col,
                            const stagecal_runlog_analysis_params *params,
                            stagecal_runlog_result *res, stagecal_error *err);

/* Per-sample inversion with the column's equilibrium model (after
 * stagecal_runlog_analyse on the same res): stages, u(stages) from col->u through
 * the sensitivities (first order, independent errors), L/V and the F-factor from V,
 * the diameter, P (log, else the column's pressure) and the ideal-gas density at
 * the top temperature (T_top from the log, else the bubble point of xD). Window
 * Rows of a stretch at one finite R in which W does not fall (no distillate drawn)
 * are counted at total reflux (note NO_DISTILLATE). Then flags steady samples and
 * builds the windows (params may be NULL); a window's stage count comes from
 * stagecal_evidence_build (evidence.h). murphree in (0, 1] is passed to the inversion. A sample
 * whose inner solve fails is `invalid` with note "inversion failed"; the call fails only for ENOMEM
 * or EINVAL (no column model). */
int stagecal_runlog_invert(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                           const stagecal_runlog_analysis_params *params,
                           stagecal_runlog_result *res, stagecal_error *err);
/* As stagecal_runlog_invert, the equilibrium models at logged pressures taken from ph and kept
 * there (physics.h; one column, one thread; NULL: an object of its own for this call). A caller
 * inverting a log run by run passes one ph, so a model is built once, not once per run. */
int stagecal_runlog_invert_physics(const stagecal_runlog *log, const stagecal_column *col,
                                   double murphree, const stagecal_runlog_analysis_params *params,
                                   stagecal_physics *ph, stagecal_runlog_result *res,
                                   stagecal_error *err);

void stagecal_runlog_result_free(stagecal_runlog_result *res); /* frees members; NULL ok */

/* Why no row of any run log can have an F-factor with the column file col, when that is
 * so: the F-factor needs the inside diameter and both molar masses from it ("the column
 * file gives no molar masses", "… no inside diameter", "… neither the inside diameter nor
 * the molar masses"); NULL when col gives them (rows may still lack V or a temperature).
 * A static text. */
const char *stagecal_runlog_no_load_reason(const stagecal_column *col);

/* F = u_G·√ρ_G [Pa^0.5] for a boil-up v_mol_s of molar mass m_kg_mol at p_pa and t_k
 * in a column of inside diameter d_m, with ρ_G = P·M/(R·T) (ideal gas). EINVAL
 * when an argument is not positive and finite. */
int stagecal_runlog_f_factor(double v_mol_s, double m_kg_mol, double p_pa, double t_k, double d_m,
                             double *f, stagecal_error *err);

/* ---- streamed inversion: run by run, on several threads --------------------------------- */

/* What a streamed inversion saw (small: a few numbers per run). */
typedef struct {
    size_t rows;                           /* rows inverted and written */
    size_t nwindows;                       /* quasi-steady windows */
    size_t count[STAGECAL_RUNLOG_NSTATUS]; /* rows per status (4: censored) */
    size_t nruns;
    stagecal_runlog_run *runs;         /* the runs in output order (first: row index in it) */
    stagecal_runlog_closure *closures; /* their mass-balance closures */
    char (*files)[160];                /* the files read */
    size_t nfiles;
    stagecal_runlog_soft soft; /* compositions inferred from temperatures */
} stagecal_runlog_totals;

void stagecal_runlog_totals_free(stagecal_runlog_totals *t); /* frees members; NULL ok */

/* Reads the runs of s one at a time and does for each what stagecal_runlog_analyse,
 * stagecal_runlog_invert and stagecal_runlog_write_csv do for a whole log, writing the same
 * bytes (the header before the first row; nothing when there are no rows). Runs are
 * independent, so nthreads ≥ 1 threads analyse and invert them while this one reads the
 * next (and, with every slot filled, inverts one itself); each run is written in file order
 * once the one before it is, by whichever thread finishes it, so the output does not depend
 * on nthreads (0: all in this thread). Memory holds 2·nthreads + 1 runs. tot
 * receives the totals. A file the stream cannot read ends the work with its code (ENOINPUT,
 * EDATA); EWRITE, ENOMEM, EINVAL (no column model). */
int stagecal_runlog_invert_stream(stagecal_runlog_stream *s, const stagecal_column *col,
                                  double murphree, const stagecal_runlog_analysis_params *params,
                                  size_t nthreads, FILE *out, stagecal_runlog_totals *tot,
                                  stagecal_error *err);

/* Writes one CSV row per log row (header first): source, line, run, time[s],
 * stages, column_stages, u_stages, status, note, L/V, F[Pa^0.5], steady,
 * total_reflux, outlier, window, xB_rec, stages_low, stages_high, and when the reader
 * inferred compositions (log->u_xd_inf or u_xb_inf) also xD, xD_source, u_xD, xB,
 * xB_source, u_xB (source `analyser`, `inferred` or `inferred-censored`; empty when
 * missing) and the run's Kalman-smoothed compositions with their u (xD_fused, u_xD_fused,
 * xB_fused, u_xB_fused; stagecal_softsensor_smooth over the values, censored ones left out). Time
 * has 3 decimals, stages 6, L/V and xB_rec 9, F 6, u_stages 9 significant digits. Missing numbers
 * are empty cells. col gives the condenser (column stages). When no row can have an
 * F-factor because of the column file (stagecal_runlog_no_load_reason is not NULL), the
 * rows' note leaves STAGECAL_NOTE_NO_LOAD out (an empty cell where no other note applies):
 * a fact of the column file, said once by the caller, not on each of 10^6 rows; a row
 * without an F-factor for a reason of its own (no V on that row, no V column in the log)
 * keeps the note. EWRITE on a write error. */
int stagecal_runlog_write_csv(const stagecal_runlog *log, const stagecal_column *col,
                              const stagecal_runlog_result *res, FILE *out, stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif

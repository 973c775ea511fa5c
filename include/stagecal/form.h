/*
 * stagecal/form.h — correlation forms: effective stages as a function of the reflux
 * ratio R (≥ 0, INFINITY = total reflux) and the vapour load F (F-factor, Pa^0.5).
 *
 *   constant         stages = a
 *   saturating       stages = a·(1 − exp(−b·R))                      (1 at R = inf)
 *   saturating-load  stages = (a + c·F + d·F²)·(1 − exp(−b·R))
 *   linear:T1+T2+…   stages = Σ θ_i·T_i with terms from
 *                    1   1/R   L/V   lnR   F   F^2   1/F
 *                    e.g. "linear:1+1/R", "linear:1+L/V+F+F^2"
 *                    (1/R = 0 and L/V = 1 at total reflux; lnR needs finite R > 0)
 * Notation is stagecal's own; docs/forms.md documents it.
 */
#ifndef STAGECAL_FORM_H
#define STAGECAL_FORM_H

#include <stddef.h>

#include "stagecal/error.h"

#ifdef __cplusplus
extern "C" {
#endif

#define STAGECAL_FORM_MAXP 8

typedef enum {
    STAGECAL_FORM_CONSTANT = 0,
    STAGECAL_FORM_SATURATING,
    STAGECAL_FORM_SATURATING_LOAD,
    STAGECAL_FORM_LINEAR
} stagecal_form_kind;

/* Terms of the linear basis (bit flags, in this canonical order). */
enum {
    STAGECAL_TERM_ONE = 1u << 0,  /* 1 */
    STAGECAL_TERM_INVR = 1u << 1, /* 1/R */
    STAGECAL_TERM_LV = 1u << 2,   /* L/V = R/(R+1) */
    STAGECAL_TERM_LNR = 1u << 3,  /* ln R */
    STAGECAL_TERM_F = 1u << 4,    /* F */
    STAGECAL_TERM_F2 = 1u << 5,   /* F² */
    STAGECAL_TERM_INVF = 1u << 6  /* 1/F */
};

typedef struct {
    stagecal_form_kind kind;
    size_t p;                                 /* number of parameters, 1..STAGECAL_FORM_MAXP */
    unsigned terms;                           /* LINEAR: set of STAGECAL_TERM_* */
    int uses_load;                            /* 1 when the form needs F */
    char name[96];                            /* canonical name, e.g. "linear:1+1/R" */
    char param_names[STAGECAL_FORM_MAXP][16]; /* "a", "b", … or the term text */
} stagecal_form;

/* Parses a form name. EINVAL with a message naming the bad part and listing what
 * is accepted. */
int stagecal_form_parse(const char *text, stagecal_form *form, stagecal_error *err);

/* stages(R, F; θ) and, when grad is not NULL, ∂stages/∂θ_i (p entries). f_load is
 * ignored unless form->uses_load. EINVAL when the form is undefined at (R, F)
 * (e.g. lnR at R = 0 or inf, 1/F at F = 0). */
int stagecal_form_eval(const stagecal_form *form, const double *theta, double r, double f_load,
                       double *value, double *grad);

/* 1 when the form is linear in its parameters (ordinary weighted least squares). */
int stagecal_form_is_linear(const stagecal_form *form);

#ifdef __cplusplus
}
#endif
#endif

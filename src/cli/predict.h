/*
 * predict.h — what `stagecal predict` (cmd_predict.c) shares with its helpers:
 * predict_band.c (the band's output) and predict_dynamic.c (the dynamic batch model's
 * choice and output). Not a command of its own.
 */
#ifndef STAGECAL_CLI_PREDICT_H
#define STAGECAL_CLI_PREDICT_H

#include <jansson.h>

#include "cli.h"
#include "stagecal/batch.h"
#include "stagecal/units.h"

/* SI → the units people read (stagecal/units.h). */
#define H(s) ((s) / STAGECAL_UNIT_H)
#define KMOL(mol) ((mol) / STAGECAL_UNIT_KMOL)
#define KMOL_H(mol_s) ((mol_s) / STAGECAL_UNIT_KMOL_H)
#define GJ(j) ((j) / STAGECAL_UNIT_GJ)

/* --dynamics, as parsed (dynamics_choices in cmd_predict.c) */
enum { DYN_DEFAULT = -1, DYN_HOLDUP = 0, DYN_QUASI = 1 };

/* The dynamic run's extras for the outputs (NULL for the quasi-steady model): its holdup
 * and the quasi-steady batch beside it, for the delays. */
struct dyn_view {
    const stagecal_batch_dynamics *dy;
    const stagecal_batch_result *qs;
    double u_rel; /* the stated holdup's relative standard uncertainty (0: not stated) */
};

/* predict_band.c */
/* A receiver's band: end time, amount, mean composition, yield and recovery. */
json_t *predict_band_cut_json(const stagecal_batch_cut_band *b);
/* The document's band: level, draws, batch time and energy, what it covers; with dv, the
 * holdup's relative uncertainty it also draws. */
json_t *predict_band_json(const stagecal_batch_band *band, const struct dyn_view *dv);
/* The line under a receiver: its band of end time, amount and mean composition. */
void predict_band_print_cut(const stagecal_batch_cut_band *b);
/* After "batch time T h": its band, what kind, and (dv) that the holdup was drawn. */
void predict_band_print_time(const stagecal_batch_band *band, const struct dyn_view *dv);

/* predict_dynamic.c */
/* The batch model: dynamic with the column file's holdup (dynamics DYN_HOLDUP, or
 * DYN_DEFAULT when the file states one) or quasi-steady, with the start-up's end
 * (startup_xd, startup_h in hours; NAN when not given); *dyn = 1 for the dynamic model.
 * An exit code. */
int predict_dyn_pick(int dynamics, double startup_xd, double startup_h, const cli_system *sys,
                     stagecal_batch_dynamics *dy, int *dyn);
/* A receiver's distillate: first and last xD, its spread; dynamic: the quasi-steady cut. */
void predict_dyn_cut_json(json_t *o, const stagecal_batch_cut *c, const struct dyn_view *dv,
                          size_t i);
/* The batch model's members of the document. */
void predict_dyn_json(json_t *doc, const stagecal_batch_problem *pb,
                      const stagecal_batch_result *res, const struct dyn_view *dv);
/* The end of the first line (the batch model) and, dynamic, the start-up's line. */
void predict_dyn_print_head(const stagecal_batch_problem *pb, const stagecal_batch_result *res,
                            const struct dyn_view *dv);
/* A receiver's distillate and, dynamic, the quasi-steady receiver beside it. */
void predict_dyn_print_cut(const stagecal_batch_cut *c, const struct dyn_view *dv, size_t i);
/* Dynamic: what the model assumes, and the quasi-steady batch time. */
void predict_dyn_print_model(const struct dyn_view *dv);

#endif

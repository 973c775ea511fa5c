/* commands.h — the subcommands' entry points (one cmd_<name>.c each), listed with their
 * setup flags in main.c's table. Checklist for a new command: cmd_<name>.c with its
 * cli_usage and option table (options.h: shared options come from the OPT_ macros), a
 * row in main.c's table, tests in tests/cli/, a section in docs/cli.md. */
#ifndef STAGECAL_COMMANDS_H
#define STAGECAL_COMMANDS_H

#include "cli.h"
#include "stagecal/plot.h"

int cmd_steps(int argc, char **argv, cli_ctx *ctx);
int cmd_check(int argc, char **argv, cli_ctx *ctx);
int cmd_invert(int argc, char **argv, cli_ctx *ctx);
int cmd_calibrate(int argc, char **argv, cli_ctx *ctx);
int cmd_regress(int argc, char **argv, cli_ctx *ctx);
int cmd_fits(int argc, char **argv, cli_ctx *ctx);
int cmd_hetp(int argc, char **argv, cli_ctx *ctx);
int cmd_history(int argc, char **argv, cli_ctx *ctx);
int cmd_trend(int argc, char **argv, cli_ctx *ctx);
int cmd_predict(int argc, char **argv, cli_ctx *ctx);
int cmd_plot(int argc, char **argv, cli_ctx *ctx);
int cmd_report(int argc, char **argv, cli_ctx *ctx);
int cmd_probe(int argc, char **argv, cli_ctx *ctx);

/* For `plot trend` and `plot trajectory` (cmd_plot.c), which run `trend` and `predict`
 * with ctx->chart set: writes chart (freed here) to ctx->chart and says so. err: the
 * builder's error when chart is NULL. An exit code. */
int cli_chart_write(cli_ctx *ctx, stagecal_plot_chart *chart, int rc, stagecal_error *err);

#endif

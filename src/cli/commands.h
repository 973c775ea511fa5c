/* commands.h — the subcommands' entry points (one cmd_<name>.c each). */
#ifndef STAGECAL_COMMANDS_H
#define STAGECAL_COMMANDS_H

int cmd_steps(int argc, char **argv);
int cmd_check(int argc, char **argv);
int cmd_invert(int argc, char **argv);
/* The run-log mode of `invert` (invert_runlog.c): wanted when a positional argument
 * (a run log) or --out is present; then it parses argv itself. */
int invert_runlog_wanted(int argc, char **argv);
int invert_runlog(int argc, char **argv);
int cmd_calibrate(int argc, char **argv);
int cmd_regress(int argc, char **argv);
int cmd_fits(int argc, char **argv);
int cmd_hetp(int argc, char **argv);
int cmd_history(int argc, char **argv);
int cmd_trend(int argc, char **argv);
int cmd_predict(int argc, char **argv);
int cmd_plot(int argc, char **argv);
int cmd_report(int argc, char **argv);
int cmd_probe(int argc, char **argv);

#endif

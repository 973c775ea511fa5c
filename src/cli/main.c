/*
 * main.c — the stagecal program: a table of subcommands with the shared setup each
 * needs (Git's dispatch table with RUN_SETUP-style flags). Parsing stops at the command
 * name ('+' in the option string); each command parses its own options from its table
 * (options.h). main prepares the context the flags ask for, runs the command, prints
 * the caution after a text output whose numbers feed a decision, and tidies up.
 */
#include <getopt.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_version.h>
#include <jansson.h>
#include <locale.h>
#include <nlopt.h>
#include <stdio.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/version.h"

struct command {
    const char *name;
    int (*run)(int argc, char **argv, cli_ctx *ctx);
    unsigned flags; /* CMD_SYSTEM, CMD_CAUTION (cli.h) */
    const char *summary;
};

static const struct command commands[] = {
    {"check", cmd_check, 0, "validate run logs: findings with file:line, mass-balance closure"},
    {"steps", cmd_steps, CMD_SYSTEM | CMD_CAUTION,
     "step stages down from xD: xB and the stage profile"},
    {"calibrate", cmd_calibrate, CMD_CAUTION,
     "run logs in, stages(R, F) with bands out, as a model file"},
    {"invert", cmd_invert, CMD_SYSTEM | CMD_CAUTION,
     "effective stages from xD, xB and R (or every row of a run log)"},
    {"regress", cmd_regress, CMD_CAUTION,
     "fit stages against R (and F) with bands, from a points file"},
    {"fits", cmd_fits, 0, "a column's fits by data period and label; label and retire them"},
    {"hetp", cmd_hetp, CMD_CAUTION,
     "HETP (or tray efficiency) with an interval; before/after a repack"},
    {"history", cmd_history, CMD_CAUTION,
     "one fit over months of logs: loss rate, stages now, crossing date"},
    {"trend", cmd_trend, CMD_CAUTION,
     "stages over months: trend, EWMA alarms, forecast; fleet rows"},
    {"predict", cmd_predict, CMD_SYSTEM | CMD_CAUTION,
     "predict a batch from a model file: cuts, times, yields, band"},
    {"plot", cmd_plot, CMD_SYSTEM,
     "charts as PNG, SVG or PDF: McCabe-Thiele diagram, stages against R"},
    {"probe", cmd_probe, CMD_CAUTION,
     "where to run the next tests: I-/D-optimal conditions, band before/after"},
    {"report", cmd_report, CMD_CAUTION,
     "one self-contained HTML report (inline SVG, printable) of a model"},
};

/* Runs one command with the setup its flags ask for. */
static int run(const struct command *cmd, int argc, char **argv)
{
    cli_ctx ctx;
    memset(&ctx, 0, sizeof ctx);
    cli_system_init(&ctx.sys);
    cli_command = cmd->name;
    int rc = cmd->run(argc, argv, &ctx);
    if (rc == CLI_PARSE_HELP) /* --help: the usage text was the output */
        rc = CLI_EXIT_OK;
    else if (rc == CLI_EXIT_OK && (cmd->flags & CMD_CAUTION) && !ctx.json && !ctx.data_on_stdout)
        cli_print_caution();
    if (cmd->flags & CMD_SYSTEM)
        cli_system_close(&ctx.sys);
    return rc;
}

static void usage(FILE *out)
{
    fprintf(out, "usage: stagecal [--version] [--help] <command> [options] [args]\n\n"
                 "Effective equilibrium stages of batch distillation columns from run logs.\n\n"
                 "commands:\n");
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        fprintf(out, "  %-10s %s\n", commands[i].name, commands[i].summary);
    fprintf(out, "\nRun 'stagecal <command> --help' for a command's options.\n");
}

static int finish(int rc)
{
    /* A failed write of results is a failure (Git's run_builtin, jq's main). */
    if (fflush(stdout) != 0 || ferror(stdout)) {
        fprintf(stderr, "stagecal: cannot write to standard output\n");
        return CLI_EXIT_CANTCREAT;
    }
    return rc;
}

int main(int argc, char **argv)
{
    static const struct option opts[] = {
        {"help", no_argument, NULL, 'h'}, {"version", no_argument, NULL, 'V'}, {0, 0, 0, 0}};
    int c;

    setlocale(LC_ALL, "C");
    gsl_set_error_handler_off(); /* GSL's default handler aborts; we check statuses */

    opterr = 0; /* one message of our own, not getopt's */
    while ((c = getopt_long(argc, argv, "+hV", opts, NULL)) != -1) {
        switch (c) {
        case 'h':
            usage(stdout);
            return finish(CLI_EXIT_OK);
        case 'V': {
            int maj, min, bug;
            nlopt_version(&maj, &min, &bug);
            printf("stagecal %s (GSL %s, NLopt %d.%d.%d, jansson %s, libcsv 3)\n",
                   stagecal_version(), gsl_version, maj, min, bug, jansson_version_str());
            return finish(CLI_EXIT_OK);
        }
        default:
            if (optopt && argv[optind - 1][1] != '-')
                fprintf(stderr, "stagecal: unknown option '-%c' (see 'stagecal --help')\n", optopt);
            else
                fprintf(stderr, "stagecal: unknown option '%s' (see 'stagecal --help')\n",
                        argv[optind - 1]);
            return CLI_EXIT_USAGE;
        }
    }
    if (optind >= argc) {
        usage(stderr);
        return CLI_EXIT_USAGE;
    }
    const char *name = argv[optind];
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++) {
        if (strcmp(commands[i].name, name) == 0)
            return finish(run(&commands[i], argc - optind, argv + optind));
    }
    /* One line (errors are one line), listing the table (Git's habit). */
    fprintf(stderr, "stagecal: '%s' is not a command (expected one of:", name);
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        fprintf(stderr, " %s", commands[i].name);
    fprintf(stderr, "; see 'stagecal --help')\n");
    return CLI_EXIT_USAGE;
}

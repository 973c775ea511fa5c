/*
 * fuzz_cli.c — libFuzzer harness for the command-line parsers: the input is split at
 * newlines into argv and handed to one cmd_<name> function (src/cli/ compiled in,
 * main.c left out). The first token names the command. Tokens "@col", "@ideal", "@log"
 * and "@pts" stand for copies of files under datasets/ made in the scratch directory
 * (an output option naming one then overwrites only a copy: before the copies, a
 * fuzzed `invert --out @log` overwrote datasets/demo/logs/2025-01.csv, which found the
 * output-over-input defect), so the file-reading paths are reached; any other token containing '/'
 * is refused (the harness never touches files outside its scratch directory). The process works in
 * a fresh temporary directory, stdin is /dev/null, and commands that write files (calibrate, plot,
 * report) are not called. Run with -close_fd_mask=3 to keep the commands' output off the terminal
 * (libFuzzer keeps its own and the sanitizer reports).
 */
#include <stdlib.h>
#include <unistd.h>

#include "commands.h"
#include "fuzz_common.h"

extern const char *cli_command;
extern int cli_quiet;

static char path_col[512], path_ideal[512], path_log[512], path_pts[512];

/* Copies the first max_lines lines of src (0: all) to name in the current (scratch)
 * directory and puts its absolute path in out: the commands see copies, so an output
 * option can never touch datasets/. */
static void scratch_copy(const char *dir, const char *src, const char *name, size_t max_lines,
                         char *out, size_t cap)
{
    FILE *in = fopen(src, "rb");
    FILE *to = fopen(name, "wb");
    size_t lines = 0;
    int c;
    if (!in || !to) {
        perror(src);
        abort();
    }
    while ((max_lines == 0 || lines < max_lines) && (c = getc(in)) != EOF) {
        if (putc(c, to) == EOF)
            abort();
        lines += c == '\n';
    }
    if (ferror(in) || fclose(to) != 0)
        abort();
    fclose(in);
    snprintf(out, cap, "%s/%s", dir, name);
}

/* @log holds the header and the first two runs (122 rows) of the demo log, not its six
 * runs: the arguments are the target, and two runs keep the multi-run paths (run
 * boundaries, windows, the drift and balance checks per run) while the per-row inversion
 * and the checks cost a third (they were over half of each execution's time). */
#define FUZZ_LOG_LINES 123

int LLVMFuzzerInitialize(int *argc, char ***argv)
{
    (void)argc;
    (void)argv;
    gsl_set_error_handler_off();
    char tmpl[] = "/tmp/stagecal-fuzz-cli.XXXXXX";
    if (!mkdtemp(tmpl) || chdir(tmpl) != 0) {
        perror("fuzz setup: scratch directory");
        abort();
    }
    char src[512];
    snprintf(src, sizeof src, "%s/columns/demo_alpha.json", STAGECAL_DATASETS);
    scratch_copy(tmpl, src, "col.json", 0, path_col, sizeof path_col);
    snprintf(src, sizeof src, "%s/columns/demo_benzene_toluene.json", STAGECAL_DATASETS);
    scratch_copy(tmpl, src, "ideal.json", 0, path_ideal, sizeof path_ideal);
    snprintf(src, sizeof src, "%s/demo/logs/2025-01.csv", STAGECAL_DATASETS);
    scratch_copy(tmpl, src, "log.csv", FUZZ_LOG_LINES, path_log, sizeof path_log);
    snprintf(src, sizeof src, "%s/points/demo_points.csv", STAGECAL_DATASETS);
    scratch_copy(tmpl, src, "pts.csv", 0, path_pts, sizeof path_pts);
    if (!freopen("/dev/null", "r", stdin)) {
        perror("fuzz setup: stdin");
        abort();
    }
    return 0;
}

/* system: the command takes the equilibrium-model options (main.c's CMD_SYSTEM), so the
 * harness sets up and closes them as main's run() does. */
struct fuzz_command {
    const char *name;
    int (*run)(int argc, char **argv, cli_ctx *ctx);
    int system;
};

static const struct fuzz_command commands[] = {
    {"steps", cmd_steps, 1},     {"invert", cmd_invert, 1}, {"check", cmd_check, 0},
    {"regress", cmd_regress, 0}, {"hetp", cmd_hetp, 0},     {"trend", cmd_trend, 0},
    {"predict", cmd_predict, 1},
};

#define FUZZ_MAX_ARGS 24

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size < 1 || size > 2048)
        return 0;
    const struct fuzz_command *cmd = &commands[data[0] % (sizeof commands / sizeof commands[0])];
    char *text = fuzz_strndup(data + 1, size - 1);
    if (!text)
        return 0;
    char *argv[FUZZ_MAX_ARGS + 2];
    int argc = 0;
    argv[argc++] = (char *)(uintptr_t)cmd->name;
    char *p = text, *end = text + (size - 1);
    int refuse = 0;
    while (p <= end && argc < FUZZ_MAX_ARGS + 1) {
        char *nl = memchr(p, '\n', (size_t)(end - p));
        if (nl)
            *nl = '\0';
        char *tok = p;
        if (strlen(tok) != (size_t)((nl ? nl : end) - p)) {
            refuse = 1; /* an embedded NUL: argv strings cannot hold one */
            break;
        }
        if (strcmp(tok, "@col") == 0)
            tok = path_col;
        else if (strcmp(tok, "@ideal") == 0)
            tok = path_ideal;
        else if (strcmp(tok, "@log") == 0)
            tok = path_log;
        else if (strcmp(tok, "@pts") == 0)
            tok = path_pts;
        else if (strchr(tok, '/'))
            refuse = 1;
        argv[argc++] = tok;
        if (!nl)
            break;
        p = nl + 1;
    }
    argv[argc] = NULL;
    if (!refuse) {
        cli_command = cmd->name;
        cli_quiet = 0;
        cli_ctx ctx;
        memset(&ctx, 0, sizeof ctx);
        cli_system_init(&ctx.sys);
        (void)cmd->run(argc, argv, &ctx);
        if (cmd->system)
            cli_system_close(&ctx.sys);
        fflush(stdout);
        clearerr(stdout);
    }
    free(text);
    return 0;
}

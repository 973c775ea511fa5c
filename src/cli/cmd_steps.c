/* cmd_steps.c — placeholder, replaced by the real subcommand. */
#include "cli.h"
#include "commands.h"

int cmd_steps(int argc, char **argv)
{
    (void)argc, (void)argv;
    return cli_usage_error("not implemented yet");
}

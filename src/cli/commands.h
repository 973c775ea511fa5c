/* commands.h — the subcommands' entry points (one cmd_<name>.c each). */
#ifndef STAGECAL_COMMANDS_H
#define STAGECAL_COMMANDS_H

int cmd_steps(int argc, char **argv);
int cmd_invert(int argc, char **argv);

#endif

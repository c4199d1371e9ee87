/*
 * inspect/commands.h - the subcommands of the `modeband` program.
 *
 * Each subcommand is one function in its own file (cmd_<name>.c) taking the
 * arguments after the subcommand name (argv[0] is the subcommand name).
 * Exit codes: MB_EXIT_OK when done, MB_EXIT_USAGE for a usage error (with a
 * sentence on stderr and a pointer to --help), MB_EXIT_FAIL for any other
 * failure (one clear sentence on stderr). Every subcommand answers --help.
 */
#ifndef MB_COMMANDS_H
#define MB_COMMANDS_H

#define MB_EXIT_OK 0
#define MB_EXIT_FAIL 1
#define MB_EXIT_USAGE 2

int mb_cmd_teach(int argc, char **argv);
int mb_cmd_model_info(int argc, char **argv);
int mb_cmd_inspect(int argc, char **argv);
int mb_cmd_run(int argc, char **argv);
int mb_cmd_synth(int argc, char **argv);
int mb_cmd_target(int argc, char **argv);
int mb_cmd_calibrate(int argc, char **argv);
int mb_cmd_repeatability(int argc, char **argv);
int mb_cmd_plcsim(int argc, char **argv);
int mb_cmd_report(int argc, char **argv);

#endif

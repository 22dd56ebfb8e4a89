/* cmd.h - the command handlers; main.c's table is the only list of commands.
 *
 * Adding a command:
 *   1. write src/cmd/<name>.c exposing `int cmd_<name>(int argc, char **argv)`
 *      (argv[0] is the command name; return 0, 1 bad input, 2 bad usage);
 *   2. declare it below and add one row to the table in src/main.c
 *      (the Makefile picks up new files by itself);
 *   3. give it a `--help` text (cmdline_usage) and end-to-end tests in tests/cli/;
 *   4. document it in README.md and DEVELOPERS.md.
 */
#ifndef SR_CMD_H
#define SR_CMD_H

int cmd_check(int argc, char **argv);
int cmd_fit(int argc, char **argv);
int cmd_analyze(int argc, char **argv);
int cmd_simulate(int argc, char **argv);
int cmd_group(int argc, char **argv);
int cmd_parcels(int argc, char **argv);
int cmd_report(int argc, char **argv);
int cmd_slurm(int argc, char **argv);

#endif

/* The commands: each parses its options, calls the library, prints, and returns the exit code.
 * Only main and these functions print to the user or choose exit codes. */
#ifndef TF_CMD_H
#define TF_CMD_H

#include <stdio.h>

/* Exit codes shared by every command. */
enum {
    TF_EXIT_OK = 0,
    TF_EXIT_FAIL = 1,   /* the input was read but the job could not be done */
    TF_EXIT_USAGE = 2,  /* bad command line */
    TF_EXIT_INPUT = 3,  /* the input file is unusable */
    TF_EXIT_INTERRUPTED = 130,
};

/* The exit statuses above as every command's help ends with them (and the manual page shows
 * them): one text, so that no command's list can drift from the codes. */
#define TF_CMD_EXIT_HELP                                                                           \
    "\nexit status:\n"                                                                             \
    "  0    success\n"                                                                             \
    "  1    the input was read but the job could not be done (every fit failed, a file\n"         \
    "       could not be written...)\n"                                                            \
    "  2    bad command line (unknown option, bad value, no survey file named)\n"                           \
    "  3    the input file is unusable\n"                                                          \
    "  130  interrupted (Ctrl-C or SIGTERM); nothing half-written is left\n"

/* The end of every command's help: the conventions all commands share, then the exit statuses. */
#define TF_CMD_HELP_END                                                                            \
    "\nEvery command also answers --version (the version and the licence); 'tallyfit help CMD'\n"  \
    "shows the same help as 'tallyfit CMD --help'.\n"                                               \
    TF_CMD_EXIT_HELP

/* The licence line --version prints under the version (LICENSE). */
#define TF_CMD_LICENCE "Licence: MIT (see the LICENSE file). There is NO WARRANTY, to the extent permitted by law."

/* One command: argv[0] is the command's name; returns an exit code. */
typedef int (*tf_cmd_fn)(int argc, char **argv);

typedef struct {
    const char *name;
    const char *summary;   /* one line for `tallyfit --help` */
    tf_cmd_fn run;
} tf_cmd;

/* The command table (cmd/commands.c), ended by a row of NULLs. */
extern const tf_cmd tf_cmd_table[];

int tf_cmd_check(int argc, char **argv);
int tf_cmd_simulate(int argc, char **argv);
int tf_cmd_likelihood(int argc, char **argv);
int tf_cmd_analyze(int argc, char **argv);
int tf_cmd_fit(int argc, char **argv);
int tf_cmd_compare(int argc, char **argv);
int tf_cmd_forecast(int argc, char **argv);

#endif

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

/* The table of commands main dispatches to, in the order --help lists them. */
#include "cmd/cmd.h"

const tf_cmd tf_cmd_table[] = {
    {"check", "validate a survey file and print a per-population overview", tf_cmd_check},
    {"forecast", "project a population forward: quasi-extinction risk and chance of decline", tf_cmd_forecast},
    {NULL, NULL, NULL},
};

/* The table of commands main dispatches to, in the order --help lists them. */
#include "cmd/cmd.h"

const tf_cmd tf_cmd_table[] = {
    {"analyze", "the main job: fit, compare and project every population; write a workbook and CSV", tf_cmd_analyze},
    {"check", "validate a survey file and print a per-population overview", tf_cmd_check},
    {"simulate", "draw a survey from a population model with given parameters", tf_cmd_simulate},
    {"likelihood", "estimate the log-likelihood of a survey at given parameters", tf_cmd_likelihood},
    {"fit", "fit a population model to each population of a survey by particle MCMC", tf_cmd_fit},
    {"compare", "compare population models of a survey by marginal likelihood", tf_cmd_compare},
    {"forecast", "project a population forward: quasi-extinction risk and chance of decline", tf_cmd_forecast},
    {NULL, NULL, NULL},
};

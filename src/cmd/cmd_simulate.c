/* `tallyfit simulate`: draws a survey from a joined model with given parameters and writes it as
 * a survey CSV that `tallyfit check`, `likelihood` and the other commands read. */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cmd/args.h"
#include "cmd/cmd.h"
#include "model/model.h"
#include "export/atomic.h"
#include "util/error.h"
#include "util/rng.h"

#define CMD "simulate"
/* Enough for any survey people keep; the limit only guards memory against typos. */
#define MAX_YEARS 100000

static void help(FILE *out)
{
    char growth[256], obs[256];
    tf_model_list_growth(growth, sizeof growth);
    tf_model_list_obs(obs, sizeof obs);
    fprintf(out,
            "usage: tallyfit simulate --model M [--obs O] --set NAME=VALUE,... --years N --start N1\n"
            "                         [--first-year Y] [--seed S] [--effort E|E1,E2,...] [--label L] [-o FILE]\n\n"
            "Draws annual counts from a state-space population model and writes them as a survey CSV\n"
            "(columns year,count[,effort], with a first column population when --label is given).\n\n"
            "options:\n"
            "  --model M        growth model: %s\n"
            "  --obs O          counting error: %s (default poisson)\n"
            "  --set NAME=VALUE,...\n"
            "                   every parameter of the model, e.g. r=0.3,K=800,sigma=0.1,phi=20\n"
            "  --years N        number of years to simulate\n"
            "  --start N1       abundance in the first year (> 0)\n"
            "  --first-year Y   calendar year of the first count (default 2000)\n"
            "  --seed S         random seed (default 1); the same seed gives the same file\n"
            "  --effort E       survey effort, one value for every year or one per year (default 1,\n"
            "                   no effort column); the expected count is effort x abundance\n"
            "  --label L        population name written in a population column\n"
            "  -o, --output FILE\n"
            "                   write to FILE (replaced only once complete) instead of standard output\n"
            "  -h, --help       show this help\n",
            growth, obs);
}

static int usage_fail(tf_error *err)
{
    tf_error_print(err, "tallyfit " CMD, stderr);
    return TF_EXIT_USAGE;
}

/* Writes the CSV; returns nonzero on a stream error. */
static int write_csv(FILE *out, const char *label, long first_year, size_t n_years, const double *y,
                     const double *effort, int with_effort, int integer)
{
    if (label)
        fputs("population,", out);
    fputs(with_effort ? "year,count,effort\n" : "year,count\n", out);
    for (size_t t = 0; t < n_years; t++) {
        if (label)
            fprintf(out, "%s,", label);
        fprintf(out, "%ld,", first_year + (long)t);
        /* Whole counts for count models; six significant digits for indices. */
        if (integer)
            fprintf(out, "%.0f", y[t]);
        else
            fprintf(out, "%.6g", y[t]);
        if (with_effort)
            fprintf(out, ",%.10g", effort[t]);
        fputc('\n', out);
    }
    return ferror(out);
}

/* A label is written unquoted, so it must not need CSV quoting. */
static int label_ok(const char *s)
{
    if (!*s)
        return 0;
    for (; *s; s++)
        if (*s == ',' || *s == '"' || *s == '\n' || *s == '\r')
            return 0;
    return 1;
}

int tf_cmd_simulate(int argc, char **argv)
{
    enum { OPT_MODEL = 256, OPT_OBS, OPT_SET, OPT_YEARS, OPT_START, OPT_FIRST, OPT_SEED, OPT_EFFORT, OPT_LABEL };
    static const struct option longopts[] = {
        {"model", required_argument, NULL, OPT_MODEL},
        {"obs", required_argument, NULL, OPT_OBS},
        {"set", required_argument, NULL, OPT_SET},
        {"years", required_argument, NULL, OPT_YEARS},
        {"start", required_argument, NULL, OPT_START},
        {"first-year", required_argument, NULL, OPT_FIRST},
        {"seed", required_argument, NULL, OPT_SEED},
        {"effort", required_argument, NULL, OPT_EFFORT},
        {"label", required_argument, NULL, OPT_LABEL},
        {"output", required_argument, NULL, 'o'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    tf_error err;
    tf_error_init(&err);
    const char *growth = NULL, *obs = "poisson", *label = NULL, *output = NULL, *effort_text = NULL;
    tf_arg_pairs set;
    tf_args_pairs_init(&set);
    size_t n_years = 0;
    double start = NAN;
    long first_year = 2000;
    uint64_t seed = 1;
    int have_years = 0;

    opterr = 0;
    optind = 0;
    int c;
    while ((c = getopt_long(argc, argv, ":o:h", longopts, NULL)) != -1) {
        switch (c) {
        case OPT_MODEL: growth = optarg; break;
        case OPT_OBS: obs = optarg; break;
        case OPT_SET: tf_args_parse_pairs("--set", optarg, &set, &err); break;
        case OPT_YEARS:
            if (tf_args_parse_size("--years", optarg, 1, MAX_YEARS, &n_years, &err) == TF_OK)
                have_years = 1;
            break;
        case OPT_START:
            if (tf_args_parse_double("--start", optarg, &start, &err) == TF_OK && !(start > 0))
                tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--start: the first abundance must be > 0");
            break;
        case OPT_FIRST: tf_args_parse_long("--first-year", optarg, -100000, 100000, &first_year, &err); break;
        case OPT_SEED: tf_args_parse_seed("--seed", optarg, &seed, &err); break;
        case OPT_EFFORT: effort_text = optarg; break;
        case OPT_LABEL: label = optarg; break;
        case 'o': output = optarg; break;
        case 'h': help(stdout); return TF_EXIT_OK;
        default: tf_args_getopt_error(CMD, c, optopt, argv[optind - 1], &err); break;
        }
    }
    if (optind < argc)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "run 'tallyfit simulate --help' for the options",
                     "unexpected argument '%s'", argv[optind]);
    if (!growth)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --model ricker", "--model is required");
    if (!have_years && tf_error_status(&err) == TF_OK)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --years 30", "--years is required");
    if (isnan(start) && tf_error_status(&err) == TF_OK)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --start 500", "--start is required");
    if (label && !label_ok(label))
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                     "--label: '%s' must be non-empty and contain no comma, quote or line break", label);
    if (tf_error_status(&err) != TF_OK)
        return usage_fail(&err);

    int status = TF_EXIT_FAIL;
    tf_model *m = NULL;
    double *effort = NULL, *x = NULL, *y = NULL;
    tf_atomic *of = NULL;
    if (tf_model_new(growth, obs, &m, &err) != TF_OK) {
        status = TF_EXIT_USAGE;
        goto out;
    }
    double theta[TF_MAX_PARAMS];
    if (tf_args_bind_model(m, &set, 1, theta, NULL, &err) != TF_OK) {
        status = TF_EXIT_USAGE;
        goto out;
    }
    effort = malloc(n_years * sizeof *effort);
    x = malloc(n_years * sizeof *x);
    y = malloc(n_years * sizeof *y);
    if (!effort || !x || !y) {
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for %zu years", n_years);
        goto out;
    }
    for (size_t t = 0; t < n_years; t++)
        effort[t] = 1.0;
    if (effort_text) {
        size_t n_given;
        if (tf_args_parse_doubles("--effort", effort_text, effort, n_years, &n_given, &err) != TF_OK) {
            status = TF_EXIT_USAGE;
            goto out;
        }
        if (n_given != 1 && n_given != n_years) {
            tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "give one effort for all years or one per year",
                         "--effort: %zu values for %zu years", n_given, n_years);
            status = TF_EXIT_USAGE;
            goto out;
        }
        for (size_t t = 0; t < n_given; t++)
            if (!(effort[t] > 0)) {
                tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--effort: %g is not > 0", effort[t]);
                status = TF_EXIT_USAGE;
                goto out;
            }
        if (n_given == 1)
            for (size_t t = 1; t < n_years; t++)
                effort[t] = effort[0];
    }

    /* The stream depends on the seed only, so models that agree (theta-logistic with theta = 1
     * and Ricker) simulate the same series. */
    tf_rng rng;
    uint64_t key = tf_rng_key(CMD);
    tf_rng_derive(&rng, seed, &key, 1);
    if (tf_model_simulate(m, theta, log(start), effort, n_years, &rng, x, y, &err) != TF_OK)
        goto out;

    FILE *out = stdout;
    if (output && strcmp(output, "-")) {
        /* Nothing is read, so nothing needs protecting from being overwritten. */
        if (tf_atomic_open(output, NULL, &of, &err) != TF_OK)
            goto out;
        out = tf_atomic_stream(of);
    }
    if (write_csv(out, label, first_year, n_years, y, effort, effort_text != NULL, tf_model_obs(m)->needs_integer)) {
        tf_error_add(&err, TF_ERR_IO, output, 0, 0, NULL, "write error");
        goto out;
    }
    if (of) {
        tf_atomic *done = of;
        of = NULL;
        if (tf_atomic_commit(done, &err) != TF_OK)
            goto out;
    } else if (fflush(stdout) != 0) {
        tf_error_add(&err, TF_ERR_IO, NULL, 0, 0, NULL, "cannot write to standard output");
        goto out;
    }
    status = TF_EXIT_OK;
out:
    if (status != TF_EXIT_OK)
        tf_error_print(&err, "tallyfit " CMD, stderr);
    tf_atomic_abort(of);
    free(effort);
    free(x);
    free(y);
    tf_model_free(m);
    return status;
}

/* `tallyfit likelihood`: the log-likelihood of one population's counts under a joined model at
 * given parameters, estimated by the particle filter, with its Monte Carlo standard error. */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cmd/args.h"
#include "cmd/input.h"
#include "cmd/cmd.h"
#include "cmd/messages.h"
#include "cmd/setup.h"
#include "export/csv_out.h"
#include "filter/filter.h"
#include "model/model.h"
#include "survey/survey.h"
#include "tables/fit_tables.h"
#include "util/error.h"
#include "util/rng.h"

#define CMD "likelihood"
#define DEFAULT_PARTICLES 1000
#define DEFAULT_REPEATS 10
/* Limits that only guard memory and time against typos. */
#define MAX_PARTICLES 10000000
#define MAX_REPEATS 1000000

static void help(FILE *out)
{
    char growth[256], obs[256];
    tf_model_list_growth(growth, sizeof growth);
    tf_model_list_obs(obs, sizeof obs);
    fprintf(out,
            "usage: tallyfit likelihood SURVEY.csv --model M [--obs O] --parameter NAME=VALUE,...\n"
            "                           [--prior x1_mean=V,x1_sd=V] [--population NAME] [--estimates]\n"
            "                           [--particles N] [--repeat R] [--seed S] [--proposal P]\n\n"
            "Estimates the log-likelihood of one population's counts under a state-space model at the\n"
            "given parameters with a particle filter, repeated R times with independent random numbers.\n"
            "Prints a CSV header and one row: population,model,log_likelihood,log_likelihood_mcse,\n"
            "particles,repeats,loglik_sd,proposal, where log_likelihood is the log of the mean of the R\n"
            "likelihood estimates, log_likelihood_mcse its Monte Carlo standard error, and loglik_sd the\n"
            "standard deviation of the R log-likelihood estimates, the spread the particle count is tuned\n"
            "by (both NA when R = 1).\n"
            "In a survey of several populations, name the one with --population.\n"
            "SURVEY.csv may be '-' for standard input.\n\n"
            "options:\n"
            "  --model M          growth model: %s\n"
            "  --obs O            counting error: %s (default poisson;\n"
            "                     lognormal with --estimates)\n"
            "  --parameter NAME=VALUE,...\n"
            "                     every parameter of the model, e.g. r=0.3,K=800,sigma=0.1,phi=20\n"
            "  --prior x1_mean=V,x1_sd=V\n"
            "                     the first year's log-abundance prior, where the filter starts\n"
            "                     (default: the log of the mean of the first %d counts / effort,\n"
            "                     and 1)\n"
            TF_INPUT_HELP
            "  --particles N      particles (default %d)\n"
            "  --repeat R         independent estimates to average (default %d)\n"
            "  --seed S           random seed (default 1)\n"
            TF_ARGS_PROPOSAL_HELP,
            growth, obs, TF_MODEL_X1_YEARS, DEFAULT_PARTICLES, DEFAULT_REPEATS);
    tf_args_quiet_help(out, 21);
    fputs("                     (the row of results is the command's output, and is printed)\n"
          "  -h, --help         show this help\n"
          TF_CMD_HELP_END,
          out);
}

int tf_cmd_likelihood(int argc, char **argv)
{
    enum { OPT_MODEL = 256, OPT_OBS, OPT_PARAMETER, OPT_PRIOR, OPT_POP, OPT_PARTICLES, OPT_REPEAT, OPT_SEED, OPT_SKIP, OPT_ESTIMATES, OPT_COUNTED,
           OPT_PROPOSAL };
    static const struct option longopts[] = {
        {"model", required_argument, NULL, OPT_MODEL},
        {"obs", required_argument, NULL, OPT_OBS},
        {"parameter", required_argument, NULL, OPT_PARAMETER},
        {"prior", required_argument, NULL, OPT_PRIOR},
        {"population", required_argument, NULL, OPT_POP},
        {"skip-unusable", no_argument, NULL, OPT_SKIP},
        {"estimates", no_argument, NULL, OPT_ESTIMATES},
        {"counted-fraction", required_argument, NULL, OPT_COUNTED},
        {"particles", required_argument, NULL, OPT_PARTICLES},
        {"repeat", required_argument, NULL, OPT_REPEAT},
        {"seed", required_argument, NULL, OPT_SEED},
        {"proposal", required_argument, NULL, OPT_PROPOSAL},
        {"quiet", no_argument, NULL, 'q'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    tf_error err;
    tf_error_init(&err);
    const char *growth = NULL, *obs = NULL, *population = NULL;
    tf_arg_pairs set, prior;
    tf_args_pairs_init(&set);
    tf_args_pairs_init(&prior);
    size_t n_particles = DEFAULT_PARTICLES, n_repeats = DEFAULT_REPEATS;
    uint64_t seed = 1;
    tf_proposal proposal = TF_PROPOSAL_GUIDED;
    tf_input in = {0};

    opterr = 0;
    optind = 0;
    int c;
    while ((c = getopt_long(argc, argv, ":qh", longopts, NULL)) != -1) {
        switch (c) {
        case OPT_MODEL: growth = optarg; break;
        case OPT_OBS: obs = optarg; break;
        case OPT_PARAMETER: tf_args_parse_pairs("--parameter", optarg, &set, &err); break;
        case OPT_PRIOR: tf_args_parse_pairs("--prior", optarg, &prior, &err); break;
        case 'q': break; /* nothing is printed but the result, the warnings and the errors */
        case OPT_POP: tf_input_set_population(&in, optarg, &err); break;
        case OPT_SKIP: in.skip_unusable = 1; break;
        case OPT_ESTIMATES: in.estimates = 1; break;
        case OPT_COUNTED: tf_input_set_counted_fraction(&in, optarg, &err); break;
        case OPT_PARTICLES: tf_args_parse_size("--particles", optarg, 1, MAX_PARTICLES, &n_particles, &err); break;
        case OPT_REPEAT: tf_args_parse_size("--repeat", optarg, 1, MAX_REPEATS, &n_repeats, &err); break;
        case OPT_SEED: tf_args_parse_seed("--seed", optarg, &seed, &err); break;
        case OPT_PROPOSAL: tf_args_parse_proposal("--proposal", optarg, &proposal, &err); break;
        case 'h': help(stdout); return TF_EXIT_OK;
        default: tf_args_getopt_error(CMD, c, optopt, argv[optind - 1], &err); break;
        }
    }
    const char *path = tf_args_survey_path(argc, argv, optind, &err);
    if (!path && tf_error_status(&err) == TF_OK)
        tf_args_no_survey(CMD, &err);
    if (!growth && tf_error_status(&err) == TF_OK)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --model ricker", "--model is required");
    if (!obs)
        obs = tf_input_default_obs(&in);
    tf_input_check_obs(&in, "--obs", &obs, 1, &err);
    tf_args_merge_prior(&set, &prior, &err);
    if (tf_error_status(&err) != TF_OK)
        return tf_messages_usage("tallyfit " CMD, &err);
    population = tf_input_single(&in);

    int status = TF_EXIT_FAIL;
    tf_model *m = NULL;
    tf_survey *sv = NULL;
    tf_filter *f = NULL;
    double *ll = NULL;
    double theta[TF_MAX_PARAMS];
    /* Bound once before reading so that a mistyped parameter is reported without waiting for a
     * large file; bound again below after the data set the first-year default. */
    if (tf_args_model_at(growth, obs, &set, &m, theta, &err) != TF_OK) {
        status = TF_EXIT_USAGE;
        goto out;
    }
    tf_status rst = tf_input_read(&in, path, stderr, "tallyfit " CMD, &sv, &err);
    if (rst != TF_OK) {
        status = rst == TF_ERR_USAGE ? TF_EXIT_USAGE : TF_EXIT_INPUT;
        goto out;
    }
    const char *shown = strcmp(path, "-") ? path : "stdin"; /* the file's name in messages */
    const tf_series *s = tf_args_pick_series(sv, population, shown, &err);
    if (!s) {
        status = TF_EXIT_USAGE;
        goto out;
    }
    if (tf_setup_check_counts(m, s, shown, &err) != TF_OK) {
        status = TF_EXIT_INPUT;
        goto out;
    }
    if (tf_model_initial_from_series(m, s, &err) != TF_OK || tf_args_bind_model(m, &set, 1, theta, NULL, &err) != TF_OK) {
        status = TF_EXIT_INPUT;
        goto out;
    }
    f = tf_filter_alloc(m, s, n_particles);
    ll = malloc(n_repeats * sizeof *ll);
    if (!f || !ll) {
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, "try fewer --particles", "out of memory for %zu particles",
                     n_particles);
        goto out;
    }
    tf_filter_set_proposal(f, proposal);
    /* Streams keyed by seed, population and repeat but not by model, so that models that agree
     * exactly (theta-logistic with theta = 1 and Ricker) give the same estimate. */
    double lmax = -INFINITY;
    for (size_t r = 0; r < n_repeats; r++) {
        uint64_t keys[3] = {tf_rng_key(CMD), tf_rng_key(tf_series_label(s)), (uint64_t)r};
        tf_rng rng;
        tf_rng_derive(&rng, seed, keys, 3);
        ll[r] = tf_filter_loglik(f, theta, &rng, NULL);
        if (ll[r] > lmax)
            lmax = ll[r];
    }
    /* loglik = log of the mean of the R estimates L_r = exp(ll_r) (log-sum-exp); its standard
     * error by the delta method, sd(L) / (sqrt(R) mean(L)), computed on L_r / max L. */
    const char *pname = tf_filter_proposal_name(proposal);
    /* The columns of the tables (docs/tables.md): the population and the model first. */
    char base[256];
    tf_args_survey_name(path, base, sizeof base);
    printf("population,model,log_likelihood,log_likelihood_mcse,particles,repeats,loglik_sd,proposal\n");
    tf_csv_write_field(stdout, tf_tables_population(s, base));
    printf(",%s,", tf_model_name(m));
    if (lmax == -INFINITY) {
        printf("-inf,NA,%zu,%zu,NA,%s\n", n_particles, n_repeats, pname);
        fprintf(stderr, "tallyfit " CMD ": warning: every estimate is zero (all particles ruled out by a count)\n"
                        "  hint: check the parameters, or try more --particles\n");
    } else {
        double sum = 0, sum2 = 0;
        for (size_t r = 0; r < n_repeats; r++) {
            double v = exp(ll[r] - lmax);
            sum += v;
        }
        double mean = sum / (double)n_repeats;
        for (size_t r = 0; r < n_repeats; r++) {
            double d = exp(ll[r] - lmax) - mean;
            sum2 += d * d;
        }
        double loglik = lmax + log(mean);
        if (n_repeats > 1) {
            double sd = sqrt(sum2 / (double)(n_repeats - 1));
            /* The spread of the log-estimates themselves; a repeat that gave zero makes it infinite. */
            double lsum = 0, lsum2 = 0;
            for (size_t r = 0; r < n_repeats; r++)
                lsum += ll[r];
            double lmean = lsum / (double)n_repeats;
            for (size_t r = 0; r < n_repeats; r++)
                lsum2 += (ll[r] - lmean) * (ll[r] - lmean);
            double lsd = isfinite(lmean) ? sqrt(lsum2 / (double)(n_repeats - 1)) : INFINITY;
            printf("%.6f,%.6f,%zu,%zu,%.6f,%s\n", loglik, sd / (sqrt((double)n_repeats) * mean), n_particles, n_repeats,
                   lsd, pname);
        } else {
            printf("%.6f,NA,%zu,%zu,NA,%s\n", loglik, n_particles, n_repeats, pname);
        }
    }
    if (tf_messages_flush(&err) != TF_OK)
        goto out;
    status = TF_EXIT_OK;
out:
    if (status != TF_EXIT_OK)
        tf_error_print(&err, "tallyfit " CMD, stderr);
    free(ll);
    tf_filter_free(f);
    tf_survey_free(sv);
    tf_model_free(m);
    return status;
}

/* `tallyfit simulate`: draws a survey from a joined model with given parameters and writes it as
 * a survey CSV that `tallyfit check`, `likelihood` and the other commands read. */
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
#include "export/atomic.h"
#include "model/model.h"
#include "survey/survey.h"
#include "util/error.h"
#include "util/rng.h"

#define CMD "simulate"
/* The scheme: at most 5000 populations of 8 to 40 years (the sizes a batch is built for),
 * which stays within the batch reading's row limit. */
#define SCHEME_MAX 5000
#define SCHEME_MIN_YEARS 8
#define SCHEME_MAX_YEARS 40
#define SCHEME_MAX_ROWS ((size_t)SCHEME_MAX * SCHEME_MAX_YEARS)

static void help(FILE *out)
{
    char growth[256], obs[256];
    tf_model_list_growth(growth, sizeof growth);
    tf_model_list_obs(obs, sizeof obs);
    fprintf(out,
            "usage: tallyfit simulate --model M [--obs O] --parameter NAME=VALUE,... --years N --start N1\n"
            "                         [--first-year Y] [--seed S] [--effort E|E1,E2,...] [--label L]\n"
            "                         [--removed N|P%%] [--counted-fraction Q] [-o FILE]\n"
            "       tallyfit simulate --scheme N [--seed S] [-o FILE]\n\n"
            "Draws annual counts from a state-space population model and writes them as a survey CSV\n"
            "(columns year,count[,effort][,removed], with a first column population when --label is\n"
            "given).\n\n"
            "With --scheme N (1 to %d) it writes instead an invented monitoring scheme of N\n"
            "populations site-0001, site-0002, ... for tests and benchmarks: each drawn with its own\n"
            "growth model (exponential, Ricker or Gompertz), trend, process noise, counting error\n"
            "(Poisson or negative binomial), abundance (about 15 to 3000), length (%d to %d years),\n"
            "first year, years without a survey (NA) and, for some, an effort that varies by year.\n"
            "The same seed gives the same file, and population i the same series whatever N.\n\n"
            "options:\n"
            "  --model M        growth model: %s\n"
            "  --obs O          counting error: %s (default poisson); lognormal values are\n"
            "                   not whole, so other commands read them with --estimates\n"
            "  --parameter NAME=VALUE,...\n"
            "                   every parameter of the model, e.g. r=0.3,K=800,sigma=0.1,phi=20\n"
            "  --years N        number of years to simulate (%d to %d)\n"
            "  --start N1       abundance in the first year (> 0)\n"
            "  --first-year Y   calendar year of the first count (default 2000; %d to %d)\n"
            "  --seed S         random seed (default 1); the same seed gives the same file\n"
            "  --effort E       survey effort, one value for every year or one per year (default 1,\n"
            "                   no effort column); the expected count is effort x abundance\n"
            "  --label L        population name written in a population column\n"
            "  --removed N|P%%   a harvest after each year's count: N animals a year, or P %% of the\n"
            "                   animals present (whole animals, at most those there are); the animals\n"
            "                   taken go to a removed column, and the growth step acts on those left\n"
            "  --counted-fraction Q\n"
            "                   the share of the animals present that a count at effort 1 includes,\n"
            "                   in (0, 1] (default 1); abundance in animals is abundance / Q\n"
            "  -o, --output FILE\n"
            "                   write to FILE (replaced only once complete) instead of standard output\n",
            SCHEME_MAX, SCHEME_MIN_YEARS, SCHEME_MAX_YEARS, growth, obs, TF_SURVEY_MIN_SURVEYED, TF_SURVEY_MAX_SPAN,
            TF_SURVEY_YEAR_MIN, TF_SURVEY_YEAR_MAX);
    tf_args_quiet_help(out, 19);
    fputs("                   (the survey written is the command's output)\n"
          "  -h, --help       show this help\n"
          TF_CMD_HELP_END,
          out);
}

/* Writes the CSV; returns nonzero on a stream error. */
static int write_csv(FILE *out, const char *label, long first_year, size_t n_years, const double *y,
                     const double *effort, int with_effort, const double *removed, int integer)
{
    if (label)
        fputs("population,", out);
    fputs(with_effort ? "year,count,effort" : "year,count", out);
    fputs(removed ? ",removed\n" : "\n", out);
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
        if (removed)
            fprintf(out, ",%.0f", removed[t]);
        fputc('\n', out);
    }
    return ferror(out);
}

/* --removed N (animals a year, >= 0) or P% (a share of the animals present, 0 < P < 100). */
static void parse_removed(const char *text, tf_model_harvest *h, tf_error *err)
{
    char buf[64];
    size_t n = strlen(text);
    int share = n > 0 && text[n - 1] == '%';
    if (n == 0 || n >= sizeof buf) {
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --removed 40 or --removed 8%", "--removed: '%s' is not "
                     "a number of animals or a percentage", text);
        return;
    }
    memcpy(buf, text, n + 1);
    if (share)
        buf[n - 1] = '\0';
    double v;
    if (tf_args_parse_double("--removed", buf, &v, err) != TF_OK)
        return;
    if (share ? !(v > 0 && v < 100) : !(v >= 0))
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --removed 40 or --removed 8%",
                     share ? "--removed %s: a share must lie between 0 and 100 %%" : "--removed %s: a number of "
                     "animals must be >= 0", text);
    else if (share)
        h->share = v / 100.0, h->count = 0;
    else
        h->count = v, h->share = 0;
}

/* Uniform on (lo, hi). */
static double uniform(tf_rng *rng, double lo, double hi) { return lo + (hi - lo) * tf_rng_uniform(rng); }

/* One population of the scheme into out: its parameters, then its counts, drawn from its own
 * stream (seed, "scheme", i) so that it does not depend on the number of populations. Draws
 * again (same stream) until the series is one the importer takes: at least
 * TF_SURVEY_MIN_SURVEYED surveyed years, not all zero. Invented: the ranges only span what
 * monitoring schemes of birds and mammals commonly show (common practice, no source). */
static tf_status scheme_population(FILE *out, uint64_t seed, size_t i, const char *label_fmt, tf_error *err)
{
    uint64_t keys[2] = {tf_rng_key("scheme"), (uint64_t)i};
    tf_rng rng;
    tf_rng_derive(&rng, seed, keys, 2);
    static const char *const growth[] = {"exponential", "ricker", "gompertz"};
    double x[SCHEME_MAX_YEARS], y[SCHEME_MAX_YEARS], effort[SCHEME_MAX_YEARS];
    for (int attempt = 0; attempt < 100; attempt++) {
        double u = tf_rng_uniform(&rng);
        const char *g = growth[u < 0.4 ? 0 : u < 0.7 ? 1 : 2];
        int negbin = tf_rng_uniform(&rng) < 0.4;
        size_t n = SCHEME_MIN_YEARS + (size_t)(tf_rng_uniform(&rng) * (SCHEME_MAX_YEARS - SCHEME_MIN_YEARS + 1));
        if (n > SCHEME_MAX_YEARS)
            n = SCHEME_MAX_YEARS;
        long first = 1975 + (long)(tf_rng_uniform(&rng) * (double)(2024 - 1975 - (long)n + 2));
        double start = exp(uniform(&rng, log(15.0), log(3000.0)));
        double sigma = uniform(&rng, 0.05, 0.3);
        int varied = tf_rng_uniform(&rng) < 0.2;
        tf_model *m = NULL;
        tf_status st = tf_model_new(g, negbin ? "negbin" : "poisson", &m, err);
        if (st != TF_OK)
            return st;
        double theta[TF_MAX_PARAMS];
        for (size_t k = 0; k < tf_model_n_params(m); k++) {
            const char *p = tf_model_param_name(m, k);
            if (!strcmp(p, "sigma"))
                theta[k] = sigma;
            else if (!strcmp(p, "phi"))
                theta[k] = uniform(&rng, 3, 30);
            else if (!strcmp(p, "K"))
                theta[k] = fmax(5.0, start * exp(uniform(&rng, -1.2, 0.8)));
            else if (!strcmp(p, "r"))
                theta[k] = strcmp(g, "exponential") ? uniform(&rng, 0.1, 0.6) : uniform(&rng, -0.08, 0.06);
            else
                theta[k] = 1.0;
        }
        for (size_t t = 0; t < n; t++)
            effort[t] = varied ? uniform(&rng, 0.5, 2.0) : 1.0;
        st = tf_model_simulate(m, theta, log(start), effort, n, &rng, x, y, err);
        tf_model_free(m);
        if (st != TF_OK)
            return st;
        /* Gaps: any year but the first and the last goes unsurveyed with chance 0.12. */
        size_t surveyed = 0, nonzero = 0;
        int gap[SCHEME_MAX_YEARS];
        for (size_t t = 0; t < n; t++) {
            gap[t] = t > 0 && t + 1 < n && tf_rng_uniform(&rng) < 0.12;
            surveyed += !gap[t];
            nonzero += !gap[t] && y[t] > 0;
        }
        if (surveyed < TF_SURVEY_MIN_SURVEYED || nonzero == 0 || !(y[0] < TF_SURVEY_MAX_COUNT))
            continue;
        for (size_t t = 0; t < n; t++) {
            fprintf(out, label_fmt, i + 1);
            if (gap[t])
                fprintf(out, ",%ld,NA,\n", first + (long)t);
            else
                fprintf(out, ",%ld,%.0f,%.4g\n", first + (long)t, y[t], effort[t]);
        }
        return TF_OK;
    }
    return tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0, "try another --seed",
                        "population %zu of the scheme drew no usable series", i + 1);
}

/* Checks before drawing anything that output (NULL or "-": standard output) can be written: opens
 * the temporary it would be written through and abandons it, which leaves nothing behind. */
static tf_status probe_output(const char *output, tf_error *err)
{
    if (!output || !strcmp(output, "-"))
        return TF_OK;
    tf_atomic *of = NULL;
    tf_status st = tf_atomic_open(output, NULL, &of, err);
    tf_atomic_abort(of);
    return st;
}

/* Writes the finished survey text: to output, replaced only once complete (write errors are
 * reported by the commit), or to standard output when output is NULL or "-". */
static tf_status write_out(const char *output, const char *text, size_t len, tf_error *err)
{
    if (output && strcmp(output, "-")) {
        tf_atomic *of;
        tf_status st = tf_atomic_open(output, NULL, &of, err);
        if (st != TF_OK)
            return st;
        fwrite(text, 1, len, tf_atomic_stream(of));
        return tf_atomic_commit(of, err);
    }
    if (fwrite(text, 1, len, stdout) != len)
        return tf_error_add(err, TF_ERR_IO, NULL, 0, 0, NULL, "cannot write to standard output");
    return tf_messages_flush(err);
}

/* The whole scheme, made in memory and read back by the importer before anything is written. */
static int write_scheme(size_t n_pop, uint64_t seed, const char *output)
{
    tf_error err;
    tf_error_init(&err);
    char *text = NULL;
    size_t len = 0;
    int status = TF_EXIT_FAIL;
    FILE *mem = open_memstream(&text, &len);
    if (!mem) {
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory writing the survey");
        goto out;
    }
    fprintf(mem, "# An invented monitoring scheme: tallyfit simulate --scheme %zu --seed %llu\n", n_pop,
            (unsigned long long)seed);
    fputs("population,year,count,effort\n", mem);
    tf_status st = TF_OK;
    for (size_t i = 0; i < n_pop && st == TF_OK; i++)
        st = scheme_population(mem, seed, i, "site-%04zu", &err);
    if (fclose(mem) != 0) {
        mem = NULL;
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory writing the survey");
        goto out;
    }
    mem = NULL;
    if (st != TF_OK)
        goto out;
    tf_error check;
    tf_error_init(&check);
    tf_survey *sv = NULL;
    if (tf_survey_parse_batch("simulated scheme", text, len, SCHEME_MAX_ROWS, &sv, &check) != TF_OK ||
        tf_survey_n_rejected(sv) || tf_survey_n_series(sv) != n_pop) {
        tf_error_add(&err, TF_ERR_INVALID, NULL, 0, 0, NULL, "the simulated scheme does not read back: %s",
                     check.n_items ? check.items[0].what : "a population was set aside");
        tf_survey_free(sv);
        goto out;
    }
    tf_survey_free(sv);
    if (write_out(output, text, len, &err) == TF_OK)
        status = TF_EXIT_OK;
out:
    if (status != TF_EXIT_OK)
        tf_error_print(&err, "tallyfit " CMD, stderr);
    if (mem)
        fclose(mem);
    free(text);
    return status;
}

/* A label is written unquoted, so it must not need CSV quoting. */
static int label_ok(const char *s)
{
    if (!*s || strlen(s) > TF_SURVEY_MAX_LABEL || *s == '#')
        return 0;
    for (; *s; s++)
        if (*s == ',' || *s == '"' || *s == '\n' || *s == '\r')
            return 0;
    return 1;
}

int tf_cmd_simulate(int argc, char **argv)
{
    enum { OPT_MODEL = 256, OPT_OBS, OPT_PARAMETER, OPT_YEARS, OPT_START, OPT_FIRST, OPT_SEED, OPT_EFFORT, OPT_LABEL,
           OPT_SCHEME, OPT_REMOVED, OPT_COUNTED };
    static const struct option longopts[] = {
        {"model", required_argument, NULL, OPT_MODEL},
        {"obs", required_argument, NULL, OPT_OBS},
        {"parameter", required_argument, NULL, OPT_PARAMETER},
        {"years", required_argument, NULL, OPT_YEARS},
        {"start", required_argument, NULL, OPT_START},
        {"first-year", required_argument, NULL, OPT_FIRST},
        {"seed", required_argument, NULL, OPT_SEED},
        {"effort", required_argument, NULL, OPT_EFFORT},
        {"label", required_argument, NULL, OPT_LABEL},
        {"scheme", required_argument, NULL, OPT_SCHEME},
        {"removed", required_argument, NULL, OPT_REMOVED},
        {"counted-fraction", required_argument, NULL, OPT_COUNTED},
        {"output", required_argument, NULL, 'o'},
        {"quiet", no_argument, NULL, 'q'},
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
    int have_years = 0, single = 0;
    size_t n_pop = 0;
    tf_model_harvest harvest = {.count = 0, .share = 0, .counted_fraction = 1.0};
    int harvested = 0;

    opterr = 0;
    optind = 0;
    int c;
    while ((c = getopt_long(argc, argv, ":o:qh", longopts, NULL)) != -1) {
        switch (c) {
        case OPT_MODEL: single = 1; growth = optarg; break;
        case OPT_OBS: single = 1; obs = optarg; break;
        case OPT_PARAMETER: single = 1; tf_args_parse_pairs("--parameter", optarg, &set, &err); break;
        case OPT_YEARS:
            /* The importer's limits, so that every file written can be read back. */
            if (tf_args_parse_size("--years", optarg, TF_SURVEY_MIN_SURVEYED, TF_SURVEY_MAX_SPAN, &n_years, &err) ==
                TF_OK)
                have_years = 1;
            break;
        case OPT_START:
            if (tf_args_parse_double("--start", optarg, &start, &err) == TF_OK && !(start > 0))
                tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--start: the first abundance must be > 0");
            break;
        case OPT_FIRST:
            tf_args_parse_long("--first-year", optarg, TF_SURVEY_YEAR_MIN, TF_SURVEY_YEAR_MAX, &first_year, &err);
            break;
        case OPT_SEED: tf_args_parse_seed("--seed", optarg, &seed, &err); break;
        case OPT_EFFORT: single = 1; effort_text = optarg; break;
        case OPT_LABEL: label = optarg; break;
        case OPT_SCHEME: tf_args_parse_size("--scheme", optarg, 1, SCHEME_MAX, &n_pop, &err); break;
        case OPT_REMOVED: single = harvested = 1; parse_removed(optarg, &harvest, &err); break;
        case OPT_COUNTED:
            single = 1;
            tf_input_parse_counted_fraction(optarg, &harvest.counted_fraction, &err);
            break;
        case 'o': output = optarg; break;
        case 'q': break; /* nothing is printed but the survey, the warnings and the errors */
        case 'h': help(stdout); return TF_EXIT_OK;
        default: tf_args_getopt_error(CMD, c, optopt, argv[optind - 1], &err); break;
        }
    }
    if (optind < argc)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "run 'tallyfit simulate --help' for the options",
                     "unexpected argument '%s'", argv[optind]);
    if (n_pop) {
        if ((single || have_years || !isnan(start) || label) && tf_error_status(&err) == TF_OK)
            tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "give --scheme with --seed and -o only",
                         "--scheme draws every population's model and settings itself");
        if (tf_error_status(&err) != TF_OK)
            return tf_messages_usage("tallyfit " CMD, &err);
        tf_status pst = probe_output(output, &err);
        if (pst != TF_OK) {
            tf_error_print(&err, "tallyfit " CMD, stderr);
            return tf_args_exit_code(pst);
        }
        return write_scheme(n_pop, seed, output);
    }
    if (!growth && tf_error_status(&err) == TF_OK)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --model ricker", "--model is required");
    if (!have_years && tf_error_status(&err) == TF_OK)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --years 30", "--years is required");
    if (isnan(start) && tf_error_status(&err) == TF_OK)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --start 500", "--start is required");
    if (have_years && first_year + (long)n_years - 1 > TF_SURVEY_YEAR_MAX)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--years: %zu years from %ld run past the year %d",
                     n_years, first_year, TF_SURVEY_YEAR_MAX);
    /* The first year is --start here; a first-year prior means nothing to a simulation. */
    for (size_t i = 0; i < set.n; i++)
        if (!strcmp(set.items[i].name, TF_ARGS_X1_MEAN) || !strcmp(set.items[i].name, TF_ARGS_X1_SD))
            tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "the first year's abundance is --start N1",
                         "--parameter: %s is the first year's prior, which a simulation does not use",
                         set.items[i].name);
    if (label && !label_ok(label))
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                     "--label: '%s' must have 1 to %d bytes, not start with '#' and contain no comma, quote or "
                     "line break",
                     label, TF_SURVEY_MAX_LABEL);
    if (tf_error_status(&err) != TF_OK)
        return tf_messages_usage("tallyfit " CMD, &err);
    tf_status pst = probe_output(output, &err);
    if (pst != TF_OK) {
        tf_error_print(&err, "tallyfit " CMD, stderr);
        return tf_args_exit_code(pst);
    }

    int status = TF_EXIT_FAIL;
    tf_model *m = NULL;
    double *effort = NULL, *x = NULL, *y = NULL, *removed = NULL;
    FILE *mem = NULL;
    char *text = NULL;
    size_t text_len = 0;
    double theta[TF_MAX_PARAMS];
    if (tf_args_model_at(growth, obs, &set, &m, theta, &err) != TF_OK) {
        status = TF_EXIT_USAGE;
        goto out;
    }
    effort = malloc(n_years * sizeof *effort);
    x = malloc(n_years * sizeof *x);
    y = malloc(n_years * sizeof *y);
    removed = malloc(n_years * sizeof *removed);
    if (!effort || !x || !y || !removed) {
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
    if (tf_model_simulate_harvest(m, theta, log(start), effort, harvested ? &harvest : NULL, n_years, &rng, x, y,
                                  removed, &err) != TF_OK)
        goto out;

    /* The file is made in memory and read back by the importer before anything is written, so
     * that what simulate writes is always a valid survey (counts within the importer's limits,
     * not all zero, ...). */
    mem = open_memstream(&text, &text_len);
    if (!mem) {
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory writing the survey");
        goto out;
    }
    int bad = write_csv(mem, label, first_year, n_years, y, effort, effort_text != NULL, harvested ? removed : NULL,
                        tf_model_obs(m)->needs_integer);
    if (fclose(mem) != 0 || bad) {
        mem = NULL;
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory writing the survey");
        goto out;
    }
    mem = NULL;
    tf_error check;
    tf_error_init(&check);
    tf_survey *sv = NULL;
    /* Values of a continuous counting-error model are estimates, read back as such. */
    tf_survey_options so = {.estimates = !tf_model_obs(m)->needs_integer};
    if (tf_survey_parse_with("simulated survey", text, text_len, &so, &sv, &check) != TF_OK) {
        tf_error_add(&err, TF_ERR_INVALID, NULL, 0, 0, "try other parameters, another --start or another --seed",
                     "the simulated counts do not make a usable survey: %s",
                     check.n_items ? check.items[0].what : "rejected by the importer");
        goto out;
    }
    tf_survey_free(sv);
    if (write_out(output, text, text_len, &err) == TF_OK)
        status = TF_EXIT_OK;
out:
    if (status != TF_EXIT_OK)
        tf_error_print(&err, "tallyfit " CMD, stderr);
    if (mem)
        fclose(mem);
    free(text);
    free(effort);
    free(x);
    free(y);
    free(removed);
    tf_model_free(m);
    return status;
}

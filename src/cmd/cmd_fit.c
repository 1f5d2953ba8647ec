/* `tallyfit fit`: fits one state-space model to each population of a survey by particle MCMC and
 * writes the draws and their summaries as CSV files. */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/ioctl.h>
#include <unistd.h>

#include "cmd/args.h"
#include "cmd/input.h"
#include "cmd/cmd.h"
#include "cmd/fileset.h"
#include "cmd/messages.h"
#include "cmd/setup.h"
#include "cmd/signals.h"
#include "export/csv_out.h"
#include "export/table.h"
#include "model/model.h"
#include "model/prior.h"
#include "sampler/fit.h"
#include "sampler/pmmh.h"
#include "sampler/posterior.h"
#include "survey/survey.h"
#include "tables/fit_tables.h"
#include "util/error.h"

#define CMD "fit"
#define PROG "tallyfit " CMD

static void help(FILE *out)
{
    char growth[256], obs[256];
    tf_model_list_growth(growth, sizeof growth);
    tf_model_list_obs(obs, sizeof obs);
    tf_pmmh_options d = tf_pmmh_default_options();
    fprintf(out,
            "usage: tallyfit fit SURVEY.csv --model M [--obs O] [options]\n\n"
            "Fits a state-space population model to the counts of each population in SURVEY.csv by\n"
            "particle marginal Metropolis-Hastings and writes, per population (the population and\n"
            "the model are columns of every table):\n"
            "  abundance.csv    per year: the count and the posterior of the true abundance\n"
            "  change.csv       average annual change over the survey period, with its interval\n"
            "  parameters.csv   per parameter: mean, sd, 95 %% interval, median, R-hat, bulk and tail ESS\n"
            "  diagnostics.csv  the sampler's health: worst R-hat, smallest ESS, acceptance, checks\n"
            "  chains.csv       per chain: acceptance, particles, the spread of the log-likelihood\n"
            "  draws.csv        every kept draw: chain, draw, log-likelihood, the parameters\n"
            "  paths.csv        with --paths: the latent abundance of every year of every kept draw\n"
            "and prints a short summary.\n\n"
            "options:\n"
            "  --model M          growth model: %s\n"
            "  --obs O            counting error: %s (default poisson;\n"
            "                     lognormal with --estimates)\n"
            TF_INPUT_HELP
            TF_INPUT_EFFORT_HELP
            "  --paths            also write paths.csv (one row per kept draw and year: large)\n"
            "  -o, --output DIR   where to write (default output/<survey name>/, with one\n"
            "                     sub-directory per population when the file has several)\n",
            growth, obs);
    tf_args_quiet_help(out, 21);
    fputs("  -h, --help         show this help\n\nSampler:\n", out);
    tf_args_sampler_help(out, &d, NULL, 21);
    fputs(TF_CMD_HELP_END, out);
}

/* ---- progress display ---- */

typedef struct {
    const char *population;
    const char *model;
    double phase_t0;
    size_t phase_done0;
    tf_pmmh_phase phase;
    int started;
} progress_view;

/* Columns of the terminal on stderr; 80 when unknown. */
static size_t terminal_width(void)
{
    struct winsize ws;
    if (ioctl(STDERR_FILENO, TIOCGWINSZ, &ws) == 0 && ws.ws_col > 0)
        return ws.ws_col;
    return 80;
}

/* One status line, rewritten in place: phase, bar, iterations, acceptance by chain, particles
 * and time left (from the rate of the current phase). Cut to the terminal's width so that it
 * never wraps, which would defeat the carriage return. */
static void show_progress(void *ctx, const tf_pmmh_progress *p)
{
    progress_view *v = ctx;
    size_t done = 0, total = p->total * p->n_chains;
    for (size_t c = 0; c < p->n_chains; c++)
        done += p->done[c];
    if (!v->started || p->phase != v->phase) {
        v->started = 1;
        v->phase = p->phase;
        v->phase_t0 = p->seconds;
        v->phase_done0 = done;
    }
    static const char *const names[] = {"pilot", "tuning", "chains"};
    char bar[21], line[512];
    size_t filled = total ? 20 * done / total : 0;
    for (size_t i = 0; i < 20; i++)
        bar[i] = i < filled ? '#' : '.';
    bar[20] = '\0';
    size_t n = 0;
#define ADD(...)                                                                   \
    do {                                                                           \
        int k_ = snprintf(line + n, sizeof line - n, __VA_ARGS__);                \
        if (k_ > 0)                                                                \
            n = n + (size_t)k_ < sizeof line ? n + (size_t)k_ : sizeof line - 1;   \
    } while (0)
    ADD("%s%s%s %-6s [%s] %zu/%zu", v->population, v->population[0] ? " " : "", v->model, names[p->phase], bar,
        done, total);
    if (p->phase == TF_PMMH_MAIN) {
        ADD("  acc");
        for (size_t c = 0; c < p->n_chains && c < 8; c++)
            if (isnan(p->acceptance[c]))
                ADD(" -");
            else
                ADD(" %.2f", p->acceptance[c]);
        double rate = (double)(done - v->phase_done0) / (p->seconds - v->phase_t0 + 1e-9);
        ADD("  N=%zu", p->n_particles);
        if (done > v->phase_done0 && rate > 0)
            ADD("  %.0f s left", (double)(total - done) / rate);
    }
#undef ADD
    size_t width = terminal_width();
    if (n >= width)
        line[width - 1] = '\0';
    fprintf(stderr, "\r%s\033[K", line);   /* ESC [ K clears the rest of the line */
    fflush(stderr);
}

static void clear_progress(void)
{
    fputs("\r\033[K", stderr);
    fflush(stderr);
}

/* ---- one population ---- */

typedef struct {
    const tf_series *series;
    tf_model *model;
    tf_prior_set *priors;
    tf_posterior *post;
    tf_fit *fit;
    const char *population;   /* its label in the tables */
    char dir[4096];
} job;

static void job_clear(job *j)
{
    tf_fit_free(j->fit);
    tf_posterior_free(j->post);
    tf_prior_set_free(j->priors);
    tf_model_free(j->model);
    memset(j, 0, sizeof *j);
}

#define N_TABLES 7   /* the six fit tables, and paths with --paths */

/* Writes the tables of every population as one group (fileset.h): either every file
 * is replaced or none is, and directories this call made are taken away again on failure. The
 * tables are the fit tables every command writes (tables/fit_tables.h), one file each. */
static tf_status write_all(const job *jobs, size_t n_jobs, const char *survey_path, int paths, tf_error *err)
{
    tf_fileset *g = tf_fileset_new(n_jobs, n_jobs * N_TABLES, err);
    tf_status st = g ? TF_OK : TF_ERR_NOMEM;
    for (size_t i = 0; i < n_jobs && st == TF_OK; i++) {
        const job *j = &jobs[i];
        /* The seconds stay out, so that the files of one seed compare byte for byte whatever the
         * thread count; the summary printed on the terminal gives them. */
        tf_tables_context c = {.population = j->population, .series = j->series, .omit_seconds = 1};
        tf_tables_model m = {.name = tf_model_name(j->model), .fit = j->fit, .probability = NAN, .pareto_k = NAN,
                             .priors = j->priors};
        tf_table *tables[N_TABLES] = {0};
        if ((st = tf_tables_abundance_fit(&c, &m, &tables[0], err)) == TF_OK &&
            (st = tf_tables_change_of(&c, &m, 1, NULL, &tables[1], err)) == TF_OK &&
            (st = tf_tables_parameters(&c, &m, 1, &tables[2], err)) == TF_OK &&
            (st = tf_tables_diagnostics(&c, &m, 1, &tables[3], err)) == TF_OK &&
            (st = tf_tables_chains(&c, &m, 1, &tables[4], err)) == TF_OK)
            st = tf_tables_draws(&c, &m, 1, &tables[5], err);
        if (st == TF_OK && paths)
            st = tf_tables_paths(&c, &m, 1, &tables[6], err);
        size_t n_tables = paths ? N_TABLES : N_TABLES - 1;
        if (st == TF_OK)
            st = tf_fileset_mkdir(g, j->dir, err);
        for (size_t k = 0; k < n_tables && st == TF_OK; k++) {
            char path[4600];
            int n = snprintf(path, sizeof path, "%s/%s.csv", j->dir, tf_table_name(tables[k]));
            if (n < 0 || (size_t)n >= sizeof path) {
                st = tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, "choose a shorter -o directory",
                                  "the output path is too long");
                break;
            }
            FILE *f;
            if ((st = tf_fileset_open(g, path, survey_path, &f, err)) != TF_OK)
                break;
            st = tf_csv_write_stream(tables[k], f, path, err);
        }
        for (size_t k = 0; k < N_TABLES; k++)
            tf_table_free(tables[k]);
    }
    return tf_fileset_finish(g, st, err);
}

static void print_summary(const job *j, FILE *out)
{
    const tf_fit *f = j->fit;
    const tf_fit_settings *st = tf_fit_settings_of(f);
    const char *label = tf_series_label(j->series);
    fprintf(out, "%s%s%s: %zu chains x %zu iterations (after %zu warm-up; %zu draws kept per chain), "
                 "%zu particles (%s proposal), %s method, log-likelihood sd %.2f, %.1f s\n",
            label, label[0] ? " " : "", tf_model_name(j->model), tf_fit_n_chains(f), st->n_iterations,
            st->n_warmup, tf_fit_n_iter(f), st->n_particles, tf_filter_proposal_name(st->proposal), st->correlated ? "correlated" : "standard",
            st->loglik_sd, st->seconds);
    if (st->stopped_early)
        fprintf(out, "  the chains stopped once the convergence checks passed\n");
    fprintf(out, "  %-10s %11s %11s %11s %11s %11s %7s %8s %8s\n", "parameter", "mean", "sd", "2.5%", "median",
            "97.5%", "R-hat", "ESS-bulk", "ESS-tail");
    for (size_t p = 0; p < tf_fit_n_params(f); p++) {
        const tf_fit_param_summary *s = tf_fit_param(f, p);
        fprintf(out, "  %-10s %11.4g %11.4g %11.4g %11.4g %11.4g %7.3f %8.0f %8.0f\n", tf_fit_param_name(f, p),
                s->mean, s->sd, s->q025, s->q50, s->q975, s->rhat, s->ess_bulk, s->ess_tail);
    }
    const tf_fit_year_summary *last = tf_fit_year(f, tf_fit_n_years(f) - 1);
    /* The unit of the tables (tf_tables_unit): per unit of effort only where the effort differs
     * between years. */
    char unit[TF_TABLES_UNIT_SIZE];
    fprintf(out, "  abundance in %d: median %.4g (95%% interval %.4g to %.4g) %s\n", last->year, last->median,
            last->q025, last->q975, tf_tables_unit(j->series, unit, sizeof unit));
    const tf_fit_trend_summary *tr = tf_fit_trend(f);
    if (!isnan(tr->median))
        fprintf(out, "  average change %d-%d: %+.2f%% per year (95%% interval %+.2f%% to %+.2f%%), "
                     "P(decline) = %.3f\n",
                tf_fit_year(f, 0)->year, last->year, 100 * tr->median, 100 * tr->q025, 100 * tr->q975, tr->p_decline);
    fputs("  acceptance by chain:", out);
    for (size_t c = 0; c < tf_fit_n_chains(f); c++)
        fprintf(out, " %.3f", tf_fit_acceptance(f, c));
    fputc('\n', out);
}

/* Plain warnings for draws that should not be trusted yet. */
static void print_warnings(const job *j)
{
    const tf_fit *f = j->fit;
    const char *label = tf_series_label(j->series);
    for (size_t p = 0; p < tf_fit_n_params(f); p++) {
        const tf_fit_param_summary *s = tf_fit_param(f, p);
        if (!(s->rhat <= TF_FIT_RHAT_MAX) || !(s->ess_bulk >= TF_FIT_ESS_MIN) || !(s->ess_tail >= TF_FIT_ESS_MIN))
            fprintf(stderr,
                    PROG ": warning: %s%s%s, %s: R-hat %.3f, bulk ESS %.0f, tail ESS %.0f; the chains may not have "
                         "converged (want R-hat <= %.2f and ESS >= %.0f)\n"
                         "  hint: run longer (--iterations, --warmup) or with more particles\n",
                    label, label[0] ? " " : "", tf_model_name(j->model), tf_fit_param_name(f, p), s->rhat,
                    s->ess_bulk, s->ess_tail, TF_FIT_RHAT_MAX, TF_FIT_ESS_MIN);
    }
    const tf_fit_settings *st = tf_fit_settings_of(f);
    if (!isfinite(st->loglik_sd))
        fprintf(stderr, PROG ": warning: %s: the likelihood estimate was not always finite at the pilot centre\n",
                tf_model_name(j->model));
}

int tf_cmd_fit(int argc, char **argv)
{
    enum { OPT_MODEL = 256, OPT_OBS, OPT_POP, OPT_SKIP, OPT_ESTIMATES, OPT_EFFORT_NAME, OPT_PATHS, OPT_COUNTED };
    static const struct option longopts[] = {
        {"model", required_argument, NULL, OPT_MODEL},
        {"obs", required_argument, NULL, OPT_OBS},
        {"population", required_argument, NULL, OPT_POP},
        {"skip-unusable", no_argument, NULL, OPT_SKIP},
        {"estimates", no_argument, NULL, OPT_ESTIMATES},
        {"counted-fraction", required_argument, NULL, OPT_COUNTED},
        {"effort-name", required_argument, NULL, OPT_EFFORT_NAME},
        {"paths", no_argument, NULL, OPT_PATHS},
        {"output", required_argument, NULL, 'o'},
        TF_ARGS_SAMPLER_LONGOPTS,
        {"quiet", no_argument, NULL, 'q'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    tf_error err;
    tf_error_init(&err);
    const char *growth = NULL, *obs = NULL, *population = NULL, *out_dir = NULL;
    tf_pmmh_options opt = tf_pmmh_default_options();
    opt.n_threads = tf_args_default_threads(TF_ARGS_MAX_THREADS);
    int quiet = 0, paths = 0;
    tf_args_sampler sampler;
    tf_args_sampler_init(&sampler);
    tf_input in = {0};

    opterr = 0;
    optind = 0;
    int c;
    while ((c = getopt_long(argc, argv, ":o:hq", longopts, NULL)) != -1) {
        switch (c) {
        case OPT_MODEL: growth = optarg; break;
        case OPT_OBS: obs = optarg; break;
        case OPT_POP: tf_input_set_population(&in, optarg, &err); break;
        case OPT_SKIP: in.skip_unusable = 1; break;
        case OPT_ESTIMATES: in.estimates = 1; break;
        case OPT_COUNTED: tf_input_set_counted_fraction(&in, optarg, &err); break;
        case OPT_EFFORT_NAME: tf_input_set_effort_name(&in, optarg, &err); break;
        case OPT_PATHS: paths = 1; break;
        case 'o': out_dir = optarg; break;
        case 'q': quiet = 1; break;
        case 'h': help(stdout); return TF_EXIT_OK;
        default:
            if (!tf_args_sampler_option(c, optarg, &sampler, &err))
                tf_args_getopt_error(CMD, c, optopt, argv[optind - 1], &err);
            break;
        }
    }
    const char *path = tf_args_survey_path(argc, argv, optind, &err);
    if (!path)
        tf_args_no_survey(CMD, &err);
    if (tf_error_status(&err) == TF_OK)
        tf_args_sampler_apply(&sampler, &opt, NULL, NULL, NULL, &err);
    if (!growth)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --model ricker", "--model is required");
    else if (strchr(growth, ','))
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "compare several models with 'tallyfit compare --model M,...'",
                     "--model names one model in fit");
    if (tf_error_status(&err) != TF_OK)
        return tf_messages_usage(PROG, &err);

    if (!obs)
        obs = tf_input_default_obs(&in);
    if (tf_args_check_model(growth, obs, &err) != TF_OK || tf_input_check_obs(&in, "--obs", &obs, 1, &err) != TF_OK)
        return tf_messages_usage(PROG, &err);
    population = tf_input_single(&in);

    int status = TF_EXIT_FAIL;
    tf_survey *sv = NULL;
    job *jobs = NULL;
    tf_args_folders folders = {0};
    size_t n_jobs = 0;
    tf_signals saved;
    const volatile sig_atomic_t *interrupted = tf_signals_catch(&saved);

    tf_status rst = tf_input_read(&in, path, stderr, PROG, &sv, &err);
    if (rst != TF_OK) {
        status = rst == TF_ERR_USAGE ? TF_EXIT_USAGE : TF_EXIT_INPUT;
        goto out;
    }
    size_t n_series = tf_survey_n_series(sv);
    const tf_series *only = NULL;
    if (population && !(only = tf_args_pick_series(sv, population, path, &err))) {
        status = TF_EXIT_USAGE;
        goto out;
    }
    n_jobs = only ? 1 : n_series;
    jobs = calloc(n_jobs, sizeof *jobs);
    if (!jobs) {
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
        goto out;
    }
    char base[256];
    tf_args_survey_name(path, base, sizeof base);
    if (tf_args_folders_new(sv, &folders, &err) != TF_OK)
        goto out;

    /* Set every population up before the first long run, so that a bad count in the last
     * population is reported at once. */
    for (size_t i = 0; i < n_jobs; i++) {
        job *j = &jobs[i];
        j->series = only ? only : tf_survey_series(sv, i);
        const char *label = tf_series_label(j->series);
        j->population = tf_tables_population(j->series, base);
        /* The statuses the forecast library gives for the same steps (analysis/forecast.h):
         * counts, first-year prior, priors and posterior that cannot be used are TF_ERR_INVALID. */
        double theta[TF_MAX_PARAMS];
        tf_status sst;
        if ((sst = tf_model_new(growth, obs, &j->model, &err)) != TF_OK ||
            (sst = tf_setup_check_counts(j->model, j->series, path, &err)) != TF_OK ||
            (sst = tf_model_initial_from_series(j->model, j->series, &err)) != TF_OK ||
            (sst = tf_args_bind_model(j->model, &sampler.prior, 0, theta, NULL, &err)) != TF_OK ||
            (sst = tf_setup_priors(j->model, j->series, sampler.prior_file, &j->priors, &err)) != TF_OK ||
            (sst = tf_posterior_new(j->model, j->priors, &j->post, &err)) != TF_OK) {
            status = tf_args_exit_code(sst);
            goto out;
        }
        char folder[300];
        tf_args_folder_of(&folders, label, folder, sizeof folder);
        if (tf_args_output_dir(j->dir, sizeof j->dir, out_dir, base, folder, tf_survey_n_in_file(sv) > 1, &err) !=
            TF_OK) {
            status = TF_EXIT_USAGE;
            goto out;
        }
        tf_status pst = tf_args_probe_output_dir(j->dir, path, &err);
        if (pst != TF_OK) {
            status = tf_args_exit_code(pst);
            goto out;
        }
    }

    int show = !quiet && isatty(STDERR_FILENO);
    for (size_t i = 0; i < n_jobs; i++) {
        job *j = &jobs[i];
        progress_view view = {.population = tf_series_label(j->series), .model = tf_model_name(j->model)};
        tf_status st = tf_pmmh_run(j->post, j->series, &opt, interrupted, show ? show_progress : NULL, &view,
                                   &j->fit, &err);
        if (show)
            clear_progress();
        if (st != TF_OK) {
            status = tf_args_exit_code(st);
            goto out;
        }
    }

    /* Every fit is done: write them all as one group. Signals wait until that is over, so that
     * a late Ctrl-C cannot stop the group half-way through its renames. */
    sigset_t old_mask;
    tf_signals_hold(&old_mask);
    tf_status wst = write_all(jobs, n_jobs, path, paths, &err);
    tf_signals_release(&old_mask);
    if (wst != TF_OK) {
        status = tf_args_exit_code(wst);
        goto out;
    }
    for (size_t i = 0; i < n_jobs; i++) {
        if (!quiet) {
            print_summary(&jobs[i], stdout);
            printf("  files: %s/ (abundance, change, parameters, diagnostics, chains, draws%s .csv)\n", jobs[i].dir,
                   paths ? ", paths" : "");
        }
        print_warnings(&jobs[i]);
    }
    if (tf_messages_flush(&err) != TF_OK)
        goto out;
    status = TF_EXIT_OK;
out:
    tf_signals_restore(&saved);
    tf_messages_outcome(PROG, status, &err, stderr);
    for (size_t i = 0; i < n_jobs && jobs; i++)
        job_clear(&jobs[i]);
    free(jobs);
    tf_args_folders_free(&folders);
    tf_survey_free(sv);
    return status;
}

/* `tallyfit compare`: fits every candidate growth x observation model to each population of a
 * survey, estimates each one's marginal likelihood, and writes and prints the comparison. */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cmd/args.h"
#include "cmd/input.h"
#include "cmd/cmd.h"
#include "cmd/messages.h"
#include "cmd/setup.h"
#include "cmd/signals.h"
#include "compare/compare.h"
#include "compare/pareto.h"
#include "cmd/fileset.h"
#include "export/csv_out.h"
#include "survey/survey.h"
#include "tables/fit_tables.h"
#include "tables/models_table.h"
#include "util/error.h"

#define CMD "compare"
#define PROG "tallyfit " CMD
#define MAX_NAMES TF_COMPARE_MAX_MODELS

static void help(FILE *out)
{
    char growth[256], obs[256];
    tf_model_list_growth(growth, sizeof growth);
    tf_model_list_obs(obs, sizeof obs);
    tf_pmmh_options d = tf_pmmh_default_options();
    tf_evidence_options e = tf_evidence_default_options();
    fprintf(out,
            "usage: tallyfit compare SURVEY.csv [--model M,...] [--obs O,...] [options]\n\n"
            "Fits every candidate model (each growth model with each counting-error model) to the counts\n"
            "of each population, estimates each model's marginal likelihood p(counts | model) by\n"
            "importance sampling squared, and ranks them by Bayes factor and posterior probability.\n"
            "Writes models.csv (one row per candidate, excluded ones with the reason), the fit tables\n"
            "of every fitted candidate (change, parameters, diagnostics, chains and draws .csv, the\n"
            "model a column of each) and prints the table.\n\n"
            "Marginal likelihoods compare only on one scale. For whole counts every count model is\n"
            "compared, and log-normal counting error enters as lognormal-int (the log-normal rounded to\n"
            "whole counts); the continuous log-normal density is listed as excluded. Counts that are not\n"
            "whole numbers (densities, indices) are compared under the continuous log-normal only.\n\n"
            "options:\n"
            "  --model M,...      growth models to compare (default: all of %s)\n"
            "  --obs O,...        counting-error models (default: those of %s that suit the counts)\n"
            TF_INPUT_HELP
            "  -o, --output DIR   where to write (default output/<survey name>/, with one\n"
            "                     sub-directory per population when the file has several)\n",
            growth, obs);
    tf_args_quiet_help(out, 21);
    fputs("  -h, --help         show this help\n\nSampler and marginal likelihood:\n", out);
    tf_args_sampler_help(out, &d, &e, 21);
    fputs(TF_CMD_HELP_END, out);
}

static void show_progress(void *ctx, size_t index, const char *model, tf_compare_event ev, double seconds)
{
    (void)index;
    const char *label = ctx;
    static const char *const what[] = {"fitting", "fitted; estimating its marginal likelihood", "done", "failed"};
    fprintf(stderr, "%s%s%s: %s (%.1f s)\n", label, label[0] ? " " : "", model, what[ev], seconds);
}

static void print_table(const tf_comparison *c, FILE *out)
{
    const tf_series *s = tf_comparison_series(c);
    const char *label = tf_series_label(s);
    size_t n = tf_comparison_n_models(c), n_excl = 0, n_fail = 0;
    for (size_t i = 0; i < n; i++) {
        n_excl += tf_comparison_state(c, i) == TF_CANDIDATE_EXCLUDED;
        n_fail += tf_comparison_state(c, i) == TF_CANDIDATE_FAILED;
    }
    fprintf(out, "%s%s%zu candidate models: %zu fitted, %zu failed, %zu excluded; likelihoods are %s\n", label,
            label[0] ? ": " : "", n, tf_comparison_n_fitted(c), n_fail, n_excl,
            tf_comparison_scale(c) == TF_COMPARE_COUNTS ? "probabilities of whole counts"
                                                        : "densities of continuous amounts");
    fprintf(out, "  %-28s %10s %6s %10s %7s  %-12s %8s %6s %5s %6s %6s\n", "model", "log ML", "se", "check", "2lnB",
            "reading", "P(model)", "se", "k", "R-hat", "ESS");
    size_t order[TF_COMPARE_MAX_MODELS];
    tf_compare_table_order(c, order);
    for (size_t r = 0; r < n; r++) {
        size_t i = order[r];
        if (tf_comparison_state(c, i) != TF_CANDIDATE_FITTED)
            continue;
        const tf_evidence *ev = tf_comparison_evidence(c, i);
        const tf_candidate_figures *f = tf_comparison_figures(c, i);
        const char *reading = i == tf_comparison_best(c) ? "best" : tf_compare_kass_raftery(-2 * f->log_bf);
        /* Shortened to fit the column; the CSV has the full words. */
        if (!strcmp(reading, "not worth more than a bare mention"))
            reading = "bare mention";
        fprintf(out, "  %-28s %10.2f %6.2f %10.2f %7.2f  %-12s %8.3f %6.3f %5.2f %6.3f %6.0f%s\n",
                tf_comparison_name(c, i), ev->main.log_ml, ev->main.se, ev->check.log_ml, 0.0 - 2 * f->log_bf, reading,
                f->prob, f->prob_se, ev->main.pareto_k, f->rhat_max, f->ess_min,
                tf_comparison_note(c, i)[0] ? "  *" : "");
    }
    for (size_t r = 0; r < n; r++) {
        size_t i = order[r];
        tf_candidate_state st = tf_comparison_state(c, i);
        if (st == TF_CANDIDATE_FITTED && tf_comparison_note(c, i)[0])
            fprintf(out, "  * %s: %s\n", tf_comparison_name(c, i), tf_comparison_note(c, i));
        else if (st != TF_CANDIDATE_FITTED)
            fprintf(out, "  %s %s: %s\n", st == TF_CANDIDATE_FAILED ? "failed:  " : "excluded:", tf_comparison_name(c, i),
                    tf_comparison_note(c, i));
    }
    /* The plain-language reading of the best model against the runner-up. */
    if (tf_comparison_n_fitted(c) >= 2) {
        size_t best = tf_comparison_best(c), second = order[1];
        double two = -2 * tf_comparison_figures(c, second)->log_bf, se = 2 * tf_comparison_figures(c, second)->log_bf_se;
        fprintf(out,
                "  %s is favoured over %s with 2 ln B = %.2f (Monte Carlo se %.2f): on the Kass & Raftery (1995)\n"
                "  scale that evidence is %s.\n",
                tf_comparison_name(c, best), tf_comparison_name(c, second), two, se,
                tf_compare_kass_raftery(two));
    }
    fputs("  (log ML: ln p(counts | model) by importance sampling squared; check: the same with a second\n"
          "  importance density; 2lnB: against the best model; P(model): posterior probability with its\n"
          "  delta-method Monte Carlo error; k: Pareto k of the weights, above 0.7 unreliable.)\n",
          out);
}

static void print_warnings(const tf_comparison *c)
{
    const char *label = tf_series_label(tf_comparison_series(c));
    for (size_t i = 0; i < tf_comparison_n_models(c); i++) {
        const tf_evidence *ev = tf_comparison_evidence(c, i);
        if (tf_comparison_state(c, i) == TF_CANDIDATE_FAILED)
            fprintf(stderr, PROG ": warning: %s%s%s: %s\n", label, label[0] ? " " : "", tf_comparison_name(c, i),
                    tf_comparison_note(c, i));
        if (!ev)
            continue;
        if (!(ev->main.pareto_k <= TF_PARETO_K_MAX) || !(ev->check.pareto_k <= TF_PARETO_K_MAX))
            fprintf(stderr,
                    PROG ": warning: %s%s%s: the importance weights have Pareto k %.2f (check %.2f), above %.1f: its "
                         "marginal likelihood is unreliable\n  hint: run the fit longer, or raise --draws\n",
                    label, label[0] ? " " : "", tf_comparison_name(c, i), ev->main.pareto_k, ev->check.pareto_k,
                    TF_PARETO_K_MAX);
        if (!ev->agree)
            fprintf(stderr,
                    PROG ": warning: %s%s%s: the two importance densities disagree (%.2f vs %.2f, %.1f standard "
                         "errors apart)\n  hint: raise --draws, or run the fit longer\n",
                    label, label[0] ? " " : "", tf_comparison_name(c, i), ev->main.log_ml, ev->check.log_ml,
                    fabs(ev->z_diff));
        const tf_candidate_figures *f = tf_comparison_figures(c, i);
        if (!(f->rhat_max <= TF_FIT_RHAT_MAX) || !(f->ess_min >= TF_FIT_ESS_MIN))
            fprintf(stderr,
                    PROG ": warning: %s%s%s: R-hat max %.3f, ESS min %.0f; the chains may not have converged\n"
                         "  hint: run longer (--iterations, --warmup)\n",
                    label, label[0] ? " " : "", tf_comparison_name(c, i), f->rhat_max, f->ess_min);
    }
}

#define N_TABLES 6

/* The comparison's tables: the models table and the fit tables of every command. On failure
 * every entry is NULL. */
static tf_status comparison_tables(const tf_comparison *c, const char *population, tf_table *out[N_TABLES],
                                   tf_error *err)
{
    size_t n = tf_comparison_n_models(c);
    size_t *order = calloc(n ? n : 1, sizeof *order);
    tf_tables_model *m = calloc(n ? n : 1, sizeof *m);
    tf_status st = order && m ? TF_OK : tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    if (st == TF_OK) {
        tf_compare_table_order(c, order);
        for (size_t k = 0; k < n; k++) {
            size_t i = order[k];
            const tf_evidence *ev = tf_comparison_evidence(c, i);
            m[k] = (tf_tables_model){.name = tf_comparison_name(c, i), .fit = tf_comparison_fit(c, i),
                                     .excluded = tf_comparison_state(c, i) == TF_CANDIDATE_EXCLUDED,
                                     .note = tf_comparison_note(c, i),
                                     .probability = ev ? tf_comparison_figures(c, i)->prob : NAN,
                                     .pareto_k = ev ? ev->main.pareto_k : NAN};
        }
    }
    tf_tables_context ctx = {.population = population, .series = tf_comparison_series(c), .omit_seconds = 1};
    if (st == TF_OK && !(out[0] = tf_compare_table(c, population, err)))
        st = tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    if (st == TF_OK && (st = tf_tables_change_of(&ctx, m, n, NULL, &out[1], err)) == TF_OK &&
        (st = tf_tables_parameters(&ctx, m, n, &out[2], err)) == TF_OK &&
        (st = tf_tables_diagnostics(&ctx, m, n, &out[3], err)) == TF_OK &&
        (st = tf_tables_chains(&ctx, m, n, &out[4], err)) == TF_OK)
        st = tf_tables_draws(&ctx, m, n, &out[5], err);
    if (st != TF_OK)
        for (size_t k = 0; k < N_TABLES; k++) {
            tf_table_free(out[k]);
            out[k] = NULL;
        }
    free(order);
    free(m);
    return st;
}

int tf_cmd_compare(int argc, char **argv)
{
    enum { OPT_MODEL = 256, OPT_OBS, OPT_POP, OPT_SKIP, OPT_ESTIMATES, OPT_COUNTED };
    static const struct option longopts[] = {
        {"model", required_argument, NULL, OPT_MODEL},
        {"obs", required_argument, NULL, OPT_OBS},
        {"population", required_argument, NULL, OPT_POP},
        {"skip-unusable", no_argument, NULL, OPT_SKIP},
        {"estimates", no_argument, NULL, OPT_ESTIMATES},
        {"counted-fraction", required_argument, NULL, OPT_COUNTED},
        {"output", required_argument, NULL, 'o'},
        TF_ARGS_SAMPLER_LONGOPTS,
        TF_ARGS_ML_LONGOPTS,
        {"quiet", no_argument, NULL, 'q'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    tf_error err;
    tf_error_init(&err);
    tf_compare_options opt = tf_compare_default_options();
    opt.n_threads = tf_args_default_threads(TF_ARGS_MAX_THREADS);
    const char *population = NULL, *out_dir = NULL;
    char growth_buf[1024], obs_buf[1024];
    const char *growth[MAX_NAMES], *obs[MAX_NAMES];
    uint64_t seed = opt.fit.seed;
    int quiet = 0;
    tf_args_sampler sampler;
    tf_args_sampler_init(&sampler);
    tf_input in = {0};

    opterr = 0;
    optind = 0;
    int c;
    while ((c = getopt_long(argc, argv, ":o:hq", longopts, NULL)) != -1) {
        switch (c) {
        case OPT_MODEL:
            tf_args_split_names("--model", optarg, growth_buf, sizeof growth_buf, growth, MAX_NAMES, &opt.n_growth,
                                &err);
            break;
        case OPT_OBS:
            tf_args_split_names("--obs", optarg, obs_buf, sizeof obs_buf, obs, MAX_NAMES, &opt.n_obs, &err);
            break;
        case OPT_POP: tf_input_set_population(&in, optarg, &err); break;
        case OPT_SKIP: in.skip_unusable = 1; break;
        case OPT_ESTIMATES: in.estimates = 1; break;
        case OPT_COUNTED: tf_input_set_counted_fraction(&in, optarg, &err); break;
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
    if (tf_error_status(&err) == TF_OK) {
        tf_args_sampler_apply(&sampler, &opt.fit, &opt.evidence, &seed, &opt.n_threads, &err);
    }
    /* Mistyped model names are usage errors, found before a large file is read. */
    char known[256];
    for (size_t i = 0; i < opt.n_growth; i++)
        if (!tf_model_find_growth(growth[i])) {
            tf_model_list_growth(known, sizeof known);
            tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "unknown growth model '%s' (known: %s)", growth[i], known);
        }
    for (size_t i = 0; i < opt.n_obs; i++)
        if (!tf_model_find_obs(obs[i])) {
            tf_model_list_obs(known, sizeof known);
            tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "unknown observation model '%s' (known: %s)", obs[i],
                         known);
        }
    tf_input_check_obs(&in, "--obs", obs, opt.n_obs, &err);
    const char *wnames[TF_ARGS_MAX_PAIRS];
    double wvals[TF_ARGS_MAX_PAIRS];
    if (tf_error_status(&err) == TF_OK)
        tf_args_sampler_weights(&sampler, growth, opt.n_growth, obs, opt.n_obs, wnames, wvals, &opt.n_weights, &err);
    if (tf_error_status(&err) != TF_OK)
        return tf_messages_usage(PROG, &err);
    population = tf_input_single(&in);
    /* Estimates are compared on the one continuous scale, whatever their values. */
    if (in.estimates && !opt.n_obs)
        opt.n_obs = tf_input_continuous_obs(obs, MAX_NAMES);
    opt.growth = growth;
    opt.obs = obs;
    opt.weight_names = wnames;
    opt.weights = wvals;
    opt.fit.seed = opt.evidence.seed = seed;
    tf_setup_user user;
    tf_args_sampler_user(&sampler, &user);
    opt.priors = tf_setup_user_priors;
    opt.priors_ctx = &user;

    int status = TF_EXIT_FAIL;
    tf_survey *sv = NULL;
    tf_comparison **comps = NULL;
    tf_args_folders folders = {0};
    char (*written)[4600] = NULL;   /* the file written per population */
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
    if (population && !(only = tf_survey_find(sv, population))) {
        tf_error_add(&err, TF_ERR_USAGE, path, 0, 0, "run 'tallyfit check' on the file to list its populations",
                     "no population named '%s'", population);
        status = TF_EXIT_USAGE;
        goto out;
    }
    n_jobs = only ? 1 : n_series;
    comps = calloc(n_jobs, sizeof *comps);
    written = calloc(n_jobs, sizeof *written);
    if (!comps || !written) {
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
        goto out;
    }
    /* The model files of every candidate are read now, not when each candidate's turn comes. */
    tf_status cst = tf_setup_check_candidates(&user, opt.growth, opt.n_growth, opt.obs, opt.n_obs,
                                              only ? only : tf_survey_series(sv, 0), &err);
    for (size_t i = 0; i < n_jobs && cst == TF_OK; i++)
        cst = tf_setup_check_any_suits(opt.obs, opt.n_obs, only ? only : tf_survey_series(sv, i), path, &err);
    if (cst != TF_OK) {
        status = tf_args_exit_code(cst);
        goto out;
    }
    char base[256];
    tf_args_survey_name(path, base, sizeof base);
    if (tf_args_folders_new(sv, &folders, &err) != TF_OK)
        goto out;
    /* As in every command: a survey of several populations gives each its folder, also when
     * only one is chosen. */
    int several = tf_survey_n_in_file(sv) > 1;
    /* Every output folder is checked before the first fit. */
    for (size_t i = 0; i < n_jobs; i++) {
        const tf_series *s = only ? only : tf_survey_series(sv, i);
        char dir[4096], folder[300];
        tf_args_folder_of(&folders, tf_series_label(s), folder, sizeof folder);
        if (tf_args_output_dir(dir, sizeof dir, out_dir, base, folder, several, &err) != TF_OK) {
            status = TF_EXIT_USAGE;
            goto out;
        }
        tf_status pst = tf_args_probe_output_dir(dir, path, &err);
        if (pst != TF_OK) {
            status = tf_args_exit_code(pst);
            goto out;
        }
    }
    int show = !quiet && isatty(STDERR_FILENO);
    for (size_t i = 0; i < n_jobs; i++) {
        const tf_series *s = only ? only : tf_survey_series(sv, i);
        opt.progress = show ? show_progress : NULL;
        opt.progress_ctx = (void *)tf_series_label(s);
        tf_status st = tf_compare_run(s, &opt, interrupted, &comps[i], &err);
        if (st != TF_OK) {
            if (tf_series_label(s)[0])
                tf_error_add(&err, st, path, 0, 0, NULL, "(population '%s')", tf_series_label(s));
            status = tf_args_exit_code(st);
            goto out;
        }
    }

    /* Signals wait until the files are written, and the files of every population are one
     * group (fileset.h): all of them are replaced or none. */
    sigset_t old_mask;
    tf_signals_hold(&old_mask);
    tf_status wst = TF_OK;
    tf_fileset *g = tf_fileset_new(n_jobs, n_jobs * N_TABLES, &err);
    if (!g)
        wst = TF_ERR_NOMEM;
    for (size_t i = 0; i < n_jobs && wst == TF_OK; i++) {
        const tf_series *s = tf_comparison_series(comps[i]);
        char dir[4096], folder[300];
        tf_args_folder_of(&folders, tf_series_label(s), folder, sizeof folder);
        if ((wst = tf_args_output_dir(dir, sizeof dir, out_dir, base, folder, several, &err)) != TF_OK)
            break;
        snprintf(written[i], sizeof written[i], "%s", dir);
        tf_table *tables[N_TABLES] = {0};
        wst = comparison_tables(comps[i], tf_tables_population(s, base), tables, &err);
        if (wst == TF_OK)
            wst = tf_fileset_mkdir(g, dir, &err);
        for (size_t k = 0; k < N_TABLES && wst == TF_OK; k++) {
            char file[4600];
            int n = snprintf(file, sizeof file, "%s/%s.csv", dir, tf_table_name(tables[k]));
            if (n < 0 || (size_t)n >= sizeof file) {
                wst = tf_error_add(&err, TF_ERR_RANGE, NULL, 0, 0, "choose a shorter -o directory",
                                   "the output path is too long");
                break;
            }
            FILE *f;
            if ((wst = tf_fileset_open(g, file, path, &f, &err)) == TF_OK)
                wst = tf_csv_write_stream(tables[k], f, file, &err);
        }
        for (size_t k = 0; k < N_TABLES; k++)
            tf_table_free(tables[k]);
    }
    if (g)
        wst = tf_fileset_finish(g, wst, &err);
    tf_signals_release(&old_mask);
    if (wst != TF_OK) {
        status = tf_args_exit_code(wst);
        goto out;
    }
    for (size_t i = 0; i < n_jobs; i++) {
        if (!quiet) {
            print_table(comps[i], stdout);
            printf("  files: %s/ (models, change, parameters, diagnostics, chains, draws .csv)\n", written[i]);
        }
        print_warnings(comps[i]);
    }
    if (tf_messages_flush(&err) != TF_OK)
        goto out;
    status = TF_EXIT_OK;
out:
    tf_signals_restore(&saved);
    tf_messages_outcome(PROG, status, &err, stderr);
    for (size_t i = 0; i < n_jobs && comps; i++)
        tf_comparison_free(comps[i]);
    free(comps);
    free(written);
    tf_args_folders_free(&folders);
    tf_survey_free(sv);
    return status;
}

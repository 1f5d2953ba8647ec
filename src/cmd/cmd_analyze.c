/* `tallyfit analyze`: the main job. Validates a survey, fits and compares the candidate models
 * of each population, projects with model averaging, and writes a workbook with CSV twins of
 * every table; prints where the files are and a few plain lines per population. */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <unistd.h>

#include "analysis/analysis.h"
#include "analysis/provenance.h"
#include "batch/batch.h"
#include "batch/batch_mpi.h"
#include "analysis/wording.h"
#include "cmd/alternatives.h"
#include "cmd/args.h"
#include "cmd/input.h"
#include "cmd/cmd.h"
#include "cmd/messages.h"
#include "cmd/setup.h"
#include "cmd/signals.h"
#include "export/atomic.h"
#include "export/report.h"
#include "model/model_file.h"
#include "project/cautions.h"
#include "survey/survey.h"
#include "tables/analysis_tables.h"
#include "tables/fit_tables.h"
#include "tables/populations_table.h"
#include "util/error.h"
#include "util/path.h"

#define CMD "analyze"
#define PROG "tallyfit " CMD
#define DEFAULT_DIR "output"
/* Limits that only guard memory and time against typos. */
#define MAX_RUNS 10000000
/* Above this many populations analyze runs as a batch: one workbook with nine sheets per
 * population stops being readable, and holding every population's fits until the end (some
 * 20 MB each at the default settings) stops fitting in memory. */
#define BATCH_AUTO 25
/* Data rows a batch file may hold: 5000 populations of 60 years, within the importer's byte limit. */
#define BATCH_MAX_ROWS 300000

static void help(FILE *out, const tf_analysis_options *d)
{
    char growth[256], obs[256];
    tf_model_list_growth(growth, sizeof growth);
    tf_model_list_obs(obs, sizeof obs);
    fprintf(out,
            "usage: tallyfit analyze SURVEY.csv [-o DIR] [--threshold LIST] [--years H] [options]\n\n"
            "The main job: checks the survey, fits each candidate state-space model to the counts of\n"
            "every population by particle MCMC, compares the models by marginal likelihood, projects\n"
            "the population forward averaging the models by their posterior probabilities, and writes\n"
            "  DIR/<survey>.xlsx   a workbook: a first page for managers (abundance, trend, best model,\n"
            "                      risk of falling below each threshold, cautions, provenance), one\n"
            "                      row per population, then per population abundance, projection,\n"
            "                      risk, declines, models, change, parameters, diagnostics and chains,\n"
            "                      with charts\n"
            "  DIR/*.csv           the same tables as CSV files (summary.csv, populations.csv; each\n"
            "                      population's tables in DIR/<population>/ when the survey holds\n"
            "                      several), the raw posterior draws (draws.csv; in the workbook too\n"
            "                      with --workbook-draws), and contents.csv naming every file\n"
            "and prints a few plain lines per population. Files are written only when everything\n"
            "succeeded, and never over the survey file.\n\n"
            "options:\n"
            "  -o, --output DIR   folder for the results (default %s/<survey>)\n"
            "  --threshold LIST   quasi-extinction thresholds: animals, or percentages of the current\n"
            "                     abundance, e.g. 50,100 or 20%% (default 50%%,20%%,10%%)\n"
            "  --years H          years to project (default %zu)\n"
            "  --decline-window Y also report declines over Y whole years (e.g. three generations,\n"
            "                     rounded); declines over 10 years are always reported\n"
            TF_INPUT_HELP
            TF_INPUT_EFFORT_HELP
            "  --model M,...      growth models to compare (default exponential,ricker,gompertz; 'all'\n"
            "                     for every one of %s)\n"
            "  --obs O,...        counting-error models (default poisson,negbin for whole counts,\n"
            "                     lognormal otherwise; 'all' for every one of %s that suits)\n"
            "  --runs R           simulated futures (default: at least %d)\n"
            "  --batch            analyse the populations as a batch even when there are few (see below)\n"
            "  --fresh            in batch mode: discard the results of an earlier batch in the folder\n"
            "                     that was made with other settings, instead of refusing to run\n"
            "  --workbook-limit N in batch mode: a workbook per population when the batch has at most N\n"
            "                     populations (default %d); the CSV tables are always written\n"
            "  --workbook-draws   put the raw posterior draws in the workbook too (also the batch's\n"
            "                     workbooks per population); by default they are CSV only, since a\n"
            "                     sheet of every draw makes the workbook slow to open\n"
            "  --scenario 'LABEL:key=value,...'\n"
            "                     also project a management scenario from the same draws with the same\n"
            "                     random numbers (repeat for more): remove=N animals a year or\n"
            "                     remove=P%% of the population, add=N released, growth=D added to the\n"
            "                     yearly log growth, capacity=F times the carrying capacity (models\n"
            "                     with one; choose them with --model), from=YEAR (default the first\n"
            "                     projected year). Sheets scenarios, scenario differences and declines;\n"
            "                     the status quo continues the mean net removal of the last %d survey\n"
            "                     years when the survey records removals\n"
            "  --safe-removal RISK,YEARS[,count|share]\n"
            "                     the largest constant yearly removal (animals, or a share) keeping the\n"
            "                     chance of reaching the first --threshold within YEARS at or below\n"
            "                     RISK, with its Monte Carlo error: a model-based figure, not a quota\n",
            DEFAULT_DIR, d->project.horizon, growth, obs, TF_PROJECT_DEFAULT_RUNS, TF_BATCH_WORKBOOK_LIMIT,
            TF_SCENARIO_STATUS_QUO_YEARS);
    tf_args_quiet_help(out, 21);
    fputs("  -h, --help         show this help\n\nSampler and marginal likelihood:\n", out);
    tf_args_sampler_help(out, &d->fit, &d->evidence, 21);
    fputs("\nPrior sensitivity (marginal likelihoods depend on how wide the priors are; the\n"
          "prior-sensitivity table and a line on the first page):\n", out);
    tf_alternatives_help(out, 21);
    fprintf(out,
            "  (--threads: with MPI, 1 per process by default; a batch analyses T populations at a time)\n\n"
            "Batch mode (--batch, more than %d populations, or several MPI processes): the populations\n"
            "are shared among the threads (one population each at a time) or the MPI processes, and\n"
            "each one's tables are written as it finishes into DIR/<population>/, ending with a\n"
            "marker file; DIR/<survey>.xlsx, DIR/summary.csv and DIR/populations.csv then\n"
            "hold one row per population (failed ones with their reason). A population whose rows are\n"
            "invalid is set aside and reported; the others are analysed. An interrupted batch\n"
            "continues where it stopped when the same command is run again. A batch ends with status 1\n"
            "when some populations failed (the summary says why), with 2 in a folder made with other\n"
            "settings, and with 130 when interrupted (run it again to go on).\n"
            TF_CMD_HELP_END,
            BATCH_AUTO);
}

/* The plain lines on one population. */
static void print_population(const tf_analysis *a, size_t i, const char *title, FILE *out)
{
    const tf_analysis_pop *p = tf_analysis_population(a, i);
    const tf_series *s = tf_analysis_pop_series(p);
    const char *label = tf_series_label(s);
    size_t n = tf_series_n_years(s);
    const tf_analysis_year *last = tf_analysis_pop_year(p, n - 1);
    size_t g = tf_analysis_pop_best_growth(p);
    char text[2048];
    fprintf(out, "%s\n", label[0] ? label : title);
    /* Three significant digits, whole animals from 100 up. */
    const char *fmt = last->q025 >= 100 ? "%.0f" : "%.3g";
    char med[32], lo[32], hi[32];
    snprintf(med, sizeof med, fmt, last->median);
    snprintf(lo, sizeof lo, fmt, last->q025);
    snprintf(hi, sizeof hi, fmt, last->q975);
    char per[TF_TABLES_UNIT_SIZE];
    fprintf(out, "  abundance in %d: about %s %s (95 %% interval %s to %s)\n", last->year, med,
            tf_tables_per_effort(s) ? tf_tables_per_what(s, per, sizeof per) : "animals", lo, hi);
    fprintf(out, "  best-supported growth model: %s (probability %.2f)\n", tf_analysis_pop_growth(p, g)->label,
            tf_analysis_pop_growth_probability(p, g));
    tf_analysis_tables_sentences(a, i, text, sizeof text);
    /* Wrapped at spaces to about 92 columns for the terminal. */
    const char *q = text;
    while (*q) {
        size_t len = strlen(q), cut = len;
        if (len > 90) {
            cut = 90;
            while (cut > 0 && q[cut] != ' ')
                cut--;
            if (cut == 0)
                cut = len;
        }
        fprintf(out, "  %.*s\n", (int)cut, q);
        q += cut;
        while (*q == ' ')
            q++;
    }
    if (!tf_populations_all_converged(p))
        fprintf(out, "  caution: some fits did not pass the convergence checks; see the diagnostics sheet\n");
    char range[768], caution[512], unit[TF_TABLES_UNIT_SIZE];
    tf_wording_prior_sensitivity(p, tf_tables_unit(tf_analysis_pop_series(p), unit, sizeof unit), range, sizeof range,
                                 caution, sizeof caution);
    if (caution[0])
        fprintf(out, "  caution: %s\n", caution);
}

/* ---- batch mode ---- */

/* Hashes of the model files the priors come from, the priors the user set (--prior-file, by
 * its hash, and --prior) and the prior model weights (--model-weights), as lines of the batch's
 * settings record: an edited prior changes the numbers, so a batch must not continue across it. */
static void model_file_lines(const tf_analysis_options *o, const tf_setup_user *user, char *buf, size_t size)
{
    size_t used = 0;
    const char *names[TF_ANALYSIS_MAX_NAMES + 64];
    size_t n = 0;
    if (o->n_growth)
        for (size_t i = 0; i < o->n_growth; i++)
            names[n++] = o->growth[i];
    else
        for (size_t i = 0; i < tf_model_n_growth() && n < TF_ANALYSIS_MAX_NAMES; i++)
            names[n++] = tf_model_growth_at(i)->name;
    names[n++] = "observation";
    buf[0] = '\0';
    for (size_t i = 0; i < n; i++) {
        char file[128], path[4096], hex[TF_PROVENANCE_HASH_BUF];
        snprintf(file, sizeof file, "%s.ini", names[i]);
        if (tf_model_file_locate(file, path, sizeof path, NULL) != TF_OK ||
            tf_provenance_hash_file(path, hex, NULL) != TF_OK)
            snprintf(hex, sizeof hex, "missing");
        int w = snprintf(buf + used, size - used, "model-file %s %s\n", file, hex);
        if (w < 0 || (size_t)w >= size - used)
            break;
        used += (size_t)w;
    }
    /* Written only when given, so that the records of batches without them stay the same. */
    if (user->prior_file && used < size) {
        char hex[TF_PROVENANCE_HASH_BUF];
        if (tf_provenance_hash_file(user->prior_file, hex, NULL) != TF_OK)
            snprintf(hex, sizeof hex, "missing");
        int w = snprintf(buf + used, size - used, "prior-file %s\n", hex);
        used += w > 0 ? (size_t)w : 0;
    }
    if (!isnan(user->x1_mean) && used < size) {
        int w = snprintf(buf + used, size - used, "prior x1_mean=%.17g\n", user->x1_mean);
        used += w > 0 ? (size_t)w : 0;
    }
    if (!isnan(user->x1_sd) && used < size) {
        int w = snprintf(buf + used, size - used, "prior x1_sd=%.17g\n", user->x1_sd);
        used += w > 0 ? (size_t)w : 0;
    }
    for (size_t i = 0; i < o->n_weights && used < size; i++) {
        int w = snprintf(buf + used, size - used, "model-weights %s=%.17g\n", o->weight_names[i], o->weights[i]);
        used += w > 0 ? (size_t)w : 0;
    }
    /* The prior sensitivity changes the tables written: recorded when it differs from the default,
     * each folder of priors by the hashes of its files (an edited file changes the numbers). */
    if ((!o->prior_sensitivity || !o->prior_refit) && used < size) {
        int w = snprintf(buf + used, size - used, "prior-sensitivity %s%s\n", o->prior_sensitivity ? "on" : "off",
                         o->prior_refit ? "" : ", refit off");
        used += w > 0 ? (size_t)w : 0;
    }
    for (size_t i = 0; i < o->n_prior_alternatives && used < size; i++) {
        const char *dir = o->prior_alternatives[i].ctx;
        for (size_t k = 0; k < n && used < size; k++) {
            char path[4200], hex[TF_PROVENANCE_HASH_BUF];
            snprintf(path, sizeof path, "%s/%s.ini", dir, names[k]);
            if (tf_provenance_hash_file(path, hex, NULL) != TF_OK)
                continue;
            int w = snprintf(buf + used, size - used, "prior-alternative %s %s.ini %s\n",
                             o->prior_alternatives[i].label, names[k], hex);
            used += w > 0 ? (size_t)w : 0;
        }
    }
}

typedef struct {
    int quiet;
} batch_show;

/* One line per settled population on stderr: a batch runs for hours, often under a scheduler
 * that keeps stderr as its log. */
static void show_batch(void *ctx, const tf_batch_event *e)
{
    const batch_show *s = ctx;
    if (s->quiet || !e->finished)
        return;
    const char *label = e->label[0] ? e->label : "(unnamed)";
    if (e->state == TF_BATCH_DONE)
        fprintf(stderr, "[%zu/%zu] %s: done in %.0f s\n", e->n_settled, e->n_populations, label, e->seconds);
    else
        fprintf(stderr, "[%zu/%zu] %s: %s: %s\n", e->n_settled, e->n_populations, label, tf_batch_state_name(e->state),
                e->reason);
}

/* The batch: every rank runs this; only rank 0 prints and writes the summary. Returns the exit
 * code, the same on every rank. */
static int run_batch(const tf_survey *sv, const tf_analysis_options *opt, const char *path, const char *name,
                     const char *xlsx, const char *root, size_t workbook_limit, int workbook_draws, int fresh,
                     int quiet, int rank, int size, tf_error *err)
{
    char extra[4096];
    model_file_lines(opt, opt->priors_ctx, extra, sizeof extra);
    /* The effort's name changes words, not numbers, but a resumed batch must not mix units in its
     * combined table; written only when given, as the model-file lines are. */
    const char *effort_name = tf_survey_n_series(sv) ? tf_series_effort_name(tf_survey_series(sv, 0)) : "";
    size_t used = strlen(extra);
    if (effort_name[0] && used < sizeof extra)
        snprintf(extra + used, sizeof extra - used, "effort-name %s\n", effort_name);
    tf_batch_options bo = {.analysis = *opt, .survey_path = path, .title = name, .root = root, .workbook = xlsx,
                           .workbook_limit = workbook_limit, .workbook_draws = workbook_draws,
                           .extra_settings = extra, .fresh = fresh};
    tf_batch *b = NULL;
    tf_status st = tf_batch_new(sv, &bo, &b, err);
    /* Rank 0 alone looks at the folder; every rank learns whether all are ready. */
    if (st == TF_OK && rank == 0)
        st = tf_batch_prepare(b, err);
    int code = tf_batch_mpi_max(st == TF_OK ? TF_EXIT_OK : tf_args_exit_code(st), size);
    if (code != TF_EXIT_OK) {
        if (st == TF_OK)
            tf_error_add(err, TF_ERR_IO, NULL, 0, 0, "see the messages of the other processes",
                         "another MPI process could not set up the batch");
        tf_batch_free(b);
        return code;
    }
    batch_show show = {.quiet = quiet || rank != 0};
    size_t n = tf_batch_n_populations(b);
    if (rank == 0 && !quiet) {
        fprintf(stderr, "%s: batch of %zu populations", PROG, n);
        if (tf_batch_n_resumed(b))
            fprintf(stderr, ", %zu settled by an earlier run", tf_batch_n_resumed(b));
        if (size > 1)
            fprintf(stderr, ", on %d MPI processes (1 manager, %d workers)\n", size, size - 1);
        else
            fprintf(stderr, ", %zu at a time\n", opt->n_threads < tf_batch_n_todo(b) ? opt->n_threads : tf_batch_n_todo(b));
    }
    if (size > 1)
        st = tf_batch_run_mpi(b, rank, size, opt->n_threads, tf_signals_flag(), show_batch, &show, err);
    else
        st = tf_batch_run_threads(b, opt->n_threads, tf_signals_flag(), show_batch, &show, err);
    if (rank == 0) {
        tf_error werr;
        tf_error_init(&werr);
        /* The summary is written also after an interruption: its Status column then says which
         * populations are still to do. */
        tf_status ws = st == TF_OK || st == TF_ERR_INTERRUPTED ? tf_batch_write_summary(b, NULL, &werr) : TF_OK;
        if (st != TF_OK && st != TF_ERR_INTERRUPTED) {
            code = tf_args_exit_code(st);
        } else if (ws != TF_OK) {
            *err = werr;
            code = tf_args_exit_code(ws);
        } else if (st == TF_ERR_INTERRUPTED) {
            fprintf(stderr, "%s: interrupted with %zu of %zu populations settled; the same command continues\n",
                    PROG, n - tf_batch_count(b, TF_BATCH_PENDING), n);
            code = TF_EXIT_INTERRUPTED;
        } else {
            size_t n_failed = tf_batch_count(b, TF_BATCH_FAILED), n_bad = tf_batch_count(b, TF_BATCH_BAD_DATA);
            if (!quiet) {
                printf("batch: %zu populations: %zu done, %zu failed, %zu with bad data\n", n,
                       tf_batch_count(b, TF_BATCH_DONE), n_failed, n_bad);
                size_t shown = 0;
                for (size_t i = 0; i < n; i++) {
                    tf_batch_state s = tf_batch_state_of(b, i);
                    if (s == TF_BATCH_DONE)
                        continue;
                    if (++shown > 20) {
                        printf("  ... and %zu more; see the summary\n", n_failed + n_bad - 20);
                        break;
                    }
                    printf("  %s: %s: %s\n", tf_batch_label(b, i), tf_batch_state_name(s), tf_batch_reason(b, i));
                }
                for (size_t i = 0; i < tf_project_n_cautions(); i++)
                    printf("caution: %s\n", tf_project_caution(i));
                printf("summary:  %s\ntables:   %s/%s (one row per population)\n"
                       "          %s/<population>/ (each population's tables)\n",
                       xlsx, root, TF_BATCH_SUMMARY_CSV, root);
            }
            if (tf_messages_flush(err) != TF_OK) {
                code = TF_EXIT_FAIL;
            } else if (n_failed + n_bad) {
                code = TF_EXIT_FAIL;
                tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, "the summary gives each one's reason",
                             "%zu of %zu populations could not be analysed", n_failed + n_bad, n);
            }
        }
    }
    tf_batch_free(b);
    return tf_batch_mpi_share(code, size);
}

static int analyze(int argc, char **argv, int rank, int size)
{
    enum { OPT_THRESHOLD = 256, OPT_YEARS, OPT_WINDOW, OPT_POP, OPT_MODEL, OPT_OBS, OPT_RUNS, OPT_BATCH, OPT_FRESH,
           OPT_WB_LIMIT, OPT_WB_DRAWS, OPT_SKIP, OPT_ESTIMATES, OPT_SCENARIO, OPT_SAFE, OPT_COUNTED, OPT_EFFORT_NAME };
    static const struct option longopts[] = {
        {"output", required_argument, NULL, 'o'},
        {"threshold", required_argument, NULL, OPT_THRESHOLD},
        {"years", required_argument, NULL, OPT_YEARS},
        {"decline-window", required_argument, NULL, OPT_WINDOW},
        {"population", required_argument, NULL, OPT_POP},
        {"skip-unusable", no_argument, NULL, OPT_SKIP},
        {"estimates", no_argument, NULL, OPT_ESTIMATES},
        {"counted-fraction", required_argument, NULL, OPT_COUNTED},
        {"effort-name", required_argument, NULL, OPT_EFFORT_NAME},
        {"model", required_argument, NULL, OPT_MODEL},
        {"obs", required_argument, NULL, OPT_OBS},
        TF_ARGS_SAMPLER_LONGOPTS,
        TF_ARGS_ML_LONGOPTS,
        TF_ALTERNATIVES_LONGOPTS,
        {"runs", required_argument, NULL, OPT_RUNS},
        {"batch", no_argument, NULL, OPT_BATCH},
        {"fresh", no_argument, NULL, OPT_FRESH},
        {"workbook-limit", required_argument, NULL, OPT_WB_LIMIT},
        {"workbook-draws", no_argument, NULL, OPT_WB_DRAWS},
        {"scenario", required_argument, NULL, OPT_SCENARIO},
        {"safe-removal", required_argument, NULL, OPT_SAFE},
        {"quiet", no_argument, NULL, 'q'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    tf_error err;
    tf_error_init(&err);
    tf_analysis_options opt;
    if (tf_analysis_options_init(&opt, &err) != TF_OK) {
        tf_error_print(&err, PROG, stderr);
        return TF_EXIT_FAIL;
    }
    opt.n_threads = tf_args_default_threads(TF_ARGS_MAX_THREADS);
    /* Under MPI one process per core is the rule: each takes one thread unless told otherwise. */
    if (size > 1)
        opt.n_threads = 1;
    int batch = size > 1, fresh = 0, workbook_draws = 0;
    size_t workbook_limit = TF_BATCH_WORKBOOK_LIMIT;
    /* Only rank 0 of an MPI run prints; the others would repeat every line. */
    FILE *errs = rank == 0 ? stderr : NULL;
    const char *out_dir = NULL;
    char growth_buf[1024], obs_buf[1024];
    tf_args_sampler sampler;
    tf_args_sampler_init(&sampler);
    tf_alternatives alts;
    tf_alternatives_init(&alts);
    int quiet = 0;
    tf_input in = {0};
    tf_scenario scenarios[TF_SCENARIO_MAX];

    opterr = 0;
    optind = 0;
    int c;
    while ((c = getopt_long(argc, argv, ":o:qh", longopts, NULL)) != -1) {
        int all = 0;
        switch (c) {
        case 'o': out_dir = optarg; break;
        case OPT_THRESHOLD:
            /* The parser names what is wrong with the list; one mistake, one error. */
            tf_project_parse_thresholds(optarg, opt.project.thresholds, TF_PROJECT_MAX_THRESHOLDS,
                                        &opt.project.n_thresholds, &err);
            break;
        case OPT_YEARS:
            tf_args_parse_size("--years", optarg, 1, TF_PROJECT_MAX_HORIZON, &opt.project.horizon, &err);
            break;
        case OPT_WINDOW:
            tf_args_parse_size("--decline-window", optarg, 1, TF_PROJECT_MAX_HORIZON, &opt.project.decline_window,
                               &err);
            break;
        case OPT_POP: tf_input_set_population(&in, optarg, &err); break;
        case OPT_SKIP: in.skip_unusable = 1; break;
        case OPT_ESTIMATES: in.estimates = 1; break;
        case OPT_COUNTED: tf_input_set_counted_fraction(&in, optarg, &err); break;
        case OPT_EFFORT_NAME: tf_input_set_effort_name(&in, optarg, &err); break;
        case OPT_MODEL:
            tf_args_model_names("--model", optarg, growth_buf, sizeof growth_buf, opt.growth, TF_ANALYSIS_MAX_NAMES,
                                &opt.n_growth, &all, 1, &err);
            break;
        case OPT_OBS:
            tf_args_model_names("--obs", optarg, obs_buf, sizeof obs_buf, opt.obs, TF_ANALYSIS_MAX_NAMES, &opt.n_obs,
                                &opt.obs_auto, 0, &err);
            break;
        case OPT_RUNS: tf_args_parse_size("--runs", optarg, 1, MAX_RUNS, &opt.project.n_runs, &err); break;
        case OPT_BATCH: batch = 1; break;
        case OPT_FRESH: fresh = 1; break;
        case OPT_WB_LIMIT: tf_args_parse_size("--workbook-limit", optarg, 0, SIZE_MAX, &workbook_limit, &err); break;
        case OPT_WB_DRAWS: workbook_draws = 1; break;
        case OPT_SCENARIO:
            if (opt.n_scenarios == TF_SCENARIO_MAX)
                tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--scenario: more than %d scenarios",
                             TF_SCENARIO_MAX);
            else if (tf_scenario_parse(optarg, &scenarios[opt.n_scenarios], &err) == TF_OK)
                opt.n_scenarios++;
            break;
        case OPT_SAFE:
            if (opt.safe.years > 0)
                tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "give --safe-removal once", TF_SAFE_REMOVAL_TWICE);
            else
                tf_safe_removal_parse(optarg, &opt.safe, &err);
            break;
        case 'q': quiet = 1; break;
        case 'h':
            if (rank == 0)
                help(stdout, &opt);
            return TF_EXIT_OK;
        default:
            if (!tf_args_sampler_option(c, optarg, &sampler, &err) && !tf_alternatives_option(c, optarg, &alts, &err))
                tf_args_getopt_error(CMD, c, optopt, argv[optind - 1], &err);
            break;
        }
    }
    const char *path = tf_args_survey_path(argc, argv, optind, &err);
    if (!path && tf_error_status(&err) == TF_OK)
        tf_args_no_survey(CMD, &err);
    if (tf_error_status(&err) == TF_OK) {
        tf_args_sampler_apply(&sampler, &opt.fit, &opt.evidence, &opt.seed, &opt.n_threads, &err);
    }
    if (path && !strcmp(path, "-"))
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "save the survey to a file first",
                     "analyze needs a survey file: its name names the results and its hash is recorded");
    tf_input_check_obs(&in, "--obs", opt.obs, opt.n_obs, &err);
    const char *wnames[TF_ARGS_MAX_PAIRS];
    double wvals[TF_ARGS_MAX_PAIRS];
    if (tf_error_status(&err) == TF_OK)
        tf_args_sampler_weights(&sampler, opt.growth, opt.n_growth, opt.obs, opt.obs_auto ? 0 : opt.n_obs, wnames,
                                wvals, &opt.n_weights, &err);
    opt.weight_names = wnames;
    opt.weights = wvals;
    opt.scenarios = scenarios;
    /* Labels and capacities need no survey: refused before the survey is read. */
    if (tf_error_status(&err) == TF_OK && opt.n_scenarios)
        tf_analysis_check_management(NULL, NULL, &opt, &err);
    opt.estimates = in.estimates;
    opt.counted_fraction = tf_input_counted_fraction(&in);
    opt.population = tf_input_single(&in);
    if (in.n_labels && batch && tf_error_status(&err) == TF_OK)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "drop --population to run the batch, or --batch for one population",
                     "--population analyses one population, which is not a batch");
    if (tf_error_status(&err) != TF_OK) {
        if (errs)
            tf_error_print(&err, PROG, errs);
        return TF_EXIT_USAGE;
    }
    /* The folders of alternative priors are read before anything long. */
    tf_status ast = tf_alternatives_check(&alts, &err);
    if (ast != TF_OK) {
        if (errs)
            tf_error_print(&err, PROG, errs);
        return tf_args_exit_code(ast);
    }
    opt.prior_sensitivity = alts.sensitivity;
    opt.prior_refit = alts.refit;
    opt.prior_alternatives = alts.alt;
    opt.n_prior_alternatives = alts.n;
    tf_setup_user user;
    tf_args_sampler_user(&sampler, &user);
    opt.priors = tf_setup_user_priors;
    opt.priors_ctx = &user;

    /* -o names the folder that receives the results, as in every command. */
    char name[256], xlsx[4096], csv_dir[4096];
    tf_args_survey_name(path, name, sizeof name);
    int k2 = out_dir ? snprintf(csv_dir, sizeof csv_dir, "%s", out_dir)
                     : snprintf(csv_dir, sizeof csv_dir, "%s/%s", DEFAULT_DIR, name);
    out_dir = csv_dir;
    int k1 = snprintf(xlsx, sizeof xlsx, "%s/%s.xlsx", csv_dir, name);
    if (k1 < 0 || (size_t)k1 >= sizeof xlsx || k2 < 0 || (size_t)k2 >= sizeof csv_dir) {
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "choose a shorter -o folder", "the output path is too long");
        if (errs)
            tf_error_print(&err, PROG, errs);
        return TF_EXIT_USAGE;
    }

    int status = TF_EXIT_FAIL, in_batch = 0;
    tf_survey *sv = NULL;
    tf_analysis *a = NULL;
    tf_report *r = NULL;
    tf_signals saved;
    const volatile sig_atomic_t *interrupted = tf_signals_catch(&saved);

    char **folders = NULL;
    size_t n_folders = 0;
    tf_analysis_tables_provenance prov = {.input_name = path, .title = name, .workbook_draws = workbook_draws,
                                 .csv_place = "the folder of this workbook"};
    tf_status st;
    /* A survey of many populations is read so that a population with bad rows is set aside and
     * reported while the others are analysed; a small one without --batch keeps the strict
     * reading, which refuses the whole file. */
    /* Nothing long starts before the output folder is known to be usable. */
    if ((st = tf_args_probe_output_dir_keep(out_dir, path, size > 1, &err)) != TF_OK) {
        status = tf_args_exit_code(st);
        goto out;
    }
    if (!in.n_labels) {
        tf_survey_options so = {.batch = 1, .max_rows = BATCH_MAX_ROWS, .estimates = in.estimates,
                                .effort_name = in.effort_name};
        if ((st = tf_survey_read_with(path, &so, &sv, &err)) != TF_OK ||
            (st = tf_input_prepare(&in, sv, path, errs, PROG, &err)) != TF_OK) {
            status = TF_EXIT_INPUT;
            goto out;
        }
        /* The model files of every candidate are read now, not when each one's turn comes. */
        if (tf_survey_n_series(sv) &&
            (st = tf_setup_check_candidates(&user, opt.growth, opt.n_growth, opt.obs, opt.n_obs, tf_survey_series(sv, 0),
                                            &err)) != TF_OK) {
            status = tf_args_exit_code(st);
            goto out;
        }
        if ((st = tf_analysis_check_management(sv, NULL, &opt, &err)) != TF_OK) {
            status = tf_args_exit_code(st);
            goto out;
        }
        if (batch || tf_survey_n_series(sv) + tf_survey_n_rejected(sv) > BATCH_AUTO) {
            struct stat info;
            if (stat(csv_dir, &info) == 0 && !S_ISDIR(info.st_mode)) {
                tf_error_add(&err, TF_ERR_IO, csv_dir, 0, 0, "move the file away or choose another -o folder",
                             "the folder for the batch is taken by a file");
                goto out;
            }
            in_batch = 1;
            status = run_batch(sv, &opt, path, name, xlsx, csv_dir, workbook_limit, workbook_draws, fresh, quiet, rank,
                               size, &err);
            goto out;
        }
        tf_survey_free(sv);
        sv = NULL;
    }
    if ((st = tf_input_read(&in, path, errs, PROG, &sv, &err)) != TF_OK) {
        status = st == TF_ERR_USAGE ? TF_EXIT_USAGE : TF_EXIT_INPUT;
        goto out;
    }
    if ((st = tf_setup_check_candidates(&user, opt.growth, opt.n_growth, opt.obs, opt.n_obs, tf_survey_series(sv, 0), &err)) !=
            TF_OK ||
        (st = tf_analysis_check_management(sv, opt.population ? tf_survey_find(sv, opt.population) : NULL, &opt,
                                           &err)) != TF_OK) {
        status = tf_args_exit_code(st);
        goto out;
    }
    /* Populations left out on request are named on the first page (with one chosen, the others
     * are simply not part of the run). */
    if (in.skip_unusable && in.n_labels != 1)
        prov.left_out_from = sv;
    /* A population that no candidate suits is refused now, not after the others were fitted. */
    for (size_t i = 0; i < tf_survey_n_series(sv); i++) {
        const tf_series *s = tf_survey_series(sv, i);
        const char *names[TF_ANALYSIS_MAX_NAMES];
        if (opt.population && strcmp(tf_series_label(s), opt.population))
            continue;
        size_t n = tf_analysis_candidate_obs(&opt, s, names, TF_ANALYSIS_MAX_NAMES);
        if ((st = tf_setup_check_any_suits(names, n, s, path, &err)) != TF_OK) {
            status = tf_args_exit_code(st);
            goto out;
        }
    }
    /* Counts to check are named now, before the long part; the first page lists them too. They
     * are warnings, which --quiet keeps. */
    if (errs)
        tf_input_warn_outliers(sv, opt.population, path, PROG, errs);
    /* Before the long part: refuse a workbook that would land on the survey, and a file where
     * the CSV folder goes. */
    struct stat info;
    if ((st = tf_atomic_check_target(xlsx, path, &err)) != TF_OK) {
        status = tf_args_exit_code(st);
        goto out;
    }
    if (stat(csv_dir, &info) == 0 && !S_ISDIR(info.st_mode)) {
        tf_error_add(&err, TF_ERR_IO, csv_dir, 0, 0, "move the file away or choose another -o folder",
                     "the folder for the CSV tables is taken by a file");
        goto out;
    }
    if ((st = tf_provenance_hash_file(path, prov.sha256, &err)) != TF_OK)
        goto out;
    tf_provenance_format_date(tf_provenance_now(), prov.date);
    /* Without --quiet the time of each model is shown: with the whole progress on a terminal, as
     * one plain line per model otherwise (a log of `analyze ... 2>log`). */
    tf_analysis_progress_fn show =
        quiet ? NULL : isatty(STDERR_FILENO) ? tf_messages_analysis : tf_messages_analysis_plain;
    if ((st = tf_analysis_run(sv, &opt, interrupted, show, name, &a, &err)) != TF_OK) {
        status = tf_args_exit_code(st);
        goto out;
    }
    /* A survey of several populations gives each its folder, also when only some are analysed,
     * so that leaving some out does not move the others' tables. */
    if (tf_survey_n_in_file(sv) > 1) {
        n_folders = tf_analysis_n_populations(a);
        folders = calloc(n_folders, sizeof *folders);
        tf_args_folders all = {0};
        int ok = folders != NULL && tf_args_folders_new(sv, &all, NULL) == TF_OK;
        for (size_t i = 0; ok && i < n_folders; i++) {
            char folder[300];
            tf_args_folder_of(&all, tf_series_label(tf_analysis_pop_series(tf_analysis_population(a, i))), folder,
                              sizeof folder);
            ok = (folders[i] = strdup(folder)) != NULL;
        }
        tf_args_folders_free(&all);
        if (!ok) {
            tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
            goto out;
        }
        prov.folders = (const char *const *)folders;
    }
    if (!(r = tf_report_new(&err)) || (st = tf_analysis_tables_build(a, &prov, r, &err)) != TF_OK)
        goto out;
    if ((st = tf_report_write(r, xlsx, csv_dir, path, interrupted, &err)) != TF_OK) {
        status = tf_args_exit_code(st);
        goto out;
    }
    if (!quiet) {
        for (size_t i = 0; i < tf_analysis_n_populations(a); i++)
            print_population(a, i, name, stdout);
        /* Every caution, not a pick: the first says what "model-based" means, the others whose
         * judgement decides. */
        for (size_t i = 0; i < tf_project_n_cautions(); i++)
            printf("caution: %s\n", tf_project_caution(i));
        printf("workbook: %s\ntables:   %s/ (%zu CSV files, listed in %s)\n", xlsx, csv_dir, tf_report_n_tables(r),
               TF_REPORT_CONTENTS_CSV);
    }
    if (tf_messages_flush(&err) != TF_OK)
        goto out;
    status = TF_EXIT_OK;
out:
    tf_signals_restore(&saved);
    /* Only rank 0 prints; an interrupted batch has said how far it got. */
    if (errs && !(status == TF_EXIT_INTERRUPTED && in_batch))
        tf_messages_outcome(PROG, status, &err, errs);
    for (size_t i = 0; folders && i < n_folders; i++)
        free(folders[i]);
    free(folders);
    tf_report_free(r);
    tf_analysis_free(a);
    tf_survey_free(sv);
    return status;
}

int tf_cmd_analyze(int argc, char **argv)
{
    int rank = 0, size = 1;
    tf_error err;
    tf_error_init(&err);
    if (tf_batch_mpi_start(&argc, &argv, &rank, &size, &err) != TF_OK) {
        tf_error_print(&err, PROG, stderr);
        return TF_EXIT_FAIL;
    }
    int code = analyze(argc, argv, rank, size);
    tf_batch_mpi_end();
    return code;
}

/* `tallyfit forecast`: projects a population forward and reports quasi-extinction risk and the
 * chance of decline. For now from fixed parameter values (--fixed) and a start (--start or the
 * survey's last count); projection from a fitted posterior arrives with the sampler. */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cmd/args.h"
#include "cmd/cmd.h"
#include "export/atomic.h"
#include "export/csv_out.h"
#include "export/projection_tables.h"
#include "model/model.h"
#include "project/cautions.h"
#include "project/project.h"
#include "survey/survey.h"
#include "util/rng.h"

#define CMD "forecast"
#define PROG "tallyfit " CMD
#define DEFAULT_THRESHOLDS "50%,20%,10%"
#define DEFAULT_SEED 1u
/* Limit on --runs: far more than any Monte Carlo error needs, and within tf_project_run's. */
#define MAX_RUNS 10000000u

static const char usage_text[] =
    "usage: tallyfit forecast [SURVEY.csv] --fixed NAME=VALUE,... [--start N] [options]\n"
    "\n"
    "Simulates the population forward and reports the abundance bands, the risk of falling to or\n"
    "below a threshold (quasi-extinction) and the chance of decline, each with its Monte Carlo error.\n"
    "\n"
    "  --fixed r=..,sigma=..[,K=..]  project from these parameter values (growth parameters and the\n"
    "                          process-noise sd sigma, natural scale)\n"
    "  --start N               current abundance; without it, the last surveyed count / effort\n"
    "                          of SURVEY.csv\n"
    "  --model M               growth model (default: the one whose parameters --fixed names)\n"
    "  --obs O                 counting-error model; its parameters in --fixed are ignored\n"
    "  --population LABEL      which population of a survey that holds several\n"
    "  --years H               years to project (default 50)\n"
    "  --threshold LIST        abundances or percentages of the current abundance, e.g. 50,100,20%\n"
    "                          (default " DEFAULT_THRESHOLDS ")\n"
    "  --decline-window Y      also report declines over Y whole years (e.g. three generations,\n"
    "                          rounded); declines over 10 years are always reported\n"
    "  --runs R                simulated futures (default 4000)\n"
    "  --seed S                random seed (default 1); the same seed gives the same numbers\n"
    "  -o, --output DIR        folder for the CSV tables (default output/<survey name>/, or\n"
    "                          output/forecast/ without a survey)\n"
    "  -q, --quiet             print only the cautions\n"
    "  --average               average over fitted models (needs the sampler; not yet available)\n"
    "  -h, --help              this text\n"
    "\n"
    "Exit status: 0 done, 1 the job could not be done, 2 bad command line, 3 unusable survey,\n"
    "130 interrupted.\n";

/* Set by the SIGINT/SIGTERM handler and polled between steps: a signal handler can only
 * communicate through a global of this type (C11 7.14.1.1), so this is the one piece of global
 * state the command keeps. */
static volatile sig_atomic_t interrupted;
static void on_signal(int sig)
{
    (void)sig;
    interrupted = 1;
}

typedef struct {
    const char *survey_path;
    const char *model, *obs, *population, *out_dir;
    const char *thresholds;
    int average, quiet, have_fixed;
    tf_arg_pairs fixed;
    size_t years, runs, decline_window;
    double start;
    uint64_t seed;
} options;

/* Prints the messages in err; returns TF_EXIT_USAGE. */
static int usage_fail(const tf_error *err)
{
    tf_error_print(err, PROG, stderr);
    return TF_EXIT_USAGE;
}

/* ---- fixed parameters --------------------------------------------------------------------------- */

static int growth_has(const tf_growth_type *g, const char *name)
{
    for (size_t j = 0; j < g->n_params; j++)
        if (!strcmp(g->param_names[j], name))
            return 1;
    return 0;
}

static int obs_has(const tf_obs_type *o, const char *name)
{
    for (size_t j = 0; o && j < o->n_params; j++)
        if (!strcmp(o->param_names[j], name))
            return 1;
    return 0;
}

/* "exponential (r, sigma), ricker (r, K, sigma), ..." for hints; as many models as fit. */
static void growth_models_with_params(char *buf, size_t size)
{
    size_t used = 0;
    buf[0] = '\0';
    for (size_t i = 0; i < tf_model_n_growth(); i++) {
        const tf_growth_type *g = tf_model_growth_at(i);
        char item[96];
        size_t n = (size_t)snprintf(item, sizeof item, "%s (", g->name);
        for (size_t j = 0; j < g->n_params && n < sizeof item; j++)
            n += (size_t)snprintf(item + n, sizeof item - n, "%s, ", g->param_names[j]);
        if (n < sizeof item)
            snprintf(item + n, sizeof item - n, "sigma)");
        if (used + strlen(item) + 3 > size)
            break;
        used += (size_t)snprintf(buf + used, size - used, "%s%s", i ? ", " : "", item);
    }
}

/* The growth model the fixed values describe: --model if given, else the only model whose drift
 * parameters are exactly the names given (besides sigma and counting-error parameters). */
static const tf_growth_type *pick_growth(const options *o, const tf_obs_type *obs, tf_error *err)
{
    char known[256], hint[300];
    growth_models_with_params(known, sizeof known);
    snprintf(hint, sizeof hint, "known models: %s", known);
    if (o->model) {
        const tf_growth_type *g = tf_model_find_growth(o->model);
        if (!g)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "unknown growth model '%s'", o->model);
        return g;
    }
    const tf_arg_pairs *nv = &o->fixed;
    size_t n_drift = 0;
    for (size_t i = 0; i < nv->n; i++)
        n_drift += strcmp(nv->items[i].name, "sigma") && !obs_has(obs, nv->items[i].name);
    const tf_growth_type *found = NULL;
    size_t n_match = 0;
    for (size_t i = 0; i < tf_model_n_growth(); i++) {
        const tf_growth_type *g = tf_model_growth_at(i);
        int all = g->n_params == n_drift;
        for (size_t j = 0; all && j < nv->n; j++)
            if (strcmp(nv->items[j].name, "sigma") && !obs_has(obs, nv->items[j].name))
                all = growth_has(g, nv->items[j].name);
        if (all && n_match++ == 0)
            found = g;
    }
    if (n_match == 1)
        return found;
    snprintf(hint, sizeof hint, "choose one with --model; known models: %s", known);
    tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s growth model takes exactly the parameters given to --fixed",
                 n_match ? "more than one" : "no");
    return NULL;
}

/* Places the --fixed values into theta in m's order (drift parameters, sigma, counting error).
 * Every drift parameter and sigma must be given; counting-error values do not enter a
 * projection and are kept only as given (NAN where not). sigma = 0 is allowed: a projection
 * without noise. */
static tf_status fixed_theta(const tf_model *m, const tf_arg_pairs *nv, double *theta, int quiet, tf_error *err)
{
    const tf_growth_type *g = tf_model_growth(m);
    size_t n_params = tf_model_n_params(m), i_sigma = tf_model_sigma_index(m);
    unsigned char given[TF_MAX_PARAMS] = {0};
    for (size_t k = 0; k < n_params; k++)
        theta[k] = NAN;
    tf_status st = TF_OK;
    char takes[160] = "";
    for (size_t j = 0, used = 0; j < g->n_params && used < sizeof takes; j++)
        used += (size_t)snprintf(takes + used, sizeof takes - used, "%s, ", g->param_names[j]);
    for (size_t i = 0; i < nv->n; i++) {
        int k = tf_model_param_index(m, nv->items[i].name);
        if (k < 0) {
            char hint[200];
            snprintf(hint, sizeof hint, "it takes %sand sigma", takes);
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "the %s model has no parameter '%s'", g->name,
                              nv->items[i].name);
            continue;
        }
        theta[k] = nv->items[i].value;
        given[k] = 1;
        if ((size_t)k > i_sigma && !quiet)
            printf("note: %s (counting error) does not enter a projection; ignored\n", nv->items[i].name);
    }
    for (size_t k = 0; k <= i_sigma; k++) {
        const char *name = tf_model_param_name(m, k);
        if (!given[k]) {
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--fixed does not give %s, which the %s model needs",
                              name, g->name);
        } else if (k < i_sigma && !(theta[k] > g->lower[k] && theta[k] < g->upper[k])) {
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--fixed %s = %g is outside the %s model's range (%g, %g)",
                              name, theta[k], g->name, g->lower[k], g->upper[k]);
        } else if (k == i_sigma && !(theta[k] >= 0)) {
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "0 projects without noise",
                              "--fixed sigma = %g must be 0 or more", theta[k]);
        }
    }
    return st;
}

/* ---- the output folder -------------------------------------------------------------------------- */

/* A survey or population name made safe for a folder name. */
static void safe_name(const char *in, char *out, size_t size)
{
    size_t n = 0;
    for (; *in && n + 1 < size; in++) {
        unsigned char c = (unsigned char)*in;
        int ok = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '-' || c == '_' ||
                 (c == '.' && n > 0);
        out[n++] = ok ? (char)c : '_';
    }
    out[n] = '\0';
    if (n == 0)
        snprintf(out, size, "forecast");
}

static void survey_stem(const char *path, char *out, size_t size)
{
    const char *base = strrchr(path, '/');
    base = base ? base + 1 : path;
    char stem[256];
    snprintf(stem, sizeof stem, "%s", base);
    char *dot = strrchr(stem, '.');
    if (dot && dot != stem)
        *dot = '\0';
    safe_name(stem, out, size);
}

/* ---- printing ------------------------------------------------------------------------------------ */

/* Prints text as an indented paragraph wrapped at about 78 columns. */
static void print_wrapped(FILE *out, const char *first, const char *text)
{
    const size_t width = 78;
    size_t indent = strlen(first), col = indent;
    fputs(first, out);
    while (*text) {
        size_t word = strcspn(text, " ");
        if (col > indent && col + 1 + word > width) {
            fprintf(out, "\n%*s", (int)indent, "");
            col = indent;
        } else if (col > indent) {
            fputc(' ', out);
            col++;
        }
        fwrite(text, 1, word, out);
        col += word;
        text += word;
        text += strspn(text, " ");
    }
    fputc('\n', out);
}

static void print_cautions(FILE *out)
{
    fputs("\nCautions:\n", out);
    for (size_t i = 0; i < tf_project_n_cautions(); i++)
        print_wrapped(out, "  - ", tf_project_caution(i));
    print_wrapped(out, "  - ", tf_project_caution_fixed());
}

static void print_summary(const tf_projection *p, const tf_growth_type *g, const double *theta, double start,
                          int year0, uint64_t seed, const char *dir, tf_table *const *tables)
{
    size_t H = tf_projection_horizon(p);
    printf("Forecast from fixed parameters, growth model %s:", g->name);
    for (size_t j = 0; j <= g->n_params; j++)
        printf("%s %s = %g", j ? "," : "", j < g->n_params ? g->param_names[j] : "sigma", theta[j]);
    printf("\n  start N = %g%s; %zu simulated futures, %zu years ahead, seed %llu\n", start,
           year0 == TF_PROJECTION_NO_YEAR ? "" : " in the last survey year", tf_projection_n_runs(p), H,
           (unsigned long long)seed);
    size_t step = H <= 100 ? 10 : (H + 9) / 10;
    printf("\nAbundance (median and 90 %% band of the simulated futures)\n   year      median        5 %%       95 %%\n");
    for (size_t t = 0;; t = t + step < H ? t + step : H) {
        printf("  %5zu  %10.4g %10.4g %10.4g\n", t, tf_projection_band(p, t, TF_BAND_MEDIAN),
               tf_projection_band(p, t, TF_BAND_P05), tf_projection_band(p, t, TF_BAND_P95));
        if (t == H)
            break;
    }

    size_t at[4], n_at = 0;
    static const size_t marks[] = {10, 20, 50};
    for (size_t i = 0; i < 3; i++)
        if (marks[i] < H)
            at[n_at++] = marks[i];
    at[n_at++] = H;
    printf("\nQuasi-extinction: chance of having been at or below the threshold\n  threshold ");
    for (size_t i = 0; i < n_at; i++) {
        char head[32];
        snprintf(head, sizeof head, "by year %zu", at[i]);
        printf("  %15s", head);
    }
    printf("   median time\n");
    for (size_t k = 0; k < tf_projection_n_thresholds(p); k++) {
        tf_threshold th = tf_projection_threshold(p, k);
        char label[48], cell[48];
        printf("  %-10s", tf_project_threshold_label(&th, label, sizeof label));
        for (size_t i = 0; i < n_at; i++) {
            snprintf(cell, sizeof cell, "%.3f +- %.3f", tf_projection_risk(p, k, at[i]), tf_projection_risk_se(p, k, at[i]));
            printf("  %15s", cell);
        }
        double mt = tf_projection_median_time(p, k);
        if (isnan(mt))
            printf("   not reached\n");
        else
            printf("   year %.0f\n", mt);
    }

    printf("\nDecline from the current abundance (chance that N after the window <= (1 - decline) N now)\n"
           "  window  ");
    for (size_t d = 0; d < tf_projection_n_declines(p); d++) {
        char head[32];
        snprintf(head, sizeof head, ">= %.0f %%", 100 * tf_projection_decline(p, d));
        printf("  %15s", head);
    }
    putchar('\n');
    for (size_t w = 0; w < tf_projection_n_windows(p); w++) {
        printf("  %3zu years", tf_projection_window(p, w));
        for (size_t d = 0; d < tf_projection_n_declines(p); d++) {
            char cell[48];
            snprintf(cell, sizeof cell, "%.3f +- %.3f", tf_projection_decline_prob(p, w, d),
                     tf_projection_decline_se(p, w, d));
            printf("  %15s", cell);
        }
        putchar('\n');
    }
    printf("\nTables in %s:", dir);
    for (size_t i = 0; i < TF_PROJECTION_N_TABLES; i++) {
        char name[128];
        tf_csv_file_name(tf_table_name(tables[i]), name, sizeof name);
        printf("%s %s", i ? "," : "", name);
    }
    putchar('\n');
}

/* ---- the command --------------------------------------------------------------------------------- */

enum { OPT_MODEL = 256, OPT_OBS, OPT_AVERAGE, OPT_YEARS, OPT_THRESHOLD, OPT_WINDOW, OPT_RUNS, OPT_FIXED,
       OPT_START, OPT_SEED, OPT_POPULATION };

/* Fills o from the command line, collecting every problem in err. Returns 1 when --help was
 * shown (nothing else to do), else 0; the caller checks err. */
static int parse_options(int argc, char **argv, options *o, tf_error *err)
{
    static const struct option longs[] = {
        {"model", required_argument, NULL, OPT_MODEL},
        {"obs", required_argument, NULL, OPT_OBS},
        {"average", no_argument, NULL, OPT_AVERAGE},
        {"years", required_argument, NULL, OPT_YEARS},
        {"threshold", required_argument, NULL, OPT_THRESHOLD},
        {"decline-window", required_argument, NULL, OPT_WINDOW},
        {"runs", required_argument, NULL, OPT_RUNS},
        {"fixed", required_argument, NULL, OPT_FIXED},
        {"start", required_argument, NULL, OPT_START},
        {"seed", required_argument, NULL, OPT_SEED},
        {"population", required_argument, NULL, OPT_POPULATION},
        {"output", required_argument, NULL, 'o'},
        {"quiet", no_argument, NULL, 'q'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    memset(o, 0, sizeof *o);
    tf_args_pairs_init(&o->fixed);
    o->years = TF_PROJECT_DEFAULT_HORIZON;
    o->runs = TF_PROJECT_DEFAULT_RUNS;
    o->thresholds = DEFAULT_THRESHOLDS;
    o->start = NAN;
    o->seed = DEFAULT_SEED;
    opterr = 0;
    optind = 0; /* glibc: 0 restarts the scan, so the command can be run twice in one process */
    int c;
    while ((c = getopt_long(argc, argv, ":o:qh", longs, NULL)) != -1) {
        switch (c) {
        case OPT_MODEL: o->model = optarg; break;
        case OPT_OBS: o->obs = optarg; break;
        case OPT_AVERAGE: o->average = 1; break;
        case OPT_THRESHOLD: o->thresholds = optarg; break;
        case OPT_FIXED:
            o->have_fixed = 1;
            tf_args_parse_pairs("--fixed", optarg, &o->fixed, err);
            break;
        case OPT_POPULATION: o->population = optarg; break;
        case 'o': o->out_dir = optarg; break;
        case 'q': o->quiet = 1; break;
        case 'h': fputs(usage_text, stdout); return 1;
        case OPT_YEARS: tf_args_parse_size("--years", optarg, 1, TF_PROJECT_MAX_HORIZON, &o->years, err); break;
        case OPT_WINDOW:
            tf_args_parse_size("--decline-window", optarg, 1, TF_PROJECT_MAX_HORIZON, &o->decline_window, err);
            break;
        case OPT_RUNS: tf_args_parse_size("--runs", optarg, 1, MAX_RUNS, &o->runs, err); break;
        case OPT_START:
            if (tf_args_parse_double("--start", optarg, &o->start, err) == TF_OK && !(o->start > 0))
                tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--start: the current abundance must be > 0");
            break;
        case OPT_SEED: tf_args_parse_seed("--seed", optarg, &o->seed, err); break;
        default: tf_args_getopt_error(CMD, c, optopt, argv[optind - 1], err); break;
        }
    }
    if (optind < argc)
        o->survey_path = argv[optind++];
    if (optind < argc)
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give one survey file", "unexpected argument '%s'", argv[optind]);
    return 0;
}

/* The starting abundance from the survey (or --start), the calendar year of t = 0 and the label. */
static int survey_start(const options *o, const tf_survey *sv, double *start, int *year0, const char **label)
{
    tf_error err;
    tf_error_init(&err);
    const tf_series *s = tf_args_pick_series(sv, o->population, o->survey_path, &err);
    if (!s)
        return usage_fail(&err);
    /* Year 0 is the last year with a count: rows listed after it without one add nothing to start
     * from. */
    const double *counts = tf_series_counts(s);
    size_t last = tf_series_n_years(s);
    while (last > 0 && isnan(counts[last - 1]))
        last--;
    *label = tf_series_label(s);
    if (last == 0) {
        fprintf(stderr, PROG ": population '%s' has no surveyed count to start from\n  hint: give the current"
                        " abundance with --start N\n", *label);
        return TF_EXIT_FAIL;
    }
    last--;
    *year0 = tf_series_first_year(s) + (int)last;
    if (!isnan(o->start)) {
        *start = o->start;
        return TF_EXIT_OK;
    }
    double y = counts[last], e = tf_series_effort(s)[last];
    if (!(y > 0)) {
        fprintf(stderr, PROG ": the last surveyed count (%d) is 0, and a projection on the log scale cannot"
                        " start from zero\n  hint: give the current abundance with --start N\n", *year0);
        return TF_EXIT_FAIL;
    }
    *start = y / e;
    if (!o->quiet)
        printf("Starting from the last surveyed count: %g in %d (effort %g), N = %g; --start N starts elsewhere\n", y,
               *year0, e, *start);
    return TF_EXIT_OK;
}

/* Runs the projection, writes the tables and prints the summary; returns the exit code. */
static int project_and_write(const options *o, const tf_project_options *po, const tf_model *m,
                             const double *theta, const tf_survey *sv, double start, int year0, const char *label)
{
    int rc = TF_EXIT_OK;
    tf_error err;
    tf_error_init(&err);
    char dir[4096];
    if (o->out_dir) {
        /* A cut name would be another folder: refuse it instead. */
        if (strlen(o->out_dir) >= sizeof dir) {
            fprintf(stderr, PROG ": the output folder name is longer than %zu bytes\n  hint: choose a shorter -o DIR\n",
                    sizeof dir - 1);
            return TF_EXIT_USAGE;
        }
        snprintf(dir, sizeof dir, "%s", o->out_dir);
    } else if (sv) {
        char stem[256], pop[256];
        survey_stem(o->survey_path, stem, sizeof stem);
        safe_name(label, pop, sizeof pop);
        if (tf_survey_n_series(sv) > 1)
            snprintf(dir, sizeof dir, "output/%s/%s", stem, pop);
        else
            snprintf(dir, sizeof dir, "output/%s", stem);
    } else {
        snprintf(dir, sizeof dir, "output/forecast");
    }

    double x0 = log(start);
    tf_project_input in = tf_project_input_from_model(m, theta, 1, &x0, 1.0);
    struct sigaction sa, old_int, old_term;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;
    sigemptyset(&sa.sa_mask);
    interrupted = 0;
    sigaction(SIGINT, &sa, &old_int);
    sigaction(SIGTERM, &sa, &old_term);

    uint64_t keys[2] = {tf_rng_key("forecast"), tf_rng_key(label)};
    tf_rng rng;
    tf_rng_derive(&rng, o->seed, keys, 2);
    tf_projection *p = NULL;
    tf_table *tables[TF_PROJECTION_N_TABLES] = {NULL};
    size_t n_made = 0;
    tf_status st = tf_project_run(&in, 1, po, &rng, &p, &err);
    if (st == TF_OK)
        st = tf_projection_tables_build(p, year0, tables, &err);
    for (size_t i = 0; i < TF_PROJECTION_N_TABLES && st == TF_OK; i++)
        st = tf_table_add_note(tables[i], TF_NOTE_CAUTION, tf_project_caution_fixed(), &err);
    if (st == TF_OK && interrupted)
        st = TF_ERR_INTERRUPTED;
    if (st == TF_ERR_INTERRUPTED) {
        rc = TF_EXIT_INTERRUPTED;
    } else if (st == TF_ERR_NOMEM || st == TF_ERR_NUMERIC) {
        tf_error_print(&err, PROG, stderr);
        rc = TF_EXIT_FAIL;
    } else if (st) {
        /* Range and validity errors of the projection come from the command line (--fixed, --start). */
        tf_error_print(&err, PROG, stderr);
        rc = TF_EXIT_USAGE;
    } else if ((st = tf_atomic_mkdirs(dir, &n_made, &err)) ||
               (st = tf_csv_write_all((const tf_table *const *)tables, TF_PROJECTION_N_TABLES, dir, o->survey_path,
                                      &err))) {
        tf_error_print(&err, PROG, stderr);
        /* A failed run leaves no folders of its own behind. */
        tf_atomic_rmdirs(dir, n_made);
        rc = TF_EXIT_FAIL;
    } else {
        if (!o->quiet)
            print_summary(p, tf_model_growth(m), theta, start, year0, o->seed, dir, tables);
        print_cautions(stdout);
    }
    if (rc == TF_EXIT_INTERRUPTED)
        fprintf(stderr, PROG ": interrupted; no tables written\n");
    sigaction(SIGINT, &old_int, NULL);
    sigaction(SIGTERM, &old_term, NULL);
    tf_projection_tables_free(tables);
    tf_projection_free(p);
    return rc;
}

int tf_cmd_forecast(int argc, char **argv)
{
    options o;
    tf_error err;
    tf_error_init(&err);
    if (parse_options(argc, argv, &o, &err))
        return TF_EXIT_OK;
    if (tf_error_status(&err) != TF_OK)
        return usage_fail(&err);

    if (o.average && o.have_fixed)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                     "--average combines fitted models; with --fixed there is nothing to average");
    else if (!o.have_fixed)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0,
                     "give parameter values with --fixed r=...,sigma=... (and --start N) for a fixed-parameter forecast",
                     "projecting from a fitted posterior needs the sampler, which this command does not use yet");
    if (!o.survey_path && isnan(o.start))
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                     "without a survey file, --start N (the current abundance) is required");
    if (!o.survey_path && o.population)
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--population needs a survey file");

    tf_project_options po;
    tf_project_options_init(&po);
    po.horizon = o.years;
    po.n_runs = o.runs;
    po.decline_window = o.decline_window;
    po.stop = &interrupted;
    tf_project_parse_thresholds(o.thresholds, po.thresholds, TF_PROJECT_MAX_THRESHOLDS, &po.n_thresholds, &err);

    const tf_obs_type *obs = NULL;
    if (o.obs && !(obs = tf_model_find_obs(o.obs))) {
        char known[256];
        tf_model_list_obs(known, sizeof known);
        char hint[300];
        snprintf(hint, sizeof hint, "known models: %s", known);
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, hint, "unknown counting-error model '%s'", o.obs);
    }
    if (tf_error_status(&err) != TF_OK)
        return usage_fail(&err);

    const tf_growth_type *g = pick_growth(&o, obs, &err);
    tf_model *m = NULL;
    /* The joined model only lays out the parameters; without --obs any counting-error model
     * will do, and Poisson has no parameters to give. */
    if (!g || tf_model_new(g->name, obs ? obs->name : "poisson", &m, &err) != TF_OK)
        return usage_fail(&err);
    double theta[TF_MAX_PARAMS];
    int rc = TF_EXIT_OK;
    if (fixed_theta(m, &o.fixed, theta, o.quiet, &err) != TF_OK)
        rc = usage_fail(&err);

    tf_survey *sv = NULL;
    double start = o.start;
    int year0 = TF_PROJECTION_NO_YEAR;
    const char *label = "";
    if (!rc && o.survey_path) {
        if (tf_survey_read(o.survey_path, &sv, &err)) {
            tf_error_print(&err, PROG, stderr);
            rc = TF_EXIT_INPUT;
        } else {
            rc = survey_start(&o, sv, &start, &year0, &label);
        }
    }
    if (!rc)
        rc = project_and_write(&o, &po, m, theta, sv, start, year0, label);
    tf_survey_free(sv);
    tf_model_free(m);
    return rc;
}

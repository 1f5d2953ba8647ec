/* `tallyfit forecast`: projects a population forward and reports quasi-extinction risk and the
 * chance of decline. For now from fixed parameter values (--fixed) and a start (--start or the
 * survey's last count); projection from a fitted posterior arrives with the sampler. */
#define _GNU_SOURCE
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <signal.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "cmd/cmd.h"
#include "export/projection_csv.h"
#include "model/model.h"
#include "project/cautions.h"
#include "project/project.h"
#include "survey/survey.h"
#include "util/rng.h"

#define PROG "tallyfit forecast"
#define DEFAULT_THRESHOLDS "50%,20%,10%"
#define DEFAULT_SEED 1u

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
    "  --decline-window Y      also report declines over Y years (e.g. three generations);\n"
    "                          declines over 10 years are always reported\n"
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
    const char *model, *obs, *population, *fixed, *out_dir;
    const char *thresholds;
    int average, quiet;
    size_t years, runs, decline_window;
    double start;
    uint64_t seed;
} options;

/* Prints "tallyfit forecast: <message>" and the --help hint; returns TF_EXIT_USAGE. */
static int usage_error(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
static int usage_error(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fputs(PROG ": ", stderr);
    vfprintf(stderr, fmt, ap);
    va_end(ap);
    fputs("\n  hint: run 'tallyfit forecast --help' for the options\n", stderr);
    return TF_EXIT_USAGE;
}

/* ---- small parsers for option values -------------------------------------------------------- */

static int parse_count(const char *s, size_t lo, size_t hi, size_t *out)
{
    if (!*s || strspn(s, "0123456789") != strlen(s))
        return 0;
    errno = 0;
    unsigned long long v = strtoull(s, NULL, 10);
    if (errno || v < lo || v > hi)
        return 0;
    *out = (size_t)v;
    return 1;
}

static int parse_number(const char *s, double *out)
{
    char *end;
    errno = 0;
    double v = strtod(s, &end);
    if (end == s || *end || errno || !isfinite(v))
        return 0;
    *out = v;
    return 1;
}

/* ---- fixed parameters --------------------------------------------------------------------------- */

typedef struct {
    size_t n;
    char names[TF_MAX_PARAMS + 4][32];
    double values[TF_MAX_PARAMS + 4];
} name_values;

static int parse_name_values(const char *text, name_values *nv)
{
    nv->n = 0;
    const char *p = text;
    for (;;) {
        const char *end = strchr(p, ',');
        size_t len = end ? (size_t)(end - p) : strlen(p);
        const char *eq = memchr(p, '=', len);
        if (!eq || eq == p || (size_t)(eq - p) >= sizeof nv->names[0])
            return usage_error("--fixed wants NAME=VALUE pairs separated by commas, not '%s'", text);
        if (nv->n == sizeof nv->values / sizeof nv->values[0])
            return usage_error("--fixed '%s' names too many parameters", text);
        char value[64];
        size_t vlen = len - (size_t)(eq + 1 - p);
        if (vlen == 0 || vlen >= sizeof value)
            return usage_error("--fixed '%s': a parameter has no usable value", text);
        memcpy(value, eq + 1, vlen);
        value[vlen] = '\0';
        char *name = nv->names[nv->n];
        memcpy(name, p, (size_t)(eq - p));
        name[eq - p] = '\0';
        for (size_t i = 0; i < nv->n; i++)
            if (!strcmp(nv->names[i], name))
                return usage_error("--fixed gives '%s' twice", name);
        if (!parse_number(value, &nv->values[nv->n]))
            return usage_error("--fixed: '%s' is not a number", value);
        nv->n++;
        if (!end)
            break;
        p = end + 1;
    }
    return TF_EXIT_OK;
}

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

static void list_growth_models(FILE *out)
{
    for (size_t i = 0; i < tf_model_n_growth(); i++) {
        const tf_growth_type *g = tf_model_growth_at(i);
        fprintf(out, "%s %s (", i ? "," : "", g->name);
        for (size_t j = 0; j < g->n_params; j++)
            fprintf(out, "%s%s", j ? ", " : "", g->param_names[j]);
        fputs(", sigma)", out);
    }
}

/* The growth model the fixed values describe: --model if given, else the only model whose drift
 * parameters are exactly the names given (besides sigma and counting-error parameters). */
static int pick_growth(const options *o, const tf_obs_type *obs, const name_values *nv, const tf_growth_type **out)
{
    *out = NULL;
    size_t n_drift = 0;
    for (size_t i = 0; i < nv->n; i++)
        n_drift += strcmp(nv->names[i], "sigma") && !obs_has(obs, nv->names[i]);
    if (o->model) {
        *out = tf_model_find_growth(o->model);
        if (!*out) {
            fprintf(stderr, PROG ": unknown growth model '%s'\n  hint: known models:", o->model);
            list_growth_models(stderr);
            fputc('\n', stderr);
            return TF_EXIT_USAGE;
        }
        return TF_EXIT_OK;
    }
    size_t n_match = 0;
    for (size_t i = 0; i < tf_model_n_growth(); i++) {
        const tf_growth_type *g = tf_model_growth_at(i);
        int all = g->n_params == n_drift;
        for (size_t j = 0; all && j < nv->n; j++)
            if (strcmp(nv->names[j], "sigma") && !obs_has(obs, nv->names[j]))
                all = growth_has(g, nv->names[j]);
        if (all) {
            if (n_match++ == 0)
                *out = g;
        }
    }
    if (n_match == 1)
        return TF_EXIT_OK;
    fprintf(stderr, PROG ": %s growth model takes exactly the parameters given to --fixed\n"
                    "  hint: choose one with --model; known models:",
            n_match ? "more than one" : "no");
    list_growth_models(stderr);
    fputc('\n', stderr);
    *out = NULL;
    return TF_EXIT_USAGE;
}

/* Fills theta = [drift parameters in the model's order, sigma] from the names. */
static int fixed_theta(const tf_growth_type *g, const tf_obs_type *obs, const name_values *nv, double *theta,
                       int quiet)
{
    for (size_t i = 0; i < nv->n; i++) {
        const char *name = nv->names[i];
        if (!strcmp(name, "sigma") || growth_has(g, name))
            continue;
        if (obs_has(obs, name)) {
            if (!quiet)
                printf("note: %s (counting error) does not enter a projection; ignored\n", name);
            continue;
        }
        fprintf(stderr, PROG ": the %s model has no parameter '%s'\n  hint: it takes", g->name, name);
        for (size_t j = 0; j < g->n_params; j++)
            fprintf(stderr, " %s,", g->param_names[j]);
        fputs(" and sigma\n", stderr);
        return TF_EXIT_USAGE;
    }
    for (size_t j = 0; j <= g->n_params; j++) {
        const char *want = j < g->n_params ? g->param_names[j] : "sigma";
        size_t i = 0;
        while (i < nv->n && strcmp(nv->names[i], want))
            i++;
        if (i == nv->n) {
            fprintf(stderr, PROG ": --fixed does not give %s, which the %s model needs\n", want, g->name);
            return TF_EXIT_USAGE;
        }
        theta[j] = nv->values[i];
        double lo = j < g->n_params ? g->lower[j] : 0, hi = j < g->n_params ? g->upper[j] : INFINITY;
        int ok = j < g->n_params ? theta[j] > lo && theta[j] < hi : theta[j] >= 0;
        if (!ok) {
            if (j < g->n_params)
                fprintf(stderr, PROG ": --fixed %s = %g is outside the %s model's range (%g, %g)\n", want, theta[j],
                        g->name, lo, hi);
            else
                fprintf(stderr, PROG ": --fixed sigma = %g must be 0 or more (0 projects without noise)\n", theta[j]);
            return TF_EXIT_USAGE;
        }
    }
    return TF_EXIT_OK;
}

/* ---- the output folder -------------------------------------------------------------------------- */

/* Creates dir and any missing parents; records the folders it made (deepest last) in made[] so that
 * a failed run can remove them again. */
typedef struct {
    char path[4096];
    size_t n_made;
    size_t made_len[32];   /* prefix lengths of path that this run created */
} made_dirs;

static int make_dirs(const char *dir, made_dirs *md, tf_error *err)
{
    md->n_made = 0;
    size_t len = strlen(dir);
    if (len == 0 || len >= sizeof md->path)
        return tf_error_add(err, TF_ERR_USAGE, dir, 0, 0, NULL, "unusable output folder name");
    memcpy(md->path, dir, len + 1);
    for (size_t i = 1; i <= len; i++) {
        if (i < len && md->path[i] != '/')
            continue;
        char keep = md->path[i];
        md->path[i] = '\0';
        struct stat stb;
        if (stat(md->path, &stb) != 0) {
            if (mkdir(md->path, 0777) != 0) {
                tf_error_add(err, TF_ERR_IO, md->path, 0, 0, "check the output folder (-o)",
                             "cannot create folder: %s", strerror(errno));
                md->path[i] = keep;
                return TF_ERR_IO;
            }
            if (md->n_made < sizeof md->made_len / sizeof md->made_len[0])
                md->made_len[md->n_made++] = i;
        } else if (!S_ISDIR(stb.st_mode)) {
            tf_error_add(err, TF_ERR_IO, md->path, 0, 0, "check the output folder (-o)", "is not a folder");
            md->path[i] = keep;
            return TF_ERR_IO;
        }
        md->path[i] = keep;
    }
    return TF_OK;
}

static void remove_made_dirs(made_dirs *md)
{
    while (md->n_made > 0) {
        size_t i = md->made_len[--md->n_made];
        char keep = md->path[i];
        md->path[i] = '\0';
        rmdir(md->path);
        md->path[i] = keep;
    }
}

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
                          int year0, uint64_t seed, const char *dir)
{
    size_t H = tf_projection_horizon(p);
    printf("Forecast from fixed parameters, growth model %s:", g->name);
    for (size_t j = 0; j <= g->n_params; j++)
        printf("%s %s = %g", j ? "," : "", j < g->n_params ? g->param_names[j] : "sigma", theta[j]);
    printf("\n  start N = %g%s; %zu simulated futures, %zu years ahead, seed %llu\n", start,
           year0 == TF_EXPORT_NO_YEAR ? "" : " in the last survey year", tf_projection_n_runs(p), H,
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
    printf("\nTables in %s: " TF_EXPORT_BANDS_CSV ", " TF_EXPORT_RISK_CSV ", " TF_EXPORT_DECLINE_CSV "\n", dir);
}

/* ---- the command --------------------------------------------------------------------------------- */

enum { OPT_MODEL = 256, OPT_OBS, OPT_AVERAGE, OPT_YEARS, OPT_THRESHOLD, OPT_WINDOW, OPT_RUNS, OPT_FIXED,
       OPT_START, OPT_SEED, OPT_POPULATION };

static int parse_options(int argc, char **argv, options *o)
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
        case OPT_FIXED: o->fixed = optarg; break;
        case OPT_POPULATION: o->population = optarg; break;
        case 'o': o->out_dir = optarg; break;
        case 'q': o->quiet = 1; break;
        case 'h': fputs(usage_text, stdout); return -1;
        case OPT_YEARS:
            if (!parse_count(optarg, 1, TF_PROJECT_MAX_HORIZON, &o->years))
                return usage_error("--years wants a whole number of years from 1 to 1000, not '%s'", optarg);
            break;
        case OPT_WINDOW:
            if (!parse_count(optarg, 1, TF_PROJECT_MAX_HORIZON, &o->decline_window))
                return usage_error("--decline-window wants a whole number of years from 1 to 1000, not '%s'"
                                   " (the model steps whole years: round a generation-based window)",
                                   optarg);
            break;
        case OPT_RUNS:
            if (!parse_count(optarg, 1, 10000000, &o->runs))
                return usage_error("--runs wants a whole number from 1 to 10000000, not '%s'", optarg);
            break;
        case OPT_START:
            if (!parse_number(optarg, &o->start) || !(o->start > 0))
                return usage_error("--start wants a positive abundance, not '%s'", optarg);
            break;
        case OPT_SEED: {
            char *end;
            errno = 0;
            unsigned long long s = strtoull(optarg, &end, 10);
            if (!*optarg || *end || errno || optarg[0] == '-')
                return usage_error("--seed wants a whole number from 0 to 2^64-1, not '%s'", optarg);
            o->seed = s;
            break;
        }
        case ':': return usage_error("option '%s' needs a value", argv[optind - 1]);
        default: return usage_error("unknown option '%s'", argv[optind - 1]);
        }
    }
    if (optind < argc)
        o->survey_path = argv[optind++];
    if (optind < argc)
        return usage_error("one survey file at most; '%s' is one too many", argv[optind]);
    return TF_EXIT_OK;
}

/* The starting abundance from the survey (or --start), the calendar year of t = 0 and the label. */
static int survey_start(const options *o, const tf_survey *sv, double *start, int *year0, const char **label)
{
    const tf_series *s = NULL;
    size_t n = tf_survey_n_series(sv);
    if (o->population) {
        s = tf_survey_find(sv, o->population);
        if (!s)
            return usage_error("the survey has no population '%s'", o->population);
    } else if (n == 1) {
        s = tf_survey_series(sv, 0);
    } else {
        fprintf(stderr, PROG ": %s holds %zu populations; fixed parameters describe one\n  hint: pick one with"
                        " --population:", o->survey_path, n);
        for (size_t i = 0; i < n && i < 10; i++)
            fprintf(stderr, " '%s'", tf_series_label(tf_survey_series(sv, i)));
        fputs(n > 10 ? " ...\n" : "\n", stderr);
        return TF_EXIT_USAGE;
    }
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
static int project_and_write(const options *o, const tf_project_options *po, const tf_growth_type *g,
                             const double *theta, const tf_survey *sv, double start, int year0, const char *label)
{
    int rc = TF_EXIT_OK;
    tf_error err;
    tf_error_init(&err);
    char dir[4096];
    if (o->out_dir) {
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
    tf_project_input in = {g, g->n_params, g->n_params + 1, 1, theta, &x0, 1.0};
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
    made_dirs md;
    md.n_made = 0;
    tf_status st = tf_project_run(&in, 1, po, &rng, &p, &err);
    if (st == TF_ERR_INTERRUPTED || (!st && interrupted)) {
        rc = TF_EXIT_INTERRUPTED;
    } else if (st) {
        tf_error_print(&err, PROG, stderr);
        /* Range and validity errors come from the command line (--fixed, --start). */
        rc = st == TF_ERR_NOMEM || st == TF_ERR_NUMERIC ? TF_EXIT_FAIL : TF_EXIT_USAGE;
    } else if ((st = make_dirs(dir, &md, &err)) || (st = tf_export_projection_csv(p, dir, year0, &interrupted, &err))) {
        if (st != TF_ERR_INTERRUPTED)
            tf_error_print(&err, PROG, stderr);
        remove_made_dirs(&md);
        rc = st == TF_ERR_INTERRUPTED ? TF_EXIT_INTERRUPTED : TF_EXIT_FAIL;
    } else {
        if (!o->quiet)
            print_summary(p, g, theta, start, year0, o->seed, dir);
        print_cautions(stdout);
    }
    if (rc == TF_EXIT_INTERRUPTED)
        fprintf(stderr, PROG ": interrupted; no tables written\n");
    sigaction(SIGINT, &old_int, NULL);
    sigaction(SIGTERM, &old_term, NULL);
    tf_projection_free(p);
    return rc;
}

int tf_cmd_forecast(int argc, char **argv)
{
    options o;
    int rc = parse_options(argc, argv, &o);
    if (rc)
        return rc < 0 ? TF_EXIT_OK : rc;

    if (o.average && o.fixed)
        return usage_error("--average combines fitted models; with --fixed there is nothing to average");
    if (!o.fixed) {
        fprintf(stderr, PROG ": projecting from a fitted posterior needs the sampler, which this command does not"
                        " use yet\n  hint: give parameter values with --fixed r=...,sigma=... (and --start N) for a"
                        " fixed-parameter forecast\n");
        return TF_EXIT_USAGE;
    }
    if (!o.survey_path && isnan(o.start))
        return usage_error("without a survey file, --start N (the current abundance) is required");
    if (!o.survey_path && o.population)
        return usage_error("--population needs a survey file");

    tf_error err;
    tf_error_init(&err);
    tf_project_options po;
    tf_project_options_init(&po);
    po.horizon = o.years;
    po.n_runs = o.runs;
    po.decline_window = o.decline_window;
    po.stop = &interrupted;
    if (tf_project_parse_thresholds(o.thresholds, po.thresholds, TF_PROJECT_MAX_THRESHOLDS, &po.n_thresholds, &err)) {
        tf_error_print(&err, PROG, stderr);
        return TF_EXIT_USAGE;
    }

    const tf_obs_type *obs = NULL;
    if (o.obs && !(obs = tf_model_find_obs(o.obs))) {
        fprintf(stderr, PROG ": unknown counting-error model '%s'\n  hint: known models:", o.obs);
        for (size_t i = 0; i < tf_model_n_obs(); i++)
            fprintf(stderr, " %s", tf_model_obs_at(i)->name);
        fputc('\n', stderr);
        return TF_EXIT_USAGE;
    }
    name_values nv;
    const tf_growth_type *g;
    double theta[TF_MAX_PARAMS + 1];
    if ((rc = parse_name_values(o.fixed, &nv)) || (rc = pick_growth(&o, obs, &nv, &g)) ||
        (rc = fixed_theta(g, obs, &nv, theta, o.quiet)))
        return rc;

    tf_survey *sv = NULL;
    double start = o.start;
    int year0 = TF_EXPORT_NO_YEAR;
    const char *label = "";
    if (o.survey_path) {
        if (tf_survey_read(o.survey_path, &sv, &err)) {
            tf_error_print(&err, PROG, stderr);
            return TF_EXIT_INPUT;
        }
        rc = survey_start(&o, sv, &start, &year0, &label);
    }
    if (!rc)
        rc = project_and_write(&o, &po, g, theta, sv, start, year0, label);
    tf_survey_free(sv);
    return rc;
}

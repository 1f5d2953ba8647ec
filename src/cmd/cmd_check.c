/* `tallyfit check`: validates a survey file and prints an overview of each population. */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cmd/args.h"
#include "cmd/cmd.h"
#include "cmd/input.h"
#include "cmd/messages.h"
#include "survey/survey.h"
#include "util/stats.h"

#define PROG "tallyfit check"

static void help(FILE *out)
{
    fprintf(out,
            "usage: tallyfit check SURVEY.csv [--population LIST] [--skip-unusable] [--estimates]\n"
            "                      [--quiet]\n"
            "\n"
            "Reads a survey file and either lists every problem in it (file, line and field\n"
            "number, with a suggestion) or prints an overview of each population.\n"
            "\n"
            "The survey file is CSV (comma, semicolon or tab separated) with a header row naming\n"
            "the columns:\n"
            "  year        required; a whole number from %d to %d\n"
            "  count       required; a whole number >= 0 (any number >= 0 with --estimates);\n"
            "              empty or NA = not surveyed that year\n"
            "  population  optional; a label, for files that hold several populations\n"
            "  effort      optional; survey effort (km walked, hours...), a positive number\n"
            "  note        optional; free text, ignored\n"
            "Other columns are ignored; lines starting with # are comments. Each population\n"
            "needs at least %d surveyed years with at least one count above zero. Numbers are\n"
            "plain: no thousands separators (4835, not 4,835, 4.835 or 4 835), a point as the\n"
            "decimal mark.\n"
            "\n"
            "options:\n"
            TF_INPUT_HELP
            "",
            TF_SURVEY_YEAR_MIN, TF_SURVEY_YEAR_MAX, TF_SURVEY_MIN_SURVEYED);
    tf_args_quiet_help(out, 21);
    fprintf(out,
            "  -h, --help         show this help\n"
            "\n"
            "The overview is the summary: with --quiet a usable file prints nothing but its warnings\n"
            "(the exit status tells).\n"
            "\n"
            "For each population the overview gives:\n"
            "  years        first and last year listed, and how many years lie between them\n"
            "  surveyed     years with a count, then the years without one (runs joined:\n"
            "               1999, 2004-2005)\n"
            "  counts       smallest, median and largest count, and how many are zero\n"
            "  effort       the same every year, or the range it varies over\n"
            "  warnings     on standard error, counts far from their neighbours: more than %.0f times\n"
            "               above or below the median of up to %d surveyed years on each side (on\n"
            "               the count/effort + 0.5 scale), to check for typing errors; they are kept\n"
            "  crude trend  the least-squares slope of log(count/effort + 0.5) against the year,\n"
            "               shown as a percentage change per year. A crude screening figure,\n"
            "               not a model estimate: it ignores observation error, density\n"
            "               dependence and the missing years.\n"
            "\nA usable file ends with status 0, an unusable one with 3.\n"
            TF_CMD_HELP_END,
            TF_SERIES_OUTLIER_FACTOR, TF_SERIES_OUTLIER_WINDOW);
}

/* Missing years with runs joined: "1999, 2004-2005", or "none". */
static void print_missing(const tf_series *s, FILE *out)
{
    const double *y = tf_series_counts(s);
    size_t n = tf_series_n_years(s);
    int first = tf_series_first_year(s);
    bool any = false;
    for (size_t i = 0; i < n; i++) {
        if (!isnan(y[i]))
            continue;
        size_t j = i;
        while (j + 1 < n && isnan(y[j + 1]))
            j++;
        fprintf(out, "%s%d", any ? ", " : "", first + (int)i);
        if (j > i)
            fprintf(out, "-%d", first + (int)j);
        any = true;
        i = j;
    }
    if (!any)
        fputs("none", out);
}

/* Least-squares slope of log(count/effort + 0.5) on year, over surveyed years. The 0.5 keeps zero
 * counts usable (the usual log(y + 1/2) adjustment for counts, common practice, no source). */
static double crude_slope(const tf_series *s)
{
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    size_t n = tf_series_n_years(s);
    double sx = 0, sy = 0, m = 0;
    for (size_t i = 0; i < n; i++)
        if (!isnan(y[i]))
            sx += (double)i, sy += log(y[i] / e[i] + 0.5), m++;
    double mx = sx / m, my = sy / m, sxy = 0, sxx = 0;
    for (size_t i = 0; i < n; i++) {
        if (isnan(y[i]))
            continue;
        double dx = (double)i - mx;
        sxy += dx * (log(y[i] / e[i] + 0.5) - my);
        sxx += dx * dx;
    }
    return sxy / sxx; /* the importer guarantees >= 5 distinct surveyed years, so sxx > 0 */
}

/* Prints one population; false when out of memory. */
static bool print_series(const tf_series *s, FILE *out)
{
    size_t n = tf_series_n_years(s), n_surveyed = tf_series_n_surveyed(s);
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    double *sorted = malloc(n_surveyed * sizeof *sorted);
    if (!sorted)
        return false;
    size_t k = 0;
    double e_min = INFINITY, e_max = -INFINITY;
    for (size_t i = 0; i < n; i++) {
        if (isnan(y[i]))
            continue;
        sorted[k++] = y[i];
        e_min = fmin(e_min, e[i]);
        e_max = fmax(e_max, e[i]);
    }
    double median = tf_stats_median(sorted, k);
    int first = tf_series_first_year(s);

    fprintf(out, "\n%s\n", tf_series_label(s)[0] ? tf_series_label(s) : "(unnamed population)");
    fprintf(out, "  years:        %d-%d (%zu years)\n", first, first + (int)n - 1, n);
    fprintf(out, "  surveyed:     %zu of %zu years; missing: ", n_surveyed, n);
    print_missing(s, out);
    fprintf(out, "\n  counts:       min %.10g, median %.10g, max %.10g; zero counts: %zu\n", sorted[0], median,
            sorted[k - 1], tf_series_n_zero(s));
    if (e_min == e_max)
        fprintf(out, "  effort:       the same every year (%.6g)\n", e_min);
    else
        fprintf(out, "  effort:       varies from %.6g to %.6g\n", e_min, e_max);
    if (tf_series_has_actions(s)) {
        double removed = 0, added = 0;
        size_t n_removed = 0, n_added = 0;
        for (size_t i = 0; i < n; i++) {
            removed += tf_series_removed(s, i), n_removed += tf_series_removed(s, i) > 0;
            added += tf_series_added(s, i), n_added += tf_series_added(s, i) > 0;
        }
        fprintf(out, "  removed:      %.10g animals in %zu years; added: %.10g animals in %zu years\n", removed,
                n_removed, added, n_added);
        fprintf(out, "  counted:      a count at effort 1 includes %.3g %% of the animals present (--counted-fraction)\n",
                100 * tf_series_counted_fraction(s));
    }
    double pct = 100.0 * (exp(crude_slope(s)) - 1.0);
    fprintf(out, "  crude trend:  %+.1f%% per year (crude screening figure, not a model estimate)\n", pct);
    free(sorted);
    return true;
}

int tf_cmd_check(int argc, char **argv)
{
    enum { OPT_POP = 256, OPT_SKIP, OPT_ESTIMATES, OPT_COUNTED };
    static const struct option options[] = {
        {"population", required_argument, NULL, OPT_POP},
        {"skip-unusable", no_argument, NULL, OPT_SKIP},
        {"estimates", no_argument, NULL, OPT_ESTIMATES},
        {"counted-fraction", required_argument, NULL, OPT_COUNTED},
        {"quiet", no_argument, NULL, 'q'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    static const char hint[] = "see 'tallyfit check --help'";
    tf_error err;
    tf_error_init(&err);
    bool quiet = false;
    tf_input in = {0};
    optind = 0; /* GNU getopt: 0 restarts the scan, so the command can run more than once */
    opterr = 0;
    int c;
    while ((c = getopt_long(argc, argv, ":qh", options, NULL)) != -1) {
        switch (c) {
        case 'q':
            quiet = true;
            break;
        case OPT_POP:
            if (tf_input_set_population(&in, optarg, &err) != TF_OK)
                return tf_messages_usage(PROG, &err);
            break;
        case OPT_SKIP: in.skip_unusable = 1; break;
        case OPT_ESTIMATES: in.estimates = 1; break;
        case OPT_COUNTED:
            if (tf_input_set_counted_fraction(&in, optarg, &err) != TF_OK)
                return tf_messages_usage(PROG, &err);
            break;
        case 'h':
            help(stdout);
            return TF_EXIT_OK;
        default:
            tf_args_getopt_error("check", c, optopt, argv[optind - 1], &err);
            return tf_messages_usage(PROG, &err);
        }
    }
    if (argc - optind != 1) {
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, hint, argc == optind ? "no survey file given"
                                                                          : "give exactly one survey file");
        return tf_messages_usage(PROG, &err);
    }
    const char *path = argv[optind];
    tf_survey *sv = NULL;
    tf_status st = tf_input_read(&in, path, stderr, PROG, &sv, &err);
    if (st != TF_OK) {
        tf_error_print(&err, PROG, stderr);
        return st == TF_ERR_USAGE ? TF_EXIT_USAGE : TF_EXIT_INPUT;
    }
    int rc = TF_EXIT_OK;
    tf_input_warn_outliers(sv, tf_input_single(&in), path, PROG, stderr);
    /* One population chosen from several: the others are not shown. */
    const char *one = tf_input_single(&in);
    if (!quiet) {
        size_t n = one ? 1 : tf_survey_n_series(sv);
        size_t n_file = tf_survey_n_in_file(sv);
        if (n < n_file)
            printf("%s: %zu of %zu populations, usable for model fitting", path, n, n_file);
        else
            printf("%s: %zu population%s, usable for model fitting", path, n, n == 1 ? "" : "s");
        printf("%s\n", in.estimates ? " (counts read as estimates: continuous counting-error models only)" : "");
        for (size_t i = 0; i < tf_survey_n_series(sv) && rc == TF_EXIT_OK; i++)
            if (one && strcmp(tf_series_label(tf_survey_series(sv, i)), one))
                continue;
            else if (!print_series(tf_survey_series(sv, i), stdout)) {
                rc = tf_messages_error(PROG, TF_EXIT_FAIL, NULL, "out of memory");
            }
    }
    tf_survey_free(sv);
    return rc;
}

/* Unit tests for the survey importer: the structure read from every good file, the one error each
 * bad file must give (tests/data/bad/EXPECT), collecting several errors, the cap, and input that
 * tries to break the reader. */
#include "tf_test.h"

#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <stdbool.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "survey/survey.h"

#define GOOD(f) TF_TEST_DATA("good/" f)

/* Reads a file that must be clean under options o. */
static tf_survey *read_ok_with(const char *path, const tf_survey_options *o)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    tf_status st = tf_survey_read_with(path, o, &sv, &err);
    if (st != TF_OK)
        tf_error_print(&err, "test", stderr);
    ck_assert_msg(st == TF_OK, "%s: status %d", path, st);
    ck_assert_uint_eq(err.n_items, 0);
    ck_assert_ptr_nonnull(sv);
    ck_assert_str_eq(tf_survey_path(sv), path);
    ck_assert_int_eq(tf_survey_estimates(sv), o->estimates);
    return sv;
}

/* Reads a file that must be clean when read strictly (whole counts). */
static tf_survey *read_ok(const char *path) { return read_ok_with(path, &(tf_survey_options){0}); }

/* Good files whose count column holds estimates: they read only with tf_survey_options.estimates. */
static const char *const estimates_files[] = {"fractional.csv"};

/* Checks one series against expected counts (NAN = not surveyed). */
static void expect_series(const tf_series *s, const char *label, int first, const double *want, size_t n)
{
    ck_assert_ptr_nonnull(s);
    ck_assert_str_eq(tf_series_label(s), label);
    ck_assert_int_eq(tf_series_first_year(s), first);
    ck_assert_uint_eq(tf_series_n_years(s), n);
    const double *y = tf_series_counts(s);
    size_t n_surveyed = 0;
    for (size_t i = 0; i < n; i++) {
        if (isnan(want[i])) {
            ck_assert_msg(isnan(y[i]), "%s year %d: want missing, got %g", label, first + (int)i, y[i]);
        } else {
            ck_assert_msg(y[i] == want[i], "%s year %d: want %g, got %g", label, first + (int)i, want[i], y[i]);
            n_surveyed++;
        }
    }
    ck_assert_uint_eq(tf_series_n_surveyed(s), n_surveyed);
}

static void expect_effort(const tf_series *s, const double *want)
{
    const double *e = tf_series_effort(s);
    for (size_t i = 0; i < tf_series_n_years(s); i++)
        ck_assert_msg(e[i] == want[i], "year %zu: effort %g, want %g", i, e[i], want[i]);
}

/* Removals and releases: read in every row (a year without a count too), 0 where empty; a
 * negative or non-numeric one names its line and column. */
START_TEST(removals_and_releases)
{
    static const char text[] = "year,count,removed,added\n2001,100,10,\n2002,95,,5\n2003,NA,12,0\n"
                               "2004,90,8,\n2005,92,0,\n2006,97,,\n";
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    ck_assert_int_eq(tf_survey_parse("mem", text, sizeof text - 1, &sv, &err), TF_OK);
    const tf_series *s = tf_survey_series(sv, 0);
    ck_assert(tf_series_has_actions(s));
    ck_assert_double_eq(tf_series_removed(s, 0), 10);
    ck_assert_double_eq(tf_series_added(s, 1), 5);
    ck_assert_double_eq(tf_series_removed(s, 2), 12); /* no count that year, the removal is kept */
    ck_assert_double_eq(tf_series_removed(s, 5), 0);
    ck_assert_double_eq(tf_series_take(s, 1), -5);
    ck_assert_int_eq(tf_survey_set_counted_fraction(sv, 0.5, &err), TF_OK);
    ck_assert_double_eq(tf_series_take(s, 0), 5);  /* 0.5 x 10 animals, in count units */
    ck_assert_int_eq(tf_survey_set_counted_fraction(sv, 1.5, &err), TF_ERR_RANGE);
    ck_assert_double_eq(tf_series_counted_fraction(s), 0.5);
    tf_survey_free(sv);

    static const char zeros[] = "year,count,removed\n2001,100,0\n2002,95,\n2003,90,0\n2004,90,0\n2005,92,0\n";
    ck_assert_int_eq(tf_survey_parse("mem", zeros, sizeof zeros - 1, &sv, &err), TF_OK);
    ck_assert(!tf_series_has_actions(tf_survey_series(sv, 0)));
    ck_assert_double_eq(tf_series_take(tf_survey_series(sv, 0), 0), 0);
    tf_survey_free(sv);

    static const char negative[] = "year,count,removed\n2001,100,0\n2002,95,-4\n2003,90,0\n2004,90,0\n2005,92,0\n";
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_parse("mem", negative, sizeof negative - 1, &sv, &err), TF_ERR_RANGE);
    ck_assert_int_eq(err.items[0].line, 3);
    ck_assert_int_eq(err.items[0].column, 3);
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "'added'"));
    static const char words[] = "year,count,added\n2001,100,0\n2002,95,some\n2003,90,0\n2004,90,0\n2005,92,0\n";
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_parse("mem", words, sizeof words - 1, &sv, &err), TF_ERR_PARSE);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "added 'some' is not a number"));
}
END_TEST

START_TEST(comma_basic)
{
    tf_survey *sv = read_ok(GOOD("comma-basic.csv"));
    ck_assert_uint_eq(tf_survey_n_series(sv), 1);
    const tf_series *s = tf_survey_series(sv, 0);
    static const double want[] = {31, 28, 35, 30, 27, 33, 29, 26, 30, 24};
    expect_series(s, "", 2001, want, 10);
    static const double one[10] = {1, 1, 1, 1, 1, 1, 1, 1, 1, 1};
    expect_effort(s, one);
    ck_assert_int_eq(tf_series_source_line(s, 0), 2);
    ck_assert_int_eq(tf_series_source_line(s, 9), 11);
    ck_assert_ptr_eq(tf_survey_find(sv, ""), s);
    ck_assert_ptr_null(tf_survey_series(sv, 1));
    tf_survey_free(sv);
}
END_TEST

START_TEST(semicolon_and_effort)
{
    tf_survey *sv = read_ok(GOOD("semicolon-effort.csv"));
    static const double want[] = {14, 9, 17, 12, 15, 11}, effort[] = {2.5, 1.5, 3, 2, 2.5, 2};
    expect_series(tf_survey_series(sv, 0), "", 2010, want, 6);
    expect_effort(tf_survey_series(sv, 0), effort);
    tf_survey_free(sv);
}
END_TEST

START_TEST(bom_and_crlf)
{
    tf_survey *sv = read_ok(GOOD("bom-crlf.csv"));
    static const double want[] = {120, 131, 118, 140, 135};
    expect_series(tf_survey_series(sv, 0), "", 2015, want, 5);
    ck_assert_int_eq(tf_series_source_line(tf_survey_series(sv, 0), 4), 6);
    tf_survey_free(sv);
}
END_TEST

START_TEST(lone_cr_line_ends)
{
    tf_survey *sv = read_ok(GOOD("lone-cr.csv"));
    static const double want[] = {1, 2, 3, 4, 5};
    expect_series(tf_survey_series(sv, 0), "", 2001, want, 5);
    ck_assert_int_eq(tf_series_source_line(tf_survey_series(sv, 0), 4), 6);
    tf_survey_free(sv);
}
END_TEST

START_TEST(comments_and_gaps)
{
    tf_survey *sv = read_ok(GOOD("comments-gaps.csv"));
    const tf_series *s = tf_survey_series(sv, 0);
    /* 1991 empty count, 1993 absent from the file, 1995 NA. */
    static const double want[] = {40, NAN, 44, NAN, 38, NAN, 41, 45};
    expect_series(s, "", 1990, want, 8);
    ck_assert_int_eq(tf_series_source_line(s, 0), 5);
    ck_assert_int_eq(tf_series_source_line(s, 2), 8); /* line 7 is a comment between rows */
    ck_assert_int_eq(tf_series_source_line(s, 3), 0);
    ck_assert_int_eq(tf_series_source_line(s, 5), 10);
    tf_survey_free(sv);
}
END_TEST

START_TEST(unsorted_years_are_sorted)
{
    tf_survey *sv = read_ok(GOOD("unsorted.csv"));
    static const double want[] = {4, 5, 6, 7, 8, 9};
    expect_series(tf_survey_series(sv, 0), "", 2002, want, 6);
    ck_assert_int_eq(tf_series_source_line(tf_survey_series(sv, 0), 0), 7);
    tf_survey_free(sv);
}
END_TEST

START_TEST(populations_grouped_in_order_of_appearance)
{
    tf_survey *sv = read_ok(GOOD("multi-pop.csv"));
    ck_assert_uint_eq(tf_survey_n_series(sv), 3);
    static const double west[] = {10, 12, 11, 15, 14}, east[] = {190, 200, 210, 205, 198}, south[] = {3, 4, 2, 5, 0};
    expect_series(tf_survey_series(sv, 0), "west", 2000, west, 5);
    expect_series(tf_survey_series(sv, 1), "east", 2000, east, 5);
    expect_series(tf_survey_series(sv, 2), "south", 1998, south, 5);
    ck_assert_ptr_eq(tf_survey_find(sv, "east"), tf_survey_series(sv, 1));
    ck_assert_ptr_null(tf_survey_find(sv, "north"));
    ck_assert_uint_eq(tf_series_n_zero(tf_survey_series(sv, 2)), 1);
    ck_assert_int_eq(tf_series_source_line(tf_survey_series(sv, 1), 0), 6);
    tf_survey_free(sv);
}
END_TEST

START_TEST(semicolon_multi_with_quotes_and_effort)
{
    tf_survey *sv = read_ok(GOOD("semicolon-multi.csv"));
    ck_assert_uint_eq(tf_survey_n_series(sv), 2);
    static const double upper[] = {5, 6, 7, 8, 9}, lower[] = {7, 8, 9, NAN, 10, 11, 12};
    expect_series(tf_survey_series(sv, 0), "north, upper", 2001, upper, 5);
    expect_series(tf_survey_series(sv, 1), "lower", 2001, lower, 7);
    /* Effort in a year without a count is not read (it is empty there) and stored as 1. */
    static const double e_lower[] = {2, 2, 2, 1, 2, 2, 2};
    expect_effort(tf_survey_series(sv, 1), e_lower);
    tf_survey_free(sv);
}
END_TEST

START_TEST(na_spellings)
{
    tf_survey *sv = read_ok(GOOD("na-variants.csv"));
    static const double want[] = {5, NAN, NAN, NAN, NAN, NAN, 6, 7, 8, 9};
    expect_series(tf_survey_series(sv, 0), "", 2000, want, 10);
    tf_survey_free(sv);
}
END_TEST

START_TEST(extra_columns_and_case)
{
    tf_survey *sv = read_ok(GOOD("extra-columns.csv"));
    ck_assert_uint_eq(tf_survey_n_series(sv), 1);
    static const double want[] = {52, 48, 57, 50, 61};
    expect_series(tf_survey_series(sv, 0), "", 2011, want, 5);
    tf_survey_free(sv);
}
END_TEST

START_TEST(no_trailing_newline)
{
    tf_survey *sv = read_ok(GOOD("no-trailing-newline.csv"));
    static const double want[] = {3, 4, 2, 5, 6};
    expect_series(tf_survey_series(sv, 0), "", 2001, want, 5);
    tf_survey_free(sv);
}
END_TEST

START_TEST(fractional_counts_accepted)
{
    tf_survey *sv = read_ok_with(GOOD("fractional.csv"), &(tf_survey_options){.estimates = 1});
    const tf_series *s = tf_survey_series(sv, 0);
    static const double want[] = {2.5, 3.25, 0, 1.75, 4, 3.5};
    expect_series(s, "", 2001, want, 6);
    ck_assert_uint_eq(tf_series_first_fractional(s), 0);
    tf_survey_free(sv);
}
END_TEST

START_TEST(quoted_values_over_several_lines)
{
    tf_survey *sv = read_ok(GOOD("quoted-multiline.csv"));
    const tf_series *s = tf_survey_series(sv, 0);
    static const double want[] = {10, 11, 12, 13, 14};
    expect_series(s, "", 2001, want, 5);
    /* The 2001 note spans lines 2-4, and its line starting with '#' is not a comment. */
    ck_assert_int_eq(tf_series_source_line(s, 0), 2);
    ck_assert_int_eq(tf_series_source_line(s, 1), 5);
    tf_survey_free(sv);
}
END_TEST

START_TEST(blank_and_empty_rows_skipped)
{
    tf_survey *sv = read_ok(GOOD("blank-rows.csv"));
    const tf_series *s = tf_survey_series(sv, 0);
    static const double want[] = {5, 6, 7, 8, 9};
    expect_series(s, "", 2001, want, 5);
    ck_assert_int_eq(tf_series_source_line(s, 1), 6);
    ck_assert_int_eq(tf_series_source_line(s, 4), 11);
    tf_survey_free(sv);
}
END_TEST

START_TEST(utf8_labels)
{
    tf_survey *sv = read_ok(GOOD("unicode-labels.csv"));
    ck_assert_str_eq(tf_series_label(tf_survey_series(sv, 0)), "lac-\xc3\xa9t\xc3\xa9");
    tf_survey_free(sv);
}
END_TEST

START_TEST(missing_rows_at_both_ends_belong_to_the_span)
{
    tf_survey *sv = read_ok(GOOD("leading-trailing-na.csv"));
    static const double want[] = {NAN, 5, 6, 7, 8, 9, NAN};
    expect_series(tf_survey_series(sv, 0), "", 1999, want, 7);
    tf_survey_free(sv);
}
END_TEST

/* A good file added without its own test above still has to read. */
START_TEST(every_good_file_reads)
{
    DIR *d = opendir(TF_TEST_DATA("good"));
    ck_assert_ptr_nonnull(d);
    size_t n = 0;
    struct dirent *e;
    while ((e = readdir(d))) {
        size_t len = strlen(e->d_name);
        if (len < 4 || strcmp(e->d_name + len - 4, ".csv"))
            continue;
        char path[512];
        snprintf(path, sizeof path, TF_TEST_DATA("good/%s"), e->d_name);
        int estimates = 0;
        for (size_t k = 0; k < sizeof estimates_files / sizeof estimates_files[0]; k++)
            estimates |= !strcmp(e->d_name, estimates_files[k]);
        tf_survey_free(read_ok_with(path, &(tf_survey_options){.estimates = estimates}));
        n++;
    }
    closedir(d);
    ck_assert_uint_ge(n, 16);
}
END_TEST

/* A count that is not whole is refused by the strict reading (its line and column, and a hint
 * naming --estimates), and a population with one is set aside by the batch reading. */
START_TEST(fractional_counts_refused_unless_estimates)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    tf_status st = tf_survey_read(GOOD("fractional.csv"), &sv, &err);
    ck_assert_int_eq(st, TF_ERR_INVALID);
    ck_assert_ptr_null(sv);
    ck_assert_uint_eq(err.n_items, 4); /* 2.5, 3.25, 1.75 and 3.5e0; the 0 and the 4 are whole */
    ck_assert_int_eq(err.items[0].line, 2);
    ck_assert_int_eq(err.items[0].column, 2);
    ck_assert_str_eq(err.items[0].what, "count 2.5 is not a whole number");
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "--estimates"));
    static const char text[] = "population,year,count\na,2001,1\na,2002,2\na,2003,3\na,2004,4\na,2005,5\n"
                               "b,2001,1\nb,2002,2.5\nb,2003,3\nb,2004,4\nb,2005,5\n";
    tf_error_init(&err);
    st = tf_survey_parse_batch("mem", text, sizeof text - 1, 0, &sv, &err);
    ck_assert_int_eq(st, TF_OK);
    ck_assert_uint_eq(tf_survey_n_series(sv), 1);
    ck_assert_uint_eq(tf_survey_n_rejected(sv), 1);
    ck_assert_uint_eq(tf_survey_n_in_file(sv), 2);
    ck_assert_str_eq(tf_survey_rejected_at(sv, 0)->what, "count 2.5 is not a whole number");
    tf_survey_free(sv);
    tf_error_init(&err);
    st = tf_survey_parse_with("mem", text, sizeof text - 1, &(tf_survey_options){.estimates = 1}, &sv, &err);
    ck_assert_int_eq(st, TF_OK);
    ck_assert_uint_eq(tf_survey_n_series(sv), 2);
    ck_assert_int_eq(tf_survey_estimates(sv), 1);
    tf_survey_free(sv);
}
END_TEST

/* Every way of writing a number that regional settings produce gets the one hint, which names
 * the export and never suggests "a point for decimals" (that would turn 4,835 animals into 4.835). */
START_TEST(number_forms_share_one_hint)
{
    static const char *const files[] = {"count-thousands-point.csv",    "count-thousands-quoted.csv",
                                        "count-thousands-space.csv",    "count-thousands-apostrophe.csv",
                                        "count-comma-semicolon.csv",    "count-decimal-comma.csv",
                                        "effort-decimal-comma.csv"};
    for (size_t i = 0; i < sizeof files / sizeof files[0]; i++) {
        char path[256];
        snprintf(path, sizeof path, TF_TEST_DATA("bad/%s"), files[i]);
        tf_error err;
        tf_error_init(&err);
        tf_survey *sv = NULL;
        ck_assert_int_eq(tf_survey_read(path, &sv, &err), TF_ERR_PARSE);
        ck_assert_str_eq(err.items[0].hint, "export the file with plain numbers: no thousands separators, a point "
                                            "as the decimal mark (4835, 2.5)");
    }
    /* "4.835" in a comma file is a decimal: refused as a count, read as an estimate. */
    static const char comma[] = "year,count\n2001,4.835\n2002,4.1\n2003,3.9\n2004,3.5\n2005,3.1\n";
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    ck_assert_int_eq(tf_survey_parse("mem", comma, sizeof comma - 1, &sv, &err), TF_ERR_INVALID);
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "if 4.835 means 4835 animals"));
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_parse_with("mem", comma, sizeof comma - 1, &(tf_survey_options){.estimates = 1}, &sv,
                                          &err),
                     TF_OK);
    ck_assert_double_eq(tf_series_counts(tf_survey_series(sv, 0))[0], 4.835);
    tf_survey_free(sv);
    /* In a semicolon file the same text is a thousands separator even for estimates. */
    static const char semi[] = "year;count\n2001;4.835\n2002;4100\n2003;3900\n2004;3500\n2005;3100\n";
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_parse_with("mem", semi, sizeof semi - 1, &(tf_survey_options){.estimates = 1}, &sv,
                                          &err),
                     TF_ERR_PARSE);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "thousands separator (it looks like 4835)"));
}
END_TEST

/* A tab-separated file reads like a comma-separated one; blank fields stay empty. */
START_TEST(tab_separated)
{
    tf_survey *sv = read_ok(GOOD("tab-separated.csv"));
    static const double want[] = {14, 9, NAN, 12, 15, 11, 13};
    expect_series(tf_survey_series(sv, 0), "", 2010, want, 7);
    ck_assert_double_eq(tf_series_effort(tf_survey_series(sv, 0))[0], 2.5);
    tf_survey_free(sv);
}
END_TEST

/* The outlier rule of series.h on made-up series: a typed extra zero is flagged with its factor
 * and the neighbours' median; a 50 % yearly decline, a zero among small counts and a year with
 * too few neighbours are not. */
START_TEST(outliers_flagged)
{
    static const double typo[] = {400, 380, 390, 3700, 360, 350, 370};
    tf_series *s = tf_series_new("", 2000, 7, typo, NULL, NULL, NULL);
    tf_series_outlier o[4];
    ck_assert_uint_eq(tf_series_outliers(s, o, 4), 1);
    ck_assert_uint_eq(o[0].index, 3);
    ck_assert_double_eq(o[0].count, 3700);
    /* neighbours 400, 380, 390, 360, 350, 370: median of log(y + 0.5) is that of 375 and 380 */
    double med = exp(0.5 * (log(370.5) + log(380.5))) - 0.5;
    ck_assert_double_eq_tol(o[0].median, med, 1e-9);
    ck_assert_double_eq_tol(o[0].factor, 3700.5 / (med + 0.5), 1e-9);
    tf_series_free(s);

    static const double decline[] = {6400, 3200, 1600, 800, 400, 200, 100};
    s = tf_series_new("", 2000, 7, decline, NULL, NULL, NULL);
    ck_assert_uint_eq(tf_series_outliers(s, o, 4), 0);
    tf_series_free(s);

    static const double small[] = {4, 5, 4, 0, 4, 3, 5};
    s = tf_series_new("", 2000, 7, small, NULL, NULL, NULL);
    ck_assert_uint_eq(tf_series_outliers(s, o, 4), 0);
    tf_series_free(s);

    /* Below: 40 among counts near 400 is flagged as a factor 10 low. */
    static const double low[] = {400, NAN, 380, 40, 390, 410};
    s = tf_series_new("", 2000, 6, low, NULL, NULL, NULL);
    ck_assert_uint_eq(tf_series_outliers(s, o, 4), 1);
    ck_assert_uint_eq(o[0].index, 3);
    ck_assert(o[0].factor < 1.0 / TF_SERIES_OUTLIER_FACTOR);
    tf_series_free(s);

    /* Two surveyed neighbours are too few to judge. */
    static const double short_run[] = {10, 1000, 10};
    s = tf_series_new("", 2000, 3, short_run, NULL, NULL, NULL);
    ck_assert_uint_eq(tf_series_outliers(s, o, 4), 0);
    tf_series_free(s);
}
END_TEST

/* ---- bad files ---- */

typedef struct {
    char file[128];
    long line;
    char phrase[256];
} expectation;

/* Reads tests/data/bad/EXPECT: "file line phrase..." per line, '#' comments. The phrase is found
 * in the message or in its hint. */
static size_t read_expect(expectation *out, size_t max)
{
    FILE *f = fopen(TF_TEST_DATA("bad/EXPECT"), "r");
    ck_assert_ptr_nonnull(f);
    char buf[512];
    size_t n = 0;
    while (fgets(buf, sizeof buf, f)) {
        if (buf[0] == '#' || buf[0] == '\n')
            continue;
        ck_assert_uint_lt(n, max);
        int used = 0;
        ck_assert_int_eq(sscanf(buf, "%127s %ld %n", out[n].file, &out[n].line, &used), 2);
        snprintf(out[n].phrase, sizeof out[n].phrase, "%s", buf + used);
        out[n].phrase[strcspn(out[n].phrase, "\n")] = '\0';
        ck_assert_uint_gt(strlen(out[n].phrase), 0);
        n++;
    }
    fclose(f);
    return n;
}

START_TEST(every_bad_file_fails_as_expected)
{
    static expectation ex[100];
    size_t n = read_expect(ex, 100);
    ck_assert_uint_ge(n, 30);
    for (size_t i = 0; i < n; i++) {
        char path[512];
        snprintf(path, sizeof path, TF_TEST_DATA("bad/%.127s"), ex[i].file);
        tf_error err;
        tf_error_init(&err);
        tf_survey *sv = (tf_survey *)&err; /* must be overwritten with NULL */
        tf_status st = tf_survey_read(path, &sv, &err);
        ck_assert_msg(st != TF_OK, "%s was accepted", path);
        ck_assert_ptr_null(sv);
        ck_assert_int_eq(st, err.items[0].status);
        /* One fault per file, so exactly one message: no follow-on errors. */
        ck_assert_msg(err.n_items == 1, "%s: %zu messages, first: %s", path, err.n_items, err.items[0].what);
        ck_assert_str_eq(err.items[0].file, path);
        ck_assert_msg(err.items[0].line == ex[i].line, "%s: line %ld, want %ld (%s)", path, err.items[0].line,
                      ex[i].line, err.items[0].what);
        ck_assert_msg(strstr(err.items[0].what, ex[i].phrase) || strstr(err.items[0].hint, ex[i].phrase),
                      "%s: '%s' (hint '%s') lacks '%s'", path, err.items[0].what, err.items[0].hint, ex[i].phrase);
        ck_assert_msg(err.items[0].hint[0], "%s: no hint", path);
    }
}
END_TEST

/* Every file in bad/ has its line in EXPECT, so none goes unchecked. */
START_TEST(every_bad_file_is_listed)
{
    static expectation ex[100];
    size_t n = read_expect(ex, 100);
    DIR *d = opendir(TF_TEST_DATA("bad"));
    ck_assert_ptr_nonnull(d);
    size_t n_files = 0;
    struct dirent *e;
    while ((e = readdir(d))) {
        if (e->d_name[0] == '.' || !strcmp(e->d_name, "EXPECT"))
            continue;
        n_files++;
        bool found = false;
        for (size_t i = 0; i < n && !found; i++)
            found = !strcmp(ex[i].file, e->d_name);
        ck_assert_msg(found, "%s is not in EXPECT", e->d_name);
    }
    closedir(d);
    ck_assert_uint_eq(n_files, n);
}
END_TEST

START_TEST(several_errors_collected_in_line_order)
{
    const char *path = TF_TEST_DATA("multi/several-errors.csv");
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv;
    tf_status st = tf_survey_read(path, &sv, &err);
    ck_assert_ptr_null(sv);
    ck_assert_uint_eq(err.n_items, 5);
    ck_assert_uint_eq(err.n_dropped, 0);
    static const long lines[] = {4, 6, 7, 9, 11}, cols[] = {3, 4, 2, 2, 5};
    static const char *const phrases[] = {"count -3 is negative", "effort 0 is not a positive number",
                                          "year '20x5' is not a whole number",
                                          "year 2003 appears twice for population 'a' (first on line 5)",
                                          "the row has 5 fields but the header has 4"};
    for (size_t i = 0; i < 5; i++) {
        ck_assert_int_eq(err.items[i].line, lines[i]);
        ck_assert_int_eq(err.items[i].column, cols[i]);
        ck_assert_ptr_nonnull(strstr(err.items[i].what, phrases[i]));
    }
    /* The first error in file order decides the status. */
    ck_assert_int_eq(st, TF_ERR_RANGE);
}
END_TEST

START_TEST(error_cap_counts_dropped_messages)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv;
    ck_assert_int_eq(tf_survey_read(TF_TEST_DATA("multi/error-cap.csv"), &sv, &err), TF_ERR_PARSE);
    ck_assert_ptr_null(sv);
    ck_assert_uint_eq(err.n_items, TF_ERROR_MAX);
    ck_assert_uint_eq(err.n_dropped, 30 - TF_ERROR_MAX);
    for (size_t i = 0; i < TF_ERROR_MAX; i++)
        ck_assert_int_eq(err.items[i].line, (long)i + 3);
}
END_TEST

START_TEST(earlier_messages_in_the_record_are_kept)
{
    tf_error err;
    tf_error_init(&err);
    tf_error_add(&err, TF_ERR_USAGE, NULL, 99, 0, NULL, "earlier");
    tf_survey *sv;
    tf_status st = tf_survey_read(TF_TEST_DATA("bad/negative-count.csv"), &sv, &err);
    ck_assert_int_eq(st, TF_ERR_RANGE);
    ck_assert_uint_eq(err.n_items, 2);
    ck_assert_str_eq(err.items[0].what, "earlier");
    ck_assert_int_eq(err.items[1].line, 4);
}
END_TEST

START_TEST(no_error_record_needed)
{
    tf_survey *sv;
    ck_assert_int_ne(tf_survey_read(TF_TEST_DATA("bad/count-nan.csv"), &sv, NULL), TF_OK);
    ck_assert_ptr_null(sv);
    ck_assert_int_eq(tf_survey_read(GOOD("comma-basic.csv"), &sv, NULL), TF_OK);
    tf_survey_free(sv);
    tf_survey_free(NULL);
}
END_TEST

/* The duplicate on line 3 is only found once rows are grouped, after line 5's bad count; the
 * status and the message order still follow the file. */
START_TEST(status_is_the_first_problem_in_the_file)
{
    static const char text[] = "year,count\n2001,1\n2001,2\n2002,3\n2003,x\n2004,5\n2005,6\n";
    tf_survey *sv;
    ck_assert_int_eq(tf_survey_parse("m.csv", text, sizeof text - 1, &sv, NULL), TF_ERR_INVALID);
    ck_assert_ptr_null(sv);
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_parse("m.csv", text, sizeof text - 1, &sv, &err), TF_ERR_INVALID);
    ck_assert_uint_eq(err.n_items, 2);
    ck_assert_int_eq(err.items[0].line, 3);
    ck_assert_int_eq(err.items[0].status, TF_ERR_INVALID);
    ck_assert_int_eq(err.items[1].line, 5);
    ck_assert_int_eq(err.items[1].status, TF_ERR_PARSE);
}
END_TEST

START_TEST(unopenable_files_give_io_errors)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv;
    ck_assert_int_eq(tf_survey_read(TF_TEST_DATA("bad/no-such-file.csv"), &sv, &err), TF_ERR_IO);
    ck_assert_ptr_null(sv);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, strerror(ENOENT)));
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_read(TF_TEST_DATA("bad"), &sv, &err), TF_ERR_IO);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, strerror(EISDIR)));
}
END_TEST

START_TEST(huge_file_refused_before_reading)
{
    char path[] = "/tmp/tf-survey-big-XXXXXX";
    int fd = mkstemp(path);
    ck_assert_int_ge(fd, 0);
    /* Sparse, so the test writes nothing to disk. */
    ck_assert_int_eq(ftruncate(fd, TF_SURVEY_MAX_BYTES + 1), 0);
    close(fd);
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv;
    tf_status st = tf_survey_read(path, &sv, &err);
    unlink(path);
    ck_assert_int_eq(st, TF_ERR_RANGE);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "larger than 32 MiB"));
}
END_TEST

/* ---- hostile input through tf_survey_parse ---- */

static tf_status parse(const char *data, size_t len, tf_error *err)
{
    tf_error_init(err);
    tf_survey *sv;
    tf_status st = tf_survey_parse("mem.csv", data, len, &sv, err);
    ck_assert_int_eq(st == TF_OK, sv != NULL);
    ck_assert_int_eq(st == TF_OK, err->n_items == 0);
    tf_survey_free(sv);
    return st;
}

START_TEST(memory_input_matches_file_input)
{
    static const char text[] = "year;count\n2001;4\n2002;5\n2003;6\n2004;7\n2005;8\n2006;9";
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv;
    /* Not NUL-terminated: the reader must stay inside len (the last row is cut to "2006;"). */
    ck_assert_int_eq(tf_survey_parse("mem.csv", text, sizeof text - 2, &sv, &err), TF_OK);
    static const double want[] = {4, 5, 6, 7, 8, NAN};
    expect_series(tf_survey_series(sv, 0), "", 2001, want, 6);
    tf_survey_free(sv);
}
END_TEST

START_TEST(very_long_line)
{
    size_t n = 1 << 20;
    char *buf = malloc(n + 32);
    ck_assert_ptr_nonnull(buf);
    memcpy(buf, "year,count\n2001,", 16);
    memset(buf + 16, '7', n);
    tf_error err;
    ck_assert_int_eq(parse(buf, n + 16, &err), TF_ERR_RANGE); /* a million-digit count is > 1e9 */
    ck_assert_int_eq(err.items[0].line, 2);
    ck_assert_uint_lt(strlen(err.items[0].what), sizeof err.items[0].what); /* the value is cut short */
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "..."));
    memset(buf, 'a', n);
    ck_assert_int_eq(parse(buf, n, &err), TF_ERR_PARSE); /* one huge header field: no year column */
    free(buf);
}
END_TEST

START_TEST(too_many_rows)
{
    size_t n_rows = TF_SURVEY_MAX_ROWS + 1;
    char *buf = malloc(16 + n_rows * 16);
    ck_assert_ptr_nonnull(buf);
    size_t len = (size_t)sprintf(buf, "population,year,count\n");
    for (size_t i = 0; i < n_rows; i++)
        len += (size_t)sprintf(buf + len, "p%zu,2001,1\n", i % 1000);
    tf_error err;
    ck_assert_int_eq(parse(buf, len, &err), TF_ERR_RANGE);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "more than 100000 data rows"));
    ck_assert_int_eq(err.items[0].line, (long)n_rows + 1);
    free(buf);
}
END_TEST

/* splitmix64 (Steele, Lea & Flood 2014) as a throw-away byte source for junk input. */
static uint64_t next(uint64_t *s)
{
    uint64_t z = (*s += 0x9e3779b97f4a7c15u);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9u;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebu;
    return z ^ (z >> 31);
}

START_TEST(random_junk_never_crashes)
{
    /* Bytes drawn mostly from CSV's own alphabet, so the junk reaches deep into the reader, with
     * some arbitrary bytes mixed in. Each result must be consistent (checked in parse) and every
     * message must carry the file name. */
    static const char alphabet[] = "year,count,population,effort;note\"#\n\r 0123456789.-eNA\t";
    uint64_t seed = 20260301;
    char buf[600];
    size_t n_ok = 0;
    for (int iter = 0; iter < 3000; iter++) {
        size_t len = next(&seed) % sizeof buf;
        size_t k = 0;
        if (iter % 2) /* half the inputs start with a usable header to get past it */
            k = (size_t)snprintf(buf, sizeof buf, "population,year,count,effort\n");
        for (; k < len; k++) {
            uint64_t r = next(&seed);
            buf[k] = r % 8 ? alphabet[(r >> 8) % (sizeof alphabet - 1)] : (char)(r >> 16);
        }
        tf_error err;
        tf_status st = parse(buf, len, &err);
        n_ok += st == TF_OK;
        for (size_t i = 0; i < err.n_items; i++) {
            ck_assert_str_eq(err.items[i].file, "mem.csv");
            ck_assert_int_ge(err.items[i].line, 1);
        }
    }
    ck_assert_uint_lt(n_ok, 3000); /* junk is junk */
}
END_TEST

/* ---- batch reading: a faulty population is set aside, the others read ---- */

static const char batch_text[] =
    "population,year,count\n"
    "a,2000,10\na,2001,12\na,2002,11\na,2003,14\na,2004,13\n"
    "b,2000,10\nb,2001,x\nb,2002,11\nb,2002,12\nb,2003,14\nb,2004,13\n" /* lines 8 and 10 */
    "c,2000,5\nc,2001,6\nc,2002,7\nc,2003,8\nc,2004,9\n"
    "d,2000,5\nd,2001,6\n";                                            /* too few years */

START_TEST(batch_sets_faulty_populations_aside)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    ck_assert_int_eq(tf_survey_parse_batch("mem", batch_text, sizeof batch_text - 1, 0, &sv, &err), TF_OK);
    ck_assert_uint_eq(err.n_items, 0);
    ck_assert_uint_eq(tf_survey_n_series(sv), 2);
    ck_assert_str_eq(tf_series_label(tf_survey_series(sv, 0)), "a");
    ck_assert_str_eq(tf_series_label(tf_survey_series(sv, 1)), "c");
    ck_assert_uint_eq(tf_survey_series_order(sv, 0), 0);
    ck_assert_uint_eq(tf_survey_series_order(sv, 1), 2);
    ck_assert_uint_eq(tf_survey_n_rejected(sv), 2);
    const tf_survey_rejected *b = tf_survey_rejected_at(sv, 0), *d = tf_survey_rejected_at(sv, 1);
    ck_assert_str_eq(b->label, "b");
    ck_assert_uint_eq(b->order, 1);
    /* The unreadable count comes first; the twice-given year 2002 is the second problem. */
    ck_assert_int_eq(b->line, 8);
    ck_assert_int_eq(b->column, 3);
    ck_assert_int_eq(b->status, TF_ERR_PARSE);
    ck_assert_uint_eq(b->n_problems, 2);
    ck_assert_ptr_nonnull(strstr(b->what, "count 'x' is not a number"));
    ck_assert_str_eq(d->label, "d");
    ck_assert_uint_eq(d->order, 3);
    ck_assert_ptr_nonnull(strstr(d->what, "surveyed year"));
    ck_assert_ptr_null(tf_survey_rejected_at(sv, 2));
    tf_survey_free(sv);

    /* The strict reading of the same text still refuses the file, naming both problems of b. */
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_parse("mem", batch_text, sizeof batch_text - 1, &sv, &err), TF_ERR_PARSE);
    ck_assert_ptr_null(sv);
    ck_assert_uint_eq(err.n_items, 3);
}
END_TEST

/* A problem that belongs to no population fails the batch reading too, with the same messages
 * as the strict one. */
START_TEST(batch_fails_on_file_problems_like_strict)
{
    static const char text[] = "population,year,count\n"
                               "a,2000,10\na,2001,x\na,2002,11\na,2003,14\na,2004,13\n"
                               ",2000,3\n";   /* no label */
    tf_error e1, e2;
    tf_error_init(&e1);
    tf_error_init(&e2);
    tf_survey *sv = NULL;
    tf_status s1 = tf_survey_parse("mem", text, sizeof text - 1, &sv, &e1);
    tf_status s2 = tf_survey_parse_batch("mem", text, sizeof text - 1, 0, &sv, &e2);
    ck_assert_int_ne(s2, TF_OK);
    ck_assert_ptr_null(sv);
    ck_assert_int_eq(s1, s2);
    ck_assert_uint_eq(e1.n_items, e2.n_items);
    for (size_t i = 0; i < e1.n_items; i++) {
        ck_assert_int_eq(e1.items[i].line, e2.items[i].line);
        ck_assert_str_eq(e1.items[i].what, e2.items[i].what);
        ck_assert_str_eq(e1.items[i].hint, e2.items[i].hint);
    }
}
END_TEST

/* Every bad file: the batch reading either fails as the strict one does, or sets its population
 * aside with the strict reading's first problem. */
START_TEST(batch_reading_of_every_bad_file)
{
    static expectation ex[100];
    size_t n = read_expect(ex, 100);
    for (size_t i = 0; i < n; i++) {
        char path[512];
        snprintf(path, sizeof path, TF_TEST_DATA("bad/%.127s"), ex[i].file);
        tf_error e1, e2;
        tf_error_init(&e1);
        tf_error_init(&e2);
        tf_survey *sv = NULL;
        tf_status s1 = tf_survey_read(path, &sv, &e1);
        tf_status s2 = tf_survey_read_batch(path, 0, &sv, &e2);
        if (s2 != TF_OK) {
            ck_assert_msg(s1 == s2, "%s: batch status %d, strict %d", path, s2, s1);
            ck_assert_uint_eq(e1.n_items, e2.n_items);
            continue;
        }
        ck_assert_uint_eq(e2.n_items, 0);
        ck_assert_msg(tf_survey_n_rejected(sv) >= 1, "%s: nothing set aside", path);
        const tf_survey_rejected *x = tf_survey_rejected_at(sv, 0);
        ck_assert_int_eq(x->status, s1);
        ck_assert_int_eq(x->line, e1.items[0].line);
        ck_assert_str_eq(x->what, e1.items[0].what);
        tf_survey_free(sv);
    }
}
END_TEST

START_TEST(batch_row_limit_is_the_callers)
{
    static const char text[] = "year,count\n2000,1\n2001,2\n2002,3\n2003,4\n2004,5\n2005,6\n";
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    ck_assert_int_eq(tf_survey_parse_batch("mem", text, sizeof text - 1, 5, &sv, &err), TF_ERR_RANGE);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "more than 5 data rows"));
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_parse_batch("mem", text, sizeof text - 1, 6, &sv, &err), TF_OK);
    ck_assert_uint_eq(tf_survey_n_series(sv), 1);
    tf_survey_free(sv);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("survey");
    TCase *good = tcase_create("good");
    tcase_add_test(good, comma_basic);
    tcase_add_test(good, semicolon_and_effort);
    tcase_add_test(good, bom_and_crlf);
    tcase_add_test(good, lone_cr_line_ends);
    tcase_add_test(good, comments_and_gaps);
    tcase_add_test(good, unsorted_years_are_sorted);
    tcase_add_test(good, populations_grouped_in_order_of_appearance);
    tcase_add_test(good, semicolon_multi_with_quotes_and_effort);
    tcase_add_test(good, na_spellings);
    tcase_add_test(good, extra_columns_and_case);
    tcase_add_test(good, no_trailing_newline);
    tcase_add_test(good, fractional_counts_accepted);
    tcase_add_test(good, quoted_values_over_several_lines);
    tcase_add_test(good, blank_and_empty_rows_skipped);
    tcase_add_test(good, utf8_labels);
    tcase_add_test(good, missing_rows_at_both_ends_belong_to_the_span);
    tcase_add_test(good, every_good_file_reads);
    tcase_add_test(good, fractional_counts_refused_unless_estimates);
    tcase_add_test(good, number_forms_share_one_hint);
    tcase_add_test(good, tab_separated);
    tcase_add_test(good, outliers_flagged);
    suite_add_tcase(s, good);
    TCase *bad = tcase_create("bad");
    tcase_add_test(bad, every_bad_file_fails_as_expected);
    tcase_add_test(bad, every_bad_file_is_listed);
    tcase_add_test(bad, several_errors_collected_in_line_order);
    tcase_add_test(bad, error_cap_counts_dropped_messages);
    tcase_add_test(bad, earlier_messages_in_the_record_are_kept);
    tcase_add_test(bad, no_error_record_needed);
    tcase_add_test(bad, status_is_the_first_problem_in_the_file);
    tcase_add_test(bad, unopenable_files_give_io_errors);
    tcase_add_test(bad, huge_file_refused_before_reading);
    suite_add_tcase(s, bad);
    TCase *batch = tcase_create("batch");
    tcase_add_test(batch, batch_sets_faulty_populations_aside);
    tcase_add_test(batch, batch_fails_on_file_problems_like_strict);
    tcase_add_test(batch, batch_reading_of_every_bad_file);
    tcase_add_test(batch, batch_row_limit_is_the_callers);
    suite_add_tcase(s, batch);
    TCase *hostile = tcase_create("hostile");
    tcase_set_timeout(hostile, 30);
    tcase_add_test(hostile, memory_input_matches_file_input);
    tcase_add_test(hostile, very_long_line);
    tcase_add_test(hostile, removals_and_releases);
    tcase_add_test(hostile, too_many_rows);
    tcase_add_test(hostile, random_junk_never_crashes);
    suite_add_tcase(s, hostile);
    return s;
}

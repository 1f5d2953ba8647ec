/* Unit tests for the workbook writer (export/workbook.c). The sample_workbook test also leaves
 * a sample workbook, its CSV twins and an edge-case workbook in $BUILD/tests/out/workbook/ for
 * tests/ref/test_workbook_readback.py, which reads them back with openpyxl. The data are an
 * invented scenario (a reed-bed colony surveyed 2001-2020). */
#include "tf_test.h"

#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "export/atomic.h"
#include "export/csv_out.h"
#include "export/table.h"
#include "export/workbook.h"

#define OK(call)                                                                                                       \
    do {                                                                                                               \
        tf_status st_ = (call);                                                                                        \
        if (st_ != TF_OK) {                                                                                            \
            tf_error_print(&err, "test", stderr);                                                                     \
            ck_abort_msg("%s failed: %s", #call, tf_strerror(st_));                                                    \
        }                                                                                                              \
    } while (0)

static char out_dir[512];

/* The directory the sample goes to: $BUILD/tests/out/workbook (BUILD as tests/run-all sets it). */
static const char *sample_dir(void)
{
    const char *b = getenv("BUILD");
    snprintf(out_dir, sizeof out_dir, "%s/tests/out/workbook", b && b[0] ? b : "build");
    return out_dir;
}

/* Removes the plain files of dir (the previous run's sample), so a failed run leaves nothing stale. */
static void empty_dir(const char *dir)
{
    DIR *d = opendir(dir);
    if (!d)
        return;
    struct dirent *e;
    char p[1024];
    while ((e = readdir(d))) {
        if (e->d_name[0] == '.' && (!e->d_name[1] || (e->d_name[1] == '.' && !e->d_name[2])))
            continue;
        snprintf(p, sizeof p, "%s/%s", dir, e->d_name);
        unlink(p);
    }
    closedir(d);
}

/* Number of entries of dir whose name contains ".tmp-" (leftover temporaries). */
static int count_temps(const char *dir)
{
    DIR *d = opendir(dir);
    ck_assert_ptr_nonnull(d);
    int n = 0;
    struct dirent *e;
    while ((e = readdir(d)))
        n += strstr(e->d_name, ".tmp-") != NULL;
    closedir(d);
    return n;
}

static int file_exists(const char *p)
{
    struct stat st;
    return stat(p, &st) == 0;
}

static tf_table *trend_table(tf_error *err, size_t *cols)
{
    tf_table *t = tf_table_new("Trend", err);
    ck_assert_ptr_nonnull(t);
    ck_assert_int_eq(tf_table_add_column(t, "Year", "calendar year of the survey", TF_COL_YEAR, &cols[0], err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "Count", "animals counted (blank = not surveyed)", TF_COL_INTEGER, &cols[1], err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "Median", "posterior median of abundance (animals)", TF_COL_NUMBER, &cols[2], err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "Lower 95%", "2.5 % posterior quantile of abundance (animals)", TF_COL_NUMBER,
                                         &cols[3], err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "Upper 95%", "97.5 % posterior quantile of abundance (animals)", TF_COL_NUMBER,
                                         &cols[4], err),
                     TF_OK);
    /* Invented numbers on a smooth decline, not the output of any fit. */
    for (int i = 0; i < 20; i++) {
        double m = 420.0 * exp(-0.031 * i) + 0.1234567 * i;
        double count = (i == 6 || i == 13) ? NAN : floor(m * (1 + 0.08 * sin(1.7 * i)));
        double row[5] = {2001 + i, count, m, m * 0.81, m * 1.23};
        ck_assert_int_eq(tf_table_add_row_numbers(t, row, 5, err), TF_OK);
    }
    ck_assert_int_eq(tf_table_add_note(t, TF_NOTE_INFO, "Counts of an invented reed-bed colony; estimates from a Ricker "
                                                       "state-space model with Poisson counting error.", err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_note(t, TF_NOTE_CAUTION, "Two survey years are missing (2007, 2014): the band widens there.",
                                       err),
                     TF_OK);
    return t;
}

static tf_table *projection_table(tf_error *err)
{
    tf_table *t = tf_table_new("Projection / risk", err);
    ck_assert_ptr_nonnull(t);
    ck_assert_int_eq(tf_table_add_column(t, "Year", "projected calendar year", TF_COL_YEAR, NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "Median N", "posterior predictive median abundance (animals)", TF_COL_NUMBER,
                                         NULL, err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "P(N<50)", "probability of having fallen below 50 animals by this year",
                                         TF_COL_PROBABILITY, NULL, err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "P(N<20)", "probability of having fallen below 20 animals by this year",
                                         TF_COL_PROBABILITY, NULL, err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "Halved", "chance that abundance is below half of 2020's", TF_COL_PERCENT, NULL,
                                         err),
                     TF_OK);
    for (int i = 0; i < 25; i++) {
        double h = i + 1;
        double row[5] = {2021 + i, 230.0 * exp(-0.03 * h), 1 - exp(-0.004 * h * h / 3), 1 - exp(-0.0009 * h * h / 3),
                         1 / (1 + exp(-(h - 18) / 4.0))};
        ck_assert_int_eq(tf_table_add_row_numbers(t, row, 5, err), TF_OK);
    }
    ck_assert_int_eq(tf_table_add_notef(t, TF_NOTE_INFO, err, "%d simulated trajectories per posterior draw.", 10), TF_OK);
    return t;
}

static tf_table *models_table(tf_error *err)
{
    tf_table *t = tf_table_new("Model comparison", err);
    ck_assert_ptr_nonnull(t);
    ck_assert_int_eq(tf_table_add_column(t, "Model", "growth model, counting error", TF_COL_TEXT, NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "log ML", "log marginal likelihood (natural log)", TF_COL_NUMBER, NULL, err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "MC s.e.", "Monte Carlo standard error of log ML", TF_COL_NUMBER, NULL, err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "Posterior probability", "posterior model probability, equal prior weights",
                                         TF_COL_PERCENT, NULL, err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "Max R-hat", "largest split R-hat over parameters (above 1.01: not converged)",
                                         TF_COL_NUMBER, NULL, err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "Draws", "posterior draws kept", TF_COL_INTEGER, NULL, err), TF_OK);
    static const char *names[] = {"Ricker, Poisson", "Gompertz, \"log-normal\"", "exponential, negative binomial",
                                  "theta-logistic, Poisson"};
    static const double lml[] = {-212.4172, -213.9051, -219.33, -INFINITY};
    static const double se[] = {0.0412, 0.0559, 0.1931, NAN};
    static const double prob[] = {0.8149, 0.1839, 0.0012, 0.0};
    static const double rhat[] = {1.0031, 1.0046, 1.0312, NAN};
    for (size_t i = 0; i < 4; i++) {
        size_t r;
        ck_assert_int_eq(tf_table_add_row(t, &r, err), TF_OK);
        ck_assert_int_eq(tf_table_set_text(t, r, 0, names[i], err), TF_OK);
        tf_table_set_number(t, r, 1, lml[i]);
        tf_table_set_number(t, r, 2, se[i]);
        tf_table_set_number(t, r, 3, prob[i]);
        tf_table_set_number(t, r, 4, rhat[i]);
        tf_table_set_number(t, r, 5, 4000);
    }
    ck_assert_int_eq(tf_table_set_text(t, 3, 4, "n/a", err), TF_OK);
    ck_assert_int_eq(tf_table_set_warning(t, 2, 4, err), TF_OK);           /* R-hat 1.0312 > 1.01 */
    ck_assert_int_eq(tf_table_set_warning(t, 3, TF_TABLE_WHOLE_ROW, err), TF_OK); /* the failed fit */
    ck_assert_int_eq(tf_table_add_note(t, TF_NOTE_CAUTION, "The theta-logistic fit failed (likelihood zero at every draw).",
                                       err),
                     TF_OK);
    return t;
}

static tf_table *summary_table(tf_error *err)
{
    tf_table *t = tf_table_new_summary("Summary", err);
    ck_assert_ptr_nonnull(t);
    ck_assert_int_eq(tf_table_add_note(t, TF_NOTE_INFO, "Trend and risk for an invented reed-bed colony.", err), TF_OK);
    ck_assert_int_eq(tf_table_add_heading(t, "Survey", err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_text(t, "Population", "Reed-bed colony A", NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "First year", 2001, TF_COL_YEAR, NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Years surveyed", 18, TF_COL_INTEGER, "of 20 in the span", err), TF_OK);
    ck_assert_int_eq(tf_table_add_heading(t, "Trend", err), TF_OK);
    /* A long text with no note: spread over the value and note columns, wrapped. */
    ck_assert_int_eq(tf_table_add_item_text(t, "In brief",
                                            "The counts point to a decline of about 2.6 % a year; the chance of "
                                            "falling below 20 animals within 25 years is about 7 %, and below 10 "
                                            "animals less than 0.1 %. Read these with the cautions below.",
                                            NULL, err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_item_text(t, "Best model", "Ricker, Poisson", NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Growth rate r", 0.2871234, TF_COL_NUMBER, "per year, posterior median",
                                              err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Carrying capacity K", 512.3456, TF_COL_NUMBER, "animals", err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Probability of decline", 0.9312, TF_COL_PERCENT,
                                              "posterior probability that abundance in 2020 is below 2001's", err),
                     TF_OK);
    /* A percentage with a sign (a change) and shares near 0 and 1. */
    ck_assert_int_eq(tf_table_add_item_number(t, "Annual change", -0.0256, TF_COL_PERCENT, "per year", err), TF_OK);
    ck_assert_int_eq(tf_table_add_heading(t, "Risk", err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Quasi-extinction by 2045", 0.0731, TF_COL_PROBABILITY,
                                              "probability of falling below 20 animals within 25 years; read it "
                                              "together with its Monte Carlo error and the model uncertainty shown on "
                                              "the comparison sheet",
                                              err),
                     TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Below 10 animals by 2045", 0.0004, TF_COL_PERCENT, NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Above 5 animals in 2045", 0.9996, TF_COL_PERCENT, NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Max R-hat", 1.0312, TF_COL_NUMBER, "above 1.01: chains disagree", err),
                     TF_OK);
    ck_assert_int_eq(tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err), TF_OK);
    return t;
}

START_TEST(sample_workbook)
{
    tf_error err;
    tf_error_init(&err);
    const char *dir = sample_dir();
    OK(tf_atomic_mkdirs(dir, NULL, &err));
    empty_dir(dir);
    char path[1024];
    snprintf(path, sizeof path, "%s/sample.xlsx", dir);

    size_t tc[5];
    tf_table *summary = summary_table(&err), *trend = trend_table(&err, tc), *proj = projection_table(&err),
             *models = models_table(&err);
    tf_table *all[] = {summary, trend, proj, models};
    for (size_t i = 0; i < 4; i++)
        OK(tf_csv_write_in_dir(all[i], dir, NULL, NULL, 0, &err));

    tf_workbook *wb = tf_workbook_new(path, NULL, &err);
    ck_assert_ptr_nonnull(wb);
    tf_sheet *s_sum, *s_trend, *s_proj, *s_models;
    OK(tf_workbook_add_table(wb, summary, &s_sum, &err));
    OK(tf_workbook_add_table(wb, trend, &s_trend, &err));
    OK(tf_workbook_add_table(wb, proj, &s_proj, &err));
    OK(tf_workbook_add_table(wb, models, &s_models, &err));
    ck_assert_str_eq(tf_sheet_name(s_proj), "Projection _ risk");

    tf_chart_series ts[] = {{tc[1], "Observed", TF_SERIES_POINTS},
                            {tc[2], "Trend (median)", TF_SERIES_LINE},
                            {tc[3], NULL, TF_SERIES_BAND},
                            {tc[4], NULL, TF_SERIES_BAND}};
    tf_chart_spec trend_chart = {.kind = TF_CHART_XY, .title = "Counts and estimated abundance", .x_title = "Year",
                                 .y_title = "Animals", .data = s_trend, .x_column = tc[0], .series = ts, .n_series = 4};
    OK(tf_workbook_add_chart(wb, &trend_chart, &err));

    tf_chart_series qs[] = {{2, "below 50", TF_SERIES_LINE}, {3, "below 20", TF_SERIES_LINE}};
    tf_chart_spec risk_chart = {.kind = TF_CHART_XY, .title = "Quasi-extinction risk", .x_title = "Year",
                                .y_title = "Probability", .data = s_proj, .x_column = 0, .series = qs, .n_series = 2};
    OK(tf_workbook_add_chart(wb, &risk_chart, &err));

    tf_chart_series ms[] = {{3, NULL, TF_SERIES_LINE}};
    tf_chart_spec model_chart = {.kind = TF_CHART_COLUMNS, .title = "Posterior model probabilities", .y_title = "Probability",
                                 .data = s_models, .x_column = 0, .series = ms, .n_series = 1, .n_rows = 3,
                                 .place = s_sum, .anchor = "B24"};   /* given: below the summary, as the automatic place is below a table */
    OK(tf_workbook_add_chart(wb, &model_chart, &err));

    /* A bad spec is refused and leaves the workbook writable. */
    tf_chart_series bad[] = {{99, NULL, TF_SERIES_LINE}};
    tf_chart_spec bad_chart = {.kind = TF_CHART_XY, .data = s_trend, .series = bad, .n_series = 1};
    ck_assert_int_eq(tf_workbook_add_chart(wb, &bad_chart, &err), TF_ERR_INVALID);
    bad_chart.series = ts;
    bad_chart.anchor = "3H";
    ck_assert_int_eq(tf_workbook_add_chart(wb, &bad_chart, &err), TF_ERR_INVALID);
    bad_chart.anchor = NULL;
    bad_chart.first_row = 20;
    ck_assert_int_eq(tf_workbook_add_chart(wb, &bad_chart, &err), TF_ERR_INVALID);
    bad_chart.first_row = 0;
    bad_chart.n_series = 0;
    ck_assert_int_eq(tf_workbook_add_chart(wb, &bad_chart, &err), TF_ERR_INVALID);
    tf_error_init(&err);

    for (size_t i = 0; i < 4; i++)
        tf_table_free(all[i]);   /* the workbook copied everything it needs */
    OK(tf_workbook_close(wb, &err));
    ck_assert(file_exists(path));
    ck_assert_int_eq(count_temps(dir), 0);
}
END_TEST

/* Names that need cleaning or de-duplication, bad UTF-8 and control characters, infinities. */
START_TEST(edge_workbook)
{
    tf_error err;
    tf_error_init(&err);
    const char *dir = sample_dir();
    OK(tf_atomic_mkdirs(dir, NULL, &err));
    char path[1024];
    snprintf(path, sizeof path, "%s/edge.xlsx", dir);
    tf_workbook *wb = tf_workbook_new(path, NULL, &err);
    ck_assert_ptr_nonnull(wb);
    const char *names[] = {"Results", "results", "A name much longer than thirty-one characters",
                           "A name much longer than thirty-one characters", "'[x]'", "history"};
    const char *want[] = {"Results", "results (2)", "A name much longer than thirty-", "A name much longer than thi (2)",
                          "_x_", "history_"};
    for (size_t i = 0; i < 6; i++) {
        tf_table *t = tf_table_new(names[i], &err);
        ck_assert_ptr_nonnull(t);
        OK(tf_table_add_column(t, "Text", NULL, TF_COL_TEXT, NULL, &err));
        OK(tf_table_add_column(t, "Value", "a number", TF_COL_NUMBER, NULL, &err));
        OK(tf_table_add_row(t, NULL, &err));
        OK(tf_table_set_text(t, 0, 0, "bad \xff byte, bell \a here", &err));
        tf_table_set_number(t, 0, 1, i % 2 ? INFINITY : -INFINITY);
        tf_sheet *s;
        OK(tf_workbook_add_table(wb, t, &s, &err));
        ck_assert_str_eq(tf_sheet_name(s), want[i]);
        tf_table_free(t);
    }
    OK(tf_workbook_close(wb, &err));
    ck_assert_int_eq(count_temps(dir), 0);
}
END_TEST

START_TEST(sheet_names_are_cleaned)
{
    char buf[TF_SHEET_NAME_BUF];
    static const struct {
        const char *in, *out;
    } cases[] = {
        {"a/b:c*d?e[f]g\\h", "a_b_c_d_e_f_g_h"},
        {"'quoted'", "quoted"},
        {"  ' spaced '  ", "spaced"},
        {"", "Sheet"},
        {"''", "Sheet"},
        {"HISTORY", "HISTORY_"},
        {"History of counts", "History of counts"},
        {"tab\there", "tab here"},
        {"\xff\xfe", "__"},
        /* 31 characters, not bytes: 'e' with acute accent is two bytes of UTF-8. */
        {"\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
         "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
         "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
         "\xc3\xa9\xc3\xa9\xc3\xa9",
         "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
         "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
         "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
         "\xc3\xa9"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tf_workbook_clean_sheet_name(cases[i].in, buf, sizeof buf);
        ck_assert_msg(!strcmp(buf, cases[i].out), "case %zu: got '%s', want '%s'", i, buf, cases[i].out);
    }
}
END_TEST

static void write_file(const char *p, const char *text)
{
    FILE *f = fopen(p, "w");
    ck_assert_ptr_nonnull(f);
    fputs(text, f);
    ck_assert_int_eq(fclose(f), 0);
}

static void assert_file_is(const char *p, const char *text)
{
    char buf[256] = {0};
    FILE *f = fopen(p, "r");
    ck_assert_ptr_nonnull(f);
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    fclose(f);
    buf[n] = '\0';
    ck_assert_str_eq(buf, text);
}

static tf_table *tiny_table(tf_error *err)
{
    tf_table *t = tf_table_new("tiny", err);
    ck_assert_ptr_nonnull(t);
    ck_assert_int_eq(tf_table_add_column(t, "x", NULL, TF_COL_NUMBER, NULL, err), TF_OK);
    double v = 1.5;
    ck_assert_int_eq(tf_table_add_row_numbers(t, &v, 1, err), TF_OK);
    return t;
}

START_TEST(refuses_input_and_missing_dir)
{
    tf_error err;
    tf_error_init(&err);
    char dir[] = "/tmp/tf-wb-XXXXXX";
    ck_assert_ptr_nonnull(mkdtemp(dir));
    char input[256], link[256], missing[256];
    snprintf(input, sizeof input, "%s/survey.csv", dir);
    snprintf(link, sizeof link, "%s/link.xlsx", dir);
    snprintf(missing, sizeof missing, "%s/no/such/dir/out.xlsx", dir);
    write_file(input, "year,count\n2001,5\n");
    ck_assert_int_eq(symlink(input, link), 0);

    ck_assert_ptr_null(tf_workbook_new(input, input, &err));
    ck_assert_int_eq(tf_error_status(&err), TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "overwrite the input"));
    tf_error_init(&err);
    ck_assert_ptr_null(tf_workbook_new(link, input, &err));   /* a symbolic link to the input */
    ck_assert_int_eq(tf_error_status(&err), TF_ERR_USAGE);
    tf_error_init(&err);
    ck_assert_ptr_null(tf_workbook_new(missing, input, &err));
    ck_assert_int_eq(tf_error_status(&err), TF_ERR_IO);
    ck_assert_str_eq(err.items[0].file, missing);
    assert_file_is(input, "year,count\n2001,5\n");
    ck_assert_int_eq(count_temps(dir), 0);

    unlink(link);
    unlink(input);
    rmdir(dir);
}
END_TEST

/* A libxlsxwriter failure at close (the temporary replaced by a directory, so it cannot be
 * opened for writing) leaves the old output untouched; an earlier failure (a string longer than
 * Excel's 32767 characters) stops the workbook from being written at all. */
START_TEST(failures_leave_old_output)
{
    tf_error err;
    tf_error_init(&err);
    char dir[] = "/tmp/tf-wb-XXXXXX";
    ck_assert_ptr_nonnull(mkdtemp(dir));
    char path[256];
    snprintf(path, sizeof path, "%s/out.xlsx", dir);
    write_file(path, "old");

    tf_table *t = tiny_table(&err);
    tf_workbook *wb = tf_workbook_new(path, NULL, &err);
    ck_assert_ptr_nonnull(wb);
    OK(tf_workbook_add_table(wb, t, NULL, &err));
    /* Find the temporary and put a directory in its place. */
    DIR *d = opendir(dir);
    struct dirent *e;
    char temp[512] = "";
    while ((e = readdir(d)))
        if (strstr(e->d_name, ".tmp-"))
            snprintf(temp, sizeof temp, "%s/%s", dir, e->d_name);
    closedir(d);
    ck_assert(temp[0]);
    ck_assert_int_eq(unlink(temp), 0);
    ck_assert_int_eq(mkdir(temp, 0700), 0);
    ck_assert_int_eq(tf_workbook_close(wb, &err), TF_ERR_IO);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "cannot write workbook"));
    assert_file_is(path, "old");
    rmdir(temp);
    ck_assert_int_eq(count_temps(dir), 0);

    tf_error_init(&err);
    wb = tf_workbook_new(path, NULL, &err);
    ck_assert_ptr_nonnull(wb);
    size_t n = 40000;
    char *huge = malloc(n + 1);
    memset(huge, 'a', n);
    huge[n] = '\0';
    tf_table *h = tf_table_new("huge", &err);
    OK(tf_table_add_column(h, "t", NULL, TF_COL_TEXT, NULL, &err));
    OK(tf_table_add_row(h, NULL, &err));
    OK(tf_table_set_text(h, 0, 0, huge, &err));
    ck_assert_int_eq(tf_workbook_add_table(wb, h, NULL, &err), TF_ERR_IO);
    ck_assert_int_ne(tf_workbook_add_table(wb, t, NULL, &err), TF_OK);   /* refused once failed */
    ck_assert_int_eq(tf_workbook_close(wb, &err), TF_ERR_IO);
    assert_file_is(path, "old");
    ck_assert_int_eq(count_temps(dir), 0);

    /* Abandoning a workbook writes nothing. */
    wb = tf_workbook_new(path, NULL, &err);
    ck_assert_ptr_nonnull(wb);
    OK(tf_workbook_add_table(wb, t, NULL, &err));
    tf_workbook_free(wb);
    assert_file_is(path, "old");
    ck_assert_int_eq(count_temps(dir), 0);

    free(huge);
    tf_table_free(h);
    tf_table_free(t);
    unlink(path);
    rmdir(dir);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("workbook");
    TCase *tc = tcase_create("workbook");
    tcase_add_test(tc, sample_workbook);
    tcase_add_test(tc, edge_workbook);
    tcase_add_test(tc, sheet_names_are_cleaned);
    tcase_add_test(tc, refuses_input_and_missing_dir);
    tcase_add_test(tc, failures_leave_old_output);
    suite_add_tcase(s, tc);
    return s;
}

/* Unit tests for the report layout (export/report.c): sheet order, unique CSV names, the contents
 * file, charts checked before writing, the all-or-nothing write (interrupted, protected input,
 * failing workbook) and no temporaries left behind. The tables are invented numbers. */
#define _GNU_SOURCE
#include "tf_test.h"

#include <dirent.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "export/report.h"

static char dir[256];

/* A fresh directory under $BUILD/tests/out/report-<tag>. */
static const char *fresh_dir(const char *tag)
{
    const char *b = getenv("BUILD");
    snprintf(dir, sizeof dir, "%s/tests/out/report-%s", b && b[0] ? b : "build", tag);
    char cmd[1200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s' && mkdir -p '%s'", dir, dir);
    ck_assert_int_eq(system(cmd), 0);
    return dir;
}

static int exists(const char *a, const char *b)
{
    char p[2100];
    snprintf(p, sizeof p, "%s/%s", a, b);
    struct stat st;
    return stat(p, &st) == 0;
}

/* Entries of d (recursively one level into csv/), counting only names that contain part. */
static int count_entries(const char *d, const char *part)
{
    DIR *h = opendir(d);
    if (!h)
        return 0;
    int n = 0;
    struct dirent *e;
    while ((e = readdir(h)))
        if (strcmp(e->d_name, ".") && strcmp(e->d_name, "..") && strstr(e->d_name, part))
            n++;
    closedir(h);
    return n;
}

static char *slurp(const char *a, const char *b)
{
    char p[2100];
    snprintf(p, sizeof p, "%s/%s", a, b);
    FILE *f = fopen(p, "rb");
    ck_assert_ptr_nonnull(f);
    static char buf[8192];
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    buf[n] = 0;
    fclose(f);
    return buf;
}

/* Whether the bytes of the file at path contain name (a zip member name). */
static int has_member(const char *path, const char *name)
{
    FILE *f = fopen(path, "rb");
    ck_assert_ptr_nonnull(f);
    static char buf[1 << 20];
    size_t n = fread(buf, 1, sizeof buf, f);
    fclose(f);
    return memmem(buf, n, name, strlen(name)) != NULL;
}

/* A small year table: year, value, lower, upper (invented numbers). */
static tf_table *year_table(const char *name, tf_error *err)
{
    tf_table *t = tf_table_new(name, err);
    ck_assert_ptr_nonnull(t);
    ck_assert_int_eq(tf_table_add_column(t, "year", "calendar year", TF_COL_YEAR, NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "value", "animals", TF_COL_NUMBER, NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "lower", "2.5 % quantile", TF_COL_NUMBER, NULL, err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "upper", "97.5 % quantile", TF_COL_NUMBER, NULL, err), TF_OK);
    for (int i = 0; i < 6; i++) {
        double v = 100 - 2.5 * i;
        double row[4] = {2010 + i, v, 0.5 * v, 2 * v};
        ck_assert_int_eq(tf_table_add_row_numbers(t, row, 4, err), TF_OK);
    }
    return t;
}

/* Three tables, two of them with names that make the same CSV name, and two charts. */
static tf_report *sample(tf_error *err)
{
    tf_report *r = tf_report_new(err);
    ck_assert_ptr_nonnull(r);
    tf_table *s = tf_table_new_summary("Summary", err);
    ck_assert_ptr_nonnull(s);
    ck_assert_int_eq(tf_table_add_item_number(s, "Abundance", 88.5, TF_COL_NUMBER, NULL, err), TF_OK);
    size_t i0, i1, i2;
    ck_assert_int_eq(tf_report_add_table(r, s, "the first page", &i0, err), TF_OK);
    ck_assert_int_eq(tf_report_add_table(r, year_table("North / trend", err), "trend", &i1, err), TF_OK);
    tf_table *renamed = year_table("first name", err);
    ck_assert_int_eq(tf_table_set_name(renamed, "", err), TF_ERR_INVALID);
    ck_assert_str_eq(tf_table_name(renamed), "first name");
    ck_assert_int_eq(tf_table_set_name(renamed, "north trend", err), TF_OK);
    ck_assert_int_eq(tf_report_add_table(r, renamed, NULL, &i2, err), TF_OK);
    ck_assert_uint_eq(i0, 0);
    ck_assert_uint_eq(i1, 1);
    ck_assert_uint_eq(i2, 2);
    tf_chart_series se[] = {{1, "Estimate", TF_SERIES_LINE}, {2, NULL, TF_SERIES_BAND}, {3, NULL, TF_SERIES_BAND}};
    tf_report_chart c = {.kind = TF_CHART_XY, .title = "Trend", .x_title = "Year", .data = i1, .x_column = 0,
                         .series = se, .n_series = 3, .place = TF_REPORT_SAME_SHEET};
    ck_assert_int_eq(tf_report_add_chart(r, &c, err), TF_OK);
    c.data = i2;
    c.place = i0;   /* drawn on the summary sheet */
    c.anchor = "E2";
    ck_assert_int_eq(tf_report_add_chart(r, &c, err), TF_OK);
    return r;
}

START_TEST(names_and_files)
{
    tf_error err;
    tf_error_init(&err);
    tf_report *r = sample(&err);
    ck_assert_uint_eq(tf_report_n_tables(r), 3);
    ck_assert_str_eq(tf_report_csv_name(r, 0), "summary.csv");
    ck_assert_str_eq(tf_report_csv_name(r, 1), "north-trend.csv");
    ck_assert_str_eq(tf_report_csv_name(r, 2), "north-trend-2.csv");
    ck_assert_ptr_null(tf_report_csv_name(r, 3));
    ck_assert_str_eq(tf_table_name(tf_report_table(r, 1)), "North / trend");

    const char *d = fresh_dir("ok");
    char xlsx[1024], csv[1024];
    snprintf(xlsx, sizeof xlsx, "%s/out.xlsx", d);
    snprintf(csv, sizeof csv, "%s/tables/deeper", d);   /* made with its parents */
    ck_assert_int_eq(tf_report_write(r, xlsx, csv, NULL, NULL, &err), TF_OK);
    ck_assert(exists(d, "out.xlsx"));
    ck_assert(exists(csv, "summary.csv"));
    ck_assert(exists(csv, "north-trend.csv"));
    ck_assert(exists(csv, "north-trend-2.csv"));
    ck_assert_int_eq(count_entries(d, ".tmp-"), 0);
    ck_assert_int_eq(count_entries(csv, ".tmp-"), 0);
    ck_assert_int_eq(count_entries(csv, ".csv"), 4);
    /* The contents file maps the workbook's sheet names (cleaned: '/' -> '_') to the files. */
    const char *contents = slurp(csv, TF_REPORT_CONTENTS_CSV);
    ck_assert_str_eq(contents, "population,file,sheet,about\r\n"
                               ",summary.csv,Summary,the first page\r\n"
                               ",north-trend.csv,North _ trend,trend\r\n"
                               ",north-trend-2.csv,north trend,\r\n");
    ck_assert_str_eq(slurp(csv, "north-trend.csv"), "year,value,lower,upper\r\n"
                                                   "2010,100,50,200\r\n"
                                                   "2011,97.5,48.75,195\r\n"
                                                   "2012,95,47.5,190\r\n"
                                                   "2013,92.5,46.25,185\r\n"
                                                   "2014,90,45,180\r\n"
                                                   "2015,87.5,43.75,175\r\n");
    /* Two charts in the package: zip stores member names uncompressed (APPNOTE 4.3.7). */
    ck_assert(has_member(xlsx, "xl/charts/chart1.xml"));
    ck_assert(has_member(xlsx, "xl/charts/chart2.xml"));
    ck_assert(!has_member(xlsx, "xl/charts/chart3.xml"));
    /* Written again over the old files. */
    ck_assert_int_eq(tf_report_write(r, xlsx, csv, NULL, NULL, &err), TF_OK);
    ck_assert_int_eq(count_entries(csv, ".tmp-"), 0);
    tf_report_free(r);
}
END_TEST

START_TEST(bad_charts)
{
    tf_error err;
    tf_error_init(&err);
    tf_report *r = sample(&err);
    tf_chart_series se[] = {{1, NULL, TF_SERIES_LINE}};
    tf_report_chart c = {.kind = TF_CHART_XY, .data = 1, .x_column = 0, .series = se, .n_series = 1,
                         .place = TF_REPORT_SAME_SHEET};
    tf_report_chart b = c;
    b.data = 9;
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    b = c;
    b.data = 0;   /* the summary table */
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    b = c;
    b.place = 7;
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    b = c;
    b.x_column = 4;
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    b = c;
    se[0].column = 4;
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    se[0].column = 1;
    b.n_series = 0;
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    b = c;
    b.first_row = 6;
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    b = c;
    b.first_row = 2;
    b.n_rows = 5;
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    b.n_rows = 4;
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_OK);
    /* Long form: two series of 3 rows each, one block after the other (rows 0-2 and 3-5). */
    tf_chart_series two[] = {{1, "first", TF_SERIES_LINE}, {2, "second", TF_SERIES_LINE}};
    b = c;
    b.series = two;
    b.n_series = 2;
    b.n_rows = 3;
    b.series_stride = 3;
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_OK);
    b.first_row = 1;   /* the second block would end past row 5 */
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    b.first_row = 0;
    b.n_rows = 0;      /* a stride needs the block length */
    ck_assert_int_eq(tf_report_add_chart(r, &b, &err), TF_ERR_INVALID);
    /* The charts accepted here are also accepted by the workbook when written. */
    const char *d = fresh_dir("charts");
    char xlsx[1024], csv[1024];
    snprintf(xlsx, sizeof xlsx, "%s/out.xlsx", d);
    snprintf(csv, sizeof csv, "%s/csv", d);
    tf_error_init(&err);
    ck_assert_int_eq(tf_report_write(r, xlsx, csv, NULL, NULL, &err), TF_OK);
    ck_assert(has_member(xlsx, "xl/charts/chart4.xml"));
    ck_assert_int_eq(tf_report_add_table(r, NULL, NULL, NULL, &err), TF_ERR_INVALID);
    tf_report_free(r);
    tf_report_free(NULL);
}
END_TEST

/* Nothing at all is written: no workbook, no CSV, no temporary. */
static void assert_nothing(const char *d, const char *csv)
{
    ck_assert(!exists(d, "out.xlsx"));
    ck_assert_int_eq(count_entries(d, ".tmp-"), 0);
    ck_assert_int_eq(count_entries(csv, ".csv"), 0);
    ck_assert_int_eq(count_entries(csv, ".tmp-"), 0);
}

START_TEST(interrupted)
{
    tf_error err;
    tf_error_init(&err);
    tf_report *r = sample(&err);
    const char *d = fresh_dir("stop");
    char xlsx[1024], csv[1024];
    snprintf(xlsx, sizeof xlsx, "%s/out.xlsx", d);
    snprintf(csv, sizeof csv, "%s/csv", d);
    volatile sig_atomic_t stop = 1;
    ck_assert_int_eq(tf_report_write(r, xlsx, csv, NULL, &stop, &err), TF_ERR_INTERRUPTED);
    assert_nothing(d, csv);
    tf_report_free(r);
}
END_TEST

START_TEST(protected_input)
{
    tf_error err;
    tf_error_init(&err);
    tf_report *r = sample(&err);
    const char *d = fresh_dir("protect");
    char input[1024], csv[1024], link[1100];
    snprintf(input, sizeof input, "%s/input.csv", d);
    snprintf(csv, sizeof csv, "%s/csv", d);
    FILE *f = fopen(input, "w");
    ck_assert_ptr_nonnull(f);
    fputs("year,count\n", f);
    fclose(f);
    /* The workbook path is the input. */
    ck_assert_int_eq(tf_report_write(r, input, csv, input, NULL, &err), TF_ERR_USAGE);
    ck_assert_int_eq(count_entries(d, ".tmp-"), 0);
    ck_assert(!exists(d, "csv"));   /* refused before any folder is made */
    /* A CSV twin would land on the input (through a link named like it): nothing is written. */
    ck_assert_int_eq(mkdir(csv, 0777), 0);
    snprintf(link, sizeof link, "%s/north-trend.csv", csv);
    ck_assert_int_eq(symlink("../input.csv", link), 0);
    char xlsx[1024];
    snprintf(xlsx, sizeof xlsx, "%s/out.xlsx", d);
    tf_error_init(&err);
    ck_assert_int_eq(tf_report_write(r, xlsx, csv, input, NULL, &err), TF_ERR_USAGE);
    ck_assert(!exists(d, "out.xlsx"));
    ck_assert_int_eq(count_entries(csv, ".tmp-"), 0);
    ck_assert_int_eq(count_entries(csv, ".csv"), 1);   /* only the link */
    ck_assert_str_eq(slurp(d, "input.csv"), "year,count\n");
    tf_report_free(r);
}
END_TEST

START_TEST(unwritable)
{
    tf_error err;
    tf_error_init(&err);
    tf_report *r = sample(&err);
    const char *d = fresh_dir("io");
    char xlsx[1024], csv[1024], blocker[1024];
    /* The CSV folder cannot be made: a plain file is in the way. */
    snprintf(blocker, sizeof blocker, "%s/file", d);
    FILE *f = fopen(blocker, "w");
    ck_assert_ptr_nonnull(f);
    fclose(f);
    snprintf(xlsx, sizeof xlsx, "%s/out.xlsx", d);
    snprintf(csv, sizeof csv, "%s/file/csv", d);
    ck_assert_int_eq(tf_report_write(r, xlsx, csv, NULL, NULL, &err), TF_ERR_IO);
    ck_assert(!exists(d, "out.xlsx"));
    /* The workbook's folder does not exist: no CSV is written either. */
    snprintf(xlsx, sizeof xlsx, "%s/missing/out.xlsx", d);
    snprintf(csv, sizeof csv, "%s/csv", d);
    tf_error_init(&err);
    ck_assert_int_eq(tf_report_write(r, xlsx, csv, NULL, NULL, &err), TF_ERR_IO);
    ck_assert_int_eq(count_entries(csv, ".csv"), 0);
    ck_assert_int_eq(count_entries(csv, ".tmp-"), 0);
    tf_report_free(r);
}
END_TEST

/* Tables of several populations: each in its population's folder under its own stem, listed in
 * the contents file with the population; a bad folder is refused. */
START_TEST(places_in_folders)
{
    tf_error err;
    tf_error_init(&err);
    tf_report *r = tf_report_new(&err);
    size_t a, b;
    ck_assert_int_eq(tf_report_add_table(r, year_table("north draws", &err), "draws", &a, &err), TF_OK);
    ck_assert_int_eq(tf_report_add_table(r, year_table("south draws", &err), "draws", &b, &err), TF_OK);
    ck_assert_int_eq(tf_report_set_place(r, a, "north", "north", "draws", &err), TF_OK);
    ck_assert_int_eq(tf_report_set_place(r, b, "south, upper", "south_upper", "draws", &err), TF_OK);
    ck_assert_str_eq(tf_report_csv_name(r, a), "draws.csv");
    ck_assert_str_eq(tf_report_csv_folder(r, b), "south_upper");
    ck_assert_int_eq(tf_report_set_place(r, a, "x", "../up", "draws", &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_report_set_place(r, a, "x", "..", "draws", &err), TF_ERR_INVALID);
    const char *d = fresh_dir("places");
    char xlsx[1024];
    snprintf(xlsx, sizeof xlsx, "%s/out.xlsx", d);
    tf_error_init(&err);
    ck_assert_int_eq(tf_report_write(r, xlsx, d, NULL, NULL, &err), TF_OK);
    char sub[1100];
    snprintf(sub, sizeof sub, "%s/north", d);
    ck_assert(exists(sub, "draws.csv"));
    snprintf(sub, sizeof sub, "%s/south_upper", d);
    ck_assert(exists(sub, "draws.csv"));
    ck_assert_str_eq(slurp(d, TF_REPORT_CONTENTS_CSV), "population,file,sheet,about\r\n"
                                                       "north,north/draws.csv,north draws,draws\r\n"
                                                       "\"south, upper\",south_upper/draws.csv,south draws,draws\r\n");
    tf_report_free(r);
}
END_TEST

START_TEST(csv_only)
{
    tf_error err;
    tf_error_init(&err);
    tf_report *r = tf_report_new(&err);
    size_t i0, i1;
    ck_assert_int_eq(tf_report_add_table(r, year_table("kept", &err), NULL, &i0, &err), TF_OK);
    ck_assert_int_eq(tf_report_add_table(r, year_table("long", &err), "too long for a sheet", &i1, &err), TF_OK);
    ck_assert(!tf_report_csv_only(r, i1));
    tf_report_set_csv_only(r, i1);
    ck_assert(tf_report_csv_only(r, i1));
    ck_assert(!tf_report_csv_only(r, i0));
    ck_assert(!tf_report_csv_only(r, 99));
    tf_chart_series se[] = {{1, NULL, TF_SERIES_LINE}};
    tf_report_chart c = {.kind = TF_CHART_XY, .data = i1, .x_column = 0, .series = se, .n_series = 1,
                         .place = TF_REPORT_SAME_SHEET};
    ck_assert_int_eq(tf_report_add_chart(r, &c, &err), TF_ERR_INVALID);
    c.data = i0;
    c.place = i1;   /* nor drawn on it */
    ck_assert_int_eq(tf_report_add_chart(r, &c, &err), TF_ERR_INVALID);
    const char *d = fresh_dir("csvonly");
    char xlsx[1024], csv[1024];
    snprintf(xlsx, sizeof xlsx, "%s/out.xlsx", d);
    snprintf(csv, sizeof csv, "%s/csv", d);
    tf_error_init(&err);
    ck_assert_int_eq(tf_report_write(r, xlsx, csv, NULL, NULL, &err), TF_OK);
    ck_assert(exists(csv, "long.csv"));
    ck_assert(has_member(xlsx, "xl/worksheets/sheet1.xml"));
    ck_assert(!has_member(xlsx, "xl/worksheets/sheet2.xml"));
    ck_assert_str_eq(slurp(csv, TF_REPORT_CONTENTS_CSV), "population,file,sheet,about\r\n"
                                                         ",kept.csv,kept,\r\n"
                                                         ",long.csv,,too long for a sheet\r\n");
    tf_report_free(r);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("report");
    TCase *tc = tcase_create("report");
    tcase_add_test(tc, names_and_files);
    tcase_add_test(tc, bad_charts);
    tcase_add_test(tc, interrupted);
    tcase_add_test(tc, protected_input);
    tcase_add_test(tc, unwritable);
    tcase_add_test(tc, csv_only);
    tcase_add_test(tc, places_in_folders);
    suite_add_tcase(s, tc);
    return s;
}

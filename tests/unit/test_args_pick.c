/* Unit tests for choosing one population of a survey from the command line. */
#include "tf_test.h"

#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "cmd/args.h"
#include "survey/survey.h"

static tf_survey *read_ok(const char *path)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    ck_assert_int_eq(tf_survey_read(path, &sv, &err), TF_OK);
    return sv;
}

START_TEST(pick_series_by_name_or_the_only_one)
{
    const char *path = TF_TEST_DATA("good/multi-pop.csv");
    tf_survey *sv = read_ok(path);
    tf_error err;
    tf_error_init(&err);
    const tf_series *s = tf_args_pick_series(sv, "east", path, &err);
    ck_assert_ptr_nonnull(s);
    ck_assert_str_eq(tf_series_label(s), "east");
    ck_assert_uint_eq(err.n_items, 0);
    /* Several populations and none chosen: the hint lists them all, quoted. */
    ck_assert_ptr_null(tf_args_pick_series(sv, NULL, path, &err));
    ck_assert_int_eq(tf_error_status(&err), TF_ERR_USAGE);
    ck_assert_str_eq(err.items[0].file, path);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "3 populations"));
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "--population"));
    for (const char *const *p = (const char *const[]){"'west'", "'east'", "'south'", NULL}; *p; p++)
        ck_assert_ptr_nonnull(strstr(err.items[0].hint, *p));
    /* An unknown name. */
    tf_error_init(&err);
    ck_assert_ptr_null(tf_args_pick_series(sv, "north", path, &err));
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "'north'"));
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "'south'"));
    tf_survey_free(sv);

    /* One population: it is taken without being named. */
    path = TF_TEST_DATA("good/comma-basic.csv");
    sv = read_ok(path);
    tf_error_init(&err);
    ck_assert_ptr_eq(tf_args_pick_series(sv, NULL, path, &err), tf_survey_series(sv, 0));
    tf_survey_free(sv);
}
END_TEST

/* Too many populations for the hint: as many as fit, then "...". */
START_TEST(pick_series_hint_is_cut_short)
{
    char path[] = "/tmp/tf-args-XXXXXX";
    int fd = mkstemp(path);
    ck_assert_int_ge(fd, 0);
    FILE *f = fdopen(fd, "w");
    ck_assert_ptr_nonnull(f);
    fputs("population,year,count\n", f);
    /* Five years each: the importer's minimum for a population. */
    for (int i = 0; i < 60; i++)
        for (int y = 2001; y <= 2005; y++)
            fprintf(f, "colony-number-%02d,%d,%d\n", i, y, i + 1);
    ck_assert_int_eq(fclose(f), 0);
    tf_survey *sv = read_ok(path);
    unlink(path);
    tf_error err;
    tf_error_init(&err);
    ck_assert_ptr_null(tf_args_pick_series(sv, NULL, path, &err));
    const char *hint = err.items[0].hint;
    ck_assert_ptr_nonnull(strstr(hint, "'colony-number-00', 'colony-number-01'"));
    ck_assert_ptr_null(strstr(hint, "'colony-number-59'"));
    size_t n = strlen(hint);
    ck_assert(n > 3 && !strcmp(hint + n - 5, ", ..."));
    tf_survey_free(sv);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("args");
    TCase *tc = tcase_create("args");
    tcase_add_test(tc, pick_series_by_name_or_the_only_one);
    tcase_add_test(tc, pick_series_hint_is_cut_short);
    suite_add_tcase(s, tc);
    return s;
}

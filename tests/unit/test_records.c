/* Unit tests for the batch's records (batch/records): the summary row of a population written
 * as CSV text and read back into typed cells, the CSV splitter, and the settings record. */
#include "tf_test.h"

#include <string.h>

#include "batch/records.h"

static void free_fields(char **f, size_t n)
{
    for (size_t i = 0; i < n; i++)
        free(f[i]);
}

START_TEST(split_reads_quoted_fields)
{
    char *f[4] = {0};
    /* RFC 4180 section 2: a quoted field may hold commas and doubled quotes. */
    ck_assert_uint_eq(tf_records_split("a,\"b, \"\"c\"\"\",,d", f, 4), 4);
    ck_assert_str_eq(f[0], "a");
    ck_assert_str_eq(f[1], "b, \"c\"");
    ck_assert_str_eq(f[2], "");
    ck_assert_str_eq(f[3], "d");
    free_fields(f, 4);
    /* At most max fields. */
    ck_assert_uint_eq(tf_records_split("x,y,z", f, 2), 2);
    ck_assert_str_eq(f[1], "y");
    free_fields(f, 2);
}
END_TEST

/* A population set aside for bad data: its row has the label, the status and the reason, and
 * reads back with the same header and a flagged status. */
START_TEST(a_row_reads_back_under_its_header)
{
    tf_error err;
    tf_error_init(&err);
    tf_analysis_options a;
    ck_assert_int_eq(tf_analysis_options_init(&a, &err), TF_OK);
    char *head = NULL, *row = NULL;
    ck_assert_int_eq(tf_records_header(&a.project, &head, &err), TF_OK);
    ck_assert_ptr_nonnull(strstr(head, "Population,Status,"));
    ck_assert_ptr_nonnull(strstr(head, ",Reason"));
    ck_assert_ptr_null(strstr(head, "\r\n"));
    ck_assert_int_eq(tf_records_row(&a.project, "north, upper", NULL, NULL, "bad data", "line 4: not a number", &row,
                                    &err),
                     TF_OK);
    ck_assert(!strncmp(row, "\"north, upper\",bad data,", 24));
    tf_table *t = tf_records_table(&a.project, "Populations", &err);
    ck_assert_ptr_nonnull(t);
    ck_assert_int_eq(tf_records_append(t, row, &err), TF_OK);
    ck_assert_uint_eq(tf_table_n_rows(t), 1);
    size_t nc = tf_table_n_columns(t);
    ck_assert_str_eq(tf_table_text(t, 0, 0), "north, upper");
    ck_assert_str_eq(tf_table_text(t, 0, nc - 1), "line 4: not a number");
    ck_assert(tf_table_warning(t, 0, 1));
    tf_table_free(t);
    free(head);
    free(row);
}
END_TEST

START_TEST(settings_name_what_changes_the_numbers)
{
    tf_error err;
    tf_error_init(&err);
    tf_analysis_options a;
    ck_assert_int_eq(tf_analysis_options_init(&a, &err), TF_OK);
    a.seed = 42;
    char *text = NULL;
    ck_assert_int_eq(tf_records_settings(&a, "abc123", 1, 0, "model-file x.ini 00", &text, &err), TF_OK);
    ck_assert(text[0] == '#');
    ck_assert_ptr_nonnull(strstr(text, "\nsurvey-sha256 abc123\n"));
    ck_assert_ptr_nonnull(strstr(text, "\nseed 42\n"));
    ck_assert_ptr_nonnull(strstr(text, "\npopulation-workbooks yes\n"));
    ck_assert_ptr_nonnull(strstr(text, "\nworkbook-draws no\n"));
    /* A setting an option sets is keyed by the option's name (cmd/args.h). */
    static const char *const keys[] = {"\nmodel exponential,ricker,gompertz\n", "\nobs default\n", "\nchains 4\n",
                                       "\nmin-iterations 2000\n", "\nmax-iterations 160000\n", "\nmin-ess 400\n",
                                       "\nkept-draws 1000\n", "\nthin 1\n", "\nwarmup 5000\n", "\nparticles 0\n",
                                       "\ncorrelated off\n", "\ndelayed-acceptance off\n", "\nproposal guided\n",
                                       "\ndraws ", "\nml-se ", "\nyears ", "\nruns ", "\nthreshold 50%,20%,10%\n",
                                       "\ndecline-window 0\n"};
    for (size_t i = 0; i < sizeof keys / sizeof keys[0]; i++)
        ck_assert_msg(strstr(text, keys[i]), "no line '%s' in:\n%s", keys[i] + 1, text);
    /* The extra lines come last, ended by a line break. */
    size_t n = strlen(text);
    ck_assert_str_eq(text + n - strlen("model-file x.ini 00\n"), "model-file x.ini 00\n");
    free(text);
    /* The draws line changes with --workbook-draws, and is left out without workbooks. */
    ck_assert_int_eq(tf_records_settings(&a, "abc123", 1, 1, NULL, &text, &err), TF_OK);
    ck_assert_ptr_nonnull(strstr(text, "\nworkbook-draws yes\n"));
    free(text);
    ck_assert_int_eq(tf_records_settings(&a, "abc123", 0, 1, NULL, &text, &err), TF_OK);
    ck_assert_ptr_null(strstr(text, "workbook-draws"));
    free(text);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("records");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, split_reads_quoted_fields);
    tcase_add_test(tc, a_row_reads_back_under_its_header);
    tcase_add_test(tc, settings_name_what_changes_the_numbers);
    suite_add_tcase(s, tc);
    return s;
}

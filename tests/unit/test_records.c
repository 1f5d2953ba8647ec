/* Unit tests for the batch's settings record (batch/records). */
#include "tf_test.h"

#include <string.h>

#include "batch/records.h"

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
    tcase_add_test(tc, settings_name_what_changes_the_numbers);
    suite_add_tcase(s, tc);
    return s;
}

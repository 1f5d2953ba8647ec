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

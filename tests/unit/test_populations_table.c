/* Unit tests for the table of populations (tables/populations_table.c): a row written as CSV
 * text reads back into typed cells under the same header, the CSV splitter follows RFC 4180
 * quoting, and thresholds are numbers with their kind. */
#include "tf_test.h"

#include <string.h>

#include "tables/columns.h"
#include "tables/populations_table.h"

static void free_fields(char **f, size_t n)
{
    for (size_t i = 0; i < n; i++)
        free(f[i]);
}

START_TEST(split_reads_quoted_fields)
{
    char *f[4] = {0};
    /* RFC 4180 section 2: a quoted field may hold commas and doubled quotes. */
    ck_assert_uint_eq(tf_populations_split_line("a,\"b, \"\"c\"\"\",,d", f, 4), 4);
    ck_assert_str_eq(f[0], "a");
    ck_assert_str_eq(f[1], "b, \"c\"");
    ck_assert_str_eq(f[2], "");
    ck_assert_str_eq(f[3], "d");
    free_fields(f, 4);
    /* At most max fields. */
    ck_assert_uint_eq(tf_populations_split_line("x,y,z", f, 2), 2);
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
    tf_table *t = tf_populations_table_new(&a.project, TF_POPULATIONS_TABLE_NAME, &err);
    ck_assert_ptr_nonnull(t);
    ck_assert_int_eq(tf_populations_table_add(t, &a.project, "north, upper", NULL, NULL, "bad data",
                                              "line 4: not a number", &err),
                     TF_OK);
    char *head = NULL, *row = NULL;
    ck_assert_int_eq(tf_populations_csv_text(t, &head, &row, &err), TF_OK);
    ck_assert(!strncmp(head, "population,status,first_year,", 29));
    ck_assert_ptr_nonnull(strstr(head, ",checks,reason"));
    ck_assert_ptr_nonnull(strstr(head, ",threshold_1,threshold_1_kind,risk_1_10y,"));
    ck_assert_ptr_null(strstr(head, "\r\n"));
    ck_assert(!strncmp(row, "\"north, upper\",bad data,", 24));
    /* Every header is a valid column name. */
    for (size_t j = 0; j < tf_table_n_columns(t); j++)
        ck_assert_msg(tf_columns_valid_name(tf_table_header(t, j)), "%s", tf_table_header(t, j));
    tf_table *back = tf_populations_table_new(&a.project, "Populations", &err);
    ck_assert_int_eq(tf_populations_table_add_line(back, row, &err), TF_OK);
    ck_assert_uint_eq(tf_table_n_rows(back), 1);
    size_t nc = tf_table_n_columns(back);
    ck_assert_str_eq(tf_table_text(back, 0, 0), "north, upper");
    ck_assert_str_eq(tf_table_text(back, 0, nc - 1), "line 4: not a number");
    ck_assert(tf_table_warning(back, 0, 1));
    ck_assert(tf_table_warning(t, 0, 1));
    tf_table_free(back);
    tf_table_free(t);
    free(head);
    free(row);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("populations_table");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, split_reads_quoted_fields);
    tcase_add_test(tc, a_row_reads_back_under_its_header);
    suite_add_tcase(s, tc);
    return s;
}

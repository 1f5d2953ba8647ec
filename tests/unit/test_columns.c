/* Unit tests for the vocabulary of the output tables (tables/columns.c): every column name is
 * snake_case ASCII and unique, every column has a label and a legend, and names outside the
 * vocabulary are checked the same way. The convention is the project's own (docs/tables.md). */
#include "tf_test.h"

#include <string.h>

#include "model/model.h"
#include "tables/columns.h"

START_TEST(every_name_is_snake_case_and_unique)
{
    for (int i = 0; i < TF_C_COUNT_OF_COLUMNS; i++) {
        const tf_column *c = tf_column_of((tf_column_id)i);
        ck_assert_msg(c->name && tf_columns_valid_name(c->name), "column %d has a bad name", i);
        ck_assert_msg(c->label && c->label[0], "column %s has no label", c->name);
        ck_assert_msg(c->legend && strlen(c->legend) > 8, "column %s has no legend", c->name);
        for (int j = 0; j < i; j++)
            ck_assert_msg(strcmp(c->name, tf_column_name((tf_column_id)j)), "%s twice", c->name);
    }
    ck_assert_str_eq(tf_column_name(TF_C_POPULATION), "population");
    ck_assert_str_eq(tf_column_name(TF_C_LOWER_95), "lower_95");
    ck_assert_str_eq(tf_column_name(TF_C_R_HAT), "r_hat");
}
END_TEST

START_TEST(names_are_checked)
{
    ck_assert(tf_columns_valid_name("risk_1_10y"));
    ck_assert(!tf_columns_valid_name("Lower 95 %"));
    ck_assert(!tf_columns_valid_name("q2.5"));
    ck_assert(!tf_columns_valid_name("K"));
    ck_assert(!tf_columns_valid_name("1st"));
    ck_assert(!tf_columns_valid_name(""));
    tf_error err;
    tf_error_init(&err);
    tf_table *t = tf_table_new("t", &err);
    ck_assert_int_eq(tf_columns_add_other(t, "P(declined)", NULL, NULL, TF_COL_NUMBER, NULL, &err), TF_ERR_INVALID);
    size_t col = 99;
    ck_assert_int_eq(tf_columns_add(t, TF_C_LOWER_95, NULL, &col, &err), TF_OK);
    ck_assert_uint_eq(col, 0);
    /* The workbook shows the label; the CSV the name. */
    ck_assert_str_eq(tf_table_header(t, 0), "lower_95");
    ck_assert_str_eq(tf_table_label(t, 0), "Lower 95 %");
    tf_table_free(t);
}
END_TEST

/* Every parameter of every model the program knows makes a valid column name. */
START_TEST(parameter_names_make_columns)
{
    char buf[32];
    tf_columns_parameter_name("K", buf, sizeof buf);
    ck_assert_str_eq(buf, "k");
    for (size_t g = 0; g < tf_model_n_growth(); g++)
        for (size_t k = 0; k < tf_model_growth_at(g)->n_params; k++) {
            tf_columns_parameter_name(tf_model_growth_at(g)->param_names[k], buf, sizeof buf);
            ck_assert_msg(tf_columns_valid_name(buf), "%s", buf);
        }
    for (size_t o = 0; o < tf_model_n_obs(); o++)
        for (size_t k = 0; k < tf_model_obs_at(o)->n_params; k++) {
            tf_columns_parameter_name(tf_model_obs_at(o)->param_names[k], buf, sizeof buf);
            ck_assert_msg(tf_columns_valid_name(buf), "%s", buf);
        }
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("columns");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, every_name_is_snake_case_and_unique);
    tcase_add_test(tc, names_are_checked);
    tcase_add_test(tc, parameter_names_make_columns);
    suite_add_tcase(s, tc);
    return s;
}

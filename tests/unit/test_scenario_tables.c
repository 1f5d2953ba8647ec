/* Unit tests for the scenario tables: their headers from the vocabulary, the row layout, and
 * rows read back against the scenario set's own numbers. */
#include "tf_test.h"
#include <math.h>
#include <string.h>

#include "model/model.h"
#include "project/scenario.h"
#include "tables/columns.h"
#include "tables/scenario_tables.h"

static tf_scenario_set *small_set(void)
{
    static double theta[2] = {0.01, 0.15}, x0 = 6.0;
    tf_project_input in = {tf_model_find_growth("exponential"), 1, 2, 1, theta, &x0, 1.0};
    tf_project_options o;
    tf_project_options_init(&o);
    o.horizon = 12;
    o.n_runs = 500;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_project_parse_thresholds("200,50%", o.thresholds, TF_PROJECT_MAX_THRESHOLDS, &o.n_thresholds,
                                                 &err),
                     TF_OK);
    tf_scenario sc[2];
    ck_assert_int_eq(tf_scenario_parse("cull:remove=20", &sc[0], &err), TF_OK);
    ck_assert_int_eq(tf_scenario_parse("share:remove=5%,from=2023", &sc[1], &err), TF_OK);
    tf_rng rng;
    tf_project_stream(&rng, 3, "tables");
    tf_scenario_set *s = NULL;
    ck_assert_int_eq(tf_scenario_set_run(&in, 1, &o, &rng, sc, 2, 2020, 1.0, &s, &err), TF_OK);
    return s;
}

static void assert_header(const tf_table *t, const char *want)
{
    char got[1024] = "";
    for (size_t j = 0; j < tf_table_n_columns(t); j++) {
        if (j)
            strcat(got, ",");
        strcat(got, tf_table_header(t, j));
    }
    ck_assert_str_eq(got, want);
}

START_TEST(tables_hold_the_sets_numbers)
{
    tf_scenario_set *s = small_set();
    tf_projection_place place = {.population = "herd", .model = "fixed", .unit = TF_UNIT_ANIMALS, .year0 = 2020};
    tf_table *t[TF_SCENARIO_N_TABLES];
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_scenario_tables_build(s, &place, 12.5, 5, t, &err), TF_OK);
    ck_assert_str_eq(tf_table_name(t[0]), "scenarios");
    ck_assert_str_eq(tf_table_name(t[1]), "scenario-differences");
    ck_assert_str_eq(tf_table_name(t[2]), "scenario-declines");
    assert_header(t[0], "population,model,scenario,threshold,threshold_kind,years_ahead,year,probability,"
                        "probability_mcse,unit,median,lower_50,upper_50,lower_95,upper_95");
    assert_header(t[1], "population,model,scenario,threshold,threshold_kind,years_ahead,year,probability,difference,"
                        "difference_mcse");
    assert_header(t[2], "population,model,scenario,window_years,decline,probability,probability_mcse,difference,"
                        "difference_mcse");
    /* 2 scenarios x 2 thresholds x 13 years; declines: 2 x 1 window x 3 declines. */
    ck_assert_uint_eq(tf_table_n_rows(t[0]), 52);
    ck_assert_uint_eq(tf_table_n_rows(t[1]), 52);
    ck_assert_uint_eq(tf_table_n_rows(t[2]), 6);
    /* Row of scenario 2 ("share"), threshold 2 (50 %), year 7. */
    size_t row = 26 + 13 + 7;
    const tf_projection *p = tf_scenario_set_projection(s, 1);
    ck_assert_str_eq(tf_table_text(t[0], row, 2), "share");
    ck_assert_str_eq(tf_table_text(t[0], row, 4), TF_THRESHOLD_FRACTION);
    ck_assert_double_eq(tf_table_number(t[0], row, 3), 0.5);
    ck_assert_double_eq(tf_table_number(t[0], row, 6), 2027);
    ck_assert_double_eq(tf_table_number(t[0], row, 7), tf_projection_risk(p, 1, 7));
    ck_assert_double_eq(tf_table_number(t[0], row, 10), tf_projection_band(p, 7, TF_BAND_MEDIAN));
    ck_assert_double_eq(tf_table_number(t[0], row, 13), tf_projection_band(p, 7, TF_BAND_P025));
    double d, se;
    ck_assert_int_eq(tf_scenario_set_risk_difference(s, 1, 1, 7, &d, &se, &err), TF_OK);
    ck_assert_double_eq(tf_table_number(t[1], row, 8), d);
    ck_assert_double_eq(tf_table_number(t[1], row, 9), se);
    /* The status quo is said in a note of every table. */
    int said = 0;
    for (size_t i = 0; i < tf_table_n_notes(t[1]); i++)
        said |= strstr(tf_table_note(t[1], i), "net removal of 12.5 animals a year") != NULL;
    ck_assert(said);
    tf_scenario_tables_free(t);
    ck_assert_ptr_null(t[0]);
    tf_scenario_set_free(s);
}
END_TEST

START_TEST(summary_lines_name_the_safe_removal)
{
    tf_error err;
    tf_error_init(&err);
    tf_table *t = tf_table_new_summary("summary", &err);
    ck_assert_ptr_nonnull(t);
    tf_safe_removal safe = {.ask = {0.05, 20, 1}, .threshold = {0.5, 1}, .value = 0.041, .mcse = 0.002,
                            .risk_at_value = 0.049, .risk_at_value_mcse = 0.003, .n_runs = 4000};
    ck_assert_int_eq(tf_scenario_tables_summary(t, NULL, &safe, 0, 0, &err), TF_OK);
    int value = 0, mcse = 0;
    for (size_t r = 0; r < tf_table_n_rows(t); r++) {
        const char *item = tf_table_text(t, r, 1);
        if (item && !strcmp(item, "safe_removal"))
            value = tf_table_number(t, r, 2) == 0.041;
        if (item && !strcmp(item, "safe_removal_mcse"))
            mcse = tf_table_number(t, r, 2) == 0.002;
    }
    ck_assert(value && mcse);
    tf_table_free(t);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("scenario_tables");
    TCase *tc = tcase_create("scenario_tables");
    tcase_add_test(tc, tables_hold_the_sets_numbers);
    tcase_add_test(tc, summary_lines_name_the_safe_removal);
    suite_add_tcase(s, tc);
    return s;
}

/* Unit tests for the tables of fitted models (tables/fit_tables.c): every table has the columns
 * docs/tables.md gives it, population and model first, and every cell is the fit's own number
 * (the change a fraction, the draws under the parameters' lower-case names, a failed model only
 * in the diagnostics). The draws are made up; no sampler runs. */
#include "tf_test.h"

#include <math.h>
#include <string.h>

#include "model/model.h"
#include "sampler/fit.h"
#include "survey/series.h"
#include "survey/survey.h"
#include "tables/columns.h"
#include "tables/fit_tables.h"

#define CH 2
#define IT 6
#define YR 5

typedef struct {
    tf_model *model;
    tf_series *series;
    tf_fit *fit;
} fixture;

/* A Ricker fit of made-up draws on a survey with effort 2 in one year. */
static void setup(fixture *x)
{
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new("ricker", "poisson", &x->model, &err), TF_OK);
    double y[YR] = {40, 44, NAN, 50, 47}, e[YR] = {1, 1, 1, 2, 1};
    x->series = tf_series_new("north", 2001, YR, y, e, NULL, &err);
    ck_assert_ptr_nonnull(x->series);
    x->fit = tf_fit_alloc(x->model, x->series, CH, IT);
    for (size_t c = 0; c < CH; c++)
        for (size_t i = 0; i < IT; i++) {
            double k = (double)(c * IT + i);
            double theta[3] = {0.2 + 0.01 * k, 60 + k, 0.1 + 0.002 * k}, path[YR];
            for (size_t t = 0; t < YR; t++)
                path[t] = log(40.0) + 0.02 * (double)t + 0.001 * k;
            tf_fit_record(x->fit, c, i, theta, -20 - k, path);
        }
    tf_fit_settings st = {.n_warmup = 10, .n_iterations = IT, .thin = 1, .n_particles = 30, .loglik_sd = 0.8,
                          .seed = 5};
    tf_fit_set_settings(x->fit, &st);
    ck_assert_int_eq(tf_fit_summarise(x->fit, &err), TF_OK);
}

static void teardown(fixture *x)
{
    tf_fit_free(x->fit);
    tf_series_free(x->series);
    tf_model_free(x->model);
}

/* The header of t is exactly the names given, and every one is a valid column name. */
static void assert_header(const tf_table *t, const char *const *names, size_t n)
{
    ck_assert_uint_eq(tf_table_n_columns(t), n);
    for (size_t j = 0; j < n; j++) {
        ck_assert_str_eq(tf_table_header(t, j), names[j]);
        ck_assert(tf_columns_valid_name(names[j]));
    }
}

START_TEST(headers_follow_the_vocabulary)
{
    fixture x;
    setup(&x);
    tf_error err;
    tf_error_init(&err);
    tf_tables_context c = {.population = "north", .series = x.series, .omit_seconds = 1};
    tf_tables_model m = {.name = "ricker+poisson", .fit = x.fit, .probability = NAN, .pareto_k = NAN};
    tf_table *t = NULL;
    static const char *const abundance[] = {"population", "model",    "year",     "count",    "effort",  "count_per_effort",
                                            "unit",       "median",   "lower_50", "upper_50", "lower_95", "upper_95"};
    ck_assert_int_eq(tf_tables_abundance_fit(&c, &m, &t, &err), TF_OK);
    assert_header(t, abundance, sizeof abundance / sizeof abundance[0]);
    ck_assert_uint_eq(tf_table_n_rows(t), YR);
    /* Effort 2 in one year: abundances are per unit of effort, said in every row. */
    ck_assert_str_eq(tf_table_text(t, 0, 6), TF_UNIT_PER_EFFORT);
    ck_assert(tf_table_number(t, 3, 5) == 25.0);
    ck_assert(tf_table_is_empty(t, 2, 3) && tf_table_is_empty(t, 2, 4));   /* not surveyed */
    ck_assert(tf_table_number(t, 4, 7) == tf_fit_year(x.fit, 4)->median);
    ck_assert(tf_table_number(t, 4, 10) == tf_fit_year(x.fit, 4)->q025);
    tf_table_free(t);

    static const char *const change[] = {"population", "model",    "period",   "model_prob", "first_year",
                                         "last_year",  "mean",     "median",   "lower_95",   "upper_95",
                                         "p_decline",  "r_hat",    "bulk_ess"};
    tf_fit_trend_summary avg[2] = {{2001, 2005, 0.01, 0.02, -0.1, 0.1, 0.4, NAN, NAN},
                                   {2002, 2005, 0.03, 0.04, -0.2, 0.2, 0.3, NAN, NAN}};
    ck_assert_int_eq(tf_tables_change_of(&c, &m, 1, avg, &t, &err), TF_OK);
    assert_header(t, change, sizeof change / sizeof change[0]);
    ck_assert_uint_eq(tf_table_n_rows(t), 4);
    /* A fraction a year: the path rises by 0.02 on the log scale each year, whatever the period. */
    ck_assert_str_eq(tf_table_text(t, 0, 2), "whole");
    ck_assert(fabs(tf_table_number(t, 0, 7) - expm1(0.02)) < 1e-12);
    ck_assert_str_eq(tf_table_text(t, 1, 2), "recent");
    ck_assert(fabs(tf_table_number(t, 1, 7) - expm1(0.02)) < 1e-12);
    ck_assert(tf_table_number(t, 0, 4) == 2001 && tf_table_number(t, 0, 5) == 2005);
    ck_assert(tf_table_is_empty(t, 0, 3));   /* not compared */
    ck_assert_str_eq(tf_table_text(t, 2, 1), "average");
    ck_assert(tf_table_number(t, 2, 3) == 1.0 && tf_table_number(t, 2, 10) == 0.4);
    ck_assert(tf_table_number(t, 3, 4) == 2002 && tf_table_number(t, 3, 10) == 0.3);
    ck_assert_int_eq(tf_table_column_kind(t, 7), TF_COL_PERCENT);
    tf_table_free(t);

    static const char *const parameters[] = {"population", "model",  "parameter", "mean",     "sd",
                                             "lower_95",   "median", "upper_95",  "r_hat",    "bulk_ess",
                                             "tail_ess",   "mean_mcse", "prior"};
    ck_assert_int_eq(tf_tables_parameters(&c, &m, 1, &t, &err), TF_OK);
    assert_header(t, parameters, sizeof parameters / sizeof parameters[0]);
    ck_assert_uint_eq(tf_table_n_rows(t), 3);
    ck_assert_str_eq(tf_table_text(t, 1, 2), "K");
    ck_assert(tf_table_number(t, 1, 3) == tf_fit_param(x.fit, 1)->mean);
    tf_table_free(t);
    teardown(&x);
}
END_TEST

/* Every parameter the program knows has a column of the draws, so that the draws of every model
 * share one header; a model fills its own and leaves the others blank. */
START_TEST(draws_have_one_header_for_every_model)
{
    fixture x;
    setup(&x);
    tf_error err;
    tf_error_init(&err);
    tf_tables_context c = {.population = "north", .series = x.series};
    tf_tables_model m = {.name = "ricker+poisson", .fit = x.fit, .probability = NAN, .pareto_k = NAN};
    tf_table *t = NULL;
    ck_assert_int_eq(tf_tables_draws(&c, &m, 1, &t, &err), TF_OK);
    ck_assert_str_eq(tf_table_header(t, 0), "population");
    ck_assert_str_eq(tf_table_header(t, 4), "log_likelihood");
    ck_assert_str_eq(tf_table_header(t, tf_table_n_columns(t) - 1), "last_abundance");
    for (size_t g = 0; g < tf_model_n_growth(); g++)
        for (size_t k = 0; k < tf_model_growth_at(g)->n_params; k++) {
            char name[32];
            tf_columns_parameter_name(tf_model_growth_at(g)->param_names[k], name, sizeof name);
            ck_assert_msg(tf_table_find_column(t, name) != TF_TABLE_NO_COLUMN, "no column %s", name);
        }
    ck_assert_uint_eq(tf_table_n_rows(t), CH * IT);
    size_t ck = tf_table_find_column(t, "k"), cth = tf_table_find_column(t, "theta");
    ck_assert(tf_table_number(t, 7, ck) == tf_fit_draw(x.fit, 1, 1)[1]);
    ck_assert(tf_table_is_empty(t, 7, cth));
    ck_assert(tf_table_number(t, 7, 3) == 2.0);   /* draw 2 of chain 2 */
    tf_table_free(t);
    teardown(&x);
}
END_TEST

/* A failed model has its row in the diagnostics, flagged, with the reason; an excluded one has
 * none; the checks name what failed. */
START_TEST(diagnostics_say_what_to_look_at)
{
    fixture x;
    setup(&x);
    tf_error err;
    tf_error_init(&err);
    tf_tables_context c = {.population = "north", .series = x.series, .omit_seconds = 1};
    tf_tables_model ms[3] = {
        {.name = "ricker+poisson", .fit = x.fit, .probability = 1, .pareto_k = 0.9},
        {.name = "gompertz+poisson", .note = "no starting point", .probability = NAN, .pareto_k = NAN},
        {.name = "exponential+lognormal", .excluded = 1, .note = "a density", .probability = NAN, .pareto_k = NAN},
    };
    tf_table *t = NULL;
    ck_assert_int_eq(tf_tables_diagnostics(&c, ms, 3, &t, &err), TF_OK);
    ck_assert_uint_eq(tf_table_n_rows(t), 2);
    size_t checks = tf_table_find_column(t, "checks"), k = tf_table_find_column(t, "pareto_k");
    size_t sec = tf_table_find_column(t, "seconds");
    ck_assert_ptr_nonnull(strstr(tf_table_text(t, 0, checks), "log ML unreliable"));
    ck_assert(tf_table_warning(t, 0, k));
    ck_assert(tf_table_is_empty(t, 0, sec));   /* left out so that files compare byte for byte */
    ck_assert_str_eq(tf_table_text(t, 1, checks), "no starting point");
    ck_assert(tf_table_warning(t, 1, 0));
    tf_table_free(t);
    teardown(&x);
}
END_TEST

/* The unit text: animals where every effort is 1, "count units per unit effort" where it is not,
 * and the effort's own name in place of "unit effort" when the survey names it (--effort-name). */
START_TEST(unit_names_the_effort)
{
    fixture x;
    setup(&x);
    tf_error err;
    tf_error_init(&err);
    char buf[TF_TABLES_UNIT_SIZE];
    ck_assert_str_eq(tf_tables_unit(x.series, buf, sizeof buf), TF_UNIT_PER_EFFORT);
    ck_assert_str_eq(tf_tables_unit_title(x.series, buf, sizeof buf), "Count units per unit effort");
    ck_assert_str_eq(tf_tables_per_what(x.series, buf, sizeof buf), "per unit of effort");

    ck_assert_int_eq(tf_series_set_effort_name(x.series, "trap-night", &err), TF_OK);
    ck_assert_str_eq(tf_series_effort_name(x.series), "trap-night");
    ck_assert_str_eq(tf_tables_unit(x.series, buf, sizeof buf), "count units per trap-night");
    ck_assert_str_eq(tf_tables_unit_title(x.series, buf, sizeof buf), "Count units per trap-night");
    ck_assert_str_eq(tf_tables_per_what(x.series, buf, sizeof buf), "per trap-night");
    /* Every row of the abundance table, and its legend, carry the name. */
    tf_tables_context c = {.population = "north", .series = x.series, .omit_seconds = 1};
    tf_tables_model m = {.name = "ricker+poisson", .fit = x.fit, .probability = NAN, .pareto_k = NAN};
    tf_table *t = NULL;
    ck_assert_int_eq(tf_tables_abundance_fit(&c, &m, &t, &err), TF_OK);
    for (size_t i = 0; i < tf_table_n_rows(t); i++)
        ck_assert_str_eq(tf_table_text(t, i, 6), "count units per trap-night");
    ck_assert_ptr_nonnull(strstr(tf_table_legend(t, 7), "count units per trap-night"));
    tf_table_free(t);
    /* Clearing the name brings back today's wording. */
    ck_assert_int_eq(tf_series_set_effort_name(x.series, "", &err), TF_OK);
    ck_assert_str_eq(tf_tables_unit(x.series, buf, sizeof buf), TF_UNIT_PER_EFFORT);
    teardown(&x);

    /* A name does not turn animals into counts per effort: with every effort 1 the unit stays. */
    double y[3] = {5, 6, 7};
    tf_series *s = tf_series_new("south", 2001, 3, y, NULL, NULL, &err);
    ck_assert_ptr_nonnull(s);
    ck_assert_int_eq(tf_series_set_effort_name(s, "trap-night", &err), TF_OK);
    ck_assert_str_eq(tf_tables_unit(s, buf, sizeof buf), TF_UNIT_ANIMALS);
    ck_assert_str_eq(tf_tables_unit_title(s, buf, sizeof buf), "Animals");
    tf_series_free(s);
    ck_assert_uint_eq(err.n_items, 0);
}
END_TEST

/* The checks of --effort-name: short, printable, no comma, no blank at the ends; the length
 * counted in characters, not bytes. */
START_TEST(effort_name_is_checked)
{
    tf_error err;
    tf_error_init(&err);
    static const char *const good[] = {"trap-night", "hour of watching", "km walked", "n\xc3\xa4" "chte",
                                       "12345678901234567890123456789012"};
    for (size_t i = 0; i < sizeof good / sizeof good[0]; i++)
        ck_assert_int_eq(tf_series_check_effort_name(good[i], &err), TF_OK);
    ck_assert_uint_eq(err.n_items, 0);
    char wide[2 * 33 + 1] = "";
    for (size_t i = 0; i < 32; i++)
        strcat(wide, "\xc3\xa9");   /* 32 characters of 2 bytes each: within the limit */
    ck_assert_int_eq(tf_series_check_effort_name(wide, &err), TF_OK);
    strcat(wide, "\xc3\xa9");
    static const char *const bad[] = {"", " trap", "trap ", "trap,night", "trap\nnight", "trap\tnight",
                                      "\xff", "123456789012345678901234567890123"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        tf_error_init(&err);
        ck_assert_int_eq(tf_series_check_effort_name(bad[i], &err), TF_ERR_USAGE);
        ck_assert_uint_eq(err.n_items, 1);
        ck_assert(err.items[0].hint[0] != '\0');
    }
    tf_error_init(&err);
    ck_assert_int_eq(tf_series_check_effort_name(wide, &err), TF_ERR_USAGE);

    /* The survey reader gives the name to every population it reads. */
    static const char csv[] = "population,year,count,effort\n"
                              "a,2001,3,1\na,2002,4,2\na,2003,5,1\na,2004,6,1\na,2005,5,1\na,2006,4,1\n"
                              "b,2001,7,1\nb,2002,8,1\nb,2003,9,2\nb,2004,6,1\nb,2005,5,1\nb,2006,4,1\n";
    tf_survey_options so = {.effort_name = "trap-night"};
    tf_survey *sv = NULL;
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_parse_with("mem.csv", csv, sizeof csv - 1, &so, &sv, &err), TF_OK);
    ck_assert_uint_eq(tf_survey_n_series(sv), 2);
    for (size_t i = 0; i < 2; i++)
        ck_assert_str_eq(tf_series_effort_name(tf_survey_series(sv, i)), "trap-night");
    tf_survey_free(sv);
    ck_assert_int_eq(tf_survey_parse("mem.csv", csv, sizeof csv - 1, &sv, &err), TF_OK);
    ck_assert_str_eq(tf_series_effort_name(tf_survey_series(sv, 0)), "");
    tf_survey_free(sv);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("fit_tables");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, headers_follow_the_vocabulary);
    tcase_add_test(tc, draws_have_one_header_for_every_model);
    tcase_add_test(tc, diagnostics_say_what_to_look_at);
    tcase_add_test(tc, unit_names_the_effort);
    tcase_add_test(tc, effort_name_is_checked);
    suite_add_tcase(s, tc);
    return s;
}

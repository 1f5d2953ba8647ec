/* Unit tests for the tables of a projection (tables/projection_tables.c): columns,
 * kinds, legends, notes, and that every cell is the projection's own number. A projection
 * without noise has a closed form (exponential growth, N_t = N_0 e^{r t}; Dennis, Munholland &
 * Scott 1991, eq. 1 with sigma = 0) that the cells are also checked against. */
#include "tf_test.h"

#include <math.h>
#include <string.h>

#include "export/csv_out.h"
#include "model/model.h"
#include "project/cautions.h"
#include "project/project.h"
#include "tables/columns.h"
#include "tables/projection_tables.h"

#define HORIZON 20
#define R (-0.1)
#define N0 100.0
/* Several rounding steps (log, exp, sums of r) separate a cell from the closed form. */
#define CLOSED_FORM_TOL 1e-12

/* The deterministic projection: exponential growth r = R, sigma = 0, from N0; thresholds 50
 * animals and 20 % of N0; an extra decline window of 20 years. */
static tf_projection *deterministic(void)
{
    tf_error err;
    tf_error_init(&err);
    tf_model *m = NULL;
    ck_assert_int_eq(tf_model_new("exponential", "poisson", &m, &err), TF_OK);
    double theta[2] = {R, 0.0}, x0 = log(N0);
    tf_project_input in = tf_project_input_from_model(m, theta, 1, &x0, 1.0);
    tf_project_options o;
    tf_project_options_init(&o);
    o.horizon = HORIZON;
    o.n_runs = 10;
    o.decline_window = 20;
    ck_assert_int_eq(tf_project_parse_thresholds("50,20%", o.thresholds, TF_PROJECT_MAX_THRESHOLDS, &o.n_thresholds,
                                                 &err),
                     TF_OK);
    tf_rng rng;
    uint64_t key = 3;
    tf_rng_derive(&rng, 1, &key, 1);
    tf_projection *p = NULL;
    ck_assert_int_eq(tf_project_run(&in, 1, &o, &rng, &p, &err), TF_OK);
    tf_model_free(m);
    return p;
}

static void assert_columns(const tf_table *t, const char *const *headers, const tf_col_kind *kinds, size_t n)
{
    ck_assert_uint_eq(tf_table_n_columns(t), n);
    for (size_t j = 0; j < n; j++) {
        ck_assert_str_eq(tf_table_header(t, j), headers[j]);
        ck_assert_int_eq(tf_table_column_kind(t, j), kinds[j]);
        ck_assert(strlen(tf_table_legend(t, j)) > 10);
    }
}

static void assert_notes(const tf_table *t)
{
    ck_assert_uint_eq(tf_table_n_notes(t), 1 + tf_project_n_cautions());
    ck_assert_int_eq(tf_table_note_kind(t, 0), TF_NOTE_INFO);
    ck_assert_ptr_nonnull(strstr(tf_table_note(t, 0), "10 simulated futures, 20 years ahead"));
    for (size_t i = 0; i < tf_project_n_cautions(); i++) {
        ck_assert_int_eq(tf_table_note_kind(t, 1 + i), TF_NOTE_CAUTION);
        ck_assert_str_eq(tf_table_note(t, 1 + i), tf_project_caution(i));
    }
}

/* Builds the tables of p with calendar year year0 into t and checks that table `which` is
 * written to the file name `file`; returns that table. */
static const tf_table *build(const tf_projection *p, int year0, tf_table **t, size_t which, const char *file)
{
    tf_error err;
    tf_error_init(&err);
    tf_projection_place place = {.population = "north, upper", .model = "fixed", .unit = TF_UNIT_ANIMALS,
                                 .year0 = year0};
    ck_assert_int_eq(tf_projection_tables_build(p, &place, t, &err), TF_OK);
    char name[64];
    tf_csv_file_name(tf_table_name(t[which]), name, sizeof name);
    ck_assert_str_eq(name, file);
    /* Every row says whose projection it is. */
    for (size_t i = 0; i < tf_table_n_rows(t[which]); i++) {
        ck_assert_str_eq(tf_table_text(t[which], i, 0), "north, upper");
        ck_assert_str_eq(tf_table_text(t[which], i, 1), "fixed");
    }
    return t[which];
}

static int close_to(double got, double want)
{
    return fabs(got - want) <= CLOSED_FORM_TOL * fabs(want);
}

START_TEST(bands_table)
{
    tf_projection *p = deterministic();
    tf_table *t[TF_PROJECTION_N_TABLES];
    const tf_table *b = build(p, 2010, t, TF_PROJECTION_TABLE_BANDS, "projection.csv");
    static const char *const headers[] = {"population", "model",    "years_ahead", "year",    "unit",
                                          "median",     "lower_50", "upper_50",    "lower_95", "upper_95"};
    static const tf_col_kind kinds[] = {TF_COL_TEXT,   TF_COL_TEXT,   TF_COL_INTEGER, TF_COL_YEAR,   TF_COL_TEXT,
                                        TF_COL_NUMBER, TF_COL_NUMBER, TF_COL_NUMBER,  TF_COL_NUMBER, TF_COL_NUMBER};
    assert_columns(b, headers, kinds, 10);
    assert_notes(b);
    static const tf_band order[] = {TF_BAND_MEDIAN, TF_BAND_P25, TF_BAND_P75, TF_BAND_P025, TF_BAND_P975};
    ck_assert_uint_eq(tf_table_n_rows(b), HORIZON + 1);
    for (size_t y = 0; y <= HORIZON; y++) {
        ck_assert(tf_table_number(b, y, 2) == (double)y);
        ck_assert(tf_table_number(b, y, 3) == 2010.0 + (double)y);
        ck_assert_str_eq(tf_table_text(b, y, 4), "animals");
        for (size_t k = 0; k < 5; k++) {
            double v = tf_table_number(b, y, 5 + k);
            ck_assert(v == tf_projection_band(p, y, order[k]));
            ck_assert(close_to(v, N0 * exp(R * (double)y)));
        }
    }
    tf_projection_tables_free(t);
    for (size_t i = 0; i < TF_PROJECTION_N_TABLES; i++)
        ck_assert_ptr_null(t[i]);
    tf_projection_free(p);
}
END_TEST

/* 100 e^{-0.1 t} <= 50 from t = ln 2 / 0.1 = 6.93, i.e. year 7; <= 20 from t = 16.09, year 17. */
START_TEST(risk_table)
{
    tf_projection *p = deterministic();
    tf_table *t[TF_PROJECTION_N_TABLES];
    const tf_table *r = build(p, TF_PROJECTION_NO_YEAR, t, TF_PROJECTION_TABLE_RISK, "risk.csv");
    static const char *const headers[] = {"population", "model", "threshold",   "threshold_kind",
                                          "years_ahead", "year", "probability", "probability_mcse"};
    static const tf_col_kind kinds[] = {TF_COL_TEXT,    TF_COL_TEXT, TF_COL_NUMBER,      TF_COL_TEXT,
                                        TF_COL_INTEGER, TF_COL_YEAR, TF_COL_PROBABILITY, TF_COL_NUMBER};
    assert_columns(r, headers, kinds, 8);
    assert_notes(r);
    ck_assert_uint_eq(tf_table_n_rows(r), 2 * (HORIZON + 1));
    /* A threshold is a number and its kind, never text: 50 animals, and 20 % as 0.2. */
    static const double values[] = {50, 0.2};
    static const char *const kinds_of[] = {"animals", "fraction_of_current"};
    static const size_t first_year[] = {7, 17};
    for (size_t k = 0; k < 2; k++)
        for (size_t y = 0; y <= HORIZON; y++) {
            size_t row = k * (HORIZON + 1) + y;
            ck_assert(tf_table_number(r, row, 2) == values[k]);
            ck_assert_str_eq(tf_table_text(r, row, 3), kinds_of[k]);
            ck_assert(tf_table_number(r, row, 4) == (double)y);
            ck_assert(tf_table_is_empty(r, row, 5));
            ck_assert(tf_table_number(r, row, 6) == tf_projection_risk(p, k, y));
            ck_assert(tf_table_number(r, row, 6) == (y >= first_year[k] ? 1.0 : 0.0));
            ck_assert(tf_table_number(r, row, 7) == tf_projection_risk_se(p, k, y));
        }
    tf_projection_tables_free(t);
    tf_projection_free(p);
}
END_TEST

/* Over 10 years N falls to e^{-1} = 0.37 of N0: declines of 30 % and 50 % happen, 80 % does not;
 * over 20 years to e^{-2} = 0.14: all three happen. */
START_TEST(declines_table)
{
    tf_projection *p = deterministic();
    tf_table *t[TF_PROJECTION_N_TABLES];
    const tf_table *d = build(p, 1999, t, TF_PROJECTION_TABLE_DECLINES, "declines.csv");
    static const char *const headers[] = {"population", "model",       "window_years",
                                          "decline",    "probability", "probability_mcse"};
    static const tf_col_kind kinds[] = {TF_COL_TEXT,    TF_COL_TEXT,        TF_COL_INTEGER,
                                        TF_COL_PERCENT, TF_COL_PROBABILITY, TF_COL_NUMBER};
    assert_columns(d, headers, kinds, 6);
    assert_notes(d);
    ck_assert_uint_eq(tf_table_n_rows(d), 6);
    static const double windows[] = {10, 20}, declines[] = {0.3, 0.5, 0.8};
    static const double happens[2][3] = {{1, 1, 0}, {1, 1, 1}};
    for (size_t w = 0; w < 2; w++)
        for (size_t k = 0; k < 3; k++) {
            size_t row = w * 3 + k;
            ck_assert(tf_table_number(d, row, 2) == windows[w]);
            ck_assert(tf_table_number(d, row, 3) == declines[k]);
            ck_assert(tf_table_number(d, row, 4) == tf_projection_decline_prob(p, w, k));
            ck_assert(tf_table_number(d, row, 4) == happens[w][k]);
            ck_assert(tf_table_number(d, row, 5) == tf_projection_decline_se(p, w, k));
        }
    tf_projection_tables_free(t);
    tf_projection_free(p);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("projection_tables");
    TCase *tc = tcase_create("projection_tables");
    tcase_add_test(tc, bands_table);
    tcase_add_test(tc, risk_table);
    tcase_add_test(tc, declines_table);
    suite_add_tcase(s, tc);
    return s;
}

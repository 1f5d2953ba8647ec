/* Unit tests for the plain sentences of a summary (analysis/wording.c): rounding of percentages
 * and chances, and the three readings of a trend (decline, increase, no clear trend). */
#include "tf_test.h"

#include <math.h>
#include <string.h>

#include "analysis/wording.h"

START_TEST(numbers)
{
    char b[32];
    ck_assert_str_eq(tf_wording_percent(-2.04, b, sizeof b), "-2");
    ck_assert_str_eq(tf_wording_percent(-0.5, b, sizeof b), "-0.5");
    ck_assert_str_eq(tf_wording_percent(12.4, b, sizeof b), "12");
    ck_assert_str_eq(tf_wording_percent(9.96, b, sizeof b), "10");
    ck_assert_str_eq(tf_wording_percent(-0.01, b, sizeof b), "0");
    ck_assert_str_eq(tf_wording_percent(NAN, b, sizeof b), "n/a");
    ck_assert_str_eq(tf_wording_chance(0.004, b, sizeof b), "less than 1 %");
    ck_assert_str_eq(tf_wording_chance(0.996, b, sizeof b), "more than 99 %");
    ck_assert_str_eq(tf_wording_chance(0.1234, b, sizeof b), "about 12 %");
    ck_assert_str_eq(tf_wording_chance(NAN, b, sizeof b), "not available");
}
END_TEST

START_TEST(trends)
{
    char b[512];
    tf_analysis_trend down = {.first_year = 1996, .last_year = 2025, .median = -0.021, .q025 = -0.04, .q975 = -0.005};
    tf_wording_trend(&down, b, sizeof b);
    ck_assert_str_eq(b, "The counts point to a decline of about 2.1 % a year (95 % interval -4 % to -0.5 %) over 1996-2025.");
    tf_analysis_trend up = {.first_year = 2001, .last_year = 2020, .median = 0.031, .q025 = 0.012, .q975 = 0.05};
    tf_wording_trend(&up, b, sizeof b);
    ck_assert_str_eq(b, "The counts point to an increase of about 3.1 % a year (95 % interval 1.2 % to 5 %) over 2001-2020.");
    tf_analysis_trend flat = {.first_year = 2001, .last_year = 2020, .median = -0.004, .q025 = -0.02, .q975 = 0.011};
    tf_wording_trend(&flat, b, sizeof b);
    ck_assert(strstr(b, "no clear trend") && strstr(b, "-0.4 % a year") && strstr(b, "includes no change"));
    tf_analysis_trend none = {.first_year = 2001, .last_year = 2020, .median = NAN, .q025 = NAN, .q975 = NAN};
    tf_wording_trend(&none, b, sizeof b);
    ck_assert(strstr(b, "could not be estimated"));
    /* The recent trend: its own sentence, none when its period is the whole survey. */
    tf_analysis_trend recent = {.first_year = 2011, .last_year = 2020, .median = -0.004, .q025 = -0.02, .q975 = 0.011};
    tf_wording_recent(&up, &recent, b, sizeof b);
    ck_assert_str_eq(b, "Over the last 10 years (2011-2020) there is no clear trend: about -0.4 % a year (95 % interval "
                        "-2 % to 1.1 %).");
    recent.median = -0.03, recent.q025 = -0.05, recent.q975 = -0.01;
    tf_wording_recent(&up, &recent, b, sizeof b);
    ck_assert(strstr(b, "still declining, by about 3 % a year"));
    tf_wording_recent(&up, &up, b, sizeof b);
    ck_assert_str_eq(b, "");
}
END_TEST

START_TEST(risks)
{
    char b[512];
    tf_threshold abs_t = {.value = 100, .relative = 0}, rel_t = {.value = 0.2, .relative = 1};
    tf_wording_threshold(&abs_t, NULL, b, sizeof b);
    ck_assert_str_eq(b, "100 animals");
    /* A threshold is in the unit of the abundances: count units where effort or the counted
     * fraction makes them so. */
    tf_wording_threshold(&abs_t, "count units per trap-night", b, sizeof b);
    ck_assert_str_eq(b, "100 count units per trap-night");
    tf_wording_threshold(&rel_t, "count units", b, sizeof b);
    ck_assert_str_eq(b, "20 % of the current abundance");
    tf_wording_risk(&abs_t, NULL, 20, 0.12, b, sizeof b);
    ck_assert_str_eq(b, "Averaging the models by their support, the chance of falling below 100 animals at any time "
                        "within 20 years is about 12 %.");
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("wording");
    TCase *tc = tcase_create("wording");
    tcase_add_test(tc, numbers);
    tcase_add_test(tc, trends);
    tcase_add_test(tc, risks);
    suite_add_tcase(s, tc);
    return s;
}

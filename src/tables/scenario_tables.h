/* The tables of management scenarios: each scenario's quasi-extinction curves and abundance bands
 * (`scenarios`), its difference from the status quo with the paired Monte Carlo error
 * (`scenario-differences`), and its declines with their differences (`scenario-declines`). The
 * status quo is not in them: it is the usual projection tables. Built from a tf_scenario_set
 * alone. */
#ifndef TF_SCENARIO_TABLES_H
#define TF_SCENARIO_TABLES_H

#include "export/table.h"
#include "project/safe_removal.h"
#include "project/scenario.h"
#include "tables/projection_tables.h"
#include "util/error.h"

enum {
    TF_SCENARIO_TABLE_CURVES,       /* scenarios */
    TF_SCENARIO_TABLE_DIFFERENCES,  /* scenario-differences */
    TF_SCENARIO_TABLE_DECLINES,     /* scenario-declines */
    TF_SCENARIO_N_TABLES
};

#define TF_SCENARIO_CURVES_NAME "scenarios"
#define TF_SCENARIO_DIFFERENCES_NAME "scenario-differences"
#define TF_SCENARIO_DECLINES_NAME "scenario-declines"

/* Builds the three tables of s into out (indexed as above), with place naming the population, the
 * model and the calendar years as for the projection tables. scenarios: one row per scenario,
 * threshold and year ahead (population, model, scenario, threshold, threshold_kind, years_ahead,
 * year, probability, probability_mcse, unit, median, lower_50, upper_50, lower_95, upper_95);
 * scenario-differences: the same rows with probability, difference and difference_mcse;
 * scenario-declines: one row per scenario, window and decline. status_quo_animals and
 * status_quo_years (0: none recorded) are said in a note. The caller owns the tables
 * (tf_scenario_tables_free); on failure every entry is NULL. */
tf_status tf_scenario_tables_build(const tf_scenario_set *s, const tf_projection_place *place,
                                   double status_quo_animals, size_t status_quo_years,
                                   tf_table *out[TF_SCENARIO_N_TABLES], tf_error *err);
void tf_scenario_tables_free(tf_table *tables[TF_SCENARIO_N_TABLES]);

/* The status quo in words, for notes and first pages: "the survey records no removals: no
 * removal" or "a net removal of 41.2 animals a year, the mean of the last 5 survey years". */
char *tf_scenario_tables_status_quo(double animals, size_t n_years, char *buf, size_t size);

/* The largest safe removal in words ("32.5 animals a year" or "4.1 % of the population a year")
 * and the assumptions behind it, for first pages and summaries. */
char *tf_scenario_tables_safe_value(const tf_safe_removal *r, char *buf, size_t size);
char *tf_scenario_tables_safe_note(const tf_safe_removal *r, char *buf, size_t size);

/* Adds to the key-value summary t a "Management" heading and its lines when there is anything to
 * say (removals recorded, scenarios, or a safe removal; nothing otherwise): the status quo, each
 * scenario in words, and the largest safe removal as the items `safe_removal` and
 * `safe_removal_mcse` (a share as a fraction, or animals) with its assumptions and caution.
 * s and safe may be NULL. TF_ERR_NOMEM on failure. */
tf_status tf_scenario_tables_summary(tf_table *t, const tf_scenario_set *s, const tf_safe_removal *safe,
                                     double status_quo_animals, size_t status_quo_years, tf_error *err);

/* Adds a population's management block to a first page t: the status quo, then per scenario the
 * chance of reaching the first threshold within 10, 20 and 50 years (those within the horizon)
 * with its difference from the status quo and the paired Monte Carlo error, then the largest
 * safe removal with its assumptions and caution. year0 is the last survey year. Nothing when
 * there are neither scenarios nor a safe removal. TF_ERR_NOMEM on failure. */
tf_status tf_scenario_tables_first_page(tf_table *t, const tf_scenario_set *s, const tf_safe_removal *safe,
                                        double status_quo_animals, size_t status_quo_years, int year0,
                                        tf_error *err);

/* The caution that goes with every largest safe removal. */
extern const char tf_scenario_tables_safe_caution[];

#endif

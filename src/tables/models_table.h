/* The model-comparison table: one row per candidate model with its marginal likelihood, the
 * check estimate, Bayes factor against the best model, posterior probability and diagnostics,
 * for the CSV and workbook writers. It formats a tf_comparison; it computes nothing new. */
#ifndef TF_COMPARE_TABLE_H
#define TF_COMPARE_TABLE_H

#include "compare/compare.h"
#include "export/table.h"
#include "util/error.h"

/* The table's name and file stem. */
#define TF_COMPARE_TABLE_NAME "models"

/* Builds the table of comparison c of the population labelled population (its first column):
 * fitted models by decreasing marginal likelihood, then the
 * failed and the excluded ones with their reasons in the note column; warning flags on Pareto k
 * above TF_PARETO_K_MAX, check estimates that disagree, R-hat above TF_FIT_RHAT_MAX and ESS
 * below TF_FIT_ESS_MIN; note lines on the method and the likelihood scale. Returns NULL with
 * err filled (TF_ERR_NOMEM). The caller frees with tf_table_free. */
tf_table *tf_compare_table(const tf_comparison *c, const char *population, tf_error *err);

/* The order of the rows: out[0..n_models) holds candidate indices. */
void tf_compare_table_order(const tf_comparison *c, size_t *out);

#endif

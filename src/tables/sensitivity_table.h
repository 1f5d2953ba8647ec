/* The prior-sensitivity table: for each set of priors (as fitted, each standard change of scale,
 * each folder of the user's) one row per candidate model with its marginal likelihood, model
 * probability and Pareto k under those priors, and one `average` row with the model-averaged
 * risks of quasi-extinction where a projection was made. It formats a tf_sensitivity (and the
 * analysis's risk rows); it computes nothing. */
#ifndef TF_SENSITIVITY_TABLE_H
#define TF_SENSITIVITY_TABLE_H

#include "analysis/analysis.h"
#include "compare/sensitivity.h"
#include "export/table.h"
#include "project/project.h"
#include "util/error.h"

/* The table's name and file stem. */
#define TF_SENSITIVITY_TABLE_NAME "prior-sensitivity"

/* Builds the table of s for the population labelled population into *out. risks (may be NULL:
 * compare makes no projection) holds one row per row of s, and pr the projection whose
 * thresholds they are (NULL with risks); then each row block ends with an `average` row holding
 * risk_<k>_<years>y per threshold k and window within the projection's horizon. Cells that
 * cannot be trusted (Pareto k above TF_PARETO_K_MAX, a failed estimate) are flagged, with the
 * reason in `note`. The caller frees *out with tf_table_free. Errors: TF_ERR_NOMEM. */
tf_status tf_sensitivity_table(const tf_sensitivity *s, const tf_analysis_sens_row *risks, const tf_projection *pr,
                               const char *population, tf_table **out, tf_error *err);

#endif

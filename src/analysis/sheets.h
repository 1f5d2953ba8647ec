/* The tables of an analysis, laid out for the report: a first page for managers, one row per
 * population, and per population its counts and estimated abundance, projection, quasi-extinction
 * curves, declines, model comparison, parameter summaries, sampler diagnostics and raw draws
 * (CSV only unless asked for in the workbook), each with its legend, notes, warnings and charts.
 * Only formats what the analysis holds. */
#ifndef TF_SHEETS_H
#define TF_SHEETS_H

#include <stddef.h>

#include "analysis/analysis.h"
#include "analysis/provenance.h"
#include "export/report.h"
#include "util/error.h"

/* Where the results came from, shown on the first page. Strings are borrowed. */
typedef struct {
    const char *input_name;                 /* the survey file as given */
    char sha256[TF_PROVENANCE_HASH_BUF];    /* of the survey file */
    char date[TF_PROVENANCE_DATE_BUF];
    const char *title;                      /* names the survey on the first page, e.g. "heron-colony" */
    /* Leave out the seconds each fit took (a wall-clock time), so that the tables of the same
     * settings compare byte for byte; the batch keeps its timings in a file of their own. */
    int omit_seconds;
    /* The survey whose set-aside populations (tf_survey_rejected_at) were left out of the run on
     * request (--skip-unusable), each named on the first page with its problem; NULL = none. */
    const tf_survey *left_out_from;
    /* Put each population's raw posterior draws in the workbook too. By default they are written
     * as CSV only: a sheet of every draw weighs tens of megabytes of XML, which makes the
     * workbook slow to open for readers who never look at it. */
    int workbook_draws;
    /* Where a reader of the workbook finds its CSV twins, in words, e.g. "the folder
     * heron-colony/ beside this workbook"; NULL when not said. */
    const char *csv_place;
} tf_sheets_provenance;

/* Thresholds for flagging a sampler diagnostic. R-hat and ESS use TF_FIT_RHAT_MAX and
 * TF_FIT_ESS_MIN (sampler/fit.h). A chain accepting fewer than 5 % of its proposals is
 * sticky: random-walk PMMH on a few parameters with a well-tuned particle count accepts about
 * 10-25 % (Sherlock, Thiery, Roberts & Rosenthal 2015, Annals of Statistics 43:238, section 3;
 * the 5 % floor is common practice, no source). A log-likelihood SD above 2 makes the chain
 * mix very poorly (Doucet, Pitt, Deligiannidis & Kohn 2015, Biometrika 102:295, section 4). */
#define TF_SHEETS_ACCEPT_MIN 0.05
#define TF_SHEETS_LOGLIK_SD_MAX 2.0

/* Appends every table and chart of analysis a to report r, first page first. Errors:
 * TF_ERR_NOMEM (r then holds part of the tables and should be freed). */
tf_status tf_sheets_build(const tf_analysis *a, const tf_sheets_provenance *prov, tf_report *r, tf_error *err);

/* The plain sentences on one population (trend, then risk), as the first page shows them.
 * Writes at most size bytes; always terminated. */
void tf_sheets_sentences(const tf_analysis *a, size_t population, char *buf, size_t size);

/* Whether effort differs between the surveyed years of s: abundances are then per unit of effort. */
int tf_sheets_effort_varies(const tf_series *s);

/* Whether every fit of the population passed the convergence checks (tf_fit_converged). */
int tf_sheets_all_converged(const tf_analysis_pop *p);

#endif

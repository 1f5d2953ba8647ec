/* The tables of an analysis, laid out for the report: a first page for managers (summary), one
 * row per population (populations), and per population its counts and estimated abundance
 * (abundance), projection, quasi-extinction curves (risk), declines, model comparison (models),
 * annual change, parameter summaries, sampler diagnostics, chains and raw draws (CSV only unless
 * asked for in the workbook), each with its legend, notes, warnings and charts. The per-model
 * tables are the fit tables every command writes (tables/fit_tables.h). Only lays out what the
 * analysis holds. */
#ifndef TF_ANALYSIS_TABLES_H
#define TF_ANALYSIS_TABLES_H

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
    /* The folder of each population's tables within the CSV folder (tf_path_folder_names), in
     * the analysis's population order; NULL: every table in the CSV folder itself (one
     * population). */
    const char *const *folders;
} tf_analysis_tables_provenance;

/* Appends every table and chart of analysis a to report r, first page first. Errors:
 * TF_ERR_NOMEM (r then holds part of the tables and should be freed). */
tf_status tf_analysis_tables_build(const tf_analysis *a, const tf_analysis_tables_provenance *prov, tf_report *r,
                                   tf_error *err);

/* The plain sentences on one population (trend, then risk), as the first page shows them.
 * Writes at most size bytes; always terminated. */
void tf_analysis_tables_sentences(const tf_analysis *a, size_t population, char *buf, size_t size);

#endif

/* The settings record a batch keeps in its folder (settings.txt), which a later run must match to
 * continue the batch. (The row each population keeps of the table of populations is built by
 * tables/populations_table.h.) Nothing here touches a file. */
#ifndef TF_RECORDS_H
#define TF_RECORDS_H

#include <stddef.h>

#include "analysis/analysis.h"
#include "project/project.h"
#include "survey/series.h"
#include "util/error.h"

/* The settings record: every setting of a that changes a number in the outputs, the survey's
 * SHA-256 (hex), whether per-population workbooks are written and, when they are, whether they
 * hold the raw draws (workbook_draws), then the lines of extra (may be NULL), one "key value" per
 * line after a comment line. *out is malloc'd (caller frees); NULL on failure (TF_ERR_NOMEM). */
tf_status tf_records_settings(const tf_analysis_options *a, const char *sha256, int workbooks, int workbook_draws,
                              const char *extra, char **out, tf_error *err);

#endif

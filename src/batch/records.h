/* The records a batch keeps in its folder beside the populations' tables: the settings record
 * (settings.txt) that a later run must match to continue the batch, and the summary table of one
 * row per population, which each population keeps as its own line (summary-row.csv) and the batch
 * combines (all-populations.csv). Its columns follow from the projection settings alone, so that
 * every population, a failed one too, has the same header. Nothing here touches a file. */
#ifndef TF_RECORDS_H
#define TF_RECORDS_H

#include <stddef.h>

#include "analysis/analysis.h"
#include "export/table.h"
#include "project/project.h"
#include "survey/series.h"
#include "util/error.h"

/* The settings record: every setting of a that changes a number in the outputs, the survey's
 * SHA-256 (hex), whether per-population workbooks are written and, when they are, whether they
 * hold the raw draws (workbook_draws), then the lines of extra (may be NULL), one "key value" per
 * line after a comment line. *out is malloc'd (caller frees); NULL on failure (TF_ERR_NOMEM). */
tf_status tf_records_settings(const tf_analysis_options *a, const char *sha256, int workbooks, int workbook_draws,
                              const char *extra, char **out, tf_error *err);

/* An empty summary table named name for projection settings p; NULL when out of memory (in
 * err, which may be NULL). */
tf_table *tf_records_table(const tf_project_options *p, const char *name, tf_error *err);

/* The summary table's CSV header line, without the line end (malloc'd in *out). */
tf_status tf_records_header(const tf_project_options *p, char **out, tf_error *err);

/* The summary line of one population, without the line end (malloc'd in *out): its label, the
 * Status word status, its years from s (NULL for a population set aside), the figures of pop
 * (NULL unless it was analysed) and the reason it failed (may be NULL or ""). */
tf_status tf_records_row(const tf_project_options *p, const char *label, const tf_series *s,
                         const tf_analysis_pop *pop, const char *status, const char *reason, char **out, tf_error *err);

/* Splits one CSV line as tf_csv_write_stream writes it (RFC 4180 quoting) into at most max
 * fields, each a malloc'd string (caller frees); returns the number found (0 when out of
 * memory). */
size_t tf_records_split(const char *line, char **fields, size_t max);

/* Appends line (a summary line) to t (a table of tf_records_table) as typed cells: text columns
 * as text, the others as the numbers the CSV writer wrote (strtod reads them back exactly); a
 * Status other than "done" and a failed sampler check are flagged. */
tf_status tf_records_append(tf_table *t, const char *line, tf_error *err);

#endif

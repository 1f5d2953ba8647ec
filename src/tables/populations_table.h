/* The table of one row per population, the same in the workbook of `analyze` and in a batch's
 * combined file: years, abundance and annual change, best models, the risks at 10, 20 and 50
 * years for each threshold and the decline chances. Its columns follow from the projection
 * settings alone, so that every population, a failed one too, has the same header. */
#ifndef TF_POPULATIONS_TABLE_H
#define TF_POPULATIONS_TABLE_H

#include "analysis/analysis.h"
#include "export/table.h"
#include "project/project.h"
#include "survey/series.h"
#include "util/error.h"

/* The table's name and file stem. */
#define TF_POPULATIONS_TABLE_NAME "populations"

/* The status words of the status column. */
#define TF_POPULATION_DONE "done"

/* An empty table named name for projection settings p; NULL when out of memory (in err, which may
 * be NULL). */
tf_table *tf_populations_table_new(const tf_project_options *p, const char *name, tf_error *err);

/* Appends the row of one population: its label, the status word, its years from s (NULL for a
 * population set aside), the figures of pop (NULL unless it was analysed; its projection was run
 * with p) and the reason it failed (may be NULL or ""). A status other than TF_POPULATION_DONE
 * and failed sampler checks are flagged. */
tf_status tf_populations_table_add(tf_table *t, const tf_project_options *p, const char *label, const tf_series *s,
                                   const tf_analysis_pop *pop, const char *status, const char *reason, tf_error *err);

/* Appends a row read back from its CSV line (as tf_csv_write_stream writes it): text columns as
 * text, the others as the numbers written (strtod reads them back exactly), flagged as
 * tf_populations_table_add flags them. */
tf_status tf_populations_table_add_line(tf_table *t, const char *line, tf_error *err);

/* Splits one CSV line as tf_csv_write_stream writes it (RFC 4180 quoting) into at most max
 * fields, each a malloc'd string (caller frees); returns the number found (0 when out of
 * memory). */
size_t tf_populations_split_line(const char *line, char **fields, size_t max);

/* The CSV text of table t: *head its header line, *body its rows, both without the final line end
 * (malloc'd; the caller frees). */
tf_status tf_populations_csv_text(const tf_table *t, char **head, char **body, tf_error *err);

/* Whether every fit of the population passed the convergence checks (tf_fit_converged). */
int tf_populations_all_converged(const tf_analysis_pop *p);

#endif

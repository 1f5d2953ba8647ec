/* The batch's own tables. The first page of a batch: what the batch holds (how many populations are done, failed, set
 * aside for bad data or not done yet), where each population's tables are, the cautions and how
 * it was made. A key-value table (tf_table_new_summary), named "Summary" as every first page. */
#ifndef TF_BATCH_PAGE_H
#define TF_BATCH_PAGE_H

#include <stddef.h>

#include "export/table.h"
#include "util/error.h"

/* What the page says; strings are borrowed. */
typedef struct {
    const char *title;             /* the survey's name, e.g. "scheme" */
    const char *survey_path;       /* as given */
    const char *sha256;            /* of the survey file */
    const char *date;              /* when the summary was written */
    const char *settings_file;     /* the settings record's file name, in the batch folder */
    size_t n_populations;
    /* Populations by state, in this order: done, failed, bad data, not done; each with the word
     * the populations table uses for it. */
    size_t n_state[4];
    const char *state_word[4];
    int workbooks;                 /* a workbook per population is written */
    int workbook_draws;            /* ... holding the raw draws */
} tf_batch_page;

/* Builds the page into *out (the caller frees); TF_ERR_NOMEM on failure. */
tf_status tf_batch_page_build(const tf_batch_page *p, tf_table **out, tf_error *err);

/* The timings of a batch (population, status, seconds; kept apart from the results, since they
 * are the one thing that differs between two runs): a new empty table, NULL when out of memory
 * (in err); and one row, seconds NAN for a population not done yet. */
tf_table *tf_batch_timings_new(tf_error *err);
tf_status tf_batch_timings_add(tf_table *t, const char *population, const char *status, double seconds,
                               tf_error *err);

#endif

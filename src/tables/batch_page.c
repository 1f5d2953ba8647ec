/* The first page of a batch; see batch_page.h. */
#include "tables/batch_page.h"

#include <stdio.h>

#include "project/cautions.h"
#include "tables/columns.h"
#include "util/version.h"

tf_status tf_batch_page_build(const tf_batch_page *p, tf_table **out, tf_error *err)
{
    *out = NULL;
    tf_status st = TF_OK;
    tf_table *t = tf_table_new_summary("Summary", err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    char text[256];
#define TRY(call)                                                                                                      \
    do {                                                                                                               \
        if (st == TF_OK)                                                                                               \
            st = (call);                                                                                               \
    } while (0)
    TRY(tf_table_add_notef(t, TF_NOTE_INFO, err,
                           "A batch analysis of the survey %s: one row per population on the Populations sheet, "
                           "its tables in its own folder.",
                           p->title));
    for (size_t i = 0; i < tf_project_n_cautions(); i++)
        TRY(tf_table_add_note(t, TF_NOTE_CAUTION, tf_project_caution(i), err));
    TRY(tf_table_add_heading(t, "Populations", err));
    TRY(tf_table_add_item_number(t, "In the survey", (double)p->n_populations, TF_COL_INTEGER, NULL, err));
    static const char *const notes[4] = {NULL, "every fit failed or no model suits the counts: see reason",
                                         "rows of the survey file are invalid: see reason",
                                         "run the same command again to finish them"};
    for (size_t k = 0; k < 4; k++) {
        snprintf(text, sizeof text, "%c%s", p->state_word[k][0] - 'a' + 'A', p->state_word[k] + 1);
        TRY(tf_table_add_item_number(t, text, (double)p->n_state[k], TF_COL_INTEGER, p->n_state[k] ? notes[k] : NULL,
                                     err));
        if (p->n_state[k] && k > 0 && st == TF_OK)
            st = tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err);
    }
    /* Named relative to this folder, so that the file is the same wherever the batch ran. */
    TRY(tf_table_add_item_text(t, "Tables of each population", "<population>/ in this folder",
                               !p->workbooks        ? "CSV files"
                               : p->workbook_draws ? "CSV files and a workbook per population"
                                                   : "CSV files and a workbook per population (raw draws as CSV only)",
                               err));
    TRY(tf_table_add_heading(t, "How this was made", err));
    TRY(tf_table_add_item_text(t, "Survey file", p->survey_path, NULL, err));
    TRY(tf_table_add_item_text(t, "SHA-256 of the file", p->sha256, "identifies the exact file that was read", err));
    TRY(tf_table_add_item_text(t, "Program", "tallyfit " TF_VERSION, NULL, err));
    TRY(tf_table_add_item_text(t, "Summary written", p->date, NULL, err));
    snprintf(text, sizeof text, "%s in this folder", p->settings_file);
    TRY(tf_table_add_item_text(t, "Settings", text,
                               "every setting that changes a number; the same seed and settings give the same numbers, "
                               "whatever the number of threads or processes",
                               err));
#undef TRY
    if (st != TF_OK) {
        tf_table_free(t);
        return st;
    }
    *out = t;
    return TF_OK;
}

tf_table *tf_batch_timings_new(tf_error *err)
{
    tf_table *t = tf_table_new("timings", err);
    if (t && (tf_columns_add(t, TF_C_POPULATION, NULL, NULL, err) != TF_OK ||
              tf_columns_add(t, TF_C_STATUS, NULL, NULL, err) != TF_OK ||
              tf_columns_add(t, TF_C_SECONDS, "seconds the population's analysis took (blank: not done)", NULL, err) !=
                  TF_OK)) {
        tf_table_free(t);
        return NULL;
    }
    return t;
}

tf_status tf_batch_timings_add(tf_table *t, const char *population, const char *status, double seconds,
                               tf_error *err)
{
    size_t row;
    tf_status st = tf_table_add_row(t, &row, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, row, 0, population, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, row, 1, status, err);
    if (st == TF_OK)
        tf_table_set_number(t, row, 2, seconds);
    return st;
}

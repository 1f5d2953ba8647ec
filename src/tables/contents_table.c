/* The contents table; see contents_table.h. */
#include "tables/contents_table.h"

#include "tables/columns.h"

tf_table *tf_contents_table_new(tf_error *err)
{
    tf_table *t = tf_table_new("contents", err);
    if (t && (tf_columns_add(t, TF_C_POPULATION, "the population the table is about (blank: the whole file)", NULL,
                             err) != TF_OK ||
              tf_columns_add(t, TF_C_FILE, NULL, NULL, err) != TF_OK ||
              tf_columns_add(t, TF_C_SHEET, NULL, NULL, err) != TF_OK ||
              tf_columns_add(t, TF_C_ABOUT, NULL, NULL, err) != TF_OK)) {
        tf_table_free(t);
        return NULL;
    }
    return t;
}

tf_status tf_contents_table_add(tf_table *t, const char *population, const char *file, const char *sheet,
                                const char *about, tf_error *err)
{
    size_t row;
    tf_status st = tf_table_add_row(t, &row, err);
    const char *cells[4] = {population, file, sheet, about};
    for (size_t j = 0; j < 4 && st == TF_OK; j++)
        st = tf_table_set_text(t, row, j, cells[j], err);
    return st;
}

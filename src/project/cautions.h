/* The cautions that go with every projection, in one place so that the printed summary, the CSV
 * tables and the workbook all carry the same words. */
#ifndef TF_CAUTIONS_H
#define TF_CAUTIONS_H

#include <stddef.h>

/* Number of caution paragraphs. */
size_t tf_project_n_cautions(void);
/* Paragraph i (plain text, one line, no trailing newline), or NULL when i is out of range. */
const char *tf_project_caution(size_t i);
/* A note for projections from fixed parameter values rather than a fitted posterior. */
const char *tf_project_caution_fixed(void);
/* A note for projections from a fitted posterior whose start was set by hand (a what-if). */
const char *tf_project_caution_start(void);

#endif

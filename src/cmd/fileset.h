/* The output files of a command written as one group, all or none: the folders are made, every
 * file is written to a temporary beside its destination, and then all are renamed into place
 * together (tf_atomic_commit_all) or all abandoned; folders the group made are taken away again
 * when it fails. */
#ifndef TF_FILESET_H
#define TF_FILESET_H

#include <stddef.h>
#include <stdio.h>

#include "util/error.h"

typedef struct tf_fileset tf_fileset;

/* A group with room for n_dirs folders and n_files files; NULL when out of memory (recorded in
 * err). */
tf_fileset *tf_fileset_new(size_t n_dirs, size_t n_files, tf_error *err);

/* Makes folder dir and its missing parents (tf_atomic_mkdirs), remembering what it made even on
 * failure. Borrows dir, which must stay unchanged until tf_fileset_finish. */
tf_status tf_fileset_mkdir(tf_fileset *g, const char *dir, tf_error *err);

/* Starts writing file path of the group (tf_atomic_open, never over protect); *out receives the
 * stream to write to. Write errors stay on the stream and are reported when the group is
 * committed. */
tf_status tf_fileset_open(tf_fileset *g, const char *path, const char *protect, FILE **out, tf_error *err);

/* Ends the group and frees it: with st TF_OK commits every file (tf_atomic_commit_all),
 * otherwise abandons them; when that fails or st is not TF_OK, removes the folders the group
 * made, the last made first. Returns the commit's status, or st when it was not TF_OK. Accepts
 * g NULL (returns st). */
tf_status tf_fileset_finish(tf_fileset *g, tf_status st, tf_error *err);

#endif

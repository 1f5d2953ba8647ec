/* Files that appear whole or not at all: text goes to a temporary file in the target's directory,
 * which is renamed over the target once complete (rename() replaces a name atomically within one
 * file system, POSIX.1-2008). An error or an interruption leaves the old file, or none. */
#ifndef TF_ATOMIC_FILE_H
#define TF_ATOMIC_FILE_H

#include <stdio.h>

#include "util/error.h"

typedef struct tf_atomic_file tf_atomic_file;

/* Creates the temporary file beside path (same directory, name path.tmp-PID-TAG). On success stores
 * a handle in *out; write through tf_atomic_stream, then call tf_atomic_commit or tf_atomic_abort,
 * which free the handle. TF_ERR_IO (naming path) or TF_ERR_NOMEM; *out is then NULL. */
tf_status tf_atomic_open(const char *path, tf_atomic_file **out, tf_error *err);

/* The stream to write to; borrowed from f. */
FILE *tf_atomic_stream(tf_atomic_file *f);

/* The target path; borrowed from f. */
const char *tf_atomic_path(const tf_atomic_file *f);

/* Flushes, syncs and closes the temporary file without renaming it, so that several files can be
 * completed before any of them replaces its target. TF_ERR_IO on a write error (including an
 * earlier one on the stream); f must then still be given to tf_atomic_abort or tf_atomic_commit. */
tf_status tf_atomic_finish(tf_atomic_file *f, tf_error *err);

/* Finishes the file (unless tf_atomic_finish already did) and renames it over the target. Frees f.
 * On any failure removes the temporary file, leaves the target as it was and returns TF_ERR_IO
 * (a failure already reported by tf_atomic_finish is not reported again). */
tf_status tf_atomic_commit(tf_atomic_file *f, tf_error *err);

/* Commits n files all or none: finishes them, then renames each over its target; if any step fails,
 * the targets already replaced get their previous content back (or are removed if they did not
 * exist) and every temporary file is removed. Frees every handle either way. A target that is a
 * folder is refused before anything is renamed. TF_ERR_IO naming the file. */
tf_status tf_atomic_commit_group(tf_atomic_file **files, size_t n, tf_error *err);

/* Closes and removes the temporary file; the target is untouched. Frees f; accepts NULL. */
void tf_atomic_abort(tf_atomic_file *f);

#endif

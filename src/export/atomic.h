/* Writing output files so that a reader sees either the old file or the complete new one, never a
 * half-written one, and so that an output never lands on top of the input it was computed from. */
#ifndef TF_ATOMIC_H
#define TF_ATOMIC_H

#include <stdio.h>

#include "util/error.h"

/* A file being written: a temporary beside the destination that becomes the destination on
 * tf_atomic_commit and disappears on tf_atomic_abort. */
typedef struct tf_atomic tf_atomic;

/* Checks that path may be written: it is not a directory, not an existing non-regular file
 * (device, pipe), and not the same file as protect (same device and inode, so a symbolic or hard
 * link to the input is caught too). protect may be NULL (nothing protected) or name a file that
 * does not exist (nothing to protect). Returns TF_OK, or TF_ERR_USAGE when path is the protected
 * file, TF_ERR_IO otherwise, with a message naming path in err. */
tf_status tf_atomic_check_target(const char *path, const char *protect, tf_error *err);

/* Creates directory dir and any missing parents (like mkdir -p), then checks that dir is a
 * writable directory. Errors (TF_ERR_IO) name the component that is in the way: a regular file
 * where a directory is needed, a parent without write permission, or a final directory that is
 * not writable. An existing directory is fine. */
tf_status tf_atomic_mkdirs(const char *dir, tf_error *err);

/* Starts writing path: checks it with tf_atomic_check_target, then creates a temporary
 * ".<name>.tmp-XXXXXX" in the destination's directory (mkstemp) and opens a stream on it. The
 * temporary gets the destination's permission bits when the destination exists, otherwise
 * 0666 less the process umask. The directory must exist (see tf_atomic_mkdirs). On success
 * stores the handle in *out; the caller ends the write with exactly one of tf_atomic_commit or
 * tf_atomic_abort. On failure (TF_ERR_USAGE for the protected file, TF_ERR_IO, TF_ERR_NOMEM)
 * stores NULL, fills err and leaves no temporary behind. Copies path and protect. */
tf_status tf_atomic_open(const char *path, const char *protect, tf_atomic **out, tf_error *err);

/* The stream to write to; NULL after tf_atomic_close_stream. Write errors are detected and
 * reported by tf_atomic_commit, so callers may write without checking each call. */
FILE *tf_atomic_stream(tf_atomic *a);

/* The temporary's path and the destination's path; valid until commit or abort. */
const char *tf_atomic_temp_path(const tf_atomic *a);
const char *tf_atomic_path(const tf_atomic *a);

/* Closes the stream (checking buffered writes) but keeps the temporary, so that a library that
 * writes by file name (libxlsxwriter) can write tf_atomic_temp_path before tf_atomic_commit.
 * On failure (TF_ERR_IO) the handle stays valid; the caller still commits or aborts. */
tf_status tf_atomic_close_stream(tf_atomic *a, tf_error *err);

/* Finishes the write: flushes and closes the stream if still open, fsyncs the temporary, checks
 * the destination again and renames the temporary over it, then fsyncs the directory (best
 * effort). Always frees a. On failure (TF_ERR_IO, or TF_ERR_USAGE if the destination has become
 * the protected file) the temporary is removed and the destination is untouched. */
tf_status tf_atomic_commit(tf_atomic *a, tf_error *err);

/* Abandons the write: closes the stream, removes the temporary, frees a. Accepts NULL. */
void tf_atomic_abort(tf_atomic *a);

#endif

/* Writing output files so that a reader sees either the old file or the complete new one, never a
 * half-written one, and so that an output never lands on top of the input it was computed from. */
#ifndef TF_ATOMIC_H
#define TF_ATOMIC_H

#include <stddef.h>
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
 * not writable. An existing directory is fine. When n_created is not NULL it receives the number
 * of directories this call created (the deepest components of dir), on failure too, so that a
 * caller whose later writes fail can take them away again with tf_atomic_rmdirs. */
tf_status tf_atomic_mkdirs(const char *dir, size_t *n_created, tf_error *err);

/* Removes the n_created deepest components of dir (as counted by tf_atomic_mkdirs), deepest
 * first, stopping at the first one that cannot be removed: rmdir(2) only removes empty
 * directories, so files that arrived meanwhile are never lost. */
void tf_atomic_rmdirs(const char *dir, size_t n_created);

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

/* Commits n files together, all or none, for outputs that only make sense as a set (the tables
 * of one run). First every file is finished as by tf_atomic_commit (stream flushed, temporary
 * fsynced, destination checked again); then each existing destination gets a second name beside
 * it (a hard link "<temporary>.old"), and only then are the temporaries renamed over their
 * destinations in order. If anything fails, the destinations already replaced get their previous
 * file back under their name (or are removed when there was none), so every destination ends as
 * it was before the call; should even that fail, the error says where the previous file was
 * kept. Two handles for the same destination are refused (TF_ERR_INVALID) before anything is
 * renamed. Always frees every handle; files[i] must not be NULL. n = 0 does nothing.
 *
 * Each single rename is atomic, the group is not: a reader looking while the renames run, or a
 * crash between them, may see some new files beside old ones (never a partial file). On a file
 * system without hard links (FAT) the old file is moved aside instead, so for an instant its
 * name does not exist. */
tf_status tf_atomic_commit_all(tf_atomic **files, size_t n, tf_error *err);

/* Abandons the write: closes the stream, removes the temporary, frees a. Accepts NULL. */
void tf_atomic_abort(tf_atomic *a);

#endif

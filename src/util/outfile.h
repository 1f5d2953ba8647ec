/* Writing a file all at once or not at all: output goes to a temporary file beside the target,
 * which replaces the target by rename(2) only after everything was written and flushed, so an
 * interrupted or failed run never leaves a half-written file. */
#ifndef TF_OUTFILE_H
#define TF_OUTFILE_H

#include <stdio.h>

#include "util/error.h"

typedef struct tf_outfile tf_outfile;

/* Creates the temporary file "PATH.tmp.PID.K" (mode 0666 minus the umask) in path's directory.
 * NULL with TF_ERR_IO or TF_ERR_NOMEM in err on failure. The caller ends it with exactly one of
 * tf_outfile_commit or tf_outfile_discard. */
tf_outfile *tf_outfile_open(const char *path, tf_error *err);

/* The stream to write to; owned by the outfile. */
FILE *tf_outfile_stream(tf_outfile *of);

/* Flushes, syncs and closes the temporary file and renames it to the target; frees of. On any
 * failure (including an earlier write error on the stream) the temporary file is removed, the
 * target is left as it was, and TF_ERR_IO is recorded. */
tf_status tf_outfile_commit(tf_outfile *of, tf_error *err);

/* Closes and removes the temporary file; frees of. Accepts NULL. */
void tf_outfile_discard(tf_outfile *of);

#endif

/* Atomic file output by a temporary file and rename (POSIX rename(2) replaces atomically). */
#include "util/outfile.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

struct tf_outfile {
    FILE *f;
    char *path;
    char *tmp;
};

/* Temporary names tried before giving up (another process may hold the same name). */
#define TMP_ATTEMPTS 100

tf_outfile *tf_outfile_open(const char *path, tf_error *err)
{
    tf_outfile *of = calloc(1, sizeof *of);
    size_t len = strlen(path) + 64;
    if (!of || !(of->path = strdup(path)) || !(of->tmp = malloc(len))) {
        tf_outfile_discard(of);
        tf_error_add(err, TF_ERR_NOMEM, path, 0, 0, NULL, "out of memory opening the output file");
        return NULL;
    }
    int fd = -1;
    for (int k = 0; k < TMP_ATTEMPTS && fd < 0; k++) {
        snprintf(of->tmp, len, "%s.tmp.%ld.%d", path, (long)getpid(), k);
        /* O_EXCL: never write into a file someone else created; the mode lets the umask decide
         * the final permissions as for any new file. */
        fd = open(of->tmp, O_WRONLY | O_CREAT | O_EXCL, 0666);
        if (fd < 0 && errno != EEXIST)
            break;
    }
    if (fd < 0) {
        tf_error_add(err, TF_ERR_IO, path, 0, 0, "check that the directory exists and is writable",
                     "cannot create a file beside '%s': %s", path, strerror(errno));
        free(of->tmp);
        of->tmp = NULL;
        tf_outfile_discard(of);
        return NULL;
    }
    of->f = fdopen(fd, "w");
    if (!of->f) {
        tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL, "cannot open '%s' for writing: %s", of->tmp, strerror(errno));
        close(fd);
        tf_outfile_discard(of);
        return NULL;
    }
    return of;
}

FILE *tf_outfile_stream(tf_outfile *of) { return of->f; }

tf_status tf_outfile_commit(tf_outfile *of, tf_error *err)
{
    FILE *f = of->f;
    of->f = NULL;
    int bad = ferror(f) || fflush(f) != 0;
    int saved = errno;
    if (!bad && fsync(fileno(f)) != 0 && errno != EINVAL && errno != EROFS) {
        bad = 1;
        saved = errno;
    }
    if (fclose(f) != 0 && !bad) {
        bad = 1;
        saved = errno;
    }
    if (!bad && rename(of->tmp, of->path) != 0) {
        bad = 1;
        saved = errno;
    }
    tf_status st = TF_OK;
    if (bad)
        st = tf_error_add(err, TF_ERR_IO, of->path, 0, 0, NULL, "cannot write '%s': %s", of->path,
                          saved ? strerror(saved) : "write error");
    else {
        free(of->tmp);
        of->tmp = NULL;
    }
    tf_outfile_discard(of);
    return st;
}

void tf_outfile_discard(tf_outfile *of)
{
    if (!of)
        return;
    if (of->f)
        fclose(of->f);
    if (of->tmp)
        unlink(of->tmp);
    free(of->tmp);
    free(of->path);
    free(of);
}

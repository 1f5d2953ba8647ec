/* Temporary file + rename, so that no reader ever sees half a file. */
#include "export/atomic_file.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

struct tf_atomic_file {
    FILE *stream;
    char *path;
    char *tmp;
    char *old;    /* tmp + ".old": the replaced target while a group is committed */
    int failed;   /* tf_atomic_finish reported an error */
    int has_old;  /* old names the previous target */
    int renamed;  /* tmp has been renamed to path */
};

static void release(tf_atomic_file *f)
{
    free(f->path);
    free(f->tmp);
    free(f->old);
    free(f);
}

/* The temporary name: the target's plus the process id and a clock reading, created with O_EXCL so
 * that a clash (another process, a stale file) is detected and retried rather than shared. open()
 * rather than mkstemp() so that the umask gives the file ordinary permissions without touching the
 * process-wide umask. */
static int create_temp(tf_atomic_file *f, size_t cap)
{
    for (unsigned attempt = 0; attempt < 100; attempt++) {
        struct timespec ts;
        clock_gettime(CLOCK_REALTIME, &ts);
        unsigned long tag = (unsigned long)ts.tv_nsec ^ ((unsigned long)attempt << 20);
        snprintf(f->tmp, cap, "%s.tmp-%ld-%lx", f->path, (long)getpid(), tag);
        int fd = open(f->tmp, O_WRONLY | O_CREAT | O_EXCL, 0666);
        if (fd >= 0 || errno != EEXIST)
            return fd;
    }
    return -1;
}

tf_status tf_atomic_open(const char *path, tf_atomic_file **out, tf_error *err)
{
    *out = NULL;
    tf_atomic_file *f = calloc(1, sizeof *f);
    size_t cap = strlen(path) + 64;
    if (!f || !(f->path = strdup(path)) || !(f->tmp = malloc(cap)) || !(f->old = malloc(cap + 4))) {
        if (f)
            release(f);
        return tf_error_add(err, TF_ERR_NOMEM, path, 0, 0, NULL, "out of memory");
    }
    int fd = create_temp(f, cap);
    snprintf(f->old, cap + 4, "%s.old", f->tmp);
    if (fd < 0) {
        int e = errno;
        release(f);
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, "check that the folder exists and is writable",
                            "cannot create a file beside it: %s", strerror(e));
    }
    if (!(f->stream = fdopen(fd, "w"))) {
        int e = errno;
        close(fd);
        unlink(f->tmp);
        release(f);
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL, "cannot open for writing: %s", strerror(e));
    }
    *out = f;
    return TF_OK;
}

FILE *tf_atomic_stream(tf_atomic_file *f) { return f->stream; }
const char *tf_atomic_path(const tf_atomic_file *f) { return f->path; }

tf_status tf_atomic_finish(tf_atomic_file *f, tf_error *err)
{
    if (!f->stream)
        return TF_OK;
    const char *what = NULL;
    int e = 0;
    if (fflush(f->stream) != 0 || ferror(f->stream))
        what = "cannot write", e = errno;
    else if (fsync(fileno(f->stream)) != 0 && errno != EINVAL)
        what = "cannot write to disk", e = errno;
    if (fclose(f->stream) != 0 && !what)
        what = "cannot close", e = errno;
    f->stream = NULL;
    if (what) {
        f->failed = 1;
        return tf_error_add(err, TF_ERR_IO, f->path, 0, 0, NULL, "%s: %s", what, e ? strerror(e) : "write error");
    }
    return TF_OK;
}

tf_status tf_atomic_commit(tf_atomic_file *f, tf_error *err)
{
    tf_status st = f->failed ? TF_ERR_IO : tf_atomic_finish(f, err);
    if (!st && rename(f->tmp, f->path) != 0)
        st = tf_error_add(err, TF_ERR_IO, f->path, 0, 0, NULL, "cannot replace: %s", strerror(errno));
    if (st)
        unlink(f->tmp);
    release(f);
    return st;
}

/* Gives an existing target a second name (the temporary name + ".old") so that it can be put back
 * if a later file of the group fails; has_old stays 0 when there is no target. */
static tf_status keep_old(tf_atomic_file *f, tf_error *err)
{
    struct stat st;
    if (lstat(f->path, &st) != 0)
        return errno == ENOENT ? TF_OK
                               : tf_error_add(err, TF_ERR_IO, f->path, 0, 0, NULL, "cannot replace: %s", strerror(errno));
    if (S_ISDIR(st.st_mode))
        return tf_error_add(err, TF_ERR_IO, f->path, 0, 0, "move the folder away or write elsewhere (-o)",
                            "cannot replace a folder with a file");
    if (link(f->path, f->old) != 0)
        return tf_error_add(err, TF_ERR_IO, f->path, 0, 0, NULL, "cannot replace: %s", strerror(errno));
    f->has_old = 1;
    return TF_OK;
}

tf_status tf_atomic_commit_group(tf_atomic_file **files, size_t n, tf_error *err)
{
    tf_status st = TF_OK;
    for (size_t i = 0; i < n && !st; i++)
        st = files[i]->failed ? TF_ERR_IO : tf_atomic_finish(files[i], err);
    for (size_t i = 0; i < n && !st; i++)
        st = keep_old(files[i], err);
    size_t n_renamed = 0;
    for (; n_renamed < n && !st; n_renamed++) {
        if (rename(files[n_renamed]->tmp, files[n_renamed]->path) != 0) {
            st = tf_error_add(err, TF_ERR_IO, files[n_renamed]->path, 0, 0, NULL, "cannot replace: %s",
                              strerror(errno));
            break;
        }
        files[n_renamed]->renamed = 1;
    }
    for (size_t i = 0; i < n; i++) {
        tf_atomic_file *f = files[i];
        if (st && f->renamed) {
            /* Put back what was there: the old file under its name, or no file. */
            if (f->has_old)
                rename(f->old, f->path);
            else
                unlink(f->path);
        }
        if (f->has_old)
            unlink(f->old); /* fails harmlessly once renamed back */
        tf_atomic_abort(f);
    }
    return st;
}

void tf_atomic_abort(tf_atomic_file *f)
{
    if (!f)
        return;
    if (f->stream)
        fclose(f->stream);
    if (!f->renamed)
        unlink(f->tmp);
    release(f);
}

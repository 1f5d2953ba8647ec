/* Atomic output files: write a temporary beside the destination, fsync, rename over it.
 * rename(2) within one directory replaces the destination in one step (POSIX.1-2008, rename), so
 * readers never see a partial file; the temporary lives in the destination's directory because
 * rename cannot cross file systems. */
#include "export/atomic.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

struct tf_atomic {
    char *path;      /* destination */
    char *protect;   /* NULL = nothing protected */
    char *dir;       /* destination's directory, "." when path has no slash */
    char *temp;      /* temporary's path */
    FILE *fp;        /* NULL once closed */
};

/* Longest part of the destination's name copied into the temporary's name, so that the
 * temporary stays under NAME_MAX (255 on Linux file systems) even for long names. */
#define TEMP_NAME_KEEP 200

static char *dup_str(const char *s)
{
    size_t n = strlen(s) + 1;
    char *d = malloc(n);
    if (d)
        memcpy(d, s, n);
    return d;
}

tf_status tf_atomic_check_target(const char *path, const char *protect, tf_error *err)
{
    if (!path || !path[0])
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "empty output file name");
    size_t n = strlen(path);
    if (path[n - 1] == '/')
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, "give a file name, not a directory",
                            "output name ends with '/'");
    struct stat st;
    if (stat(path, &st) != 0) {
        if (errno == ENOENT)
            return TF_OK;   /* a new file cannot be the input */
        int e = errno;
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL, "cannot examine output file: %s", strerror(e));
    }
    if (S_ISDIR(st.st_mode))
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, "give a file name inside the directory",
                            "output file is a directory");
    if (protect && protect[0]) {
        struct stat ps;
        if (stat(protect, &ps) == 0 && ps.st_dev == st.st_dev && ps.st_ino == st.st_ino)
            return tf_error_add(err, TF_ERR_USAGE, path, 0, 0, "choose another output name",
                                "output would overwrite the input file '%s'", protect);
    }
    if (!S_ISREG(st.st_mode))
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL,
                            "output exists and is not a regular file (device, pipe or socket)");
    return TF_OK;
}

tf_status tf_atomic_mkdirs(const char *dir, tf_error *err)
{
    if (!dir || !dir[0])
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "empty output directory name");
    char *buf = dup_str(dir);
    if (!buf)
        return tf_error_add(err, TF_ERR_NOMEM, dir, 0, 0, NULL, "out of memory");
    tf_status st = TF_OK;
    size_t n = strlen(buf);
    /* Visit each prefix that ends a component: "a", "a/b", "a/b/c". */
    for (size_t i = 1; i <= n && st == TF_OK; i++) {
        if (i < n && buf[i] != '/')
            continue;
        if (buf[i - 1] == '/')
            continue;   /* repeated or trailing slash */
        char saved = buf[i];
        buf[i] = '\0';
        struct stat sb;
        if (stat(buf, &sb) == 0) {
            if (!S_ISDIR(sb.st_mode))
                st = tf_error_add(err, TF_ERR_IO, dir, 0, 0, "remove or rename that file, or choose another directory",
                                  "cannot create output directory: '%s' is a file, not a directory", buf);
        } else if (errno != ENOENT) {
            int e = errno;
            st = tf_error_add(err, TF_ERR_IO, dir, 0, 0, NULL, "cannot examine '%s': %s", buf, strerror(e));
        } else if (mkdir(buf, 0777) != 0 && errno != EEXIST) {
            int e = errno;
            st = tf_error_add(err, TF_ERR_IO, dir, 0, 0,
                              e == EACCES ? "check the permissions of the parent directory" : NULL,
                              "cannot create directory '%s': %s", buf, strerror(e));
        }
        buf[i] = saved;
    }
    free(buf);
    if (st != TF_OK)
        return st;
    struct stat sb;
    if (stat(dir, &sb) != 0 || !S_ISDIR(sb.st_mode))
        return tf_error_add(err, TF_ERR_IO, dir, 0, 0, NULL, "output directory is missing after creating it");
    if (access(dir, W_OK | X_OK) != 0) {
        int e = errno;
        return tf_error_add(err, TF_ERR_IO, dir, 0, 0, "choose a directory you can write to",
                            "output directory is not writable: %s", strerror(e));
    }
    return TF_OK;
}

/* The process umask without changing it: umask(2) can only be read by setting it, which would
 * race with other threads creating files, so read Linux's /proc/self/status "Umask:" line
 * (Linux >= 4.7) and fall back to the common default 022 (common practice, no source). */
static mode_t current_umask(void)
{
    mode_t mask = 022;
    FILE *f = fopen("/proc/self/status", "r");
    if (!f)
        return mask;
    char line[256];
    while (fgets(line, sizeof line, f)) {
        if (!strncmp(line, "Umask:", 6)) {
            char *end;
            unsigned long v = strtoul(line + 6, &end, 8);
            if (end != line + 6 && v <= 0777)
                mask = (mode_t)v;
            break;
        }
    }
    fclose(f);
    return mask;
}

static void free_handle(tf_atomic *a)
{
    if (!a)
        return;
    free(a->path);
    free(a->protect);
    free(a->dir);
    free(a->temp);
    free(a);
}

tf_status tf_atomic_open(const char *path, const char *protect, tf_atomic **out, tf_error *err)
{
    tf_atomic *a = NULL;
    int fd = -1;
    *out = NULL;
    tf_status st = tf_atomic_check_target(path, protect, err);
    if (st != TF_OK)
        return st;
    st = TF_ERR_IO;
    a = calloc(1, sizeof *a);
    if (!a)
        goto nomem;
    a->path = dup_str(path);
    a->protect = protect ? dup_str(protect) : NULL;
    if (!a->path || (protect && !a->protect))
        goto nomem;

    const char *slash = strrchr(path, '/');
    const char *base = slash ? slash + 1 : path;
    size_t dir_len = slash ? (size_t)(slash - path) : 0;
    a->dir = malloc(dir_len + 2);
    if (!a->dir)
        goto nomem;
    if (!slash)
        strcpy(a->dir, ".");
    else if (dir_len == 0)
        strcpy(a->dir, "/");
    else {
        memcpy(a->dir, path, dir_len);
        a->dir[dir_len] = '\0';
    }
    struct stat ds;
    if (stat(a->dir, &ds) != 0) {
        int e = errno;
        tf_error_add(err, TF_ERR_IO, path, 0, 0, e == ENOENT ? "create the directory first" : NULL,
                     "cannot write into directory '%s': %s", a->dir, strerror(e));
        goto fail;
    }
    if (!S_ISDIR(ds.st_mode)) {
        tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL, "cannot write output: '%s' is not a directory", a->dir);
        goto fail;
    }

    size_t keep = strlen(base) < TEMP_NAME_KEEP ? strlen(base) : TEMP_NAME_KEEP;
    size_t cap = strlen(a->dir) + keep + 32;
    a->temp = malloc(cap);
    if (!a->temp)
        goto nomem;
    snprintf(a->temp, cap, "%s/.%.*s.tmp-XXXXXX", a->dir, (int)keep, base);
    fd = mkstemp(a->temp);
    if (fd < 0) {
        int e = errno;
        tf_error_add(err, TF_ERR_IO, path, 0, 0, e == EACCES ? "choose a directory you can write to" : NULL,
                     "cannot create a temporary file in '%s': %s", a->dir, strerror(e));
        free(a->temp);
        a->temp = NULL;   /* nothing was created */
        goto fail;
    }
    struct stat old;
    mode_t mode = stat(path, &old) == 0 ? (old.st_mode & 07777) : (0666 & ~current_umask());
    if (fchmod(fd, mode) != 0) {
        int e = errno;
        tf_error_add(err, TF_ERR_IO, a->temp, 0, 0, NULL, "cannot set permissions: %s", strerror(e));
        goto fail;
    }
    a->fp = fdopen(fd, "w");
    if (!a->fp) {
        int e = errno;
        tf_error_add(err, TF_ERR_IO, a->temp, 0, 0, NULL, "cannot open temporary file: %s", strerror(e));
        goto fail;
    }
    *out = a;
    return TF_OK;

nomem:
    st = tf_error_add(err, TF_ERR_NOMEM, path, 0, 0, NULL, "out of memory");
fail:
    if (fd >= 0)
        close(fd);
    if (a && a->temp)
        unlink(a->temp);
    free_handle(a);
    return st;
}

FILE *tf_atomic_stream(tf_atomic *a)
{
    return a->fp;
}

const char *tf_atomic_temp_path(const tf_atomic *a)
{
    return a->temp;
}

const char *tf_atomic_path(const tf_atomic *a)
{
    return a->path;
}

/* Flushes and closes the stream, reporting the first write error; the stream is gone either way. */
static tf_status finish_stream(tf_atomic *a, tf_error *err)
{
    FILE *fp = a->fp;
    a->fp = NULL;
    errno = 0;
    int bad = fflush(fp) != 0 || ferror(fp);
    int e = errno ? errno : EIO;
    if (!bad && fsync(fileno(fp)) != 0) {
        bad = 1;
        e = errno;
    }
    if (fclose(fp) != 0 && !bad) {
        bad = 1;
        e = errno;
    }
    if (bad)
        return tf_error_add(err, TF_ERR_IO, a->path, 0, 0, e == ENOSPC ? "free some disk space" : NULL,
                            "cannot write output: %s", strerror(e));
    return TF_OK;
}

tf_status tf_atomic_close_stream(tf_atomic *a, tf_error *err)
{
    return a->fp ? finish_stream(a, err) : TF_OK;
}

tf_status tf_atomic_commit(tf_atomic *a, tf_error *err)
{
    tf_status st = TF_OK;
    if (a->fp) {
        st = finish_stream(a, err);
    } else {
        /* Written by name by someone else: make its data durable before the rename. */
        int fd = open(a->temp, O_RDONLY);
        if (fd < 0 || fsync(fd) != 0) {
            int e = errno;
            st = tf_error_add(err, TF_ERR_IO, a->path, 0, 0, NULL, "cannot write output: %s", strerror(e));
        }
        if (fd >= 0)
            close(fd);
    }
    /* The destination may have changed since open (a link to the input made meanwhile). */
    if (st == TF_OK)
        st = tf_atomic_check_target(a->path, a->protect, err);
    if (st == TF_OK && rename(a->temp, a->path) != 0) {
        int e = errno;
        st = tf_error_add(err, TF_ERR_IO, a->path, 0, 0, NULL, "cannot replace output file: %s", strerror(e));
    }
    if (st != TF_OK) {
        unlink(a->temp);
    } else {
        /* Makes the rename itself durable; some file systems refuse fsync on a directory
         * (EINVAL), which changes nothing about the file already in place, so failures are ignored. */
        int dfd = open(a->dir, O_RDONLY);
        if (dfd >= 0) {
            (void)fsync(dfd);
            close(dfd);
        }
    }
    free_handle(a);
    return st;
}

void tf_atomic_abort(tf_atomic *a)
{
    if (!a)
        return;
    if (a->fp)
        fclose(a->fp);
    if (a->temp)
        unlink(a->temp);
    free_handle(a);
}

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

#include "util/path.h"

struct tf_atomic {
    char *path;      /* destination */
    char *protect;   /* NULL = nothing protected */
    char *dir;       /* destination's directory, "." when path has no slash */
    char *temp;      /* temporary's path */
    FILE *fp;        /* NULL once closed */
    /* State of a group commit (tf_atomic_commit_all); all zero otherwise. */
    char *backup;    /* "<temp>.old": a second name of the previous destination file */
    int old;         /* how the previous file is kept: OLD_NONE, OLD_LINKED, OLD_ASIDE */
    int backup_exists;   /* the backup name exists now */
    int keep_backup;     /* putting the previous file back failed: the backup is all that is left */
    int renamed;     /* the temporary now is the destination */
};

enum { OLD_NONE, OLD_LINKED, OLD_ASIDE };

/* Longest part of the destination's name copied into the temporary's name, so that the
 * temporary stays under NAME_MAX (255 on Linux file systems) even for long names. */
#define TEMP_NAME_KEEP 200

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

tf_status tf_atomic_mkdirs(const char *dir, size_t *n_created, tf_error *err)
{
    if (n_created)
        *n_created = 0;
    if (!dir || !dir[0])
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "empty output directory name");
    char *buf = strdup(dir);
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
        } else if (mkdir(buf, 0777) == 0) {
            if (n_created)
                (*n_created)++;
        } else if (errno != EEXIST) {
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

void tf_atomic_rmdirs(const char *dir, size_t n_created)
{
    if (!dir || n_created == 0)
        return;
    char *buf = strdup(dir);
    if (!buf)
        return;   /* leaves empty directories behind, nothing worse */
    size_t n = strlen(buf);
    /* The components tf_atomic_mkdirs counted, deepest first: cut the trailing slashes, remove
     * the directory, cut back to the previous slash. */
    for (size_t k = 0; k < n_created; k++) {
        while (n > 1 && buf[n - 1] == '/')
            buf[--n] = '\0';
        if (n == 0 || (n == 1 && buf[0] == '/') || rmdir(buf) != 0)
            break;
        while (n > 0 && buf[n - 1] != '/')
            buf[--n] = '\0';
    }
    free(buf);
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
    free(a->backup);
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
    a->path = strdup(path);
    a->protect = protect ? strdup(protect) : NULL;
    if (!a->path || (protect && !a->protect))
        goto nomem;

    const char *slash = strrchr(path, '/');
    const char *base = slash ? slash + 1 : path;
    if (!(a->dir = tf_path_dir(path)))
        goto nomem;
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
    int e = errno;
    if (bad && !e) {
        /* The write failed in an earlier call whose errno is gone (a large fwrite goes straight
         * to write(2), leaving nothing buffered to fail again here). One more byte at the end
         * of the temporary, which is removed anyway, brings the reason back: a full disk, the
         * file size limit, an I/O error. */
        int fd = fileno(fp);
        e = lseek(fd, 0, SEEK_END) >= 0 && write(fd, "", 1) < 0 ? errno : EIO;
    }
    if (!bad && fsync(fileno(fp)) != 0) {
        bad = 1;
        e = errno;
    }
    if (fclose(fp) != 0 && !bad) {
        bad = 1;
        e = errno;
    }
    if (!bad)
        return TF_OK;
    const char *hint = e == ENOSPC ? "free some disk space"
                       : e == EFBIG ? "the file size limit (ulimit -f) is too small for this file"
                                    : NULL;
    return tf_error_add(err, TF_ERR_IO, a->path, 0, 0, hint, "cannot write output: %s", strerror(e));
}

tf_status tf_atomic_close_stream(tf_atomic *a, tf_error *err)
{
    return a->fp ? finish_stream(a, err) : TF_OK;
}

/* Makes the temporary's content durable before it is renamed: finishes the stream, or fsyncs a
 * temporary that someone else wrote by name. */
static tf_status make_durable(tf_atomic *a, tf_error *err)
{
    if (a->fp)
        return finish_stream(a, err);
    int fd = open(a->temp, O_RDONLY);
    tf_status st = TF_OK;
    if (fd < 0 || fsync(fd) != 0) {
        int e = errno;
        st = tf_error_add(err, TF_ERR_IO, a->path, 0, 0, NULL, "cannot write output: %s", strerror(e));
    }
    if (fd >= 0)
        close(fd);
    return st;
}

/* Makes a rename in dir durable. Some file systems refuse fsync on a directory (EINVAL), which
 * changes nothing about the file already in place, so failures are ignored. */
static void sync_dir(const char *dir)
{
    int dfd = open(dir, O_RDONLY);
    if (dfd >= 0) {
        (void)fsync(dfd);
        close(dfd);
    }
}

/* Ends a handle: closes a stream still open, removes what is left of the temporary and of a
 * backup that is no longer needed, then frees it. */
static void release(tf_atomic *a, int committed)
{
    if (a->fp)
        fclose(a->fp);
    if (!a->renamed && a->temp)
        unlink(a->temp);
    if (a->backup_exists && !a->keep_backup)
        unlink(a->backup);
    if (committed)
        sync_dir(a->dir);
    free_handle(a);
}

tf_status tf_atomic_commit(tf_atomic *a, tf_error *err)
{
    tf_status st = make_durable(a, err);
    /* The destination may have changed since open (a link to the input made meanwhile). */
    if (st == TF_OK)
        st = tf_atomic_check_target(a->path, a->protect, err);
    if (st == TF_OK) {
        if (rename(a->temp, a->path) == 0) {
            a->renamed = 1;
        } else {
            int e = errno;
            st = tf_error_add(err, TF_ERR_IO, a->path, 0, 0, NULL, "cannot replace output file: %s", strerror(e));
        }
    }
    release(a, st == TF_OK);
    return st;
}

/* ---- group commit ---- */

/* Errors of link(2) that say the file system has no hard links (FAT: EPERM) rather than that
 * something is wrong. */
static int no_hard_links(int e)
{
    return e == EPERM || e == EOPNOTSUPP || e == ENOTSUP || e == EMLINK || e == ENOSYS;
}

/* Refuses two handles for one destination: the second rename would replace the first file and
 * the put-back could not restore both. Names are compared within their directory (same device
 * and inode), so "out/a.csv" and "out/./a.csv" are one destination. */
static tf_status check_distinct(tf_atomic **files, size_t n, tf_error *err)
{
    for (size_t i = 0; i < n; i++) {
        const char *bi = strrchr(files[i]->path, '/');
        bi = bi ? bi + 1 : files[i]->path;
        struct stat di;
        if (stat(files[i]->dir, &di) != 0)
            continue;   /* reported by the rename */
        for (size_t j = i + 1; j < n; j++) {
            const char *bj = strrchr(files[j]->path, '/');
            bj = bj ? bj + 1 : files[j]->path;
            struct stat dj;
            if (!strcmp(bi, bj) && stat(files[j]->dir, &dj) == 0 && di.st_dev == dj.st_dev && di.st_ino == dj.st_ino)
                return tf_error_add(err, TF_ERR_INVALID, files[j]->path, 0, 0, NULL,
                                    "the same output file is written twice in one group ('%s')", files[i]->path);
        }
    }
    return TF_OK;
}

/* Gives an existing destination a second name, so that it can be put back. lstat, rename and
 * link(2) on Linux all act on a symbolic link itself, so a destination that is a link is
 * replaced and restored as a link. With use_links = 0 (or no hard links on this file system)
 * the old file is moved aside just before its replacement instead (OLD_ASIDE). */
static tf_status keep_old(tf_atomic *a, int use_links, tf_error *err)
{
    struct stat st;
    if (lstat(a->path, &st) != 0) {
        if (errno == ENOENT)
            return TF_OK;   /* OLD_NONE: put back by removing the new file */
        int e = errno;
        return tf_error_add(err, TF_ERR_IO, a->path, 0, 0, NULL, "cannot examine output file: %s", strerror(e));
    }
    size_t cap = strlen(a->temp) + sizeof ".old";
    if (!(a->backup = malloc(cap)))
        return tf_error_add(err, TF_ERR_NOMEM, a->path, 0, 0, NULL, "out of memory");
    snprintf(a->backup, cap, "%s.old", a->temp);
    if (use_links) {
        if (link(a->path, a->backup) == 0) {
            a->old = OLD_LINKED;
            a->backup_exists = 1;
            return TF_OK;
        }
        int e = errno;
        if (!no_hard_links(e))
            return tf_error_add(err, TF_ERR_IO, a->path, 0, 0, NULL, "cannot keep the previous file while replacing it: %s",
                                strerror(e));
    }
    a->old = OLD_ASIDE;
    return TF_OK;
}

/* Puts the destination's previous file back under its name, or removes the new file when there
 * was none. On failure says where the previous file is and keeps it there. */
static void put_back(tf_atomic *a, tf_error *err)
{
    if (a->old == OLD_NONE) {
        if (unlink(a->path) != 0 && errno != ENOENT) {
            int e = errno;
            tf_error_add(err, TF_ERR_IO, a->path, 0, 0, "delete it by hand: it belongs to an incomplete set",
                         "cannot remove the new file again: %s", strerror(e));
        }
        return;
    }
    if (rename(a->backup, a->path) == 0) {
        a->backup_exists = 0;
        return;
    }
    int e = errno;
    a->keep_backup = 1;
    tf_error_add(err, TF_ERR_IO, a->path, 0, 0, "rename it back by hand",
                 "cannot put the previous file back (%s); it is kept as '%s'", strerror(e), a->backup);
}

/* Renames the temporary over the destination, first moving an OLD_ASIDE file out of the way. */
static tf_status replace(tf_atomic *a, tf_error *err)
{
    if (a->old == OLD_ASIDE) {
        if (rename(a->path, a->backup) != 0) {
            int e = errno;
            return tf_error_add(err, TF_ERR_IO, a->path, 0, 0, NULL, "cannot replace output file: %s", strerror(e));
        }
        a->backup_exists = 1;
    }
    if (rename(a->temp, a->path) != 0) {
        int e = errno;
        tf_status st = tf_error_add(err, TF_ERR_IO, a->path, 0, 0, NULL, "cannot replace output file: %s", strerror(e));
        if (a->old == OLD_ASIDE)
            put_back(a, err);
        return st;
    }
    a->renamed = 1;
    return TF_OK;
}

/* tf_atomic_commit_all with the choice of keeping old files by hard link (use_links = 1) or by
 * moving them aside, so that tests reach both ways on any file system. */
static tf_status commit_group(tf_atomic **files, size_t n, int use_links, tf_error *err)
{
    tf_status st = TF_OK;
    for (size_t i = 0; i < n && st == TF_OK; i++)
        st = make_durable(files[i], err);
    for (size_t i = 0; i < n && st == TF_OK; i++)
        st = tf_atomic_check_target(files[i]->path, files[i]->protect, err);
    if (st == TF_OK)
        st = check_distinct(files, n, err);
    for (size_t i = 0; i < n && st == TF_OK; i++)
        st = keep_old(files[i], use_links, err);
    for (size_t i = 0; i < n && st == TF_OK; i++)
        st = replace(files[i], err);
    if (st != TF_OK)
        for (size_t i = n; i-- > 0;)
            if (files[i]->renamed)
                put_back(files[i], err);
    for (size_t i = 0; i < n; i++)
        release(files[i], st == TF_OK);
    return st;
}

tf_status tf_atomic_commit_all(tf_atomic **files, size_t n, tf_error *err)
{
    return commit_group(files, n, 1, err);
}

void tf_atomic_abort(tf_atomic *a)
{
    if (a)
        release(a, 0);
}

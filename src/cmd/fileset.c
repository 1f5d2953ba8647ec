/* A group of output files written all or none; see fileset.h. */
#include "cmd/fileset.h"

#include <stdlib.h>

#include "export/atomic.h"

struct tf_fileset {
    tf_atomic **files;
    size_t n_files, cap_files;
    const char **dirs;       /* borrowed */
    size_t *created;         /* directories each tf_fileset_mkdir made */
    size_t n_dirs, cap_dirs;
};

tf_fileset *tf_fileset_new(size_t n_dirs, size_t n_files, tf_error *err)
{
    tf_fileset *g = calloc(1, sizeof *g);
    if (g) {
        g->files = calloc(n_files, sizeof *g->files);
        g->dirs = calloc(n_dirs, sizeof *g->dirs);
        g->created = calloc(n_dirs, sizeof *g->created);
        g->cap_files = n_files;
        g->cap_dirs = n_dirs;
    }
    if (!g || !g->files || !g->dirs || !g->created) {
        tf_fileset_finish(g, TF_ERR_NOMEM, NULL);
        tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
        return NULL;
    }
    return g;
}

tf_status tf_fileset_mkdir(tf_fileset *g, const char *dir, tf_error *err)
{
    if (g->n_dirs == g->cap_dirs)
        return tf_error_add(err, TF_ERR_INVALID, dir, 0, 0, NULL, "more folders than the group has room for");
    g->dirs[g->n_dirs] = dir;
    return tf_atomic_mkdirs(dir, &g->created[g->n_dirs++], err);
}

tf_status tf_fileset_open(tf_fileset *g, const char *path, const char *protect, FILE **out, tf_error *err)
{
    *out = NULL;
    if (g->n_files == g->cap_files)
        return tf_error_add(err, TF_ERR_INVALID, path, 0, 0, NULL, "more files than the group has room for");
    tf_status st = tf_atomic_open(path, protect, &g->files[g->n_files], err);
    if (st == TF_OK)
        *out = tf_atomic_stream(g->files[g->n_files++]);
    return st;
}

tf_status tf_fileset_finish(tf_fileset *g, tf_status st, tf_error *err)
{
    if (!g)
        return st;
    if (st == TF_OK) {
        st = tf_atomic_commit_all(g->files, g->n_files, err);
    } else {
        for (size_t k = 0; k < g->n_files; k++)
            tf_atomic_abort(g->files[k]);
    }
    if (st != TF_OK)
        for (size_t i = g->n_dirs; i-- > 0;)
            tf_atomic_rmdirs(g->dirs[i], g->created[i]);
    free(g->files);
    free(g->dirs);
    free(g->created);
    free(g);
    return st;
}

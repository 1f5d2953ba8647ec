/* File names; see path.h. */
#include "util/path.h"

#include <stdlib.h>
#include <string.h>

char *tf_path_dir(const char *path)
{
    const char *slash = strrchr(path, '/');
    if (!slash)
        return strdup(".");
    if (slash == path)
        return strdup("/");
    size_t n = (size_t)(slash - path);
    char *d = malloc(n + 1);
    if (d) {
        memcpy(d, path, n);
        d[n] = '\0';
    }
    return d;
}

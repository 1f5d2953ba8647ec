/* File names; see path.h. */
#include "util/path.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

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

void tf_path_safe_name(const char *label, char *out, size_t size)
{
    size_t k = 0;
    for (const char *p = label; *p && k + 1 < size; p++) {
        unsigned char c = (unsigned char)*p;
        int keep = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '-' ||
                   c == '_' || (c == '.' && k > 0);
        out[k++] = keep ? (char)c : '_';
    }
    if (k == 0 && size > 1)
        out[k++] = '_';
    if (size)
        out[k] = '\0';
}

int tf_path_folder_names(const char *const *labels, size_t n, char **out)
{
    char base[512], name[560];
    /* Endings of the files that sit beside the population folders (tables, workbook, records):
     * a label "summary.csv" must not name a folder where the file summary.csv goes. */
    static const char *const file_ends[] = {".csv", ".xlsx", ".txt"};
    for (size_t i = 0; i < n; i++) {
        tf_path_safe_name(labels[i], base, sizeof base);
        size_t len = strlen(base);
        for (size_t k = 0; k < sizeof file_ends / sizeof file_ends[0]; k++) {
            size_t e = strlen(file_ends[k]);
            if (len >= e && !strcasecmp(base + len - e, file_ends[k]) && len + 1 < sizeof base) {
                base[len] = '_';
                base[len + 1] = '\0';
                break;
            }
        }
        snprintf(name, sizeof name, "%s", base);
        for (unsigned k = 2;; k++) {
            size_t j = 0;
            while (j < i && strcasecmp(out[j], name))
                j++;
            if (j == i)
                break;
            snprintf(name, sizeof name, "%s-%u", base, k);
        }
        if (!(out[i] = strdup(name))) {
            for (size_t j = 0; j < i; j++) {
                free(out[j]);
                out[j] = NULL;
            }
            return 0;
        }
    }
    return 1;
}

/* File names: the folder part of a path, and the folder names of populations. */
#ifndef TF_PATH_H
#define TF_PATH_H

#include <stddef.h>

/* The folder that holds the file named by path, as a new string the caller frees: the part
 * before the last '/', "/" for a file at the root, "." when path names no folder. NULL when
 * memory runs out. The name is not looked up on disk. */
char *tf_path_dir(const char *path);

/* label made safe as one file or folder name: letters, digits, '-', '_' and (not first) '.' are
 * kept, anything else becomes '_'; "_" when label is empty. Writes at most size bytes. */
void tf_path_safe_name(const char *label, char *out, size_t size);

/* The folder names of n populations (labels in file order), the one rule of every command and
 * mode: each label made safe (tf_path_safe_name), with "_" after a name ending as a file beside
 * the folders does (".csv", ".xlsx", ".txt"), unique without regard to case (file systems that
 * ignore case would merge "Site-1" and "site-1"): a later population whose name is taken gets
 * "-2", "-3"... in file order, so the same file always gives the same names. out[i] are
 * malloc'd (the caller frees each); returns 0 when memory runs out (nothing then to free). */
int tf_path_folder_names(const char *const *labels, size_t n, char **out);

#endif

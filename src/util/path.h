/* File names: the folder part of a path. */
#ifndef TF_PATH_H
#define TF_PATH_H

/* The folder that holds the file named by path, as a new string the caller frees: the part
 * before the last '/', "/" for a file at the root, "." when path names no folder. NULL when
 * memory runs out. The name is not looked up on disk. */
char *tf_path_dir(const char *path);

#endif

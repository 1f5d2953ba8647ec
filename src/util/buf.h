/* Growing an array held as pointer + capacity, the one helper every growing table, list and
 * buffer of the program uses. */
#ifndef TF_BUF_H
#define TF_BUF_H

#include <stddef.h>

/* Makes *p (an array of *cap elements of elem bytes, NULL when *cap is 0) hold at least need
 * elements: the capacity starts at first (when *cap is 0; at least 1) and doubles until it
 * suffices, then *p is reallocated. Returns 1 on success, 0 when memory runs out or the size
 * would overflow size_t; on failure *p and *cap are unchanged and *p stays owned by the caller. */
int tf_buf_grow(void **p, size_t *cap, size_t need, size_t elem, size_t first);

#endif

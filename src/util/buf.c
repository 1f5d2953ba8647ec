/* Growing arrays; see buf.h. */
#include "util/buf.h"

#include <stdint.h>
#include <stdlib.h>

int tf_buf_grow(void **p, size_t *cap, size_t need, size_t elem, size_t first)
{
    if (need <= *cap)
        return 1;
    if (elem == 0)
        return 0;
    size_t c = *cap ? *cap : (first ? first : 1);
    while (c < need) {
        if (c > SIZE_MAX / 2)
            return 0;
        c *= 2;
    }
    if (c > SIZE_MAX / elem)
        return 0;
    void *q = realloc(*p, c * elem);
    if (!q)
        return 0;
    *p = q;
    *cap = c;
    return 1;
}

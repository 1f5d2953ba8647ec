/* UTF-8 checks; see utf8.h. */
#include "util/utf8.h"

size_t tf_utf8_seq(const unsigned char *s, size_t avail)
{
    unsigned char c = s[0];
    if (c < 0x80)
        return 1;
    size_t n;
    /* Bounds of the second byte: narrower after E0 (overlong), ED (surrogates), F0 (overlong)
     * and F4 (above U+10FFFF); RFC 3629 section 4, the UTF8-2/3/4 rules. */
    unsigned char lo = 0x80, hi = 0xBF;
    if (c >= 0xC2 && c <= 0xDF)
        n = 2;
    else if (c >= 0xE0 && c <= 0xEF) {
        n = 3;
        lo = c == 0xE0 ? 0xA0 : 0x80;
        hi = c == 0xED ? 0x9F : 0xBF;
    } else if (c >= 0xF0 && c <= 0xF4) {
        n = 4;
        lo = c == 0xF0 ? 0x90 : 0x80;
        hi = c == 0xF4 ? 0x8F : 0xBF;
    } else
        return 0;
    if (avail < n)
        return 0;
    if (s[1] < lo || s[1] > hi)
        return 0;
    for (size_t k = 2; k < n; k++)
        if ((s[k] & 0xC0) != 0x80)
            return 0;
    return n;
}

size_t tf_utf8_bad_at(const char *s, size_t len)
{
    const unsigned char *u = (const unsigned char *)s;
    size_t i = 0;
    while (i < len) {
        size_t k = tf_utf8_seq(u + i, len - i);
        if (!k)
            return i;
        i += k;
    }
    return len;
}

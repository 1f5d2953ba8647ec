/* Checking UTF-8 text: RFC 3629 section 4 (no overlong forms, no surrogates, nothing above
 * U+10FFFF), for the survey reader and the workbook writer alike. */
#ifndef TF_UTF8_H
#define TF_UTF8_H

#include <stddef.h>

/* Length (1 to 4) of the valid UTF-8 sequence at s, or 0 when it is not valid. Reads at most
 * avail bytes (avail >= 1) and no byte after the first one that fails, so a NUL-terminated
 * string may be passed with avail = SIZE_MAX: its NUL ends any sequence. */
size_t tf_utf8_seq(const unsigned char *s, size_t avail);

/* Byte offset of the first byte of s[0..len) that breaks UTF-8, or len when all is valid. */
size_t tf_utf8_bad_at(const char *s, size_t len);

#endif

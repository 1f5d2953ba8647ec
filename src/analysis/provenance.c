/* Hashes and dates for the provenance of a report; see provenance.h. */
#include "analysis/provenance.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <nettle/sha2.h>

static void to_hex(const unsigned char *d, char *hex)
{
    static const char digits[] = "0123456789abcdef";
    for (size_t i = 0; i < SHA256_DIGEST_SIZE; i++) {
        hex[2 * i] = digits[d[i] >> 4];
        hex[2 * i + 1] = digits[d[i] & 15];
    }
    hex[2 * SHA256_DIGEST_SIZE] = '\0';
}

void tf_provenance_hash_bytes(const void *data, size_t len, char *hex)
{
    struct sha256_ctx ctx;
    unsigned char d[SHA256_DIGEST_SIZE];
    sha256_init(&ctx);
    sha256_update(&ctx, len, data);
    sha256_digest(&ctx, sizeof d, d);
    to_hex(d, hex);
}

tf_status tf_provenance_hash_file(const char *path, char *hex, tf_error *err)
{
    hex[0] = '\0';
    FILE *f = fopen(path, "rb");
    if (!f)
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL, "cannot open the file to hash it: %s", strerror(errno));
    struct sha256_ctx ctx;
    sha256_init(&ctx);
    unsigned char buf[1 << 16];
    size_t n;
    while ((n = fread(buf, 1, sizeof buf, f)) > 0)
        sha256_update(&ctx, n, buf);
    int bad = ferror(f);
    int saved = errno;
    fclose(f);
    if (bad)
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL, "cannot read the file to hash it: %s", strerror(saved));
    unsigned char d[SHA256_DIGEST_SIZE];
    sha256_digest(&ctx, sizeof d, d);
    to_hex(d, hex);
    return TF_OK;
}

time_t tf_provenance_now(void)
{
    const char *e = getenv("SOURCE_DATE_EPOCH");
    if (e && *e) {
        char *end;
        errno = 0;
        long long v = strtoll(e, &end, 10);
        if (!*end && !errno && v >= 0)
            return (time_t)v;
    }
    return time(NULL);
}

void tf_provenance_format_date(time_t t, char *buf)
{
    struct tm tm;
    if (!gmtime_r(&t, &tm) || !strftime(buf, TF_PROVENANCE_DATE_BUF, "%Y-%m-%d %H:%M:%S UTC", &tm))
        snprintf(buf, TF_PROVENANCE_DATE_BUF, "unknown");
}

/* Unit tests for provenance (analysis/provenance.c): SHA-256 of the examples of FIPS 180-2,
 * appendix B ("abc", the 448-bit message, one million 'a' read from a file in blocks; digests
 * recalled from memory and confirmed with coreutils' sha256sum), and the date format with
 * SOURCE_DATE_EPOCH. */
#include "tf_test.h"

#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "analysis/provenance.h"

START_TEST(vectors)
{
    char hex[TF_PROVENANCE_HASH_BUF];
    tf_provenance_hash_bytes("abc", 3, hex);
    ck_assert_str_eq(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    const char *m = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
    tf_provenance_hash_bytes(m, strlen(m), hex);
    ck_assert_str_eq(hex, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
    tf_provenance_hash_bytes("", 0, hex);
    ck_assert_str_eq(hex, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}
END_TEST

START_TEST(file)
{
    /* One million 'a' (FIPS 180-2 appendix B.3), longer than one read block. */
    char path[] = "/tmp/tf-provenance-XXXXXX";
    int fd = mkstemp(path);
    ck_assert_int_ge(fd, 0);
    FILE *f = fdopen(fd, "wb");
    for (int i = 0; i < 1000000; i++)
        fputc('a', f);
    fclose(f);
    char hex[TF_PROVENANCE_HASH_BUF];
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_provenance_hash_file(path, hex, &err), TF_OK);
    ck_assert_str_eq(hex, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
    unlink(path);
    ck_assert_int_eq(tf_provenance_hash_file(path, hex, &err), TF_ERR_IO);
    ck_assert_str_eq(hex, "");
    ck_assert_str_eq(err.items[0].file, path);
}
END_TEST

START_TEST(dates)
{
    char buf[TF_PROVENANCE_DATE_BUF];
    tf_provenance_format_date(0, buf);
    ck_assert_str_eq(buf, "1970-01-01 00:00:00 UTC");
    tf_provenance_format_date(1700000000, buf);
    ck_assert_str_eq(buf, "2023-11-14 22:13:20 UTC");
    setenv("SOURCE_DATE_EPOCH", "1700000000", 1);
    ck_assert(tf_provenance_now() == 1700000000);
    /* Not a whole number of seconds: the clock instead. */
    setenv("SOURCE_DATE_EPOCH", "soon", 1);
    ck_assert(tf_provenance_now() > 1700000000);
    unsetenv("SOURCE_DATE_EPOCH");
    ck_assert(tf_provenance_now() > 1700000000);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("provenance");
    TCase *tc = tcase_create("provenance");
    tcase_add_test(tc, vectors);
    tcase_add_test(tc, file);
    tcase_add_test(tc, dates);
    suite_add_tcase(s, tc);
    return s;
}

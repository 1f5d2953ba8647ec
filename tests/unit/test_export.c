/* Unit tests for atomic output files (export/atomic.c), export tables (export/table.c) and the
 * CSV writer (export/csv_out.c). atomic.c is included whole so that the group commit can also be
 * run with old files moved aside instead of hard-linked (as on a file system without hard
 * links); the library's atomic.o is then not linked, since this file defines all its symbols. CSV output is read back with libcsv, an independent RFC 4180
 * parser, and numbers with the C library's strtod. */
#define _GNU_SOURCE /* nftw, for removing the scratch directories */
#include "tf_test.h"

#include <csv.h>
#include <dirent.h>
#include <errno.h>
#include <float.h>
#include <ftw.h>
#include <math.h>
#include <signal.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../src/export/atomic.c"
#include "export/csv_out.h"
#include "export/table.h"
#include "util/rng.h"

/* ---- helpers ---- */

static char tmp[64];

static void make_tmp(void)
{
    snprintf(tmp, sizeof tmp, "/tmp/tf-export-XXXXXX");
    ck_assert_ptr_nonnull(mkdtemp(tmp));
}

static int rm_entry(const char *p, const struct stat *sb, int flag, struct FTW *ftw)
{
    (void)sb;
    (void)flag;
    (void)ftw;
    chmod(p, 0700);
    return remove(p);
}

static void rm_tmp(void)
{
    chmod(tmp, 0700);
    nftw(tmp, rm_entry, 16, FTW_DEPTH | FTW_PHYS);
}

static const char *in_tmp(const char *name)
{
    static char buf[4][256];
    static int k;
    k = (k + 1) % 4;
    snprintf(buf[k], sizeof buf[k], "%s/%s", tmp, name);
    return buf[k];
}

static void write_file(const char *p, const char *text)
{
    FILE *f = fopen(p, "w");
    ck_assert_ptr_nonnull(f);
    fputs(text, f);
    ck_assert_int_eq(fclose(f), 0);
}

static char *read_file(const char *p, size_t *len)
{
    FILE *f = fopen(p, "rb");
    ck_assert_ptr_nonnull(f);
    fseek(f, 0, SEEK_END);
    long n = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *buf = malloc((size_t)n + 1);
    ck_assert_ptr_nonnull(buf);
    ck_assert_uint_eq(fread(buf, 1, (size_t)n, f), (size_t)n);
    fclose(f);
    buf[n] = '\0';
    if (len)
        *len = (size_t)n;
    return buf;
}

/* Entries of tmp whose name holds ".tmp-" (temporaries and group-commit backups left behind). */
static int n_temps(void)
{
    DIR *d = opendir(tmp);
    ck_assert_ptr_nonnull(d);
    int n = 0;
    struct dirent *e;
    while ((e = readdir(d)))
        n += strstr(e->d_name, ".tmp-") != NULL;
    closedir(d);
    return n;
}

/* ---- CSV read-back through libcsv ---- */

typedef struct {
    char *field[64][8];   /* [row][col] */
    size_t n_rows, n_cols_row0, col;
} parsed;

static void on_field(void *s, size_t len, void *data)
{
    parsed *p = data;
    ck_assert(p->n_rows < 64 && p->col < 8);
    char *f = malloc(len + 1);
    memcpy(f, s, len);
    f[len] = '\0';
    p->field[p->n_rows][p->col++] = f;
}

static void on_row(int c, void *data)
{
    (void)c;
    parsed *p = data;
    if (p->n_rows == 0)
        p->n_cols_row0 = p->col;
    p->n_rows++;
    p->col = 0;
}

static void parse_csv(const char *text, size_t len, parsed *out)
{
    memset(out, 0, sizeof *out);
    struct csv_parser cp;
    ck_assert_int_eq(csv_init(&cp, CSV_STRICT | CSV_STRICT_FINI), 0);
    ck_assert_uint_eq(csv_parse(&cp, text, len, on_field, on_row, out), len);
    ck_assert_int_eq(csv_fini(&cp, on_field, on_row, out), 0);
    csv_free(&cp);
}

static void free_parsed(parsed *p)
{
    for (size_t i = 0; i < 64; i++)
        for (size_t j = 0; j < 8; j++)
            free(p->field[i][j]);
}

/* ---- tests: CSV ---- */

START_TEST(csv_quotes_as_rfc4180)
{
    tf_error err;
    tf_error_init(&err);
    tf_table *t = tf_table_new("quoting", &err);
    ck_assert_int_eq(tf_table_add_column(t, "name, full", NULL, TF_COL_TEXT, NULL, &err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "count", NULL, TF_COL_INTEGER, NULL, &err), TF_OK);
    static const char *texts[] = {"plain", "a,b", "say \"hi\"", "two\nlines", "cr\rhere", "", "semi;colon"};
    static const double counts[] = {1, 2, NAN, 4, -0.0, 6, 1e21};
    for (size_t i = 0; i < 7; i++) {
        size_t r;
        ck_assert_int_eq(tf_table_add_row(t, &r, &err), TF_OK);
        ck_assert_int_eq(tf_table_set_text(t, r, 0, texts[i], &err), TF_OK);
        tf_table_set_number(t, r, 1, counts[i]);
    }
    char *buf = NULL;
    size_t len = 0;
    FILE *f = open_memstream(&buf, &len);
    ck_assert_int_eq(tf_csv_write_stream(t, f, "memory", &err), TF_OK);
    fclose(f);
    /* RFC 4180 section 2: fields with comma, quote, CR or LF are enclosed in double quotes, a
     * quote inside is doubled; records end with CRLF. */
    ck_assert_str_eq(buf, "\"name, full\",count\r\n"
                          "plain,1\r\n"
                          "\"a,b\",2\r\n"
                          "\"say \"\"hi\"\"\",\r\n"
                          "\"two\nlines\",4\r\n"
                          "\"cr\rhere\",-0\r\n"
                          ",6\r\n"
                          "semi;colon,1e+21\r\n");
    /* An independent parser (libcsv, strict mode) gives back every field. */
    parsed p;
    parse_csv(buf, len, &p);
    ck_assert_uint_eq(p.n_rows, 8);
    ck_assert_uint_eq(p.n_cols_row0, 2);
    ck_assert_str_eq(p.field[0][0], "name, full");
    for (size_t i = 0; i < 7; i++)
        ck_assert_str_eq(p.field[i + 1][0], texts[i]);
    ck_assert_str_eq(p.field[3][1], "");
    free_parsed(&p);
    free(buf);
    tf_table_free(t);
}
END_TEST

/* Every double written reads back bit for bit (strtod, C11 7.22.1.3), and no shorter %g form
 * would: 17 significant digits always identify a binary64 (IEEE 754-2008, 5.12.2). */
static void check_round_trip(double v)
{
    char buf[TF_CSV_NUMBER_MAX];
    size_t n = tf_csv_format_number(v, buf, sizeof buf);
    ck_assert_uint_eq(n, strlen(buf));
    double back = strtod(buf, NULL);
    ck_assert_msg(memcmp(&back, &v, sizeof v) == 0, "%a written as '%s' reads back as %a", v, buf, back);
    int shortest = 1;
    char alt[64];
    while (shortest < 17) {
        snprintf(alt, sizeof alt, "%.*g", shortest, v);
        if (strtod(alt, NULL) == v)
            break;
        shortest++;
    }
    snprintf(alt, sizeof alt, "%.*g", shortest, v);
    ck_assert_msg(n <= strlen(alt), "%a written as '%s', but '%s' also reads back", v, buf, alt);
}

START_TEST(csv_numbers_round_trip)
{
    static const double fixed[] = {0.1, 1.0 / 3, 2.0 / 3, 1e-300, 5e-324, DBL_MIN, DBL_MAX, -DBL_MAX, 0.0, -0.0,
                                   123456789012345678.0, 0.30000000000000004, 1990, 4.35, 100, 1e23, 9007199254740993.0,
                                   2.2250738585072011e-308};
    for (size_t i = 0; i < sizeof fixed / sizeof fixed[0]; i++)
        check_round_trip(fixed[i]);
    char buf[TF_CSV_NUMBER_MAX];
    tf_csv_format_number(0.1, buf, sizeof buf);
    ck_assert_str_eq(buf, "0.1");
    tf_csv_format_number(2020, buf, sizeof buf);
    ck_assert_str_eq(buf, "2020");
    tf_csv_format_number(0.30000000000000004, buf, sizeof buf);
    ck_assert_str_eq(buf, "0.30000000000000004");
    ck_assert_uint_eq(tf_csv_format_number(NAN, buf, sizeof buf), 0);
    tf_csv_format_number(-INFINITY, buf, sizeof buf);
    ck_assert_str_eq(buf, "-inf");
    /* Random bit patterns cover every exponent, subnormals included; and random values in
     * the ranges tables hold. Fixed seed. */
    tf_rng r;
    uint64_t key = 11;
    tf_rng_derive(&r, 2024, &key, 1);
    for (int i = 0; i < 20000; i++) {
        uint64_t bits = tf_rng_u64(&r);
        double v;
        memcpy(&v, &bits, sizeof v);
        if (isfinite(v))
            check_round_trip(v);
        check_round_trip((double)(tf_rng_u64(&r) >> 11) * 0x1p-53 * 1000);
    }
}
END_TEST

START_TEST(csv_file_written_and_read_back)
{
    tf_error err;
    tf_error_init(&err);
    make_tmp();
    tf_table *t = tf_table_new("Growth / Ricker: K", &err);
    ck_assert_int_eq(tf_table_add_column(t, "K", "carrying capacity (animals)", TF_COL_NUMBER, NULL, &err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "p", NULL, TF_COL_PROBABILITY, NULL, &err), TF_OK);
    double vals[40][2];
    for (int i = 0; i < 40; i++) {
        vals[i][0] = 1000.0 / (i + 3);
        vals[i][1] = i % 7 ? 1.0 / (i + 1) : NAN;
        ck_assert_int_eq(tf_table_add_row_numbers(t, vals[i], 2, &err), TF_OK);
    }
    char path[512];
    ck_assert_int_eq(tf_csv_write_in_dir(t, tmp, NULL, path, sizeof path, &err), TF_OK);
    ck_assert_str_eq(path, in_tmp("growth-ricker-k.csv"));
    size_t len;
    char *text = read_file(path, &len);
    parsed p;
    parse_csv(text, len, &p);
    ck_assert_uint_eq(p.n_rows, 41);
    for (int i = 0; i < 40; i++) {
        ck_assert(strtod(p.field[i + 1][0], NULL) == vals[i][0]);
        if (isnan(vals[i][1]))
            ck_assert_str_eq(p.field[i + 1][1], "");
        else
            ck_assert(strtod(p.field[i + 1][1], NULL) == vals[i][1]);
    }
    free_parsed(&p);
    free(text);
    /* A new file gets 0666 less the umask, like any file the user creates. */
    struct stat st;
    ck_assert_int_eq(stat(path, &st), 0);
    mode_t mask = umask(022);
    umask(mask);
    ck_assert_uint_eq(st.st_mode & 0777, 0666 & ~mask);
    /* Rewriting keeps the existing file's permissions. */
    ck_assert_int_eq(chmod(path, 0600), 0);
    ck_assert_int_eq(tf_csv_write(t, path, NULL, &err), TF_OK);
    ck_assert_int_eq(stat(path, &st), 0);
    ck_assert_uint_eq(st.st_mode & 0777, 0600);
    ck_assert_int_eq(n_temps(), 0);
    tf_table_free(t);
    rm_tmp();
}
END_TEST

/* A one-column table named name whose single row holds v. */
static tf_table *one_value_table(const char *name, double v)
{
    tf_error err;
    tf_error_init(&err);
    tf_table *t = tf_table_new(name, &err);
    ck_assert_ptr_nonnull(t);
    ck_assert_int_eq(tf_table_add_column(t, "v", NULL, TF_COL_NUMBER, NULL, &err), TF_OK);
    ck_assert_int_eq(tf_table_add_row_numbers(t, &v, 1, &err), TF_OK);
    return t;
}

START_TEST(csv_tables_written_all_or_none)
{
    tf_error err;
    tf_error_init(&err);
    make_tmp();
    tf_table *t[3] = {one_value_table("First", 0.1), one_value_table("Second data", 2.5), NULL};
    const tf_table *const *tables = (const tf_table *const *)t;
    ck_assert_int_eq(tf_csv_write_all(tables, 2, tmp, NULL, &err), TF_OK);
    char *text = read_file(in_tmp("first.csv"), NULL);
    ck_assert_str_eq(text, "v\r\n0.1\r\n");
    free(text);
    text = read_file(in_tmp("second-data.csv"), NULL);
    ck_assert_str_eq(text, "v\r\n2.5\r\n");
    free(text);
    /* One file cannot be written (a directory holds its name): the other keeps its content. */
    tf_table_free(t[0]);
    t[0] = one_value_table("First", 7);
    ck_assert_int_eq(unlink(in_tmp("second-data.csv")), 0);
    ck_assert_int_eq(mkdir(in_tmp("second-data.csv"), 0755), 0);
    ck_assert_int_eq(tf_csv_write_all(tables, 2, tmp, NULL, &err), TF_ERR_IO);
    ck_assert_str_eq(err.items[0].file, in_tmp("second-data.csv"));
    text = read_file(in_tmp("first.csv"), NULL);
    ck_assert_str_eq(text, "v\r\n0.1\r\n");
    free(text);
    ck_assert_int_eq(n_temps(), 0);
    /* Two tables for one file name are refused before anything is written. */
    tf_error_init(&err);
    t[2] = one_value_table("first", 3);
    tf_table *same[2] = {t[0], t[2]};
    ck_assert_int_eq(tf_csv_write_all((const tf_table *const *)same, 2, tmp, NULL, &err), TF_ERR_INVALID);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "'First' and 'first'"));
    text = read_file(in_tmp("first.csv"), NULL);
    ck_assert_str_eq(text, "v\r\n0.1\r\n");
    free(text);
    ck_assert_int_eq(n_temps(), 0);
    for (int i = 0; i < 3; i++)
        tf_table_free(t[i]);
    rm_tmp();
}
END_TEST

START_TEST(csv_file_names)
{
    char buf[64];
    tf_csv_file_name("Projection / risk", buf, sizeof buf);
    ck_assert_str_eq(buf, "projection-risk.csv");
    tf_csv_file_name("  ", buf, sizeof buf);
    ck_assert_str_eq(buf, "table.csv");
    tf_csv_file_name("R-hat_and ESS!", buf, sizeof buf);
    ck_assert_str_eq(buf, "r-hat_and-ess.csv");
    tf_csv_file_name("a very long table name that will not fit", buf, 16);
    ck_assert_str_eq(buf, "a-very-long.csv");
    ck_assert_uint_le(strlen(buf), 15);
}
END_TEST

/* ---- tests: atomic files ---- */

START_TEST(atomic_refuses_the_input)
{
    tf_error err;
    tf_error_init(&err);
    make_tmp();
    const char *input = in_tmp("survey.csv"), *hard = in_tmp("hard.csv"), *soft = in_tmp("soft.csv");
    write_file(input, "population,year,count\nA,2001,12\n");
    ck_assert_int_eq(link(input, hard), 0);
    ck_assert_int_eq(symlink(input, soft), 0);
    tf_table *t = tf_table_new("t", &err);
    ck_assert_int_eq(tf_table_add_column(t, "x", NULL, TF_COL_NUMBER, NULL, &err), TF_OK);
    ck_assert_int_eq(tf_table_add_row(t, NULL, &err), TF_OK);

    const char *targets[] = {input, hard, soft};
    for (int i = 0; i < 3; i++) {
        tf_error_init(&err);
        ck_assert_int_eq(tf_csv_write(t, targets[i], input, &err), TF_ERR_USAGE);
        ck_assert_str_eq(err.items[0].file, targets[i]);
        ck_assert_ptr_nonnull(strstr(err.items[0].what, "overwrite the input"));
    }
    /* The same name reached another way: "dir/./survey.csv". */
    char other[300];
    snprintf(other, sizeof other, "%s/./survey.csv", tmp);
    ck_assert_int_eq(tf_csv_write(t, other, input, &err), TF_ERR_USAGE);
    char *text = read_file(input, NULL);
    ck_assert_str_eq(text, "population,year,count\nA,2001,12\n");
    free(text);
    ck_assert_int_eq(n_temps(), 0);
    /* A protected path that does not exist protects nothing. */
    tf_error_init(&err);
    ck_assert_int_eq(tf_csv_write(t, in_tmp("out.csv"), in_tmp("absent.csv"), &err), TF_OK);
    tf_table_free(t);
    rm_tmp();
}
END_TEST

START_TEST(atomic_bad_destinations)
{
    tf_error err;
    tf_error_init(&err);
    make_tmp();
    tf_atomic *a;
    /* Missing directory: nothing created. */
    ck_assert_int_eq(tf_atomic_open(in_tmp("no/such/out.csv"), NULL, &a, &err), TF_ERR_IO);
    ck_assert_ptr_null(a);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "No such file or directory"));
    /* Destination is a directory. */
    tf_error_init(&err);
    ck_assert_int_eq(mkdir(in_tmp("sub"), 0755), 0);
    ck_assert_int_eq(tf_atomic_open(in_tmp("sub"), NULL, &a, &err), TF_ERR_IO);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "is a directory"));
    /* Parent is a regular file. */
    tf_error_init(&err);
    write_file(in_tmp("plain"), "x");
    ck_assert_int_eq(tf_atomic_open(in_tmp("plain/out.csv"), NULL, &a, &err), TF_ERR_IO);
    /* Not a regular file. */
    tf_error_init(&err);
    ck_assert_int_eq(tf_atomic_check_target("/dev/null", NULL, &err), TF_ERR_IO);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "not a regular file"));
    ck_assert_int_eq(n_temps(), 0);
    /* Aborting removes the temporary and leaves the old file. */
    const char *dest = in_tmp("keep.txt");
    write_file(dest, "old");
    ck_assert_int_eq(tf_atomic_open(dest, NULL, &a, &err), TF_OK);
    fputs("new", tf_atomic_stream(a));
    ck_assert_int_eq(n_temps(), 1);
    tf_atomic_abort(a);
    ck_assert_int_eq(n_temps(), 0);
    char *text = read_file(dest, NULL);
    ck_assert_str_eq(text, "old");
    free(text);
    /* Committing replaces it. */
    ck_assert_int_eq(tf_atomic_open(dest, NULL, &a, &err), TF_OK);
    fputs("new", tf_atomic_stream(a));
    ck_assert_int_eq(tf_atomic_commit(a, &err), TF_OK);
    text = read_file(dest, NULL);
    ck_assert_str_eq(text, "new");
    free(text);
    ck_assert_int_eq(n_temps(), 0);
    rm_tmp();
}
END_TEST

/* A write that fails half-way (file size limit, EFBIG: works even for root, who ignores
 * permission bits) leaves the old file and no temporary. */
START_TEST(atomic_failed_write_leaves_no_temp)
{
    tf_error err;
    tf_error_init(&err);
    make_tmp();
    const char *dest = in_tmp("big.csv");
    write_file(dest, "old");
    tf_table *t = tf_table_new("big", &err);
    ck_assert_int_eq(tf_table_add_column(t, "v", NULL, TF_COL_NUMBER, NULL, &err), TF_OK);
    for (int i = 0; i < 5000; i++) {
        double v = 1.0 / (i + 7);
        ck_assert_int_eq(tf_table_add_row_numbers(t, &v, 1, &err), TF_OK);
    }
    struct rlimit old_lim, lim;
    ck_assert_int_eq(getrlimit(RLIMIT_FSIZE, &old_lim), 0);
    lim = old_lim;
    lim.rlim_cur = 4096;
    void (*old_handler)(int) = signal(SIGXFSZ, SIG_IGN);
    /* No ck_assert until the limit is lifted: Check records each one in a file of its own. */
    int set = setrlimit(RLIMIT_FSIZE, &lim);
    tf_status st = tf_csv_write(t, dest, NULL, &err);
    int reset = setrlimit(RLIMIT_FSIZE, &old_lim);
    signal(SIGXFSZ, old_handler);
    ck_assert_int_eq(set, 0);
    ck_assert_int_eq(reset, 0);
    ck_assert_int_eq(st, TF_ERR_IO);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "cannot write output"));
    ck_assert_int_eq(n_temps(), 0);
    char *text = read_file(dest, NULL);
    ck_assert_str_eq(text, "old");
    free(text);
    tf_table_free(t);
    rm_tmp();
}
END_TEST

START_TEST(atomic_unwritable_directory)
{
    tf_error err;
    tf_error_init(&err);
    make_tmp();
    const char *ro = in_tmp("ro");
    ck_assert_int_eq(mkdir(ro, 0555), 0);
    tf_atomic *a;
    tf_status st = tf_atomic_open(in_tmp("ro/out.csv"), NULL, &a, &err);
    if (geteuid() == 0) {
        /* root writes regardless of permission bits: the case cannot arise; the failed write
         * itself is covered by atomic_failed_write_leaves_no_temp. */
        fprintf(stderr, "note: running as root, permission-denied case not testable here\n");
        ck_assert_int_eq(st, TF_OK);
        tf_atomic_abort(a);
    } else {
        ck_assert_int_eq(st, TF_ERR_IO);
        ck_assert_ptr_nonnull(strstr(err.items[0].what, "Permission denied"));
        tf_error_init(&err);
        ck_assert_int_eq(tf_atomic_mkdirs(ro, NULL, &err), TF_ERR_IO);
        ck_assert_ptr_nonnull(strstr(err.items[0].what, "not writable"));
        tf_error_init(&err);
        ck_assert_int_eq(tf_atomic_mkdirs(in_tmp("ro/sub"), NULL, &err), TF_ERR_IO);
    }
    ck_assert_int_eq(n_temps(), 0);
    rm_tmp();
}
END_TEST

START_TEST(mkdirs_creates_and_reports)
{
    tf_error err;
    tf_error_init(&err);
    make_tmp();
    ck_assert_int_eq(tf_atomic_mkdirs(in_tmp("a/b//c/"), NULL, &err), TF_OK);
    struct stat st;
    ck_assert_int_eq(stat(in_tmp("a/b/c"), &st), 0);
    ck_assert(S_ISDIR(st.st_mode));
    ck_assert_int_eq(tf_atomic_mkdirs(in_tmp("a/b/c"), NULL, &err), TF_OK);   /* already there */
    write_file(in_tmp("a/file"), "x");
    ck_assert_int_eq(tf_atomic_mkdirs(in_tmp("a/file"), NULL, &err), TF_ERR_IO);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "is a file, not a directory"));
    ck_assert_str_eq(err.items[0].file, in_tmp("a/file"));
    tf_error_init(&err);
    ck_assert_int_eq(tf_atomic_mkdirs(in_tmp("a/file/deeper/still"), NULL, &err), TF_ERR_IO);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "a/file' is a file"));
    ck_assert_int_eq(stat(in_tmp("a/file/deeper"), &st), -1);
    rm_tmp();
}
END_TEST

/* ---- tests: group commit ---- */

/* The file's content, or "(none)" when it does not exist; valid until the next call. */
static const char *content(const char *p)
{
    static char buf[256];
    FILE *f = fopen(p, "r");
    if (!f)
        return "(none)";
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    buf[n] = '\0';
    fclose(f);
    return buf;
}

enum { N_FILES = 3 };
static const char *const names[N_FILES] = {"a.csv", "b.csv", "c.csv"};
static const char *const new_text[N_FILES] = {"new a", "new b", "new c"};

/* Before: a.csv and c.csv exist with "old a" / "old c", b.csv does not. Opens the three and
 * writes the new texts. */
static void open_three(tf_atomic **files)
{
    tf_error err;
    tf_error_init(&err);
    write_file(in_tmp("a.csv"), "old a");
    unlink(in_tmp("b.csv"));
    write_file(in_tmp("c.csv"), "old c");
    for (int i = 0; i < N_FILES; i++) {
        ck_assert_int_eq(tf_atomic_open(in_tmp(names[i]), NULL, &files[i], &err), TF_OK);
        fputs(new_text[i], tf_atomic_stream(files[i]));
    }
}

static void assert_unchanged(void)
{
    ck_assert_str_eq(content(in_tmp("a.csv")), "old a");
    ck_assert_str_eq(content(in_tmp("b.csv")), "(none)");
    ck_assert_str_eq(content(in_tmp("c.csv")), "old c");
    ck_assert_int_eq(n_temps(), 0);
}

START_TEST(group_replaces_all)
{
    for (int use_links = 1; use_links >= 0; use_links--) {
        make_tmp();
        tf_atomic *files[N_FILES];
        open_three(files);
        tf_error err;
        tf_error_init(&err);
        ck_assert_int_eq(commit_group(files, N_FILES, use_links, &err), TF_OK);
        for (int i = 0; i < N_FILES; i++)
            ck_assert_str_eq(content(in_tmp(names[i])), new_text[i]);
        ck_assert_int_eq(n_temps(), 0);
        rm_tmp();
    }
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_atomic_commit_all(NULL, 0, &err), TF_OK);
}
END_TEST

/* A destination that became a directory after open fails the check before any rename. */
START_TEST(group_fails_before_renaming)
{
    make_tmp();
    tf_atomic *files[N_FILES];
    open_three(files);
    ck_assert_int_eq(mkdir(in_tmp("b.csv"), 0755), 0);
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_atomic_commit_all(files, N_FILES, &err), TF_ERR_IO);
    ck_assert_str_eq(err.items[0].file, in_tmp("b.csv"));
    ck_assert_int_eq(rmdir(in_tmp("b.csv")), 0);
    assert_unchanged();
    rm_tmp();
}
END_TEST

/* The last rename fails (its temporary was taken away): the two files already replaced get
 * their previous state back, one by its old content, one by being removed; so does the third
 * when it had been moved aside. */
START_TEST(group_puts_back_after_a_failed_rename)
{
    for (int use_links = 1; use_links >= 0; use_links--) {
        make_tmp();
        tf_atomic *files[N_FILES];
        open_three(files);
        ck_assert_int_eq(unlink(tf_atomic_temp_path(files[2])), 0);
        tf_error err;
        tf_error_init(&err);
        ck_assert_int_eq(commit_group(files, N_FILES, use_links, &err), TF_ERR_IO);
        ck_assert_uint_eq(err.n_items, 1);   /* no complaint about the put-back */
        ck_assert_str_eq(err.items[0].file, in_tmp("c.csv"));
        ck_assert_ptr_nonnull(strstr(err.items[0].what, "cannot replace"));
        assert_unchanged();
        rm_tmp();
    }
}
END_TEST

START_TEST(group_refuses_one_destination_twice)
{
    make_tmp();
    tf_error err;
    tf_error_init(&err);
    tf_atomic *files[2];
    char other[256];
    snprintf(other, sizeof other, "%s/./a.csv", tmp);
    ck_assert_int_eq(tf_atomic_open(in_tmp("a.csv"), NULL, &files[0], &err), TF_OK);
    ck_assert_int_eq(tf_atomic_open(other, NULL, &files[1], &err), TF_OK);
    fputs("one", tf_atomic_stream(files[0]));
    fputs("two", tf_atomic_stream(files[1]));
    ck_assert_int_eq(tf_atomic_commit_all(files, 2, &err), TF_ERR_INVALID);
    ck_assert_str_eq(content(in_tmp("a.csv")), "(none)");
    ck_assert_int_eq(n_temps(), 0);
    rm_tmp();
}
END_TEST

/* A destination made a link to the protected input after open is refused at commit. */
START_TEST(group_protects_the_input)
{
    make_tmp();
    tf_error err;
    tf_error_init(&err);
    const char *input = in_tmp("survey.csv");
    write_file(input, "year,count\n2001,5\n");
    tf_atomic *files[2];
    ck_assert_int_eq(tf_atomic_open(in_tmp("a.csv"), input, &files[0], &err), TF_OK);
    ck_assert_int_eq(tf_atomic_open(in_tmp("b.csv"), input, &files[1], &err), TF_OK);
    fputs("table a", tf_atomic_stream(files[0]));
    fputs("table b", tf_atomic_stream(files[1]));
    ck_assert_int_eq(link(input, in_tmp("b.csv")), 0);
    ck_assert_int_eq(tf_atomic_commit_all(files, 2, &err), TF_ERR_USAGE);
    ck_assert_str_eq(content(input), "year,count\n2001,5\n");
    ck_assert_str_eq(content(in_tmp("a.csv")), "(none)");
    ck_assert_int_eq(n_temps(), 0);
    rm_tmp();
}
END_TEST

START_TEST(rmdirs_takes_back_what_mkdirs_made)
{
    make_tmp();
    tf_error err;
    tf_error_init(&err);
    size_t n_made = 99;
    ck_assert_int_eq(tf_atomic_mkdirs(in_tmp("x"), &n_made, &err), TF_OK);
    ck_assert_uint_eq(n_made, 1);
    ck_assert_int_eq(tf_atomic_mkdirs(in_tmp("x//y/z/"), &n_made, &err), TF_OK);
    ck_assert_uint_eq(n_made, 2);   /* x was there already */
    tf_atomic_rmdirs(in_tmp("x//y/z/"), n_made);
    struct stat st;
    ck_assert_int_eq(stat(in_tmp("x/y"), &st), -1);
    ck_assert_int_eq(stat(in_tmp("x"), &st), 0);
    /* A directory that is no longer empty stops the removal. */
    ck_assert_int_eq(tf_atomic_mkdirs(in_tmp("x/p/q"), &n_made, &err), TF_OK);
    ck_assert_uint_eq(n_made, 2);
    write_file(in_tmp("x/p/keep.txt"), "k");
    tf_atomic_rmdirs(in_tmp("x/p/q"), n_made);
    ck_assert_int_eq(stat(in_tmp("x/p/q"), &st), -1);
    ck_assert_str_eq(content(in_tmp("x/p/keep.txt")), "k");
    /* A failure reports what was made before it: here nothing, as a file is in the way. */
    write_file(in_tmp("x/file"), "f");
    n_made = 99;
    ck_assert_int_eq(tf_atomic_mkdirs(in_tmp("x/file/sub"), &n_made, &err), TF_ERR_IO);
    ck_assert_uint_eq(n_made, 0);
    /* Nothing to take back, or no name: nothing happens. */
    tf_atomic_rmdirs(in_tmp("x"), 0);
    tf_atomic_rmdirs(NULL, 3);
    ck_assert_int_eq(stat(in_tmp("x"), &st), 0);
    rm_tmp();
}
END_TEST

/* ---- tests: tables ---- */

START_TEST(table_grows_and_keeps_cells)
{
    tf_error err;
    tf_error_init(&err);
    tf_table *t = tf_table_new("grow", &err);
    size_t c_year, c_x, c_name;
    ck_assert_int_eq(tf_table_add_column(t, "year", "calendar year", TF_COL_YEAR, &c_year, &err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "x", NULL, TF_COL_NUMBER, &c_x, &err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "name", NULL, TF_COL_TEXT, &c_name, &err), TF_OK);
    ck_assert_uint_eq(c_name, 2);
    enum { N = 20000 };
    char label[32];
    for (size_t i = 0; i < N; i++) {
        size_t r;
        ck_assert_int_eq(tf_table_add_row(t, &r, &err), TF_OK);
        ck_assert_uint_eq(r, i);
        tf_table_set_number(t, r, c_year, 1900 + (double)i);
        if (i % 3)
            tf_table_set_number(t, r, c_x, (double)i * 0.5);
        if (i % 5 == 0) {
            snprintf(label, sizeof label, "row %zu", i);
            ck_assert_int_eq(tf_table_set_text(t, r, c_name, label, &err), TF_OK);
        }
        if (i == 777)   /* side arrays created mid-way must follow later growth */
            ck_assert_int_eq(tf_table_set_warning(t, r, c_x, &err), TF_OK);
    }
    ck_assert_uint_eq(tf_table_n_rows(t), N);
    for (size_t i = 0; i < N; i++) {
        ck_assert(tf_table_number(t, i, c_year) == 1900 + (double)i);
        if (i % 3)
            ck_assert(tf_table_number(t, i, c_x) == (double)i * 0.5);
        else
            ck_assert(tf_table_is_empty(t, i, c_x));
        if (i % 5 == 0) {
            snprintf(label, sizeof label, "row %zu", i);
            ck_assert_str_eq(tf_table_text(t, i, c_name), label);
        } else {
            ck_assert_ptr_null(tf_table_text(t, i, c_name));
        }
        ck_assert(tf_table_warning(t, i, c_x) == (i == 777));
        ck_assert(!tf_table_warning(t, i, c_year));
    }
    /* Text replaces a number and a number replaces text. */
    ck_assert_int_eq(tf_table_set_text(t, 1, c_x, "n/a", &err), TF_OK);
    ck_assert(isnan(tf_table_number(t, 1, c_x)));
    ck_assert_str_eq(tf_table_text(t, 1, c_x), "n/a");
    tf_table_set_number(t, 1, c_x, 2.5);
    ck_assert_ptr_null(tf_table_text(t, 1, c_x));
    ck_assert(tf_table_number(t, 1, c_x) == 2.5);
    /* Per-cell kinds. */
    ck_assert_int_eq(tf_table_cell_kind(t, 4, c_x), TF_COL_NUMBER);
    ck_assert_int_eq(tf_table_set_cell_kind(t, 4, c_x, TF_COL_PERCENT, &err), TF_OK);
    ck_assert_int_eq(tf_table_cell_kind(t, 4, c_x), TF_COL_PERCENT);
    ck_assert_int_eq(tf_table_cell_kind(t, 5, c_x), TF_COL_NUMBER);
    ck_assert_uint_eq(tf_table_find_column(t, "name"), c_name);
    ck_assert_uint_eq(tf_table_find_column(t, "absent"), TF_TABLE_NO_COLUMN);
    ck_assert_str_eq(tf_table_legend(t, c_year), "calendar year");
    ck_assert_str_eq(tf_table_legend(t, c_x), "");
    tf_table_free(t);
}
END_TEST

START_TEST(table_refuses_misuse)
{
    tf_error err;
    tf_error_init(&err);
    ck_assert_ptr_null(tf_table_new("", &err));
    ck_assert_int_eq(tf_error_status(&err), TF_ERR_INVALID);
    tf_table *t = tf_table_new("t", &err);
    ck_assert_int_eq(tf_table_add_row(t, NULL, &err), TF_ERR_INVALID);   /* no columns yet */
    ck_assert_int_eq(tf_table_add_column(t, "", NULL, TF_COL_NUMBER, NULL, &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_table_add_column(t, "a", NULL, TF_COL_KIND_COUNT, NULL, &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_table_add_column(t, "a", NULL, TF_COL_NUMBER, NULL, &err), TF_OK);
    double v[2] = {1, 2};
    ck_assert_int_eq(tf_table_add_row_numbers(t, v, 2, &err), TF_ERR_INVALID);
    ck_assert_uint_eq(tf_table_n_rows(t), 0);
    ck_assert_int_eq(tf_table_add_row_numbers(t, v, 1, &err), TF_OK);
    ck_assert_int_eq(tf_table_add_column(t, "b", NULL, TF_COL_NUMBER, NULL, &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_table_add_note(t, TF_NOTE_INFO, "", &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_table_add_item_text(t, "x", "y", NULL, &err), TF_ERR_INVALID);   /* not a summary */
    ck_assert_int_eq(tf_table_add_notef(t, TF_NOTE_CAUTION, &err, "R-hat %.3f above %.2f", 1.0312, 1.01), TF_OK);
    ck_assert_uint_eq(tf_table_n_notes(t), 1);
    ck_assert_str_eq(tf_table_note(t, 0), "R-hat 1.031 above 1.01");
    ck_assert_int_eq(tf_table_note_kind(t, 0), TF_NOTE_CAUTION);
    ck_assert_str_eq(tf_col_kind_name(TF_COL_PROBABILITY), "probability");
    ck_assert_str_eq(tf_col_kind_name(TF_COL_KIND_COUNT), "unknown");
    tf_table_free(t);
    tf_table_free(NULL);
}
END_TEST

START_TEST(summary_rows)
{
    tf_error err;
    tf_error_init(&err);
    tf_table *t = tf_table_new_summary("Summary", &err);
    ck_assert(tf_table_is_summary(t));
    ck_assert_uint_eq(tf_table_n_columns(t), 4);
    ck_assert_str_eq(tf_table_header(t, 0), "population");
    ck_assert_int_eq(tf_table_set_summary_population(t, "north", &err), TF_OK);
    ck_assert_int_eq(tf_table_add_heading(t, "Trend", &err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Decline", 0.25, TF_COL_PERCENT, "since 2001", &err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_number(t, "Unknown", NAN, TF_COL_NUMBER, NULL, &err), TF_OK);
    ck_assert_int_eq(tf_table_set_summary_population(t, NULL, &err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_text(t, "Model", "Ricker", NULL, &err), TF_OK);
    ck_assert_int_eq(tf_table_add_item_text(t, "", "Ricker", NULL, &err), TF_ERR_INVALID);
    ck_assert_uint_eq(tf_table_n_rows(t), 4);
    ck_assert(tf_table_is_heading(t, 0));
    ck_assert(!tf_table_is_heading(t, 1));
    ck_assert(!tf_table_is_heading(t, 2));   /* a missing value is not a heading */
    ck_assert(!tf_table_is_heading(t, 3));
    ck_assert_int_eq(tf_table_cell_kind(t, 1, 2), TF_COL_PERCENT);
    ck_assert(tf_table_number(t, 1, 2) == 0.25);
    ck_assert_str_eq(tf_table_text(t, 1, 3), "since 2001");
    ck_assert_str_eq(tf_table_text(t, 3, 2), "Ricker");
    /* The rows carry the population they are about; rows about the whole file none. */
    ck_assert_str_eq(tf_table_text(t, 0, 0), "north");
    ck_assert_str_eq(tf_table_text(t, 2, 0), "north");
    ck_assert(tf_table_is_empty(t, 3, 0));
    tf_table_free(t);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("export");
    TCase *tc = tcase_create("export");
    tcase_add_test(tc, csv_quotes_as_rfc4180);
    tcase_add_test(tc, csv_numbers_round_trip);
    tcase_add_test(tc, csv_file_written_and_read_back);
    tcase_add_test(tc, csv_file_names);
    tcase_add_test(tc, csv_tables_written_all_or_none);
    tcase_add_test(tc, atomic_refuses_the_input);
    tcase_add_test(tc, atomic_bad_destinations);
    tcase_add_test(tc, atomic_failed_write_leaves_no_temp);
    tcase_add_test(tc, atomic_unwritable_directory);
    tcase_add_test(tc, mkdirs_creates_and_reports);
    tcase_add_test(tc, group_replaces_all);
    tcase_add_test(tc, group_fails_before_renaming);
    tcase_add_test(tc, group_puts_back_after_a_failed_rename);
    tcase_add_test(tc, group_refuses_one_destination_twice);
    tcase_add_test(tc, group_protects_the_input);
    tcase_add_test(tc, rmdirs_takes_back_what_mkdirs_made);
    tcase_add_test(tc, table_grows_and_keeps_cells);
    tcase_add_test(tc, table_refuses_misuse);
    tcase_add_test(tc, summary_rows);
    suite_add_tcase(s, tc);
    return s;
}

/* Survey import: splits the file into lines, lets libcsv parse the fields, checks every value,
 * then groups the rows by population into tf_series objects. */
#include "survey/survey.h"

#include <csv.h>
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdbool.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>

#include "util/buf.h"
#include "util/utf8.h"

struct tf_survey {
    char *path;
    size_t n_series;
    tf_series **series;
    size_t *order;                 /* each series' place among all populations (set-aside ones too) */
    size_t n_rejected;
    tf_survey_rejected *rejected;  /* batch reading: the populations set aside */
    int estimates;                 /* the count column holds estimates, not whole counts */
    size_t n_in_file;              /* populations in the file, set-aside and left-out ones included */
};

enum { COL_YEAR, COL_COUNT, COL_POP, COL_EFFORT, COL_NOTE, COL_REMOVED, COL_ADDED, N_KNOWN };
static const char *const known_names[N_KNOWN] = {"year", "count", "population", "effort", "note", "removed", "added"};

/* Smallest growth step of libcsv's field buffer (its own default is 128 bytes). */
#define FIELD_BLOCK_MIN 4096

/* Longest value quoted back in a message, in bytes. */
#define SHOW_MAX 40

static const char HINT_MISSING[] = "write NA or leave the cell empty for a year that was not surveyed";
/* The one hint of every number written the way a spreadsheet's regional settings write it. It
 * names the fix in the exporting program, never "write decimals with a point", which would turn
 * "4,835" (4835 animals) into 4.835. */
static const char HINT_NUMBERS[] = "export the file with plain numbers: no thousands separators, a point as the "
                                   "decimal mark (4835, 2.5)";
static const char HINT_QUOTES[] = "a value that contains the delimiter, a quote or a line break must be "
                                  "in double quotes, with each quote inside it doubled (\"\")";

/* One data row with a usable population label (other values may have been rejected). */
typedef struct {
    size_t label_off;   /* into reader.labels while reading */
    const char *label;  /* filled once reading is done and the arena no longer moves */
    int year;
    double count;       /* NAN = not surveyed */
    double effort;
    double removed;     /* animals taken out after the count (0 = none) */
    double added;       /* animals put in after the count */
    long line;
    size_t seq;         /* order in the file */
    bool bad;           /* some value of the row was rejected (already reported) */
    size_t fault;       /* batch reading: index of its held problems in reader.faults, or NO_FAULT */
    bool no_year;       /* the year was rejected: the row only marks its population as faulty */
} row;

/* Batch reading holds a row's or a population's problems back instead of reporting them, so
 * that a faulty population can be set aside while the others are read. The first TF_ERROR_MAX
 * messages are kept whole (an error record keeps no more), the others counted, with the status
 * of the lowest line among all of them: enough to report them as the strict reading would when
 * the file fails after all. */
#define NO_FAULT SIZE_MAX
typedef struct {
    size_t n;               /* problems found */
    size_t n_kept;          /* the first of them, in items (malloc'd once stored) */
    tf_error_item *items;
    long min_line;          /* the lowest line among all n, and its status */
    tf_status min_status;
} held;

typedef struct {
    size_t start, n;    /* range in the rows array */
    size_t first_seq;   /* where the population first appears in the file */
    size_t fault;       /* batch reading: its own held problems (reader.faults), or NO_FAULT */
} group;

typedef struct {
    const char *name;
    tf_error *err;
    size_t n_reported;  /* messages this read produced, kept or dropped */
    tf_status first_status; /* of the message with the lowest line, the earliest among equals */
    long first_line;
    bool nomem;
    bool batch;         /* set faulty populations aside instead of failing the file */
    bool estimates;     /* counts need not be whole numbers */
    size_t max_rows;
    bool holding;       /* report() keeps messages in cur instead of in err */
    bool released;      /* the held messages have been reported: the file failed */
    held cur;           /* its items point to scratch */
    tf_error_item scratch[TF_ERROR_MAX];
    held *faults;       /* batch reading: problems of rows and populations, by row.fault / group.fault */
    size_t n_faults, faults_cap;

    struct csv_parser csv;
    bool csv_live;
    unsigned char delim;

    /* The record being parsed: NUL-terminated, trimmed fields packed in fbuf. */
    char *fbuf;
    size_t fbuf_len, fbuf_cap;
    size_t *foff;
    size_t n_fields, foff_cap;
    long line;          /* physical line being fed */
    long rec_line;      /* line the record started on */
    bool rec_bad;       /* the record touches a line with an encoding error (already reported) */
    bool rec_ended;     /* libcsv ended a record while the current line was fed */
    size_t rec_bytes;   /* bytes of the current record fed so far, line ends counted */

    bool have_header;
    bool stop;          /* nothing more can be read sensibly (bad header, too many rows) */
    long header_line;
    size_t n_cols;
    long col[N_KNOWN];  /* 0-based field index, -1 = absent */
    size_t n_data;      /* data records seen, good or bad */
    bool orphan_fault;  /* a faulty record could not be given to any population */

    row *rows;
    size_t n_rows, rows_cap;
    char *labels;
    size_t labels_len, labels_cap;
} reader;

static void report(reader *r, tf_status status, long line, long col, const char *hint, const char *fmt, ...)
    __attribute__((format(printf, 6, 7)));

static void report(reader *r, tf_status status, long line, long col, const char *hint, const char *fmt, ...)
{
    char what[sizeof r->err->items[0].what];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    if (r->holding) {
        held *h = &r->cur;
        if (!h->n || line < h->min_line) {
            h->min_line = line;
            h->min_status = status;
        }
        h->n++;
        if (h->n_kept < TF_ERROR_MAX) {
            tf_error_item *it = &h->items[h->n_kept++];
            it->status = status;
            it->line = line;
            it->column = col;
            it->file[0] = '\0';
            snprintf(it->what, sizeof it->what, "%s", what);
            snprintf(it->hint, sizeof it->hint, "%s", hint ? hint : "");
        }
        return;
    }
    tf_error_add(r->err, status, r->name, line, col, hint, "%s", what);
    if (!r->n_reported++ || line < r->first_line) {
        r->first_status = status;
        r->first_line = line;
    }
}

/* Starts holding messages back (batch reading only). */
static void hold(reader *r)
{
    if (!r->batch)
        return;
    r->holding = true;
    r->cur = (held){.items = r->scratch};
}

/* Stops holding; stores what was held in r->faults and its index in *fault (NO_FAULT when
 * nothing was). false when out of memory (reported by the caller). */
static bool unhold(reader *r, size_t *fault)
{
    *fault = NO_FAULT;
    if (!r->holding)
        return true;
    r->holding = false;
    if (!r->cur.n)
        return true;
    held h = r->cur;
    if (!(h.items = malloc(h.n_kept * sizeof *h.items)) ||
        !tf_buf_grow((void **)&r->faults, &r->faults_cap, r->n_faults + 1, sizeof *r->faults, 16)) {
        free(h.items);
        return false;
    }
    memcpy(h.items, r->scratch, h.n_kept * sizeof *h.items);
    *fault = r->n_faults;
    r->faults[r->n_faults++] = h;
    return true;
}

/* Reports held messages as the strict reading would have: the kept ones as messages, the
 * others as dropped, with the status of the lowest line among all of them. */
static void release(reader *r, const held *h)
{
    for (size_t i = 0; i < h->n_kept; i++) {
        const tf_error_item *it = &h->items[i];
        report(r, it->status, it->line, it->column, it->hint[0] ? it->hint : NULL, "%s", it->what);
    }
    size_t dropped = h->n - h->n_kept;
    if (!dropped)
        return;
    if (r->err)
        r->err->n_dropped += dropped;
    if (h->min_line < r->first_line) {
        r->first_line = h->min_line;
        r->first_status = h->min_status;
    }
    r->n_reported += dropped;
}

static bool is_blank(char c) { return c == ' ' || c == '\t'; }
static bool is_digit(char c) { return c >= '0' && c <= '9'; }

/* Copies s into buf (size n) for quoting in a message: control bytes escaped, long values cut at
 * a character boundary and marked with "...". s is valid UTF-8 (checked per line beforehand). */
static const char *show(char *buf, size_t n, const char *s)
{
    size_t o = 0, i = 0;
    for (; s[i] && i < SHOW_MAX && o + 5 < n; i++) {
        unsigned char c = (unsigned char)s[i];
        if (c < 0x20 || c == 0x7f)
            o += (size_t)snprintf(buf + o, n - o, "\\x%02x", c);
        else
            buf[o++] = (char)c;
    }
    if (s[i]) {
        /* Cut inside a character: drop its leading bytes too. */
        if (((unsigned char)s[i] & 0xc0) == 0x80) {
            while (o > 0 && ((unsigned char)buf[o - 1] & 0xc0) == 0x80)
                o--;
            if (o > 0)
                o--;
        }
        snprintf(buf + o, n - o, "...");
    } else {
        buf[o] = '\0';
    }
    return buf;
}

/* Field number (1-based) that byte pos of a line falls in, counting delimiters outside quotes. */
static long field_at(const char *s, size_t pos, unsigned char delim)
{
    long f = 1;
    bool quoted = false;
    for (size_t i = 0; i < pos; i++) {
        if (s[i] == '"')
            quoted = !quoted;
        else if (!quoted && (unsigned char)s[i] == delim)
            f++;
    }
    return f;
}

/* The header decides the delimiter: whichever of ',', ';' and tab occurs most often outside
 * quotes (a comma on a tie). */
static unsigned char detect_delim(const char *s, size_t len)
{
    size_t n_comma = 0, n_semi = 0, n_tab = 0;
    bool quoted = false;
    for (size_t i = 0; i < len; i++) {
        if (s[i] == '"')
            quoted = !quoted;
        else if (!quoted)
            n_comma += s[i] == ',', n_semi += s[i] == ';', n_tab += s[i] == '\t';
    }
    if (n_tab > n_comma && n_tab > n_semi)
        return '\t';
    return n_semi > n_comma ? ';' : ',';
}

/* A whole number in plain decimal digits, optionally signed; more than 9 digits are clamped to
 * +-999999999, which every range check here rejects. */
static bool parse_int(const char *s, long *out)
{
    const char *p = s + (*s == '-' || *s == '+');
    if (!*p)
        return false;
    for (const char *q = p; *q; q++)
        if (!is_digit(*q))
            return false;
    *out = strlen(p) > 9 ? 999999999 : strtol(p, NULL, 10);
    if (*s == '-')
        *out = -*out;
    return true;
}

/* A decimal number: optional sign, digits with an optional point, optional exponent. The other
 * forms strtod accepts (inf, nan, hex) and trailing junk are refused here. The program never calls
 * setlocale, so strtod reads a point as the decimal separator. */
static bool parse_decimal(const char *s, double *out)
{
    const char *p = s + (*s == '-' || *s == '+');
    size_t n_digits = 0;
    while (is_digit(*p))
        p++, n_digits++;
    if (*p == '.')
        for (p++; is_digit(*p); p++)
            n_digits++;
    if (!n_digits)
        return false;
    if (*p == 'e' || *p == 'E') {
        p++;
        p += *p == '-' || *p == '+';
        if (!is_digit(*p))
            return false;
        while (is_digit(*p))
            p++;
    }
    if (*p)
        return false;
    *out = strtod(s, NULL) + 0.0; /* + 0.0 turns -0 into 0 */
    return true;
}

static bool is_missing(const char *s) { return !*s || !strcasecmp(s, "NA"); }

/* Ways of writing a number that spreadsheets produce under regional settings and that this
 * importer does not read, so that each is named in its message instead of being misread. */
typedef enum { NUM_PLAIN, NUM_THOUSANDS, NUM_COMMA, NUM_DECIMAL_COMMA } number_form;

/* The thousands separators recognised: comma, point, space, apostrophe, no-break space (U+00A0),
 * narrow no-break space (U+202F) and right single quotation mark (U+2019), the marks regional
 * number formats use (common practice, no source). Returns the separator's length in bytes at s,
 * 0 when s does not start with one. */
static size_t separator_at(const char *s)
{
    static const char *const seps[] = {",", ".", " ", "'", "\xc2\xa0", "\xe2\x80\xaf", "\xe2\x80\x99"};
    for (size_t i = 0; i < sizeof seps / sizeof seps[0]; i++)
        if (!strncmp(s, seps[i], strlen(seps[i])))
            return strlen(seps[i]);
    return 0;
}

/* Classifies s (trimmed, not empty) for the messages: NUM_THOUSANDS for digits grouped in threes
 * by one separator ("4.835", "4 835", "4'835", "1,234,567"; a single group with a point only in
 * a semicolon file, where a point is not the decimal mark, since "4.835" in a comma file is a
 * decimal), with an optional decimal part; NUM_COMMA for "4,835" in a semicolon file, where a
 * comma is the decimal mark but three digits after it suggest thousands; NUM_DECIMAL_COMMA for a
 * number with a comma as decimal mark ("12,5"); NUM_PLAIN otherwise. plain receives the digits
 * without separators (for "looks like 4835"), at most size bytes. */
static number_form classify_number(const char *s, unsigned char delim, char *plain, size_t size)
{
    const char *p = s + (*s == '-' || *s == '+');
    size_t o = 0, lead = 0;
    plain[0] = '\0';
    while (is_digit(p[lead]))
        lead++;
    if (!lead)
        return NUM_PLAIN;
    size_t sep_len = separator_at(p + lead);
    if (sep_len && lead <= 3) {
        const char *sep = p + lead, *q = p + lead;
        size_t n_groups = 0;
        while (!strncmp(q, sep, sep_len) && is_digit(q[sep_len]) && is_digit(q[sep_len + 1]) &&
               is_digit(q[sep_len + 2]) && !is_digit(q[sep_len + 3]))
            q += sep_len + 3, n_groups++;
        /* An optional decimal part with the other mark: "1.234,5", "1,234.5". */
        const char *frac = q;
        if ((*q == '.' || *q == ',') && *q != *sep && is_digit(q[1]))
            for (q++; is_digit(*q); q++)
                ;
        if (n_groups && !*q) {
            bool point_single = *sep == '.' && n_groups == 1 && frac == q;
            if (*sep == ',' && delim == ';' && n_groups == 1 && frac == q)
                return NUM_COMMA;
            if (!point_single || delim == ';') {
                for (const char *c = p; c < frac && o + 1 < size; c++)
                    if (is_digit(*c))
                        plain[o++] = *c;
                plain[o] = '\0';
                return NUM_THOUSANDS;
            }
        }
    }
    /* "12,5": digits, one comma, digits. */
    const char *comma = p + lead;
    if (*comma == ',' && is_digit(comma[1])) {
        const char *q = comma + 1;
        while (is_digit(*q))
            q++;
        if (!*q)
            return NUM_DECIMAL_COMMA;
    }
    return NUM_PLAIN;
}

/* Reports value s of column what ("count", "effort") when it is written in one of the forms
 * classify_number names; true when it was. */
static bool report_number_form(reader *r, long line, long col, const char *what, const char *s)
{
    char buf[4 * SHOW_MAX], plain[32];
    switch (classify_number(s, r->delim, plain, sizeof plain)) {
    case NUM_THOUSANDS:
        report(r, TF_ERR_PARSE, line, col, HINT_NUMBERS,
               "%s '%s' is written with a thousands separator (it looks like %s)", what, show(buf, sizeof buf, s),
               plain);
        return true;
    case NUM_COMMA:
        report(r, TF_ERR_PARSE, line, col, HINT_NUMBERS,
               "%s '%s' has a comma, a decimal mark or a thousands separator; neither is read", what,
               show(buf, sizeof buf, s));
        return true;
    case NUM_DECIMAL_COMMA:
        report(r, TF_ERR_PARSE, line, col, HINT_NUMBERS, "%s '%s' has a decimal comma, which is not read", what,
               show(buf, sizeof buf, s));
        return true;
    case NUM_PLAIN: break;
    }
    return false;
}

/* Whether a whole count is written as digits, a point and exactly three digits ("5.000"), the
 * form of a thousands separator in a file exported with regional settings. */
static bool count_looks_grouped(const char *s)
{
    char plain[32];
    return strchr(s, '.') && classify_number(s, ';', plain, sizeof plain) == NUM_THOUSANDS;
}

static const char *field(const reader *r, long i) { return r->fbuf + r->foff[i]; }

static void on_field(void *s, size_t len, void *data)
{
    reader *r = data;
    if (r->nomem)
        return;
    const char *p = s;
    while (len && is_blank(p[0]))
        p++, len--;
    while (len && is_blank(p[len - 1]))
        len--;
    if (!tf_buf_grow((void **)&r->fbuf, &r->fbuf_cap, r->fbuf_len + len + 1, 1, 16) ||
        !tf_buf_grow((void **)&r->foff, &r->foff_cap, r->n_fields + 1, sizeof *r->foff, 16)) {
        r->nomem = true;
        return;
    }
    r->foff[r->n_fields++] = r->fbuf_len;
    if (len)
        memcpy(r->fbuf + r->fbuf_len, p, len);
    r->fbuf[r->fbuf_len + len] = '\0';
    r->fbuf_len += len + 1;
}

static bool looks_like_data(const reader *r)
{
    long y;
    double c;
    for (size_t i = 0; i < r->n_fields; i++)
        if (parse_int(field(r, (long)i), &y) || parse_decimal(field(r, (long)i), &c))
            return true;
    return false;
}

static void read_header(reader *r)
{
    r->have_header = true;
    r->header_line = r->rec_line;
    r->n_cols = r->n_fields;
    for (int k = 0; k < N_KNOWN; k++)
        r->col[k] = -1;
    bool ok = true;
    for (size_t i = 0; i < r->n_fields; i++) {
        const char *name = field(r, (long)i);
        for (int k = 0; k < N_KNOWN; k++) {
            if (strcasecmp(name, known_names[k]))
                continue;
            if (r->col[k] >= 0) {
                report(r, TF_ERR_PARSE, r->rec_line, (long)i + 1, "rename or remove one of the two columns",
                       "column '%s' is named twice in the header (fields %ld and %zu)", known_names[k],
                       r->col[k] + 1, i + 1);
                ok = false;
            } else {
                r->col[k] = (long)i;
            }
        }
    }
    if (r->col[COL_YEAR] < 0 || r->col[COL_COUNT] < 0) {
        ok = false;
        if (r->col[COL_YEAR] < 0 && r->col[COL_COUNT] < 0 && looks_like_data(r)) {
            report(r, TF_ERR_PARSE, r->rec_line, 0,
                   "the first line that is not a comment must name the columns, e.g. 'year,count'",
                   "line %ld looks like data, not a header row", r->rec_line);
        } else {
            for (int k = COL_YEAR; k <= COL_COUNT; k++)
                if (r->col[k] < 0)
                    report(r, TF_ERR_PARSE, r->rec_line, 0,
                           "the header must name a 'year' and a 'count' column (optional: population, "
                           "effort, removed, added, note)",
                           "the header has no '%s' column", known_names[k]);
        }
    }
    if (!ok)
        r->stop = true;
}

/* Checks one data record. Every row with a usable population label is kept, even a faulty one, so
 * that its population is known to be faulty and duplicate years are still found. */
static void read_data(reader *r)
{
    char buf[4 * SHOW_MAX];
    long line = r->rec_line;
    if (++r->n_data > r->max_rows) {
        report(r, TF_ERR_RANGE, line, 0, "split the file, or check that it is a survey file",
               "more than %zu data rows; reading stops here", r->max_rows);
        r->stop = true;
        return;
    }
    if (r->n_fields != r->n_cols) {
        r->orphan_fault = true;
        size_t first_odd = (r->n_fields < r->n_cols ? r->n_fields : r->n_cols) + 1;
        report(r, TF_ERR_PARSE, line, (long)first_odd, HINT_QUOTES, "the row has %zu fields but the header has %zu",
               r->n_fields, r->n_cols);
        return;
    }
    row w = {.count = NAN, .effort = 1.0, .removed = 0.0, .added = 0.0, .line = line, .seq = r->n_rows,
             .fault = NO_FAULT};
    bool labelled = true;
    hold(r);

    long ycol = r->col[COL_YEAR];
    const char *ys = field(r, ycol);
    long year = 0;
    if (!*ys) {
        report(r, TF_ERR_PARSE, line, ycol + 1, "every row needs its year", "the year is empty");
        w.no_year = true;
    } else if (!parse_int(ys, &year)) {
        report(r, TF_ERR_PARSE, line, ycol + 1, "write the year as four digits, e.g. 2004",
               "year '%s' is not a whole number", show(buf, sizeof buf, ys));
        w.no_year = true;
    } else if (year < TF_SURVEY_YEAR_MIN || year > TF_SURVEY_YEAR_MAX) {
        report(r, TF_ERR_RANGE, line, ycol + 1, "check the year for a typing error",
               "year %s is outside %d..%d", show(buf, sizeof buf, ys), TF_SURVEY_YEAR_MIN, TF_SURVEY_YEAR_MAX);
        w.no_year = true;
    }
    w.year = (int)year;

    long ccol = r->col[COL_COUNT];
    const char *cs = field(r, ccol);
    double c;
    if (!is_missing(cs)) {
        if (report_number_form(r, line, ccol + 1, "count", cs)) {
            w.bad = true;
        } else if (!parse_decimal(cs, &c)) {
            report(r, TF_ERR_PARSE, line, ccol + 1, HINT_MISSING, "count '%s' is not a number",
                   show(buf, sizeof buf, cs));
            w.bad = true;
        } else if (c < 0) {
            report(r, TF_ERR_RANGE, line, ccol + 1, HINT_MISSING, "count %s is negative", show(buf, sizeof buf, cs));
            w.bad = true;
        } else if (!(c <= TF_SURVEY_MAX_COUNT)) {
            report(r, TF_ERR_RANGE, line, ccol + 1, "check the count for a typing error",
                   "count %s is larger than %g", show(buf, sizeof buf, cs), TF_SURVEY_MAX_COUNT);
            w.bad = true;
        } else if (c != floor(c) && !r->estimates) {
            /* A count is a number of animals. A fraction is a typing error, a thousands separator
             * read as a decimal point ("4.835" in a comma file), or a column of estimates, which
             * only continuous counting-error models suit: the user must say which. */
            char hint[256], plain[32];
            if (classify_number(cs, ';', plain, sizeof plain) == NUM_THOUSANDS)
                snprintf(hint, sizeof hint,
                         "if %s means %s animals, export the file without thousands separators; if the column "
                         "holds estimates (indices, densities), say so with --estimates",
                         show(buf, sizeof buf, cs), plain);
            else
                snprintf(hint, sizeof hint, "counts are whole numbers of animals; if the column holds estimates "
                                            "(indices, densities), say so with --estimates");
            report(r, TF_ERR_INVALID, line, ccol + 1, hint, "count %s is not a whole number",
                   show(buf, sizeof buf, cs));
            w.bad = true;
        } else if (!r->estimates && count_looks_grouped(cs)) {
            /* "5.000" is whole, but nobody writes a count of five with three zeros: it is 5000
             * with a thousands separator (the same digits as "4.835", which is refused above). */
            char plain[32];
            classify_number(cs, ';', plain, sizeof plain);
            report(r, TF_ERR_PARSE, line, ccol + 1, HINT_NUMBERS,
                   "count '%s' has a point and three digits after it: it looks like %s written with a thousands "
                   "separator", show(buf, sizeof buf, cs), plain);
            w.bad = true;
        } else {
            w.count = c;
        }
    }

    /* Effort only matters in a surveyed year; for a missing count it is not read. */
    long ecol = r->col[COL_EFFORT];
    if (ecol >= 0 && !is_missing(cs)) {
        const char *es = field(r, ecol);
        double e;
        static const char hint[] = "give the survey effort (e.g. km walked, hours) as a positive number";
        if (is_missing(es)) {
            report(r, TF_ERR_PARSE, line, ecol + 1, hint, "the effort is missing for a surveyed year");
            w.bad = true;
        } else if (report_number_form(r, line, ecol + 1, "effort", es)) {
            w.bad = true;
        } else if (!parse_decimal(es, &e)) {
            report(r, TF_ERR_PARSE, line, ecol + 1, hint, "effort '%s' is not a number", show(buf, sizeof buf, es));
            w.bad = true;
        } else if (!(e > 0 && isfinite(e))) {
            report(r, TF_ERR_RANGE, line, ecol + 1, hint, "effort %s is not a positive number",
                   show(buf, sizeof buf, es));
            w.bad = true;
        } else {
            w.effort = e;
        }
    }

    /* Removals and releases are read in every row, a year without a count too: the growth step
     * needs them whether or not the population was counted that year. */
    for (int k = COL_REMOVED; k <= COL_ADDED; k++) {
        long acol = r->col[k];
        const char *as = acol >= 0 ? field(r, acol) : "";
        double a;
        static const char hint[] = "give the animals removed (hunt, cull, capture) or added (release) after the "
                                   "year's count as a number >= 0; leave the cell empty or write 0 for none";
        if (is_missing(as))
            continue;
        if (report_number_form(r, line, acol + 1, known_names[k], as)) {
            w.bad = true;
        } else if (!parse_decimal(as, &a)) {
            report(r, TF_ERR_PARSE, line, acol + 1, hint, "%s '%s' is not a number", known_names[k],
                   show(buf, sizeof buf, as));
            w.bad = true;
        } else if (!(a >= 0 && a <= TF_SURVEY_MAX_COUNT)) {
            report(r, TF_ERR_RANGE, line, acol + 1,
                   a < 0 ? "removals and releases are both >= 0: write animals put in under 'added'" : hint,
                   "%s %s is %s", known_names[k], show(buf, sizeof buf, as),
                   a < 0 ? "negative" : "larger than any count this tool accepts");
            w.bad = true;
        } else if (k == COL_REMOVED) {
            w.removed = a;
        } else {
            w.added = a;
        }
    }

    long pcol = r->col[COL_POP];
    const char *label = pcol >= 0 ? field(r, pcol) : "";
    if (pcol >= 0) {
        size_t n = strlen(label);
        bool ctrl = false;
        for (size_t i = 0; i < n; i++)
            ctrl |= (unsigned char)label[i] < 0x20 || label[i] == 0x7f;
        if (!n) {
            report(r, TF_ERR_INVALID, line, pcol + 1,
                   "give every row a population label, or drop the column for a file with one population",
                   "the population label is empty");
            labelled = false;
        } else if (n > TF_SURVEY_MAX_LABEL) {
            report(r, TF_ERR_INVALID, line, pcol + 1, "use a shorter label",
                   "population label '%s' is longer than %d bytes", show(buf, sizeof buf, label),
                   TF_SURVEY_MAX_LABEL);
            labelled = false;
        } else if (ctrl) {
            report(r, TF_ERR_INVALID, line, pcol + 1, "remove tabs and other control characters from the label",
                   "population label '%s' contains a control character", show(buf, sizeof buf, label));
            labelled = false;
        }
    }
    if (!unhold(r, &w.fault)) {
        r->nomem = true;
        return;
    }
    if (!labelled) {
        /* A row that belongs to no population fails the file, as in the strict reading. */
        if (w.fault != NO_FAULT) {
            held *h = &r->faults[--r->n_faults];
            release(r, h);
            free(h->items);
        }
        r->orphan_fault = true;
        return;
    }

    /* Rows of one population usually follow each other: reuse the previous row's label copy. */
    if (r->n_rows && !strcmp(r->labels + r->rows[r->n_rows - 1].label_off, label)) {
        w.label_off = r->rows[r->n_rows - 1].label_off;
    } else {
        size_t n = strlen(label) + 1;
        if (!tf_buf_grow((void **)&r->labels, &r->labels_cap, r->labels_len + n, 1, 16)) {
            r->nomem = true;
            return;
        }
        memcpy(r->labels + r->labels_len, label, n);
        w.label_off = r->labels_len;
        r->labels_len += n;
    }
    if (!tf_buf_grow((void **)&r->rows, &r->rows_cap, r->n_rows + 1, sizeof *r->rows, 16)) {
        r->nomem = true;
        return;
    }
    r->rows[r->n_rows++] = w;
}

static void on_record(int c, void *data)
{
    reader *r = data;
    bool empty = true;
    for (size_t i = 0; i < r->n_fields && empty; i++)
        empty = !*field(r, (long)i);
    /* A row of empty fields is how spreadsheets save a blank line. */
    if (!r->nomem && !r->stop && !empty) {
        if (r->rec_bad) {
            r->orphan_fault = true;
            if (!r->have_header)
                r->stop = true; /* an unreadable header: the rows cannot be interpreted */
        } else if (!r->have_header) {
            read_header(r);
        } else {
            read_data(r);
        }
    }
    r->n_fields = 0;
    r->fbuf_len = 0;
    r->rec_bad = false;
    r->rec_ended = true;
}

static int is_lf(unsigned char c) { return c == '\n'; }
/* libcsv takes spaces and tabs around a field as padding by default; in a tab-separated file
 * only the space is (on_field trims blanks of every field anyway). */
static int is_space_only(unsigned char c) { return c == ' '; }

static bool csv_start(reader *r)
{
    if (csv_init(&r->csv, CSV_STRICT | CSV_APPEND_NULL))
        return false;
    r->csv_live = true;
    csv_set_term_func(&r->csv, is_lf);
    csv_set_delim(&r->csv, r->delim);
    if (r->delim == '\t')
        csv_set_space_func(&r->csv, is_space_only);
    return true;
}

static void csv_stop(reader *r)
{
    if (r->csv_live)
        csv_free(&r->csv);
    r->csv_live = false;
}

/* Reports a NUL byte or broken UTF-8 in the line; true when the line is clean. */
static bool check_encoding(reader *r, const char *s, size_t len, bool in_record, bool skipped)
{
    const char *nul = memchr(s, '\0', len);
    size_t bad = tf_utf8_bad_at(s, len);
    if (!nul && bad == len)
        return true;
    size_t at = nul && (size_t)(nul - s) < bad ? (size_t)(nul - s) : bad;
    long col = skipped || in_record ? 0 : field_at(s, at, r->delim);
    if (nul && (size_t)(nul - s) == at)
        report(r, TF_ERR_PARSE, r->line, col, "save the survey as a plain-text CSV file",
               "the line contains a NUL byte (byte %zu of the line)", at + 1);
    else
        report(r, TF_ERR_PARSE, r->line, col, "save the file with UTF-8 encoding",
               "the line is not valid UTF-8 (byte %zu of the line)", at + 1);
    return false;
}

/* Feeds one physical line (terminator removed) to libcsv. Comments and blank lines are only
 * recognised between records, never inside a quoted value that spans lines. */
static void feed_line(reader *r, const char *s, size_t len, bool *in_record)
{
    size_t lead = 0;
    while (lead < len && is_blank(s[lead]))
        lead++;
    bool skip = !*in_record && (lead == len || s[lead] == '#');
    if (!*in_record && !skip) {
        r->rec_line = r->line;
        if (!r->delim) {
            r->delim = detect_delim(s, len);
            csv_set_delim(&r->csv, r->delim);
            if (r->delim == '\t')
                csv_set_space_func(&r->csv, is_space_only);
        }
    }
    bool clean = check_encoding(r, s, len, *in_record, skip);
    if (skip)
        return;
    if (!clean)
        r->rec_bad = true;
    if (!*in_record)
        r->rec_bytes = 0;
    r->rec_bytes += len + 1;
    /* libcsv grows its field buffer by a fixed block (128 bytes unless told otherwise), which
     * makes a long field cost quadratic time in copies wherever realloc cannot grow in place.
     * A block as large as the record so far, and this whole line, makes the growth geometric:
     * one copy per line at most, and a linear total. */
    csv_set_blk_size(&r->csv, r->rec_bytes > FIELD_BLOCK_MIN ? r->rec_bytes : FIELD_BLOCK_MIN);
    r->rec_ended = false;
    size_t done = csv_parse(&r->csv, s, len, on_field, on_record, r);
    if (done == len)
        done += csv_parse(&r->csv, "\n", 1, on_field, on_record, r) == 1;
    if (done == len + 1) {
        *in_record = !r->rec_ended;
        return;
    }
    if (csv_error(&r->csv) == CSV_EPARSE) {
        r->orphan_fault = true;
        if (!r->rec_bad)
            report(r, TF_ERR_PARSE, r->line, (long)r->n_fields + 1, HINT_QUOTES, "misplaced double quote");
        if (!r->have_header)
            r->stop = true; /* without the header the rows cannot be interpreted */
    } else {
        r->nomem = true;
    }
    /* libcsv cannot resume after an error: start afresh on the next line. */
    csv_stop(r);
    r->n_fields = 0;
    r->fbuf_len = 0;
    r->rec_bad = false;
    *in_record = false;
    if (!r->nomem && !csv_start(r))
        r->nomem = true;
}

static int by_label_seq(const void *a, const void *b)
{
    const row *x = a, *y = b;
    int c = strcmp(x->label, y->label);
    return c ? c : (x->seq > y->seq) - (x->seq < y->seq);
}

/* Rows without a usable year go last. */
static int by_year_seq(const void *a, const void *b)
{
    const row *x = a, *y = b;
    if (x->no_year != y->no_year)
        return x->no_year - y->no_year;
    if (x->year != y->year)
        return (x->year > y->year) - (x->year < y->year);
    return (x->seq > y->seq) - (x->seq < y->seq);
}

static int by_first_seq(const void *a, const void *b)
{
    const group *x = a, *y = b;
    return (x->first_seq > y->first_seq) - (x->first_seq < y->first_seq);
}

/* Printable name of a population in a message. */
static const char *who(char *buf, size_t n, const char *label)
{
    if (!*label)
        return "the population";
    char v[4 * SHOW_MAX];
    snprintf(buf, n, "population '%s'", show(v, sizeof v, label));
    return buf;
}

/* Sorts one population's rows by year and checks what needs all of them: duplicate years, the
 * span, and enough surveyed, non-zero counts. rows[0] is the population's first row in the file.
 * The counting checks are left out while other faults could change what is counted. */
static void check_group(reader *r, row *rows, size_t n)
{
    char buf[5 * SHOW_MAX];
    long first_line = rows[0].line;
    bool bad = r->orphan_fault;
    for (size_t i = 0; i < n; i++)
        bad |= rows[i].bad || rows[i].no_year;
    qsort(rows, n, sizeof *rows, by_year_seq);
    while (n && rows[n - 1].no_year)
        n--;
    if (!n)
        return;
    long ycol = r->col[COL_YEAR] + 1, ccol = r->col[COL_COUNT] + 1;
    /* run = the first row of the current run of equal years, kept as the loop goes so that a
     * file of many rows of one year takes linear time, not quadratic. */
    for (size_t i = 1, run = 0; i < n; i++) {
        if (rows[i].year != rows[i - 1].year) {
            run = i;
            continue;
        }
        report(r, TF_ERR_INVALID, rows[i].line, ycol, "keep one row per year and population",
               "year %d appears twice%s%s (first on line %ld)", rows[i].year, *rows[i].label ? " for " : "",
               *rows[i].label ? who(buf, sizeof buf, rows[i].label) : "", rows[run].line);
        bad = true;
    }
    long span = (long)rows[n - 1].year - rows[0].year + 1;
    if (span > TF_SURVEY_MAX_SPAN) {
        report(r, TF_ERR_RANGE, rows[n - 1].line, ycol, "check the years for a typing error",
               "%s spans %ld years (%d-%d); at most %d are allowed", who(buf, sizeof buf, rows[0].label), span,
               rows[0].year, rows[n - 1].year, TF_SURVEY_MAX_SPAN);
        bad = true;
    }
    if (bad)
        return; /* counting surveyed years now would only repeat the problems above */
    size_t n_surveyed = 0, n_zero = 0;
    for (size_t i = 0; i < n; i++) {
        n_surveyed += !isnan(rows[i].count);
        n_zero += rows[i].count == 0;
    }
    if (n_surveyed < TF_SURVEY_MIN_SURVEYED) {
        report(r, TF_ERR_INVALID, first_line, ccol, "survey more years, or leave this population out (--population to choose the others, or "
               "--skip-unusable)",
               "%s has %zu surveyed year%s; at least %d are needed to fit a model",
               who(buf, sizeof buf, rows[0].label), n_surveyed,
               n_surveyed == 1 ? "" : "s", TF_SURVEY_MIN_SURVEYED);
    } else if (n_zero == n_surveyed) {
        report(r, TF_ERR_INVALID, first_line, ccol,
               "a population never seen in the survey cannot be modelled; leave it out (--population to choose "
               "the others, or --skip-unusable)",
               "%s has only zero counts", who(buf, sizeof buf, rows[0].label));
    }
}

static tf_series *build_series(const row *rows, size_t n, double *counts, double *effort, long *lines,
                               double *removed, double *added, tf_error *err)
{
    int first = rows[0].year;
    size_t span = (size_t)(rows[n - 1].year - first) + 1;
    for (size_t i = 0; i < span; i++) {
        counts[i] = NAN;
        effort[i] = 1.0;
        lines[i] = 0;
        removed[i] = added[i] = 0.0;
    }
    for (size_t i = 0; i < n; i++) {
        size_t k = (size_t)(rows[i].year - first);
        counts[k] = rows[i].count;
        effort[k] = rows[i].effort;
        lines[k] = rows[i].line;
        removed[k] = rows[i].removed;
        added[k] = rows[i].added;
    }
    tf_series *s = tf_series_new(rows[0].label, first, span, counts, effort, lines, err);
    if (s && tf_series_set_actions(s, removed, added, err) != TF_OK) {
        tf_series_free(s);
        return NULL;
    }
    return s;
}

/* Groups the rows, checks each population and, when the whole file is clean, builds the survey.
 * NULL when something was reported (or memory ran out, also reported). */
static tf_survey *assemble(reader *r)
{
    tf_survey *sv = NULL;
    group *groups = NULL;
    double *counts = NULL, *effort = NULL, *removed = NULL, *added = NULL;
    long *lines = NULL;
    size_t n_groups = 0;

    if (!r->n_rows)
        goto done; /* every data row was unreadable, and each said so */
    for (size_t i = 0; i < r->n_rows; i++)
        r->rows[i].label = r->labels + r->rows[i].label_off;
    qsort(r->rows, r->n_rows, sizeof *r->rows, by_label_seq);
    groups = malloc(r->n_rows * sizeof *groups);
    if (!groups)
        goto nomem;
    for (size_t i = 0; i < r->n_rows; i++) {
        if (i == 0 || strcmp(r->rows[i].label, r->rows[i - 1].label))
            groups[n_groups++] = (group){i, 0, r->rows[i].seq, NO_FAULT};
        groups[n_groups - 1].n++;
    }
    qsort(groups, n_groups, sizeof *groups, by_first_seq);
    for (size_t g = 0; g < n_groups; g++) {
        hold(r);
        check_group(r, r->rows + groups[g].start, groups[g].n);
        if (!unhold(r, &groups[g].fault))
            goto nomem;
    }
    if (r->n_reported || r->orphan_fault) {
        /* A problem that belongs to no population: the file fails whole, with every message. */
        for (size_t i = 0; i < r->n_faults; i++)
            release(r, &r->faults[i]);
        r->released = true;
        goto done;
    }

    /* One workspace for every population; check_group has capped the span. */
    counts = malloc(TF_SURVEY_MAX_SPAN * sizeof *counts);
    effort = malloc(TF_SURVEY_MAX_SPAN * sizeof *effort);
    lines = malloc(TF_SURVEY_MAX_SPAN * sizeof *lines);
    removed = malloc(TF_SURVEY_MAX_SPAN * sizeof *removed);
    added = malloc(TF_SURVEY_MAX_SPAN * sizeof *added);
    sv = calloc(1, sizeof *sv);
    if (!counts || !effort || !lines || !removed || !added || !sv)
        goto nomem;
    sv->n_in_file = n_groups;
    sv->path = strdup(r->name);
    sv->series = calloc(n_groups, sizeof *sv->series);
    sv->order = calloc(n_groups, sizeof *sv->order);
    if (!sv->path || !sv->series || !sv->order)
        goto nomem;
    for (size_t g = 0; g < n_groups; g++) {
        const row *rows = r->rows + groups[g].start;
        /* The population's first problem in file order, and how many it has. */
        const tf_error_item *first = NULL;
        size_t n_problems = 0;
        for (size_t i = 0; i <= groups[g].n; i++) {
            size_t f = i < groups[g].n ? rows[i].fault : groups[g].fault;
            if (f == NO_FAULT)
                continue;
            n_problems += r->faults[f].n;
            for (size_t k = 0; k < r->faults[f].n_kept; k++)
                if (!first || r->faults[f].items[k].line < first->line)
                    first = &r->faults[f].items[k];
        }
        if (first) {
            if (!sv->rejected && !(sv->rejected = calloc(n_groups, sizeof *sv->rejected)))
                goto nomem;
            tf_survey_rejected *x = &sv->rejected[sv->n_rejected];
            if (!(x->label = strdup(rows[0].label)))
                goto nomem;
            sv->n_rejected++;
            x->order = g;
            x->status = first->status;
            x->line = first->line;
            x->column = first->column;
            x->n_problems = n_problems;
            snprintf(x->what, sizeof x->what, "%s", first->what);
            snprintf(x->hint, sizeof x->hint, "%s", first->hint);
            continue;
        }
        /* The rows were checked already, so only memory can fail here. */
        sv->series[sv->n_series] = build_series(rows, groups[g].n, counts, effort, lines, removed, added, NULL);
        if (!sv->series[sv->n_series])
            goto nomem;
        sv->order[sv->n_series++] = g;
    }
    goto done;
nomem:
    tf_survey_free(sv);
    sv = NULL;
    r->nomem = true;
done:
    free(groups);
    free(counts);
    free(effort);
    free(lines);
    free(removed);
    free(added);
    return sv;
}

/* Puts the messages of this read in line order (stable; at most TF_ERROR_MAX of them). */
static void sort_messages(tf_error *err, size_t first)
{
    if (!err)
        return;
    for (size_t i = first + 1; i < err->n_items; i++) {
        tf_error_item it = err->items[i];
        size_t j = i;
        while (j > first && err->items[j - 1].line > it.line) {
            err->items[j] = err->items[j - 1];
            j--;
        }
        err->items[j] = it;
    }
}

static tf_status parse(const char *name, const char *data, size_t len, const tf_survey_options *o, tf_survey **out,
                       tf_error *err)
{
    *out = NULL;
    reader r = {.name = name,
                .err = err,
                .batch = o->batch,
                .estimates = o->estimates,
                .max_rows = o->max_rows ? o->max_rows : TF_SURVEY_MAX_ROWS};
    size_t first_msg = err ? err->n_items : 0;

    if (!csv_start(&r)) {
        r.nomem = true;
        goto finish;
    }
    /* A UTF-8 byte order mark, as spreadsheet programs write it. */
    if (len >= 3 && !memcmp(data, "\xef\xbb\xbf", 3))
        data += 3, len -= 3;
    bool in_record = false;
    size_t i = 0;
    while (i < len && !r.stop && !r.nomem) {
        /* A line ends at LF, CRLF or a lone CR. */
        size_t e = i;
        while (e < len && data[e] != '\n' && data[e] != '\r')
            e++;
        r.line++;
        feed_line(&r, data + i, e - i, &in_record);
        if (e < len && data[e] == '\r' && e + 1 < len && data[e + 1] == '\n')
            e++;
        i = e + 1;
    }
    if (r.nomem || r.stop)
        goto finish;
    if (in_record)
        report(&r, TF_ERR_PARSE, r.rec_line, (long)r.n_fields + 1, HINT_QUOTES,
               "a quoted value that starts on this line is never closed");
    else if (!r.have_header && !r.line)
        report(&r, TF_ERR_INVALID, 1, 0, "a survey file has a header row (e.g. 'year,count') and one row per year",
               "the file is empty");
    else if (!r.have_header)
        report(&r, TF_ERR_INVALID, r.line, 0, "a survey file has a header row (e.g. 'year,count') and one row per year",
               "the file has no header row (only comments and blank lines)");
    else if (!r.n_data)
        report(&r, TF_ERR_INVALID, r.header_line, 0, "add one row per survey year below the header",
               "the file has a header but no data rows");
    else
        *out = assemble(&r);

finish:
    /* A file that fails before its populations are assembled fails whole: every held message is
     * reported, as the strict reading reports it. */
    if (!*out && !r.released)
        for (size_t k = 0; k < r.n_faults; k++)
            release(&r, &r.faults[k]);
    if (r.nomem)
        report(&r, TF_ERR_NOMEM, 0, 0, NULL, "out of memory reading the survey");
    csv_stop(&r);
    free(r.fbuf);
    free(r.foff);
    free(r.rows);
    free(r.labels);
    for (size_t k = 0; k < r.n_faults; k++)
        free(r.faults[k].items);
    free(r.faults);
    if (!r.n_reported) {
        if (*out)
            (*out)->estimates = o->estimates;
        return TF_OK;
    }
    tf_survey_free(*out);
    *out = NULL;
    sort_messages(err, first_msg);
    return r.first_status;
}

tf_status tf_survey_parse(const char *name, const char *data, size_t len, tf_survey **out, tf_error *err)
{
    return parse(name, data, len, &(tf_survey_options){0}, out, err);
}

tf_status tf_survey_parse_batch(const char *name, const char *data, size_t len, size_t max_rows, tf_survey **out,
                                tf_error *err)
{
    return parse(name, data, len, &(tf_survey_options){.batch = 1, .max_rows = max_rows}, out, err);
}

tf_status tf_survey_parse_with(const char *name, const char *data, size_t len, const tf_survey_options *o,
                               tf_survey **out, tf_error *err)
{
    return parse(name, data, len, o, out, err);
}

static tf_status read_file(const char *path, const tf_survey_options *o, tf_survey **out, tf_error *err)
{
    static const char hint[] = "check the file name and that the file can be read";
    *out = NULL;
    FILE *f = fopen(path, "rb");
    if (!f)
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, hint, "cannot open the survey file: %s", strerror(errno));
    char *buf = NULL;
    size_t len = 0, cap = 0;
    tf_status st = TF_OK;
    struct stat info;
    /* Refuse a huge regular file before reading it; pipes are capped while reading. */
    if (fstat(fileno(f), &info) == 0 && S_ISREG(info.st_mode) && info.st_size > TF_SURVEY_MAX_BYTES)
        goto too_big;
    for (;;) {
        if (!tf_buf_grow((void **)&buf, &cap, len + 65536, 1, 16)) {
            st = tf_error_add(err, TF_ERR_NOMEM, path, 0, 0, NULL, "out of memory reading the survey");
            goto done;
        }
        size_t n = fread(buf + len, 1, cap - len, f);
        len += n;
        if (len > (size_t)TF_SURVEY_MAX_BYTES)
            goto too_big;
        if (n == 0)
            break;
    }
    if (ferror(f)) {
        st = tf_error_add(err, TF_ERR_IO, path, 0, 0, hint, "cannot read the survey file: %s", strerror(errno));
        goto done;
    }
    st = parse(path, buf ? buf : "", len, o, out, err);
    goto done;
too_big:
    st = tf_error_add(err, TF_ERR_RANGE, path, 0, 0, "a survey file holds one row per year; check the file name",
                      "the file is larger than %ld MiB", TF_SURVEY_MAX_BYTES >> 20);
done:
    fclose(f);
    free(buf);
    return st;
}

tf_status tf_survey_read(const char *path, tf_survey **out, tf_error *err)
{
    return read_file(path, &(tf_survey_options){0}, out, err);
}

tf_status tf_survey_read_batch(const char *path, size_t max_rows, tf_survey **out, tf_error *err)
{
    return read_file(path, &(tf_survey_options){.batch = 1, .max_rows = max_rows}, out, err);
}

tf_status tf_survey_read_with(const char *path, const tf_survey_options *o, tf_survey **out, tf_error *err)
{
    return read_file(path, o, out, err);
}

int tf_survey_estimates(const tf_survey *sv) { return sv->estimates; }

tf_status tf_survey_set_counted_fraction(tf_survey *sv, double q, tf_error *err)
{
    for (size_t i = 0; i < sv->n_series; i++) {
        tf_status st = tf_series_set_counted_fraction(sv->series[i], q, err);
        if (st != TF_OK)
            return st;
    }
    return TF_OK;
}

void tf_survey_free(tf_survey *sv)
{
    if (!sv)
        return;
    for (size_t i = 0; i < sv->n_series; i++)
        tf_series_free(sv->series[i]);
    for (size_t i = 0; i < sv->n_rejected; i++)
        free(sv->rejected[i].label);
    free(sv->rejected);
    free(sv->order);
    free(sv->series);
    free(sv->path);
    free(sv);
}

const char *tf_survey_path(const tf_survey *sv) { return sv->path; }
size_t tf_survey_n_series(const tf_survey *sv) { return sv->n_series; }
const tf_series *tf_survey_series(const tf_survey *sv, size_t i) { return i < sv->n_series ? sv->series[i] : NULL; }
size_t tf_survey_series_order(const tf_survey *sv, size_t i) { return sv->order[i]; }
size_t tf_survey_n_rejected(const tf_survey *sv) { return sv->n_rejected; }
const tf_survey_rejected *tf_survey_rejected_at(const tf_survey *sv, size_t i)
{
    return i < sv->n_rejected ? &sv->rejected[i] : NULL;
}

const tf_series *tf_survey_find(const tf_survey *sv, const char *label)
{
    for (size_t i = 0; i < sv->n_series; i++)
        if (!strcmp(tf_series_label(sv->series[i]), label))
            return sv->series[i];
    return NULL;
}

size_t tf_survey_n_in_file(const tf_survey *sv) { return sv->n_in_file; }

static bool listed(const char *label, const char *const *labels, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (!strcmp(label, labels[i]))
            return true;
    return false;
}

void tf_survey_keep(tf_survey *sv, const char *const *labels, size_t n)
{
    size_t k = 0;
    for (size_t i = 0; i < sv->n_series; i++) {
        if (listed(tf_series_label(sv->series[i]), labels, n)) {
            sv->order[k] = sv->order[i];
            sv->series[k++] = sv->series[i];
        } else {
            tf_series_free(sv->series[i]);
        }
    }
    sv->n_series = k;
    k = 0;
    for (size_t i = 0; i < sv->n_rejected; i++) {
        if (listed(sv->rejected[i].label, labels, n))
            sv->rejected[k++] = sv->rejected[i];
        else
            free(sv->rejected[i].label);
    }
    sv->n_rejected = k;
}

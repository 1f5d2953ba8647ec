/* The workbook writer: lays export tables out on sheets through libxlsxwriter, adds native
 * charts over those cells, and writes the package into a temporary that replaces the target
 * only when libxlsxwriter has finished without error. */
#include "export/workbook.h"

#include <assert.h>
#include <math.h>
#include <stdbool.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <xlsxwriter.h>

#include "export/atomic.h"
#include "util/buf.h"
#include "util/path.h"
#include "util/utf8.h"

/* ---- Layout constants (common practice, no source: they are matters of taste) ---- */

/* Column widths in Excel's units (about one digit of the default font). */
#define WIDTH_MIN 6.0
#define WIDTH_MAX_NUMBER 24.0
#define WIDTH_MAX_TEXT 50.0
#define WIDTH_LEGEND_CAP 16.0     /* a legend wraps beyond this instead of widening its column */
/* A first page (summary) is read on paper: its three visible columns together fit the width of
 * a portrait A4 page at full size (PRINT_PORTRAIT_PX); the item column fits its labels up to a
 * cap, and longer labels, values and notes wrap within their columns. A long text value with no
 * note spreads over the note column too (the sentence in brief, the cautions), which keeps the
 * page short enough to print on two pages. */
#define WIDTH_SUMMARY_MIN 12.0
#define WIDTH_SUMMARY_ITEM 48.0
#define WIDTH_SUMMARY_VALUE 36.0
#define WIDTH_SUMMARY_NOTE_MIN 20.0
#define WIDTH_SUMMARY_PAGE 95.0   /* item + value + note: 7 * 95 + 3 * 5 = 680 px < 698 px */
#define NOTE_MIN_WIDTH 70.0       /* a note line is merged across at least this much width */
#define DEFAULT_COL_WIDTH 8.43    /* Excel's default column width */
#define LINE_HEIGHT 15.0          /* points per line of the default 11 pt font */
#define MAX_ROW_HEIGHT 409.0      /* Excel's largest row height in points */
#define HEADING_HEIGHT 24.0       /* a summary heading row: 12 pt type with room above */
/* Charts: libxlsxwriter's default 480 x 288 px chart, scaled; CHART_ROWS default rows of
 * 20 px hold one chart with a gap, for stacking automatically placed charts. Charts placed
 * automatically go below their sheet's table, one under the other, so that a chart never widens
 * the printed page: 480 x 1.4 = 672 px fits the 698 px of a portrait A4 page (PRINT_PORTRAIT_PX)
 * from the sheet's first visible column. */
#define CHART_X_SCALE 1.4
#define CHART_Y_SCALE 1.4
#define CHART_ROWS 22
#define CHART_PX (480.0 * CHART_X_SCALE)

/* Printing (common practice, no source, but for the page size): every sheet is printed on A4
 * (210 x 297 mm, ISO 216) one page wide, its heading rows repeated on every page; portrait when
 * its printed width fits a portrait page at full size, else landscape, where it is shrunk only
 * as far as the landscape width asks. Widths in pixels at 96 dpi: a column of width w (in digits
 * of the default 11 pt font, 7 px each) is 7 w + 5 px wide (the padding libxlsxwriter and Excel
 * use for that font). Margins in inches: 0.5 left and right, 0.6 top and bottom, with room for
 * the footer. */
#define PRINT_PAPER_A4 9          /* the paperSize code of A4 (ECMA-376 Part 1, 18.3.1.63) */
#define PRINT_MARGIN_SIDE 0.5
#define PRINT_MARGIN_END 0.6
#define PRINT_MARGIN_FOOTER 0.3
#define PRINT_DPI 96.0
#define PRINT_PORTRAIT_PX ((210.0 / 25.4 - 2 * PRINT_MARGIN_SIDE) * PRINT_DPI)    /* 698 px */
#define PRINT_LANDSCAPE_PX ((297.0 / 25.4 - 2 * PRINT_MARGIN_SIDE) * PRINT_DPI)   /* 1027 px */
/* A sheet so wide that one landscape page would shrink it below PRINT_MIN_SCALE % (text of 11 pt
 * below 6.6 pt, hard to read on paper) is printed at that scale over several pages across
 * instead, with its leading text columns (population, model: what a row is about) repeated on
 * each page, up to PRINT_KEY_SHARE of the page's width. */
#define PRINT_MIN_SCALE 60
#define PRINT_KEY_COLUMNS 2
#define PRINT_KEY_SHARE 0.3

/* Colours (0xRRGGBB), chosen for contrast on white and for readers with red-green colour vision
 * deficiency (blue, orange, green, purple, brown, grey). */
static const lxw_color_t palette[] = {0x1F5F99, 0xD9731C, 0x3F8F3A, 0x7A4E9E, 0x8C5A3C, 0x5A5A5A};
#define N_PALETTE (sizeof palette / sizeof palette[0])
#define COLOUR_POINTS 0x262626
#define COLOUR_HEADER_FILL 0xDCE3EA
#define COLOUR_LEGEND_FONT 0x505050
#define COLOUR_WARN_FILL 0xF9D3C2
#define COLOUR_WARN_FONT 0x8A1C00
#define COLOUR_CAUTION_FILL 0xFFF1C4
#define COLOUR_CAUTION_FONT 0x7A3300

/* ---- Formats ---- */

enum {
    F_WARN = 1 << 0,     /* a flagged cell */
    F_HEADER = 1 << 1,   /* column header */
    F_LEGEND = 1 << 2,   /* legend row */
    F_INFO = 1 << 3,     /* an information note */
    F_CAUTION = 1 << 4,  /* a caution note */
    F_LABEL = 1 << 5,    /* summary item label */
    F_HEADING = 1 << 6,  /* summary section heading */
    F_WRAP = 1 << 7,     /* wrapped text, top-aligned */
    F_LEFT = 1 << 8,     /* left-aligned (summary values) */
    F_RIGHT = 1 << 9,    /* right-aligned (text among numbers: "n/a", "inf") */
};

/* Number formats, with a printf equivalent used to estimate the displayed width. */
typedef enum {
    NF_NONE, NF_GENERAL, NF_INT, NF_THOUSANDS, NF_FIX1, NF_FIX2, NF_FIX3, NF_FIX4, NF_SCI, NF_PERCENT, NF_SHARE, NF_PROB
} numfmt;

/* Percentages. A fraction that lies in [0, 1] (a share, a probability, a decline) is shown with one
 * decimal, and a value that one decimal would round to 0.0 % or 100.0 % says so instead of
 * pretending to a certainty: "< 0.1 %" below 0.001, "> 99.9 %" above 0.999. Conditions in square
 * brackets compare the stored value (ECMA-376 Part 1, 18.8.31 numFmts; at most two conditions and
 * one section for the rest); the "%" inside quotes is literal text and does not scale. This holds
 * for exactly 0 and 1 as well: these are mostly Monte Carlo frequencies, where 0 means that no
 * simulated future crossed, not that crossing is impossible; the Monte Carlo s.e. is written beside
 * them. A fraction with a sign (an annual change, -0.026 = 2.6 % a year down) cannot take these
 * conditions, since a negative value would match the first one, and gets the plain NF_PERCENT:
 * a column of the percent kind is a share when all its values lie in [0, 1] (column_formats).
 * A space before the sign, as in the program's sentences ("about 27 %"; the SI Brochure, 9th
 * edition 2019, section 5.4.7, recalled from memory). */
#define SHARE_FORMAT "[<0.001]\"< 0.1 %\";[>0.999]\"> 99.9 %\";0.0 %"
#define SHARE_LOW 0.001
#define SHARE_HIGH 0.999

static const char *const excel_format[] = {
    [NF_NONE] = NULL,        [NF_GENERAL] = NULL,     [NF_INT] = "0",       [NF_THOUSANDS] = "#,##0",
    [NF_FIX1] = "0.0",       [NF_FIX2] = "0.00",      [NF_FIX3] = "0.000",  [NF_FIX4] = "0.0000",
    [NF_SCI] = "0.00E+00",   [NF_PERCENT] = "0.0 %",  [NF_SHARE] = SHARE_FORMAT, [NF_PROB] = "0.000",
};

typedef struct {
    numfmt nf;
    unsigned flags;
    lxw_format *fmt;
} format_entry;

struct tf_sheet {
    tf_workbook *owner;
    lxw_worksheet *ws;
    char *name;
    size_t n_cols, n_rows;
    lxw_row_t top_row;         /* the header row */
    lxw_row_t first_data_row;  /* sheet row of table row 0 */
    double *widths;            /* column widths as set (0 = hidden) */
    double print_px;           /* printed width in pixels: columns, merged notes and charts */
    tf_col_kind *kinds;        /* column kinds */
    double **values;           /* a copy of each year/integer column (possible x axes), else NULL */
    size_t n_auto_charts;
};

struct tf_workbook {
    tf_atomic *file;
    lxw_workbook *lxw;
    char *tmpdir;
    tf_status failed;          /* TF_OK until a step left the workbook half-built */
    tf_sheet **sheets;
    size_t n_sheets, cap_sheets;
    format_entry *formats;
    size_t n_formats, cap_formats;
    char **kept;               /* strings handed to libxlsxwriter, owned here until the end */
    size_t n_kept, cap_kept;
    char *scratch;             /* cleaned copy of a text being written */
    size_t scratch_cap;
    char num_buf[64];
};

static tf_status nomem(tf_workbook *wb, tf_error *err)
{
    if (wb)
        wb->failed = TF_ERR_NOMEM;
    return tf_error_add(err, TF_ERR_NOMEM, wb ? tf_atomic_path(wb->file) : NULL, 0, 0, NULL, "out of memory");
}

/* Reports a libxlsxwriter failure; the workbook is then half-built and will not be written. */
static tf_status lxw_fail(tf_workbook *wb, lxw_error rc, const char *what, tf_error *err)
{
    wb->failed = rc == LXW_ERROR_MEMORY_MALLOC_FAILED ? TF_ERR_NOMEM : TF_ERR_IO;
    return tf_error_add(err, wb->failed, tf_atomic_path(wb->file), 0, 0, NULL, "cannot build workbook (%s): %s", what,
                        lxw_strerror(rc));
}

/* A copy of s owned by the workbook until it is freed, for strings libxlsxwriter may keep. */
static const char *keep(tf_workbook *wb, const char *s)
{
    if (!tf_buf_grow((void **)&wb->kept, &wb->cap_kept, wb->n_kept + 1, sizeof *wb->kept, 8))
        return NULL;
    char *d = strdup(s);
    if (d)
        wb->kept[wb->n_kept++] = d;
    return d;
}

static lxw_format *get_format(tf_workbook *wb, numfmt nf, unsigned flags)
{
    const char *want = excel_format[nf];
    for (size_t i = 0; i < wb->n_formats; i++) {
        const char *have = excel_format[wb->formats[i].nf];
        if (wb->formats[i].flags == flags && (have == want || (have && want && !strcmp(have, want))))
            return wb->formats[i].fmt;
    }
    if (!tf_buf_grow((void **)&wb->formats, &wb->cap_formats, wb->n_formats + 1, sizeof *wb->formats, 8))
        return NULL;
    lxw_format *f = workbook_add_format(wb->lxw);
    if (!f)
        return NULL;
    if (want)
        format_set_num_format(f, want);
    if (flags & (F_WRAP | F_LEGEND | F_INFO | F_CAUTION | F_HEADER)) {
        format_set_text_wrap(f);
        format_set_align(f, LXW_ALIGN_VERTICAL_TOP);
    }
    if (flags & F_LEFT)
        format_set_align(f, LXW_ALIGN_LEFT);
    if (flags & F_RIGHT)
        format_set_align(f, LXW_ALIGN_RIGHT);
    if (flags & (F_LEFT | F_LABEL))
        format_set_align(f, LXW_ALIGN_VERTICAL_TOP);
    if (flags & F_HEADER) {
        format_set_bold(f);
        format_set_bg_color(f, COLOUR_HEADER_FILL);
        format_set_bottom(f, LXW_BORDER_THIN);
    }
    if (flags & F_LEGEND) {
        format_set_italic(f);
        format_set_font_color(f, COLOUR_LEGEND_FONT);
        format_set_bottom(f, LXW_BORDER_THIN);
    }
    if (flags & F_INFO)
        format_set_italic(f);
    if (flags & F_CAUTION) {
        format_set_bold(f);
        format_set_font_color(f, COLOUR_CAUTION_FONT);
        format_set_bg_color(f, COLOUR_CAUTION_FILL);
    }
    if (flags & F_LABEL)
        format_set_bold(f);
    if (flags & F_HEADING) {
        format_set_bold(f);
        format_set_font_size(f, 12);
        format_set_bottom(f, LXW_BORDER_THIN);
    }
    if (flags & F_WARN) {
        format_set_bg_color(f, COLOUR_WARN_FILL);
        format_set_font_color(f, COLOUR_WARN_FONT);
        format_set_bold(f);
    }
    wb->formats[wb->n_formats++] = (format_entry){nf, flags, f};
    return f;
}

/* ---- Text ---- */

/* Characters XML 1.0 cannot carry (section 2.2): C0 controls other than tab, LF, CR. */
static int xml_bad(unsigned char c)
{
    return c < 0x20 && c != '\t' && c != '\n' && c != '\r';
}

/* Number of characters (code points) of a UTF-8 string, counting a bad byte as one. */
static size_t text_len(const char *s)
{
    size_t n = 0;
    for (const unsigned char *p = (const unsigned char *)s; *p; n++) {
        size_t k = tf_utf8_seq(p, SIZE_MAX);
        p += k ? k : 1;
    }
    return n;
}

/* s as libxlsxwriter can store it: invalid UTF-8 bytes become U+FFFD and XML-invalid controls a
 * space. Returns s itself when it is clean, else a copy in the workbook's scratch buffer (valid
 * until the next call); NULL when out of memory. */
static const char *clean_text(tf_workbook *wb, const char *s)
{
    const unsigned char *p = (const unsigned char *)s;
    int clean = 1;
    while (*p) {
        size_t k = tf_utf8_seq(p, SIZE_MAX);
        if (!k || (k == 1 && xml_bad(*p))) {
            clean = 0;
            break;
        }
        p += k;
    }
    if (clean)
        return s;
    size_t need = 3 * strlen(s) + 1;
    if (!tf_buf_grow((void **)&wb->scratch, &wb->scratch_cap, need, 1, 8))
        return NULL;
    char *o = wb->scratch;
    for (p = (const unsigned char *)s; *p;) {
        size_t k = tf_utf8_seq(p, SIZE_MAX);
        if (!k) {
            memcpy(o, "\xEF\xBF\xBD", 3);
            o += 3;
            p++;
        } else if (k == 1 && xml_bad(*p)) {
            *o++ = ' ';
            p++;
        } else {
            memcpy(o, p, k);
            o += k;
            p += k;
        }
    }
    *o = '\0';
    return wb->scratch;
}

void tf_workbook_clean_sheet_name(const char *name, char *buf, size_t size)
{
    assert(size >= TF_SHEET_NAME_BUF);
    size_t n = 0, chars = 0;
    const unsigned char *p = (const unsigned char *)(name ? name : "");
    /* Leading apostrophes and spaces are dropped (Excel refuses a leading apostrophe). */
    while (*p == '\'' || *p == ' ')
        p++;
    while (*p && chars < TF_SHEET_NAME_MAX) {
        size_t k = tf_utf8_seq(p, SIZE_MAX);
        if (!k) {
            buf[n++] = '_';
            p++;
        } else if (k == 1 && strchr("[]:*?/\\", *p)) {
            buf[n++] = '_';
            p++;
        } else if (k == 1 && *p < 0x20) {
            buf[n++] = ' ';
            p++;
        } else {
            memcpy(buf + n, p, k);
            n += k;
            p += k;
        }
        chars++;
    }
    while (n > 0 && (buf[n - 1] == '\'' || buf[n - 1] == ' '))
        n--;
    buf[n] = '\0';
    if (n == 0)
        snprintf(buf, size, "Sheet");
    else if (!strcasecmp(buf, "History"))
        strcat(buf, "_");
}

/* ---- Numbers ---- */

static numfmt kind_format(tf_col_kind kind)
{
    switch (kind) {
    case TF_COL_INTEGER:
    case TF_COL_YEAR:
        return NF_INT;
    case TF_COL_PERCENT:
        return NF_SHARE;   /* a signed column is told apart by its values (column_formats) */
    case TF_COL_PROBABILITY:
        return NF_PROB;
    case TF_COL_TEXT:
        return NF_GENERAL;
    default:
        return NF_GENERAL;   /* TF_COL_NUMBER is resolved by number_format */
    }
}

/* Digits for a general quantity from the largest magnitude shown, aiming at three to four
 * significant digits (common practice, no source): 1234 -> 1,234; 123.4; 12.34; 1.234; 0.1234;
 * very large or very small magnitudes in scientific notation. */
static numfmt number_format(double max_abs)
{
    if (!(max_abs > 0) || !isfinite(max_abs))
        return NF_GENERAL;
    if (max_abs >= 1e7 || max_abs < 1e-3)
        return NF_SCI;
    if (max_abs >= 1000)
        return NF_THOUSANDS;
    if (max_abs >= 100)
        return NF_FIX1;
    if (max_abs >= 10)
        return NF_FIX2;
    if (max_abs >= 1)
        return NF_FIX3;
    return NF_FIX4;
}

/* Approximate number of characters Excel shows for v in format nf. */
static size_t number_len(tf_workbook *wb, double v, numfmt nf)
{
    char *b = wb->num_buf;
    size_t sz = sizeof wb->num_buf;
    if (!isfinite(v))
        return 4;
    switch (nf) {
    case NF_INT:
        return (size_t)snprintf(b, sz, "%.0f", v);
    case NF_THOUSANDS: {
        size_t n = (size_t)snprintf(b, sz, "%.0f", v);
        return n + (n - (v < 0)) / 3;
    }
    case NF_FIX1:
        return (size_t)snprintf(b, sz, "%.1f", v);
    case NF_FIX2:
        return (size_t)snprintf(b, sz, "%.2f", v);
    case NF_FIX3:
    case NF_PROB:
        return (size_t)snprintf(b, sz, "%.3f", v);
    case NF_FIX4:
        return (size_t)snprintf(b, sz, "%.4f", v);
    case NF_SCI:
        return (size_t)snprintf(b, sz, "%.2E", v);
    case NF_PERCENT:
        return (size_t)snprintf(b, sz, "%.1f %%", v * 100);
    case NF_SHARE:
        return v < SHARE_LOW || v > SHARE_HIGH ? 7 : (size_t)snprintf(b, sz, "%.1f %%", v * 100);
    default:
        return (size_t)snprintf(b, sz, "%.10g", v);
    }
}

/* ---- Workbook ---- */

tf_workbook *tf_workbook_new(const char *path, const char *protect, tf_error *err)
{
    tf_workbook *wb = calloc(1, sizeof *wb);
    if (!wb) {
        nomem(NULL, err);
        return NULL;
    }
    if (tf_atomic_open(path, protect, &wb->file, err) != TF_OK)
        goto fail;
    /* libxlsxwriter opens the file by name at close; the stream is not needed. */
    if (tf_atomic_close_stream(wb->file, err) != TF_OK)
        goto fail;
    /* libxlsxwriter's own scratch files go beside the output: that directory is known to be
     * writable, while the system temporary directory may not be. */
    if (!(wb->tmpdir = tf_path_dir(path))) {
        nomem(NULL, err);
        goto fail;
    }
    lxw_workbook_options opt = {.constant_memory = LXW_FALSE, .tmpdir = wb->tmpdir, .use_zip64 = LXW_FALSE};
    wb->lxw = workbook_new_opt(tf_atomic_temp_path(wb->file), &opt);
    if (!wb->lxw) {
        nomem(NULL, err);
        goto fail;
    }
    return wb;
fail:
    tf_workbook_free(wb);
    return NULL;
}

static void free_sheet(tf_sheet *s)
{
    if (!s)
        return;
    if (s->values)
        for (size_t j = 0; j < s->n_cols; j++)
            free(s->values[j]);
    free(s->values);
    free(s->widths);
    free(s->kinds);
    free(s->name);
    free(s);
}

/* Frees everything but the atomic file. */
static void free_parts(tf_workbook *wb)
{
    if (wb->lxw)
        lxw_workbook_free(wb->lxw);
    for (size_t i = 0; i < wb->n_sheets; i++)
        free_sheet(wb->sheets[i]);
    for (size_t i = 0; i < wb->n_kept; i++)
        free(wb->kept[i]);
    free(wb->kept);
    free(wb->sheets);
    free(wb->formats);
    free(wb->scratch);
    free(wb->tmpdir);
    free(wb);
}

void tf_workbook_free(tf_workbook *wb)
{
    if (!wb)
        return;
    tf_atomic_abort(wb->file);
    free_parts(wb);
}

static tf_status print_setup(tf_workbook *wb, tf_sheet *s, tf_error *err);

tf_status tf_workbook_close(tf_workbook *wb, tf_error *err)
{
    if (wb->failed != TF_OK) {
        tf_status st = tf_error_add(err, wb->failed, tf_atomic_path(wb->file), 0, 0, NULL,
                                    "workbook not written: an earlier step failed");
        tf_workbook_free(wb);
        return st;
    }
    for (size_t i = 0; i < wb->n_sheets; i++)
        if (print_setup(wb, wb->sheets[i], err) != TF_OK) {
            tf_status st = wb->failed;
            tf_workbook_free(wb);
            return st;
        }
    /* workbook_close frees the libxlsxwriter workbook whatever it returns. */
    lxw_error rc = workbook_close(wb->lxw);
    wb->lxw = NULL;
    if (rc != LXW_NO_ERROR) {
        tf_status st = tf_error_add(err, rc == LXW_ERROR_MEMORY_MALLOC_FAILED ? TF_ERR_NOMEM : TF_ERR_IO,
                                    tf_atomic_path(wb->file), 0, 0, NULL, "cannot write workbook: %s", lxw_strerror(rc));
        tf_workbook_free(wb);
        return st;
    }
    tf_status st = tf_atomic_commit(wb->file, err);
    wb->file = NULL;
    free_parts(wb);
    return st;
}

/* ---- Sheets ---- */

static tf_status new_sheet(tf_workbook *wb, const tf_table *t, tf_sheet **out, tf_error *err)
{
    char base[TF_SHEET_NAME_BUF], name[TF_SHEET_NAME_BUF];
    tf_workbook_clean_sheet_name(tf_table_name(t), base, sizeof base);
    snprintf(name, sizeof name, "%s", base);
    /* Excel compares sheet names case-insensitively; ASCII folding covers the names this tool
     * makes, and libxlsxwriter's own check catches exact repeats of the rest. */
    for (unsigned k = 2;; k++) {
        int used = workbook_validate_sheet_name(wb->lxw, name) == LXW_ERROR_SHEETNAME_ALREADY_USED;
        for (size_t i = 0; i < wb->n_sheets && !used; i++)
            used = !strcasecmp(wb->sheets[i]->name, name);
        if (!used)
            break;
        char suffix[16];
        int sl = snprintf(suffix, sizeof suffix, " (%u)", k);
        /* Shorten the base, by whole characters, so that base + suffix fits 31 characters. */
        size_t keep_chars = TF_SHEET_NAME_MAX - (size_t)sl, bytes = 0, chars = 0;
        while (base[bytes] && chars < keep_chars) {
            size_t q = tf_utf8_seq((const unsigned char *)base + bytes, SIZE_MAX);
            bytes += q ? q : 1;
            chars++;
        }
        snprintf(name, sizeof name, "%.*s%s", (int)bytes, base, suffix);
    }
    if (!tf_buf_grow((void **)&wb->sheets, &wb->cap_sheets, wb->n_sheets + 1, sizeof *wb->sheets, 8))
        return nomem(wb, err);
    tf_sheet *s = calloc(1, sizeof *s);
    if (!s)
        return nomem(wb, err);
    s->owner = wb;
    s->name = strdup(name);
    s->n_cols = tf_table_n_columns(t);
    s->n_rows = tf_table_n_rows(t);
    s->kinds = calloc(s->n_cols ? s->n_cols : 1, sizeof *s->kinds);
    s->values = calloc(s->n_cols ? s->n_cols : 1, sizeof *s->values);
    s->widths = calloc(s->n_cols ? s->n_cols : 1, sizeof *s->widths);
    if (!s->name || !s->kinds || !s->values || !s->widths) {
        free_sheet(s);
        return nomem(wb, err);
    }
    for (size_t j = 0; j < s->n_cols; j++) {
        s->kinds[j] = tf_table_column_kind(t, j);
        if (s->kinds[j] != TF_COL_YEAR && s->kinds[j] != TF_COL_INTEGER)
            continue;
        s->values[j] = malloc((s->n_rows ? s->n_rows : 1) * sizeof **s->values);
        if (!s->values[j]) {
            free_sheet(s);
            return nomem(wb, err);
        }
        for (size_t i = 0; i < s->n_rows; i++)
            s->values[j][i] = tf_table_number(t, i, j);
    }
    lxw_error rc = workbook_validate_sheet_name(wb->lxw, s->name);
    if (rc != LXW_NO_ERROR) {
        tf_status st = tf_error_add(err, TF_ERR_INVALID, tf_atomic_path(wb->file), 0, 0, NULL,
                                    "cannot name a sheet '%s': %s", s->name, lxw_strerror(rc));
        free_sheet(s);
        return st;
    }
    s->ws = workbook_add_worksheet(wb->lxw, s->name);
    if (!s->ws) {
        free_sheet(s);
        return nomem(wb, err);
    }
    wb->sheets[wb->n_sheets++] = s;
    *out = s;
    return TF_OK;
}

/* Writes a cell's text, cleaned. */
static lxw_error put_text(tf_workbook *wb, lxw_worksheet *ws, lxw_row_t r, lxw_col_t c, const char *s, lxw_format *f)
{
    const char *x = clean_text(wb, s);
    if (!x)
        return LXW_ERROR_MEMORY_MALLOC_FAILED;
    return worksheet_write_string(ws, r, c, x, f);
}

/* Writes a number (blank for NAN, text for infinities, since the file format has no infinity). */
static lxw_error put_number(lxw_worksheet *ws, lxw_row_t r, lxw_col_t c, double v, lxw_format *f)
{
    if (isnan(v))
        return f ? worksheet_write_blank(ws, r, c, f) : LXW_NO_ERROR;
    if (isinf(v))
        return worksheet_write_string(ws, r, c, v > 0 ? "inf" : "-inf", f);
    return worksheet_write_number(ws, r, c, v, f);
}

static double row_height(double lines)
{
    double h = LINE_HEIGHT * (lines < 1 ? 1 : lines);
    return h > MAX_ROW_HEIGHT ? MAX_ROW_HEIGHT : h;
}

/* Lines a text of len characters takes when wrapped in width units. A width unit is one digit
 * of the default font, about 1.1 average letters of running text (common practice, no source);
 * word breaks waste a little of each line, hence the one unit taken off. */
static double wrapped_lines(size_t len, double width)
{
    double usable = width > 2 ? 1.1 * (width - 1) : 1;
    return ceil((double)len / usable);
}

/* Lines text takes in a wrapped cell of the given width, found by breaking it at spaces as a
 * spreadsheet does (a word longer than a line is cut); bold text is about a tenth wider. A width
 * unit holds about 1.15 letters of running text in the default font (measured on the first page
 * printed through LibreOffice with a Calibri-compatible font; common practice, no source); the
 * estimate errs towards more lines, since a row too low cuts its text off on paper. */
static double text_lines(const char *text, double width, bool bold)
{
    double cap = fmax(1, (width - 1) * 1.15 / (bold ? 1.1 : 1.0));
    double lines = 1, at = 0;   /* characters on the current line */
    for (const char *p = text; *p;) {
        if (*p == '\n') {
            lines++, at = 0, p++;
            continue;
        }
        size_t n = strcspn(p, " \n");
        char word[256];
        size_t k = n < sizeof word - 1 ? n : sizeof word - 1;
        memcpy(word, p, k);
        word[k] = '\0';
        double w = (double)text_len(word) + (double)(n - k);
        if (at > 0 && at + 1 + w > cap) {
            lines++;
            at = 0;
        }
        if (w > cap) {   /* cut across lines */
            lines += ceil(w / cap) - 1;
            w = fmod(w, cap);
        }
        at += (at > 0) + w;
        p += n;
        while (*p == ' ')
            p++;
    }
    return lines;
}

/* Printed width in pixels of a column of width w (0 = hidden). */
static double col_px(double w)
{
    return w > 0 ? floor(7 * w + 5 + 0.5) : 0;
}

/* Printed pixels from the left edge to the left of column c (columns beyond the table are of the
 * default width). */
static double left_px(const tf_sheet *s, size_t c)
{
    double px = 0;
    for (size_t j = 0; j < c; j++)
        px += col_px(j < s->n_cols ? s->widths[j] : DEFAULT_COL_WIDTH);
    return px;
}

/* Writes the notes from row 0 down, each merged across the table's width (and at least
 * NOTE_MIN_WIDTH). Returns the next free row in *row. */
static tf_status write_notes(tf_workbook *wb, tf_sheet *s, const tf_table *t, const double *widths, lxw_row_t *row,
                             tf_error *err)
{
    size_t n_notes = tf_table_n_notes(t);
    if (n_notes == 0)
        return TF_OK;
    double total = 0;
    size_t last = 0;
    for (size_t j = 0; j < s->n_cols; j++, last++)
        total += widths[j];
    while (total < NOTE_MIN_WIDTH) {
        total += DEFAULT_COL_WIDTH;
        last++;
    }
    last = last ? last - 1 : 0;
    s->print_px = fmax(s->print_px, left_px(s, last + 1));
    for (size_t i = 0; i < n_notes; i++, (*row)++) {
        unsigned flags = tf_table_note_kind(t, i) == TF_NOTE_CAUTION ? F_CAUTION : F_INFO;
        lxw_format *f = get_format(wb, NF_NONE, flags);
        const char *text = clean_text(wb, tf_table_note(t, i));
        if (!f || !text)
            return nomem(wb, err);
        lxw_error rc = last > 0 ? worksheet_merge_range(s->ws, *row, 0, *row, (lxw_col_t)last, text, f)
                                : worksheet_write_string(s->ws, *row, 0, text, f);
        if (rc == LXW_NO_ERROR)
            rc = worksheet_set_row(s->ws, *row, row_height(text_lines(text, total, flags & F_CAUTION)), NULL);
        if (rc != LXW_NO_ERROR)
            return lxw_fail(wb, rc, "note", err);
    }
    (*row)++;   /* a blank row between the notes and the table */
    return TF_OK;
}

/* True unless v is a number outside [0, 1]: a fraction with a sign or above one (an empty cell,
 * text or an infinity written as text does not decide). */
static bool is_share(double v)
{
    return !isfinite(v) || (v >= 0 && v <= 1);
}

/* The number format of each column: the kind's (for percentages NF_SHARE when every value of the
 * kind lies in [0, 1], else NF_PERCENT), or for general numbers one chosen from the
 * column's largest magnitude among cells that keep the column's kind. */
static void column_formats(const tf_table *t, numfmt *nf)
{
    size_t n_cols = tf_table_n_columns(t), n_rows = tf_table_n_rows(t);
    for (size_t j = 0; j < n_cols; j++) {
        tf_col_kind kind = tf_table_column_kind(t, j);
        if (kind == TF_COL_PERCENT) {
            bool share = true;
            for (size_t i = 0; i < n_rows && share; i++)
                if (tf_table_cell_kind(t, i, j) == TF_COL_PERCENT)
                    share = is_share(tf_table_number(t, i, j));
            nf[j] = share ? NF_SHARE : NF_PERCENT;
            continue;
        }
        if (kind != TF_COL_NUMBER) {
            nf[j] = kind_format(kind);
            continue;
        }
        double m = 0;
        for (size_t i = 0; i < n_rows; i++) {
            double v = fabs(tf_table_number(t, i, j));
            if (tf_table_cell_kind(t, i, j) == TF_COL_NUMBER && isfinite(v) && v > m)
                m = v;
        }
        nf[j] = number_format(m);
    }
}

/* The number format of one cell. A summary's values are unrelated quantities, so each general
 * number there gets digits for its own size. */
static numfmt cell_format(const tf_table *t, size_t i, size_t j, const numfmt *col_nf)
{
    tf_col_kind kind = tf_table_cell_kind(t, i, j);
    if (kind == tf_table_column_kind(t, j) && !((kind == TF_COL_NUMBER || kind == TF_COL_PERCENT) && tf_table_is_summary(t)))
        return col_nf[j];
    double v = tf_table_number(t, i, j);
    if (kind == TF_COL_PERCENT)
        return is_share(v) ? NF_SHARE : NF_PERCENT;
    return kind == TF_COL_NUMBER ? number_format(fabs(v)) : kind_format(kind);
}

/* Characters shown by the widest cell of column j (headings of a summary excluded: they may run
 * over the empty cells beside them). */
static double widest_cell(tf_workbook *wb, const tf_table *t, size_t j, const numfmt *col_nf)
{
    double w = 0;
    for (size_t i = 0, n = tf_table_n_rows(t); i < n; i++) {
        if (tf_table_is_heading(t, i))
            continue;
        const char *text = tf_table_text(t, i, j);
        double v = tf_table_number(t, i, j);
        double len = text ? (double)text_len(text) : isnan(v) ? 0 : (double)number_len(wb, v, cell_format(t, i, j, col_nf));
        if (len > w)
            w = len;
    }
    return w;
}

/* Writes the data rows from sheet row s->first_data_row on. col_flags (may be NULL) adds
 * format flags per column. */
static tf_status write_cells(tf_workbook *wb, tf_sheet *s, const tf_table *t, const numfmt *col_nf,
                             const unsigned *col_flags, tf_error *err)
{
    for (size_t i = 0; i < s->n_rows; i++) {
        lxw_row_t r = s->first_data_row + (lxw_row_t)i;
        bool heading = tf_table_is_heading(t, i);
        for (size_t j = 0; j < s->n_cols; j++) {
            unsigned flags = col_flags ? col_flags[j] : 0;
            if (tf_table_warning(t, i, j))
                flags |= F_WARN;
            if (heading)
                flags = F_HEADING | (flags & F_WARN);
            const char *text = tf_table_text(t, i, j);
            double v = tf_table_number(t, i, j);
            numfmt nf = text ? NF_NONE : cell_format(t, i, j, col_nf);
            /* Text standing in for a number lines up with the numbers of its column. */
            if ((text || isinf(v)) && s->kinds[j] != TF_COL_TEXT && !(flags & (F_LEFT | F_HEADING)))
                flags |= F_RIGHT;
            lxw_format *f = flags || (nf != NF_GENERAL && nf != NF_NONE) ? get_format(wb, nf, flags) : NULL;
            if (!f && (flags || (nf != NF_GENERAL && nf != NF_NONE)))
                return nomem(wb, err);
            lxw_error rc = text ? put_text(wb, s->ws, r, (lxw_col_t)j, text, f)
                                : put_number(s->ws, r, (lxw_col_t)j, v, f);
            if (rc != LXW_NO_ERROR)
                return lxw_fail(wb, rc, "cell", err);
        }
    }
    return TF_OK;
}

static double clamp(double x, double lo, double hi)
{
    return x < lo ? lo : x > hi ? hi : x;
}

static tf_status write_table(tf_workbook *wb, tf_sheet *s, const tf_table *t, tf_error *err)
{
    size_t n = s->n_cols ? s->n_cols : 1;
    numfmt *nf = malloc(n * sizeof *nf);
    double *width = calloc(n, sizeof *width);
    tf_status st = TF_OK;
    if (!nf || !width) {
        st = nomem(wb, err);
        goto done;
    }
    column_formats(t, nf);
    /* Widths come first: the notes are merged across them. */
    for (size_t j = 0; j < s->n_cols; j++) {
        double w = 1.1 * (double)text_len(tf_table_label(t, j)) + 1;   /* bold is wider */
        double legend = (double)text_len(tf_table_legend(t, j));
        w = fmax(w, fmin(legend, WIDTH_LEGEND_CAP));
        w = fmax(w, widest_cell(wb, t, j, nf));
        double cap = s->kinds[j] == TF_COL_TEXT ? WIDTH_MAX_TEXT : WIDTH_MAX_NUMBER;
        width[j] = clamp(w + 1.5, WIDTH_MIN, cap);
        s->widths[j] = width[j];
    }
    s->print_px = left_px(s, s->n_cols);
    lxw_row_t row = 0;
    if ((st = write_notes(wb, s, t, width, &row, err)) != TF_OK)
        goto done;
    s->top_row = row;
    /* A heading sits over its column's numbers: right-aligned over numbers, left over text. */
    lxw_format *hf = get_format(wb, NF_NONE, F_HEADER), *hrf = get_format(wb, NF_NONE, F_HEADER | F_RIGHT),
               *lf = get_format(wb, NF_NONE, F_LEGEND);
    if (!hf || !hrf || !lf) {
        st = nomem(wb, err);
        goto done;
    }
    double header_lines = 1, legend_lines = 1;
    for (size_t j = 0; j < s->n_cols; j++) {
        lxw_error rc = put_text(wb, s->ws, row, (lxw_col_t)j, tf_table_label(t, j), s->kinds[j] == TF_COL_TEXT ? hf : hrf);
        if (rc == LXW_NO_ERROR)
            rc = tf_table_legend(t, j)[0] ? put_text(wb, s->ws, row + 1, (lxw_col_t)j, tf_table_legend(t, j), lf)
                                          : worksheet_write_blank(s->ws, row + 1, (lxw_col_t)j, lf);
        if (rc == LXW_NO_ERROR)
            rc = worksheet_set_column(s->ws, (lxw_col_t)j, (lxw_col_t)j, width[j], NULL);
        if (rc != LXW_NO_ERROR) {
            st = lxw_fail(wb, rc, "header", err);
            goto done;
        }
        header_lines = fmax(header_lines, wrapped_lines(text_len(tf_table_label(t, j)) * 11 / 10, width[j]));
        legend_lines = fmax(legend_lines, wrapped_lines(text_len(tf_table_legend(t, j)), width[j]));
    }
    lxw_error rc = worksheet_set_row(s->ws, row, row_height(header_lines), NULL);
    if (rc == LXW_NO_ERROR)
        rc = worksheet_set_row(s->ws, row + 1, row_height(legend_lines), NULL);
    if (rc != LXW_NO_ERROR) {
        st = lxw_fail(wb, rc, "header", err);
        goto done;
    }
    s->first_data_row = row + 2;
    worksheet_freeze_panes(s->ws, s->first_data_row, 0);
    /* The buttons sit on the legend row, the last row above the data, so that sorting moves
     * the data rows only: a spreadsheet takes the first row of a filter range as its header. */
    if (tf_table_filter(t) && s->n_cols > 0 &&
        (rc = worksheet_autofilter(s->ws, row + 1, 0, (lxw_row_t)(row + 1 + tf_table_n_rows(t)),
                                   (lxw_col_t)(s->n_cols - 1))) != LXW_NO_ERROR) {
        st = lxw_fail(wb, rc, "filter", err);
        goto done;
    }
    st = write_cells(wb, s, t, nf, NULL, err);
done:
    free(nf);
    free(width);
    return st;
}

/* Characters of the longest label of a summary (headings excluded: they run over the empty cells
 * beside them). */
static double widest_label(const tf_table *t)
{
    double w = 0;
    for (size_t i = 0, n = tf_table_n_rows(t); i < n; i++)
        if (!tf_table_is_heading(t, i) && tf_table_text(t, i, 1))
            w = fmax(w, (double)text_len(tf_table_text(t, i, 1)));
    return w;
}

static tf_status write_summary(tf_workbook *wb, tf_sheet *s, const tf_table *t, tf_error *err)
{
    /* tf_table_new_summary makes exactly these four columns; the first, the population, is
     * hidden: the page's headings name the population, and the CSV twin keeps the column. */
    assert(s->n_cols == 4);
    static const unsigned col_flags[4] = {0, F_LABEL | F_WRAP, F_LEFT | F_WRAP, F_WRAP};
    numfmt nf[4];
    double width[4];
    column_formats(t, nf);
    /* The item column fits its labels (bold, so a tenth wider) up to its cap; the value column
     * its values up to its cap; the note column takes what the page has left, or less when the
     * notes are short. Longer text wraps. */
    double label = fmax(1.1 * (double)text_len(tf_table_label(t, 1)), 1.1 * widest_label(t)) + 2;
    /* The value column fits the values beside a note: a long text with no note spans the note
     * column too (below), so it needs no width of its own. */
    double widest_value = 0;
    for (size_t i = 0, n = tf_table_n_rows(t); i < n; i++) {
        const char *text = tf_table_text(t, i, 2);
        double v = tf_table_number(t, i, 2);
        if (tf_table_is_heading(t, i) || (text && tf_table_is_empty(t, i, 3)))
            continue;
        double len = text ? (double)text_len(text) : isnan(v) ? 0 : (double)number_len(wb, v, cell_format(t, i, 2, nf));
        widest_value = fmax(widest_value, len);
    }
    double val = fmax(1.1 * (double)text_len(tf_table_label(t, 2)), widest_value) + 2;
    width[2] = clamp(val, WIDTH_SUMMARY_MIN, WIDTH_SUMMARY_VALUE);
    /* The item column takes what the value column and the narrowest note column leave of the
     * portrait page, up to its cap. */
    width[1] = clamp(label, WIDTH_SUMMARY_MIN,
                     fmax(WIDTH_SUMMARY_MIN, fmin(WIDTH_SUMMARY_ITEM, WIDTH_SUMMARY_PAGE - width[2] - WIDTH_SUMMARY_NOTE_MIN)));
    double note = fmax(1.1 * (double)text_len(tf_table_label(t, 3)), widest_cell(wb, t, 3, nf)) + 2;
    width[3] = clamp(note, WIDTH_SUMMARY_MIN, fmax(WIDTH_SUMMARY_NOTE_MIN, WIDTH_SUMMARY_PAGE - width[1] - width[2]));
    width[0] = 0;   /* hidden: it takes no room from the notes */
    memcpy(s->widths, width, sizeof width);
    s->print_px = left_px(s, 4);
    lxw_row_t row = 0;
    tf_status st = write_notes(wb, s, t, width, &row, err);
    if (st != TF_OK)
        return st;
    s->top_row = row;
    lxw_format *hf = get_format(wb, NF_NONE, F_HEADER);
    if (!hf)
        return nomem(wb, err);
    for (size_t j = 0; j < 4; j++) {
        lxw_error rc = put_text(wb, s->ws, row, (lxw_col_t)j, tf_table_label(t, j), hf);
        lxw_row_col_options hide = {.hidden = 1};
        if (rc == LXW_NO_ERROR)
            rc = worksheet_set_column_opt(s->ws, (lxw_col_t)j, (lxw_col_t)j, width[j], NULL, j == 0 ? &hide : NULL);
        if (rc != LXW_NO_ERROR)
            return lxw_fail(wb, rc, "header", err);
    }
    s->first_data_row = row + 1;
    st = write_cells(wb, s, t, nf, col_flags, err);
    if (st != TF_OK)
        return st;
    /* A row is as high as its longest wrapped cell; headings get some air above them. */
    for (size_t i = 0; i < s->n_rows; i++) {
        double lines = 1;
        lxw_row_t r = s->first_data_row + (lxw_row_t)i;
        const char *value = tf_table_text(t, i, 2);
        bool spread = !tf_table_is_heading(t, i) && value && tf_table_is_empty(t, i, 3) &&
                      text_lines(value, width[2], false) > 1;
        if (spread) {
            unsigned flags = col_flags[2] | (tf_table_warning(t, i, 2) ? F_WARN : 0);
            lxw_format *f = get_format(wb, NF_NONE, flags);
            const char *x = f ? clean_text(wb, value) : NULL;
            if (!x)
                return nomem(wb, err);
            lxw_error rc = worksheet_merge_range(s->ws, r, 2, r, 3, x, f);
            if (rc != LXW_NO_ERROR)
                return lxw_fail(wb, rc, "merge", err);
        }
        for (size_t j = 1; j < 4 && !tf_table_is_heading(t, i); j++) {
            const char *text = tf_table_text(t, i, j);
            /* A number fits: its column is at least as wide as the widest one. Labels and
             * flagged cells are bold (F_LABEL, F_WARN), so a tenth wider. */
            if (text)
                lines = fmax(lines, text_lines(text, spread && j == 2 ? width[2] + width[3] : width[j],
                                               j == 1 || tf_table_warning(t, i, j)));
        }
        double h = tf_table_is_heading(t, i) ? HEADING_HEIGHT : row_height(lines);
        if (h > LINE_HEIGHT) {
            lxw_error rc = worksheet_set_row(s->ws, r, h, NULL);
            if (rc != LXW_NO_ERROR)
                return lxw_fail(wb, rc, "row", err);
        }
    }
    return TF_OK;
}

/* The print set-up of a sheet, once its columns, notes and charts are known (see PRINT_*). */
static tf_status print_setup(tf_workbook *wb, tf_sheet *s, tf_error *err)
{
    lxw_worksheet *ws = s->ws;
    worksheet_set_paper(ws, PRINT_PAPER_A4);
    worksheet_set_margins(ws, PRINT_MARGIN_SIDE, PRINT_MARGIN_SIDE, PRINT_MARGIN_END, PRINT_MARGIN_END);
    if (s->print_px > PRINT_PORTRAIT_PX)
        worksheet_set_landscape(ws);
    else
        worksheet_set_portrait(ws);
    lxw_error rc = LXW_NO_ERROR;
    if (PRINT_LANDSCAPE_PX * 100 >= PRINT_MIN_SCALE * s->print_px) {
        worksheet_fit_to_pages(ws, 1, 0);
    } else {
        worksheet_set_print_scale(ws, PRINT_MIN_SCALE);
        size_t keys = 0;
        double px = 0;
        while (keys < PRINT_KEY_COLUMNS && keys < s->n_cols && s->kinds[keys] == TF_COL_TEXT &&
               (px += col_px(s->widths[keys])) * PRINT_MIN_SCALE / 100 <= PRINT_KEY_SHARE * PRINT_LANDSCAPE_PX)
            keys++;
        if (keys > 0)
            rc = worksheet_repeat_columns(ws, 0, (lxw_col_t)(keys - 1));
    }
    if (rc == LXW_NO_ERROR && s->first_data_row > s->top_row)
        rc = worksheet_repeat_rows(ws, s->top_row, s->first_data_row - 1);
    /* The sheet's name left and the page count right, so a loose page says where it belongs. */
    lxw_header_footer_options fo = {.margin = PRINT_MARGIN_FOOTER};
    if (rc == LXW_NO_ERROR)
        rc = worksheet_set_footer_opt(ws, "&L&A&RPage &P of &N", &fo);
    return rc == LXW_NO_ERROR ? TF_OK : lxw_fail(wb, rc, "print set-up", err);
}

tf_status tf_workbook_add_table(tf_workbook *wb, const tf_table *t, tf_sheet **sheet, tf_error *err)
{
    if (wb->failed != TF_OK)
        return tf_error_add(err, wb->failed, tf_atomic_path(wb->file), 0, 0, NULL, "workbook already failed");
    if (tf_table_n_columns(t) == 0)
        return tf_error_add(err, TF_ERR_INVALID, tf_atomic_path(wb->file), 0, 0, NULL, "table '%s' has no columns",
                            tf_table_name(t));
    if (tf_table_n_rows(t) + 3 + tf_table_n_notes(t) > LXW_ROW_MAX || tf_table_n_columns(t) > LXW_COL_MAX)
        return tf_error_add(err, TF_ERR_RANGE, tf_atomic_path(wb->file), 0, 0, "write this table as CSV instead",
                            "table '%s' is too large for a sheet (%zu rows, %zu columns)", tf_table_name(t),
                            tf_table_n_rows(t), tf_table_n_columns(t));
    tf_sheet *s;
    tf_status st = new_sheet(wb, t, &s, err);
    if (st != TF_OK)
        return st;
    st = tf_table_is_summary(t) ? write_summary(wb, s, t, err) : write_table(wb, s, t, err);
    if (st == TF_OK && sheet)
        *sheet = s;
    return st;
}

const char *tf_sheet_name(const tf_sheet *s)
{
    return s->name;
}

/* ---- Charts ---- */

/* Parses an A1-style cell reference ("H3"); returns 0 when it is not one. */
static int parse_anchor(const char *a, lxw_row_t *row, lxw_col_t *col)
{
    unsigned long c = 0, r = 0;
    size_t i = 0;
    for (; a[i] >= 'A' && a[i] <= 'Z' && i < 3; i++)
        c = c * 26 + (unsigned long)(a[i] - 'A' + 1);
    if (i == 0 || a[i] < '1' || a[i] > '9')
        return 0;
    for (; a[i] >= '0' && a[i] <= '9'; i++) {
        r = r * 10 + (unsigned long)(a[i] - '0');
        if (r > LXW_ROW_MAX)
            return 0;
    }
    if (a[i] || c > LXW_COL_MAX)
        return 0;
    *row = (lxw_row_t)(r - 1);
    *col = (lxw_col_t)(c - 1);
    return 1;
}

static tf_status bad_spec(tf_workbook *wb, tf_error *err, const char *what)
{
    return tf_error_add(err, TF_ERR_INVALID, tf_atomic_path(wb->file), 0, 0, NULL, "chart: %s", what);
}

/* A kept copy of an optional chart string (NULL stays NULL). */
#define KEPT(wb, s) ((s) ? keep((wb), (s)) : NULL)

tf_status tf_workbook_add_chart(tf_workbook *wb, const tf_chart_spec *spec, tf_error *err)
{
    assert(spec);
    if (wb->failed != TF_OK)
        return tf_error_add(err, wb->failed, tf_atomic_path(wb->file), 0, 0, NULL, "workbook already failed");
    const tf_sheet *d = spec->data, *p = spec->place ? spec->place : spec->data;
    tf_sheet *place = NULL;   /* the workbook's own, writable handle on p */
    for (size_t i = 0; i < wb->n_sheets; i++)
        if (wb->sheets[i] == p)
            place = wb->sheets[i];
    if (!d || d->owner != wb || !place)
        return bad_spec(wb, err, "the data or placement sheet is missing or belongs to another workbook");
    if (spec->kind != TF_CHART_XY && spec->kind != TF_CHART_COLUMNS)
        return bad_spec(wb, err, "unknown chart kind");
    if (!spec->series || spec->n_series == 0)
        return bad_spec(wb, err, "no series to draw");
    if (spec->x_column >= d->n_cols)
        return bad_spec(wb, err, "the x column is not a column of the table");
    for (size_t k = 0; k < spec->n_series; k++)
        if (spec->series[k].column >= d->n_cols)
            return bad_spec(wb, err, "a series column is not a column of the table");
    if (spec->first_row >= d->n_rows)
        return bad_spec(wb, err, "no rows to draw");
    size_t n_rows = spec->n_rows ? spec->n_rows : d->n_rows - spec->first_row;
    if (n_rows > d->n_rows - spec->first_row)
        return bad_spec(wb, err, "rows beyond the end of the table");
    size_t stride = spec->series_stride;
    if (stride && (!spec->n_rows || (d->n_rows - spec->first_row - n_rows) / stride < spec->n_series - 1))
        return bad_spec(wb, err, "a series' block of rows lies beyond the end of the table");
    lxw_row_t at_row;
    lxw_col_t at_col;
    if (spec->anchor) {
        if (!parse_anchor(spec->anchor, &at_row, &at_col))
            return bad_spec(wb, err, "the anchor is not a cell name such as H3");
    } else {
        /* Below the table, after one blank row, from its first visible column (a chart anchored
         * in a hidden column would be drawn squeezed). */
        at_col = 0;
        while (at_col < p->n_cols && !(p->widths[at_col] > 0))
            at_col++;
        if (at_col == p->n_cols)
            at_col = 0;
        at_row = p->first_data_row + (lxw_row_t)p->n_rows + 1 + (lxw_row_t)(p->n_auto_charts * CHART_ROWS);
    }

    lxw_chart *ch = workbook_add_chart(wb->lxw, spec->kind == TF_CHART_XY ? LXW_CHART_SCATTER_STRAIGHT : LXW_CHART_COLUMN);
    if (!ch)
        return nomem(wb, err);
    lxw_row_t r0 = d->first_data_row + (lxw_row_t)spec->first_row, r1 = r0 + (lxw_row_t)n_rows - 1;
    lxw_col_t xc = (lxw_col_t)spec->x_column;
    size_t colour = 0;
    lxw_color_t last_line = palette[N_PALETTE - 1];
    bool unit_axis = true;   /* every series a percent or probability */
    tf_col_kind y_kind = d->kinds[spec->series[0].column];
    for (size_t k = 0; k < spec->n_series; k++) {
        const tf_chart_series *cs = &spec->series[k];
        lxw_chart_series *se = chart_add_series(ch, NULL, NULL);
        if (!se)
            return nomem(wb, err);
        lxw_row_t s0 = r0 + (lxw_row_t)(k * stride), s1 = r1 + (lxw_row_t)(k * stride);
        chart_series_set_categories(se, d->name, s0, xc, s1, xc);
        chart_series_set_values(se, d->name, s0, (lxw_col_t)cs->column, s1, (lxw_col_t)cs->column);
        if (cs->name) {
            const char *nm = keep(wb, cs->name);
            if (!nm)
                return nomem(wb, err);
            chart_series_set_name(se, nm);
        } else {
            chart_series_set_name_range(se, d->name, d->top_row, (lxw_col_t)cs->column);
        }
        tf_col_kind kind = d->kinds[cs->column];
        if (kind != TF_COL_PERCENT && kind != TF_COL_PROBABILITY)
            unit_axis = false;
        if (spec->kind == TF_CHART_COLUMNS) {
            lxw_chart_fill fill = {.color = palette[colour++ % N_PALETTE]};
            chart_series_set_fill(se, &fill);
            continue;
        }
        if (cs->look == TF_SERIES_POINTS) {
            lxw_chart_line none = {.none = LXW_TRUE};
            lxw_chart_fill mf = {.color = COLOUR_POINTS};
            lxw_chart_line ml = {.color = COLOUR_POINTS};
            chart_series_set_line(se, &none);
            chart_series_set_marker_type(se, LXW_CHART_MARKER_CIRCLE);
            chart_series_set_marker_size(se, 6);
            chart_series_set_marker_fill(se, &mf);
            chart_series_set_marker_line(se, &ml);
        } else if (cs->look == TF_SERIES_BAND) {
            lxw_chart_line band = {.color = last_line, .width = 1.25, .dash_type = LXW_CHART_LINE_DASH_DASH};
            chart_series_set_line(se, &band);
            chart_series_set_marker_type(se, LXW_CHART_MARKER_NONE);
        } else {
            last_line = palette[colour++ % N_PALETTE];
            lxw_chart_line line = {.color = last_line, .width = 2.25};
            chart_series_set_line(se, &line);
            chart_series_set_marker_type(se, LXW_CHART_MARKER_NONE);
        }
    }
    const char *title = KEPT(wb, spec->title), *xt = KEPT(wb, spec->x_title), *yt = KEPT(wb, spec->y_title);
    if ((spec->title && !title) || (spec->x_title && !xt) || (spec->y_title && !yt))
        return nomem(wb, err);
    if (title)
        chart_title_set_name(ch, title);
    else
        chart_title_off(ch);
    if (xt)
        chart_axis_set_name(ch->x_axis, xt);
    if (yt)
        chart_axis_set_name(ch->y_axis, yt);
    chart_legend_set_position(ch, LXW_CHART_LEGEND_BOTTOM);
    if (y_kind == TF_COL_PERCENT)
        chart_axis_set_num_format(ch->y_axis, "0%");
    else if (y_kind == TF_COL_PROBABILITY)
        chart_axis_set_num_format(ch->y_axis, "0.00");
    if (unit_axis)
        chart_axis_set_min(ch->y_axis, 0);
    if (spec->kind == TF_CHART_XY) {
        const double *xv = d->values[xc];
        if (xv) {   /* years or whole numbers: a tight axis without decimals */
            double lo = INFINITY, hi = -INFINITY;
            size_t end = spec->first_row + n_rows + (spec->n_series - 1) * stride;
            for (size_t i = spec->first_row; i < end; i++)
                if (isfinite(xv[i])) {
                    lo = fmin(lo, xv[i]);
                    hi = fmax(hi, xv[i]);
                }
            chart_axis_set_num_format(ch->x_axis, "0");
            if (lo < hi) {
                chart_axis_set_min(ch->x_axis, lo);
                chart_axis_set_max(ch->x_axis, hi);
            }
        }
    }
    lxw_chart_options opt = {.x_scale = CHART_X_SCALE, .y_scale = CHART_Y_SCALE};
    lxw_error rc = worksheet_insert_chart_opt(p->ws, at_row, at_col, ch, &opt);
    if (rc != LXW_NO_ERROR)
        return lxw_fail(wb, rc, "chart", err);
    if (!spec->anchor)
        place->n_auto_charts++;
    place->print_px = fmax(place->print_px, left_px(place, at_col) + CHART_PX);
    return TF_OK;
}

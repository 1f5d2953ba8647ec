/* Reading model files with inih: inih splits the text into sections and key = value pairs, this
 * file checks them and turns each parameter section into a prior specification. */
#include "model/model_file.h"

#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <ini.h>

#include "util/buf.h"

/* Model files are a few dozen lines; anything far larger is not one. */
#define MAX_FILE_BYTES (1 << 20)

/* One key = value pair as inih reported it, with the line it came from. */
typedef struct {
    char *section, *key, *value;
    long line;
} entry;

/* One parameter's prior as written, before any survey scaling. */
typedef struct {
    char *name;
    long line;         /* the section's first key */
    long prior_line;   /* the "prior =" key */
    tf_prior_kind kind;
    double par[TF_PRIOR_MAX_PAR];
    int survey;        /* par[0] (a lognormal's meanlog) is log(survey median) + shift */
    double shift;
    double lo, hi;
} spec;

struct tf_model_file {
    char *label, *name, *description;
    size_t n_params;
    spec *params;
};

/* What the inih callbacks share: the text being read (inih asks for it line by line through
 * read_line, which is how each pair learns its line number) and the pairs collected. */
typedef struct {
    const char *pos, *end;
    long line;
    const char *label;
    tf_error *err;
    entry *entries;
    size_t n_entries, cap_entries;
    int nomem;
} parse_state;

static char *copy_string(const char *s)
{
    size_t n = strlen(s) + 1;
    char *c = malloc(n);
    if (c)
        memcpy(c, s, n);
    return c;
}

/* fgets for the text in memory. A line that does not fit inih's buffer (num bytes with the
 * newline and NUL) is reported here and handed on as an empty line, so that inih's line count
 * stays the file's own. */
static char *read_line(char *str, int num, void *stream)
{
    parse_state *ps = stream;
    if (ps->pos >= ps->end || num < 2)
        return NULL;
    const char *nl = memchr(ps->pos, '\n', (size_t)(ps->end - ps->pos));
    size_t len = nl ? (size_t)(nl - ps->pos) + 1 : (size_t)(ps->end - ps->pos);
    ps->line++;
    if (len > (size_t)num - 1) {
        tf_error_add(ps->err, TF_ERR_PARSE, ps->label, ps->line, 0,
                     "continue a long description on indented lines below it",
                     "line is longer than %d characters", num - 2);
        str[0] = '\n';
        str[1] = '\0';
    } else {
        memcpy(str, ps->pos, len);
        str[len] = '\0';
    }
    ps->pos += len;
    return str;
}

static int on_pair(void *user, const char *section, const char *name, const char *value)
{
    parse_state *ps = user;
    if (ps->nomem)
        return 1;
    if (!tf_buf_grow((void **)&ps->entries, &ps->cap_entries, ps->n_entries + 1, sizeof *ps->entries, 32)) {
        ps->nomem = 1;
        return 1;
    }
    entry *e = &ps->entries[ps->n_entries];
    e->section = copy_string(section);
    e->key = copy_string(name);
    e->value = copy_string(value ? value : "");
    e->line = ps->line;
    if (!e->section || !e->key || !e->value) {
        free(e->section);
        free(e->key);
        free(e->value);
        ps->nomem = 1;
        return 1;
    }
    ps->n_entries++;
    /* Always "success": inih's return value then reports syntax errors only. */
    return 1;
}

void tf_model_file_free(tf_model_file *mf)
{
    if (!mf)
        return;
    if (mf->params)
        for (size_t i = 0; i < mf->n_params; i++)
            free(mf->params[i].name);
    free(mf->params);
    free(mf->label);
    free(mf->name);
    free(mf->description);
    free(mf);
}

/* A number: the whole value, not NaN; infinities only when allow_inf ("inf", "-inf"). */
static int parse_number(const char *s, int allow_inf, double *out)
{
    char *end;
    errno = 0;
    double v = strtod(s, &end);
    if (end == s || *end || isnan(v))
        return 0;
    if (isinf(v) && (!allow_inf || errno == ERANGE))
        return 0;
    *out = v;
    return 1;
}

/* "normal, lognormal, ..." */
static void list_kinds(char *buf, size_t size)
{
    size_t len = 0;
    buf[0] = '\0';
    for (int k = 0; k < TF_PRIOR_N_KINDS; k++) {
        int n = snprintf(buf + len, size - len, "%s%s", k ? ", " : "", tf_prior_kind_name((tf_prior_kind)k));
        if (n < 0 || (size_t)n >= size - len)
            return;
        len += (size_t)n;
    }
}

/* "mean, sd" for a family. */
static void list_pars(tf_prior_kind kind, char *buf, size_t size)
{
    size_t len = 0;
    buf[0] = '\0';
    for (size_t i = 0; i < tf_prior_n_par(kind); i++) {
        int n = snprintf(buf + len, size - len, "%s%s", i ? ", " : "", tf_prior_par_name(kind, i));
        if (n < 0 || (size_t)n >= size - len)
            return;
        len += (size_t)n;
    }
}

/* The family parameter index of key, or -1. */
static int par_index(tf_prior_kind kind, const char *key)
{
    for (size_t i = 0; i < tf_prior_n_par(kind); i++)
        if (!strcmp(tf_prior_par_name(kind, i), key))
            return (int)i;
    return -1;
}

/* A family (other than kind) that has a parameter called key, or -1. */
static int other_family_with(tf_prior_kind kind, const char *key)
{
    for (int k = 0; k < TF_PRIOR_N_KINDS; k++)
        if (k != (int)kind && par_index((tf_prior_kind)k, key) >= 0)
            return k;
    return -1;
}

static const char repeat_hint[] = "an indented line continues the key above it: remove the indentation, or the repeat";

/* Checks the pairs of section sec (entries e[0..n) all belong to it) and fills sp. */
static void read_param_section(const char *label, const entry *const *e, size_t n, spec *sp, tf_error *err)
{
    const char *sec = e[0]->section;
    sp->line = e[0]->line;
    sp->lo = -INFINITY;
    sp->hi = INFINITY;
    sp->shift = 0;
    int errors = 0;
#define FAIL(line, hint, ...) (errors++, tf_error_add(err, TF_ERR_PARSE, label, line, 0, hint, __VA_ARGS__))

    /* First the "prior" key: it decides which other keys belong here. */
    const entry *prior = NULL;
    for (size_t i = 0; i < n; i++)
        if (!strcmp(e[i]->key, "prior")) {
            if (prior)
                FAIL(e[i]->line, repeat_hint, "key 'prior' in [%s] is given again (first on line %ld)", sec,
                     prior->line);
            else
                prior = e[i];
        }
    char kinds[160];
    list_kinds(kinds, sizeof kinds);
    if (!prior) {
        char hint[200];
        snprintf(hint, sizeof hint, "add a line 'prior = NAME', NAME one of %s", kinds);
        FAIL(sp->line, hint, "section [%s] has no key 'prior'", sec);
        return;
    }
    int kind = tf_prior_kind_from_name(prior->value);
    if (kind < 0) {
        char hint[200];
        snprintf(hint, sizeof hint, "known distributions: %s", kinds);
        FAIL(prior->line, hint, "key 'prior' in [%s]: unknown distribution '%s'", sec, prior->value);
        return;
    }
    sp->kind = (tf_prior_kind)kind;
    sp->prior_line = prior->line;
    char pars[80];
    list_pars(sp->kind, pars, sizeof pars);

    long par_line[TF_PRIOR_MAX_PAR] = {0}, lo_line = 0, hi_line = 0, shift_line = 0;
    for (size_t i = 0; i < n; i++) {
        const entry *x = e[i];
        if (!strcmp(x->key, "prior"))
            continue;
        int pi = par_index(sp->kind, x->key);
        long *seen = pi >= 0                         ? &par_line[pi]
                     : !strcmp(x->key, "lower")        ? &lo_line
                     : !strcmp(x->key, "upper")        ? &hi_line
                     : !strcmp(x->key, "survey_shift") ? &shift_line
                                                       : NULL;
        if (!seen) {
            int other = other_family_with(sp->kind, x->key);
            char hint[200];
            snprintf(hint, sizeof hint, "a %s prior takes %s, and optionally lower and upper",
                     tf_prior_kind_name(sp->kind), pars);
            if (other >= 0)
                FAIL(x->line, hint, "key '%s' in [%s] belongs to a %s prior, not to a %s prior", x->key, sec,
                     tf_prior_kind_name((tf_prior_kind)other), tf_prior_kind_name(sp->kind));
            else
                FAIL(x->line, hint, "unknown key '%s' in [%s]", x->key, sec);
            continue;
        }
        if (*seen) {
            FAIL(x->line, repeat_hint, "key '%s' in [%s] is given again (first on line %ld)", x->key, sec, *seen);
            continue;
        }
        *seen = x->line;
        double v;
        if (pi == 0 && sp->kind == TF_PRIOR_LOGNORMAL && !strcmp(x->value, "survey")) {
            sp->survey = 1;
            continue;
        }
        if (!strcmp(x->value, "survey")) {
            FAIL(x->line, "only a lognormal prior's meanlog can be 'survey'",
                 "key '%s' in [%s] cannot be scaled by the survey", x->key, sec);
            continue;
        }
        int bound = seen == &lo_line || seen == &hi_line;
        if (!parse_number(x->value, bound, &v)) {
            FAIL(x->line, bound ? "write a number, or inf / -inf for no bound" : NULL,
                 "key '%s' in [%s]: expected a %snumber, got '%s'", x->key, sec, bound ? "" : "finite ", x->value);
            continue;
        }
        if (pi >= 0) {
            const char *rule = tf_prior_par_check(sp->kind, (size_t)pi, v);
            if (rule) {
                FAIL(x->line, NULL, "key '%s' in [%s] %s, got %s", x->key, sec, rule, x->value);
                continue;
            }
            sp->par[pi] = v;
        } else if (seen == &lo_line) {
            sp->lo = v;
        } else if (seen == &hi_line) {
            sp->hi = v;
        } else {
            sp->shift = v;
        }
    }
    if (shift_line && !sp->survey)
        FAIL(shift_line, "set 'meanlog = survey' or remove survey_shift",
             "key 'survey_shift' in [%s] is only allowed with 'meanlog = survey'", sec);
    for (size_t i = 0; i < tf_prior_n_par(sp->kind); i++)
        if (!par_line[i])
            FAIL(prior->line, NULL, "section [%s]: a %s prior needs key '%s' (it takes %s)", sec,
                 tf_prior_kind_name(sp->kind), tf_prior_par_name(sp->kind, i), pars);
    if (errors)
        return;
    if (sp->kind == TF_PRIOR_UNIFORM && !(sp->par[0] < sp->par[1]))
        FAIL(par_line[1], NULL, "key 'max' in [%s] (%g) must be above min (%g)", sec, sp->par[1], sp->par[0]);
    if (!(sp->lo < sp->hi))
        FAIL(hi_line ? hi_line : lo_line, NULL, "key '%s' in [%s]: lower (%g) must be below upper (%g)",
             hi_line ? "upper" : "lower", sec, sp->lo, sp->hi);
    if (errors || sp->survey)
        return;
    /* Everything a prior needs is known: build it once to catch truncations that keep nothing. */
    tf_error loc;
    tf_error_init(&loc);
    tf_prior p;
    if (tf_prior_init(&p, sp->kind, sp->par, sp->lo, sp->hi, &loc) != TF_OK)
        FAIL(prior->line, loc.items[0].hint[0] ? loc.items[0].hint : NULL, "section [%s]: %s", sec,
             loc.items[0].what);
#undef FAIL
}

/* Checks the [model] section's pairs. */
static tf_status read_model_section(tf_model_file *mf, const entry *const *e, size_t n, tf_error *err)
{
    long name_line = 0;
    for (size_t i = 0; i < n; i++) {
        const entry *x = e[i];
        if (!strcmp(x->key, "name")) {
            if (name_line) {
                tf_error_add(err, TF_ERR_PARSE, mf->label, x->line, 0, repeat_hint,
                             "key 'name' in [model] is given again (first on line %ld)", name_line);
                continue;
            }
            name_line = x->line;
            if (!x->value[0]) {
                tf_error_add(err, TF_ERR_PARSE, mf->label, x->line, 0, NULL, "key 'name' in [model] is empty");
                continue;
            }
            if (!(mf->name = copy_string(x->value)))
                return TF_ERR_NOMEM;
        } else if (!strcmp(x->key, "description")) {
            /* Continuation lines arrive as more pairs with this key: join them with spaces. */
            size_t old = mf->description ? strlen(mf->description) : 0;
            char *d = realloc(mf->description, old + strlen(x->value) + 2);
            if (!d)
                return TF_ERR_NOMEM;
            if (old)
                d[old++] = ' ';
            strcpy(d + old, x->value);
            mf->description = d;
        } else {
            tf_error_add(err, TF_ERR_PARSE, mf->label, x->line, 0, "[model] takes name and description",
                         "unknown key '%s' in [model]", x->key);
        }
    }
    if (!name_line)
        tf_error_add(err, TF_ERR_PARSE, mf->label, n ? e[0]->line : 1, 0, "add 'name = ...' under [model]",
                     "the file has no key 'name' in a [model] section");
    return TF_OK;
}

/* Orders err's items by line (file-level messages, line 0, last), keeping the order of equal
 * lines, so that a person reads them top to bottom. */
static void sort_by_line(tf_error *err)
{
    for (size_t i = 1; i < err->n_items; i++) {
        tf_error_item it = err->items[i];
        long key = it.line ? it.line : LONG_MAX;
        size_t j = i;
        while (j > 0 && (err->items[j - 1].line ? err->items[j - 1].line : LONG_MAX) > key) {
            err->items[j] = err->items[j - 1];
            j--;
        }
        err->items[j] = it;
    }
}

/* Copies loc's items into err; items without a file get file/line. */
static void relay(tf_error *err, const tf_error *loc, const char *file, long line)
{
    if (!err)
        return;
    for (size_t i = 0; i < loc->n_items; i++) {
        const tf_error_item *it = &loc->items[i];
        int own = it->file[0] != '\0';
        tf_error_add(err, it->status, own ? it->file : file, own ? it->line : line, own ? it->column : 0,
                     it->hint[0] ? it->hint : NULL, "%s", it->what);
    }
    err->n_dropped += loc->n_dropped;
}

/* Orders pairs by section name, then by their place in the file (the entries array is one block,
 * so address order is file order). */
static int by_section_then_place(const void *a, const void *b)
{
    const entry *x = *(const entry *const *)a, *y = *(const entry *const *)b;
    int c = strcmp(x->section, y->section);
    return c ? c : (x > y) - (x < y);
}

/* A section's pairs: a run of the sorted pointers, and the section's first pair in the file. */
typedef struct {
    size_t start, n;
    const entry *first;
} section_run;

static int by_first_place(const void *a, const void *b)
{
    const section_run *x = a, *y = b;
    return (x->first > y->first) - (x->first < y->first);
}

/* Turns the collected pairs into mf, adding every problem to loc. The pairs are grouped by
 * section by sorting (a file of many small sections would take quadratic time if each section
 * were collected by a scan of all pairs); sections are then handled in file order. */
static tf_status build(tf_model_file *mf, parse_state *ps, tf_error *loc)
{
    size_t n_alloc = ps->n_entries ? ps->n_entries : 1;
    const entry **sorted = malloc(n_alloc * sizeof *sorted);
    section_run *runs = malloc(n_alloc * sizeof *runs);
    mf->params = calloc(n_alloc, sizeof *mf->params);
    tf_status st = TF_OK;
    size_t n_runs = 0;
    if (!sorted || !runs || !mf->params) {
        st = TF_ERR_NOMEM;
        goto out;
    }
    for (size_t i = 0; i < ps->n_entries; i++)
        sorted[i] = &ps->entries[i];
    qsort(sorted, ps->n_entries, sizeof *sorted, by_section_then_place);
    for (size_t i = 0; i < ps->n_entries; i++) {
        if (i == 0 || strcmp(sorted[i]->section, sorted[i - 1]->section))
            runs[n_runs++] = (section_run){i, 0, sorted[i]};
        runs[n_runs - 1].n++;
    }
    qsort(runs, n_runs, sizeof *runs, by_first_place);
    int have_model = 0;
    for (size_t r = 0; r < n_runs; r++) {
        const entry *const *group = sorted + runs[r].start;
        size_t n = runs[r].n;
        const char *sec = group[0]->section;
        if (!sec[0]) {
            for (size_t k = 0; k < n; k++)
                tf_error_add(loc, TF_ERR_PARSE, mf->label, group[k]->line, 0,
                             "put it under a [model] or [parameter] header",
                             "key '%s' is outside any section", group[k]->key);
        } else if (!strcmp(sec, "model")) {
            have_model = 1;
            if ((st = read_model_section(mf, group, n, loc)) != TF_OK)
                goto out;
        } else {
            spec *sp = &mf->params[mf->n_params];
            if (!(sp->name = copy_string(sec))) {
                st = TF_ERR_NOMEM;
                goto out;
            }
            mf->n_params++;
            read_param_section(mf->label, group, n, sp, loc);
        }
    }
    if (!have_model)
        tf_error_add(loc, TF_ERR_PARSE, mf->label, 0, 0, "start the file with [model] and 'name = ...'",
                     "the file has no [model] section (key 'name' is required)");
out:
    free(sorted);
    free(runs);
    return st;
}

/* The text of line `line` (1-based) of text[0..len), blanks trimmed, cut to fit out. */
static void line_text(const char *text, size_t len, long line, char *out, size_t size)
{
    const char *p = text, *end = text + len;
    for (long l = 1; l < line && p < end; l++) {
        const char *nl = memchr(p, '\n', (size_t)(end - p));
        p = nl ? nl + 1 : end;
    }
    const char *e = memchr(p, '\n', (size_t)(end - p));
    if (!e)
        e = end;
    while (p < e && (*p == ' ' || *p == '\t'))
        p++;
    while (e > p && (e[-1] == ' ' || e[-1] == '\t' || e[-1] == '\r'))
        e--;
    size_t n = (size_t)(e - p) < size - 1 ? (size_t)(e - p) : size - 1;
    memcpy(out, p, n);
    out[n] = '\0';
}

static tf_status parse_text(const char *text, size_t len, const char *label, tf_model_file **out, tf_error *err)
{
    *out = NULL;
    tf_error loc;
    tf_error_init(&loc);
    parse_state ps = {.pos = text, .end = text + len, .label = label, .err = &loc};
    tf_model_file *mf = calloc(1, sizeof *mf);
    tf_status st = TF_OK;
    if (!mf || !(mf->label = copy_string(label))) {
        st = TF_ERR_NOMEM;
        goto done;
    }
    if (memchr(text, '\0', len)) {
        st = tf_error_add(&loc, TF_ERR_PARSE, label, 0, 0, NULL, "not a text file (it contains NUL bytes)");
        goto done;
    }
    int rc = ini_parse_stream(read_line, &ps, on_pair, &ps);
    if (ps.nomem || rc == -2) {
        st = TF_ERR_NOMEM;
        goto done;
    }
    if (rc > 0) {
        char bad[64];
        line_text(text, len, rc, bad, sizeof bad);
        tf_error_add(&loc, TF_ERR_PARSE, label, rc, 0, "comments start with ';' or '#'",
                     "line '%s' is neither 'key = value', a [section] header nor a comment", bad);
    }
    st = build(mf, &ps, &loc);
done:
    for (size_t i = 0; i < ps.n_entries; i++) {
        free(ps.entries[i].section);
        free(ps.entries[i].key);
        free(ps.entries[i].value);
    }
    free(ps.entries);
    if (st == TF_ERR_NOMEM)
        tf_error_add(&loc, TF_ERR_NOMEM, label, 0, 0, NULL, "out of memory reading the model file");
    sort_by_line(&loc);
    relay(err, &loc, label, 0);
    if (st == TF_OK && loc.n_items)
        st = TF_ERR_PARSE;
    if (st != TF_OK) {
        tf_model_file_free(mf);
        return st;
    }
    if (!mf->description && !(mf->description = copy_string(""))) {
        tf_model_file_free(mf);
        return tf_error_add(err, TF_ERR_NOMEM, label, 0, 0, NULL, "out of memory reading the model file");
    }
    *out = mf;
    return TF_OK;
}

tf_status tf_model_file_parse(const char *text, const char *label, tf_model_file **out, tf_error *err)
{
    return parse_text(text, strlen(text), label ? label : "(model text)", out, err);
}

tf_status tf_model_file_read(const char *path, tf_model_file **out, tf_error *err)
{
    *out = NULL;
    FILE *f = fopen(path, "rb");
    if (!f)
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL, "cannot open the model file: %s", strerror(errno));
    char *buf = malloc(MAX_FILE_BYTES + 1);
    if (!buf) {
        fclose(f);
        return tf_error_add(err, TF_ERR_NOMEM, path, 0, 0, NULL, "out of memory reading the model file");
    }
    size_t len = fread(buf, 1, MAX_FILE_BYTES + 1, f);
    int bad = ferror(f);
    fclose(f);
    tf_status st;
    if (bad)
        st = tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL, "cannot read the model file");
    else if (len > MAX_FILE_BYTES)
        st = tf_error_add(err, TF_ERR_PARSE, path, 0, 0, NULL, "file too large for a model file (over %d bytes)",
                          MAX_FILE_BYTES);
    else
        st = parse_text(buf, len, path, out, err);
    free(buf);
    return st;
}

const char *tf_model_file_label(const tf_model_file *mf) { return mf->label; }
const char *tf_model_file_name(const tf_model_file *mf) { return mf->name; }
const char *tf_model_file_description(const tf_model_file *mf) { return mf->description; }
size_t tf_model_file_n_params(const tf_model_file *mf) { return mf->n_params; }

const char *tf_model_file_param_at(const tf_model_file *mf, size_t i)
{
    return i < mf->n_params ? mf->params[i].name : NULL;
}

static const spec *find_spec(const tf_model_file *mf, const char *param)
{
    for (size_t i = 0; i < mf->n_params; i++)
        if (!strcmp(mf->params[i].name, param))
            return &mf->params[i];
    return NULL;
}

int tf_model_file_has(const tf_model_file *mf, const char *param) { return find_spec(mf, param) != NULL; }

int tf_model_file_needs_survey(const tf_model_file *mf)
{
    for (size_t i = 0; i < mf->n_params; i++)
        if (mf->params[i].survey)
            return 1;
    return 0;
}

tf_status tf_model_file_check_names(const tf_model_file *mf, const char *const *names, size_t n_names,
                                    tf_error *err)
{
    tf_status st = TF_OK;
    char known[256];
    size_t len = 0;
    known[0] = '\0';
    for (size_t j = 0; j < n_names; j++) {
        int n = snprintf(known + len, sizeof known - len, "%s%s", j ? ", " : "the model's parameters are ", names[j]);
        if (n < 0 || (size_t)n >= sizeof known - len)
            break;
        len += (size_t)n;
    }
    for (size_t i = 0; i < mf->n_params; i++) {
        int found = 0;
        for (size_t j = 0; j < n_names && !found; j++)
            found = !strcmp(mf->params[i].name, names[j]);
        if (!found)
            st = tf_error_add(err, TF_ERR_INVALID, mf->label, mf->params[i].line, 0, known,
                              "section [%s]: model '%s' has no parameter '%s'", mf->params[i].name,
                              mf->name ? mf->name : "?", mf->params[i].name);
    }
    return st;
}

tf_status tf_model_file_prior(const tf_model_file *mf, const char *param, double survey_median, tf_prior *out,
                              tf_error *err)
{
    const spec *sp = find_spec(mf, param);
    if (!sp)
        return tf_error_add(err, TF_ERR_INVALID, mf->label, 0, 0, "add a section for it",
                            "the model file has no prior for parameter '%s'", param);
    double par[TF_PRIOR_MAX_PAR];
    memcpy(par, sp->par, sizeof par);
    if (sp->survey) {
        if (!(isfinite(survey_median) && survey_median > 0)) {
            char hint[200];
            snprintf(hint, sizeof hint, "write a number for meanlog in [%s] instead of 'survey'", param);
            return tf_error_add(err, TF_ERR_INVALID, mf->label, sp->prior_line, 0, hint,
                                "the prior for %s is scaled by the survey (meanlog = survey), which needs a positive "
                                "median count per unit effort; got %g",
                                param, survey_median);
        }
        /* Log of the typical count per unit effort: the scale the state exp(x) lives on. */
        par[0] = log(survey_median) + sp->shift;
    }
    tf_error loc;
    tf_error_init(&loc);
    if (tf_prior_init(out, sp->kind, par, sp->lo, sp->hi, &loc) != TF_OK) {
        relay(err, &loc, mf->label, sp->prior_line);
        return tf_error_status(&loc);
    }
    return TF_OK;
}

tf_status tf_model_file_apply(const tf_model_file *mf, double survey_median, tf_prior_set *set, tf_error *err)
{
    tf_status st = TF_OK;
    for (size_t i = 0; i < tf_prior_set_n_params(set); i++) {
        const char *name = tf_prior_set_name(set, i);
        const spec *sp = find_spec(mf, name);
        if (!sp)
            continue;
        tf_prior p;
        tf_status s = tf_model_file_prior(mf, name, survey_median, &p, err);
        if (s == TF_OK) {
            tf_error loc;
            tf_error_init(&loc);
            s = tf_prior_set_assign(set, name, &p, &loc);
            relay(err, &loc, mf->label, sp->prior_line);
        }
        if (s != TF_OK && st == TF_OK)
            st = s;
    }
    return st;
}

/* Tries dir/file_name; 1 when readable. Sets *too_long when the path does not fit. */
static int try_dir(const char *dir, const char *file_name, char *path, size_t size, int *too_long)
{
    int n = snprintf(path, size, "%s/%s", dir, file_name);
    if (n < 0 || (size_t)n >= size) {
        *too_long = 1;
        return 0;
    }
    return access(path, R_OK) == 0;
}

tf_status tf_model_file_locate(const char *file_name, char *path, size_t size, tf_error *err)
{
    if (!file_name[0] || strchr(file_name, '/'))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "'%s' is not a plain model file name", file_name);
    char searched[1024] = "";
    size_t len = 0;
    int too_long = 0;
#define NOTE(...)                                                                                          \
    do {                                                                                                   \
        int n_ = snprintf(searched + len, sizeof searched - len, __VA_ARGS__);                             \
        if (n_ > 0 && (size_t)n_ < sizeof searched - len)                                                  \
            len += (size_t)n_;                                                                             \
    } while (0)

    const char *env = getenv(TF_MODELS_ENV);
    if (env && env[0]) {
        if (try_dir(env, file_name, path, size, &too_long))
            return TF_OK;
        NOTE("%s (from %s)", env, TF_MODELS_ENV);
    } else {
        NOTE("$%s (not set)", TF_MODELS_ENV);
    }
    char exe[4096];
    ssize_t n = readlink("/proc/self/exe", exe, sizeof exe - 1);
    if (n > 0) {
        exe[n] = '\0';
        char *slash = strrchr(exe, '/');
        if (slash) {
            *slash = '\0';
            char dir[4200];
            snprintf(dir, sizeof dir, "%s/models", exe);
            if (try_dir(dir, file_name, path, size, &too_long))
                return TF_OK;
            NOTE(", %s", dir);
            snprintf(dir, sizeof dir, "%s/../share/tallyfit/models", exe);
            if (try_dir(dir, file_name, path, size, &too_long))
                return TF_OK;
            NOTE(", %s", dir);
#ifdef TF_SOURCE_DIR
            /* A binary anywhere in the source tree it was built from (build/mpi/tallyfit) takes
             * the tree's model files; an installed one never does. */
            size_t k = strlen(TF_SOURCE_DIR);
            if (!strncmp(exe, TF_SOURCE_DIR, k) && (exe[k] == '/' || exe[k] == '\0')) {
                if (try_dir(TF_SOURCE_DIR "/models", file_name, path, size, &too_long))
                    return TF_OK;
                NOTE(", %s", TF_SOURCE_DIR "/models");
            }
#endif
        }
    }
#ifdef TF_MODEL_DIR
    if (try_dir(TF_MODEL_DIR, file_name, path, size, &too_long))
        return TF_OK;
    NOTE(", %s", TF_MODEL_DIR);
#endif
#undef NOTE
    if (size)
        path[0] = '\0';
    if (too_long)
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "the path of model file '%s' is too long", file_name);
    return tf_error_add(err, TF_ERR_IO, NULL, 0, 0,
                        "set " TF_MODELS_ENV " to the directory that holds the model files, or check the model name",
                        "model file '%s' not found; searched %s", file_name, searched);
}

tf_status tf_model_file_read_default(const char *model_name, tf_model_file **out, tf_error *err)
{
    *out = NULL;
    char file_name[256], path[4096];
    int n = snprintf(file_name, sizeof file_name, "%s.ini", model_name);
    if (n < 0 || (size_t)n >= sizeof file_name)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "model name too long");
    tf_status st = tf_model_file_locate(file_name, path, sizeof path, err);
    if (st != TF_OK)
        return st;
    return tf_model_file_read(path, out, err);
}

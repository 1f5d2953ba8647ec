/* Management scenarios projected with common random numbers; see scenario.h. */
#include "project/scenario.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

static const char syntax_hint[] =
    "write LABEL:key=value,... with keys remove=N or remove=P%, add=N, growth=D, capacity=F, from=YEAR";

struct tf_scenario_set {
    size_t n;
    tf_scenario sc[TF_SCENARIO_MAX];
    tf_projection *status_quo;
    tf_projection *proj[TF_SCENARIO_MAX];
};

/* ---- parsing ---------------------------------------------------------------------------------- */

static int plain_label_char(char c)
{
    return isalnum((unsigned char)c) || c == ' ' || c == '-' || c == '_' || c == '.';
}

/* A whole number or decimal in item[0..len); 0 when it does not read as one. */
static int read_number(const char *item, size_t len, double *v)
{
    char buf[64];
    if (len == 0 || len >= sizeof buf)
        return 0;
    memcpy(buf, item, len);
    buf[len] = '\0';
    char *end;
    errno = 0;
    *v = strtod(buf, &end);
    return *end == '\0' && errno == 0 && isfinite(*v) && !isspace((unsigned char)buf[0]);
}

static tf_status parse_pair(const char *label, const char *key, size_t klen, const char *val, size_t vlen,
                            tf_scenario *sc, unsigned *seen, tf_error *err)
{
    static const char *const keys[] = {"remove", "add", "growth", "capacity", "from"};
    size_t which = sizeof keys / sizeof *keys;
    for (size_t i = 0; i < sizeof keys / sizeof *keys; i++)
        if (strlen(keys[i]) == klen && !strncmp(keys[i], key, klen))
            which = i;
    if (which == sizeof keys / sizeof *keys)
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, syntax_hint, "scenario '%s': unknown key '%.*s'", label,
                            (int)klen, key);
    if (*seen & (1u << which))
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, NULL, "scenario '%s': key '%s' given twice", label,
                            keys[which]);
    *seen |= 1u << which;
    int percent = vlen > 0 && val[vlen - 1] == '%';
    double v;
    if (percent && which != 0)
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, "only remove= takes a percentage",
                            "scenario '%s': %s=%.*s is not a number", label, keys[which], (int)vlen, val);
    if (!read_number(val, vlen - (size_t)percent, &v))
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, syntax_hint, "scenario '%s': %s=%.*s is not a number",
                            label, keys[which], (int)vlen, val);
    switch (which) {
    case 0:
        if (percent ? !(v >= 0 && v < 100) : !(v >= 0))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL,
                                percent ? "scenario '%s': remove=%g%% must be at least 0 and below 100 %%"
                                        : "scenario '%s': remove=%g must be 0 or more animals a year",
                                label, v);
        sc->has_remove = 1;
        sc->remove_share = percent;
        sc->remove = percent ? v / 100.0 : v;
        break;
    case 1:
        if (!(v >= 0))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL,
                                "scenario '%s': add=%g must be 0 or more animals a year", label, v);
        sc->has_add = 1;
        sc->add = v;
        break;
    case 2:
        /* A change of e^5 = 150 times a year is no management scenario; the bound keeps the
         * log-abundance bounds of the projection meaningful. */
        if (!(fabs(v) <= 5))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, "growth=D is added to the yearly log growth, e.g. 0.05",
                                "scenario '%s': growth=%g is outside -5..5", label, v);
        sc->growth = v;
        break;
    case 3:
        if (!(v > 0 && v <= 1000))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, "capacity=F multiplies the carrying capacity, e.g. 1.2",
                                "scenario '%s': capacity=%g must be above 0 and at most 1000", label, v);
        sc->capacity = v;
        break;
    default:
        if (!(v == floor(v) && v >= 1700 && v <= 3200))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "scenario '%s': from=%g is not a calendar year",
                                label, v);
        sc->from_year = (int)v;
        break;
    }
    return TF_OK;
}

tf_status tf_scenario_parse(const char *text, tf_scenario *out, tf_error *err)
{
    memset(out, 0, sizeof *out);
    out->capacity = 1;
    out->from_year = TF_SCENARIO_FROM_START;
    const char *colon = strchr(text, ':');
    if (!colon)
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, syntax_hint, "scenario '%s' has no ':' after its label",
                            text);
    size_t llen = (size_t)(colon - text);
    if (llen == 0 || llen > TF_SCENARIO_LABEL_MAX)
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, syntax_hint, "scenario '%s': the label must have 1 to %d characters",
                            text, TF_SCENARIO_LABEL_MAX);
    for (size_t i = 0; i < llen; i++)
        if (!plain_label_char(text[i]))
            return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, "use letters, digits, spaces, '-', '_' or '.'",
                                "scenario label '%.*s' has the character '%c'", (int)llen, text, text[i]);
    memcpy(out->label, text, llen);
    out->label[llen] = '\0';
    if (out->label[0] == ' ' || out->label[llen - 1] == ' ')
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, NULL, "scenario label '%s' starts or ends with a space",
                            out->label);
    if (!strcasecmp(out->label, "status quo") || !strcasecmp(out->label, "status_quo"))
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, "the status quo is always projected; choose another label",
                            "scenario label '%s' is taken", out->label);
    const char *p = colon + 1;
    unsigned seen = 0;
    if (!*p)
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, syntax_hint, "scenario '%s' has no action", out->label);
    for (;;) {
        const char *end = strchr(p, ',');
        size_t len = end ? (size_t)(end - p) : strlen(p);
        const char *eq = memchr(p, '=', len);
        if (!eq || eq == p)
            return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, syntax_hint, "scenario '%s': '%.*s' is not key=value",
                                out->label, (int)len, p);
        size_t klen = (size_t)(eq - p);
        tf_status st = parse_pair(out->label, p, klen, eq + 1, len - klen - 1, out, &seen, err);
        if (st)
            return st;
        if (!end)
            break;
        p = end + 1;
    }
    return TF_OK;
}

tf_status tf_scenario_check_list(const tf_scenario *sc, size_t n, tf_error *err)
{
    if (n > TF_SCENARIO_MAX)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "more than %d scenarios", TF_SCENARIO_MAX);
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < i; j++)
            if (!strcasecmp(sc[i].label, sc[j].label))
                return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give each scenario its own label",
                                    "two scenarios are labelled '%s'", sc[i].label);
    return TF_OK;
}

tf_status tf_scenario_check_model(const tf_scenario *sc, size_t n, const tf_growth_type *g, tf_error *err)
{
    if (tf_project_capacity_index(g) >= 0)
        return TF_OK;
    for (size_t i = 0; i < n; i++)
        if (sc[i].capacity != 1)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0,
                                "capacity= needs growth models with a carrying capacity K (e.g. --model ricker,gompertz)",
                                "scenario '%s': the %s growth model has no carrying capacity to change", sc[i].label,
                                g->name);
    return TF_OK;
}

tf_status tf_scenario_check_years(const tf_scenario *sc, size_t n, int year0, size_t horizon, tf_error *err)
{
    for (size_t i = 0; i < n; i++) {
        int y = sc[i].from_year;
        if (y == TF_SCENARIO_FROM_START)
            continue;
        if (year0 == TF_PROJECTION_NO_YEAR)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "leave from= out: the action then starts at once",
                                "scenario '%s': from=%d needs a survey whose years are known", sc[i].label, y);
        if (y <= year0 || (long)y > (long)year0 + (long)horizon)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "the first projected year is the year after the last survey",
                                "scenario '%s': from=%d is outside the projected years %d..%ld", sc[i].label, y,
                                year0 + 1, (long)year0 + (long)horizon);
    }
    return TF_OK;
}

double tf_scenario_status_quo_animals(const tf_series *s, size_t *n_years)
{
    size_t ny = tf_series_n_years(s), n = ny < TF_SCENARIO_STATUS_QUO_YEARS ? ny : TF_SCENARIO_STATUS_QUO_YEARS;
    if (n_years)
        *n_years = 0;
    if (!tf_series_has_actions(s) || n == 0)
        return 0;
    double sum = 0;
    for (size_t i = ny - n; i < ny; i++)
        sum += tf_series_removed(s, i) - tf_series_added(s, i);
    if (n_years)
        *n_years = n;
    return sum / (double)n;
}

void tf_scenario_options(const tf_scenario *sc, const tf_project_options *base, int year0, double q,
                         tf_project_options *out)
{
    *out = *base;
    tf_project_action a = {0};
    if (sc->has_remove || sc->has_add) {
        if (sc->has_remove && sc->remove_share)
            a.share = sc->remove;
        else if (sc->has_remove)
            a.take = q * sc->remove;
        if (sc->has_add)
            a.take -= q * sc->add;
    } else {
        a.take = base->status_quo.take;
    }
    a.growth = sc->growth;
    a.capacity = sc->capacity;
    out->action = a;
    out->action_from = sc->from_year == TF_SCENARIO_FROM_START ? 1 : (size_t)(sc->from_year - year0);
    out->keep_runs = 1;
}

void tf_scenario_set_free(tf_scenario_set *s)
{
    if (!s)
        return;
    tf_projection_free(s->status_quo);
    for (size_t i = 0; i < s->n; i++)
        tf_projection_free(s->proj[i]);
    free(s);
}

tf_status tf_scenario_set_run(const tf_project_input *inputs, size_t n_inputs, const tf_project_options *base,
                              const tf_rng *stream, const tf_scenario *sc, size_t n, int year0, double q,
                              tf_scenario_set **out, tf_error *err)
{
    *out = NULL;
    if (n > TF_SCENARIO_MAX)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "more than %d scenarios", TF_SCENARIO_MAX);
    tf_scenario_set *s = calloc(1, sizeof *s);
    if (!s)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for the scenarios");
    tf_project_options po = *base;
    po.keep_runs = 1;
    /* Every projection starts from the same state of the stream: common random numbers. */
    tf_rng rng = *stream;
    tf_status st = tf_project_run(inputs, n_inputs, &po, &rng, &s->status_quo, err);
    for (size_t i = 0; st == TF_OK && i < n; i++) {
        s->sc[i] = sc[i];
        tf_scenario_options(&sc[i], base, year0, q, &po);
        rng = *stream;
        st = tf_project_run(inputs, n_inputs, &po, &rng, &s->proj[i], err);
        s->n = i + 1;
    }
    if (st != TF_OK) {
        tf_scenario_set_free(s);
        return st;
    }
    *out = s;
    return TF_OK;
}

size_t tf_scenario_set_n(const tf_scenario_set *s) { return s ? s->n : 0; }

const tf_scenario *tf_scenario_set_scenario(const tf_scenario_set *s, size_t i)
{
    return s && i < s->n ? &s->sc[i] : NULL;
}

const tf_projection *tf_scenario_set_projection(const tf_scenario_set *s, size_t i)
{
    return s && i < s->n ? s->proj[i] : NULL;
}

const tf_projection *tf_scenario_set_status_quo(const tf_scenario_set *s) { return s ? s->status_quo : NULL; }

tf_status tf_scenario_set_risk_difference(const tf_scenario_set *s, size_t i, size_t k, size_t t, double *diff,
                                          double *mcse, tf_error *err)
{
    if (i >= s->n) {
        *diff = *mcse = NAN;
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "no scenario %zu", i + 1);
    }
    return tf_projection_risk_difference(s->proj[i], s->status_quo, k, t, diff, mcse, err);
}

tf_status tf_scenario_set_decline_difference(const tf_scenario_set *s, size_t i, size_t w, size_t d, double *diff,
                                             double *mcse, tf_error *err)
{
    if (i >= s->n) {
        *diff = *mcse = NAN;
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "no scenario %zu", i + 1);
    }
    return tf_projection_decline_difference(s->proj[i], s->status_quo, w, d, diff, mcse, err);
}

char *tf_scenario_describe(const tf_scenario *sc, char *buf, size_t size)
{
    size_t used = 0;
    buf[0] = '\0';
#define PUT(...)                                                                   \
    do {                                                                           \
        if (used < size)                                                           \
            used += (size_t)snprintf(buf + used, size - used, __VA_ARGS__);        \
    } while (0)
    const char *sep = "";
    if (sc->has_remove) {
        if (sc->remove == 0)
            PUT("no removal");
        else if (sc->remove_share)
            PUT("remove %.4g %% a year", 100 * sc->remove);
        else
            PUT("remove %.10g animals a year", sc->remove);
        sep = ", ";
    }
    if (sc->has_add) {
        PUT("%srelease %.10g animals a year", sep, sc->add);
        sep = ", ";
    }
    if (!sc->has_remove && !sc->has_add) {
        PUT("removals and releases as in the status quo");
        sep = ", ";
    }
    if (sc->growth != 0) {
        PUT("%slog growth %+.4g a year", sep, sc->growth);
        sep = ", ";
    }
    if (sc->capacity != 1)
        PUT("%scarrying capacity x %.4g", sep, sc->capacity);
    if (sc->from_year != TF_SCENARIO_FROM_START)
        PUT(" from %d", sc->from_year);
#undef PUT
    return buf;
}

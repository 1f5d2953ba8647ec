/* The largest safe removal by bisection with common random numbers; see safe_removal.h. */
#include "project/safe_removal.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

tf_status tf_safe_removal_parse(const char *text, tf_safe_removal_ask *out, tf_error *err)
{
    static const char hint[] = "write RISK,YEARS[,count|share], e.g. 0.05,20 or 5%,20,share";
    memset(out, 0, sizeof *out);
    char buf[128];
    if (strlen(text) >= sizeof buf)
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, hint, "--safe-removal '%.20s...' is too long", text);
    strcpy(buf, text);
    char *parts[4] = {0};
    size_t n = 0;
    for (char *p = buf; n < 4;) {
        parts[n++] = p;
        char *c = strchr(p, ',');
        if (!c)
            break;
        *c = '\0';
        p = c + 1;
    }
    if (n < 2 || n > 3)
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, hint, "--safe-removal '%s' needs 2 or 3 parts", text);
    char *end;
    size_t len = strlen(parts[0]);
    int percent = len > 0 && parts[0][len - 1] == '%';
    if (percent)
        parts[0][len - 1] = '\0';
    errno = 0;
    double r = strtod(parts[0], &end);
    if (!parts[0][0] || *end || errno || !isfinite(r))
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, hint, "--safe-removal: the risk '%s%s' is not a number",
                            parts[0], percent ? "%" : "");
    if (percent)
        r /= 100.0;
    if (!(r > 0 && r < 1))
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, hint,
                            "--safe-removal: the risk %g must lie between 0 and 1 (or 0 %% and 100 %%)", r);
    errno = 0;
    long y = strtol(parts[1], &end, 10);
    if (!parts[1][0] || *end || errno)
        return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, hint, "--safe-removal: the years '%s' are not a whole number",
                            parts[1]);
    if (y < 1 || y > TF_PROJECT_MAX_HORIZON)
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, hint, "--safe-removal: %ld years is outside 1..%d", y,
                            TF_PROJECT_MAX_HORIZON);
    int share = 0;
    if (n == 3) {
        if (!strcasecmp(parts[2], "share"))
            share = 1;
        else if (strcasecmp(parts[2], "count"))
            return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, hint,
                                "--safe-removal: '%s' is neither count nor share", parts[2]);
    }
    out->risk = r;
    out->years = (size_t)y;
    out->share = share;
    return TF_OK;
}

/* What one bisection needs: the options of its projections, the stream to copy, the hits. */
typedef struct {
    const tf_project_input *inputs;
    size_t n_inputs;
    tf_project_options po;
    const tf_rng *stream;
    const tf_safe_removal_ask *ask;
    double q;
    unsigned char *hit;   /* n_runs: at or below the threshold within ask->years */
    size_t n_runs;
} search;

/* Projects with a removal of c (animals, or a share) and marks the runs that reach the threshold. */
static tf_status evaluate(search *s, double c, tf_error *err)
{
    tf_project_action a = {0};
    if (s->ask->share)
        a.share = c;
    else
        a.take = s->q * c;
    s->po.action = a;
    tf_rng rng = *s->stream;
    tf_projection *p;
    tf_status st = tf_project_run(s->inputs, s->n_inputs, &s->po, &rng, &p, err);
    if (st)
        return st;
    s->n_runs = tf_projection_n_runs(p);
    for (size_t i = 0; i < s->n_runs; i++)
        s->hit[i] = tf_projection_run_first_hit(p, 0, i) != TF_PROJECTION_NEVER;
    tf_projection_free(p);
    return TF_OK;
}

/* The share of the runs of batch b (every run when b == TF_SAFE_REMOVAL_BATCHES) that were hit. */
static double risk_of(const search *s, size_t b)
{
    size_t n = 0, hits = 0;
    for (size_t i = 0; i < s->n_runs; i++)
        if (b == TF_SAFE_REMOVAL_BATCHES || i % TF_SAFE_REMOVAL_BATCHES == b) {
            n++;
            hits += s->hit[i];
        }
    return n ? (double)hits / (double)n : NAN;
}

/* Bisection on [0, hi] for batch b: the largest removal found whose risk is at most ask->risk.
 * Bisection needs only that the risk crosses the target once in the bracket (Burden & Faires,
 * Numerical Analysis, the bisection method). */
static tf_status bisect(search *s, size_t b, double hi, double *value, int *exceeded, tf_error *err)
{
    tf_status st = evaluate(s, 0, err);
    if (st)
        return st;
    *exceeded = risk_of(s, b) > s->ask->risk;
    if (*exceeded) {
        *value = 0;
        return TF_OK;
    }
    double lo = 0;
    if ((st = evaluate(s, hi, err)))
        return st;
    if (risk_of(s, b) <= s->ask->risk) {
        *value = hi;
        return TF_OK;
    }
    for (int k = 0; k < TF_SAFE_REMOVAL_STEPS; k++) {
        double mid = 0.5 * (lo + hi);
        if ((st = evaluate(s, mid, err)))
            return st;
        if (risk_of(s, b) <= s->ask->risk)
            lo = mid;
        else
            hi = mid;
    }
    *value = lo;
    return TF_OK;
}

tf_status tf_safe_removal_find(const tf_project_input *inputs, size_t n_inputs, const tf_project_options *base,
                               const tf_rng *stream, const tf_safe_removal_ask *ask, double q, tf_safe_removal *out,
                               tf_error *err)
{
    memset(out, 0, sizeof *out);
    out->ask = *ask;
    out->value = out->mcse = out->risk_at_value = out->risk_at_value_mcse = out->risk_at_zero = NAN;
    if (base->n_thresholds < 1)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, "give a threshold with --threshold",
                            "the largest safe removal needs a quasi-extinction threshold");
    if (!(q > 0 && q <= 1) || !(ask->risk > 0 && ask->risk < 1) || ask->years < 1 ||
        ask->years > TF_PROJECT_MAX_HORIZON)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "safe removal: risk %g, %zu years, fraction %g",
                            ask->risk, ask->years, q);
    out->threshold = base->thresholds[0];
    search s = {.inputs = inputs, .n_inputs = n_inputs, .po = *base, .stream = stream, .ask = ask, .q = q};
    s.po.horizon = ask->years;
    s.po.n_thresholds = 1;
    s.po.n_declines = 0;
    s.po.decline_window = 0;
    s.po.keep_runs = 1;
    s.po.action_from = 1;
    s.po.status_quo = (tf_project_action){0};
    /* The bracket: a share just below 1, or a yearly removal of more animals than any run starts
     * with, which empties every run in the first step. */
    double hi;
    if (ask->share) {
        hi = 1 - 1e-9;
    } else {
        double xmax = base->start > 0 ? log(base->start) : -INFINITY;
        for (size_t i = 0; base->start <= 0 && i < n_inputs; i++)
            for (size_t d = 0; inputs[i].weight > 0 && inputs[i].x_last && d < inputs[i].n_draws; d++)
                xmax = inputs[i].x_last[d] > xmax ? inputs[i].x_last[d] : xmax;
        if (!isfinite(xmax))
            return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "safe removal: no start to bracket the removal");
        hi = exp(xmax) / q + 1;
    }
    /* The run count is the projection's own; a first projection learns it. */
    tf_project_options probe = s.po;
    size_t R = probe.n_runs;
    if (R == 0) {
        size_t total = 0;
        for (size_t i = 0; i < n_inputs; i++)
            total += inputs[i].weight > 0 ? inputs[i].n_draws : 0;
        R = total > TF_PROJECT_DEFAULT_RUNS ? total : TF_PROJECT_DEFAULT_RUNS;
    }
    if (!(s.hit = malloc(R + 1)))
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for the safe removal");
    tf_status st = TF_OK;
    int exceeded;
    for (size_t b = 0; b < TF_SAFE_REMOVAL_BATCHES && st == TF_OK; b++)
        st = bisect(&s, b, hi, &out->batch[b], &exceeded, err);
    if (st == TF_OK)
        st = bisect(&s, TF_SAFE_REMOVAL_BATCHES, hi, &out->value, &out->exceeded_at_zero, err);
    if (st == TF_OK && (st = evaluate(&s, 0, err)) == TF_OK)
        out->risk_at_zero = risk_of(&s, TF_SAFE_REMOVAL_BATCHES);
    if (st == TF_OK && (st = evaluate(&s, out->value, err)) == TF_OK) {
        out->n_runs = s.n_runs;
        out->risk_at_value = risk_of(&s, TF_SAFE_REMOVAL_BATCHES);
        out->risk_at_value_mcse = tf_project_se(out->risk_at_value, s.n_runs);
        double m = 0, v = 0;
        for (size_t b = 0; b < TF_SAFE_REMOVAL_BATCHES; b++)
            m += out->batch[b] / TF_SAFE_REMOVAL_BATCHES;
        for (size_t b = 0; b < TF_SAFE_REMOVAL_BATCHES; b++)
            v += (out->batch[b] - m) * (out->batch[b] - m) / (TF_SAFE_REMOVAL_BATCHES - 1);
        out->mcse = sqrt(v / TF_SAFE_REMOVAL_BATCHES);
    }
    free(s.hit);
    return st;
}

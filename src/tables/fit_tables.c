/* The tables of fitted models; see fit_tables.h. Every number is read from the fits. */
#include "tables/fit_tables.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "filter/filter.h"
#include "model/model.h"
#include "tables/columns.h"

#define TRY(call)                                                                                                      \
    do {                                                                                                               \
        if ((st = (call)) != TF_OK)                                                                                    \
            goto fail;                                                                                                 \
    } while (0)

int tf_tables_per_effort(const tf_series *s)
{
    /* The model's abundance is the expected count at effort 1 (obs models: mean = effort x N),
     * so any surveyed year at another effort makes it a count per unit of effort. */
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    for (size_t i = 0; i < tf_series_n_years(s); i++)
        if (!isnan(y[i]) && e[i] != 1)
            return 1;
    return 0;
}

const char *tf_tables_population(const tf_series *s, const char *fallback)
{
    const char *l = tf_series_label(s);
    return l[0] ? l : fallback;
}

const char *tf_tables_unit(const tf_series *s, char *buf, size_t size)
{
    const char *name = tf_series_effort_name(s);
    if (!tf_tables_per_effort(s))
        snprintf(buf, size, "%s", tf_series_counted_fraction(s) == 1 ? TF_UNIT_ANIMALS : TF_UNIT_COUNT);
    else if (!name[0])
        snprintf(buf, size, "%s", TF_UNIT_PER_EFFORT);
    else
        snprintf(buf, size, "%s%s", TF_UNIT_PER_NAMED, name);
    return buf;
}

const char *tf_tables_unit_title(const tf_series *s, char *buf, size_t size)
{
    tf_tables_unit(s, buf, size);
    /* Both fixed openings start with an ASCII lower-case letter. */
    if (buf[0] >= 'a' && buf[0] <= 'z')
        buf[0] = (char)(buf[0] - 'a' + 'A');
    return buf;
}

const char *tf_tables_per_what(const tf_series *s, char *buf, size_t size)
{
    const char *name = tf_series_effort_name(s);
    snprintf(buf, size, "per %s", name[0] ? name : "unit of effort");
    return buf;
}

/* A new table with `population` and, when with_model, `model` as its first columns. */
static tf_table *start(const char *name, int with_model, tf_error *err)
{
    tf_table *t = tf_table_new(name, err);
    if (!t)
        return NULL;
    if (tf_columns_add(t, TF_C_POPULATION, NULL, NULL, err) != TF_OK ||
        (with_model && tf_columns_add(t, TF_C_MODEL, NULL, NULL, err) != TF_OK)) {
        tf_table_free(t);
        return NULL;
    }
    return t;
}

/* A row with the population (and the model) filled in. */
static tf_status begin_row(tf_table *t, const tf_tables_context *c, const char *model, size_t *row, tf_error *err)
{
    tf_status st = tf_table_add_row(t, row, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, *row, 0, c->population, err);
    if (st == TF_OK && model)
        st = tf_table_set_text(t, *row, 1, model, err);
    return st;
}

static tf_status finish(tf_table *t, tf_status st, tf_table **out)
{
    if (st != TF_OK) {
        tf_table_free(t);
        *out = NULL;
        return st;
    }
    *out = t;
    return TF_OK;
}

/* ---- abundance ---- */

tf_status tf_tables_abundance(const tf_tables_context *c, const char *model, const tf_analysis_year *years, size_t n,
                              tf_table **out, tf_error *err)
{
    tf_status st = TF_OK;
    tf_table *t = start("abundance", 1, err);
    if (!t)
        return tf_error_status(err);
    const tf_series *s = c->series;
    int per_effort = tf_tables_per_effort(s);
    char unit[TF_TABLES_UNIT_SIZE], per[TF_TABLES_UNIT_SIZE];
    tf_tables_unit(s, unit, sizeof unit);
    tf_tables_per_what(s, per, sizeof per);
    char legend[320];
    size_t c_year, c_count, c_effort, c_rate, c_unit, c_med, c_q25, c_q75, c_lo, c_hi;
    TRY(tf_columns_add(t, TF_C_YEAR, NULL, &c_year, err));
    /* Whole counts shown as whole numbers; estimates (--estimates) as they are. */
    int whole = tf_series_first_fractional(s) == tf_series_n_years(s);
    TRY(tf_columns_add_as(t, TF_C_COUNT, NULL, whole ? TF_COL_INTEGER : TF_COL_NUMBER, &c_count, err));
    TRY(tf_columns_add(t, TF_C_EFFORT, NULL, &c_effort, err));
    snprintf(legend, sizeof legend, "count divided by effort (%s)", unit);
    TRY(tf_columns_add(t, TF_C_COUNT_PER_EFFORT, per_effort ? legend : NULL, &c_rate, err));
    TRY(tf_columns_add(t, TF_C_UNIT, NULL, &c_unit, err));
    snprintf(legend, sizeof legend, "estimated true abundance, posterior median (%s)", unit);
    TRY(tf_columns_add(t, TF_C_MEDIAN, legend, &c_med, err));
    TRY(tf_columns_add(t, TF_C_LOWER_50, NULL, &c_q25, err));
    TRY(tf_columns_add(t, TF_C_UPPER_50, NULL, &c_q75, err));
    TRY(tf_columns_add(t, TF_C_LOWER_95, NULL, &c_lo, err));
    TRY(tf_columns_add(t, TF_C_UPPER_95, NULL, &c_hi, err));
    for (size_t i = 0; i < n; i++) {
        const tf_analysis_year *y = &years[i];
        size_t row;
        TRY(begin_row(t, c, model, &row, err));
        int surveyed = !isnan(y->count);
        double v[] = {y->year, y->count, surveyed ? y->effort : NAN, surveyed ? y->count / y->effort : NAN,
                      y->median, y->q25, y->q75, y->q025, y->q975};
        size_t col[] = {c_year, c_count, c_effort, c_rate, c_med, c_q25, c_q75, c_lo, c_hi};
        for (size_t k = 0; k < sizeof v / sizeof v[0]; k++)
            tf_table_set_number(t, row, col[k], v[k]);
        TRY(tf_table_set_text(t, row, c_unit, unit, err));
    }
    if (per_effort)
        TRY(tf_table_add_notef(t, TF_NOTE_INFO, err,
                               "Effort is not 1 in every year, so the estimate is the abundance %s: the expected "
                               "count is effort times the estimate.",
                               per));
    if (tf_series_n_surveyed(s) < tf_series_n_years(s))
        TRY(tf_table_add_notef(t, TF_NOTE_INFO, err,
                               "%zu of the %zu years were not surveyed; the model fills them in, with wider intervals.",
                               tf_series_n_years(s) - tf_series_n_surveyed(s), tf_series_n_years(s)));
fail:
    return finish(t, st, out);
}

tf_status tf_tables_abundance_fit(const tf_tables_context *c, const tf_tables_model *m, tf_table **out, tf_error *err)
{
    size_t n = tf_fit_n_years(m->fit);
    tf_analysis_year *y = calloc(n ? n : 1, sizeof *y);
    if (!y)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    for (size_t i = 0; i < n; i++) {
        const tf_fit_year_summary *s = tf_fit_year(m->fit, i);
        y[i] = (tf_analysis_year){s->year, s->count, s->effort, s->median, s->q25, s->q75, s->q025, s->q975};
    }
    tf_status st = tf_tables_abundance(c, m->name, y, n, out, err);
    free(y);
    return st;
}

/* ---- change ---- */

tf_status tf_tables_change_of(const tf_tables_context *c, const tf_tables_model *models, size_t n,
                              const tf_fit_trend_summary *average, tf_table **out, tf_error *err)
{
    tf_status st = TF_OK;
    tf_table *t = start("change", 1, err);
    if (!t)
        return tf_error_status(err);
    size_t c_period, c_prob, c_y0, c_y1, c_mean, c_med, c_lo, c_hi, c_p, c_rhat, c_ess;
    TRY(tf_columns_add(t, TF_C_PERIOD, NULL, &c_period, err));
    TRY(tf_columns_add(t, TF_C_MODEL_PROB, "posterior probability of the model (1 for the average; blank: the models "
                                           "were not compared)", &c_prob, err));
    TRY(tf_columns_add(t, TF_C_FIRST_YEAR, "first year of the period", &c_y0, err));
    TRY(tf_columns_add(t, TF_C_LAST_YEAR, "last year of the period", &c_y1, err));
    /* Changes are fractions a year, shown as percentages. */
    TRY(tf_columns_add_as(t, TF_C_MEAN, "yearly change over the period from the least-squares slope of the "
                                        "log-abundance on the year, posterior mean (a fraction per year: -0.02 = 2 % "
                                        "decline a year)", TF_COL_PERCENT, &c_mean, err));
    TRY(tf_columns_add_as(t, TF_C_MEDIAN, "the same, posterior median", TF_COL_PERCENT, &c_med, err));
    TRY(tf_columns_add_as(t, TF_C_LOWER_95, NULL, TF_COL_PERCENT, &c_lo, err));
    TRY(tf_columns_add_as(t, TF_C_UPPER_95, NULL, TF_COL_PERCENT, &c_hi, err));
    TRY(tf_columns_add(t, TF_C_P_DECLINE, "posterior probability that the slope over the period is negative", &c_p,
                       err));
    TRY(tf_columns_add(t, TF_C_R_HAT, "R-hat of the change (blank for the average)", &c_rhat, err));
    TRY(tf_columns_add(t, TF_C_BULK_ESS, "bulk ESS of the change (blank for the average)", &c_ess, err));
    static const char *const periods[2] = {"whole", "recent"};
    for (size_t i = 0; i <= n; i++) {
        const tf_fit_trend_summary *tr[2];
        const char *name;
        double prob;
        if (i < n) {
            if (!models[i].fit)
                continue;
            tr[0] = tf_fit_trend(models[i].fit);
            tr[1] = tf_fit_trend_recent(models[i].fit);
            name = models[i].name;
            prob = models[i].probability;
        } else {
            if (!average)
                break;
            tr[0] = &average[0];
            tr[1] = &average[1];
            name = "average";
            prob = 1.0;
        }
        for (size_t k = 0; k < 2; k++) {
            const tf_fit_trend_summary *ch = tr[k];
            size_t row;
            TRY(begin_row(t, c, name, &row, err));
            TRY(tf_table_set_text(t, row, c_period, periods[k], err));
            double v[] = {prob,      ch->first_year, ch->last_year, ch->mean,  ch->median,
                          ch->q025, ch->q975,       ch->p_decline, ch->rhat, ch->ess_bulk};
            size_t col[] = {c_prob, c_y0, c_y1, c_mean, c_med, c_lo, c_hi, c_p, c_rhat, c_ess};
            for (size_t j = 0; j < sizeof v / sizeof v[0]; j++)
                tf_table_set_number(t, row, col[j], v[j]);
        }
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO,
                          "Trends: per draw exp(b) - 1, with b the least-squares slope of the latent log-abundance on "
                          "the year over every year of the period, the whole survey or its last years ('recent'); "
                          "'average' weights each model by its probability.",
                          err));
fail:
    return finish(t, st, out);
}

/* ---- parameters ---- */

tf_status tf_tables_parameters(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                               tf_error *err)
{
    tf_status st = TF_OK;
    tf_table *t = start("parameters", 1, err);
    if (!t)
        return tf_error_status(err);
    size_t c_par, c_mean, c_sd, c_lo, c_med, c_hi, c_rhat, c_bulk, c_tail, c_mcse, c_prior;
    TRY(tf_columns_add(t, TF_C_PARAMETER, NULL, &c_par, err));
    TRY(tf_columns_add(t, TF_C_MEAN, NULL, &c_mean, err));
    TRY(tf_columns_add(t, TF_C_SD, NULL, &c_sd, err));
    TRY(tf_columns_add(t, TF_C_LOWER_95, NULL, &c_lo, err));
    TRY(tf_columns_add(t, TF_C_MEDIAN, NULL, &c_med, err));
    TRY(tf_columns_add(t, TF_C_UPPER_95, NULL, &c_hi, err));
    TRY(tf_columns_add(t, TF_C_R_HAT, NULL, &c_rhat, err));
    TRY(tf_columns_add(t, TF_C_BULK_ESS, NULL, &c_bulk, err));
    TRY(tf_columns_add(t, TF_C_TAIL_ESS, NULL, &c_tail, err));
    TRY(tf_columns_add(t, TF_C_MEAN_MCSE, NULL, &c_mcse, err));
    TRY(tf_columns_add(t, TF_C_PRIOR, NULL, &c_prior, err));
    for (size_t i = 0; i < n; i++) {
        const tf_tables_model *m = &models[i];
        if (!m->fit)
            continue;
        for (size_t j = 0; j < tf_fit_n_params(m->fit); j++) {
            const tf_fit_param_summary *ps = tf_fit_param(m->fit, j);
            size_t row;
            TRY(begin_row(t, c, m->name, &row, err));
            TRY(tf_table_set_text(t, row, c_par, tf_fit_param_name(m->fit, j), err));
            double v[] = {ps->mean, ps->sd, ps->q025, ps->q50, ps->q975, ps->rhat, ps->ess_bulk, ps->ess_tail,
                          ps->mcse_mean};
            size_t col[] = {c_mean, c_sd, c_lo, c_med, c_hi, c_rhat, c_bulk, c_tail, c_mcse};
            for (size_t k = 0; k < sizeof v / sizeof v[0]; k++)
                tf_table_set_number(t, row, col[k], v[k]);
            if (m->priors) {
                char prior[200];
                tf_prior_describe(tf_prior_set_prior(m->priors, j), prior, sizeof prior);
                TRY(tf_table_set_text(t, row, c_prior, prior, err));
            }
            if (!(ps->rhat <= TF_FIT_RHAT_MAX))
                TRY(tf_table_set_warning(t, row, c_rhat, err));
            if (!(ps->ess_bulk >= TF_FIT_ESS_MIN))
                TRY(tf_table_set_warning(t, row, c_bulk, err));
            if (!(ps->ess_tail >= TF_FIT_ESS_MIN))
                TRY(tf_table_set_warning(t, row, c_tail, err));
        }
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO,
                          "Posterior summaries of each model's parameters on their natural scale; flagged cells fail "
                          "the convergence checks of Vehtari et al. (2021).",
                          err));
fail:
    return finish(t, st, out);
}

/* ---- draws ---- */

/* Every parameter name the program knows, in the joined models' order (drift parameters, sigma,
 * counting error), each once. Returns their number. */
static size_t known_parameters(const char **names, size_t max)
{
    size_t n = 0;
    const char *all[4 * TF_MAX_PARAMS + 1];
    size_t na = 0;
    for (size_t g = 0; g < tf_model_n_growth(); g++)
        for (size_t k = 0; k < tf_model_growth_at(g)->n_params && na < sizeof all / sizeof all[0] - 1; k++)
            all[na++] = tf_model_growth_at(g)->param_names[k];
    all[na++] = "sigma";
    for (size_t o = 0; o < tf_model_n_obs(); o++)
        for (size_t k = 0; k < tf_model_obs_at(o)->n_params && na < sizeof all / sizeof all[0]; k++)
            all[na++] = tf_model_obs_at(o)->param_names[k];
    for (size_t k = 0; k < na; k++) {
        size_t j = 0;
        while (j < n && strcmp(names[j], all[k]))
            j++;
        if (j == n && n < max)
            names[n++] = all[k];
    }
    return n;
}

tf_status tf_tables_draws(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                          tf_error *err)
{
    tf_status st = TF_OK;
    tf_table *t = start("draws", 1, err);
    if (!t)
        return tf_error_status(err);
    const char *names[4 * TF_MAX_PARAMS + 1];
    size_t cols[sizeof names / sizeof names[0]];
    size_t n_names = known_parameters(names, sizeof names / sizeof names[0]);
    size_t c_chain, c_draw, c_ll, c_last;
    TRY(tf_columns_add(t, TF_C_CHAIN, NULL, &c_chain, err));
    TRY(tf_columns_add(t, TF_C_DRAW, NULL, &c_draw, err));
    TRY(tf_columns_add(t, TF_C_LOG_LIKELIHOOD, NULL, &c_ll, err));
    for (size_t k = 0; k < n_names; k++) {
        char name[32], legend[96];
        tf_columns_parameter_name(names[k], name, sizeof name);
        snprintf(legend, sizeof legend, "parameter %s (blank: not a parameter of the model)", names[k]);
        TRY(tf_columns_add_other(t, name, names[k], legend, TF_COL_NUMBER, &cols[k], err));
    }
    TRY(tf_columns_add(t, TF_C_LAST_ABUNDANCE, NULL, &c_last, err));
    for (size_t i = 0; i < n; i++) {
        const tf_fit *f = models[i].fit;
        if (!f)
            continue;
        size_t np = tf_fit_n_params(f), ny = tf_fit_n_years(f);
        size_t map[TF_MAX_PARAMS];
        for (size_t j = 0; j < np; j++) {
            size_t k = 0;
            while (k < n_names && strcmp(names[k], tf_fit_param_name(f, j)))
                k++;
            map[j] = k;
        }
        for (size_t ch = 0; ch < tf_fit_n_chains(f); ch++)
            for (size_t it = 0; it < tf_fit_n_iter(f); it++) {
                size_t row;
                TRY(begin_row(t, c, models[i].name, &row, err));
                tf_table_set_number(t, row, c_chain, (double)(ch + 1));
                tf_table_set_number(t, row, c_draw, (double)(it + 1));
                tf_table_set_number(t, row, c_ll, tf_fit_loglik(f, ch, it));
                const double *th = tf_fit_draw(f, ch, it);
                for (size_t j = 0; j < np; j++)
                    if (map[j] < n_names)
                        tf_table_set_number(t, row, cols[map[j]], th[j]);
                tf_table_set_number(t, row, c_last, exp(tf_fit_path(f, ch, it)[ny - 1]));
            }
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO, "Every kept posterior draw of every model, chain by chain.", err));
fail:
    return finish(t, st, out);
}

/* ---- latent paths per draw and year ---- */

tf_status tf_tables_paths(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                          tf_error *err)
{
    tf_status st = TF_OK;
    tf_table *t = start("paths", 1, err);
    if (!t)
        return tf_error_status(err);
    char unit[TF_TABLES_UNIT_SIZE], legend[320];
    tf_tables_unit(c->series, unit, sizeof unit);
    snprintf(legend, sizeof legend, "latent abundance of the year held with the draw (%s)", unit);
    size_t c_chain, c_draw, c_year, c_unit, c_abundance;
    TRY(tf_columns_add(t, TF_C_CHAIN, NULL, &c_chain, err));
    TRY(tf_columns_add(t, TF_C_DRAW, NULL, &c_draw, err));
    TRY(tf_columns_add(t, TF_C_YEAR, NULL, &c_year, err));
    TRY(tf_columns_add(t, TF_C_UNIT, NULL, &c_unit, err));
    TRY(tf_columns_add(t, TF_C_ABUNDANCE, legend, &c_abundance, err));
    int y0 = tf_series_first_year(c->series);
    for (size_t i = 0; i < n; i++) {
        const tf_fit *f = models[i].fit;
        if (!f)
            continue;
        size_t ny = tf_fit_n_years(f);
        for (size_t ch = 0; ch < tf_fit_n_chains(f); ch++)
            for (size_t it = 0; it < tf_fit_n_iter(f); it++) {
                const double *x = tf_fit_path(f, ch, it);
                for (size_t y = 0; y < ny; y++) {
                    size_t row;
                    TRY(begin_row(t, c, models[i].name, &row, err));
                    tf_table_set_number(t, row, c_chain, (double)(ch + 1));
                    tf_table_set_number(t, row, c_draw, (double)(it + 1));
                    tf_table_set_number(t, row, c_year, (double)(y0 + (int)y));
                    TRY(tf_table_set_text(t, row, c_unit, unit, err));
                    tf_table_set_number(t, row, c_abundance, exp(x[y]));
                }
            }
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO,
                          "The latent abundance of every year held with every kept posterior draw, chain by chain.",
                          err));
fail:
    return finish(t, st, out);
}

/* ---- diagnostics per model ---- */

tf_status tf_tables_diagnostics(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                                tf_error *err)
{
    tf_status st = TF_OK;
    tf_table *t = start("diagnostics", 1, err);
    if (!t)
        return tf_error_status(err);
    size_t c_chains, c_warm, c_run, c_kept, c_thin, c_part, c_llsd, c_acc, c_accmin, c_inv, c_rhat, c_bulk, c_tail,
        c_k, c_sec, c_checks;
    TRY(tf_columns_add(t, TF_C_CHAINS, NULL, &c_chains, err));
    TRY(tf_columns_add(t, TF_C_WARMUP, NULL, &c_warm, err));
    TRY(tf_columns_add(t, TF_C_ITERATIONS, NULL, &c_run, err));
    TRY(tf_columns_add(t, TF_C_KEPT_DRAWS, NULL, &c_kept, err));
    TRY(tf_columns_add(t, TF_C_THIN, NULL, &c_thin, err));
    TRY(tf_columns_add(t, TF_C_PARTICLES, NULL, &c_part, err));
    TRY(tf_columns_add(t, TF_C_LOGLIK_SD, NULL, &c_llsd, err));
    TRY(tf_columns_add(t, TF_C_ACCEPTANCE, "share of proposals accepted, mean over the chains", &c_acc, err));
    TRY(tf_columns_add(t, TF_C_MIN_ACCEPTANCE, NULL, &c_accmin, err));
    TRY(tf_columns_add(t, TF_C_INVALID, NULL, &c_inv, err));
    TRY(tf_columns_add(t, TF_C_MAX_R_HAT, NULL, &c_rhat, err));
    TRY(tf_columns_add(t, TF_C_MIN_BULK_ESS, NULL, &c_bulk, err));
    TRY(tf_columns_add(t, TF_C_MIN_TAIL_ESS, NULL, &c_tail, err));
    TRY(tf_columns_add(t, TF_C_PARETO_K, "importance-weight diagnostic of the marginal likelihood (above 0.7: "
                                         "unreliable; blank: none estimated)", &c_k, err));
    TRY(tf_columns_add(t, TF_C_SECONDS, NULL, &c_sec, err));
    TRY(tf_columns_add(t, TF_C_CHECKS, NULL, &c_checks, err));
    for (size_t i = 0; i < n; i++) {
        const tf_tables_model *m = &models[i];
        if (m->excluded)
            continue;
        size_t row;
        TRY(begin_row(t, c, m->name, &row, err));
        if (!m->fit) {
            TRY(tf_table_set_text(t, row, c_checks, m->note && m->note[0] ? m->note : "the fit failed", err));
            TRY(tf_table_set_warning(t, row, TF_TABLE_WHOLE_ROW, err));
            continue;
        }
        const tf_fit *f = m->fit;
        const tf_fit_settings *fs = tf_fit_settings_of(f);
        /* One health summary with one NaN rule (sampler/fit.h): an undiagnosable parameter
         * leaves the cell empty and flagged. */
        tf_fit_health_summary h = tf_fit_health(f);
        double rhat = h.max_rhat, bulk = h.min_bulk_ess, tail = h.min_tail_ess;
        double v[] = {(double)tf_fit_n_chains(f), (double)fs->n_warmup, (double)fs->n_iterations,
                      (double)tf_fit_n_iter(f), (double)fs->thin, (double)fs->n_particles, fs->loglik_sd,
                      h.mean_acceptance, h.min_acceptance, h.mean_invalid, rhat, bulk, tail, m->pareto_k,
                      c->omit_seconds ? NAN : fs->seconds};
        size_t col[] = {c_chains, c_warm, c_run, c_kept, c_thin, c_part, c_llsd, c_acc, c_accmin, c_inv, c_rhat, c_bulk,
                        c_tail, c_k, c_sec};
        for (size_t k = 0; k < sizeof v / sizeof v[0]; k++)
            tf_table_set_number(t, row, col[k], v[k]);
        char checks[256] = "";
        size_t used = 0;
#define FLAG(cond, column, text)                                                                                       \
    do {                                                                                                               \
        if (cond) {                                                                                                    \
            TRY(tf_table_set_warning(t, row, column, err));                                                            \
            int w_ = snprintf(checks + used, sizeof checks - used, "%s%s", used ? "; " : "", text);                    \
            if (w_ > 0)                                                                                                \
                used += (size_t)w_ < sizeof checks - used ? (size_t)w_ : sizeof checks - 1 - used;                     \
        }                                                                                                              \
    } while (0)
        FLAG(h.n_undiagnosed > 0, isnan(rhat) ? c_rhat : isnan(bulk) ? c_bulk : c_tail,
             "R-hat or ESS undefined: chains too sticky or too short to diagnose");
        FLAG(rhat > TF_FIT_RHAT_MAX, c_rhat, "R-hat high: run longer chains");
        FLAG(bulk < TF_FIT_ESS_MIN, c_bulk, "few effective draws");
        FLAG(tail < TF_FIT_ESS_MIN, c_tail, "few effective draws in the tails");
        /* An undefined ESS is flagged too; the checks have said why once above. */
        if (isnan(bulk))
            TRY(tf_table_set_warning(t, row, c_bulk, err));
        if (isnan(tail))
            TRY(tf_table_set_warning(t, row, c_tail, err));
        FLAG(h.min_acceptance < TF_TABLES_ACCEPT_MIN, c_accmin, "a chain rarely moves");
        FLAG(fs->loglik_sd > TF_TABLES_LOGLIK_SD_MAX, c_llsd, "noisy likelihood: use more particles");
        FLAG(m->pareto_k > 0.7, c_k, "log ML unreliable");
#undef FLAG
        TRY(tf_table_set_text(t, row, c_checks, used ? checks : "ok", err));
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO,
                          "How well the sampler did for each model. Flagged cells deserve a look before the numbers of "
                          "that model are trusted.",
                          err));
fail:
    return finish(t, st, out);
}

/* ---- chains ---- */

tf_status tf_tables_chains(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                           tf_error *err)
{
    tf_status st = TF_OK;
    tf_table *t = start("chains", 1, err);
    if (!t)
        return tf_error_status(err);
    size_t c_chain, c_acc, c_inv, c_warm, c_run, c_kept, c_thin, c_conv, c_part, c_llsd, c_method, c_rho, c_scr,
        c_seed, c_prop;
    TRY(tf_columns_add(t, TF_C_CHAIN, NULL, &c_chain, err));
    TRY(tf_columns_add(t, TF_C_ACCEPTANCE, "share of the chain's proposals accepted over its kept draws", &c_acc, err));
    TRY(tf_columns_add(t, TF_C_INVALID, NULL, &c_inv, err));
    TRY(tf_columns_add(t, TF_C_WARMUP, NULL, &c_warm, err));
    TRY(tf_columns_add(t, TF_C_ITERATIONS, NULL, &c_run, err));
    TRY(tf_columns_add(t, TF_C_KEPT_DRAWS, NULL, &c_kept, err));
    TRY(tf_columns_add(t, TF_C_THIN, NULL, &c_thin, err));
    TRY(tf_columns_add(t, TF_C_CONVERGED, NULL, &c_conv, err));
    TRY(tf_columns_add(t, TF_C_PARTICLES, NULL, &c_part, err));
    TRY(tf_columns_add(t, TF_C_LOGLIK_SD, NULL, &c_llsd, err));
    TRY(tf_columns_add(t, TF_C_METHOD, NULL, &c_method, err));
    TRY(tf_columns_add(t, TF_C_RHO, NULL, &c_rho, err));
    TRY(tf_columns_add(t, TF_C_SCREENED, NULL, &c_scr, err));
    TRY(tf_columns_add(t, TF_C_SEED, NULL, &c_seed, err));
    TRY(tf_columns_add(t, TF_C_PROPOSAL, NULL, &c_prop, err));
    for (size_t i = 0; i < n; i++) {
        const tf_fit *f = models[i].fit;
        if (!f)
            continue;
        const tf_fit_settings *fs = tf_fit_settings_of(f);
        for (size_t ch = 0; ch < tf_fit_n_chains(f); ch++) {
            size_t row;
            TRY(begin_row(t, c, models[i].name, &row, err));
            double v[] = {(double)(ch + 1), tf_fit_acceptance(f, ch), tf_fit_invalid_share(f, ch), (double)fs->n_warmup,
                          (double)fs->n_iterations, (double)tf_fit_n_iter(f), (double)fs->thin,
                          (double)fs->stopped_early, (double)fs->n_particles, fs->loglik_sd,
                          fs->correlated ? fs->rho : NAN, fs->delayed ? fs->screened : NAN};
            size_t col[] = {c_chain, c_acc, c_inv, c_warm, c_run, c_kept, c_thin, c_conv, c_part, c_llsd, c_rho, c_scr};
            for (size_t k = 0; k < sizeof v / sizeof v[0]; k++)
                tf_table_set_number(t, row, col[k], v[k]);
            TRY(tf_table_set_text(t, row, c_method, fs->correlated ? "correlated" : "standard", err));
            /* A number when a double holds it exactly (below 2^53), else its digits as text. */
            if (fs->seed <= (UINT64_C(1) << 53)) {
                tf_table_set_number(t, row, c_seed, (double)fs->seed);
            } else {
                char seed[32];
                snprintf(seed, sizeof seed, "%llu", (unsigned long long)fs->seed);
                TRY(tf_table_set_text(t, row, c_seed, seed, err));
            }
            TRY(tf_table_set_text(t, row, c_prop, tf_filter_proposal_name(fs->proposal), err));
        }
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO, "The sampler's record of each chain.", err));
fail:
    return finish(t, st, out);
}

/* The tables of one population's forecast; see forecast_tables.h. Every number is read from the
 * forecast's result. */
#include "tables/forecast_tables.h"

#include <math.h>
#include <stdio.h>

#include "compare/compare.h"
#include "filter/filter.h"
#include "model/model.h"
#include "project/cautions.h"
#include "project/project.h"
#include "sampler/fit.h"
#include "tables/columns.h"
#include "tables/fit_tables.h"
#include "tables/scenario_tables.h"

static const char not_converged[] =
    "Some chains behind this projection did not pass the convergence checks (R-hat above 1.01 or an "
    "effective sample size below 400): the draws may not represent the posterior yet. Run longer "
    "(--iterations, --warmup) before relying on the numbers.";

size_t tf_forecast_tables_cautions(const tf_forecast *f, const tf_forecast_pop *p, const char **out)
{
    const tf_forecast_options *fo = tf_forecast_options_of(f);
    size_t n = 0;
    for (size_t i = 0; i < tf_project_n_cautions(); i++)
        out[n++] = tf_project_caution(i);
    if (fo->source == TF_FORECAST_FIXED)
        out[n++] = tf_project_caution_fixed();
    else if (!isnan(fo->start))
        out[n++] = tf_project_caution_start();
    if (p ? !p->converged : !tf_forecast_all_converged(f))
        out[n++] = not_converged;
    return n;
}

#define TRY(call)                \
    do {                         \
        if ((st = (call)) != TF_OK) \
            goto fail;           \
    } while (0)

static tf_status summary_table(const tf_forecast *f, const tf_forecast_pop *p, const char *population,
                               const char *survey_path, tf_table **out, tf_error *err)
{
    const tf_forecast_options *fo = tf_forecast_options_of(f);
    tf_status st = TF_OK;
    char text[512], note[256];
    tf_table *t = tf_table_new_summary("summary", err);
    if (!t)
        return tf_error_status(err) ? tf_error_status(err) : TF_ERR_NOMEM;
    TRY(tf_table_set_summary_population(t, population, err));
    TRY(tf_table_add_heading(t, "Forecast", err));
    TRY(tf_table_add_item_text(t, "Survey", survey_path ? survey_path : "none", NULL, err));
    if (p->label[0])
        TRY(tf_table_add_item_text(t, "Population", p->label, NULL, err));
    if (fo->run.estimates && fo->source != TF_FORECAST_FIXED)
        TRY(tf_table_add_item_text(t, "Counts", "read as estimates (--estimates), not whole counts",
                                   "so only counting-error models of continuous amounts (log-normal) were fitted",
                                   err));
    if (fo->source == TF_FORECAST_FIXED) {
        const tf_growth_type *g = tf_model_growth(p->model);
        TRY(tf_table_add_item_text(t, "Projected from", "fixed parameter values", "given with --parameter", err));
        TRY(tf_table_add_item_text(t, "Growth model", g->name, NULL, err));
        for (size_t k = 0; k <= g->n_params; k++)
            TRY(tf_table_add_item_number(t, tf_model_param_name(p->model, k), p->theta[k], TF_COL_NUMBER,
                                         k == g->n_params ? "process-noise sd" : NULL, err));
        snprintf(text, sizeof text, "%.10g", p->start);
        TRY(tf_table_add_item_text(t, "Start", text,
                                   isnan(fo->start) ? "the last surveyed count / effort" : "given with --start", err));
    } else if (fo->source == TF_FORECAST_MODEL) {
        const tf_fit *fit = p->fit;
        const tf_fit_settings *fs = tf_fit_settings_of(fit);
        /* One health summary with one NaN rule (sampler/fit.h). */
        tf_fit_health_summary h = tf_fit_health(fit);
        double rhat = h.max_rhat, ess = h.min_ess;
        TRY(tf_table_add_item_text(t, "Projected from", "the posterior of one fitted model",
                                   "particle marginal Metropolis-Hastings", err));
        TRY(tf_table_add_item_text(t, "Model", tf_model_name(p->model), NULL, err));
        snprintf(note, sizeof note, "%zu chains x %zu kept draws, after %zu warm-up; %zu particles, %s proposal",
                 tf_fit_n_chains(fit), tf_fit_n_iter(fit), fs->n_warmup, fs->n_particles,
                 tf_filter_proposal_name(fs->proposal));
        TRY(tf_table_add_item_number(t, "Posterior draws", (double)tf_fit_n_draws(fit), TF_COL_INTEGER, note, err));
        TRY(tf_table_add_item_number(t, "R-hat, largest", rhat, TF_COL_NUMBER, "want <= 1.01", err));
        if (!(rhat <= TF_FIT_RHAT_MAX))
            TRY(tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err));
        TRY(tf_table_add_item_number(t, "ESS, smallest", ess, TF_COL_NUMBER, "bulk or tail; want >= 400", err));
        if (!(ess >= TF_FIT_ESS_MIN))
            TRY(tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err));
    } else {
        const tf_analysis_pop *ap = p->pop;
        size_t n = tf_analysis_pop_n_models(ap), order[TF_ANALYSIS_MAX_MODELS];
        tf_analysis_pop_by_probability(ap, order);
        TRY(tf_table_add_item_text(t, "Projected from", "the posterior model average of the fitted candidates",
                                   "each model's draws weighted by its posterior probability (marginal likelihood, "
                                   "equal prior weights)", err));
        for (size_t r = 0; r < n; r++) {
            const tf_analysis_model *m = tf_analysis_pop_model(ap, order[r]);
            snprintf(text, sizeof text, "P(%s)", m->name);
            if (m->state == TF_CANDIDATE_FITTED) {
                const tf_candidate_figures *fg = tf_comparison_figures(tf_analysis_pop_comparison(ap), order[r]);
                snprintf(note, sizeof note, "Monte Carlo se %.3g; %zu posterior draws; %zu simulated futures",
                         fg->prob_se, tf_fit_n_draws(m->fit), tf_forecast_candidate_runs(p, order[r]));
                TRY(tf_table_add_item_number(t, text, m->probability, TF_COL_PROBABILITY, note, err));
            } else {
                TRY(tf_table_add_item_text(t, text, m->state == TF_CANDIDATE_FAILED ? "failed" : "excluded", m->note,
                                           err));
            }
        }
    }
    if (fo->source != TF_FORECAST_FIXED) {
        if (isnan(fo->start))
            snprintf(text, sizeof text, "each posterior draw's latent abundance in the last survey year");
        else
            snprintf(text, sizeof text, "%.10g for every draw", fo->start);
        TRY(tf_table_add_item_text(t, "Start", text, isnan(fo->start) ? NULL : "given with --start (a what-if)", err));
    }
    if (p->year0 != TF_PROJECTION_NO_YEAR)
        TRY(tf_table_add_item_number(t, "Year 0", p->year0, TF_COL_YEAR, "the last survey year", err));
    TRY(tf_table_add_item_number(t, "Simulated futures", (double)tf_projection_n_runs(p->projection), TF_COL_INTEGER,
                                 NULL, err));
    TRY(tf_table_add_item_number(t, "Years ahead", (double)tf_projection_horizon(p->projection), TF_COL_INTEGER, NULL,
                                 err));
    snprintf(text, sizeof text, "%llu", (unsigned long long)fo->run.seed);
    TRY(tf_table_add_item_text(t, "Seed", text, "the same seed gives the same numbers", err));
    /* The median time is one number per threshold, so it lives here rather than in the curves. */
    TRY(tf_table_add_heading(t, "Median time to quasi-extinction", err));
    for (size_t k = 0; k < tf_projection_n_thresholds(p->projection); k++) {
        tf_threshold th = tf_projection_threshold(p->projection, k);
        char label[48];
        snprintf(text, sizeof text, "Threshold %s", tf_project_threshold_label(&th, label, sizeof label));
        double mt = tf_projection_median_time(p->projection, k);
        if (isnan(mt)) {
            snprintf(note, sizeof note, "the risk stays below 0.5 within %zu years",
                     tf_projection_horizon(p->projection));
            TRY(tf_table_add_item_text(t, text, "not reached", note, err));
        } else {
            TRY(tf_table_add_item_number(t, text, mt, TF_COL_INTEGER,
                                         "years ahead: the first year with a risk of 0.5 or more", err));
        }
    }
    TRY(tf_scenario_tables_summary(t, p->scenarios, p->safe, p->status_quo, p->status_quo_years, err));
    TRY(tf_table_add_heading(t, "Cautions", err));
    const char *cautions[TF_FORECAST_MAX_CAUTIONS];
    size_t nc = tf_forecast_tables_cautions(f, p, cautions);
    for (size_t i = 0; i < nc; i++) {
        snprintf(text, sizeof text, "Caution %zu", i + 1);
        TRY(tf_table_add_item_text(t, text, cautions[i], NULL, err));
    }
    *out = t;
    return TF_OK;
fail:
    tf_table_free(t);
    return st;
}

tf_status tf_forecast_tables_build(const tf_forecast *f, const tf_forecast_pop *p, const char *population,
                                   const char *survey_path, tf_table *out[TF_FORECAST_N_TABLES], tf_error *err)
{
    out[TF_FORECAST_TABLE_SUMMARY] = NULL;
    tf_forecast_source from = tf_forecast_options_of(f)->source;
    char unit[TF_TABLES_UNIT_SIZE] = TF_UNIT_ANIMALS;
    if (p->series)
        tf_tables_unit(p->series, unit, sizeof unit);
    tf_projection_place place = {.population = population,
                                 .model = from == TF_FORECAST_AVERAGE ? "average"
                                          : from == TF_FORECAST_FIXED ? "fixed"
                                                                      : tf_model_name(p->model),
                                 .unit = unit,
                                 .year0 = p->year0};
    tf_status st = tf_projection_tables_build(p->projection, &place, out, err);
    /* Each projection table carries this forecast's own cautions as notes, for readers of the
     * tables in memory; the summary holds all of them in the CSV files. */
    const char *cautions[TF_FORECAST_MAX_CAUTIONS];
    size_t nc = tf_forecast_tables_cautions(f, p, cautions);
    for (size_t k = 0; k < TF_PROJECTION_N_TABLES && st == TF_OK; k++)
        for (size_t i = tf_project_n_cautions(); i < nc && st == TF_OK; i++)
            st = tf_table_add_note(out[k], TF_NOTE_CAUTION, cautions[i], err);
    /* The survey's removals go on in the projection: say how much. */
    if (p->status_quo_years) {
        char sq[200];
        tf_scenario_tables_status_quo(p->status_quo, p->status_quo_years, sq, sizeof sq);
        for (size_t k = 0; k < TF_PROJECTION_N_TABLES && st == TF_OK; k++)
            st = tf_table_add_notef(out[k], TF_NOTE_INFO, err, "Removals go on as the status quo: %s.", sq);
    }
    if (st == TF_OK)
        st = summary_table(f, p, population, survey_path, &out[TF_FORECAST_TABLE_SUMMARY], err);
    return st;
}

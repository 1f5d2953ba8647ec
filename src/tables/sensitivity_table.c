/* The prior-sensitivity table; see sensitivity_table.h. */
#include "tables/sensitivity_table.h"

#include <math.h>
#include <stdio.h>

#include "compare/pareto.h"
#include "tables/columns.h"

static const char *state_name(tf_sens_state s)
{
    switch (s) {
    case TF_SENS_REWEIGHTED: return "reweighted";
    case TF_SENS_REFITTED: return "estimated again";
    case TF_SENS_UNRELIABLE: return "unreliable";
    case TF_SENS_FAILED: return "failed";
    default: return "not fitted";
    }
}

#define TRY(x)                                                                                                         \
    do {                                                                                                               \
        if ((st = (x)) != TF_OK)                                                                                       \
            goto fail;                                                                                                 \
    } while (0)

tf_status tf_sensitivity_table(const tf_sensitivity *s, const tf_analysis_sens_row *risks, const tf_projection *pr,
                               const char *population, tf_table **out, tf_error *err)
{
    *out = NULL;
    tf_table *t = tf_table_new(TF_SENSITIVITY_TABLE_NAME, err);
    if (!t)
        return TF_ERR_NOMEM;
    tf_status st = TF_OK;
    size_t c_pop, c_alt, c_model, c_status, c_lml, c_lml_se, c_prob, c_prob_se, c_k, c_dk, c_risk0 = 0, c_note;
    TRY(tf_columns_add(t, TF_C_POPULATION, NULL, &c_pop, err));
    TRY(tf_columns_add(t, TF_C_ALTERNATIVE, NULL, &c_alt, err));
    TRY(tf_columns_add(t, TF_C_MODEL, NULL, &c_model, err));
    TRY(tf_columns_add(t, TF_C_STATUS, "reweighted (the comparison's importance draws under these priors), "
                                       "estimated again, unreliable (Pareto k above 0.7), failed or not fitted",
                       &c_status, err));
    TRY(tf_columns_add(t, TF_C_LOG_ML, "log marginal likelihood under the row's priors", &c_lml, err));
    TRY(tf_columns_add(t, TF_C_LOG_ML_MCSE, NULL, &c_lml_se, err));
    TRY(tf_columns_add(t, TF_C_MODEL_PROB, "posterior model probability under the row's priors", &c_prob, err));
    TRY(tf_columns_add(t, TF_C_MODEL_PROB_MCSE, NULL, &c_prob_se, err));
    TRY(tf_columns_add(t, TF_C_PARETO_K, "Pareto k of the importance weights under the row's priors (above 0.7: "
                                         "unreliable)",
                       &c_k, err));
    TRY(tf_columns_add(t, TF_C_DRAWS_PARETO_K, NULL, &c_dk, err));
    size_t n_thr = risks && pr ? tf_projection_n_thresholds(pr) : 0, n_years = 0;
    while (risks && pr && n_years < TF_ANALYSIS_N_RISK_YEARS &&
           tf_analysis_risk_years[n_years] <= tf_projection_horizon(pr))
        n_years++;
    for (size_t k = 0; k < n_thr; k++)
        for (size_t y = 0; y < n_years; y++) {
            char name[48], label[96], legend[200], thr[32];
            tf_threshold th = tf_projection_threshold(pr, k);
            tf_project_threshold_label(&th, thr, sizeof thr);
            snprintf(name, sizeof name, "risk_%zu_%zuy", k + 1, tf_analysis_risk_years[y]);
            snprintf(label, sizeof label, "Risk %zu years, below %s", tf_analysis_risk_years[y], thr);
            snprintf(legend, sizeof legend,
                     "model-averaged probability of falling to %s%s within %zu years under the row's priors "
                     "(average rows)",
                     thr, th.relative ? " of the current abundance" : " animals", tf_analysis_risk_years[y]);
            size_t c;
            TRY(tf_columns_add_other(t, name, label, legend, TF_COL_PROBABILITY, &c, err));
            if (k == 0 && y == 0)
                c_risk0 = c;
        }
    TRY(tf_columns_add(t, TF_C_NOTE, NULL, &c_note, err));

    size_t n_models = tf_sensitivity_n_models(s);
    for (size_t r = 0; r < tf_sensitivity_n_rows(s); r++) {
        const char *label = tf_sensitivity_label(s, r);
        for (size_t i = 0; i < n_models; i++) {
            const tf_sens_cell *cell = tf_sensitivity_cell(s, r, i);
            if (cell->state == TF_SENS_NOT_FITTED)
                continue;
            size_t row;
            TRY(tf_table_add_row(t, &row, err));
            TRY(tf_table_set_text(t, row, c_pop, population, err));
            TRY(tf_table_set_text(t, row, c_alt, label, err));
            TRY(tf_table_set_text(t, row, c_model, tf_sensitivity_model_name(s, i), err));
            TRY(tf_table_set_text(t, row, c_status, state_name(cell->state), err));
            tf_table_set_number(t, row, c_lml, cell->log_ml);
            tf_table_set_number(t, row, c_lml_se, cell->log_ml_se);
            tf_table_set_number(t, row, c_prob, cell->prob);
            tf_table_set_number(t, row, c_prob_se, cell->prob_se);
            tf_table_set_number(t, row, c_k, cell->pareto_k);
            if (risks)
                tf_table_set_number(t, row, c_dk, risks[r].draws_k[i]);
            const char *note = tf_sensitivity_note(s, r, i);
            if (r > 0 && !cell->changed)
                note = cell->state == TF_SENS_UNRELIABLE
                           ? "these priors leave the model's priors as they were; the comparison's own estimate is "
                             "flagged (see its models table)"
                           : "these priors leave the model's priors as they were";
            TRY(tf_table_set_text(t, row, c_note, note, err));
            if (cell->state == TF_SENS_UNRELIABLE || cell->state == TF_SENS_FAILED)
                TRY(tf_table_set_warning(t, row, c_k, err));
            if (risks && risks[r].draws_k[i] > TF_PARETO_K_MAX)
                TRY(tf_table_set_warning(t, row, c_dk, err));
        }
        if (!risks || !n_thr)
            continue;
        size_t row;
        TRY(tf_table_add_row(t, &row, err));
        TRY(tf_table_set_text(t, row, c_pop, population, err));
        TRY(tf_table_set_text(t, row, c_alt, label, err));
        TRY(tf_table_set_text(t, row, c_model, "average", err));
        size_t c = c_risk0;
        for (size_t k = 0; k < n_thr; k++)
            for (size_t y = 0; y < n_years; y++)
                tf_table_set_number(t, row, c++, k < TF_PROJECT_MAX_THRESHOLDS ? risks[r].risk[k][y] : NAN);
        if (!risks[r].reliable) {
            TRY(tf_table_set_text(t, row, c_note,
                                  "a model's reweighted posterior draws have a Pareto k above 0.7: these risks "
                                  "are rough",
                                  err));
            TRY(tf_table_set_warning(t, row, TF_TABLE_WHOLE_ROW, err));
        }
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO,
                          "Each block of rows is one set of priors: 'fitted' is the comparison itself; 'K x2' "
                          "doubles the scale of the prior of K in every model that has it, 'x0.5' halves it; "
                          "'all' changes every prior's scale at once. The figures reweight the comparison's own "
                          "importance draws (no new fit).",
                          err));
    TRY(tf_table_add_note(t, TF_NOTE_INFO,
                          "A prior twice as wide on a parameter only one model has lowers that model's log "
                          "marginal likelihood by about ln 2 = 0.69 however many years of counts there are "
                          "(Lindley 1957; Kass & Raftery 1995): model probabilities that move a lot between "
                          "rows rest on the priors, not on the counts.",
                          err));
    *out = t;
    return TF_OK;
fail:
    tf_table_free(t);
    return st;
}

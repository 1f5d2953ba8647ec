/* `tallyfit forecast`: projects a population forward and reports the abundance bands,
 * quasi-extinction risk and the chance of decline. Three sources of futures: the posterior of one
 * model fitted by PMMH (--model), the posteriors of the candidate models averaged by their
 * posterior probabilities (--average: the analysis of `tallyfit analyze`, without its workbook),
 * or parameter values given by hand (--parameter). */
#define _GNU_SOURCE
#include <assert.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "analysis/analysis.h"
#include "analysis/forecast.h"
#include "cmd/args.h"
#include "cmd/input.h"
#include "cmd/cmd.h"
#include "cmd/fileset.h"
#include "cmd/messages.h"
#include "cmd/setup.h"
#include "cmd/signals.h"
#include "export/csv_out.h"
#include "export/table.h"
#include "model/model.h"
#include "model/prior.h"
#include "project/cautions.h"
#include "project/project.h"
#include "sampler/fit.h"
#include "sampler/pmmh.h"
#include "survey/survey.h"
#include "tables/columns.h"
#include "tables/fit_tables.h"
#include "tables/forecast_tables.h"
#include "tables/scenario_tables.h"
#include "tables/projection_tables.h"

#define CMD "forecast"
#define PROG "tallyfit " CMD
#define DEFAULT_THRESHOLDS "50%,20%,10%"
#define DEFAULT_SEED 1u
/* A limit that only guards memory and time against typos; tf_project_run's own. */
#define MAX_RUNS 10000000u
/* The three projection tables and the summary that says what was projected, with the cautions. */
#define N_TABLES TF_FORECAST_N_TABLES
/* With the scenario tables after them, when scenarios were asked. */
#define N_ALL_TABLES (N_TABLES + TF_SCENARIO_N_TABLES)

/* Where the futures come from. */
typedef enum { FROM_NONE, FROM_FIXED, FROM_MODEL, FROM_AVERAGE } source;

typedef struct {
    const char *survey_path;
    const char *model, *obs, *population, *out_dir;
    tf_input in;            /* --population list, --skip-unusable, --estimates; population = its single label */
    const char *thresholds;
    int average, quiet, have_fixed;
    tf_arg_pairs fixed;      /* --parameter */
    size_t years, runs, decline_window;
    double start;
    uint64_t seed;
    tf_args_sampler sampler; /* the sampler's options, as given */
    tf_setup_user user;      /* the priors the user set (--prior-file, --prior), for the fits */
    const char *weight_names[TF_ARGS_MAX_PAIRS];   /* --model-weights, as the comparison takes them */
    double weights[TF_ARGS_MAX_PAIRS];
    source from;
    tf_scenario scenarios[TF_SCENARIO_MAX]; /* --scenario, in order */
    size_t n_scenarios;
    tf_safe_removal_ask safe;                /* --safe-removal; years 0 = not asked */
} options;

static void help(FILE *out)
{
    char growth[256], obs[256];
    tf_model_list_growth(growth, sizeof growth);
    tf_model_list_obs(obs, sizeof obs);
    tf_pmmh_options d = tf_pmmh_default_options();
    tf_analysis_options a;
    tf_error err;
    tf_error_init(&err);
    tf_analysis_options_init(&a, &err);
    fprintf(out,
            "usage: tallyfit forecast SURVEY.csv --model M [--obs O] [options]\n"
            "       tallyfit forecast SURVEY.csv --average [--model M,...] [--obs O,...] [options]\n"
            "       tallyfit forecast [SURVEY.csv] --parameter NAME=VALUE,... [--start N] [options]\n"
            "\n"
            "Simulates the population forward and reports the abundance bands, the risk of falling to or\n"
            "below a threshold (quasi-extinction) and the chance of decline, each with its Monte Carlo error.\n"
            "Give one source of futures:\n"
            "  --model M [--obs O]     fit growth model M with counting error O (default poisson;\n"
            "                          lognormal with --estimates) by\n"
            "                          particle MCMC, as 'tallyfit fit' does, and project from the\n"
            "                          posterior: each draw starts from its own latent abundance in the\n"
            "                          last survey year and runs on with its own parameters\n"
            "  --average               fit the candidate models, compare them by marginal likelihood and\n"
            "                          project averaging them by their posterior probabilities, as\n"
            "                          'tallyfit analyze' does (without the workbook). --model and --obs\n"
            "                          then take comma lists, or 'all', restricting the candidates\n"
            "                          (default exponential,ricker,gompertz with poisson,negbin for whole\n"
            "                          counts, lognormal otherwise)\n"
            "  --parameter r=..,sigma=..[,K=..]\n"
            "                          project from these parameter values (growth parameters and the\n"
            "                          process-noise sd sigma, natural scale); --model picks the growth\n"
            "                          model when the names leave a choice\n"
            "Without one of them the command stops with a usage error rather than start a fit of\n"
            "several minutes unasked.\n"
            "Growth models: %s.\n"
            "Counting error: %s.\n"
            "\n"
            "Projection:\n"
            "  --population LIST       only these populations, labels separated by commas (default:\n"
            "                          every one in the file; --parameter and --start need one)\n"
            "  --skip-unusable         leave out, with a warning, every population that cannot be fitted\n"
            "  --estimates             the counts are estimates that need not be whole numbers: only\n"
            "                          counting-error models of continuous amounts (lognormal) are fitted\n"
            "  --counted-fraction Q    the share of the animals present that a count at effort 1 includes,\n"
            "                          in (0, 1] (default 1); links removed/added animals to the counts\n"
            "  --effort-name TEXT      the unit of the effort column (\"trap-night\"): abundances read\n"
            "                          \"count units per TEXT\" where effort varies (at most 32 characters)\n"
            "  --start N               current abundance. With --parameter: by default the last surveyed\n"
            "                          count / effort. With a posterior, a what-if: every draw starts from N\n"
            "                          instead of its latent abundance, keeping the uncertainty about the\n"
            "                          parameters and leaving out that about the current abundance\n"
            "  --years H               years to project (default %d)\n"
            "  --threshold LIST        abundances or percentages of the current abundance, e.g. 50,100,20%%\n"
            "                          (default %s)\n"
            "  --decline-window Y      also report declines over Y whole years (e.g. three generations,\n"
            "                          rounded); declines over 10 years are always reported\n"
            "  --runs R                simulated futures (default %d, or the number of posterior draws\n"
            "                          when that is more)\n"
            "Management (the status quo continues the mean net removal of the last %d survey years\n"
            "when the survey records removals):\n"
            "  --scenario 'LABEL:key=value,...'\n"
            "                          also project a scenario, from the same draws with the same random\n"
            "                          numbers; repeat for more. Keys: remove=N (animals a year) or\n"
            "                          remove=P%% (a share a year), add=N (animals released a year),\n"
            "                          growth=D (added to the yearly log growth), capacity=F (carrying\n"
            "                          capacity times F; models with one), from=YEAR (default: the first\n"
            "                          projected year). remove/add replace the status quo's removals\n"
            "  --safe-removal RISK,YEARS[,count|share]\n"
            "                          the largest constant yearly removal (animals, or a share) that\n"
            "                          keeps the chance of reaching the first --threshold within YEARS at\n"
            "                          or below RISK (e.g. 0.05,20), with its Monte Carlo error: a\n"
            "                          model-based figure, not a quota\n"
            "  -o, --output DIR        where to write (default output/<survey name>/, or output/forecast/\n"
            "                          without a survey), with one sub-folder per population when the\n"
            "                          file has several, as fit does\n",
            growth, obs, TF_PROJECT_DEFAULT_HORIZON, DEFAULT_THRESHOLDS, TF_PROJECT_DEFAULT_RUNS,
            TF_SCENARIO_STATUS_QUO_YEARS);
    tf_args_quiet_help(out, 26);
    fputs("  -h, --help              show this help\n\n"
          "Fitting (--model, --average; --ml-se, --draws and --model-weights with --average only;\n"
          "--seed seeds the projection too, with --parameter as well):\n", out);
    tf_args_sampler_help(out, &d, &a.evidence, 26);
    fputs("\n"
          "Writes projection.csv (median, 50 % and 95 % bands per year), risk.csv (the cumulative\n"
          "risk per threshold and year, with its Monte Carlo error), declines.csv, and summary.csv\n"
          "(what was projected: the model or the model probabilities, the posterior draws, the\n"
          "settings, and the cautions), all or none; the population and the model are columns of\n"
          "every table. With --scenario also scenarios.csv (each scenario's risk curves and bands),\n"
          "scenario-differences.csv and scenario-declines.csv (differences from the status quo with\n"
          "their paired Monte Carlo errors).\n"
          TF_CMD_HELP_END,
          out);
}

/* The priors of a --model fit, as fit sets them: the first-year prior given (--prior) over the
 * series' own, and the defaults overridden by the priors file (--prior-file), which must be for
 * the model fitted. ctx is the command's tf_setup_user. */
static tf_status priors_of_one(void *ctx, tf_model *m, const tf_series *s, tf_prior_set **out, tf_error *err)
{
    const tf_setup_user *u = ctx;
    if (!isnan(u->x1_mean) || !isnan(u->x1_sd))
        tf_model_set_initial(m, isnan(u->x1_mean) ? tf_model_x1_mean(m) : u->x1_mean,
                             isnan(u->x1_sd) ? tf_model_x1_sd(m) : u->x1_sd);
    return tf_setup_priors(m, s, u->prior_file, out, err);
}

/* ---- one population's output -------------------------------------------------------------------- */

/* What the command adds to a population's forecast: its output folder and its tables. */
typedef struct {
    const tf_forecast_pop *p;
    char dir[4096];
    tf_table *tables[N_ALL_TABLES]; /* the scenario tables NULL without scenarios */
} job;

static void jobs_free(job *jobs, size_t n_jobs)
{
    for (size_t i = 0; jobs && i < n_jobs; i++)
        for (size_t k = 0; k < N_ALL_TABLES; k++)
            tf_table_free(jobs[i].tables[k]);
    free(jobs);
}

/* The output folder of a population, as fit chooses it, so that a population's fit and forecast
 * land together: -o DIR or by default output/<survey>/, with /<population> below it when the file
 * holds several populations (even if one is chosen); output/forecast without a survey. A name
 * too long for the buffer is refused, not cut: a cut name would be another folder. */
static tf_status job_dir(const options *o, const tf_survey *sv, const tf_args_folders *folders, const char *label,
                         char *dir, size_t size, tf_error *err)
{
    char base[256] = "forecast";
    if (sv)
        tf_args_survey_name(o->survey_path, base, sizeof base);
    char folder[300];
    tf_args_folder_of(folders, label, folder, sizeof folder);
    if (tf_args_output_dir(dir, size, o->out_dir, base, folder, sv && tf_survey_n_in_file(sv) > 1, NULL) != TF_OK)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "choose a shorter -o DIR",
                            "the output folder name is longer than %zu bytes", size - 1);
    return TF_OK;
}

/* The largest R-hat and the smallest bulk or tail ESS over a fit's parameters, NaN ranking
 * worst (tf_fit_health). */
static void fit_mixing(const tf_fit *f, double *rhat_max, double *ess_min)
{
    tf_fit_health_summary h = tf_fit_health(f);
    *rhat_max = h.max_rhat;
    *ess_min = h.min_ess;
}

/* ---- the tables ------------------------------------------------------------------------------------
 * Built by the table layer from the result alone (tables/forecast_tables.h), and written as one
 * group here. */

/* Writes every population's tables as one group (fileset.h): either every file is
 * replaced or none is, and folders this call made are taken away again on failure. Signals wait
 * until the renames are over, so that a late Ctrl-C cannot stop the group half-way. */
static tf_status write_tables(const job *jobs, size_t n_jobs, const char *survey_path, tf_error *err)
{
    tf_fileset *g = tf_fileset_new(n_jobs, n_jobs * N_ALL_TABLES, err);
    tf_status st = g ? TF_OK : TF_ERR_NOMEM;
    for (size_t i = 0; i < n_jobs && st == TF_OK; i++) {
        const job *j = &jobs[i];
        st = tf_fileset_mkdir(g, j->dir, err);
        for (size_t k = 0; k < N_ALL_TABLES && st == TF_OK; k++) {
            if (!j->tables[k])
                continue;
            char name[128], path[4300];
            tf_csv_file_name(tf_table_name(j->tables[k]), name, sizeof name);
            snprintf(path, sizeof path, "%s/%s", j->dir, name);
            FILE *fp;
            if ((st = tf_fileset_open(g, path, survey_path, &fp, err)) != TF_OK)
                break;
            /* Write errors stay on the stream and are reported by the commit, with errno. */
            tf_csv_write_stream(j->tables[k], fp, path, NULL);
        }
    }
    sigset_t old_mask;
    tf_signals_hold(&old_mask);
    st = tf_fileset_finish(g, st, err);
    tf_signals_release(&old_mask);
    return st;
}

/* ---- printing ------------------------------------------------------------------------------------ */

/* Prints text as an indented paragraph wrapped at about 78 columns. */
static void print_wrapped(FILE *out, const char *first, const char *text)
{
    const size_t width = 78;
    size_t indent = strlen(first), col = indent;
    fputs(first, out);
    while (*text) {
        size_t word = strcspn(text, " ");
        if (col > indent && col + 1 + word > width) {
            fprintf(out, "\n%*s", (int)indent, "");
            col = indent;
        } else if (col > indent) {
            fputc(' ', out);
            col++;
        }
        fwrite(text, 1, word, out);
        col += word;
        text += word;
        text += strspn(text, " ");
    }
    fputc('\n', out);
}

/* The scenarios against the status quo (the first threshold at 10, 20 and 50 years, or the
 * horizon when shorter) and the largest safe removal. */
static void print_management(const tf_forecast_pop *p)
{
    char text[400];
    if (p->status_quo_years || p->scenarios)
        printf("\nStatus quo: %s\n", tf_scenario_tables_status_quo(p->status_quo, p->status_quo_years, text,
                                                                      sizeof text));
    const tf_scenario_set *s = p->scenarios;
    if (s && tf_projection_n_thresholds(tf_scenario_set_status_quo(s)) > 0) {
        const tf_projection *sq = tf_scenario_set_status_quo(s);
        tf_threshold th = tf_projection_threshold(sq, 0);
        char label[48];
        printf("Scenarios: chance of reaching the threshold %s, and the difference from the status quo\n"
               "(paired Monte Carlo se in brackets)\n",
               tf_project_threshold_label(&th, label, sizeof label));
        for (size_t i = 0; i < tf_scenario_set_n(s); i++) {
            const tf_projection *pr = tf_scenario_set_projection(s, i);
            printf("  %-20s", tf_scenario_set_scenario(s, i)->label);
            for (size_t k = 0; k < TF_ANALYSIS_N_RISK_YEARS; k++) {
                size_t t = tf_analysis_risk_years[k];
                if (t > tf_projection_horizon(pr))
                    continue;
                double d, se;
                tf_error err;
                tf_error_init(&err);
                tf_scenario_set_risk_difference(s, i, 0, t, &d, &se, &err);
                printf("  %zu y: %.3f (%+.3f, %.3f)", t, tf_projection_risk(pr, 0, t), d, se);
            }
            putchar('\n');
        }
    }
    if (p->safe) {
        char note[600];
        printf("Largest safe removal: %s\n", tf_scenario_tables_safe_value(p->safe, text, sizeof text));
        print_wrapped(stdout, "  ", tf_scenario_tables_safe_note(p->safe, note, sizeof note));
        print_wrapped(stdout, "  ", tf_scenario_tables_safe_caution);
    }
}

/* The cautions once for the whole run; the convergence caution when any population needs it. */
static void print_cautions(const tf_forecast *f)
{
    const char *cautions[TF_FORECAST_MAX_CAUTIONS];
    size_t n = tf_forecast_tables_cautions(f, NULL, cautions);
    fputs("\nCautions:\n", stdout);
    for (size_t i = 0; i < n; i++)
        print_wrapped(stdout, "  - ", cautions[i]);
}

/* What a fixed forecast took from the command line and the survey, said before its results. */
static void print_fixed_notes(const tf_forecast *f, const tf_forecast_pop *p)
{
    for (size_t i = 0; i < tf_forecast_n_ignored(f); i++)
        printf("note: %s (counting error) does not enter a projection; ignored\n", tf_forecast_ignored(f, i));
    if (!isnan(p->start_count))
        printf("Starting from the last surveyed count: %g in %d (effort %g), N = %g; --start N starts elsewhere\n",
               p->start_count, p->year0, p->start_effort, p->start);
}

/* What was projected: the source, the model(s), the posterior draws and the start. */
static void print_source(const tf_forecast *f, const tf_forecast_pop *p)
{
    const tf_forecast_options *fo = tf_forecast_options_of(f);
    /* "Forecast for population 'east' from ..." */
    char who[300] = "";
    if (p->label[0])
        snprintf(who, sizeof who, " for population '%s'", p->label);
    if (fo->source == TF_FORECAST_FIXED) {
        const tf_growth_type *g = tf_model_growth(p->model);
        printf("Forecast%s from fixed parameters, growth model %s:", who, g->name);
        for (size_t k = 0; k <= g->n_params; k++)
            printf("%s %s = %g", k ? "," : "", tf_model_param_name(p->model, k), p->theta[k]);
        printf("\n  start N = %g%s\n", p->start, p->year0 == TF_PROJECTION_NO_YEAR ? "" : " in the last survey year");
        return;
    }
    char per[TF_TABLES_UNIT_SIZE + 1] = "";
    if (tf_tables_per_effort(p->series)) {
        per[0] = ' ';
        tf_tables_per_what(p->series, per + 1, sizeof per - 1);
    }
    const char *unit = per;
    size_t ny = tf_series_n_years(p->series);
    if (fo->source == TF_FORECAST_MODEL) {
        const tf_fit *fit = p->fit;
        const tf_fit_settings *fs = tf_fit_settings_of(fit);
        double rhat, ess;
        fit_mixing(fit, &rhat, &ess);
        printf("Forecast%s from the posterior of %s: %zu draws (%zu chains x %zu, after %zu warm-up;\n"
               "  %zu particles; R-hat largest %.3f, ESS smallest %.0f)\n",
               who, tf_model_name(p->model), tf_fit_n_draws(fit), tf_fit_n_chains(fit), tf_fit_n_iter(fit),
               fs->n_warmup, fs->n_particles, rhat, ess);
        if (isnan(fo->start)) {
            const tf_fit_year_summary *y = tf_fit_year(fit, ny - 1);
            printf("  start: each draw's latent abundance in %d (median %.4g, 95 %% interval %.4g to %.4g%s)\n",
                   p->year0, y->median, y->q025, y->q975, unit);
        }
    } else {
        const tf_analysis_pop *ap = p->pop;
        size_t n = tf_analysis_pop_n_models(ap), n_fitted = 0, order[TF_ANALYSIS_MAX_MODELS];
        for (size_t i = 0; i < n; i++)
            n_fitted += tf_analysis_pop_model(ap, i)->state == TF_CANDIDATE_FITTED;
        tf_analysis_pop_by_probability(ap, order);
        printf("Forecast%s averaged over %zu fitted model%s by posterior model probability\n", who, n_fitted,
               n_fitted == 1 ? "" : "s");
        printf("  %-28s %8s %7s %8s %8s %7s %6s\n", "model", "P(model)", "se", "draws", "futures", "R-hat", "ESS");
        for (size_t r = 0; r < n; r++) {
            const tf_analysis_model *m = tf_analysis_pop_model(ap, order[r]);
            if (m->state != TF_CANDIDATE_FITTED)
                continue;
            const tf_candidate_figures *fg = tf_comparison_figures(tf_analysis_pop_comparison(ap), order[r]);
            printf("  %-28s %8.3f %7.3f %8zu %8zu %7.3f %6.0f\n", m->name, m->probability, fg->prob_se,
                   tf_fit_n_draws(m->fit), tf_forecast_candidate_runs(p, order[r]), fg->rhat_max, fg->ess_min);
        }
        for (size_t r = 0; r < n; r++) {
            const tf_analysis_model *m = tf_analysis_pop_model(ap, order[r]);
            if (m->state != TF_CANDIDATE_FITTED)
                printf("  %s %s: %s\n", m->state == TF_CANDIDATE_FAILED ? "failed:  " : "excluded:", m->name, m->note);
        }
        if (isnan(fo->start)) {
            const tf_analysis_year *y = tf_analysis_pop_year(ap, ny - 1);
            printf("  start: each draw's latent abundance in %d (model-averaged median %.4g, 95 %% interval %.4g to "
                   "%.4g%s)\n", p->year0, y->median, y->q025, y->q975, unit);
        }
    }
    if (!isnan(fo->start))
        printf("  start: N = %g for every draw (--start, a what-if), from %d\n", fo->start, p->year0);
}

static void print_projection(const tf_forecast *f, const job *j)
{
    const tf_projection *p = j->p->projection;
    int year0 = j->p->year0;
    size_t H = tf_projection_horizon(p);
    printf("  %zu simulated futures, %zu years ahead, seed %llu\n", tf_projection_n_runs(p), H,
           (unsigned long long)tf_forecast_options_of(f)->run.seed);
    int cal = year0 != TF_PROJECTION_NO_YEAR;
    size_t step = H <= 100 ? 10 : (H + 9) / 10;
    printf("\nAbundance (median and 95 %% band of the simulated futures)\n%s      median      2.5 %%     97.5 %%\n",
           cal ? "  ahead  year" : "   year");
    for (size_t t = 0;; t = t + step < H ? t + step : H) {
        printf("  %5zu", t);
        if (cal)
            printf(" %5d", year0 + (int)t);
        printf("  %10.4g %10.4g %10.4g\n", tf_projection_band(p, t, TF_BAND_MEDIAN), tf_projection_band(p, t, TF_BAND_P025),
               tf_projection_band(p, t, TF_BAND_P975));
        if (t == H)
            break;
    }

    size_t at[4], n_at = 0;
    static const size_t marks[] = {10, 20, 50};
    for (size_t i = 0; i < 3; i++)
        if (marks[i] < H)
            at[n_at++] = marks[i];
    at[n_at++] = H;
    printf("\nQuasi-extinction: chance of having been at or below the threshold\n  threshold ");
    for (size_t i = 0; i < n_at; i++) {
        char head[32];
        snprintf(head, sizeof head, "by year %zu", at[i]);
        printf("  %15s", head);
    }
    printf("   median time\n");
    for (size_t k = 0; k < tf_projection_n_thresholds(p); k++) {
        tf_threshold th = tf_projection_threshold(p, k);
        char label[48], cell[48];
        printf("  %-10s", tf_project_threshold_label(&th, label, sizeof label));
        for (size_t i = 0; i < n_at; i++) {
            snprintf(cell, sizeof cell, "%.3f +- %.3f", tf_projection_risk(p, k, at[i]), tf_projection_risk_se(p, k, at[i]));
            printf("  %15s", cell);
        }
        double mt = tf_projection_median_time(p, k);
        if (isnan(mt))
            printf("   not reached\n");
        else
            printf("   year %.0f\n", mt);
    }

    printf("\nDecline from the current abundance (chance that N after the window <= (1 - decline) N now)\n"
           "  window  ");
    for (size_t d = 0; d < tf_projection_n_declines(p); d++) {
        char head[32];
        snprintf(head, sizeof head, ">= %.0f %%", 100 * tf_projection_decline(p, d));
        printf("  %15s", head);
    }
    putchar('\n');
    for (size_t w = 0; w < tf_projection_n_windows(p); w++) {
        printf("  %3zu years", tf_projection_window(p, w));
        for (size_t d = 0; d < tf_projection_n_declines(p); d++) {
            char cell[48];
            snprintf(cell, sizeof cell, "%.3f +- %.3f", tf_projection_decline_prob(p, w, d),
                     tf_projection_decline_se(p, w, d));
            printf("  %15s", cell);
        }
        putchar('\n');
    }
    printf("\nTables in %s:", j->dir);
    for (size_t i = 0; i < N_ALL_TABLES; i++) {
        char name[128];
        if (!j->tables[i])
            continue;
        tf_csv_file_name(tf_table_name(j->tables[i]), name, sizeof name);
        printf("%s %s", i ? "," : "", name);
    }
    putchar('\n');
}

/* Plain warnings on stderr for fits that should not be trusted yet, and failed candidates. */
static void print_warnings(const tf_forecast *f, const tf_forecast_pop *p)
{
    tf_forecast_source from = tf_forecast_options_of(f)->source;
    const char *label = p->label, *sp = label[0] ? " " : "";
    if (from == TF_FORECAST_MODEL && !p->converged) {
        double rhat, ess;
        fit_mixing(p->fit, &rhat, &ess);
        fprintf(stderr,
                PROG ": warning: %s%s%s: R-hat largest %.3f, ESS smallest %.0f; the chains may not have converged "
                     "(want R-hat <= %.2f and ESS >= %.0f)\n  hint: run longer (--iterations, --warmup)\n",
                label, sp, tf_model_name(p->model), rhat, ess, TF_FIT_RHAT_MAX, TF_FIT_ESS_MIN);
    }
    if (from != TF_FORECAST_AVERAGE)
        return;
    const tf_comparison *c = tf_analysis_pop_comparison(p->pop);
    for (size_t i = 0; i < tf_analysis_pop_n_models(p->pop); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(p->pop, i);
        if (m->state == TF_CANDIDATE_FAILED)
            fprintf(stderr, PROG ": warning: %s%s%s: %s\n", label, sp, m->name, m->note);
        if (m->probability > 0 && !tf_fit_converged(m->fit))
            fprintf(stderr,
                    PROG ": warning: %s%s%s (probability %.3f): R-hat largest %.3f, ESS smallest %.0f; the chains may "
                         "not have converged\n  hint: run longer (--iterations, --warmup)\n",
                    label, sp, m->name, m->probability, tf_comparison_figures(c, i)->rhat_max,
                    tf_comparison_figures(c, i)->ess_min);
    }
}

/* ---- the run ------------------------------------------------------------------------------------- */

/* The forecast options from the command line: the source and its models, the projection
 * settings po, and the sampler settings over the defaults of the source (a lone fit's for
 * --model, the analysis's for --average). */
static void forecast_options(options *o, const tf_project_options *po, tf_forecast_options *fo, char *growth_buf,
                             char *obs_buf, size_t buf_size, tf_error *err)
{
    tf_forecast_source from = o->from == FROM_FIXED ? TF_FORECAST_FIXED : o->from == FROM_MODEL ? TF_FORECAST_MODEL
                              : o->from == FROM_AVERAGE ? TF_FORECAST_AVERAGE : TF_FORECAST_NONE;
    tf_forecast_options_init(fo, from, err);
    tf_analysis_options *ro = &fo->run;
    ro->project = *po;
    ro->seed = o->seed;
    ro->estimates = o->in.estimates;
    ro->scenarios = o->scenarios;
    ro->n_scenarios = o->n_scenarios;
    ro->safe = o->safe;
    ro->population = o->population;
    fo->start = o->start;
    if (from == TF_FORECAST_FIXED) {
        fo->growth = o->model;
        fo->obs = o->obs;
        for (size_t i = 0; i < o->fixed.n && i < TF_FORECAST_MAX_FIXED; i++) {
            fo->fixed_names[i] = o->fixed.items[i].name;
            fo->fixed_values[i] = o->fixed.items[i].value;
        }
        fo->n_fixed = o->fixed.n;
        return;
    }
    ro->n_threads = tf_args_default_threads(TF_ARGS_MAX_THREADS);
    tf_args_sampler_user(&o->sampler, &o->user);
    if (from == TF_FORECAST_MODEL) {
        fo->growth = o->model;
        fo->obs = o->obs ? o->obs : tf_input_default_obs(&o->in);
        ro->fit = tf_pmmh_default_options();
        /* The comparison's options were refused with --model (check_source). */
        tf_args_sampler_apply(&o->sampler, &ro->fit, NULL, &ro->seed, &ro->n_threads, err);
        ro->priors = priors_of_one;
        ro->priors_ctx = &o->user;
        return;
    }
    int all = 0;
    if (o->model)
        tf_args_model_names("--model", o->model, growth_buf, buf_size, ro->growth, TF_ANALYSIS_MAX_NAMES, &ro->n_growth,
                            &all, 1, err);
    if (o->obs)
        tf_args_model_names("--obs", o->obs, obs_buf, buf_size, ro->obs, TF_ANALYSIS_MAX_NAMES, &ro->n_obs,
                            &ro->obs_auto, 0, err);
    tf_input_check_obs(&o->in, "--obs", ro->obs, ro->n_obs, err);
    tf_args_sampler_apply(&o->sampler, &ro->fit, &ro->evidence, &ro->seed, &ro->n_threads, err);
    if (tf_error_status(err) == TF_OK)
        tf_args_sampler_weights(&o->sampler, ro->growth, ro->n_growth, ro->obs, ro->obs_auto ? 0 : ro->n_obs,
                                o->weight_names, o->weights, &ro->n_weights, err);
    ro->weight_names = o->weight_names;
    ro->weights = o->weights;
    ro->priors = tf_setup_user_priors;
    ro->priors_ctx = &o->user;
}

/* Progress of --model on a terminal: a line before each fit. */
static void model_progress(void *ctx, const tf_analysis_event *e)
{
    const tf_pmmh_options *opt = ctx;
    if (e->stage == TF_ANALYSIS_STARTED)
        fprintf(stderr, "%s%s%s: fitting by PMMH (%zu chains, %zu warm-up iterations, then %zu to %zu until they "
                "converge)...\n", e->label, e->label[0] ? " " : "", e->model, opt->n_chains, opt->n_warmup,
                opt->min_iter, opt->max_iter);
}

/* The checks the command makes with the survey's path and the model files before the long work:
 * every output folder, the counts against the model (naming the line), and for --average every
 * candidate's model files and that some candidate suits each population. Fills the jobs' folders. */
static tf_status check_before(const options *o, const tf_forecast_options *fo, const tf_survey *sv,
                              const tf_series *only, job *jobs, size_t n_jobs, tf_error *err)
{
    tf_args_folders folders;
    tf_status st = tf_args_folders_new(sv, &folders, err);
    for (size_t i = 0; i < n_jobs && st == TF_OK; i++) {
        const tf_series *s = sv ? (only ? only : tf_survey_series(sv, i)) : NULL;
        const char *label = s ? tf_series_label(s) : "";
        if ((st = job_dir(o, sv, &folders, label, jobs[i].dir, sizeof jobs[i].dir, err)) == TF_OK)
            st = tf_args_probe_output_dir(jobs[i].dir, o->survey_path, err);
    }
    tf_args_folders_free(&folders);
    if (st != TF_OK)
        return st;
    if (fo->source == TF_FORECAST_MODEL) {
        for (size_t i = 0; i < n_jobs; i++) {
            tf_model *m = NULL;
            if ((st = tf_model_new(fo->growth, fo->obs, &m, err)) == TF_OK)
                st = tf_setup_check_counts(m, only ? only : tf_survey_series(sv, i), o->survey_path, err);
            tf_model_free(m);
            if (st != TF_OK)
                return st;
        }
    } else if (fo->source == TF_FORECAST_AVERAGE) {
        const tf_analysis_options *ao = &fo->run;
        if ((st = tf_setup_check_candidates(&o->user, ao->growth, ao->n_growth, ao->obs, ao->n_obs,
                                            only ? only : tf_survey_series(sv, 0), err)) != TF_OK)
            return st;
        for (size_t i = 0; i < n_jobs; i++) {
            const tf_series *s = only ? only : tf_survey_series(sv, i);
            const char *names[TF_ANALYSIS_MAX_NAMES];
            size_t n = tf_analysis_candidate_obs(ao, s, names, TF_ANALYSIS_MAX_NAMES);
            if ((st = tf_setup_check_any_suits(names, n, s, o->survey_path, err)) != TF_OK)
                return st;
        }
    }
    return TF_OK;
}

/* Reads the survey, checks, runs the forecast, writes the tables and prints the summaries.
 * Returns the exit code. */
static int run(options *o, const tf_project_options *po)
{
    tf_error err;
    tf_error_init(&err);
    char growth_buf[1024], obs_buf[1024];
    tf_forecast_options fo;
    forecast_options(o, po, &fo, growth_buf, obs_buf, sizeof growth_buf, &err);
    /* fit's own refusal of model names, so that both commands word it alike. */
    if (fo.source == TF_FORECAST_MODEL && tf_error_status(&err) == TF_OK)
        tf_args_check_model(fo.growth, fo.obs, &err);
    if (tf_error_status(&err) != TF_OK || tf_forecast_check_options(&fo, &err) != TF_OK)
        return tf_messages_usage(PROG, &err);

    int rc = TF_EXIT_FAIL;
    tf_survey *sv = NULL;
    tf_forecast *f = NULL;
    job *jobs = NULL;
    size_t n_jobs = 0;
    const tf_series *only = NULL;
    tf_status st = TF_OK;
    if (o->survey_path) {
        if ((st = tf_input_read(&o->in, o->survey_path, stderr, PROG, &sv, &err)) != TF_OK) {
            /* A failure while the survey itself is read is the input's (tf_args_exit_code). */
            rc = st == TF_ERR_USAGE ? TF_EXIT_USAGE : TF_EXIT_INPUT;
            tf_error_print(&err, PROG, stderr);
            goto out;
        }
        /* --parameter and --start describe one population. */
        if ((fo.source == TF_FORECAST_FIXED || o->population || !isnan(o->start)) &&
            !(only = tf_args_pick_series(sv, o->population, o->survey_path, &err))) {
            if (!o->population && fo.source != TF_FORECAST_FIXED)
                tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--start gives the abundance of one population");
            st = TF_ERR_USAGE;
            goto fail;
        }
        fo.run.population = only ? tf_series_label(only) : NULL;
    }
    n_jobs = sv && !only ? tf_survey_n_series(sv) : 1;
    if (!(jobs = calloc(n_jobs, sizeof *jobs))) {
        st = tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
        goto fail;
    }
    if ((st = check_before(o, &fo, sv, only, jobs, n_jobs, &err)) != TF_OK)
        goto fail;
    int show = !o->quiet && isatty(STDERR_FILENO);
    char name[256];
    tf_args_survey_name(o->survey_path ? o->survey_path : "forecast", name, sizeof name);
    tf_analysis_progress_fn progress = !show ? NULL : fo.source == TF_FORECAST_AVERAGE ? tf_messages_analysis
                                                                                       : model_progress;
    void *progress_ctx = fo.source == TF_FORECAST_AVERAGE ? (void *)name : (void *)&fo.run.fit;
    if ((st = tf_forecast_run(sv, &fo, tf_signals_flag(), progress, progress_ctx, &f, &err)) != TF_OK)
        goto fail;
    /* The library's populations are the ones whose folders were checked, in the same order. */
    assert(tf_forecast_n_populations(f) == n_jobs);
    for (size_t i = 0; i < n_jobs; i++)
        jobs[i].p = tf_forecast_population(f, i);
    for (size_t i = 0; i < n_jobs && st == TF_OK; i++) {
        char base[256], unit[TF_TABLES_UNIT_SIZE];
        tf_args_survey_name(o->survey_path ? o->survey_path : "-", base, sizeof base);
        const tf_forecast_pop *fp = jobs[i].p;
        /* The population as every table names it: its label, or the survey's name when the survey
         * has none; blank for a forecast without a survey. */
        const char *population = fp->label[0] ? fp->label : o->survey_path ? base : "";
        st = tf_forecast_tables_build(f, fp, population, o->survey_path, jobs[i].tables, &err);
        if (st == TF_OK && fp->scenarios) {
            tf_forecast_source from = fo.source;
            tf_projection_place place = {.population = population,
                                         .model = from == TF_FORECAST_AVERAGE ? "average"
                                                  : from == TF_FORECAST_FIXED ? "fixed"
                                                                              : tf_model_name(fp->model),
                                         .unit = fp->series ? tf_tables_unit(fp->series, unit, sizeof unit) : TF_UNIT_ANIMALS,
                                         .year0 = fp->year0};
            st = tf_scenario_tables_build(fp->scenarios, &place, fp->status_quo, fp->status_quo_years,
                                          jobs[i].tables + N_TABLES, &err);
        }
    }
    if (st == TF_OK && *tf_signals_flag())
        st = tf_error_add(&err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
    if (st == TF_OK)
        st = write_tables(jobs, n_jobs, o->survey_path, &err);
    if (st != TF_OK)
        goto fail;
    for (size_t i = 0; i < n_jobs; i++) {
        if (!o->quiet) {
            if (i > 0)
                putchar('\n');
            if (fo.source == TF_FORECAST_FIXED)
                print_fixed_notes(f, jobs[i].p);
            print_source(f, jobs[i].p);
            print_projection(f, &jobs[i]);
            print_management(jobs[i].p);
        }
        print_warnings(f, jobs[i].p);
    }
    if (!o->quiet)
        print_cautions(f);
    rc = fflush(stdout) != 0 ? tf_messages_error(PROG, TF_EXIT_FAIL, NULL, "cannot write to standard output")
                             : TF_EXIT_OK;
    goto out;
fail:
    rc = tf_args_exit_code(st);
    if (rc != TF_EXIT_INTERRUPTED)
        tf_error_print(&err, PROG, stderr);
out:
    jobs_free(jobs, n_jobs);
    tf_forecast_free(f);
    tf_survey_free(sv);
    return rc;
}

/* ---- the command line ---------------------------------------------------------------------------- */

enum { OPT_MODEL = 256, OPT_OBS, OPT_AVERAGE, OPT_YEARS, OPT_THRESHOLD, OPT_WINDOW, OPT_RUNS, OPT_PARAMETER,
       OPT_START, OPT_POPULATION, OPT_SKIP, OPT_ESTIMATES, OPT_SCENARIO, OPT_SAFE, OPT_COUNTED, OPT_EFFORT_NAME };

/* Fills o from the command line, collecting every problem in err. Returns 1 when --help was
 * shown (nothing else to do), else 0; the caller checks err. */
static int parse_options(int argc, char **argv, options *o, tf_error *err)
{
    static const struct option longs[] = {
        {"model", required_argument, NULL, OPT_MODEL},
        {"obs", required_argument, NULL, OPT_OBS},
        {"average", no_argument, NULL, OPT_AVERAGE},
        {"years", required_argument, NULL, OPT_YEARS},
        {"threshold", required_argument, NULL, OPT_THRESHOLD},
        {"decline-window", required_argument, NULL, OPT_WINDOW},
        {"runs", required_argument, NULL, OPT_RUNS},
        {"parameter", required_argument, NULL, OPT_PARAMETER},
        {"start", required_argument, NULL, OPT_START},
        {"population", required_argument, NULL, OPT_POPULATION},
        {"skip-unusable", no_argument, NULL, OPT_SKIP},
        {"estimates", no_argument, NULL, OPT_ESTIMATES},
        {"scenario", required_argument, NULL, OPT_SCENARIO},
        {"safe-removal", required_argument, NULL, OPT_SAFE},
        {"counted-fraction", required_argument, NULL, OPT_COUNTED},
        {"effort-name", required_argument, NULL, OPT_EFFORT_NAME},
        TF_ARGS_SAMPLER_LONGOPTS,
        TF_ARGS_ML_LONGOPTS,
        {"output", required_argument, NULL, 'o'},
        {"quiet", no_argument, NULL, 'q'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    memset(o, 0, sizeof *o);
    tf_args_pairs_init(&o->fixed);
    tf_args_sampler_init(&o->sampler);
    o->years = TF_PROJECT_DEFAULT_HORIZON;
    o->thresholds = DEFAULT_THRESHOLDS;
    o->start = NAN;
    o->seed = DEFAULT_SEED;
    opterr = 0;
    optind = 0; /* glibc: 0 restarts the scan, so the command can be run twice in one process */
    int c;
    while ((c = getopt_long(argc, argv, ":o:qh", longs, NULL)) != -1) {
        switch (c) {
        case OPT_MODEL: o->model = optarg; break;
        case OPT_OBS: o->obs = optarg; break;
        case OPT_AVERAGE: o->average = 1; break;
        case OPT_THRESHOLD: o->thresholds = optarg; break;
        case OPT_PARAMETER:
            o->have_fixed = 1;
            tf_args_parse_pairs("--parameter", optarg, &o->fixed, err);
            break;
        case OPT_POPULATION: tf_input_set_population(&o->in, optarg, err); break;
        case OPT_SKIP: o->in.skip_unusable = 1; break;
        case OPT_ESTIMATES: o->in.estimates = 1; break;
        case OPT_SCENARIO:
            if (o->n_scenarios == TF_SCENARIO_MAX)
                tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--scenario: more than %d scenarios",
                             TF_SCENARIO_MAX);
            else if (tf_scenario_parse(optarg, &o->scenarios[o->n_scenarios], err) == TF_OK)
                o->n_scenarios++;
            break;
        case OPT_SAFE:
            if (o->safe.years > 0)
                tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give --safe-removal once", TF_SAFE_REMOVAL_TWICE);
            else
                tf_safe_removal_parse(optarg, &o->safe, err);
            break;
        case OPT_COUNTED: tf_input_set_counted_fraction(&o->in, optarg, err); break;
        case OPT_EFFORT_NAME: tf_input_set_effort_name(&o->in, optarg, err); break;
        case 'o': o->out_dir = optarg; break;
        case 'q': o->quiet = 1; break;
        case 'h': help(stdout); return 1;
        case OPT_YEARS: tf_args_parse_size("--years", optarg, 1, TF_PROJECT_MAX_HORIZON, &o->years, err); break;
        case OPT_WINDOW:
            tf_args_parse_size("--decline-window", optarg, 1, TF_PROJECT_MAX_HORIZON, &o->decline_window, err);
            break;
        case OPT_RUNS: tf_args_parse_size("--runs", optarg, 1, MAX_RUNS, &o->runs, err); break;
        case OPT_START:
            /* Above e^50 (5e21) the log-abundance leaves the projection's range. */
            if (tf_args_parse_double("--start", optarg, &o->start, err) == TF_OK &&
                !(o->start > 0 && log(o->start) <= TF_PROJECT_LOG_MAX && log(o->start) >= TF_PROJECT_LOG_MIN))
                tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                             "--start: the current abundance must be > 0 and below 5e21");
            break;
        default:
            if (!tf_args_sampler_option(c, optarg, &o->sampler, err))
                tf_args_getopt_error(CMD, c, optopt, argv[optind - 1], err);
            break;
        }
    }
    if (o->sampler.seed_given)
        o->seed = o->sampler.seed;
    o->survey_path = tf_args_survey_path(argc, argv, optind, err);
    o->population = tf_input_single(&o->in);
    return 0;
}

/* Picks the source of futures and refuses the combinations that mean nothing. */
static void check_source(options *o, tf_error *err)
{
    if (o->average && o->have_fixed) {
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                     "--average combines fitted models; with --parameter there is nothing to average");
        return;
    }
    o->from = o->have_fixed ? FROM_FIXED : o->average ? FROM_AVERAGE : o->model ? FROM_MODEL : FROM_NONE;
    switch (o->from) {
    case FROM_NONE:
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0,
                     "give --model M [--obs O] to fit one model, --average to fit the candidate models and average "
                     "them, or --parameter r=...,sigma=... for given values",
                     o->obs ? "--obs needs --model M (or --average)" : "nothing to project from");
        return;
    case FROM_FIXED:
        if (o->sampler.first)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "drop it, or fit with --model M instead of --parameter",
                         "%s sets up a fit; --parameter projects from given values", o->sampler.first);
        if (!o->survey_path && isnan(o->start))
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                         "without a survey file, --start N (the current abundance) is required");
        if (!o->survey_path && o->in.n_labels)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--population needs a survey file");
        return;
    case FROM_MODEL: {
        const char *obs = o->obs ? o->obs : tf_input_default_obs(&o->in);
        tf_input_check_obs(&o->in, "--obs", &obs, 1, err);
    }
        if (strchr(o->model, ',') || (o->obs && strchr(o->obs, ',')))
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "add --average to compare and average several models",
                         "--model and --obs name one model each without --average");
        if (o->sampler.first_ml)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                         "%s belongs to the comparison of models by marginal likelihood, which only --average "
                         "makes",
                         o->sampler.first_ml);
        break;
    case FROM_AVERAGE:
        break;
    }
    if (!o->survey_path)
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give the survey file to fit",
                     "--%s fits the counts of a survey", o->from == FROM_AVERAGE ? "average" : "model");
}

int tf_cmd_forecast(int argc, char **argv)
{
    options o;
    tf_error err;
    tf_error_init(&err);
    if (parse_options(argc, argv, &o, &err))
        return TF_EXIT_OK;
    if (tf_error_status(&err) != TF_OK)
        return tf_messages_usage(PROG, &err);
    check_source(&o, &err);

    tf_project_options po;
    tf_project_options_init(&po);
    po.horizon = o.years;
    po.n_runs = o.runs;
    po.decline_window = o.decline_window;
    tf_project_parse_thresholds(o.thresholds, po.thresholds, TF_PROJECT_MAX_THRESHOLDS, &po.n_thresholds, &err);
    if (tf_error_status(&err) != TF_OK)
        return tf_messages_usage(PROG, &err);

    tf_signals saved;
    tf_signals_catch(&saved);
    int rc = run(&o, &po);
    if (rc == TF_EXIT_INTERRUPTED)
        fprintf(stderr, PROG ": interrupted; no tables written\n");
    tf_signals_restore(&saved);
    return rc;
}

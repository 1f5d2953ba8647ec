/* The records a batch keeps beside the populations' tables; see records.h. */
#include "batch/records.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "util/version.h"

static tf_status nomem(tf_error *err) { return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory"); }

/* ---- the settings record ---- */

/* Appends a printf-style line to a memory stream. */
static void line(FILE *f, const char *key, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static void line(FILE *f, const char *key, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fprintf(f, "%s ", key);
    vfprintf(f, fmt, ap);
    fputc('\n', f);
    va_end(ap);
}

static void names_line(FILE *f, const char *key, const char *const *names, size_t n, const char *none)
{
    fprintf(f, "%s ", key);
    if (!n)
        fputs(none, f);
    for (size_t i = 0; i < n; i++)
        fprintf(f, "%s%s", i ? "," : "", names[i]);
    fputc('\n', f);
}

/* Every setting that changes a number in the outputs, one per line, so that a mismatch can be
 * named. The thread count is not among them: the results do not depend on it. */
tf_status tf_records_settings(const tf_analysis_options *a, const char *sha256, int workbooks, int workbook_draws,
                              const char *extra, char **out, tf_error *err)
{
    char *text = NULL;
    size_t len = 0;
    *out = NULL;
    FILE *f = open_memstream(&text, &len);
    if (!f)
        return nomem(err);
    fputs("# tallyfit batch settings: a run in this folder continues an earlier one only with the same lines\n", f);
    line(f, "program", "tallyfit %s", TF_VERSION);
    line(f, "survey-sha256", "%s", sha256);
    line(f, "seed", "%llu", (unsigned long long)a->seed);
    /* A setting that an option sets is keyed by the option's name; the others (the sampler's
     * and the marginal likelihood's fixed constants) by plain names of their own. */
    names_line(f, "model", a->growth, a->n_growth, "all");
    if (a->obs_auto)
        line(f, "obs", "%s", "all that suit");
    else
        names_line(f, "obs", a->obs, a->n_obs, "default");
    /* Written only when set, so that the records of earlier batches stay the same. */
    if (a->estimates)
        line(f, "estimates", "%s", "yes (continuous counting-error models only)");
    if (a->counted_fraction > 0 && a->counted_fraction != 1)
        line(f, "counted-fraction", "%.17g", a->counted_fraction);
    line(f, "chains", "%zu", a->fit.n_chains);
    line(f, "min-iterations", "%zu", a->fit.min_iter);
    line(f, "max-iterations", "%zu", a->fit.max_iter);
    line(f, "min-ess", "%.17g", a->fit.min_ess);
    line(f, "kept-draws", "%zu", a->fit.max_kept);
    line(f, "thin", "%zu", a->fit.thin);
    line(f, "recent-years", "%zu", a->fit.recent_years ? a->fit.recent_years : (size_t)TF_FIT_RECENT_YEARS);
    line(f, "warmup", "%zu", a->fit.n_warmup);
    line(f, "particles", "%zu", a->fit.n_particles);
    line(f, "correlated", "%s", a->fit.correlated ? "on" : "off");
    line(f, "correlated-rho", "%.17g", a->fit.rho);
    line(f, "pilot-particles", "%zu", a->fit.pilot_particles);
    line(f, "delayed-acceptance", "%s", a->fit.delayed ? "on" : "off");
    line(f, "proposal", "%s", tf_filter_proposal_name(a->fit.proposal));
    const tf_evidence_options *e = &a->evidence;
    line(f, "draws", "%zu", e->n_draws);
    line(f, "ml-min-draws", "%zu", e->min_draws);
    line(f, "ml-se", "%.17g", e->target_se);
    line(f, "ml-adapt", "%zu %zu", e->n_adapt_rounds, e->n_adapt_draws);
    line(f, "ml-mixture", "%.17g %zu %.17g %.17g", e->nu, e->n_components, e->defensive_weight, e->defensive_scale);
    line(f, "ml-check", "%.17g %.17g", e->check_nu, e->check_scale);
    line(f, "ml-particles", "%zu %.17g", e->n_particles, e->target_sd);
    const tf_project_options *p = &a->project;
    line(f, "years", "%zu", p->horizon);
    line(f, "runs", "%zu", p->n_runs);
    fputs("threshold", f);
    for (size_t k = 0; k < p->n_thresholds; k++) {
        char lab[48];
        fprintf(f, "%c%s", k ? ',' : ' ', tf_project_threshold_label(&p->thresholds[k], lab, sizeof lab));
    }
    fputc('\n', f);
    fputs("declines", f);
    for (size_t k = 0; k < p->n_declines; k++)
        fprintf(f, "%c%.17g", k ? ',' : ' ', p->declines[k]);
    fputc('\n', f);
    line(f, "decline-window", "%zu", p->decline_window);
    /* Only when asked, so that the record of a batch without them stays as it was. */
    for (size_t i = 0; i < a->n_scenarios; i++) {
        const tf_scenario *sc = &a->scenarios[i];
        line(f, "scenario", "%s: remove %d %d %.17g add %d %.17g growth %.17g capacity %.17g from %d", sc->label,
             sc->has_remove, sc->remove_share, sc->remove, sc->has_add, sc->add, sc->growth, sc->capacity,
             sc->from_year);
    }
    if (a->safe.years > 0)
        line(f, "safe-removal", "%.17g %zu %s", a->safe.risk, a->safe.years, a->safe.share ? "share" : "count");
    line(f, "population-workbooks", "%s", workbooks ? "yes" : "no");
    /* Only with workbooks, where it changes what is written: a batch without them keeps the
     * record it had before the draws left the workbooks. */
    if (workbooks)
        line(f, "workbook-draws", "%s", workbook_draws ? "yes" : "no");
    if (extra && extra[0]) {
        fputs(extra, f);
        if (extra[strlen(extra) - 1] != '\n')
            fputc('\n', f);
    }
    if (fclose(f) != 0 || !text) {
        free(text);
        return nomem(err);
    }
    *out = text;
    return TF_OK;
}

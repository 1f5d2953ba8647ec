/* Unit tests for management scenarios in the projection and the largest safe removal: exact
 * identities of the exponential model, the plain projection kept bit for bit, common random
 * numbers, bad scenarios, and the safe removal's monotonicity. */
#include "tf_test.h"
#include <math.h>
#include <string.h>

#include "model/model.h"
#include "project/project.h"
#include "project/safe_removal.h"
#include "project/scenario.h"

#define N_DRAWS 40

/* Posterior-like draws of one growth model: drift parameters, sigma; starts around n0. The values
 * are spread deterministically so that every test sees the same draws. */
typedef struct {
    double theta[N_DRAWS * 3];
    double x0[N_DRAWS];
    tf_project_input in;
} draws;

static void exp_draws(draws *d, double r, double sigma, double n0)
{
    const tf_growth_type *g = tf_model_find_growth("exponential");
    ck_assert_ptr_nonnull(g);
    for (size_t i = 0; i < N_DRAWS; i++) {
        double u = ((double)i + 0.5) / N_DRAWS - 0.5;
        d->theta[2 * i] = r + 0.04 * u;
        d->theta[2 * i + 1] = sigma * (1 + 0.5 * u);
        d->x0[i] = log(n0) + 0.2 * u;
    }
    d->in = (tf_project_input){g, 1, 2, N_DRAWS, d->theta, d->x0, 1.0};
}

static void ricker_draws(draws *d, double r, double K, double sigma, double n0)
{
    const tf_growth_type *g = tf_model_find_growth("ricker");
    ck_assert_ptr_nonnull(g);
    for (size_t i = 0; i < N_DRAWS; i++) {
        double u = ((double)i + 0.5) / N_DRAWS - 0.5;
        d->theta[3 * i] = r + 0.1 * u;
        d->theta[3 * i + 1] = K * (1 + 0.2 * u);
        d->theta[3 * i + 2] = sigma;
        d->x0[i] = log(n0) + 0.2 * u;
    }
    d->in = (tf_project_input){g, 2, 3, N_DRAWS, d->theta, d->x0, 1.0};
}

static tf_rng stream(void)
{
    tf_rng rng;
    tf_project_stream(&rng, 7, "scenario-test");
    return rng;
}

static void options(tf_project_options *o, size_t horizon, size_t runs)
{
    tf_project_options_init(o);
    o->horizon = horizon;
    o->n_runs = runs;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_project_parse_thresholds("200,50%", o->thresholds, TF_PROJECT_MAX_THRESHOLDS,
                                                 &o->n_thresholds, &err),
                     TF_OK);
}

static tf_projection *project(const tf_project_input *in, const tf_project_options *o)
{
    tf_error err;
    tf_error_init(&err);
    tf_rng rng = stream();
    tf_projection *p = NULL;
    tf_status st = tf_project_run(in, 1, o, &rng, &p, &err);
    if (st)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    return p;
}

static tf_scenario parse_ok(const char *text)
{
    tf_error err;
    tf_error_init(&err);
    tf_scenario sc;
    tf_status st = tf_scenario_parse(text, &sc, &err);
    if (st)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    return sc;
}

static tf_scenario_set *run_set(const tf_project_input *in, const tf_project_options *o, const tf_scenario *sc,
                                size_t n, int year0, double q)
{
    tf_error err;
    tf_error_init(&err);
    tf_rng rng = stream();
    tf_scenario_set *s = NULL;
    tf_status st = tf_scenario_set_run(in, 1, o, &rng, sc, n, year0, q, &s, &err);
    if (st)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    return s;
}

/* Equal to rounding: the two sides add the same numbers in another order, a few ulps per year
 * over the horizon, and exp of a log-abundance near 6 turns that into relative 1e-12 at most. */
#define ROUNDING 1e-11

static void assert_same_projection(const tf_projection *a, const tf_projection *b)
{
    size_t H = tf_projection_horizon(a);
    ck_assert_uint_eq(H, tf_projection_horizon(b));
    for (size_t t = 0; t <= H; t++) {
        for (int k = 0; k < TF_BAND_COUNT; k++) {
            double va = tf_projection_band(a, t, (tf_band)k), vb = tf_projection_band(b, t, (tf_band)k);
            ck_assert_msg(fabs(va - vb) <= ROUNDING * fabs(vb), "year %zu band %d: %.17g vs %.17g", t, k, va, vb);
        }
        for (size_t k = 0; k < tf_projection_n_thresholds(a); k++)
            ck_assert_double_eq(tf_projection_risk(a, k, t), tf_projection_risk(b, k, t));
    }
    for (size_t w = 0; w < tf_projection_n_windows(a); w++)
        for (size_t d = 0; d < tf_projection_n_declines(a); d++)
            ck_assert_double_eq(tf_projection_decline_prob(a, w, d), tf_projection_decline_prob(b, w, d));
}

/* Exponential model, x' = x + r + sigma eps (Dennis, Munholland & Scott 1991, eq. 1): removing a
 * share P each year gives x' = x + ln(1 - P) + r + sigma eps, the model with r + ln(1 - P), and
 * growth=D the model with r + D. Same random numbers, so equal to rounding. */
START_TEST(exponential_share_and_growth_identities)
{
    tf_project_options o;
    options(&o, 40, 3000);
    draws base, shifted;
    exp_draws(&base, 0.01, 0.12, 600);
    tf_scenario sc[2] = {parse_ok("cull:remove=8%"), parse_ok("better survival:growth=0.03")};
    tf_scenario_set *s = run_set(&base.in, &o, sc, 2, 2020, 1.0);
    const double shift[2] = {log1p(-0.08), 0.03};
    for (size_t i = 0; i < 2; i++) {
        exp_draws(&shifted, 0.01, 0.12, 600);
        for (size_t d = 0; d < N_DRAWS; d++)
            shifted.theta[2 * d] += shift[i];
        tf_projection *ref = project(&shifted.in, &o);
        assert_same_projection(tf_scenario_set_projection(s, i), ref);
        tf_projection_free(ref);
    }
    tf_scenario_set_free(s);
}
END_TEST

/* The capacity key multiplies K: the same as projecting draws with K times F (Ricker 1954 model),
 * bit for bit since the product is the same. */
START_TEST(capacity_is_k_times_f)
{
    tf_project_options o;
    options(&o, 30, 2000);
    draws base, wider;
    ricker_draws(&base, 0.3, 500, 0.15, 450);
    tf_scenario sc = parse_ok("habitat:capacity=1.5");
    tf_scenario_set *s = run_set(&base.in, &o, &sc, 1, 2020, 1.0);
    ricker_draws(&wider, 0.3, 500, 0.15, 450);
    for (size_t d = 0; d < N_DRAWS; d++)
        wider.theta[3 * d + 1] *= 1.5;
    tf_projection *ref = project(&wider.in, &o);
    assert_same_projection(tf_scenario_set_projection(s, 0), ref);
    tf_projection_free(ref);
    tf_scenario_set_free(s);
}
END_TEST

/* Without removals the status quo of a scenario set is the plain projection digit for digit, and
 * a scenario acting from a later year follows it exactly until then. */
START_TEST(status_quo_is_the_plain_projection)
{
    tf_project_options o;
    options(&o, 25, 1500);
    draws base;
    ricker_draws(&base, 0.2, 800, 0.2, 700);
    tf_projection *plain = project(&base.in, &o);
    tf_scenario sc = parse_ok("later:remove=50,from=2031");
    tf_scenario_set *s = run_set(&base.in, &o, &sc, 1, 2020, 1.0);
    const tf_projection *sq = tf_scenario_set_status_quo(s), *later = tf_scenario_set_projection(s, 0);
    for (size_t t = 0; t <= 25; t++)
        for (int k = 0; k < TF_BAND_COUNT; k++) {
            ck_assert_double_eq(tf_projection_band(sq, t, (tf_band)k), tf_projection_band(plain, t, (tf_band)k));
            /* from=2031 acts in the step into 2031, years_ahead 11: years 0..10 are untouched. */
            if (t <= 10)
                ck_assert_double_eq(tf_projection_band(later, t, (tf_band)k), tf_projection_band(plain, t, (tf_band)k));
        }
    ck_assert(tf_projection_band(later, 11, TF_BAND_MEDIAN) < tf_projection_band(plain, 11, TF_BAND_MEDIAN));
    tf_projection_free(plain);
    tf_scenario_set_free(s);
}
END_TEST

/* A removal of N animals at counted fraction q takes q N count units: the same as q = 1 with
 * N q animals. And a release of the same number as a removal cancels it exactly. */
START_TEST(counted_fraction_scales_the_take)
{
    tf_project_options o;
    options(&o, 20, 1000);
    draws base;
    ricker_draws(&base, 0.25, 600, 0.1, 550);
    tf_scenario a = parse_ok("a:remove=40"), b = parse_ok("b:remove=20"), c = parse_ok("c:remove=30,add=30");
    tf_scenario_set *sa = run_set(&base.in, &o, &a, 1, 2020, 0.5);
    tf_scenario_set *sb = run_set(&base.in, &o, &b, 1, 2020, 1.0);
    tf_scenario_set *sc = run_set(&base.in, &o, &c, 1, 2020, 1.0);
    tf_projection *plain = project(&base.in, &o);
    for (size_t t = 0; t <= 20; t++) {
        ck_assert_double_eq(tf_projection_band(tf_scenario_set_projection(sa, 0), t, TF_BAND_MEDIAN),
                            tf_projection_band(tf_scenario_set_projection(sb, 0), t, TF_BAND_MEDIAN));
        /* The zero net take is the zero action: the plain step. */
        ck_assert_double_eq(tf_projection_band(tf_scenario_set_projection(sc, 0), t, TF_BAND_MEDIAN),
                            tf_projection_band(plain, t, TF_BAND_MEDIAN));
    }
    tf_projection_free(plain);
    tf_scenario_set_free(sa);
    tf_scenario_set_free(sb);
    tf_scenario_set_free(sc);
}
END_TEST

/* Common random numbers: the paired error of a difference is far below either projection's own
 * binomial error and below the error of a difference of independent projections,
 * sqrt(se_a^2 + se_b^2) (the reason for pairing; Glasserman 2004, Monte Carlo Methods in
 * Financial Engineering, section 4.2 on common random numbers, from memory). A small removal
 * moves few runs across the threshold, so the paired error is a fraction of the unpaired one;
 * "far below" is taken as under a third. */
START_TEST(common_random_numbers_shrink_the_error)
{
    tf_project_options o;
    options(&o, 30, 4000);
    draws base;
    ricker_draws(&base, 0.15, 400, 0.25, 380);
    tf_scenario sc = parse_ok("light cull:remove=2");
    tf_scenario_set *s = run_set(&base.in, &o, &sc, 1, 2020, 1.0);
    const tf_projection *a = tf_scenario_set_projection(s, 0), *b = tf_scenario_set_status_quo(s);
    tf_error err;
    tf_error_init(&err);
    for (size_t k = 0; k < 2; k++) {
        double diff, mcse, ra = tf_projection_risk(a, k, 30), rb = tf_projection_risk(b, k, 30);
        ck_assert_int_eq(tf_scenario_set_risk_difference(s, 0, k, 30, &diff, &mcse, &err), TF_OK);
        ck_assert_double_eq_tol(diff, ra - rb, 1e-12);
        double se_a = tf_projection_risk_se(a, k, 30), se_b = tf_projection_risk_se(b, k, 30);
        ck_assert_msg(ra > 0.05 && ra < 0.95, "threshold %zu: risk %g is too extreme for the check", k, ra);
        ck_assert_msg(mcse < sqrt(se_a * se_a + se_b * se_b) / 3, "threshold %zu: paired %g vs %g, %g", k, mcse, se_a,
                      se_b);
        ck_assert(diff > 0); /* a removal never lowers the risk of the same runs here */
    }
    double diff, mcse;
    ck_assert_int_eq(tf_scenario_set_decline_difference(s, 0, 0, 0, &diff, &mcse, &err), TF_OK);
    ck_assert(diff >= 0 && mcse < tf_projection_decline_se(a, 0, 0));
    tf_scenario_set_free(s);
}
END_TEST

static void parse_fails(const char *text, tf_status want, const char *word)
{
    tf_error err;
    tf_error_init(&err);
    tf_scenario sc;
    ck_assert_int_eq(tf_scenario_parse(text, &sc, &err), want);
    const char *msg = (err.n_items ? err.items[0].what : NULL);
    ck_assert_msg(msg && strstr(msg, word), "'%s': message '%s' does not name '%s'", text, msg ? msg : "", word);
}

START_TEST(bad_scenarios_name_the_key)
{
    parse_fails("hunt:remov=40", TF_ERR_PARSE, "remov");
    parse_fails("hunt:remove=forty", TF_ERR_PARSE, "remove=forty");
    parse_fails("hunt:remove=100%", TF_ERR_RANGE, "remove");
    parse_fails("hunt:add=-3", TF_ERR_RANGE, "add");
    parse_fails("hunt:capacity=0", TF_ERR_RANGE, "capacity");
    parse_fails("hunt:growth=9", TF_ERR_RANGE, "growth");
    parse_fails("hunt:from=2030.5", TF_ERR_RANGE, "from");
    parse_fails("hunt:growth=5%", TF_ERR_PARSE, "growth");
    parse_fails("hunt:remove=4,remove=5", TF_ERR_PARSE, "remove");
    parse_fails("hunt remove=4", TF_ERR_PARSE, ":");
    parse_fails("hu/nt:remove=4", TF_ERR_PARSE, "/");
    parse_fails("status quo:remove=4", TF_ERR_PARSE, "status quo");
    parse_fails("hunt:", TF_ERR_PARSE, "no action");
    parse_fails("hunt:remove", TF_ERR_PARSE, "remove");

    tf_scenario sc[2] = {parse_ok("a:remove=4"), parse_ok("A:add=4")};
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_scenario_check_list(sc, 2, &err), TF_ERR_USAGE);
    tf_scenario cap = parse_ok("habitat:capacity=1.2");
    tf_error_init(&err);
    ck_assert_int_eq(tf_scenario_check_model(&cap, 1, tf_model_find_growth("exponential"), &err), TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "carrying capacity"));
    tf_error_init(&err);
    ck_assert_int_eq(tf_scenario_check_model(&cap, 1, tf_model_find_growth("gompertz"), &err), TF_OK);
    tf_scenario later = parse_ok("later:remove=3,from=2020");
    ck_assert_int_eq(tf_scenario_check_years(&later, 1, 2020, 50, &err), TF_ERR_USAGE);
    ck_assert_int_eq(tf_scenario_check_years(&later, 1, 2019, 50, &err), TF_OK);

    /* The projection itself refuses a capacity on a model without one. */
    tf_project_options o;
    options(&o, 10, 100);
    draws base;
    exp_draws(&base, 0.0, 0.1, 300);
    tf_rng rng = stream();
    tf_scenario_set *s = NULL;
    tf_error_init(&err);
    ck_assert_int_eq(tf_scenario_set_run(&base.in, 1, &o, &rng, &cap, 1, 2020, 1.0, &s, &err), TF_ERR_INVALID);
    ck_assert_ptr_null(s);
}
END_TEST

static tf_safe_removal safe(const tf_project_input *in, const tf_project_options *o, const char *ask_text)
{
    tf_error err;
    tf_error_init(&err);
    tf_safe_removal_ask ask;
    ck_assert_int_eq(tf_safe_removal_parse(ask_text, &ask, &err), TF_OK);
    tf_rng rng = stream();
    tf_safe_removal r;
    tf_status st = tf_safe_removal_find(in, 1, o, &rng, &ask, 1.0, &r, &err);
    if (st)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    return r;
}

/* The largest safe removal grows with the risk allowed and shrinks with the years, the risk at
 * the answer is within the limit and a little more removal crosses it (bisection's bracket;
 * with common random numbers each step of the risk is one run, 1 / runs). */
START_TEST(safe_removal_is_monotone)
{
    tf_project_options o;
    options(&o, 50, 2000);
    draws base;
    ricker_draws(&base, 0.3, 1000, 0.15, 900);
    tf_safe_removal a = safe(&base.in, &o, "0.05,20"), b = safe(&base.in, &o, "0.10,20"),
                    c = safe(&base.in, &o, "0.05,40");
    ck_assert_msg(a.value > 0 && a.value < b.value && c.value < a.value, "%g %g %g", a.value, b.value, c.value);
    ck_assert(a.risk_at_value <= 0.05);
    ck_assert(a.mcse > 0 && a.mcse < 0.2 * a.value);
    tf_safe_removal s1 = safe(&base.in, &o, "5%,20,share"), s2 = safe(&base.in, &o, "10%,20,share");
    ck_assert(s1.value > 0 && s1.value < s2.value && s2.value < 1);
    /* A risk already above the limit without removal gives 0, flagged. */
    draws falling;
    exp_draws(&falling, -0.2, 0.1, 300);
    tf_safe_removal z = safe(&falling.in, &o, "0.05,20");
    ck_assert(z.exceeded_at_zero && z.value == 0 && z.risk_at_zero > 0.05);
}
END_TEST

START_TEST(safe_removal_parse_errors)
{
    const char *bad[] = {"0.05", "1.5,20", "0,20", "0.05,0", "0.05,20,all", "0.05,2.5", "x,20", "5%,20,share,1"};
    for (size_t i = 0; i < sizeof bad / sizeof *bad; i++) {
        tf_error err;
        tf_error_init(&err);
        tf_safe_removal_ask ask;
        ck_assert_msg(tf_safe_removal_parse(bad[i], &ask, &err) != TF_OK, "'%s' accepted", bad[i]);
    }
    tf_error err;
    tf_error_init(&err);
    tf_safe_removal_ask ask;
    ck_assert_int_eq(tf_safe_removal_parse("5%,20,share", &ask, &err), TF_OK);
    ck_assert_double_eq_tol(ask.risk, 0.05, 1e-15);
    ck_assert_uint_eq(ask.years, 20);
    ck_assert_int_eq(ask.share, 1);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("scenario");
    TCase *tc = tcase_create("scenario");
    tcase_set_timeout(tc, 120);
    tcase_add_test(tc, exponential_share_and_growth_identities);
    tcase_add_test(tc, capacity_is_k_times_f);
    tcase_add_test(tc, status_quo_is_the_plain_projection);
    tcase_add_test(tc, counted_fraction_scales_the_take);
    TF_ADD_STATISTICAL_TEST(tc, common_random_numbers_shrink_the_error);
    tcase_add_test(tc, bad_scenarios_name_the_key);
    TF_ADD_STATISTICAL_TEST(tc, safe_removal_is_monotone);
    tcase_add_test(tc, safe_removal_parse_errors);
    suite_add_tcase(s, tc);
    return s;
}

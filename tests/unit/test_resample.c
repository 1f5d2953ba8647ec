/* Unit tests for the particle filter's internal passes: the branch-free systematic resampler
 * against the textbook one, the radix sort of states and the normal-to-uniform map. Reaches
 * the file-static helpers by including the filter's source (so this binary does not link the
 * library's copy of it). */
#include "tf_test.h"

#include "../../src/filter/filter.c"

/* Systematic resampling as usually written (Kitagawa 1996, J. Comput. Graph. Stat. 5:1,
 * Appendix; Doucet & Johansen 2011, Handbook of Nonlinear Filtering, Sect. 3.4): with
 * U in (0, 1], slot j takes the first i whose cumulative weight reaches (j + U) S / n. The
 * filter's form with offset u corresponds to U = 1 - u. */
static void textbook(const double *w, size_t n, double u, uint32_t *anc)
{
    double S = 0;
    for (size_t i = 0; i < n; i++)
        S += w[i];
    double U = 1.0 - u, c = w[0];
    size_t i = 0;
    for (size_t j = 0; j < n; j++) {
        double t = ((double)j + U) * S / (double)n;
        while (c < t && i + 1 < n)
            c += w[++i];
        anc[j] = (uint32_t)i;
    }
}

START_TEST(resampler_matches_the_textbook)
{
    enum { NMAX = 700 };
    static double w[NMAX];
    static uint32_t pos[NMAX + 1], a[NMAX], b[NMAX];
    tf_rng r;
    uint64_t key = 1;
    tf_rng_derive(&r, 12, &key, 1);
    size_t mismatched_runs = 0, runs = 0;
    for (int trial = 0; trial < 600; trial++) {
        size_t n = 1 + (size_t)(tf_rng_uniform(&r) * NMAX);
        double zero_share = trial % 3 == 0 ? 0.0 : trial % 3 == 1 ? 0.5 : 0.97;
        double sum = 0;
        for (size_t i = 0; i < n; i++) {
            double v = tf_rng_uniform(&r);
            /* peaked weights like those of counts in the thousands, and exact zeros */
            w[i] = tf_rng_uniform(&r) < zero_share ? 0.0 : exp(-30.0 * v * v);
            sum += w[i];
        }
        if (!(sum > 0)) {
            w[n - 1] = 1.0;
            sum = 0;
            for (size_t i = 0; i < n; i++)
                sum += w[i];
        }
        double u = trial == 1 ? 0.0 : tf_rng_uniform(&r);
        resample(w, n, sum, u, pos, a);
        textbook(w, n, u, b);
        runs++;
        /* Rounding at a boundary could in principle split the two by one slot; it is
         * vanishingly rare with continuous weights, so any mismatch counts. */
        mismatched_runs += memcmp(a, b, n * sizeof *a) != 0;
        for (size_t j = 0; j < n; j++) {
            ck_assert_uint_lt(a[j], n);
            ck_assert(w[a[j]] > 0); /* never a zero-weight particle */
            if (j)
                ck_assert_uint_le(a[j - 1], a[j]);
        }
        /* Systematic resampling gives particle i either floor(n w_i / S) or that + 1 copies. */
        for (size_t i = 0, j = 0; i < n; i++) {
            size_t k = 0;
            while (j < n && a[j] == i) {
                j++;
                k++;
            }
            double e = (double)n * w[i] / sum;
            ck_assert_msg(k >= floor(e) - 1e-9 && k <= ceil(e) + 1e-9, "particle %zu: %zu copies, expected %g", i, k, e);
        }
    }
    ck_assert_uint_eq(mismatched_runs, 0);
    ck_assert_uint_eq(runs, 600);
}
END_TEST

START_TEST(resampler_edge_cases)
{
    uint32_t pos[5], anc[4];
    double one[] = {0.3};
    resample(one, 1, 0.3, 0.999, pos, anc);
    ck_assert_uint_eq(anc[0], 0);
    double last[] = {0, 0, 0, 2.0};
    resample(last, 4, 2.0, 0.0, pos, anc);
    for (int j = 0; j < 4; j++)
        ck_assert_uint_eq(anc[j], 3);
    double first[] = {5.0, 0, 0, 0};
    resample(first, 4, 5.0, 0.9999, pos, anc);
    for (int j = 0; j < 4; j++)
        ck_assert_uint_eq(anc[j], 0);
    double even[] = {1, 1, 1, 1};
    resample(even, 4, 4.0, 0.5, pos, anc);
    for (int j = 0; j < 4; j++)
        ck_assert_uint_eq(anc[j], (uint32_t)j);
}
END_TEST

START_TEST(states_sort_with_their_indices)
{
    tf_model *m = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new("ricker", "poisson", &m, &err), TF_OK);
    double y[] = {1, 2};
    tf_series *s = tf_series_new("s", 2000, 2, y, NULL, NULL, &err);
    enum { N = 1500 };
    tf_filter *f = tf_filter_alloc(m, s, N);
    static double x[N];
    tf_rng r;
    uint64_t key = 2;
    tf_rng_derive(&r, 3, &key, 1);
    for (int trial = 0; trial < 3; trial++) {
        for (int i = 0; i < N; i++) {
            /* narrow range (most bytes equal), wide range with signs, and ties */
            x[i] = trial == 0 ? 7.0 + 1e-3 * tf_rng_normal(&r)
                   : trial == 1 ? 1e3 * tf_rng_normal(&r)
                                : (double)(int)(4 * tf_rng_uniform(&r)) - 2.0;
        }
        if (trial == 1) {
            x[0] = -INFINITY;
            x[1] = INFINITY;
            x[2] = -0.0;
            x[3] = 0.0;
        }
        const uint32_t *p = sort_states(f, x);
        static unsigned char seen[N];
        memset(seen, 0, sizeof seen);
        for (int k = 0; k < N; k++) {
            ck_assert_uint_lt(p[k], N);
            ck_assert(!seen[p[k]]);
            seen[p[k]] = 1;
            if (k) {
                ck_assert(x[p[k - 1]] <= x[p[k]]);
                if (x[p[k - 1]] == x[p[k]] && trial == 2)
                    ck_assert_uint_lt(p[k - 1], p[k]); /* stable: ties keep their order */
            }
        }
    }
    tf_filter_free(f);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

START_TEST(normals_map_to_uniforms)
{
    ck_assert_double_eq(uniform_of(0.0), 0.5);
    ck_assert_double_eq_tol(uniform_of(1.0), 0.8413447460685429, 1e-15); /* Phi(1), tables */
    ck_assert(uniform_of(40.0) < 1.0);
    ck_assert(uniform_of(-40.0) >= 0.0);
    ck_assert(uniform_of(NAN) == 0.0);
    ck_assert(uniform_of(-1.0) < uniform_of(-0.999));
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("resample");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, resampler_matches_the_textbook);
    tcase_add_test(tc, resampler_edge_cases);
    tcase_add_test(tc, states_sort_with_their_indices);
    tcase_add_test(tc, normals_map_to_uniforms);
    suite_add_tcase(s, tc);
    return s;
}

/* Stream derivation and the GSL bridge for the xoshiro256++ generator. */
#include "util/rng.h"

#include <string.h>

/* splitmix64 (Steele, Lea & Flood 2014), the seeding function xoshiro's authors recommend. */
static uint64_t splitmix64(uint64_t *x)
{
    uint64_t z = (*x += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
}

void tf_rng_derive(tf_rng *rng, uint64_t seed, const uint64_t *keys, size_t n_keys)
{
    uint64_t h = seed;
    uint64_t mix = splitmix64(&h);
    for (size_t i = 0; i < n_keys; i++) {
        uint64_t k = keys[i] ^ mix;
        mix = splitmix64(&k) ^ (mix * 0x9E3779B97F4A7C15ULL + i);
    }
    uint64_t x = mix;
    for (int j = 0; j < 4; j++)
        rng->s[j] = splitmix64(&x);
    /* The all-zero state is xoshiro's only fixed point; splitmix64 makes it vanishingly unlikely,
     * but it costs nothing to rule out. */
    if (!(rng->s[0] | rng->s[1] | rng->s[2] | rng->s[3]))
        rng->s[0] = 1;
}

uint64_t tf_rng_key(const char *label)
{
    uint64_t h = 0xcbf29ce484222325ULL;
    for (const unsigned char *p = (const unsigned char *)label; *p; p++) {
        h ^= *p;
        h *= 0x100000001b3ULL;
    }
    return h;
}

void tf_rng_fill_normal(tf_rng *rng, double *out, size_t n)
{
    uint64_t s[4];
    memcpy(s, rng->s, sizeof s);
    for (size_t i = 0; i < n; i++)
        out[i] = tf_rng_normal_s(s);
    memcpy(rng->s, s, sizeof s);
}

void tf_rng_fill_uniform(tf_rng *rng, double *out, size_t n)
{
    uint64_t s[4];
    memcpy(s, rng->s, sizeof s);
    for (size_t i = 0; i < n; i++)
        out[i] = tf_rng_uniform_s(s);
    memcpy(rng->s, s, sizeof s);
}

/* GSL generator type whose state is a borrowed tf_rng. GSL reads 32 bits from get(). */
static void gsl_set(void *state, unsigned long seed)
{
    uint64_t key = seed;
    tf_rng_derive(state, seed, &key, 1);
}
static unsigned long gsl_get(void *state) { return (unsigned long)(tf_rng_u64(state) >> 32); }
static double gsl_get_double(void *state)
{
    /* GSL wants [0, 1); (0, 1) is a subset. */
    return tf_rng_uniform(state);
}

static const gsl_rng_type gsl_type = {
    "tallyfit-xoshiro256pp", 0xFFFFFFFFUL, 0, sizeof(tf_rng), gsl_set, gsl_get, gsl_get_double,
};

void tf_rng_gsl_view(tf_rng *rng, gsl_rng *view)
{
    view->type = &gsl_type;
    view->state = rng;
}

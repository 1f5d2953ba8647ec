/* Random streams: xoshiro256++ (Blackman & Vigna 2021, ACM TOMS 47(4)) seeded by splitmix64, with
 * independent streams derived from a seed and a list of keys (population, model, chain, ...). */
#ifndef TF_RNG_H
#define TF_RNG_H

#include <math.h>
#include <stddef.h>
#include <stdint.h>

#include <gsl/gsl_rng.h>

#include "util/rng_ziggurat.h"

/* Transparent so that hot loops can copy the state into locals (registers) and back. */
typedef struct {
    uint64_t s[4];
} tf_rng;

/* Seeds rng from seed and n_keys keys: different key lists give streams that do not overlap in
 * practice (each state is a splitmix64 image of a 64-bit hash of the whole list). */
void tf_rng_derive(tf_rng *rng, uint64_t seed, const uint64_t *keys, size_t n_keys);

/* A 64-bit FNV-1a hash of a string, for using labels (population, model names) as stream keys. */
uint64_t tf_rng_key(const char *label);

/* Fills a gsl_rng on the caller's stack that draws from rng, so GSL's samplers (gamma, Poisson,
 * Student-t...) share the stream. The view borrows rng; it needs no gsl_rng_free. */
void tf_rng_gsl_view(tf_rng *rng, gsl_rng *view);

static inline uint64_t tf_rng_rotl(uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }

/* One xoshiro256++ output, advancing the state s[4]. */
static inline uint64_t tf_rng_next(uint64_t *s)
{
    uint64_t result = tf_rng_rotl(s[0] + s[3], 23) + s[0];
    uint64_t t = s[1] << 17;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = tf_rng_rotl(s[3], 45);
    return result;
}

/* Uniform on (0, 1): the top 53 bits plus half an ulp, so never exactly 0 or 1 (safe for log). */
static inline double tf_rng_uniform_s(uint64_t *s)
{
    return ((double)(tf_rng_next(s) >> 11) + 0.5) * 0x1.0p-53;
}

/* Standard normal by the ziggurat (tables in rng_ziggurat.h). One 64-bit draw gives both the layer
 * (low 7 bits) and the signed abscissa (top 53 bits); about 98.8 % of calls take the first branch. */
static inline double tf_rng_normal_s(uint64_t *s)
{
    for (;;) {
        uint64_t b = tf_rng_next(s);
        unsigned i = (unsigned)(b & 0x7F);
        double u = 2.0 * (((double)(b >> 11) + 0.5) * 0x1.0p-53) - 1.0;
        if (fabs(u) < tf_zig_ratio[i])
            return u * tf_zig_x[i];
        if (i == 0) {
            /* Tail beyond r (Marsaglia 1964). */
            double x, y;
            do {
                x = log(tf_rng_uniform_s(s)) / TF_ZIG_R;
                y = log(tf_rng_uniform_s(s));
            } while (-2.0 * y < x * x);
            return u < 0 ? x - TF_ZIG_R : TF_ZIG_R - x;
        }
        double x = u * tf_zig_x[i];
        double f0 = exp(-0.5 * (tf_zig_x[i] * tf_zig_x[i] - x * x));
        double f1 = exp(-0.5 * (tf_zig_x[i + 1] * tf_zig_x[i + 1] - x * x));
        if (f1 + tf_rng_uniform_s(s) * (f0 - f1) < 1.0)
            return x;
    }
}

static inline uint64_t tf_rng_u64(tf_rng *rng) { return tf_rng_next(rng->s); }
static inline double tf_rng_uniform(tf_rng *rng) { return tf_rng_uniform_s(rng->s); }
static inline double tf_rng_normal(tf_rng *rng) { return tf_rng_normal_s(rng->s); }

/* Fills out[0..n) with standard normals / uniforms on (0,1). */
void tf_rng_fill_normal(tf_rng *rng, double *out, size_t n);
void tf_rng_fill_uniform(tf_rng *rng, double *out, size_t n);

#endif

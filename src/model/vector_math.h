/* Declarations that let gcc call glibc's vector maths (libmvec) from vectorised particle loops.
 * glibc marks exp, log and log1p with `simd` only under -ffast-math; declaring them again with
 * the attribute gives the vector variants (_ZGVdN4v_exp etc.) under -O3 -fno-math-errno without
 * the other fast-math relaxations. Include only from files built with -fno-math-errno (the
 * Makefile's HOT_CFLAGS for src/model and src/filter). */
#ifndef TF_VECTOR_MATH_H
#define TF_VECTOR_MATH_H

#include <math.h>

__attribute__((simd("notinbranch"))) double exp(double);
__attribute__((simd("notinbranch"))) double log(double);
__attribute__((simd("notinbranch"))) double log1p(double);

#endif

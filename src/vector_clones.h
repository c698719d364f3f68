/* vector_clones.h - LAM_VECTOR_CLONES: compile a hot loop twice, for the
 * baseline x86-64 vector unit (SSE2, 2 doubles) and for AVX2 (4 doubles,
 * 8 floats, 16 16-bit integers), the one the processor has chosen when the
 * program starts (GCC's target_clones, resolved once through an ifunc).
 *
 * Why this changes no result: AVX2 does not include FMA (that is a
 * separate target, not asked for), and -std=c11 keeps the compiler from
 * contracting a * b + c anyway, so every element gets the same correctly
 * rounded additions, multiplications, divisions and conversions whatever
 * the vector width; the compiler does not reorder a floating-point sum
 * without -ffast-math, which lamina never uses. Outputs are byte-identical
 * on a processor without AVX2 (checked: lamina's outputs with and without
 * the clones, docs/performance.md).
 *
 * Only for loops measured to gain (docs/performance.md lists them), and
 * only on functions whose own loops carry the work: a clone's callees are
 * not cloned with it. Other compilers and processors get the plain
 * function. */
#ifndef LAMINA_VECTOR_CLONES_H
#define LAMINA_VECTOR_CLONES_H

#if defined(__GNUC__) && !defined(__clang__) && defined(__x86_64__) && defined(__ELF__) && \
    !defined(LAM_NO_VECTOR_CLONES)
#define LAM_VECTOR_CLONES __attribute__((target_clones("avx2", "default")))
#else
#define LAM_VECTOR_CLONES
#endif

#endif

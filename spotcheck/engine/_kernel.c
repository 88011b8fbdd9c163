/*
 * spotcheck.engine._kernel: the head sum of a BBP-type series in C.
 *
 * The compiled twin of spotcheck/engine/head_py.py (head_sum_py): same
 * signature, same result, bit for bit.  For k0 <= k < k1 and each pair
 * (j, c) it adds
 *
 *     floor(2^P * frac(sigma^k * c * 2^(D - e*k) / N)),   N = q * (m*k + j)^s,
 *
 * with P = 64 * words and sigma = -1 when the series alternates and k is odd,
 * and returns (value mod 2^P, number of terms).
 *
 * How one term is computed.  Split N = 2^v * n with n odd and let E = D - e*k.
 * When E >= v, c * 2^E mod N = 2^v * (c * 2^(E-v) mod n), so the term is the
 * P-bit fraction of r / n with r = c * 2^(E-v) mod n.  With R = 2^64 and
 * r_i = r * R^(i-1) mod n, the i-th 64-bit word of that fraction is
 * floor(r_i * R / n), and since r_i * R = word * n + r_(i+1) exactly,
 *
 *     word_i = -r_(i+1) * n^-1 mod 2^64,   r_i = hi(word_i * n) + (r_(i+1) != 0).
 *
 * So one Montgomery exponentiation gives the last remainder
 * r_(W+1) = c * 2^(E - v + 64W) mod n, and each word costs two multiplications,
 * walking down from the least significant word.  The rare terms with E < v
 * (the last few k before the tail) take a plain bit-by-bit path (slow_term),
 * and exponents E - v + 64W beyond 64 bits a one-term path (big_exponent_term).
 *
 * Several terms are kept in flight at once ("lanes") so that the multiplier
 * stays busy while each term's chain of dependent squarings waits.  The base
 * is 2, so a set exponent bit costs nothing extra: the squaring computes
 * x * 2x instead of x * x.  When every modulus of a batch is below 2^31 the
 * batch runs in 32-bit Montgomery form (64-bit products only) with one
 * exponent shared by all lanes (STEP_NARROW), and below 2^29 two lanes per
 * SSE2 register where the target has SSE2 (STEP_SIMD; every x86-64 does);
 * otherwise in 64-bit form.
 *
 * That is the "portable" path, built for the generic target and kept as the
 * baseline.  On x86-64 the extension also carries vector paths compiled with
 * per-function target attributes (AVX2+FMA, AVX-512F, AVX-512 IFMA) and picks
 * the fastest the CPU offers once at import (see "Run-time chosen SIMD paths"
 * below); select_path() / SPOTCHECK_KERNEL force one, paths() lists them.
 * Every path returns the twin's value bit for bit: the residues are exact.
 *
 * Limits (checked in parse_job, and by spotcheck/engine/backend.py before the
 * call): every N < 2^63, 0 <= D < 2^64, |c| < 2^62, 1 <= words <= 16,
 * D - e*(k1-1) >= 0, k0 >= 0, s <= 63, e < 2^32.
 *
 * head_sum_comb (the twin: head_sum_comb_py) sums the heads of a comb of
 * windows D_i = D_0 + i step in one pass: a term's residue in window i + 1 is
 * its residue in window i times 2^step mod n, so after the ladder for the
 * first window that holds it and one for 2^step, every further window costs
 * one Montgomery product and its fraction words ("Combs of windows" below).
 *
 * Portability: plain C99 plus unsigned __int128 for the 64x64-bit product where
 * the compiler has it (else 32-bit halves; -DSPOTCHECK_NO_INT128 forces that
 * path; the vector paths need no 128-bit type), and >> of a
 * negative int64_t taken as an arithmetic shift (gcc, clang and MSVC do so).
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <stdint.h>
#include <string.h>
#if defined(__SSE2__) || defined(_M_X64)
#include <emmintrin.h> /* SSE2: part of every x86-64 target */
#define HAVE_SSE2 1
#else
#define HAVE_SSE2 0
#endif
/* The run-time chosen vector paths: x86-64 with gcc or clang (per-function
 * target attributes and __builtin_cpu_supports); elsewhere only the portable
 * and scalar paths.  -DSPOTCHECK_NO_SIMD leaves them out. */
#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__)) && !defined(SPOTCHECK_NO_SIMD)
#include <immintrin.h>
#define HAVE_X86_PATHS 1
#else
#define HAVE_X86_PATHS 0
#endif

/* ---- tuning ------------------------------------------------------------ */
#define MAX_WORDS 16        /* at most 64 * 16 fractional bits per term */
#define MAX_LANES 8         /* widest interleave built */
#define BEST_LANES 8        /* interleave of the shipped head_sum (see benchmarks/kernel.py) */
#define BEST_STEP STEP_SIMD
/* ------------------------------------------------------------------------ */

#define MODULUS_LIMIT ((uint64_t)1 << 63)
#define COEFF_LIMIT ((int64_t)1 << 62)

#if defined(__GNUC__) || defined(__clang__)
#define ALWAYS_INLINE static inline __attribute__((always_inline))
#else
#define ALWAYS_INLINE static inline
#endif

#if defined(__SIZEOF_INT128__) && !defined(SPOTCHECK_NO_INT128)
#define KERNEL_ARITH "int128"
/* (hi, lo) = a * b. */
ALWAYS_INLINE void mul_wide(uint64_t a, uint64_t b, uint64_t *hi, uint64_t *lo)
{
    unsigned __int128 p = (unsigned __int128)a * b;
    *hi = (uint64_t)(p >> 64);
    *lo = (uint64_t)p;
}
#else
#define KERNEL_ARITH "portable"
/* (hi, lo) = a * b from four 32x32-bit products. */
ALWAYS_INLINE void mul_wide(uint64_t a, uint64_t b, uint64_t *hi, uint64_t *lo)
{
    uint64_t a0 = a & 0xffffffffu, a1 = a >> 32, b0 = b & 0xffffffffu, b1 = b >> 32;
    uint64_t p00 = a0 * b0, p01 = a0 * b1, p10 = a1 * b0, p11 = a1 * b1;
    uint64_t mid = (p00 >> 32) + (p01 & 0xffffffffu) + (p10 & 0xffffffffu);
    *lo = (mid << 32) | (p00 & 0xffffffffu);
    *hi = p11 + (p01 >> 32) + (p10 >> 32) + (mid >> 32);
}
#endif

/* acc + low + (high << 32) + carry over one 64-bit word: the word stays in
 * *acc and what passes 2^64 goes to *carry (below 2^34 here); plain 64-bit
 * arithmetic, so the vector paths need no 128-bit integer type. */
ALWAYS_INLINE void add_column(uint64_t *acc, uint64_t low, uint64_t high, uint64_t *carry)
{
    uint64_t hi = high >> 32, t = low + (high << 32);
    hi += t < low;
    uint64_t u = t + *acc;
    hi += u < t;
    uint64_t v = u + *carry;
    hi += v < u;
    *acc = v;
    *carry = hi;
}

ALWAYS_INLINE uint64_t mul_hi(uint64_t a, uint64_t b)
{
    uint64_t hi, lo;
    mul_wide(a, b, &hi, &lo);
    return hi;
}

/* n^-1 mod 2^64 for odd n: 5 correct bits, then Newton steps 10, 20, 40, 80. */
ALWAYS_INLINE uint64_t inverse64(uint64_t n)
{
    uint64_t x = (3 * n) ^ 2;
    x *= 2 - n * x;
    x *= 2 - n * x;
    x *= 2 - n * x;
    x *= 2 - n * x;
    return x;
}

/* Montgomery reduction: (hi*2^64 + lo) * 2^-64 mod n, for odd n < 2^63,
 * ninv = n^-1 mod 2^64 and hi < n (the input is below n * 2^64).
 * Result in [0, n). */
ALWAYS_INLINE uint64_t redc(uint64_t hi, uint64_t lo, uint64_t n, uint64_t ninv)
{
    uint64_t mh = mul_hi(lo * ninv, n); /* lo(m*n) == lo, so no borrow below */
    uint64_t t = hi - mh;
    return hi < mh ? t + n : t;
}

/* a * b * 2^-64 mod n for a, b < n < 2^63. */
ALWAYS_INLINE uint64_t mont_mul(uint64_t a, uint64_t b, uint64_t n, uint64_t ninv)
{
    uint64_t hi, lo;
    mul_wide(a, b, &hi, &lo);
    return redc(hi, lo, n, ninv);
}

/* 2a mod n for a < n < 2^63. */
ALWAYS_INLINE uint64_t dbl_mod(uint64_t a, uint64_t n)
{
    uint64_t t = a + a;
    return t >= n ? t - n : t;
}

/* 2^64 mod n for odd n < 2^63 (the Montgomery form of 1).  A double
 * reciprocal gives the quotient q to within one when it is below 2^52, i.e.
 * n > 2^12; smaller n use the integer divider.  The signed remainder stays in
 * range: an estimate q + 1 gives r - n >= -n, and q - 1 only happens when
 * 2^64 / n lies within q 2^-51 of q, i.e. r is tiny and r + n < 2^63. */
ALWAYS_INLINE uint64_t mont_one(uint64_t n)
{
    if (n < 8192)
        return (0 - n) % n;
    uint64_t qe = (uint64_t)(int64_t)(18446744073709551616.0 / (double)n); /* < 2^51 */
    int64_t r = (int64_t)(0 - qe * n); /* 2^64 - qe*n, within one n of the truth */
    if (r < 0)
        r += (int64_t)n;
    else if ((uint64_t)r >= n)
        r -= (int64_t)n;
    return (uint64_t)r;
}

/* 2^32 mod n for odd n < 2^31; the double quotient is within one. */
ALWAYS_INLINE uint64_t mont_one32(uint64_t n)
{
    uint64_t qe = (uint64_t)(int64_t)(4294967296.0 / (double)n); /* <= 2^32 */
    int64_t r = (int64_t)(((uint64_t)1 << 32) - qe * n);
    if (r < 0)
        r += (int64_t)n;
    else if ((uint64_t)r >= n)
        r -= (int64_t)n;
    return (uint64_t)r;
}

/* 32-bit Montgomery reduction: t * 2^-32 mod n for odd n < 2^31,
 * 0 <= t < n 2^32, ninv32 = n^-1 mod 2^32.  The result is in (-n, n) and left
 * there: the squarings below only need |x| < n.  Three 64-bit products per
 * squaring instead of two 128-bit ones and one 64-bit. */
ALWAYS_INLINE int64_t redc32(int64_t t, int64_t n, uint32_t ninv32)
{
    uint32_t m = (uint32_t)t * ninv32;
    return (t - (int64_t)m * n) >> 32; /* exact (low half zero); arithmetic shift */
}

ALWAYS_INLINE int bit_length(uint64_t x)
{
#if defined(__GNUC__) || defined(__clang__)
    return x ? 64 - __builtin_clzll(x) : 0;
#else
    int b = 0;
    while (x) {
        b++;
        x >>= 1;
    }
    return b;
#endif
}

ALWAYS_INLINE int trailing_zeros(uint64_t x) /* x != 0 */
{
#if defined(__GNUC__) || defined(__clang__)
    return __builtin_ctzll(x);
#else
    int v = 0;
    while (!(x & 1)) {
        v++;
        x >>= 1;
    }
    return v;
#endif
}

/* c mod n in [0, n) for |c| < 2^62, n >= 1. */
ALWAYS_INLINE uint64_t coeff_mod(int64_t c, uint64_t n)
{
    if (c >= 0)
        return (uint64_t)c < n ? (uint64_t)c : (uint64_t)c % n;
    uint64_t a = (uint64_t)(-c);
    a = a < n ? a : a % n;
    return a ? n - a : 0;
}

/* acc += w * 2^(64*idx) mod 2^(64*words). */
static void acc_add_at(uint64_t *acc, int words, int idx, uint64_t w)
{
    for (; idx < words && w; idx++) {
        acc[idx] += w;
        w = acc[idx] < w;
    }
}

/* How the exponentiation multiplies by 2 for a set exponent bit. */
enum step {
    STEP_FUSED = 0,  /* square x * 2x, one reduction */
    STEP_ADD = 1,    /* square, then add and conditionally subtract */
    STEP_MUL = 2,    /* square, then always multiply by 2 or 1 (no use of the base) */
    STEP_NARROW = 3, /* STEP_FUSED, in 32-bit Montgomery form when all moduli < 2^31 */
    STEP_SIMD = 4,   /* STEP_NARROW, two lanes per SSE2 register when all moduli < 2^29 */
};

typedef struct {
    uint64_t D, k0, k1, m, q;
    unsigned s, e;
    int alternating, words;
    Py_ssize_t npairs;
    uint64_t *js;
    int64_t *cs;
} job_t;

/* One term with E < v (so E < 63): r = c * 2^E mod N by doubling, then
 * floor(r * 2^P / N) bit by bit.  Only the last few k of a head get here. */
static void slow_term(uint64_t N, uint64_t E, int64_t c, int words, uint64_t *acc)
{
    uint64_t r = coeff_mod(c, N);
    for (uint64_t i = 0; i < E; i++)
        r = dbl_mod(r, N);
    for (int idx = words - 1; idx >= 0; idx--) {
        uint64_t w = 0;
        for (int b = 0; b < 64; b++) {
            r <<= 1; /* r < N < 2^63 */
            w <<= 1;
            if (r >= N) {
                r -= N;
                w |= 1;
            }
        }
        acc_add_at(acc, words, idx, w);
    }
}

/* Montgomery form of 2^f mod odd n, one term at a time (rare paths only). */
static uint64_t mont_pow2(uint64_t f, uint64_t n, uint64_t ninv, uint64_t one)
{
    uint64_t x = one;
    for (int b = bit_length(f) - 1; b >= 0; b--) {
        x = mont_mul(x, x, n, ninv);
        if ((f >> b) & 1)
            x = dbl_mod(x, n);
    }
    return x;
}

/* acc += the words of frac(r_l / n_l) for L terms, where r_l = top[l] is the
 * last remainder r_(W+1) (see the header).  Word by word from the least
 * significant, the L terms' words summed in a register with a carry count. */
ALWAYS_INLINE void add_fractions(const int L, uint64_t *top, const uint64_t *n, const uint64_t *ninv, int words,
                                 uint64_t *acc)
{
    uint64_t carry = 0;
    for (int idx = 0; idx < words; idx++) {
        uint64_t sum = acc[idx] + carry, count = sum < carry;
        for (int l = 0; l < L; l++) {
            uint64_t w = 0 - top[l] * ninv[l];
            top[l] = mul_hi(w, n[l]) + (top[l] != 0);
            sum += w;
            count += sum < w;
        }
        acc[idx] = sum;
        carry = count; /* at most L + 1; dropped past the top word (mod 2^P) */
    }
}

/* A term whose exponent E - v + 64*words does not fit in 64 bits. */
static void big_exponent_term(uint64_t n, uint64_t ep, int64_t c, int words, uint64_t *acc)
{
    uint64_t ninv = inverse64(n), one = mont_one(n);
    uint64_t x = mont_pow2(ep, n, ninv, one);
    x = mont_mul(x, mont_pow2(64 * (uint64_t)words, n, ninv, one), n, ninv);
    x = mont_mul(x, coeff_mod(c, n), n, ninv);
    add_fractions(1, &x, &n, &ninv, words, acc);
}

/* The squarings of the 32-bit path, two lanes per SSE2 register, for odd
 * n < 2^29: unsigned Montgomery reduction t -> (t + m n) / 2^32 with
 * m = -t n^-1 mod 2^32, left in [0, 2n) (no correction): then y < 2n,
 * y (2y) < 8 n^2 < n 2^32 and the next result is again below 2n.
 * In: y in [0, n); out: y in [0, n). */
ALWAYS_INLINE void simd_squarings(const int L, int top, uint64_t g, int64_t *y, const uint64_t *n,
                                  const uint64_t *ninv)
{
#if HAVE_SSE2
    __m128i X[MAX_LANES / 2], N[MAX_LANES / 2], NP[MAX_LANES / 2];
    for (int h = 0; h < L / 2; h++) {
        X[h] = _mm_set_epi64x(y[2 * h + 1], y[2 * h]);
        N[h] = _mm_set_epi64x((int64_t)n[2 * h + 1], (int64_t)n[2 * h]);
        NP[h] = _mm_set_epi64x((uint32_t)(0 - ninv[2 * h + 1]), (uint32_t)(0 - ninv[2 * h]));
    }
    for (int b = top - 1; b >= 0; b--) {
        __m128i bit = _mm_cvtsi32_si128((int)((g >> b) & 1));
        for (int h = 0; h < L / 2; h++) {
            __m128i t = _mm_mul_epu32(X[h], _mm_sll_epi64(X[h], bit)); /* low 32 bits x low 32 bits */
            __m128i m = _mm_mul_epu32(t, NP[h]);
            X[h] = _mm_srli_epi64(_mm_add_epi64(t, _mm_mul_epu32(m, N[h])), 32);
        }
    }
    for (int h = 0; h < L / 2; h++) {
        uint64_t out[2];
        _mm_storeu_si128((__m128i *)out, X[h]);
        for (int i = 0; i < 2; i++)
            y[2 * h + i] = (int64_t)(out[i] >= n[2 * h + i] ? out[i] - n[2 * h + i] : out[i]);
    }
#else
    (void)L, (void)top, (void)g, (void)y, (void)n, (void)ninv;
#endif
}

/* L terms at once: moduli n (odd), exponents f = E - v + 64*words, residues
 * cm = c mod n.  Left-to-right binary exponentiation of 2 in Montgomery form;
 * the result r_(W+1) = c 2^f mod n of each term goes to add_fractions. */
ALWAYS_INLINE void run_lanes(const int L, const int step, const uint64_t *n, const uint64_t *f,
                             const uint64_t *cm, int words, uint64_t *acc)
{
    uint64_t ninv[MAX_LANES], one[MAX_LANES], two[MAX_LANES], x[MAX_LANES], fmax = 0, nor = 0;
    for (int l = 0; l < L; l++) {
        ninv[l] = inverse64(n[l]);
        nor |= n[l];
        fmax = f[l] > fmax ? f[l] : fmax;
    }
    int top = bit_length(fmax) - 1; /* fmax >= 64 */
    if ((step == STEP_NARROW || step == STEP_SIMD) && (nor >> 31) == 0) {
        /* All n < 2^31.  One exponent g = max f for all lanes, so the bit
         * test is shared; lane l's c 2^f = (c 2^g) 2^-(g - f) is recovered
         * at the end, which needs g - f < 32. */
        int64_t y[MAX_LANES], sn[MAX_LANES];
        int shared = 1;
        for (int l = 0; l < L; l++) {
            shared &= fmax - f[l] < 32;
            sn[l] = (int64_t)n[l];
            y[l] = (int64_t)mont_one32(n[l]);
            if ((fmax >> top) & 1)
                y[l] = (int64_t)dbl_mod((uint64_t)y[l], n[l]);
        }
        if (shared && step == STEP_SIMD && HAVE_SSE2 && L % 2 == 0 && (nor >> 29) == 0)
            simd_squarings(L, top, fmax, y, n, ninv);
        else if (shared) {
            for (int b = top - 1; b >= 0; b--) {
                int bit = (int)((fmax >> b) & 1);
                for (int l = 0; l < L; l++) /* |y| < n < 2^31: 0 <= y (2y) < n 2^32 */
                    y[l] = redc32(y[l] * (int64_t)((uint64_t)y[l] << bit), sn[l], (uint32_t)ninv[l]);
            }
        }
        if (shared) {
            for (int l = 0; l < L; l++) {
                /* y = 2^(g + 32) mod n, so redc32(y cm) = c 2^g mod n */
                int64_t r = redc32((y[l] < 0 ? y[l] + sn[l] : y[l]) * (int64_t)cm[l], sn[l], (uint32_t)ninv[l]);
                uint64_t u = (uint64_t)(r < 0 ? r + sn[l] : r), t = fmax - f[l];
                /* u 2^-t mod n = (u + m n) / 2^t with m = -u n^-1 mod 2^t; below 2n < 2^32 */
                uint64_t m = (0 - u * ninv[l]) & (((uint64_t)1 << t) - 1);
                u = (u + m * n[l]) >> t;
                x[l] = u >= n[l] ? u - n[l] : u;
            }
            add_fractions(L, x, n, ninv, words, acc);
            return;
        }
    }
    for (int l = 0; l < L; l++) {
        x[l] = one[l] = mont_one(n[l]);
        two[l] = dbl_mod(one[l], n[l]);
        if ((f[l] >> top) & 1)
            x[l] = two[l];
    }
    for (int b = top - 1; b >= 0; b--) {
        for (int l = 0; l < L; l++) {
            uint64_t bit = (f[l] >> b) & 1, hi, lo;
            if (step == STEP_FUSED || step == STEP_NARROW || step == STEP_SIMD) {
                /* x * 2x < n 2^64 because x < n < 2^63: double before reducing. */
                mul_wide(x[l], x[l] + (x[l] & (0 - bit)), &hi, &lo);
                x[l] = redc(hi, lo, n[l], ninv[l]);
                continue;
            }
            mul_wide(x[l], x[l], &hi, &lo);
            if (step == STEP_ADD) {
                uint64_t y = redc(hi, lo, n[l], ninv[l]);
                uint64_t z = dbl_mod(y, n[l]);
                x[l] = bit ? z : y;
            } else { /* always multiply, by the Montgomery form of 2 or of 1 */
                uint64_t y = redc(hi, lo, n[l], ninv[l]);
                x[l] = mont_mul(y, bit ? two[l] : one[l], n[l], ninv[l]);
            }
        }
    }
    for (int l = 0; l < L; l++)
        x[l] = mont_mul(x[l], cm[l], n[l], ninv[l]);
    add_fractions(L, x, n, ninv, words, acc);
}

/* Walk the terms of the job, L at a time. */
ALWAYS_INLINE void run_job(const job_t *jb, uint64_t *acc, const int L, const int step)
{
    uint64_t n[MAX_LANES], f[MAX_LANES], cm[MAX_LANES];
    const uint64_t extra = 64 * (uint64_t)jb->words;
    int fill = 0;
    if (jb->npairs == 0)
        return;
    for (uint64_t k = jb->k0; k < jb->k1; k++) {
        uint64_t E = jb->D - jb->e * k;
        int negate = jb->alternating && (k & 1);
        uint64_t mk = jb->m * k;
        for (Py_ssize_t p = 0; p < jb->npairs; p++) {
            uint64_t base = mk + jb->js[p], N = jb->q;
            for (unsigned i = 0; i < jb->s; i++)
                N *= base; /* below 2^63: checked in parse_job */
            int v = trailing_zeros(N);
            uint64_t odd = N >> v;
            int64_t c = negate ? -jb->cs[p] : jb->cs[p];
            if (E < (uint64_t)v) {
                slow_term(N, E, c, jb->words, acc);
                continue;
            }
            if (E - v > UINT64_MAX - extra) {
                big_exponent_term(odd, E - v, c, jb->words, acc);
                continue;
            }
            n[fill] = odd;
            f[fill] = E - v + extra;
            cm[fill] = coeff_mod(c, odd);
            if (++fill == L) {
                run_lanes(L, step, n, f, cm, jb->words, acc);
                fill = 0;
            }
        }
    }
    for (int l = fill; l < L && fill; l++) { /* pad with n = 1: contributes 0 */
        n[l] = 1;
        f[l] = f[fill - 1];
        cm[l] = 0;
    }
    if (fill)
        run_lanes(L, step, n, f, cm, jb->words, acc);
}

static void run_1_fused(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 1, STEP_FUSED); }
static void run_4_fused(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 4, STEP_FUSED); }
static void run_8_fused(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 8, STEP_FUSED); }
static void run_4_add(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 4, STEP_ADD); }
static void run_8_add(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 8, STEP_ADD); }
static void run_4_mul(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 4, STEP_MUL); }
static void run_8_mul(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 8, STEP_MUL); }
static void run_4_narrow(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 4, STEP_NARROW); }
static void run_8_narrow(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 8, STEP_NARROW); }
static void run_4_simd(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 4, STEP_SIMD); }
static void run_8_simd(const job_t *jb, uint64_t *acc) { run_job(jb, acc, 8, STEP_SIMD); }

typedef void (*runner_t)(const job_t *, uint64_t *);

static runner_t pick_runner(long lanes, long step)
{
    if (lanes == 1 && step == STEP_FUSED)
        return run_1_fused;
    static const runner_t four[] = {run_4_fused, run_4_add, run_4_mul, run_4_narrow, run_4_simd};
    static const runner_t eight[] = {run_8_fused, run_8_add, run_8_mul, run_8_narrow, run_8_simd};
    if (step < 0 || step > STEP_SIMD)
        return NULL;
    if (lanes == 4)
        return four[step];
    if (lanes == 8)
        return eight[step];
    return NULL;
}

/* ==== Run-time chosen SIMD paths ==========================================
 *
 * The extension is built for the generic target.  The functions below carry
 * their own target attributes and run only after the CPU was asked (once, at
 * import: __builtin_cpu_supports, which also checks that the OS saves the
 * vector registers).  A path is a way to compute, for a batch of B terms,
 *
 *     x_l = c_l 2^(f_l) mod n_l        (n_l odd, x_l in [0, n_l))
 *
 * together with ninv_l = n_l^-1 mod 2^64; the fraction words then come from
 * add_fractions exactly as on the portable path.  Every path computes these
 * residues exactly (integer arithmetic, or doubles whose error is bounded
 * below half a unit and rounded away, see each ladder), so each term's
 * floor(2^P frac(...)) -- and hence the value, bit for bit -- is the same as
 * the twin's, and the certification bound [value, value + terms) of
 * evaluate.py holds on every path unchanged.
 *
 * Each ladder keeps one exponent per lane (no shared exponent): at step b
 * lane l multiplies by 2 when bit b of f_l is set, by a per-lane shift or
 * blend, so terms of different k share a batch.  (The ladders test the
 * bits once for all lanes where every f of the batch has the same bits:
 * every integer between min f and max f shares their common leading bits;
 * the batch keeps min f, max f and max n as its terms go in.)  The 32-bit
 * and FMA ladders start from 2^a mod n (in Montgomery form for the 32-bit
 * ones) with a = f >> sh the top bits of each lane's exponent (top_shift:
 * a <= 20 or 52), then square sh times; the IFMA and 64-bit ladders start
 * from the form of 1 at the top bit of max f, lanes with shorter exponents
 * squaring 1 until their own top bit.  A batch whose largest modulus
 * exceeds a ladder's limit goes to the next wider one, and above every
 * vector limit to the 64-bit scalar Montgomery code (moduli up to 2^63).
 *
 *   path        moduli < 2^29 / 2^31        < 2^48            < 2^51     below 2^63
 *   avx2        4 x 32-bit Montgomery   4 x FMA double    --         64-bit scalar
 *   avx512f     8 x 32-bit Montgomery   8 x FMA double    --         64-bit scalar
 *   avx512ifma  8 x 32-bit Montgomery   8 x FMA double    8 x IFMA   64-bit scalar
 *
 * (32-bit Montgomery left in [0, 2n) below 2^29, reduced every step below
 * 2^31; IFMA is 52-bit Montgomery), then the fraction words in 32-bit digits
 * (see "the fraction words in vector form"), with B = 64 (AVX2: 16
 * registers) or 128 (AVX-512: 16 registers) terms in flight, each lane an
 * independent chain.  Padding lanes use n = 1 (x = 0, fraction 0).
 */

#define BATCH 128

typedef struct {
    uint64_t n[BATCH], f[BATCH], cm[BATCH], x[BATCH], ninv[BATCH];
    uint64_t nmax, fmax, fmin; /* over the terms put in so far (kept by the collection) */
} batch_t;

static void batch_reset(batch_t *bt)
{
    bt->nmax = bt->fmax = 0;
    bt->fmin = UINT64_MAX;
}

typedef void (*ladder_t)(batch_t *bt);

/* A run of terms of one pair at consecutive k (the tight loop of
 * run_job_batched): term i has n + i step, f - i e, and the residue of its
 * coefficient n_i - ca when negc ^ (neg_odd & (k + i)), else ca. */
typedef struct {
    uint64_t n, step, f, e, ca, negc, neg_odd, k;
} run_t;

/* Puts terms 0 .. i-1 of a run at bt->n[at...] etc. and returns i: the
 * vector paths write whole registers and leave the rest to the caller. */
typedef uint64_t (*fill_t)(batch_t *bt, int at, uint64_t run, const run_t *r);

/* The 64-bit scalar ladder for a batch (any odd n < 2^63), 8 lanes at a time:
 * the fused x * 2x step of run_lanes.  Exact integer Montgomery arithmetic. */
static void ladder64(batch_t *bt, int count)
{
    for (int g = 0; g < count; g += 8) {
        const uint64_t *n = bt->n + g, *f = bt->f + g, *cm = bt->cm + g;
        uint64_t ninv[8], x[8], fmax = 0;
        for (int l = 0; l < 8; l++) {
            ninv[l] = inverse64(n[l]);
            x[l] = mont_one(n[l]);
            fmax = f[l] > fmax ? f[l] : fmax;
        }
        for (int b = bit_length(fmax) - 1; b >= 0; b--) {
            for (int l = 0; l < 8; l++) {
                uint64_t bit = (f[l] >> b) & 1, hi, lo;
                mul_wide(x[l], x[l] + (x[l] & (0 - bit)), &hi, &lo); /* x * 2x < n 2^64 */
                x[l] = redc(hi, lo, n[l], ninv[l]);
            }
        }
        for (int l = 0; l < 8; l++) {
            bt->x[g + l] = mont_mul(x[l], cm[l], n[l], ninv[l]);
            bt->ninv[g + l] = ninv[l];
        }
    }
}

typedef struct {
    const char *name;
    const char *features; /* what the CPU must offer, for messages */
    int batch;            /* terms per batch (a multiple of 8, at most BATCH) */
    ladder_t small;       /* all n < small_limit */
    uint64_t small_limit;
    ladder_t narrow; /* all n < narrow_limit */
    uint64_t narrow_limit;
    ladder_t medium; /* all n < medium_limit */
    uint64_t medium_limit;
    ladder_t wide; /* all n < wide_limit */
    uint64_t wide_limit;
    fill_t fill;                                               /* NULL: scalar */
    void (*fractions)(batch_t *bt, int words, uint64_t *acc);   /* NULL: add_fractions */
    void (*fractions32)(batch_t *bt, int words, uint64_t *acc); /* all n < 2^32 (NULL: the next) */
    void (*fractions52)(batch_t *bt, int words, uint64_t *acc); /* all n < 2^52 (NULL: fractions) */
} simd_path_t;

/* Residues x = c 2^f mod n of a full batch of B terms by the path's
 * narrowest ladder that takes every modulus of it (ninv is stored too: full
 * 64 bits by ladder64, at least the low 32 bits by the vector ladders). */
ALWAYS_INLINE void batch_residues(batch_t *bt, const simd_path_t *path, const int B)
{
    const uint64_t nor = bt->nmax; /* below a power of two iff every n is */
    if (path->small && nor < path->small_limit)
        path->small(bt);
    else if (path->narrow && nor < path->narrow_limit)
        path->narrow(bt);
    else if (path->medium && nor < path->medium_limit)
        path->medium(bt);
    else if (path->wide && nor < path->wide_limit)
        path->wide(bt);
    else
        ladder64(bt, B);
}

/* acc += the fraction words of the batch's residues bt->x (walked down in
 * place), by the path's vector digits where it has them. */
ALWAYS_INLINE void batch_fractions(batch_t *bt, const simd_path_t *path, const int B, int words, uint64_t *acc)
{
    const uint64_t nor = bt->nmax;
    if (path->fractions32 && nor < ((uint64_t)1 << 32))
        path->fractions32(bt, words, acc);
    else if (path->fractions52 && nor < ((uint64_t)1 << 52))
        path->fractions52(bt, words, acc);
    else if (path->fractions)
        path->fractions(bt, words, acc);
    else if (B == 64)
        add_fractions(64, bt->x, bt->n, bt->ninv, words, acc);
    else
        add_fractions(32, bt->x, bt->n, bt->ninv, words, acc);
}

/* Residues of a full batch, then the fraction words of all its terms. */
static void flush_batch(batch_t *bt, const simd_path_t *path, int words, uint64_t *acc)
{
    batch_residues(bt, path, path->batch);
    batch_fractions(bt, path, path->batch, words, acc);
    batch_reset(bt);
}

/* One term (k, pair p) by the general rules of run_job: slow_term for E < v,
 * big_exponent_term beyond 64-bit exponents, else into the batch. */
static void batch_term(const job_t *jb, uint64_t k, Py_ssize_t p, batch_t *bt, int *fill, const simd_path_t *path,
                       uint64_t *acc)
{
    const uint64_t extra = 64 * (uint64_t)jb->words, E = jb->D - jb->e * k, base = jb->m * k + jb->js[p];
    uint64_t N = jb->q;
    for (unsigned i = 0; i < jb->s; i++)
        N *= base; /* below 2^63: checked in parse_job */
    int v = trailing_zeros(N);
    uint64_t odd = N >> v;
    int64_t c = jb->alternating && (k & 1) ? -jb->cs[p] : jb->cs[p];
    if (E < (uint64_t)v) {
        slow_term(N, E, c, jb->words, acc);
        return;
    }
    if (E - v > UINT64_MAX - extra) {
        big_exponent_term(odd, E - v, c, jb->words, acc);
        return;
    }
    bt->n[*fill] = odd;
    bt->f[*fill] = E - v + extra;
    bt->cm[*fill] = coeff_mod(c, odd);
    bt->nmax = odd > bt->nmax ? odd : bt->nmax;
    bt->fmax = bt->f[*fill] > bt->fmax ? bt->f[*fill] : bt->fmax;
    bt->fmin = bt->f[*fill] < bt->fmin ? bt->f[*fill] : bt->fmin;
    if (++*fill == path->batch) {
        flush_batch(bt, path, jb->words, acc);
        *fill = 0;
    }
}

/* Walk the terms of the job a batch at a time, pair by pair (the sum mod 2^P
 * does not depend on the order of the terms), each term by the rules of
 * run_job; only the residues come from the path's ladders.
 *
 * The common case takes no multiplication, division or bit count per term:
 * when s = 1, q is odd (as series_of makes it) and j has fewer factors 2
 * than m (t = ctz(j) < ctz(m)), every
 * m k + j = 2^t (m' k + j') with m' k + j' odd, so v = t for all k and the
 * odd part n = q (m' k + j') grows by q m' per k (exact mod 2^64, and n
 * < 2^63 by parse_job); while |c| < n the residue of c is c or n + c.  The
 * terms this does not cover (E < t, exponents beyond 64 bits, |c| >= n) take
 * batch_term. */
static void run_job_batched(const job_t *jb, uint64_t *acc, const simd_path_t *path)
{
    batch_t bt;
    batch_reset(&bt);
    const int B = path->batch;
    const uint64_t extra = 64 * (uint64_t)jb->words, D = jb->D, e = jb->e, m = jb->m, q = jb->q, k1 = jb->k1;
    int fill = 0;
    for (Py_ssize_t p = 0; p < jb->npairs; p++) {
        const uint64_t j = jb->js[p];
        const int64_t c0 = jb->cs[p];
        uint64_t k = jb->k0;
        if (jb->s == 1 && (q & 1) && m != 0 && j != 0 && c0 != 0 && trailing_zeros(j) < trailing_zeros(m)) {
            const uint64_t t = (uint64_t)trailing_zeros(j);
            const uint64_t step = q * (m >> t), b = q * (j >> t); /* n_k = b + step k, exact mod 2^64 */
            const uint64_t ca = c0 < 0 ? (uint64_t)(-c0) : (uint64_t)c0, M = UINT64_MAX - extra;
            /* [lo, hi): the k where E >= t, E - t <= M and n_k > |c| all hold */
            uint64_t lo = k, hi = k1;
            if (D < t)
                hi = lo;
            else if (e && (D - t) / e + 1 < hi)
                hi = (D - t) / e + 1;
            if (D - t > M && D >= t) {
                uint64_t need = D - t - M; /* e k >= need */
                uint64_t kk = e ? need / e + (need % e != 0) : UINT64_MAX;
                lo = kk > lo ? kk : lo;
            }
            if (b <= ca) {
                uint64_t kk = (ca - b) / step + 1;
                lo = kk > lo ? kk : lo;
            }
            if (lo > hi)
                lo = hi;
            for (; k < lo; k++)
                batch_term(jb, k, p, &bt, &fill, path, acc);
            /* the tight loop: no branch per term but the batch boundary */
            const uint64_t f0 = D - t + extra, neg_odd = jb->alternating ? 1 : 0, negc = c0 < 0;
            while (k < hi) {
                uint64_t run = hi - k < (uint64_t)(B - fill) ? hi - k : (uint64_t)(B - fill);
                uint64_t n = b + step * k, f = f0 - e * k; /* n grows with k, f falls */
                bt.fmax = f > bt.fmax ? f : bt.fmax;
                const run_t r = {n, step, f, e, ca, negc, neg_odd, k};
                uint64_t i = path->fill ? path->fill(&bt, fill, run, &r) : 0; /* a multiple of the lanes */
                for (n += step * i, f -= e * i, k += i; i < run; i++, k++, n += step, f -= e) {
                    uint64_t neg = negc ^ (neg_odd & k);
                    bt.n[fill + i] = n;
                    bt.f[fill + i] = f;
                    bt.cm[fill + i] = neg ? n - ca : ca;
                }
                bt.nmax = bt.n[fill + run - 1] > bt.nmax ? bt.n[fill + run - 1] : bt.nmax;
                bt.fmin = bt.f[fill + run - 1] < bt.fmin ? bt.f[fill + run - 1] : bt.fmin;
                fill += (int)run;
                if (fill == B) {
                    flush_batch(&bt, path, jb->words, acc);
                    fill = 0;
                }
            }
            for (; k < k1; k++)
                batch_term(jb, k, p, &bt, &fill, path, acc);
        } else {
            for (; k < k1; k++)
                batch_term(jb, k, p, &bt, &fill, path, acc);
        }
    }
    if (fill) {
        for (int l = fill; l < B; l++) { /* pad with n = 1: contributes 0 */
            bt.n[l] = 1;
            bt.f[l] = bt.f[0];
            bt.cm[l] = 0;
        }
        flush_batch(&bt, path, jb->words, acc);
    }
}

#if HAVE_X86_PATHS
#define TARGET_AVX2 __attribute__((target("avx2,fma")))
#define TARGET_AVX512 __attribute__((target("avx512f")))
#define TARGET_IFMA __attribute__((target("avx512f,avx512ifma")))
#define MAGIC52 0x4330000000000000ULL /* the bits of the double 2^52 */
#define H 16                          /* AVX2: vector registers of chains per ladder (64 terms) */
#define TOP32 20 /* the 32-bit ladders start from 2^(32 + a) mod n, a <= 20 (2^52 at most) */
#define TOPFMA 52 /* the FMA ladders start from 2^a mod n, a <= 52 */
#define H5 16                         /* AVX-512: registers of chains per ladder (128 terms) */

/* ---- AVX2 (+FMA): 4 lanes of 64 bits, B = 32 ---------------------------- */

/* n^-1 mod 2^32 in the low 32 bits of each lane, for odd n: the Newton steps
 * of inv64_avx512 on mul_epu32 (whose products are exact mod 2^32; the high
 * halves of the lanes are left as they fall).  The small ladders need no
 * more: their moduli are below 2^29, so their fraction words are summed by
 * fractions32_avx2, which reads only these 32 bits. */
TARGET_AVX2 static inline __m256i inv32_avx2(__m256i n)
{
    const __m256i two = _mm256_set1_epi64x(2);
    __m256i x = _mm256_xor_si256(_mm256_add_epi64(n, _mm256_add_epi64(n, n)), two); /* 5 bits */
    for (int i = 0; i < 3; i++)                                                      /* 10, 20, 40 */
        x = _mm256_mul_epu32(x, _mm256_sub_epi64(two, _mm256_mul_epu32(n, x)));
    return x;
}

/* Exact conversions between integers below 2^52 and doubles: the integer is
 * the mantissa of 2^52 + i. */
TARGET_AVX2 static inline __m256d u52_to_pd_avx2(__m256i i)
{
    return _mm256_sub_pd(_mm256_castsi256_pd(_mm256_or_si256(i, _mm256_set1_epi64x((int64_t)MAGIC52))),
                         _mm256_set1_pd(4503599627370496.0));
}
TARGET_AVX2 static inline __m256i pd_to_u52_avx2(__m256d d) /* 0 <= d < 2^52, an integer */
{
    return _mm256_xor_si256(_mm256_castpd_si256(_mm256_add_pd(d, _mm256_set1_pd(4503599627370496.0))),
                            _mm256_set1_epi64x((int64_t)MAGIC52));
}

/* 2^p mod n for odd n and p <= 52, exact: 2^p / n <= 2^52, so its double
 * quotient is within one ulp <= 1 of the truth in any rounding mode and
 * q = floor of it is within one of floor(2^p / n); r = 2^p - q n lies in
 * [-n, 2n) (|r| < 2^52 since n < 2^51 wherever it is called), so the fma
 * computing it is exact, and one correction each way puts r in [0, n).
 * The ladders start from it: after the top bits of the exponents (a per
 * lane, see "the top bits" in ladder32_avx2) rather than from the form of 1. */
TARGET_AVX2 static inline __m256i pow2v_mod_avx2(__m256d nd, __m256d P) /* P = 2^p per lane, p <= 52 */
{
    const __m256d zero = _mm256_setzero_pd();
    __m256d q = _mm256_round_pd(_mm256_div_pd(P, nd), _MM_FROUND_TO_NEG_INF | _MM_FROUND_NO_EXC);
    __m256d r = _mm256_fnmadd_pd(q, nd, P);
    r = _mm256_add_pd(r, _mm256_and_pd(_mm256_cmp_pd(r, zero, _CMP_LT_OQ), nd));
    r = _mm256_sub_pd(r, _mm256_and_pd(_mm256_cmp_pd(r, nd, _CMP_GE_OQ), nd));
    return pd_to_u52_avx2(r);
}

/* The shift sh such that every exponent f <= fmax starts its ladder from
 * a = f >> sh <= amax: the smallest sh with fmax >> sh <= amax (the ladder
 * then squares sh times).  amax >= 1. */
static inline int top_shift(uint64_t fmax, uint64_t amax)
{
    int sh = bit_length(fmax) - bit_length(amax);
    sh = sh > 0 ? sh : 0;
    return (fmax >> sh) <= amax ? sh : sh + 1;
}

/* The double 2^(e + a) for integers 0 <= e + a < 1024 (a per lane): the
 * exponent field built directly, exact. */
TARGET_AVX2 static inline __m256d pow2_pd_avx2(__m256i a, int e)
{
    return _mm256_castsi256_pd(_mm256_slli_epi64(_mm256_add_epi64(a, _mm256_set1_epi64x(1023 + e)), 52));
}

/* 32-bit Montgomery, R = 2^32, for odd n < 2^29 (the portable path's SSE2
 * step, on four lanes with per-lane exponents).  t -> (t + m n) / 2^32 with
 * m = t (-n^-1) mod 2^32 is exact (the low half of t + m n is zero).  Values
 * stay in [0, 2n) without correction: y < 2n gives y (2y) < 8 n^2 < n 2^32,
 * so (t + m n) / 2^32 < 8 n^2 / 2^32 + n < 2n, and 2y < 2^31 fits the 32-bit
 * multiplier input.  X starts at 2^(32 + a) mod n, the form of 2^a for the
 * top bits a of the lane's exponent (below); after the
 * ladder X = 2^f 2^32 mod n, reduced to [0, n), and one more reduction of
 * X cm (< n^2) gives c 2^f mod n in [0, 2n), reduced to [0, n).
 *
 * full = 1 (narrow_avx2) takes odd n < 2^31 by reducing after every step:
 * x < n gives y = x or 2x < 2n < 2^32 (a multiplier input), t = x y < 2 n^2,
 * t + m n < 2 n^2 + 2^32 n < 2^64, and (t + m n) / 2^32 < 2 n^2 / 2^32 + n
 * < 2n, so one conditional subtraction brings it to [0, n).  Values are below
 * 2^32 with zero high halves, so min_epu32(x, x - n) (32-bit lanes: x - n
 * wraps above x exactly when x < n) is that subtraction.  Two more
 * operations per step, no more products: cheaper than the FMA ladder. */
TARGET_AVX2 static inline void ladder32_avx2(batch_t *bt, const int full)
{
    /* n and f are read from the batch where they lie (copies into local
     * arrays become memcpy calls) */
    __m256i X[H], NP[H];
    const __m256i *N = (const __m256i *)bt->n;
    const __m256i *F = (const __m256i *)bt->f;
    const __m256i zero = _mm256_setzero_si256();
    const uint64_t fmax = bt->fmax, fmin = bt->fmin;
    /* The top bits: with sh = top_shift(max f, TOP32), lane l starts from
     * the form of 2^(f_l >> sh), i.e. 2^(32 + a) mod n with a = f_l >> sh
     * <= max f >> sh <= 20 (so 2^(32 + a) <= 2^52, pow2v_mod_avx2), and the
     * left-to-right ladder goes on from bit sh - 1: four or five squarings
     * fewer than from the form of 1. */
    const int sh = top_shift(fmax, TOP32);
    const int low = bit_length(fmax ^ fmin) < sh ? bit_length(fmax ^ fmin) : sh; /* bits in [low, sh): shared */
    const __m128i shc = _mm_cvtsi32_si128(sh);
    for (int h = 0; h < H; h++) {
        __m256i ninv = inv32_avx2(_mm256_loadu_si256(N + h));
        _mm256_storeu_si256((__m256i *)(bt->ninv + 4 * h), ninv); /* low 32 bits: see inv32_avx2 */
        NP[h] = _mm256_sub_epi64(zero, ninv);                     /* the multiplier reads the low 32 bits */
        __m256d P = pow2_pd_avx2(_mm256_srl_epi64(_mm256_loadu_si256(F + h), shc), 32);
        X[h] = pow2v_mod_avx2(u52_to_pd_avx2(_mm256_loadu_si256(N + h)), P);
    }
    for (int b = sh - 1; b >= low; b--) { /* the shared bits: one test per step */
        __m128i cnt = _mm_cvtsi32_si128((int)((fmax >> b) & 1));
        for (int h = 0; h < H; h++) {
            __m256i t = _mm256_mul_epu32(X[h], _mm256_sll_epi64(X[h], cnt));
            __m256i m = _mm256_mul_epu32(t, NP[h]);
            X[h] = _mm256_srli_epi64(_mm256_add_epi64(t, _mm256_mul_epu32(m, _mm256_loadu_si256(N + h))), 32);
            if (full) /* x >= n ? x - n : x on values below 2^32 (high halves zero) */
                X[h] = _mm256_min_epu32(X[h], _mm256_sub_epi32(X[h], _mm256_loadu_si256(N + h)));
        }
    }
    /* the lanes' own bits: y = x << (bit b of f), i.e. x or 2x (2x < 2^32 as
     * above), by a per-lane shift; f is only read */
    const __m256i one = _mm256_set1_epi64x(1);
    for (int b = low - 1; b >= 0; b--) {
        const __m128i cnt = _mm_cvtsi32_si128(b);
        for (int h = 0; h < H; h++) {
            __m256i bit = _mm256_and_si256(_mm256_srl_epi64(_mm256_loadu_si256(F + h), cnt), one);
            __m256i y = _mm256_sllv_epi64(X[h], bit);
            __m256i t = _mm256_mul_epu32(X[h], y);
            __m256i m = _mm256_mul_epu32(t, NP[h]);
            X[h] = _mm256_srli_epi64(_mm256_add_epi64(t, _mm256_mul_epu32(m, _mm256_loadu_si256(N + h))), 32);
            if (full) /* x >= n ? x - n : x on values below 2^32 (high halves zero) */
                X[h] = _mm256_min_epu32(X[h], _mm256_sub_epi32(X[h], _mm256_loadu_si256(N + h)));
        }
    }
    for (int h = 0; h < H; h++) {
        /* values below 2^32: 64-bit signed compares are exact */
        __m256i x = X[h], d = _mm256_sub_epi64(x, _mm256_loadu_si256(N + h));
        x = _mm256_blendv_epi8(d, x, _mm256_cmpgt_epi64(_mm256_loadu_si256(N + h), x));
        __m256i t = _mm256_mul_epu32(x, _mm256_loadu_si256((const __m256i *)(bt->cm + 4 * h)));
        __m256i m = _mm256_mul_epu32(t, NP[h]);
        x = _mm256_srli_epi64(_mm256_add_epi64(t, _mm256_mul_epu32(m, _mm256_loadu_si256(N + h))), 32);
        d = _mm256_sub_epi64(x, _mm256_loadu_si256(N + h));
        x = _mm256_blendv_epi8(d, x, _mm256_cmpgt_epi64(_mm256_loadu_si256(N + h), x));
        _mm256_storeu_si256((__m256i *)(bt->x + 4 * h), x);
    }
}

TARGET_AVX2 static void small_avx2(batch_t *bt) { ladder32_avx2(bt, 0); }
TARGET_AVX2 static void narrow_avx2(batch_t *bt) { ladder32_avx2(bt, 1); }

/* a b mod n in doubles for integers |a|, |b| < 2^52 with |a b / n| < 2^49
 * and n < 2^48, result an integer in (-n, n) -- exact:
 *   p = fl(a b) and l = fma(a, b, -p) give a b = p + l exactly (l is the
 *   rounding error of an integer product, itself an integer);
 *   y = fl(p fl(1/n)) is within (1 + 2u)^3 - 1 < 6.1u of a b / n in any
 *   rounding mode (u = 2^-53), i.e. within 2^49 6.1 2^-53 < 0.39, so
 *   q = round(y) is within 0.89 < 1 of a b / n and |a b - q n| < n;
 *   r = fma(-q, n, p) = a b - q n - l is an integer below 2^53 in size, so
 *   the fma is exact, and r + l is exact for the same reason.
 * The ladder calls it with |a| < n and b = a or 2a (|a b / n| < 2n < 2^49),
 * and at the end with b = c mod n (|a b / n| < n). */
TARGET_AVX2 static inline __m256d mulmod_avx2(__m256d a, __m256d b, __m256d n, __m256d ninv)
{
    __m256d p = _mm256_mul_pd(a, b);
    __m256d l = _mm256_fmsub_pd(a, b, p);
    __m256d q = _mm256_round_pd(_mm256_mul_pd(p, ninv), _MM_FROUND_TO_NEAREST_INT | _MM_FROUND_NO_EXC);
    return _mm256_add_pd(_mm256_fnmadd_pd(q, n, p), l);
}

/* FMA double-precision ladder for odd n < 2^48 (plain residues, no
 * Montgomery form): x = 2^a mod n for the top bits a of the lane's exponent
 * (as in ladder32_avx2), then x <- x * (x or 2x) mod n per bit (doubling
 * by 2 is exact), values in (-n, n); the last product by c mod n and one
 * correction give c 2^f mod n in [0, n). */
TARGET_AVX2 static void medium_avx2(batch_t *bt)
{
    __m256d X[H], ND[H], NI[H];
    const __m256i *F = (const __m256i *)bt->f; /* read where it lies, as in ladder32_avx2 */
    const __m256d d1 = _mm256_set1_pd(1.0);
    const uint64_t fmax = bt->fmax, fmin = bt->fmin;
    /* the top bits as in ladder32_avx2: x starts at 2^(f >> sh) mod n with
     * f >> sh <= 52 (pow2v_mod_avx2), five or six squarings fewer */
    const int sh = top_shift(fmax, TOPFMA);
    const int low = bit_length(fmax ^ fmin) < sh ? bit_length(fmax ^ fmin) : sh; /* bits in [low, sh): shared */
    const __m128i shc = _mm_cvtsi32_si128(sh);
    for (int h = 0; h < H; h++) {
        __m256i n = _mm256_loadu_si256((const __m256i *)(bt->n + 4 * h));
        _mm256_storeu_si256((__m256i *)(bt->ninv + 4 * h), inv32_avx2(n)); /* the fractions read 32 bits */
        ND[h] = u52_to_pd_avx2(n);
        NI[h] = _mm256_div_pd(d1, ND[h]);
        __m256d P = pow2_pd_avx2(_mm256_srl_epi64(_mm256_loadu_si256(F + h), shc), 0);
        X[h] = u52_to_pd_avx2(pow2v_mod_avx2(ND[h], P));
    }
    for (int b = sh - 1; b >= low; b--) { /* the shared bits */
        if ((fmax >> b) & 1)
            for (int h = 0; h < H; h++)
                X[h] = mulmod_avx2(X[h], _mm256_add_pd(X[h], X[h]), ND[h], NI[h]);
        else
            for (int h = 0; h < H; h++)
                X[h] = mulmod_avx2(X[h], X[h], ND[h], NI[h]);
    }
    /* the lanes' own bits: bit b of f shifted to the sign bit, which blendv reads: x or 2x (exact) */
    for (int b = low - 1; b >= 0; b--) {
        const __m128i up = _mm_cvtsi32_si128(63 - b);
        for (int h = 0; h < H; h++) {
            __m256i g = _mm256_sll_epi64(_mm256_loadu_si256(F + h), up);
            __m256d y = _mm256_blendv_pd(X[h], _mm256_add_pd(X[h], X[h]), _mm256_castsi256_pd(g));
            X[h] = mulmod_avx2(X[h], y, ND[h], NI[h]);
        }
    }
    for (int h = 0; h < H; h++) {
        __m256d c = u52_to_pd_avx2(_mm256_loadu_si256((const __m256i *)(bt->cm + 4 * h)));
        __m256d r = mulmod_avx2(X[h], c, ND[h], NI[h]);
        r = _mm256_add_pd(r, _mm256_and_pd(_mm256_cmp_pd(r, _mm256_setzero_pd(), _CMP_LT_OQ), ND[h]));
        _mm256_storeu_si256((__m256i *)(bt->x + 4 * h), pd_to_u52_avx2(r));
    }
}

/* The tight loop's terms four at a time: n and f step by 4 step and 4 e
 * (exact mod 2^64, as the scalar loop), the sign pattern of the residues
 * repeats every even number of k. */
TARGET_AVX2 static uint64_t fill_avx2(batch_t *bt, int at, uint64_t run, const run_t *r)
{
    const uint64_t whole = run & ~(uint64_t)3;
    uint64_t n0[4], f0[4], neg[4];
    for (int i = 0; i < 4; i++) {
        n0[i] = r->n + r->step * (uint64_t)i;
        f0[i] = r->f - r->e * (uint64_t)i;
        neg[i] = 0 - (r->negc ^ (r->neg_odd & (r->k + (uint64_t)i)));
    }
    __m256i N = _mm256_loadu_si256((const __m256i *)n0), F = _mm256_loadu_si256((const __m256i *)f0);
    const __m256i NEG = _mm256_loadu_si256((const __m256i *)neg), CA = _mm256_set1_epi64x((int64_t)r->ca);
    const __m256i NS = _mm256_set1_epi64x((int64_t)(4 * r->step)), FS = _mm256_set1_epi64x((int64_t)(4 * r->e));
    for (uint64_t i = 0; i < whole; i += 4) {
        _mm256_storeu_si256((__m256i *)(bt->n + at + i), N);
        _mm256_storeu_si256((__m256i *)(bt->f + at + i), F);
        _mm256_storeu_si256((__m256i *)(bt->cm + at + i), _mm256_blendv_epi8(CA, _mm256_sub_epi64(N, CA), NEG));
        N = _mm256_add_epi64(N, NS);
        F = _mm256_sub_epi64(F, FS);
    }
    return whole;
}

/* ---- AVX-512F: 8 lanes of 64 bits, B = 64 ------------------------------- */

/* n^-1 mod 2^64 for odd n (any 64-bit n): three Newton steps mod 2^32
 * (5 -> 10 -> 20 -> 40 correct bits) on the low halves, then one step mod
 * 2^64 from 32-bit pieces: x (2 - n x) with x < 2^32. */
TARGET_AVX512 static inline __m512i inv64_avx512(__m512i n)
{
    const __m512i two = _mm512_set1_epi32(2);
    __m512i x = _mm512_xor_si512(_mm512_mullo_epi32(n, _mm512_set1_epi32(3)), two);
    for (int i = 0; i < 3; i++)
        x = _mm512_mullo_epi32(x, _mm512_sub_epi32(two, _mm512_mullo_epi32(n, x)));
    x = _mm512_and_si512(x, _mm512_set1_epi64(0xffffffff));
    __m512i t = _mm512_add_epi64(_mm512_mul_epu32(n, x),
                                 _mm512_slli_epi64(_mm512_mul_epu32(_mm512_srli_epi64(n, 32), x), 32));
    __m512i u = _mm512_sub_epi64(_mm512_set1_epi64(2), t);
    return _mm512_add_epi64(_mm512_mul_epu32(x, u),
                            _mm512_slli_epi64(_mm512_mul_epu32(x, _mm512_srli_epi64(u, 32)), 32));
}

TARGET_AVX512 static inline __m512i inv32_avx512(__m512i n) /* as inv32_avx2 */
{
    const __m512i two = _mm512_set1_epi64(2);
    __m512i x = _mm512_xor_si512(_mm512_add_epi64(n, _mm512_add_epi64(n, n)), two);
    for (int i = 0; i < 3; i++)
        x = _mm512_mul_epu32(x, _mm512_sub_epi64(two, _mm512_mul_epu32(n, x)));
    return x;
}

TARGET_AVX512 static inline __m512d u52_to_pd_avx512(__m512i i)
{
    return _mm512_sub_pd(_mm512_castsi512_pd(_mm512_or_si512(i, _mm512_set1_epi64((int64_t)MAGIC52))),
                         _mm512_set1_pd(4503599627370496.0));
}
TARGET_AVX512 static inline __m512i pd_to_u52_avx512(__m512d d)
{
    return _mm512_xor_si512(_mm512_castpd_si512(_mm512_add_pd(d, _mm512_set1_pd(4503599627370496.0))),
                            _mm512_set1_epi64((int64_t)MAGIC52));
}

TARGET_AVX512 static inline __m512i pow2v_mod_avx512(__m512d nd, __m512d P) /* as pow2v_mod_avx2 */
{
    const __m512d zero = _mm512_setzero_pd();
    __m512d q = _mm512_roundscale_pd(_mm512_div_pd(P, nd), _MM_FROUND_TO_NEG_INF | _MM_FROUND_NO_EXC);
    __m512d r = _mm512_fnmadd_pd(q, nd, P);
    r = _mm512_mask_add_pd(r, _mm512_cmp_pd_mask(r, zero, _CMP_LT_OQ), r, nd);
    r = _mm512_mask_sub_pd(r, _mm512_cmp_pd_mask(r, nd, _CMP_GE_OQ), r, nd);
    return pd_to_u52_avx512(r);
}
TARGET_AVX512 static inline __m512i pow2_mod_avx512(__m512d nd, double p2)
{
    return pow2v_mod_avx512(nd, _mm512_set1_pd(p2));
}
TARGET_AVX512 static inline __m512d pow2_pd_avx512(__m512i a, int e) /* as pow2_pd_avx2 */
{
    return _mm512_castsi512_pd(_mm512_slli_epi64(_mm512_add_epi64(a, _mm512_set1_epi64(1023 + e)), 52));
}

/* small_avx2 on eight lanes; the same bounds (n < 2^29, values in [0, 2n)). */
TARGET_AVX512 static inline void ladder32_avx512(batch_t *bt, const int full)
{
    __m512i X[H5], NP[H5]; /* n and f read from the batch (see ladder32_avx2) */
    const uint64_t *N = bt->n, *F = bt->f;
    const __m512i zero = _mm512_setzero_si512();
    const uint64_t fmax = bt->fmax;
    const int sh = top_shift(fmax, TOP32); /* the top bits, as in ladder32_avx2 */
    const int low = bit_length(fmax ^ bt->fmin) < sh ? bit_length(fmax ^ bt->fmin) : sh; /* [low, sh): shared */
    for (int h = 0; h < H5; h++) {
        __m512i ninv = inv32_avx512(_mm512_loadu_si512(N + 8 * h));
        _mm512_storeu_si512(bt->ninv + 8 * h, ninv); /* low 32 bits: see inv32_avx2 */
        NP[h] = _mm512_sub_epi64(zero, ninv);
        __m512d P = pow2_pd_avx512(_mm512_srli_epi64(_mm512_loadu_si512(F + 8 * h), (unsigned)sh), 32);
        X[h] = pow2v_mod_avx512(u52_to_pd_avx512(_mm512_loadu_si512(N + 8 * h)), P);
    }
    for (int b = sh - 1; b >= low; b--) {
        __m128i cnt = _mm_cvtsi32_si128((int)((fmax >> b) & 1));
        for (int h = 0; h < H5; h++) {
            __m512i t = _mm512_mul_epu32(X[h], _mm512_sll_epi64(X[h], cnt));
            __m512i m = _mm512_mul_epu32(t, NP[h]);
            X[h] = _mm512_srli_epi64(_mm512_add_epi64(t, _mm512_mul_epu32(m, _mm512_loadu_si512(N + 8 * h))), 32);
            if (full)
                X[h] = _mm512_min_epu64(X[h], _mm512_sub_epi64(X[h], _mm512_loadu_si512(N + 8 * h)));
        }
    }
    for (int b = low - 1; b >= 0; b--) {
        __m512i sel = _mm512_set1_epi64((int64_t)((uint64_t)1 << b));
        for (int h = 0; h < H5; h++) { /* y = x, or 2x where bit b of f is set */
            __mmask8 k = _mm512_test_epi64_mask(_mm512_loadu_si512(F + 8 * h), sel);
            __m512i y = _mm512_mask_add_epi64(X[h], k, X[h], X[h]);
            __m512i t = _mm512_mul_epu32(X[h], y);
            __m512i m = _mm512_mul_epu32(t, NP[h]);
            X[h] = _mm512_srli_epi64(_mm512_add_epi64(t, _mm512_mul_epu32(m, _mm512_loadu_si512(N + 8 * h))), 32);
            if (full)
                X[h] = _mm512_min_epu64(X[h], _mm512_sub_epi64(X[h], _mm512_loadu_si512(N + 8 * h)));
        }
    }
    for (int h = 0; h < H5; h++) {
        /* x >= n ? x - n : x */
        __m512i x = _mm512_min_epu64(X[h], _mm512_sub_epi64(X[h], _mm512_loadu_si512(N + 8 * h)));
        __m512i t = _mm512_mul_epu32(x, _mm512_loadu_si512(bt->cm + 8 * h));
        __m512i m = _mm512_mul_epu32(t, NP[h]);
        x = _mm512_srli_epi64(_mm512_add_epi64(t, _mm512_mul_epu32(m, _mm512_loadu_si512(N + 8 * h))), 32);
        x = _mm512_min_epu64(x, _mm512_sub_epi64(x, _mm512_loadu_si512(N + 8 * h)));
        _mm512_storeu_si512(bt->x + 8 * h, x);
    }
}

TARGET_AVX512 static void small_avx512(batch_t *bt) { ladder32_avx512(bt, 0); }
TARGET_AVX512 static void narrow_avx512(batch_t *bt) { ladder32_avx512(bt, 1); }

TARGET_AVX512 static inline __m512d mulmod_avx512(__m512d a, __m512d b, __m512d n, __m512d ninv)
{ /* as mulmod_avx2, same bounds */
    __m512d p = _mm512_mul_pd(a, b);
    __m512d l = _mm512_fmsub_pd(a, b, p);
    __m512d q = _mm512_roundscale_pd(_mm512_mul_pd(p, ninv), _MM_FROUND_TO_NEAREST_INT | _MM_FROUND_NO_EXC);
    return _mm512_add_pd(_mm512_fnmadd_pd(q, n, p), l);
}

/* medium_avx2 on eight lanes (n < 2^48). */
TARGET_AVX512 static void medium_avx512(batch_t *bt)
{
    __m512d X[H5], ND[H5], NI[H5];
    const uint64_t *F = bt->f; /* read from the batch (see ladder32_avx2) */
    const __m512d d1 = _mm512_set1_pd(1.0);
    const uint64_t fmax = bt->fmax;
    const int sh = top_shift(fmax, TOPFMA); /* the top bits, as in medium_avx2 */
    const int low = bit_length(fmax ^ bt->fmin) < sh ? bit_length(fmax ^ bt->fmin) : sh; /* [low, sh): shared */
    for (int h = 0; h < H5; h++) {
        __m512i n = _mm512_loadu_si512(bt->n + 8 * h);
        _mm512_storeu_si512(bt->ninv + 8 * h, inv32_avx512(n)); /* the fractions read 32 bits */
        ND[h] = u52_to_pd_avx512(n);
        NI[h] = _mm512_div_pd(d1, ND[h]);
        __m512d P = pow2_pd_avx512(_mm512_srli_epi64(_mm512_loadu_si512(F + 8 * h), (unsigned)sh), 0);
        X[h] = u52_to_pd_avx512(pow2v_mod_avx512(ND[h], P));
    }
    for (int b = sh - 1; b >= low; b--) {
        if ((fmax >> b) & 1)
            for (int h = 0; h < H5; h++)
                X[h] = mulmod_avx512(X[h], _mm512_add_pd(X[h], X[h]), ND[h], NI[h]);
        else
            for (int h = 0; h < H5; h++)
                X[h] = mulmod_avx512(X[h], X[h], ND[h], NI[h]);
    }
    for (int b = low - 1; b >= 0; b--) {
        __m512i sel = _mm512_set1_epi64((int64_t)((uint64_t)1 << b));
        for (int h = 0; h < H5; h++) {
            __mmask8 k = _mm512_test_epi64_mask(_mm512_loadu_si512(F + 8 * h), sel);
            __m512d y = _mm512_mask_add_pd(X[h], k, X[h], X[h]); /* exact */
            X[h] = mulmod_avx512(X[h], y, ND[h], NI[h]);
        }
    }
    for (int h = 0; h < H5; h++) {
        __m512d c = u52_to_pd_avx512(_mm512_loadu_si512(bt->cm + 8 * h));
        __m512d r = mulmod_avx512(X[h], c, ND[h], NI[h]);
        r = _mm512_mask_add_pd(r, _mm512_cmp_pd_mask(r, _mm512_setzero_pd(), _CMP_LT_OQ), r, ND[h]);
        _mm512_storeu_si512(bt->x + 8 * h, pd_to_u52_avx512(r));
    }
}

TARGET_AVX512 static uint64_t fill_avx512(batch_t *bt, int at, uint64_t run, const run_t *r) /* as fill_avx2 */
{
    const uint64_t whole = run & ~(uint64_t)7;
    uint64_t n0[8], f0[8];
    __mmask8 neg = 0;
    for (int i = 0; i < 8; i++) {
        n0[i] = r->n + r->step * (uint64_t)i;
        f0[i] = r->f - r->e * (uint64_t)i;
        neg |= (__mmask8)((r->negc ^ (r->neg_odd & (r->k + (uint64_t)i))) << i);
    }
    __m512i N = _mm512_loadu_si512(n0), F = _mm512_loadu_si512(f0);
    const __m512i CA = _mm512_set1_epi64((int64_t)r->ca);
    const __m512i NS = _mm512_set1_epi64((int64_t)(8 * r->step)), FS = _mm512_set1_epi64((int64_t)(8 * r->e));
    for (uint64_t i = 0; i < whole; i += 8) {
        _mm512_storeu_si512(bt->n + at + i, N);
        _mm512_storeu_si512(bt->f + at + i, F);
        _mm512_storeu_si512(bt->cm + at + i, _mm512_mask_sub_epi64(CA, neg, N, CA));
        N = _mm512_add_epi64(N, NS);
        F = _mm512_sub_epi64(F, FS);
    }
    return whole;
}

/* ---- AVX-512 IFMA: 52-bit Montgomery, R = 2^52, odd n < 2^51 -------------
 * For a, b < 2^52: lo = a b mod 2^52, hi = floor(a b / 2^52) (madd52lo/hi),
 * m = lo (-n^-1) mod 2^52, and (a b + m n) / 2^52 = hi + hi52(m n) + carry,
 * where lo + lo52(m n) is 0 (lo = 0) or exactly 2^52, so carry = that sum
 * >> 52: exact.  With x < n and y = x or 2x < 2n < 2^52, a b < 2 n^2 and the
 * result is below 2 n^2 / 2^52 + n < 2n (n < 2^51), brought to [0, n) by
 * min(t, t - n) (unsigned: t - n wraps above t when t < n).  X starts at
 * 2^52 mod n and ends as 2^f 2^52 mod n; its product with c mod n (< n)
 * gives c 2^f mod n. */

TARGET_IFMA static inline __m512i mont52(__m512i a, __m512i b, __m512i n, __m512i np)
{
    const __m512i zero = _mm512_setzero_si512();
    __m512i lo = _mm512_madd52lo_epu64(zero, a, b);
    __m512i hi = _mm512_madd52hi_epu64(zero, a, b);
    __m512i m = _mm512_madd52lo_epu64(zero, lo, np);
    hi = _mm512_madd52hi_epu64(hi, m, n);
    lo = _mm512_madd52lo_epu64(lo, m, n);
    __m512i t = _mm512_add_epi64(hi, _mm512_srli_epi64(lo, 52));
    return _mm512_min_epu64(t, _mm512_sub_epi64(t, n));
}

/* mont52 without the last correction, for odd n < 2^49: x in [0, 2n) and
 * y = x or 2x < 4n < 2^52 (an IFMA input) give x y < 8 n^2 and a result below
 * 8 n^2 / 2^52 + n < 2n, so the values stay in [0, 2n).  The carry is
 * taken from lo alone: lo + lo52(m n) is 0 or 2^52 (see above), i.e. the
 * carry is 1 exactly when lo != 0 -- four IFMA products, no shift. */
TARGET_IFMA static inline __m512i mont52_lazy(__m512i a, __m512i b, __m512i n, __m512i np)
{
    const __m512i zero = _mm512_setzero_si512();
    __m512i lo = _mm512_madd52lo_epu64(zero, a, b);
    __m512i hi = _mm512_madd52hi_epu64(zero, a, b);
    __m512i m = _mm512_madd52lo_epu64(zero, lo, np);
    hi = _mm512_mask_add_epi64(hi, _mm512_test_epi64_mask(lo, lo), hi, _mm512_set1_epi64(1));
    return _mm512_madd52hi_epu64(hi, m, n);
}

TARGET_IFMA static void medium_ifma(batch_t *bt)
{
    __m512i X[H5], N[H5], NP[H5];
    const uint64_t *F = bt->f; /* read from the batch (see ladder32_avx2) */
    const __m512i mask52 = _mm512_set1_epi64(((int64_t)1 << 52) - 1);
    const uint64_t fmax = bt->fmax;
    for (int h = 0; h < H5; h++) {
        N[h] = _mm512_loadu_si512(bt->n + 8 * h);
        __m512i ninv = inv64_avx512(N[h]);
        _mm512_storeu_si512(bt->ninv + 8 * h, ninv);
        NP[h] = _mm512_and_si512(_mm512_sub_epi64(_mm512_setzero_si512(), ninv), mask52);
        X[h] = pow2_mod_avx512(u52_to_pd_avx512(N[h]), 4503599627370496.0);
    }
    if (bt->nmax < ((uint64_t)1 << 49)) {
        const int low = bit_length(fmax ^ bt->fmin); /* bits >= low: the same in every lane */
        for (int b = bit_length(fmax) - 1; b >= low; b--) {
            if ((fmax >> b) & 1)
                for (int h = 0; h < H5; h++)
                    X[h] = mont52_lazy(X[h], _mm512_add_epi64(X[h], X[h]), N[h], NP[h]);
            else
                for (int h = 0; h < H5; h++)
                    X[h] = mont52_lazy(X[h], X[h], N[h], NP[h]);
        }
        for (int b = low - 1; b >= 0; b--) {
            __m512i sel = _mm512_set1_epi64((int64_t)((uint64_t)1 << b));
            for (int h = 0; h < H5; h++) {
                __mmask8 k = _mm512_test_epi64_mask(_mm512_loadu_si512(F + 8 * h), sel);
            __m512i y = _mm512_mask_add_epi64(X[h], k, X[h], X[h]);
                X[h] = mont52_lazy(X[h], y, N[h], NP[h]);
            }
        }
        for (int h = 0; h < H5; h++) /* from [0, 2n) to [0, n) */
            X[h] = _mm512_min_epu64(X[h], _mm512_sub_epi64(X[h], N[h]));
    } else {
        for (int b = bit_length(fmax) - 1; b >= 0; b--) {
            __m512i sel = _mm512_set1_epi64((int64_t)((uint64_t)1 << b));
            for (int h = 0; h < H5; h++) {
                __mmask8 k = _mm512_test_epi64_mask(_mm512_loadu_si512(F + 8 * h), sel);
            __m512i y = _mm512_mask_add_epi64(X[h], k, X[h], X[h]);
                X[h] = mont52(X[h], y, N[h], NP[h]);
            }
        }
    }
    for (int h = 0; h < H5; h++)
        _mm512_storeu_si512(bt->x + 8 * h, mont52(X[h], _mm512_loadu_si512(bt->cm + 8 * h), N[h], NP[h]));
}

/* ---- the fraction words in vector form -----------------------------------
 * add_fractions on 4 or 8 lanes, in 32-bit digits: the same walk with
 * R = 2^32.  For odd n and r_i < n, r_i 2^32 = d_i n + r_(i+1) with the digit
 * d_i < 2^32 and r_(i+1) < n, so
 *
 *     d_i = -r_(i+1) n^-1 mod 2^32,   r_i = (d_i n + r_(i+1)) / 2^32
 *
 * exactly (the sum's low 32 bits are zero).  mul_epu32 of r_(i+1) by
 * -n^-1 reads the low 32 bits of each, so the digit is exact mod 2^32 for
 * any n; only the low 32 bits of bt->ninv are read.  The residue
 * r_(2W+1) = c 2^(E - v + 64W) mod n is the one the 64-bit walk starts from
 * (64W = 32 (2W)), so the digits are those of the same floor(2^P frac(...)),
 * word i being d_(2i-1) 2^32 + d_(2i).  How r_i is recovered depends on n:
 *
 *   n < 2^32 (digit32): d n + r < 2^32 n + n < 2^64, one 64-bit product.
 *   n < 2^52 (digit52, IFMA): d n = H 2^52 + L (madd52hi / madd52lo, both
 *     inputs below 2^52), L + r < 2^53 is computed by madd52lo itself, and
 *     r_i = H 2^20 + (L + r) / 2^32 (2^52 H is a multiple of 2^32, so
 *     L + r is too).
 *   n < 2^63 (digit64): with n = nh 2^32 + nl and r = rh 2^32 + rl,
 *     r_i = d nh + rh + (d nl + rl) / 2^32, where d nl + rl
 *     <= (2^32 - 1)^2 + 2^32 - 1 < 2^64 and is a multiple of 2^32.
 *
 * The digits of the batch's terms are summed per lane (below 2^32 each, so
 * below 2^39 for 128 terms), and the exact total of a word plus the carry
 * goes into acc word by word, as add_fractions does. */
enum { DIGIT32 = 0, DIGIT52 = 1, DIGIT64 = 2 };

TARGET_AVX2 static uint64_t hsum_avx2(__m256i v)
{
    uint64_t out[4];
    _mm256_storeu_si256((__m256i *)out, v);
    return out[0] + out[1] + out[2] + out[3];
}

/* One digit of every lane: r_i from r_(i+1) = T and the digit d (its low 32
 * bits; the caller masks).  By value: a pointer would keep T in memory. */
#define DIGIT_AVX2(T, d, N, NH, NP, kind)                                                                             \
    do {                                                                                                               \
        d = _mm256_mul_epu32(T, NP);                                                                                   \
        if (kind == DIGIT32)                                                                                           \
            T = _mm256_srli_epi64(_mm256_add_epi64(_mm256_mul_epu32(d, N), T), 32);                                    \
        else {                                                                                                         \
            __m256i low_ = _mm256_srli_epi64(_mm256_add_epi64(_mm256_mul_epu32(d, N), _mm256_and_si256(T, lo32)), 32); \
            T = _mm256_add_epi64(_mm256_add_epi64(_mm256_mul_epu32(d, NH), _mm256_srli_epi64(T, 32)), low_);           \
        }                                                                                                              \
    } while (0)

TARGET_AVX2 static inline void fractions_avx2_kind(batch_t *bt, int words, uint64_t *acc, const int kind)
{
    __m256i NH[H], NP[H];
    __m256i *T = (__m256i *)bt->x; /* r, walked down in place (see ladder32_avx2) */
    const __m256i *N = (const __m256i *)bt->n;
    const __m256i zero = _mm256_setzero_si256(), lo32 = _mm256_set1_epi64x(0xffffffff);
    for (int h = 0; h < H; h++) {
        NH[h] = _mm256_srli_epi64(_mm256_loadu_si256(N + h), 32);
        NP[h] = _mm256_sub_epi64(zero, _mm256_loadu_si256((const __m256i *)(bt->ninv + 4 * h)));
    }
    uint64_t carry = 0;
    for (int idx = 0; idx < words; idx++) {
        __m256i SL = zero, SH = zero;
        for (int h = 0; h < H; h++) {
            __m256i t = _mm256_loadu_si256(T + h), n = _mm256_loadu_si256(N + h), d;
            DIGIT_AVX2(t, d, n, NH[h], NP[h], kind);
            SL = _mm256_add_epi64(SL, _mm256_and_si256(d, lo32));
            DIGIT_AVX2(t, d, n, NH[h], NP[h], kind);
            SH = _mm256_add_epi64(SH, _mm256_and_si256(d, lo32));
            _mm256_storeu_si256(T + h, t);
        }
        add_column(acc + idx, hsum_avx2(SL), hsum_avx2(SH), &carry); /* past the top word: dropped (mod 2^P) */
    }
}

TARGET_AVX2 static void fractions32_avx2(batch_t *bt, int words, uint64_t *acc) /* 4 H terms, n < 2^32 */
{
    fractions_avx2_kind(bt, words, acc, DIGIT32);
}
TARGET_AVX2 static void fractions_avx2(batch_t *bt, int words, uint64_t *acc) /* 4 H terms, n < 2^63 */
{
    fractions_avx2_kind(bt, words, acc, DIGIT64);
}

#define DIGIT_AVX512(T, d, N, NH, NP, kind) /* as DIGIT_AVX2; DIGIT52 under TARGET_IFMA only */                      \
    do {                                                                                                               \
        d = _mm512_mul_epu32(T, NP);                                                                                   \
        if (kind == DIGIT32)                                                                                           \
            T = _mm512_srli_epi64(_mm512_add_epi64(_mm512_mul_epu32(d, N), T), 32);                                    \
        else if (kind == DIGIT52) { /* madd52 reads 52 bits of d: its high half must go first */                     \
            d = _mm512_and_si512(d, lo32);                                                                             \
            __m512i low_ = _mm512_madd52lo_epu64(T, d, N), high_ = _mm512_madd52hi_epu64(zero, d, N);                  \
            T = _mm512_add_epi64(_mm512_slli_epi64(high_, 20), _mm512_srli_epi64(low_, 32));                           \
        } else {                                                                                                       \
            __m512i low_ = _mm512_srli_epi64(_mm512_add_epi64(_mm512_mul_epu32(d, N), _mm512_and_si512(T, lo32)), 32); \
            T = _mm512_add_epi64(_mm512_add_epi64(_mm512_mul_epu32(d, NH), _mm512_srli_epi64(T, 32)), low_);           \
        }                                                                                                              \
    } while (0)

#define FRACTIONS_AVX512_BODY(kind)                                                                                         \
    __m512i NP[H5]; /* r walked down in bt->x in place, n read from bt->n (see ladder32_avx2) */                     \
    const __m512i zero = _mm512_setzero_si512(), lo32 = _mm512_set1_epi64(0xffffffff);                                 \
    for (int h = 0; h < H5; h++)                                                                                       \
        NP[h] = _mm512_sub_epi64(zero, _mm512_loadu_si512(bt->ninv + 8 * h));                                          \
    uint64_t carry = 0;                                                                                                \
    for (int idx = 0; idx < words; idx++) {                                                                            \
        __m512i SL = zero, SH = zero;                                                                                  \
        for (int h = 0; h < H5; h++) {                                                                                 \
            __m512i t = _mm512_loadu_si512(bt->x + 8 * h), n = _mm512_loadu_si512(bt->n + 8 * h), d;                   \
            __m512i nh = _mm512_srli_epi64(n, 32);                                                                     \
            DIGIT_AVX512(t, d, n, nh, NP[h], kind);                                                                    \
            SL = _mm512_add_epi64(SL, _mm512_and_si512(d, lo32));                                                      \
            DIGIT_AVX512(t, d, n, nh, NP[h], kind);                                                                    \
            SH = _mm512_add_epi64(SH, _mm512_and_si512(d, lo32));                                                      \
            _mm512_storeu_si512(bt->x + 8 * h, t);                                                                     \
        }                                                                                                              \
        add_column(acc + idx, (uint64_t)_mm512_reduce_add_epi64(SL), (uint64_t)_mm512_reduce_add_epi64(SH),            \
                   &carry);                                                                                            \
    }

TARGET_AVX512 static void fractions32_avx512(batch_t *bt, int words, uint64_t *acc) /* n < 2^32 */
{
    FRACTIONS_AVX512_BODY(DIGIT32)
}
TARGET_AVX512 static void fractions_avx512(batch_t *bt, int words, uint64_t *acc) /* n < 2^63 */
{
    FRACTIONS_AVX512_BODY(DIGIT64)
}
TARGET_IFMA static void fractions52_ifma(batch_t *bt, int words, uint64_t *acc) /* n < 2^52 */
{
    FRACTIONS_AVX512_BODY(DIGIT52)
}
#undef FRACTIONS_AVX512_BODY
#undef H
#undef H5
#endif /* HAVE_X86_PATHS */

/* ---- the table of paths ------------------------------------------------- */

/* ifma52: IFMA for every modulus below 2^51 (small ones too), for tests and benchmarks. */
enum { PATH_PORTABLE = 0, PATH_SCALAR, PATH_AVX2, PATH_AVX512F, PATH_AVX512IFMA, PATH_IFMA52, NPATHS };

#define SMALL_LIMIT ((uint64_t)1 << 29)
#define NARROW_LIMIT ((uint64_t)1 << 31)
#define FMA_LIMIT ((uint64_t)1 << 48)
#define IFMA_LIMIT ((uint64_t)1 << 51)

static const simd_path_t PATHS[NPATHS] = {
    {.name = "portable", .features = ""}, /* today's shipped code: run_8_simd */
    {.name = "scalar", .features = ""},   /* 64-bit Montgomery only, 8 lanes: run_8_fused */
#if HAVE_X86_PATHS
    {.name = "avx2", .features = "avx2, fma", .batch = 64, .small = small_avx2, .small_limit = SMALL_LIMIT,
     .narrow = narrow_avx2, .narrow_limit = NARROW_LIMIT, .medium = medium_avx2, .medium_limit = FMA_LIMIT,
     .fill = fill_avx2, .fractions = fractions_avx2, .fractions32 = fractions32_avx2},
    {.name = "avx512f", .features = "avx512f", .batch = 128, .small = small_avx512, .small_limit = SMALL_LIMIT,
     .narrow = narrow_avx512, .narrow_limit = NARROW_LIMIT, .medium = medium_avx512, .medium_limit = FMA_LIMIT,
     .fill = fill_avx512, .fractions = fractions_avx512, .fractions32 = fractions32_avx512},
    /* FMA below 2^48 measured slightly faster than IFMA on AMD EPYC (Zen 4);
       IFMA takes 2^48 .. 2^51 */
    {.name = "avx512ifma", .features = "avx512f, avx512ifma", .batch = 128, .small = small_avx512,
     .small_limit = SMALL_LIMIT, .narrow = narrow_avx512, .narrow_limit = NARROW_LIMIT, .medium = medium_avx512,
     .medium_limit = FMA_LIMIT, .wide = medium_ifma, .wide_limit = IFMA_LIMIT, .fill = fill_avx512,
     .fractions = fractions_avx512,
     .fractions32 = fractions32_avx512, .fractions52 = fractions52_ifma},
    {.name = "ifma52", .features = "avx512f, avx512ifma", .batch = 128, .wide = medium_ifma,
     .wide_limit = IFMA_LIMIT, .fill = fill_avx512, .fractions = fractions_avx512, .fractions32 = fractions32_avx512,
     .fractions52 = fractions52_ifma},
#else
    {.name = "avx2", .features = "avx2, fma"},
    {.name = "avx512f", .features = "avx512f"},
    {.name = "avx512ifma", .features = "avx512f, avx512ifma"},
    {.name = "ifma52", .features = "avx512f, avx512ifma"},
#endif
};

static int path_ok[NPATHS];             /* set once at import */
static const char *path_why[NPATHS];    /* why a path is not available */
static volatile int active = PATH_PORTABLE;

/* Which paths a CPU with these features offers, why the others are not, and
 * the default (the fastest offered, benchmarks/kernel.py): the whole dispatch
 * rule, a pure function so that the tests can ask it about CPUs other than the
 * one they run on (paths_for() in Python). */
static int offer_paths(int avx2, int avx512f, int ifma, int ok[NPATHS], const char *why[NPATHS])
{
    for (int i = 0; i < NPATHS; i++) {
        ok[i] = i <= PATH_SCALAR;
        why[i] = "";
    }
#if HAVE_X86_PATHS
    ifma = ifma && avx512f;
    ok[PATH_AVX2] = avx2;
    why[PATH_AVX2] = avx2 ? "" : "this CPU (or its OS) lacks AVX2 and FMA";
    ok[PATH_AVX512F] = avx512f;
    why[PATH_AVX512F] = avx512f ? "" : "this CPU (or its OS) lacks AVX-512F";
    ok[PATH_AVX512IFMA] = ok[PATH_IFMA52] = ifma;
    why[PATH_AVX512IFMA] = why[PATH_IFMA52] = ifma ? "" : "this CPU (or its OS) lacks AVX-512F with AVX-512 IFMA";
#else
    (void)avx2, (void)avx512f, (void)ifma;
    for (int i = PATH_AVX2; i < NPATHS; i++)
        why[i] = "not built: the extension was compiled without x86-64 vector support";
#endif
    static const int preference[] = {PATH_AVX512IFMA, PATH_AVX512F, PATH_AVX2};
    for (int i = 0; i < 3; i++)
        if (ok[preference[i]])
            return preference[i];
    return PATH_PORTABLE;
}

static void detect_paths(void)
{
    int avx2 = 0, avx512f = 0, ifma = 0;
#if HAVE_X86_PATHS
    __builtin_cpu_init();
    avx2 = __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
    avx512f = __builtin_cpu_supports("avx512f");
    ifma = __builtin_cpu_supports("avx512ifma");
#endif
    active = offer_paths(avx2, avx512f, ifma, path_ok, path_why);
}

static void run_path(int path, const job_t *jb, uint64_t *acc)
{
    if (path == PATH_PORTABLE)
        run_job(jb, acc, 8, STEP_SIMD);
    else if (path == PATH_SCALAR)
        run_job(jb, acc, 8, STEP_FUSED);
    else
        run_job_batched(jb, acc, &PATHS[path]);
}

/* ==== Combs of windows ======================================================
 *
 * head_sum_comb sums the heads of count windows at exponents
 * D_i = D_0 + i * step (i = 0 .. count-1) in one pass over the terms.  A
 * term (k, j) has the same modulus N = 2^v n in every window and the
 * exponent E_i = D_i - e k, which grows by step from one window to the next.
 * Window i holds the term in its head when E_i >= 0; it takes it by
 * slow_term when E_i < v and by big_exponent_term when E_i - v + 64W passes
 * 2^64, exactly as run_job would for that window alone.  Since E_i grows
 * with i, the windows holding the term by the ordinary rule form one range
 * [first, stop), and for them
 *
 *     x_first     = c 2^(E_first - v + 64W) mod n      (the path's ladder)
 *     x_(i+1)     = x_i 2^step mod n = mont_mul(x_i, T) with
 *     T           = 2^(step + 64) mod n                (the ladder, c = 1),
 *
 * mont_mul(a, b) = a b 2^-64 mod n being exact in [0, n) for a, b < n < 2^63
 * (redc).  Each x_i is the very residue r_(W+1) that run_job computes for
 * window i, so the fraction words added to window i's accumulator are the
 * single window's, bit for bit, and each window's bound [value, value +
 * terms) of evaluate.py holds as it does alone.  A lane that window i does
 * not take (i outside [first, stop)) contributes the residue 0, whose words
 * are all 0.  The comb shares only the two ladders of a term; every window
 * still pays one Montgomery product and its fraction words per term.
 *
 * Terms go into batches of the path (64 or 128 terms; portable and scalar:
 * 64 terms on ladder64, the 64-bit scalar ladder, and add_fractions), the
 * batch's residues by batch_residues, T by a second batch_residues with
 * f = step + 64 and c = 1, then window by window the words by
 * batch_fractions.  On avx2 the products are vector ones below 2^48, with T
 * = 2^(step + 32) or 2^step mod n (comb_windows_avx2, its bounds beside it);
 * the AVX-512 paths use the scalar mont_mul with their own ladders and
 * digits (correct by the same argument; not yet tuned, and not run on the
 * machines this was written on).
 *
 * Limits (checked in the glue and in backend.py): those of head_sum with
 * D = D_0 + (count - 1) step, 1 <= count <= MAX_COMB, step < 2^63
 * (MAX_COMB_STEP = 2^63 - 1 in Python); the block's k range is clipped to
 * the deepest window's head. */

#define MAX_COMB 4096

typedef struct {
    uint64_t D0, step;
    uint32_t count;
    uint64_t *acc; /* count * words words: window i's sum at acc + i * words */
} comb_t;

typedef struct {
    batch_t bt;
    uint64_t xs[BATCH], T[BATCH];
    uint64_t first[BATCH], stop[BATCH]; /* the windows [first, stop) take the lane's residue */
    uint32_t wmin, wmax;                /* over the lanes put in so far */
    uint32_t first_max, stop_min;       /* over the lanes put in so far (not the padding) */
    int multi;                          /* some lane serves two windows or more: T is needed */
} comb_batch_t;

static void comb_reset(comb_batch_t *cb)
{
    batch_reset(&cb->bt);
    cb->wmin = cb->stop_min = UINT32_MAX;
    cb->wmax = cb->first_max = 0;
    cb->multi = 0;
}

/* How the windows of a batch advance their residues x_i -> x_i 2^step mod n:
 * COMB_MONT64 (any n < 2^63, scalar): mont_mul by T = 2^(step + 64) mod n;
 * on the avx2 path, COMB_MONT32 (n < 2^31): 32-bit Montgomery by
 * T = 2^(step + 32) mod n, and COMB_FMA (n < 2^48): FMA doubles by
 * T = 2^step mod n (see comb_windows_avx2).  comb_offset gives the extra
 * power of two folded into T. */
enum { COMB_MONT64 = 0, COMB_MONT32 = 1, COMB_FMA = 2 };

static const int comb_offset[] = {64, 32, 0};

#if HAVE_X86_PATHS
static void comb_windows_avx2(comb_batch_t *cb, int words, const comb_t *cm, int kind);
#endif

static void comb_flush(comb_batch_t *cb, const simd_path_t *path, const int B, const comb_t *cm, int words)
{
    batch_t *bt = &cb->bt;
    int kind = COMB_MONT64;
#if HAVE_X86_PATHS
    if (path == &PATHS[PATH_AVX2])
        kind = bt->nmax < NARROW_LIMIT ? COMB_MONT32 : bt->nmax < FMA_LIMIT ? COMB_FMA : COMB_MONT64;
#endif
    batch_residues(bt, path, B);
    memcpy(cb->xs, bt->x, sizeof(uint64_t) * (size_t)B);
    if (cb->multi) { /* T = 2^(step + offset) mod n: see the enum */
        const uint64_t f = cm->step + (uint64_t)comb_offset[kind];
        for (int l = 0; l < B; l++) {
            bt->f[l] = f;
            bt->cm[l] = bt->n[l] > 1; /* 1 mod n */
        }
        bt->fmax = bt->fmin = f;
        batch_residues(bt, path, B);
        memcpy(cb->T, bt->x, sizeof(uint64_t) * (size_t)B);
    }
#if HAVE_X86_PATHS
    if (kind != COMB_MONT64) { /* bt->ninv: the low 32 bits from avx2's ladders, all the vector digits read */
        comb_windows_avx2(cb, words, cm, kind);
        comb_reset(cb);
        return;
    }
#endif
    for (int l = 0; l < B; l++) /* add_fractions and mont_mul read 64 bits of it */
        bt->ninv[l] = inverse64(bt->n[l]);
    for (uint32_t w = cb->wmin; w < cb->wmax; w++) {
        for (int l = 0; l < B; l++)
            bt->x[l] = cb->first[l] <= w && w < cb->stop[l] ? cb->xs[l] : 0;
        batch_fractions(bt, path, B, words, cm->acc + (size_t)w * (size_t)words);
        if (w + 1 < cb->wmax)
            for (int l = 0; l < B; l++)
                if (cb->first[l] <= w && w + 1 < cb->stop[l])
                    cb->xs[l] = mont_mul(cb->xs[l], cb->T[l], bt->n[l], bt->ninv[l]);
    }
    comb_reset(cb);
}

#if HAVE_X86_PATHS
/* The windows of an avx2 batch (64 terms), four lanes a register.  Window w
 * takes lane l's residue x where first <= w < stop, else 0 (a blend by two
 * 64-bit compares: first, stop and w are below 2^32), then x advances by T:
 *   COMB_MONT32, n < 2^31: with x, T < n, t = x T < n^2 < 2^62, m n < 2^63,
 *     so t + m n < 2^64 and (t + m n) / 2^32 = x T 2^-32 mod n lies below
 *     n^2 / 2^32 + n < 2n; min_epu32(x, x - n) brings it to [0, n) (as in
 *     ladder32_avx2's full steps).  T = 2^(step + 32) mod n gives x 2^step.
 *   COMB_FMA, n < 2^48: mulmod_avx2(x, T) with x, T < n (|x T / n| < n <
 *     2^49) is exact in (-n, n); adding n to a negative result gives x 2^step
 *     mod n in [0, n).  The residues stay doubles between windows.
 * The fraction words then come from the path's vector digits. */
/* COMB_MONT32 with the words of each window computed from the residues in
 * registers, for 1 to 3 words (fractions32_avx2's digits, its loops turned
 * inside out: the column sums of a word do not depend on the order of the
 * lanes, and they go into acc word by word with the carry exactly as
 * there).  The digit d = -r n^-1 mod 2^32 comes from mullo_epi32, which
 * leaves 0 in the high half of each lane since r < n < 2^32 has a zero high
 * half: so d needs no mask before it is summed (below 2^32 each, 16 of them
 * per lane of a column sum). */
TARGET_AVX2 __attribute__((always_inline)) static inline void comb_mont32_avx2(comb_batch_t *cb, const int words,
                                                                             const comb_t *cm)
{
    batch_t *bt = &cb->bt;
    const __m256i zero = _mm256_setzero_si256();
    uint64_t np[BATCH];
    for (int h = 0; h < 16; h++)
        _mm256_storeu_si256((__m256i *)(np + 4 * h),
                            _mm256_sub_epi64(zero, _mm256_loadu_si256((const __m256i *)(bt->ninv + 4 * h))));
    for (uint32_t w = cb->wmin; w < cb->wmax; w++) {
        const int all = w >= cb->first_max && w + 1 < cb->stop_min; /* every lane on: no masks */
        const __m256i W = _mm256_set1_epi64x((int64_t)w), W1 = _mm256_set1_epi64x((int64_t)w + 1);
        __m256i S[2 * MAX_WORDS];
        for (int i = 0; i < 2 * words; i++)
            S[i] = zero;
        for (int h = 0; h < 16; h++) {
            const __m256i n = _mm256_loadu_si256((const __m256i *)(bt->n + 4 * h));
            const __m256i NP = _mm256_loadu_si256((const __m256i *)(np + 4 * h));
            const __m256i x = _mm256_loadu_si256((const __m256i *)(cb->xs + 4 * h));
            __m256i on = zero, next = zero;
            if (!all) {
                const __m256i first = _mm256_loadu_si256((const __m256i *)(cb->first + 4 * h));
                const __m256i stop = _mm256_loadu_si256((const __m256i *)(cb->stop + 4 * h));
                on = _mm256_andnot_si256(_mm256_cmpgt_epi64(first, W), _mm256_cmpgt_epi64(stop, W));
                next = _mm256_and_si256(on, _mm256_cmpgt_epi64(stop, W1));
            }
            __m256i t = all ? x : _mm256_and_si256(x, on), d;
            for (int idx = 0; idx < words; idx++) { /* DIGIT32, n < 2^32 */
                d = _mm256_mullo_epi32(t, NP); /* t < 2^32: the high half of each lane is 0 */
                t = _mm256_srli_epi64(_mm256_add_epi64(_mm256_mul_epu32(d, n), t), 32);
                S[2 * idx] = _mm256_add_epi64(S[2 * idx], d);
                d = _mm256_mullo_epi32(t, NP);
                t = _mm256_srli_epi64(_mm256_add_epi64(_mm256_mul_epu32(d, n), t), 32);
                S[2 * idx + 1] = _mm256_add_epi64(S[2 * idx + 1], d);
            }
            /* x 2^step mod n: see comb_windows_avx2 */
            __m256i p = _mm256_mul_epu32(x, _mm256_loadu_si256((const __m256i *)(cb->T + 4 * h)));
            __m256i m = _mm256_mul_epu32(p, NP);
            __m256i y = _mm256_srli_epi64(_mm256_add_epi64(p, _mm256_mul_epu32(m, n)), 32);
            y = _mm256_min_epu32(y, _mm256_sub_epi32(y, n));
            _mm256_storeu_si256((__m256i *)(cb->xs + 4 * h), all ? y : _mm256_blendv_epi8(x, y, next));
        }
        uint64_t *acc = cm->acc + (size_t)w * (size_t)words, carry = 0;
        for (int idx = 0; idx < words; idx++)
            add_column(acc + idx, hsum_avx2(S[2 * idx]), hsum_avx2(S[2 * idx + 1]), &carry);
    }
}

/* COMB_FMA with the words computed from the residues in registers, for 1
 * or 2 words (3 measured slower than comb_windows_avx2's separate passes): the residues stay doubles, each window's digits come from
 * their integer form by DIGIT_AVX2 (DIGIT32 when every n < 2^32, else
 * DIGIT64), the column sums go into acc as in comb_mont32_avx2. */
TARGET_AVX2 __attribute__((always_inline)) static inline void comb_fma_avx2(comb_batch_t *cb, const int words,
                                                                          const comb_t *cm, const int digit)
{
    batch_t *bt = &cb->bt;
    const __m256i zero = _mm256_setzero_si256(), lo32 = _mm256_set1_epi64x(0xffffffff);
    __m256d XD[16], TD[16], ND[16], NI[16];
    uint64_t np[BATCH];
    for (int h = 0; h < 16; h++) {
        ND[h] = u52_to_pd_avx2(_mm256_loadu_si256((const __m256i *)(bt->n + 4 * h)));
        NI[h] = _mm256_div_pd(_mm256_set1_pd(1.0), ND[h]);
        XD[h] = u52_to_pd_avx2(_mm256_loadu_si256((const __m256i *)(cb->xs + 4 * h)));
        TD[h] = u52_to_pd_avx2(_mm256_loadu_si256((const __m256i *)(cb->T + 4 * h)));
        _mm256_storeu_si256((__m256i *)(np + 4 * h),
                            _mm256_sub_epi64(zero, _mm256_loadu_si256((const __m256i *)(bt->ninv + 4 * h))));
    }
    for (uint32_t w = cb->wmin; w < cb->wmax; w++) {
        const int all = w >= cb->first_max && w + 1 < cb->stop_min; /* every lane on: no masks */
        const __m256i W = _mm256_set1_epi64x((int64_t)w), W1 = _mm256_set1_epi64x((int64_t)w + 1);
        __m256i S[2 * MAX_WORDS];
        for (int i = 0; i < 2 * words; i++)
            S[i] = zero;
        for (int h = 0; h < 16; h++) {
            const __m256i n = _mm256_loadu_si256((const __m256i *)(bt->n + 4 * h)), nh = _mm256_srli_epi64(n, 32);
            const __m256i NP = _mm256_loadu_si256((const __m256i *)(np + 4 * h));
            __m256i on = zero, next = zero;
            if (!all) {
                const __m256i first = _mm256_loadu_si256((const __m256i *)(cb->first + 4 * h));
                const __m256i stop = _mm256_loadu_si256((const __m256i *)(cb->stop + 4 * h));
                on = _mm256_andnot_si256(_mm256_cmpgt_epi64(first, W), _mm256_cmpgt_epi64(stop, W));
                next = _mm256_and_si256(on, _mm256_cmpgt_epi64(stop, W1));
            }
            __m256i t = pd_to_u52_avx2(XD[h]), d;
            t = all ? t : _mm256_and_si256(t, on);
            for (int idx = 0; idx < words; idx++) {
                DIGIT_AVX2(t, d, n, nh, NP, digit);
                S[2 * idx] = _mm256_add_epi64(S[2 * idx], _mm256_and_si256(d, lo32));
                DIGIT_AVX2(t, d, n, nh, NP, digit);
                S[2 * idx + 1] = _mm256_add_epi64(S[2 * idx + 1], _mm256_and_si256(d, lo32));
            }
            __m256d r = mulmod_avx2(XD[h], TD[h], ND[h], NI[h]); /* x 2^step mod n: see comb_windows_avx2 */
            r = _mm256_add_pd(r, _mm256_and_pd(_mm256_cmp_pd(r, _mm256_setzero_pd(), _CMP_LT_OQ), ND[h]));
            XD[h] = all ? r : _mm256_blendv_pd(XD[h], r, _mm256_castsi256_pd(next));
        }
        uint64_t *acc = cm->acc + (size_t)w * (size_t)words, carry = 0;
        for (int idx = 0; idx < words; idx++)
            add_column(acc + idx, hsum_avx2(S[2 * idx]), hsum_avx2(S[2 * idx + 1]), &carry);
    }
}

TARGET_AVX2 static void comb_windows_avx2(comb_batch_t *cb, int words, const comb_t *cm, int kind)
{
    if (kind == COMB_MONT32) { /* words known at compile time for the common precisions */
        if (words == 1)
            comb_mont32_avx2(cb, 1, cm);
        else if (words == 2)
            comb_mont32_avx2(cb, 2, cm);
        else if (words == 3)
            comb_mont32_avx2(cb, 3, cm);
        if (words <= 3)
            return;
    }
    if (kind == COMB_FMA && words <= 2) { /* the digits by the largest modulus, as batch_fractions */
        const int digit = cb->bt.nmax < ((uint64_t)1 << 32) ? DIGIT32 : DIGIT64;
        if (words == 1 && digit == DIGIT32)
            comb_fma_avx2(cb, 1, cm, DIGIT32);
        else if (words == 1)
            comb_fma_avx2(cb, 1, cm, DIGIT64);
        else if (digit == DIGIT32)
            comb_fma_avx2(cb, 2, cm, DIGIT32);
        else
            comb_fma_avx2(cb, 2, cm, DIGIT64);
        return;
    }
    batch_t *bt = &cb->bt;
    const int Hc = 16;
    const __m256i zero = _mm256_setzero_si256();
    __m256d XD[16], TD[16], ND[16], NI[16];
    uint64_t np[BATCH];
    if (kind == COMB_FMA)
        for (int h = 0; h < Hc; h++) {
            ND[h] = u52_to_pd_avx2(_mm256_loadu_si256((const __m256i *)(bt->n + 4 * h)));
            NI[h] = _mm256_div_pd(_mm256_set1_pd(1.0), ND[h]);
            XD[h] = u52_to_pd_avx2(_mm256_loadu_si256((const __m256i *)(cb->xs + 4 * h)));
            TD[h] = u52_to_pd_avx2(_mm256_loadu_si256((const __m256i *)(cb->T + 4 * h)));
        }
    else
        for (int h = 0; h < Hc; h++)
            _mm256_storeu_si256((__m256i *)(np + 4 * h),
                                _mm256_sub_epi64(zero, _mm256_loadu_si256((const __m256i *)(bt->ninv + 4 * h))));
    for (uint32_t w = cb->wmin; w < cb->wmax; w++) {
        /* every lane on (padding lanes hold 0 and stay 0): no masks */
        const int all = w >= cb->first_max && w + 1 < cb->stop_min;
        const __m256i W = _mm256_set1_epi64x((int64_t)w), W1 = _mm256_set1_epi64x((int64_t)w + 1);
        for (int h = 0; h < Hc; h++) {
            __m256i on = zero, next = zero;
            if (!all) {
                const __m256i first = _mm256_loadu_si256((const __m256i *)(cb->first + 4 * h));
                const __m256i stop = _mm256_loadu_si256((const __m256i *)(cb->stop + 4 * h));
                on = _mm256_andnot_si256(_mm256_cmpgt_epi64(first, W), _mm256_cmpgt_epi64(stop, W));
                next = _mm256_and_si256(on, _mm256_cmpgt_epi64(stop, W1));
            }
            if (kind == COMB_MONT32) {
                const __m256i n = _mm256_loadu_si256((const __m256i *)(bt->n + 4 * h));
                const __m256i x = _mm256_loadu_si256((const __m256i *)(cb->xs + 4 * h));
                _mm256_storeu_si256((__m256i *)(bt->x + 4 * h), all ? x : _mm256_and_si256(x, on));
                __m256i t = _mm256_mul_epu32(x, _mm256_loadu_si256((const __m256i *)(cb->T + 4 * h)));
                __m256i m = _mm256_mul_epu32(t, _mm256_loadu_si256((const __m256i *)(np + 4 * h)));
                __m256i y = _mm256_srli_epi64(_mm256_add_epi64(t, _mm256_mul_epu32(m, n)), 32);
                y = _mm256_min_epu32(y, _mm256_sub_epi32(y, n)); /* below 2^32, high halves zero */
                _mm256_storeu_si256((__m256i *)(cb->xs + 4 * h), all ? y : _mm256_blendv_epi8(x, y, next));
            } else {
                const __m256i x = pd_to_u52_avx2(XD[h]);
                _mm256_storeu_si256((__m256i *)(bt->x + 4 * h), all ? x : _mm256_and_si256(x, on));
                __m256d r = mulmod_avx2(XD[h], TD[h], ND[h], NI[h]);
                r = _mm256_add_pd(r, _mm256_and_pd(_mm256_cmp_pd(r, _mm256_setzero_pd(), _CMP_LT_OQ), ND[h]));
                XD[h] = all ? r : _mm256_blendv_pd(XD[h], r, _mm256_castsi256_pd(next));
            }
        }
        uint64_t *acc = cm->acc + (size_t)w * (size_t)words;
        if (bt->nmax < ((uint64_t)1 << 32))
            fractions32_avx2(bt, words, acc);
        else
            fractions_avx2(bt, words, acc);
    }
}
#endif

/* One term (k, pair p) into every window that holds it (a = the first
 * window whose head holds k): slow_term and big_exponent_term for the
 * windows where run_job would use them, the rest as one lane of the batch. */
static void comb_term(const job_t *jb, const comb_t *cm, comb_batch_t *cb, const simd_path_t *path, const int B,
                      int *fill, uint64_t k, Py_ssize_t p, uint32_t a)
{
    const uint64_t extra = 64 * (uint64_t)jb->words, M = UINT64_MAX - extra, ek = jb->e * k;
    const uint64_t D0 = cm->D0, step = cm->step;
    const int words = jb->words;
    const uint64_t base = jb->m * k + jb->js[p];
    uint64_t N = jb->q;
    for (unsigned i = 0; i < jb->s; i++)
        N *= base; /* below 2^63: checked in parse_job */
    const int v = trailing_zeros(N);
    const uint64_t odd = N >> v;
    const int64_t c = jb->alternating && (k & 1) ? -jb->cs[p] : jb->cs[p];
    uint32_t first = a, stop = cm->count;
    for (; first < stop && D0 + first * step - ek < (uint64_t)v; first++)
        slow_term(N, D0 + first * step - ek, c, words, cm->acc + (size_t)first * (size_t)words);
    for (; stop > first && D0 + (stop - 1) * step - ek - v > M; stop--)
        big_exponent_term(odd, D0 + (stop - 1) * step - ek - v, c, words, cm->acc + (size_t)(stop - 1) * (size_t)words);
    if (first == stop)
        return;
    batch_t *bt = &cb->bt;
    const int l = *fill;
    bt->n[l] = odd;
    bt->f[l] = D0 + first * step - ek - v + extra;
    bt->cm[l] = coeff_mod(c, odd);
    bt->nmax = odd > bt->nmax ? odd : bt->nmax;
    bt->fmax = bt->f[l] > bt->fmax ? bt->f[l] : bt->fmax;
    bt->fmin = bt->f[l] < bt->fmin ? bt->f[l] : bt->fmin;
    cb->first[l] = first;
    cb->stop[l] = stop;
    cb->wmin = first < cb->wmin ? first : cb->wmin;
    cb->wmax = stop > cb->wmax ? stop : cb->wmax;
    cb->first_max = first > cb->first_max ? first : cb->first_max;
    cb->stop_min = stop < cb->stop_min ? stop : cb->stop_min;
    cb->multi |= stop - first > 1;
    if (++*fill == B) {
        comb_flush(cb, path, B, cm, words);
        *fill = 0;
    }
}

/* Every term of the job (jb->D is the deepest window's D, jb->k1 clipped to
 * its head) into every window that holds it; see the section's comment.
 * Pair by pair and k by k, a = the first window whose head holds k (it never
 * decreases with k).  The common case goes in runs, as in run_job_batched:
 * when s = 1, q is odd and ctz(j) < ctz(m), every modulus has v = t =
 * ctz(j) and odd part b + step_n k; for the k in [lo, hi) (no window's
 * exponent beyond 64 bits, |c| < n, E >= t in the deepest window) where
 * window a holds k with E_a >= t (so no window takes it by slow_term, and the
 * windows before a do not hold it), the term goes to windows [a, count), and
 * so do the next k up to the last one with D_a - e k >= t: a whole run is
 * written by the path's fill, with no branch per term. */
static void run_comb(const job_t *jb, const comb_t *cm, comb_batch_t *cb, const simd_path_t *path)
{
    comb_reset(cb);
    const int B = path->batch ? path->batch : 64;
    const uint64_t extra = 64 * (uint64_t)jb->words, e = jb->e, m = jb->m, q = jb->q, D = jb->D;
    const uint64_t D0 = cm->D0, step = cm->step;
    const uint32_t count = cm->count;
    int fill = 0;
    for (Py_ssize_t p = 0; p < jb->npairs; p++) {
        const uint64_t j = jb->js[p];
        const int64_t c0 = jb->cs[p];
        const int tight = jb->s == 1 && (q & 1) && m != 0 && j != 0 && c0 != 0 && trailing_zeros(j) < trailing_zeros(m);
        uint64_t t = 0, stepn = 0, b = 0, ca = 0, lo = 0, hi = 0;
        if (tight) { /* the bounds of run_job_batched's tight loop, for the deepest window */
            t = (uint64_t)trailing_zeros(j);
            stepn = q * (m >> t);
            b = q * (j >> t);
            ca = c0 < 0 ? (uint64_t)(-c0) : (uint64_t)c0;
            const uint64_t M = UINT64_MAX - extra;
            lo = jb->k0;
            hi = jb->k1;
            if (D < t)
                hi = lo;
            else if (e && (D - t) / e + 1 < hi)
                hi = (D - t) / e + 1;
            if (D >= t && D - t > M) {
                uint64_t need = D - t - M;
                uint64_t kk = e ? need / e + (need % e != 0) : UINT64_MAX;
                lo = kk > lo ? kk : lo;
            }
            if (b <= ca) {
                uint64_t kk = (ca - b) / stepn + 1;
                lo = kk > lo ? kk : lo;
            }
        }
        const uint64_t neg_odd = jb->alternating ? 1 : 0, negc = c0 < 0;
        uint32_t a = 0;
        uint64_t k = jb->k0;
        while (k < jb->k1) {
            const uint64_t ek = e * k; /* <= D: k1 is clipped */
            while (a < count && D0 + a * step < ek)
                a++;
            if (a == count)
                break;
            const uint64_t Ea = D0 + a * step - ek;
            if (!(tight && k >= lo && k < hi && Ea >= t)) {
                comb_term(jb, cm, cb, path, B, &fill, k, p, a);
                k++;
                continue;
            }
            uint64_t end = hi; /* the run: the k up to the last with D_a - e k >= t */
            if (e && (Ea - t) / e + 1 < end - k)
                end = k + (Ea - t) / e + 1;
            while (k < end) {
                batch_t *bt = &cb->bt;
                uint64_t run = end - k < (uint64_t)(B - fill) ? end - k : (uint64_t)(B - fill);
                uint64_t n = b + stepn * k, f = D0 + a * step - e * k - t + extra;
                bt->fmax = f > bt->fmax ? f : bt->fmax;
                const run_t r = {n, stepn, f, e, ca, negc, neg_odd, k};
                uint64_t i = path->fill ? path->fill(bt, fill, run, &r) : 0;
                uint64_t kk = k + i;
                for (n += stepn * i, f -= e * i; i < run; i++, kk++, n += stepn, f -= e) {
                    uint64_t neg = negc ^ (neg_odd & kk);
                    bt->n[fill + i] = n;
                    bt->f[fill + i] = f;
                    bt->cm[fill + i] = neg ? n - ca : ca;
                }
                for (i = 0; i < run; i++) {
                    cb->first[fill + i] = a;
                    cb->stop[fill + i] = count;
                }
                bt->nmax = bt->n[fill + run - 1] > bt->nmax ? bt->n[fill + run - 1] : bt->nmax;
                bt->fmin = bt->f[fill + run - 1] < bt->fmin ? bt->f[fill + run - 1] : bt->fmin;
                cb->wmin = a < cb->wmin ? a : cb->wmin;
                cb->wmax = count;
                cb->first_max = a > cb->first_max ? a : cb->first_max;
                cb->stop_min = count < cb->stop_min ? count : cb->stop_min;
                cb->multi |= count - a > 1;
                fill += (int)run;
                k += run;
                if (fill == B) {
                    comb_flush(cb, path, B, cm, jb->words);
                    fill = 0;
                }
            }
        }
    }
    if (fill) {
        for (int l = fill; l < B; l++) { /* pad with n = 1 in no window: contributes 0 */
            cb->bt.n[l] = 1;
            cb->bt.f[l] = cb->bt.f[0];
            cb->bt.cm[l] = 0;
            cb->first[l] = cb->stop[l] = 0;
        }
        comb_flush(cb, path, B, cm, jb->words);
    }
}

static const simd_path_t COMB_SCALAR = {.name = "scalar", .features = "", .batch = 64};

static void run_comb_path(int path, const job_t *jb, const comb_t *cm, comb_batch_t *cb)
{
    run_comb(jb, cm, cb, path <= PATH_SCALAR ? &COMB_SCALAR : &PATHS[path]);
}

/* ---- Python glue ------------------------------------------------------- */

/* A non-negative integer below 2^64 (OverflowError otherwise). */
static int as_u64(PyObject *obj, const char *what, uint64_t *out)
{
    PyObject *i = PyNumber_Index(obj);
    if (i == NULL)
        return -1;
    unsigned long long v = PyLong_AsUnsignedLongLong(i);
    Py_DECREF(i);
    if (v == (unsigned long long)-1 && PyErr_Occurred()) {
        if (PyErr_ExceptionMatches(PyExc_OverflowError)) {
            PyErr_Clear();
            PyErr_Format(PyExc_OverflowError, "%s must be in 0 .. 2^64 - 1 for the compiled kernel", what);
        }
        return -1;
    }
    *out = (uint64_t)v;
    return 0;
}

/* Fill jb from the 11 head_sum arguments; check every limit of the kernel. */
static int parse_job(PyObject *const *a, job_t *jb)
{
    uint64_t s, e, words;
    int alt;
    memset(jb, 0, sizeof *jb);
    if (as_u64(a[0], "D", &jb->D) || as_u64(a[1], "k0", &jb->k0) || as_u64(a[2], "k1", &jb->k1) ||
        as_u64(a[3], "m", &jb->m) || as_u64(a[4], "s", &s) || as_u64(a[5], "e", &e) ||
        as_u64(a[6], "q", &jb->q) || as_u64(a[10], "words", &words))
        return -1;
    if ((alt = PyObject_IsTrue(a[7])) < 0)
        return -1;
    jb->alternating = alt;
    if (words < 1 || words > MAX_WORDS) {
        PyErr_Format(PyExc_ValueError, "words must be in 1 .. %d", MAX_WORDS);
        return -1;
    }
    jb->words = (int)words;
    if (s > 63 || e > 0xffffffffu) {
        PyErr_SetString(PyExc_OverflowError, "s or e too large for the compiled kernel");
        return -1;
    }
    jb->s = (unsigned)s;
    jb->e = (unsigned)e;
    if (jb->q < 1) {
        PyErr_SetString(PyExc_ValueError, "q must be at least 1");
        return -1;
    }
    uint64_t klast = jb->k1 - 1; /* k1 > k0 >= 0 here */
    if (jb->e && klast > jb->D / jb->e) {
        PyErr_SetString(PyExc_ValueError, "head range reaches a negative exponent");
        return -1;
    }

    PyObject *js = PySequence_Fast(a[8], "js must be a sequence");
    if (js == NULL)
        return -1;
    PyObject *cs = PySequence_Fast(a[9], "cs must be a sequence");
    if (cs == NULL) {
        Py_DECREF(js);
        return -1;
    }
    int rc = -1;
    Py_ssize_t np = PySequence_Fast_GET_SIZE(js);
    if (np != PySequence_Fast_GET_SIZE(cs)) {
        PyErr_SetString(PyExc_ValueError, "js and cs must have the same length");
        goto done;
    }
    jb->npairs = np;
    jb->js = PyMem_Malloc((size_t)(np ? np : 1) * sizeof(uint64_t));
    jb->cs = PyMem_Malloc((size_t)(np ? np : 1) * sizeof(int64_t));
    if (jb->js == NULL || jb->cs == NULL) {
        PyErr_NoMemory();
        goto done;
    }
    uint64_t jmin = UINT64_MAX, jmax = 0;
    for (Py_ssize_t p = 0; p < np; p++) {
        if (as_u64(PySequence_Fast_GET_ITEM(js, p), "j", &jb->js[p]))
            goto done;
        jmin = jb->js[p] < jmin ? jb->js[p] : jmin;
        jmax = jb->js[p] > jmax ? jb->js[p] : jmax;
        int overflow = 0;
        long long c = PyLong_AsLongLongAndOverflow(PySequence_Fast_GET_ITEM(cs, p), &overflow);
        if (c == -1 && PyErr_Occurred())
            goto done;
        if (overflow || c >= COEFF_LIMIT || c <= -COEFF_LIMIT) {
            PyErr_SetString(PyExc_OverflowError, "|c| must be below 2^62 for the compiled kernel");
            goto done;
        }
        jb->cs[p] = (int64_t)c;
    }
    if (np) {
        /* The moduli grow with k and j: check the largest and the smallest. */
        const uint64_t lim = MODULUS_LIMIT;
        uint64_t big = jb->q;
        int over = jb->m && klast > (lim - 1 - jmax) / jb->m;
        uint64_t base = over ? 0 : jb->m * klast + jmax;
        for (unsigned i = 0; i < jb->s && !over; i++) {
            over = base && big > (lim - 1) / base;
            big *= base;
        }
        if (over || big >= lim) {
            PyErr_SetString(PyExc_OverflowError, "a modulus q*(m*k+j)^s reaches 2^63");
            goto done;
        }
        if (jb->s && jb->m * jb->k0 + jmin == 0) {
            PyErr_SetString(PyExc_ValueError, "a modulus q*(m*k+j)^s is zero");
            goto done;
        }
    }
    rc = 0;
done:
    Py_DECREF(js);
    Py_DECREF(cs);
    return rc;
}

static void free_job(job_t *jb)
{
    PyMem_Free(jb->js);
    PyMem_Free(jb->cs);
}

/* acc[0 .. words-1] as a little-endian integer. */
static PyObject *acc_value(const uint64_t *acc, int words)
{
    PyObject *value = PyLong_FromUnsignedLongLong(acc[words - 1]);
    PyObject *shift = PyLong_FromLong(64);
    for (int idx = words - 2; idx >= 0 && value && shift; idx--) {
        PyObject *t = PyNumber_Lshift(value, shift), *w = PyLong_FromUnsignedLongLong(acc[idx]);
        Py_DECREF(value);
        value = (t && w) ? PyNumber_Or(t, w) : NULL;
        Py_XDECREF(t);
        Py_XDECREF(w);
    }
    if (shift == NULL)
        Py_CLEAR(value);
    Py_XDECREF(shift);
    return value;
}

/* (value, terms) with value = acc as a little-endian integer. */
static PyObject *build_result(const uint64_t *acc, int words, PyObject *k0, PyObject *k1, Py_ssize_t npairs)
{
    PyObject *value = acc_value(acc, words);
    PyObject *span = value ? PyNumber_Subtract(k1, k0) : NULL;
    PyObject *np = span ? PyLong_FromSsize_t(npairs) : NULL;
    PyObject *terms = np ? PyNumber_Multiply(span, np) : NULL;
    Py_XDECREF(span);
    Py_XDECREF(np);
    if (terms == NULL) {
        Py_XDECREF(value);
        return NULL;
    }
    PyObject *out = PyTuple_Pack(2, value, terms);
    Py_DECREF(value);
    Py_DECREF(terms);
    return out;
}

/* run == NULL: the given path of run_path. */
static PyObject *head_sum_common(PyObject *const *args, runner_t run, int path)
{
    int empty = PyObject_RichCompareBool(args[2], args[1], Py_LE);
    if (empty < 0)
        return NULL;
    if (empty) /* like the twin: an empty range is (0, 0) whatever the rest */
        return Py_BuildValue("(ii)", 0, 0);
    job_t jb;
    uint64_t acc[MAX_WORDS] = {0};
    if (parse_job(args, &jb)) {
        free_job(&jb);
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    if (run)
        run(&jb, acc);
    else
        run_path(path, &jb, acc);
    Py_END_ALLOW_THREADS
    free_job(&jb);
    return build_result(acc, jb.words, args[1], args[2], jb.npairs);
}

/* Error bound: each term is floored once and the sum is exact mod 2^P, so
 * the exact head sum (mod 2^P, in units of 2^-P) lies in [value, value + terms);
 * spotcheck/engine/evaluate.py relies on this. */
static PyObject *head_sum(PyObject *self, PyObject *const *args, Py_ssize_t nargs)
{
    (void)self;
    if (nargs != 11) {
        PyErr_Format(PyExc_TypeError, "head_sum takes 11 arguments (%zd given)", nargs);
        return NULL;
    }
    return head_sum_common(args, NULL, active);
}

/* head_sum with a chosen interleave (1, 4, 8) and doubling step (0 fused,
 * 1 add, 2 multiply): for benchmarks/kernel.py and the tests. */
static PyObject *head_sum_variant(PyObject *self, PyObject *const *args, Py_ssize_t nargs)
{
    (void)self;
    if (nargs != 13) {
        PyErr_Format(PyExc_TypeError, "_head_sum_variant takes 13 arguments (%zd given)", nargs);
        return NULL;
    }
    long lanes = PyLong_AsLong(args[11]), step = PyLong_AsLong(args[12]);
    if (PyErr_Occurred())
        return NULL;
    runner_t run = pick_runner(lanes, step);
    if (run == NULL) {
        PyErr_SetString(PyExc_ValueError, "no such kernel variant");
        return NULL;
    }
    return head_sum_common(args, run, 0);
}

/* The index of a path named by a str object; -1 with ValueError if unknown
 * or (when need_ok) not offered by this CPU. */
static int path_index(PyObject *name, int need_ok)
{
    const char *txt = PyUnicode_Check(name) ? PyUnicode_AsUTF8(name) : NULL;
    if (txt == NULL) {
        if (!PyErr_Occurred())
            PyErr_SetString(PyExc_TypeError, "a kernel path name must be a str");
        return -1;
    }
    for (int i = 0; i < NPATHS; i++) {
        if (strcmp(txt, PATHS[i].name) != 0)
            continue;
        if (need_ok && !path_ok[i]) {
            PyErr_Format(PyExc_ValueError, "kernel path %s is not available: %s", txt, path_why[i]);
            return -1;
        }
        return i;
    }
    PyErr_Format(PyExc_ValueError, "unknown kernel path %R (known: portable, scalar, avx2, avx512f, avx512ifma, ifma52)",
                 name);
    return -1;
}

static PyObject *py_paths(PyObject *self, PyObject *unused)
{
    (void)self, (void)unused;
    PyObject *out = PyList_New(0);
    for (int i = 0; out && i < NPATHS; i++) {
        if (!path_ok[i])
            continue;
        PyObject *name = PyUnicode_FromString(PATHS[i].name);
        if (name == NULL || PyList_Append(out, name)) {
            Py_XDECREF(name);
            Py_CLEAR(out);
            break;
        }
        Py_DECREF(name);
    }
    if (out == NULL)
        return NULL;
    PyObject *tuple = PyList_AsTuple(out);
    Py_DECREF(out);
    return tuple;
}

static PyObject *py_unavailable_paths(PyObject *self, PyObject *unused)
{
    (void)self, (void)unused;
    PyObject *out = PyDict_New();
    for (int i = 0; out && i < NPATHS; i++) {
        if (path_ok[i])
            continue;
        PyObject *why = PyUnicode_FromString(path_why[i]);
        if (why == NULL || PyDict_SetItemString(out, PATHS[i].name, why)) {
            Py_XDECREF(why);
            Py_CLEAR(out);
            break;
        }
        Py_DECREF(why);
    }
    return out;
}

static PyObject *py_select_path(PyObject *self, PyObject *name)
{
    (void)self;
    int i = path_index(name, 1);
    if (i < 0)
        return NULL;
    active = i;
    Py_RETURN_NONE;
}

static PyObject *py_active_path(PyObject *self, PyObject *unused)
{
    (void)self, (void)unused;
    return PyUnicode_FromString(PATHS[active].name);
}

/* _head_sum_path(path, D, k0, ...): head_sum on a named path (tests, benchmarks). */
static PyObject *head_sum_path(PyObject *self, PyObject *const *args, Py_ssize_t nargs)
{
    (void)self;
    if (nargs != 12) {
        PyErr_Format(PyExc_TypeError, "_head_sum_path takes 12 arguments (%zd given)", nargs);
        return NULL;
    }
    int i = path_index(args[0], 1);
    if (i < 0)
        return NULL;
    return head_sum_common(args + 1, NULL, i);
}

/* The comb's glue: head_sum_comb(D0, step, count, k0, k1, m, s, e, q,
 * alternating, js, cs, words) -> [(value, terms)] per window, as
 * head_sum_comb_py.  The limits are head_sum's for the deepest window
 * (parse_job on D = D0 + (count - 1) step and k1 clipped to its head), and
 * 1 <= count <= MAX_COMB, step < 2^63. */
static PyObject *head_sum_comb_common(PyObject *const *args, int path)
{
    uint64_t D0, step, count, k0, k1, e;
    if (as_u64(args[0], "D0", &D0) || as_u64(args[1], "step", &step) || as_u64(args[2], "count", &count) ||
        as_u64(args[3], "k0", &k0) || as_u64(args[4], "k1", &k1) || as_u64(args[7], "e", &e))
        return NULL;
    if (count < 1 || count > MAX_COMB) {
        PyErr_Format(PyExc_ValueError, "a comb has 1 .. %d windows", MAX_COMB);
        return NULL;
    }
    if (step >= ((uint64_t)1 << 63) || (count > 1 && step > (UINT64_MAX - D0) / (count - 1))) {
        PyErr_SetString(PyExc_OverflowError, "the comb's deepest D must be below 2^64 (and its step below 2^63)");
        return NULL;
    }
    const uint64_t Dlast = D0 + (count - 1) * step;
    uint64_t kend = k1;
    if (e && kend > 0 && Dlast / e < kend - 1)
        kend = Dlast / e + 1;
    job_t jb;
    memset(&jb, 0, sizeof jb);
    uint64_t *acc = NULL;
    comb_batch_t *cb = NULL;
    PyObject *out = NULL, *dl = NULL, *ke = NULL;
    Py_ssize_t npairs = 0;
    int words = 1;
    if (kend > k0) {
        dl = PyLong_FromUnsignedLongLong(Dlast);
        ke = PyLong_FromUnsignedLongLong(kend);
        if (dl == NULL || ke == NULL)
            goto done;
        PyObject *const a[11] = {dl, args[3], ke, args[5], args[6], args[7], args[8], args[9], args[10], args[11],
                                 args[12]};
        if (parse_job(a, &jb))
            goto done;
        words = jb.words;
        npairs = jb.npairs;
        acc = PyMem_Calloc((size_t)count * (size_t)words, sizeof(uint64_t));
        cb = PyMem_Malloc(sizeof *cb);
        if (acc == NULL || cb == NULL) {
            PyErr_NoMemory();
            goto done;
        }
        memset(cb->T, 0, sizeof cb->T); /* read (and discarded) by batches that need no T */
        const comb_t cm = {D0, step, (uint32_t)count, acc};
        Py_BEGIN_ALLOW_THREADS
        run_comb_path(path, &jb, &cm, cb);
        Py_END_ALLOW_THREADS
    }
    out = PyList_New((Py_ssize_t)count);
    for (uint64_t i = 0; out && i < count; i++) {
        uint64_t Di = D0 + i * step, end = kend;
        if (e && end > 0 && Di / e < end - 1)
            end = Di / e + 1;
        PyObject *value = acc ? acc_value(acc + i * (uint64_t)words, words) : PyLong_FromLong(0);
        PyObject *span = PyLong_FromUnsignedLongLong(end > k0 ? end - k0 : 0);
        PyObject *np = PyLong_FromSsize_t(npairs);
        PyObject *terms = span && np ? PyNumber_Multiply(span, np) : NULL;
        PyObject *pair = value && terms ? PyTuple_Pack(2, value, terms) : NULL;
        Py_XDECREF(value);
        Py_XDECREF(span);
        Py_XDECREF(np);
        Py_XDECREF(terms);
        if (pair == NULL)
            Py_CLEAR(out);
        else
            PyList_SET_ITEM(out, (Py_ssize_t)i, pair);
    }
done:
    free_job(&jb);
    PyMem_Free(acc);
    PyMem_Free(cb);
    Py_XDECREF(dl);
    Py_XDECREF(ke);
    return out;
}

static PyObject *head_sum_comb(PyObject *self, PyObject *const *args, Py_ssize_t nargs)
{
    (void)self;
    if (nargs != 13) {
        PyErr_Format(PyExc_TypeError, "head_sum_comb takes 13 arguments (%zd given)", nargs);
        return NULL;
    }
    return head_sum_comb_common(args, active);
}

/* _head_sum_comb_path(path, D0, step, count, ...): head_sum_comb on a named path (tests, benchmarks). */
static PyObject *head_sum_comb_path(PyObject *self, PyObject *const *args, Py_ssize_t nargs)
{
    (void)self;
    if (nargs != 14) {
        PyErr_Format(PyExc_TypeError, "_head_sum_comb_path takes 14 arguments (%zd given)", nargs);
        return NULL;
    }
    int i = path_index(args[0], 1);
    if (i < 0)
        return NULL;
    return head_sum_comb_common(args + 1, i);
}

static PyObject *py_paths_for(PyObject *self, PyObject *args)
{
    (void)self;
    int avx2, avx512f, ifma, ok[NPATHS];
    const char *why[NPATHS];
    if (!PyArg_ParseTuple(args, "ppp:paths_for", &avx2, &avx512f, &ifma))
        return NULL;
    int chosen = offer_paths(avx2, avx512f, ifma, ok, why);
    PyObject *offered = PyList_New(0), *missing = PyDict_New(), *out = NULL;
    if (offered == NULL || missing == NULL)
        goto done;
    for (int i = 0; i < NPATHS; i++) {
        PyObject *item = PyUnicode_FromString(ok[i] ? PATHS[i].name : why[i]);
        int failed = item == NULL || (ok[i] ? PyList_Append(offered, item)
                                             : PyDict_SetItemString(missing, PATHS[i].name, item));
        Py_XDECREF(item);
        if (failed)
            goto done;
    }
    PyObject *tuple = PyList_AsTuple(offered);
    if (tuple != NULL)
        out = Py_BuildValue("(NOs)", tuple, missing, PATHS[chosen].name);
done:
    Py_XDECREF(offered);
    Py_XDECREF(missing);
    return out;
}

/* _add_column(acc, low, high, carry) -> (word, carry): add_column, for the tests. */
static PyObject *py_add_column(PyObject *self, PyObject *args)
{
    (void)self;
    unsigned long long acc, low, high, carry;
    if (!PyArg_ParseTuple(args, "KKKK:_add_column", &acc, &low, &high, &carry))
        return NULL;
    uint64_t a = acc, c = carry;
    add_column(&a, low, high, &c);
    return Py_BuildValue("(KK)", (unsigned long long)a, (unsigned long long)c);
}

static PyMethodDef kernel_methods[] = {
    {"_add_column", py_add_column, METH_VARARGS,
     "_add_column(acc, low, high, carry) -> (word, carry): one column of the vector paths' fraction sums."},
    {"paths_for", py_paths_for, METH_VARARGS,
     "paths_for(avx2, avx512f, avx512ifma) -> (offered, {name: reason}, default): the paths a CPU with these\n"
     "features would offer (the dispatch rule, on features other than this CPU's)."},
    {"paths", py_paths, METH_NOARGS,
     "paths() -> the names of the kernel paths this CPU offers, from the baseline 'portable' up."},
    {"unavailable_paths", py_unavailable_paths, METH_NOARGS,
     "unavailable_paths() -> {name: reason} for the paths this CPU or build lacks."},
    {"select_path", py_select_path, METH_O,
     "select_path(name): run head_sum on this path from now on (ValueError if unknown or unavailable)."},
    {"active_path", py_active_path, METH_NOARGS, "active_path() -> the name of the path head_sum runs."},
    {"_head_sum_path", (PyCFunction)(void (*)(void))head_sum_path, METH_FASTCALL,
     "_head_sum_path(path, D, k0, k1, m, s, e, q, alternating, js, cs, words): head_sum on a named path."},
    {"head_sum", (PyCFunction)(void (*)(void))head_sum, METH_FASTCALL,
     "head_sum(D, k0, k1, m, s, e, q, alternating, js, cs, words) -> (value, terms)\n\n"
     "The compiled twin of spotcheck.engine.head_py.head_sum_py (same result).\n"
     "The exact sum lies in [value, value + terms) units of 2^-(64*words), mod 1."},
    {"head_sum_comb", (PyCFunction)(void (*)(void))head_sum_comb, METH_FASTCALL,
     "head_sum_comb(D0, step, count, k0, k1, m, s, e, q, alternating, js, cs, words) -> [(value, terms)]\n\n"
     "The compiled twin of spotcheck.engine.head_py.head_sum_comb_py: the head sums of the windows at\n"
     "D0 + i * step (i < count) over k0 <= k < k1, each clipped to its window's head, in one pass."},
    {"_head_sum_comb_path", (PyCFunction)(void (*)(void))head_sum_comb_path, METH_FASTCALL,
     "_head_sum_comb_path(path, D0, step, count, ...): head_sum_comb on a named path."},
    {"_head_sum_variant", (PyCFunction)(void (*)(void))head_sum_variant, METH_FASTCALL,
     "head_sum(..., lanes, step) with a chosen interleave and doubling step (benchmarks)."},
    {NULL, NULL, 0, NULL},
};

static struct PyModuleDef kernel_module = {
    PyModuleDef_HEAD_INIT, "spotcheck.engine._kernel", "Compiled head-sum kernel of spotcheck (see _kernel.c).",
    -1, kernel_methods, NULL, NULL, NULL, NULL,
};

/* A module constant from an unsigned 64-bit value; -1 with an exception set on failure. */
static int add_u64(PyObject *mod, const char *name, uint64_t value)
{
    PyObject *obj = PyLong_FromUnsignedLongLong(value);
    int rc = obj ? PyModule_AddObjectRef(mod, name, obj) : -1;
    Py_XDECREF(obj);
    return rc;
}

PyMODINIT_FUNC PyInit__kernel(void)
{
    PyObject *mod = PyModule_Create(&kernel_module);
    if (mod == NULL)
        return NULL;
    detect_paths();
    /* The limits of head_sum's integer arithmetic, read by backend.py (the one
       place that splits a sum between this kernel and the twin):
       every modulus N < MAX_MODULUS, exponent D - e k <= MAX_EXPONENT,
       |c_j| < MAX_COEFFICIENT, words <= MAX_WORDS. */
    PyObject *limit = PyLong_FromUnsignedLongLong(MODULUS_LIMIT);
    PyObject *exponent = PyLong_FromUnsignedLongLong(UINT64_MAX);
    PyObject *coeff = PyLong_FromLongLong(COEFF_LIMIT);
    if (PyModule_AddStringConstant(mod, "ARITHMETIC", KERNEL_ARITH) ||
        PyModule_AddIntConstant(mod, "MAX_WORDS", MAX_WORDS) || PyModule_AddIntConstant(mod, "MAX_COMB", MAX_COMB) ||
        add_u64(mod, "MAX_COMB_STEP", ((uint64_t)1 << 63) - 1) ||
        PyModule_AddIntConstant(mod, "LANES", BEST_LANES) || PyModule_AddIntConstant(mod, "STEP", BEST_STEP) ||
        limit == NULL || exponent == NULL || coeff == NULL) {
        Py_XDECREF(limit);
        Py_XDECREF(exponent);
        Py_XDECREF(coeff);
        Py_DECREF(mod);
        return NULL;
    }
    if (PyModule_AddObject(mod, "MAX_MODULUS", limit)) {
        Py_DECREF(limit);
        Py_DECREF(exponent);
        Py_DECREF(coeff);
        Py_DECREF(mod);
        return NULL;
    }
    if (PyModule_AddObject(mod, "MAX_EXPONENT", exponent)) {
        Py_DECREF(exponent);
        Py_DECREF(coeff);
        Py_DECREF(mod);
        return NULL;
    }
    if (PyModule_AddObject(mod, "MAX_COEFFICIENT", coeff)) {
        Py_DECREF(coeff);
        Py_DECREF(mod);
        return NULL;
    }
    return mod;
}

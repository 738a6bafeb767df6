/*
 * Native inner loops of pqcheck, loaded with ctypes by pqcheck/_native.py.
 *
 * Each function is a direct port of a plain-Python definition kept beside its caller
 * (pqcheck/dsp/_compiled.py, pqcheck/readers/_numcsv.py, pqcheck/dsp/spectrum.py); the tests
 * run both and compare them. Built as an optional extension (setup.py): where no compiler is
 * found the install still succeeds and the numba forms are used.
 *
 * Compiled with -ffp-contract=off: no fused multiply-adds, so that every product and sum is
 * the IEEE operation the Python form writes, on every machine, with or without AVX2. The
 * AVX2 resampling and the portable one perform the same operations in the same order and
 * give the same bits (tests/test_native.py checks this).
 *
 * The module also has an (empty) Python initialiser, so that setuptools builds and names
 * it like any extension; nothing is called through the Python C API.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define PQ_X86 1
#else
#define PQ_X86 0
#endif

#define EXPORT __attribute__((visibility("default")))

/* ------------------------------------------------------------------------------------ */
/* Band-limited resampling (pqcheck.dsp._compiled._resample_py)                          */
/* ------------------------------------------------------------------------------------ */

/* Points m0 .. m1 - 1 of one window: the base sample of each point's kernel, and its
 * weights (taps each, into wts) interpolated linearly between the two table rows either
 * side of its fractional position: w = r0 + a (r1 - r0), a the position's fraction of the
 * way from row p to row p + 1 (phases a power of two: (pos - i0) * phases is exact). */
static inline __attribute__((always_inline)) void
tile_weights(double s, double ln, double kap, int64_t m_pts, int64_t m0, int64_t m1,
             int64_t half, int64_t phases, const double *restrict table, int64_t taps,
             int64_t *restrict bases, double *restrict wts)
{
    for (int64_t m = m0; m < m1; m++) {
        double u = (double)m / (double)m_pts;
        double pos = s + ln * u;
        if (kap != 0.0)
            pos += ln * kap * (u * (1.0 - u));
        double i0 = floor(pos);
        double v = (pos - i0) * (double)phases;
        double fp = floor(v);
        double a = v - fp;
        const double *restrict r0 = table + (int64_t)fp * taps;
        const double *restrict r1 = r0 + taps;
        double *restrict w = wts + (m - m0) * taps;
        bases[m - m0] = (int64_t)i0 - (half - 1);
        for (int64_t t = 0; t < taps; t++)
            w[t] = r0[t] + a * (r1[t] - r0[t]);
    }
}

static void tile_weights_portable(double s, double ln, double kap, int64_t m_pts, int64_t m0,
                                  int64_t m1, int64_t half, int64_t phases,
                                  const double *table, int64_t taps, int64_t *bases,
                                  double *wts)
{
    tile_weights(s, ln, kap, m_pts, m0, m1, half, phases, table, taps, bases, wts);
}

#if PQ_X86
/* The same, compiled for AVX2 (elementwise products and sums: the same bits). */
__attribute__((target("avx2"))) static void
tile_weights_avx2(double s, double ln, double kap, int64_t m_pts, int64_t m0, int64_t m1,
                  int64_t half, int64_t phases, const double *table, int64_t taps,
                  int64_t *bases, double *wts)
{
    tile_weights(s, ln, kap, m_pts, m0, m1, half, phases, table, taps, bases, wts);
}
#endif

/* Dot product of taps samples and weights (taps a multiple of 8), in eight running lanes
 * summed as ((l0 + l4) + (l1 + l5)) + ((l2 + l6) + (l3 + l7)): the order of the AVX2 form. */
static inline double dot8_portable(const double *x, const double *w, int64_t taps)
{
    double a[4], b[4];
    for (int k = 0; k < 4; k++) {
        a[k] = x[k] * w[k];
        b[k] = x[4 + k] * w[4 + k];
    }
    for (int64_t t = 8; t < taps; t += 8) {
        for (int k = 0; k < 4; k++) {
            a[k] = a[k] + x[t + k] * w[t + k];
            b[k] = b[k] + x[t + 4 + k] * w[t + 4 + k];
        }
    }
    double s0 = a[0] + b[0], s1 = a[1] + b[1], s2 = a[2] + b[2], s3 = a[3] + b[3];
    return (s0 + s1) + (s2 + s3);
}

/* One tile of points (weights wts, bases) of window w, every channel. */
static void tile_portable(const double *x, int64_t c_n, int64_t n, int64_t n_win,
                          int64_t m_pts, int64_t m0, int64_t m1, int64_t taps, double *out,
                          const int64_t *bases, const double *wts, int64_t w)
{
    for (int64_t c = 0; c < c_n; c++) {
        const double *xc = x + c * n;
        double *oc = out + (c * n_win + w) * m_pts;
        for (int64_t m = m0; m < m1; m++) {
            const double *xp = xc + bases[m - m0];
            const double *wp = wts + (m - m0) * taps;
            if (taps % 8 == 0) {
                oc[m] = dot8_portable(xp, wp, taps);
                continue;
            }
            double acc = 0.0;
            for (int64_t t = 0; t < taps; t++)
                acc += xp[t] * wp[t];
            oc[m] = acc;
        }
    }
}

#if PQ_X86
/* ((s0 + s1) + (s2 + s3)) of the four lanes: the order of dot8_portable. */
__attribute__((target("avx2"))) static inline double hsum_ordered(__m256d s)
{
    __m128d lo = _mm256_castpd256_pd128(s);   /* s0 s1 */
    __m128d hi = _mm256_extractf128_pd(s, 1); /* s2 s3 */
    __m128d p = _mm_hadd_pd(lo, hi);          /* s0+s1, s2+s3 */
    return _mm_cvtsd_f64(_mm_add_sd(p, _mm_unpackhi_pd(p, p)));
}

/* The four lanes l0+l4, l1+l5, l2+l6, l3+l7 of the dot product (see dot8_portable). */
__attribute__((target("avx2"))) static inline __m256d dot8_lanes(const double *xp,
                                                                  const double *wp,
                                                                  int64_t taps)
{
    __m256d a = _mm256_mul_pd(_mm256_loadu_pd(xp), _mm256_loadu_pd(wp));
    __m256d b = _mm256_mul_pd(_mm256_loadu_pd(xp + 4), _mm256_loadu_pd(wp + 4));
    for (int64_t t = 8; t < taps; t += 8) {
        a = _mm256_add_pd(a, _mm256_mul_pd(_mm256_loadu_pd(xp + t), _mm256_loadu_pd(wp + t)));
        b = _mm256_add_pd(b, _mm256_mul_pd(_mm256_loadu_pd(xp + t + 4),
                                           _mm256_loadu_pd(wp + t + 4)));
    }
    return _mm256_add_pd(a, b);
}

/* tile_portable with AVX2 (taps a multiple of 8): the same products and sums in the same
 * order, so the same bits. Each channel is one short contiguous run inside a tile, and the
 * tile's weights stay in L1 for every channel. */
__attribute__((target("avx2"))) static void
tile_avx2(const double *x, int64_t c_n, int64_t n, int64_t n_win, int64_t m_pts, int64_t m0,
          int64_t m1, int64_t taps, double *out, const int64_t *bases, const double *wts,
          int64_t w)
{
    for (int64_t c = 0; c < c_n; c++) {
        const double *xc = x + c * n;
        double *oc = out + (c * n_win + w) * m_pts;
        int64_t m = m0;
        for (; m + 4 <= m1; m += 4) { /* four points, their sums in one vector */
            __m256d s[4];
            for (int k = 0; k < 4; k++)
                s[k] = dot8_lanes(xc + bases[m + k - m0], wts + (m + k - m0) * taps, taps);
            /* hadd: (a0+a1, b0+b1, a2+a3, b2+b3); then the halves added: the order of
             * hsum_ordered for each point */
            __m256d h01 = _mm256_hadd_pd(s[0], s[1]);
            __m256d h23 = _mm256_hadd_pd(s[2], s[3]);
            __m256d lo = _mm256_permute2f128_pd(h01, h23, 0x20);
            __m256d hi = _mm256_permute2f128_pd(h01, h23, 0x31);
            _mm256_storeu_pd(oc + m, _mm256_add_pd(lo, hi));
        }
        for (; m < m1; m++)
            oc[m] = hsum_ordered(dot8_lanes(xc + bases[m - m0], wts + (m - m0) * taps, taps));
    }
}
#endif

EXPORT int pq_has_avx2(void)
{
#if PQ_X86
    __builtin_cpu_init();
    return __builtin_cpu_supports("avx2") ? 1 : 0;
#else
    return 0;
#endif
}

/* out (c_n, n_win, m_pts) <- band-limited values of x (c_n, n) at the points of each
 * window, table (phases + 1, taps) the kernel's rows. Points in tiles of a few dozen (their
 * weights, tile x taps doubles, about 32 KB), channels inside a tile, points inside a
 * channel. Returns 0, or -1 when out of memory. The caller checks the bounds. */
EXPORT int pq_resample(const double *x, int64_t c_n, int64_t n, const double *starts,
                       const double *lengths, const double *warp, int64_t n_win,
                       const double *table, int64_t taps, int64_t half, int64_t phases,
                       double *out, int64_t m_pts, int portable)
{
    int64_t tile = (4096 / (taps > 0 ? taps : 1)) & ~(int64_t)3;
    tile = tile < 4 ? 4 : (tile > 64 ? 64 : tile);
    int64_t *bases = malloc(sizeof(int64_t) * (size_t)tile);
    /* on whole cache lines (a row of weights, taps a multiple of 8, is whole lines); the
     * size a multiple of 64 bytes, as aligned_alloc asks */
    const int64_t padded = taps > 0 ? (taps + 7) / 8 * 8 : 8;
    double *wts = aligned_alloc(64, sizeof(double) * (size_t)(tile * padded));
    if (!bases || !wts) {
        free(bases);
        free(wts);
        return -1;
    }
#if PQ_X86
    int vec = !portable && taps % 8 == 0 && pq_has_avx2();
#else
    int vec = 0;
    (void)portable;
#endif
    for (int64_t w = 0; w < n_win; w++) {
        for (int64_t m0 = 0; m0 < m_pts; m0 += tile) {
            const int64_t m1 = m0 + tile < m_pts ? m0 + tile : m_pts;
#if PQ_X86
            if (vec) {
                tile_weights_avx2(starts[w], lengths[w], warp[w], m_pts, m0, m1, half, phases,
                                  table, taps, bases, wts);
                tile_avx2(x, c_n, n, n_win, m_pts, m0, m1, taps, out, bases, wts, w);
                continue;
            }
#endif
            tile_weights_portable(starts[w], lengths[w], warp[w], m_pts, m0, m1, half, phases,
                                  table, taps, bases, wts);
            tile_portable(x, c_n, n, n_win, m_pts, m0, m1, taps, out, bases, wts, w);
        }
    }
    free(bases);
    free(wts);
    return 0;
}

/* ------------------------------------------------------------------------------------ */
/* Kaiser-windowed sinc (pqcheck.dsp.spectrum._kaiser_sinc_numpy)                        */
/* ------------------------------------------------------------------------------------ */

/* I0(x) = sum_k ((x/2)^2)^k / (k!)^2 (Abramowitz & Stegun 9.6.12), every term positive,
 * summed until a term no longer changes the sum: a few ulp for the Kaiser window's
 * arguments (0 to about 12: 40 terms at 12). */
static double bessel_i0(double x)
{
    static double inv_k2[500];
    static int ready = 0;
    if (!ready) { /* the same values on every thread: a benign race */
        for (int k = 1; k < 500; k++)
            inv_k2[k] = 1.0 / ((double)k * (double)k);
        ready = 1;
    }
    double q = 0.25 * x * x;
    double term = 1.0, sum = 1.0;
    for (int k = 1; k < 500; k++) {
        term *= q * inv_k2[k];
        double next = sum + term;
        if (next == sum)
            break;
        sum = next;
    }
    return sum;
}

/* out[i] = 2 fc sinc(2 fc u[i]) I0(beta sqrt(1 - (u[i] / half)^2)) / I0(beta), the argument
 * of the square root clipped to [0, 1]; sinc(y) = sin(pi y) / (pi y), 1 at 0. */
EXPORT void pq_kaiser_sinc(const double *u, int64_t n, double fc, double beta, double half,
                           double *out)
{
    double norm = bessel_i0(beta);
    for (int64_t i = 0; i < n; i++) {
        double y = M_PI * 2.0 * fc * u[i];
        double s = y == 0.0 ? 1.0 : sin(y) / y;
        double r = u[i] / half;
        double arg = 1.0 - r * r;
        arg = arg < 0.0 ? 0.0 : (arg > 1.0 ? 1.0 : arg);
        out[i] = 2.0 * fc * s * bessel_i0(beta * sqrt(arg)) / norm;
    }
}

/* ------------------------------------------------------------------------------------ */
/* Cycle sums of the tracker's first pass (pqcheck.dsp.tracking._cycle_sums_numpy)        */
/* ------------------------------------------------------------------------------------ */

/* out (2 (n_edges - 1), re and im interleaved) <- the sums of y = x exp(j omega k) between
 * successive fractional positions edges (non-decreasing), as the NumPy form computes them:
 * the phasor of sample k is coarse[k / p] fine[k % p] (two tables of exp(j omega k), built
 * by NumPy), the cumulative sum S(i) = y_0 + ... + y_(i-1) runs in sample order, and the sum
 * up to a position e is S(i) + (e - floor e) y_min(i, n-1), i = floor e clipped to [0, n].
 * One pass, no temporaries. Returns 0, or -1 when the edges decrease. */
static inline void phasor_sample(const double *x, const double *fine, const double *coarse,
                                 int64_t p, int64_t k, double *yr, double *yi)
{
    const double *c = coarse + 2 * (k / p), *f = fine + 2 * (k % p);
    double rr = c[0] * f[0] - c[1] * f[1];
    double ri = c[0] * f[1] + c[1] * f[0];
    *yr = x[k] * rr;
    *yi = x[k] * ri;
}

EXPORT int pq_cycle_sums(const double *x, int64_t n, const double *fine, int64_t p,
                         const double *coarse, const double *edges, int64_t n_edges,
                         double *out)
{
    double sr = 0.0, si = 0.0, pr = 0.0, pi_ = 0.0;
    int64_t k = 0;
    for (int64_t e = 0; e < n_edges; e++) {
        double fl = floor(edges[e]);
        double frac = edges[e] - fl;
        int64_t i = fl < 0.0 ? 0 : (fl > (double)n ? n : (int64_t)fl);
        if (i < k)
            return -1;
        for (; k < i; k++) {
            double yr, yi;
            phasor_sample(x, fine, coarse, p, k, &yr, &yi);
            sr += yr;
            si += yi;
        }
        double ar = sr, ai = si;
        if (n > 0) {
            double yr, yi;
            phasor_sample(x, fine, coarse, p, i < n ? i : n - 1, &yr, &yi);
            ar = sr + frac * yr;
            ai = si + frac * yi;
        }
        if (e > 0) {
            out[2 * (e - 1)] = ar - pr;
            out[2 * (e - 1) + 1] = ai - pi_;
        }
        pr = ar;
        pi_ = ai;
    }
    return 0;
}

/* ------------------------------------------------------------------------------------ */
/* Phase sums of the tracker (pqcheck.dsp._compiled._phase_sums_py)                       */
/* ------------------------------------------------------------------------------------ */

EXPORT void pq_phase_sums(const double *x, int64_t n, const double *mid, const double *count,
                          int64_t n_mid, double phi0, int64_t k_first, int64_t nz, double *out)
{
    const double tau = 2.0 * M_PI;
    double *o0 = out, *o1 = out + nz, *o2 = out + 2 * nz;
    for (int64_t s = 0; s < n_mid - 1; s++) {
        double slope = (count[s + 1] - count[s]) / (mid[s + 1] - mid[s]);
        int64_t lo = s == 0 ? 0 : (int64_t)ceil(mid[s]);
        int64_t hi = s == n_mid - 2 ? n : (int64_t)ceil(mid[s + 1]);
        if (lo < 0)
            lo = 0;
        if (hi > n)
            hi = n;
        if (hi <= lo)
            continue;
        double phi_s = count[s] + ((double)lo - mid[s]) * slope;
        double a = tau * (phi_s - floor(phi_s));
        double er = cos(a), ei = -sin(a);
        double rr = cos(tau * slope), ri = -sin(tau * slope);
        double g_s = phi_s - phi0 + 0.5;
        double b = M_PI * (g_s - 2.0 * floor(0.5 * g_s));
        double qr = cos(b), qi = sin(b);
        double pr = cos(M_PI * slope), pi_ = sin(M_PI * slope);
        int64_t i = lo;
        while (i < hi) {
            double cur = floor(g_s + (double)(i - lo) * slope);
            int64_t end = i + 1;
            if (slope > 0.0) {
                double reach = ceil((cur + 1.0 - g_s) / slope);
                if (reach >= (double)(hi - lo))
                    end = hi;
                else {
                    int64_t e = lo + (int64_t)reach;
                    end = e > i + 1 ? e : i + 1;
                }
            }
            while (end < hi && floor(g_s + (double)(end - lo) * slope) == cur)
                end++;
            while (end - 1 > i && floor(g_s + (double)(end - 1 - lo) * slope) != cur)
                end--;
            double parity = cur - 2.0 * floor(0.5 * cur);
            double sgn = parity == 0.0 ? 0.5 : -0.5;
            double s_wr = 0.0, s_wi = 0.0, s_r = 0.0, s_i = 0.0, s_w = 0.0;
            double run_len = (double)(end - i);
            for (int64_t k = i; k < end; k++) {
                double w = 0.5 + sgn * qr;
                double xv = x[k];
                double yr = xv * er, yi = xv * ei;
                s_wr += w * yr;
                s_wi += w * yi;
                s_r += yr;
                s_i += yi;
                s_w += w;
                double er2 = er * rr - ei * ri, ei2 = er * ri + ei * rr;
                er = er2;
                ei = ei2;
                double qr2 = qr * pr - qi * pi_, qi2 = qr * pi_ + qi * pr;
                qr = qr2;
                qi = qi2;
            }
            i = end;
            int64_t j = (int64_t)cur - 1 - k_first;
            if (j >= 0 && j < nz) {
                o0[j] += s_wr;
                o1[j] += s_wi;
                o2[j] += s_w;
            }
            if (j + 1 >= 0 && j + 1 < nz) {
                o0[j + 1] += s_r - s_wr;
                o1[j + 1] += s_i - s_wi;
                o2[j + 1] += run_len - s_w;
            }
        }
    }
}

/* ------------------------------------------------------------------------------------ */
/* Numeric delimited text (pqcheck.readers._numcsv._parse_py)                            */
/* ------------------------------------------------------------------------------------ */

EXPORT int64_t pq_count_lines(const uint8_t *buf, int64_t n)
{
    /* SSE2: each byte compare gives -1 per line end, taken from byte counters (255 rounds
     * at most before they are summed); a memchr per line cost a call every 40-odd bytes */
    int64_t k = 0, i = 0;
#if PQ_X86
    const __m128i lf = _mm_set1_epi8(10);
    while (i + 16 <= n) {
        __m128i acc = _mm_setzero_si128();
        int64_t stop = n - i > 16 * 255 ? i + 16 * 255 : n;
        for (; i + 16 <= stop; i += 16)
            acc = _mm_sub_epi8(acc, _mm_cmpeq_epi8(_mm_loadu_si128((const __m128i *)(buf + i)),
                                                   lf));
        __m128i s = _mm_sad_epu8(acc, _mm_setzero_si128());
        k += _mm_cvtsi128_si64(s) + _mm_cvtsi128_si64(_mm_unpackhi_epi64(s, s));
    }
#endif
    for (; i < n; i++)
        k += buf[i] == 10;
    return k;
}

/* A run of decimal digits from buf[*i]: the first 19 significant ones into *mant, all the
 * significant ones counted in *nsig (leading zeros are not significant); returns the number
 * of digits read. */
static inline int64_t scan_digits(const uint8_t *buf, int64_t n, int64_t *i, uint64_t *mant,
                                  int64_t *nsig)
{
    int64_t j = *i, k = 0;
    uint64_t m = *mant;
    int64_t s = *nsig;
    for (; j < n; j++, k++) {
        int d = (int)buf[j] - 48;
        if (d < 0 || d > 9)
            break;
        if (m != 0 || d != 0) {
            s++;
            if (s <= 19) /* below 10^19 < 2^64 */
                m = m * 10 + (uint64_t)d;
        }
    }
    *i = j;
    *mant = m;
    *nsig = s;
    return k;
}

#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
#define PQ_SWAR 1
/* Eight bytes at a time (byte 0 the first character): the number of leading decimal digits
 * (8 when all are), and the value of k leading digits. A byte b is a digit when its high
 * nibble is 3 and b + 6 still has high nibble 3; a carry out of b + 6 (b >= 0xfa, not a
 * digit) only reaches the bytes after the first non-digit. */
static inline int digit_run8(uint64_t v)
{
    const uint64_t hi = 0xF0F0F0F0F0F0F0F0ULL, three = 0x3030303030303030ULL;
    uint64_t x = ((v & hi) ^ three) | (((v + 0x0606060606060606ULL) & hi) ^ three);
    return x ? __builtin_ctzll(x) >> 3 : 8;
}

static inline uint64_t digits_value8(uint64_t v, int k)
{
    if (k == 0)
        return 0;
    /* the k digits to the high bytes, leading zeros below them */
    uint64_t d = (v & 0x0F0F0F0F0F0F0F0FULL) << (8 * (8 - k));
    d = d * 10 + (d >> 8);
    d = (((d & 0x000000FF000000FFULL) * (100 + (1000000ULL << 32))) +
         (((d >> 16) & 0x000000FF000000FFULL) * (1 + (10000ULL << 32)))) >> 32;
    return d & 0xFFFFFFFFULL;
}

static inline uint64_t load8(const uint8_t *p)
{
    uint64_t v;
    memcpy(&v, p, 8);
    return v;
}

static const uint64_t POW10_U[9] = {1, 10, 100, 1000, 10000, 100000, 1000000, 10000000,
                                     100000000};

/* The digit run at buf[*j], eight bytes at a time, appended to *m; *k counts the digits
 * (integer and fraction together). Returns 0, touching nothing, where a load would pass
 * the buffer or the digits exceed 19 (the byte loop then decides, with its counting of
 * significant digits). */
static inline int digit_run_fast(const uint8_t *buf, int64_t n, int64_t *j, uint64_t *m,
                                 int *k)
{
    int64_t p = *j;
    uint64_t acc = *m;
    int total = *k;
    for (;;) {
        if (p + 8 > n)
            return 0;
        uint64_t v = load8(buf + p);
        int r = digit_run8(v);
        acc = acc * POW10_U[r] + digits_value8(v, r);
        total += r;
        p += r;
        if (total > 19)
            return 0;
        if (r < 8)
            break;
    }
    *j = p;
    *m = acc;
    *k = total;
    return 1;
}

/* The integer and fraction digits at buf[*i] when there are at most 19 of them and the bytes
 * are in the buffer: the same mantissa and digit counts as scan_digits gives (with at most
 * 19 digits in all no digit is dropped). Returns 0, touching nothing, otherwise. */
static inline int digits_fast(const uint8_t *buf, int64_t n, int dec, int64_t *i,
                              uint64_t *mant, int64_t *ndig, int64_t *e10)
{
    int64_t j = *i;
    uint64_t m = 0;
    int k = 0;
    if (!digit_run_fast(buf, n, &j, &m, &k))
        return 0;
    int k1 = k;
    if (j < n && buf[j] == dec) {
        j++;
        if (!digit_run_fast(buf, n, &j, &m, &k))
            return 0;
    }
    *i = j;
    *mant = m;
    *ndig = k;
    *e10 = -(int64_t)(k - k1);
    return 1;
}
#endif

#ifdef __SIZEOF_INT128__
/* mant * 10^e10 correctly rounded to float64 by the Eisel-Lemire method (Lemire 2021,
 * "Number parsing at a gigabyte per second", Software: Practice and Experience 51(8); the
 * steps as in Go's strconv.eiselLemire64): mant (exact, nonzero) times a 128-bit truncated
 * mantissa of 10^e10 from tab (pairs low, high for e10 = -348 .. 347, built by
 * pqcheck/_native.py). Returns 0, leaving *out alone, where the product cannot decide the
 * rounding (an exact tie or too close to one), where e10 is out of range, or where the value
 * is subnormal or overflows: the caller then refuses the text and pandas reads it. */
static int eisel_lemire(uint64_t mant, int64_t e10, const uint64_t *tab, double *out)
{
    if (e10 < -348 || e10 > 347)
        return 0;
    int clz = __builtin_clzll(mant);
    mant <<= clz;
    int64_t t = 217706 * e10; /* floor(e10 log2(10)), as 217706 e10 >> 16 with floor */
    int64_t fl = t >= 0 ? t >> 16 : -((-t + 65535) >> 16);
    uint64_t exp2 = (uint64_t)(fl + 64 + 1023) - (uint64_t)clz;
    const uint64_t *p = tab + 2 * (e10 + 348);
    unsigned __int128 x = (unsigned __int128)mant * p[1];
    uint64_t x_hi = (uint64_t)(x >> 64), x_lo = (uint64_t)x;
    if ((x_hi & 0x1FF) == 0x1FF && x_lo + mant < mant) {
        unsigned __int128 y = (unsigned __int128)mant * p[0];
        uint64_t y_hi = (uint64_t)(y >> 64), y_lo = (uint64_t)y;
        uint64_t m_hi = x_hi, m_lo = x_lo + y_hi;
        if (m_lo < x_lo)
            m_hi++;
        if ((m_hi & 0x1FF) == 0x1FF && m_lo + 1 == 0 && y_lo + mant < mant)
            return 0;
        x_hi = m_hi;
        x_lo = m_lo;
    }
    uint64_t msb = x_hi >> 63;
    uint64_t m = x_hi >> (msb + 9);
    exp2 -= 1 ^ msb;
    if (x_lo == 0 && (x_hi & 0x1FF) == 0 && (m & 3) == 1)
        return 0; /* half-way: undecided */
    m += m & 1;
    m >>= 1;
    if (m >> 53 > 0) {
        m >>= 1;
        exp2 += 1;
    }
    if (exp2 - 1 >= 0x7FF - 1)
        return 0; /* subnormal, or infinite */
    uint64_t bits = exp2 << 52 | (m & 0x000FFFFFFFFFFFFFULL);
    memcpy(out, &bits, 8);
    return 1;
}
#endif

#ifdef __SIZEOF_INT128__
/* mant * 10^e10 (mant nonzero, all its digits given) where Eisel-Lemire leaves it undecided,
 * which it does for every exact value and tie (2^-24 = 5.9604644775390625e-08, or
 * 2^53 + 1): exactly, where it is an integer below 2^64 or mant divides by 5^-e10 (then it
 * is q 2^e10 with q whole), the one rounding being the conversion of a whole uint64 to
 * double (IEEE round to nearest, ties to even). Returns 0 otherwise, or where the value
 * would be subnormal (a second rounding). */
static int exact_value(uint64_t mant, int64_t e10, double *out)
{
    if (e10 >= 0) {
        uint64_t v = mant;
        for (int64_t k = 0; k < e10; k++)
            if (__builtin_mul_overflow(v, (uint64_t)10, &v))
                return 0;
        *out = (double)v;
        return 1;
    }
    if (e10 < -27) /* 5^27 < 2^64 < 5^28 */
        return 0;
    uint64_t p5 = 1;
    for (int64_t k = 0; k < -e10; k++)
        p5 *= 5;
    if (mant % p5 != 0)
        return 0;
    double v = ldexp((double)(mant / p5), (int)e10);
    if (v < 2.2250738585072014e-308)
        return 0;
    *out = v;
    return 1;
}
#endif

/* The float64 of (-1)^neg mant 10^e10, where significant digits past the 19th were dropped
 * (``dropped`` of them: the value lies in [mant, mant + 1) 10^(e10 + dropped)), correctly
 * rounded, into *out; 0 where it is not decided here (the caller refuses the text and pandas
 * reads it). Clinger's fast path (mant below 2^53, |e10| <= 22: one exact IEEE operation);
 * outside it Eisel-Lemire (full-precision exports: 17 digits, numpy.savetxt's 19); with
 * digits dropped, the value both ends of the interval round to; where Eisel-Lemire is
 * undecided, the trailing zeros of mant into the power of ten (3.125000000000000000e-02 is
 * 3125e-5, as numpy.savetxt writes 2^-5), then Clinger's fast path where it now holds, else
 * the exact value where there is one. The one conversion of both paths of pq_parse. */
static inline int decimal_to_double(uint64_t mant, int64_t e10, int64_t dropped, int neg,
                                    const double *pow10, const uint64_t *pow10_128,
                                    double *out)
{
    double val;
    if (mant == 0) {
        val = 0.0;
    } else if (e10 > 22 || e10 < -22 || mant > 9007199254740992ULL || dropped) {
#ifdef __SIZEOF_INT128__
        double hi;
        if (pow10_128 == NULL)
            return 0;
        if (dropped) {
            if (!eisel_lemire(mant, e10 + dropped, pow10_128, &val) ||
                !eisel_lemire(mant + 1, e10 + dropped, pow10_128, &hi) || hi != val)
                return 0;
        } else if (!eisel_lemire(mant, e10, pow10_128, &val)) {
            while (mant % 10 == 0) {
                mant /= 10;
                e10++;
            }
            if (mant <= 9007199254740992ULL && e10 >= -22 && e10 <= 22)
                val = e10 >= 0 ? (double)mant * pow10[e10] : (double)mant / pow10[-e10];
            else if (!exact_value(mant, e10, &val))
                return 0;
        }
#else
        (void)dropped;
        (void)pow10_128;
        return 0;
#endif
    } else if (e10 >= 0) {
        val = (double)mant * pow10[e10];
    } else {
        val = (double)mant / pow10[-e10];
    }
    uint64_t bits; /* the sign without a branch: the signs of a waveform's samples are random */
    memcpy(&bits, &val, 8);
    bits ^= (uint64_t)neg << 63;
    memcpy(out, &bits, 8);
    return 1;
}

#define AT(j) ((j) < n ? (int)buf[j] : 10)
#define IS_END(ch) ((ch) == sep || (ch) == 10 || (ch) == 13)

/* Rows of buf[:n] into out[row * rs + col * cs]; colmap[f] is the column of field f or -1.
 * Returns the number of rows, or -1 where the text is not one this parser may read. */
EXPORT int64_t pq_parse(const uint8_t *buf, int64_t n, int sep, int dec, const int64_t *colmap,
                        int64_t nf, double *out, int64_t max_rows, int64_t rs, int64_t cs,
                        const double *pow10, const uint64_t *pow10_128)
{
    int64_t row = 0, i = 0;
    const double nan = NAN;
    while (i < n) {
        int c = buf[i];
        if (c == 10 || c == 13)
            return -1; /* a blank line */
        if (row >= max_rows)
            return -1;
        int64_t f = 0;
        double *orow = out + row * rs;
        for (;;) {
            int64_t col = colmap[f];
            if (col < 0) {
                while (i < n) {
                    c = buf[i];
                    if (IS_END(c))
                        break;
                    if (c == 34 || c >= 128)
                        return -1;
                    i++;
                }
            } else {
#if PQ_X86 && defined(PQ_SWAR)
                /* The common cell, [-]digits[.digits][(e|E)[+|-]digits] ended by the
                 * delimiter or a line end within 32 bytes: its digits, point, exponent and
                 * end found at once from 16-byte loads (SSE2 byte masks; the second 16 bytes
                 * only where the first end inside the cell), its value as the general path
                 * below computes it (at most 8 integer and 19 digits in all, so mant is
                 * exact, and 4 exponent digits; Clinger's fast path or Eisel-Lemire, and the
                 * general path where that is undecided), and the character that ends it
                 * kept. The general path's chain of dependent one-byte reads (NaN, blanks,
                 * sign, digits, exponent, end) set the speed of the whole loop; here the next
                 * cell's position is known a few operations after the loads. */
                if (i + 48 <= n) { /* every load below inside the buffer */
                    const __m128i zero = _mm_set1_epi8('0'), nine = _mm_set1_epi8(9);
                    const __m128i vdec = _mm_set1_epi8((char)dec), vsep = _mm_set1_epi8((char)sep);
                    const __m128i lf = _mm_set1_epi8(10), cr = _mm_set1_epi8(13);
                    uint64_t dmask = 0, pmask = 0, emask = 0, xmask = 0;
                    int neg = buf[i] == 45 && sep != 45;
                    int r1 = 0, p = 0, r2 = 0, q = 0, t = 0, r3 = -1, es = 0, eneg = 0;
                    /* the second 16 bytes only where the first end inside a digit run */
                    for (int h = 0; h < 2; h++) {
                        __m128i v = _mm_loadu_si128((const __m128i *)(buf + i + 16 * h));
                        __m128i dg = _mm_sub_epi8(v, zero);
                        dmask |= (uint64_t)(unsigned)_mm_movemask_epi8(
                                     _mm_cmpeq_epi8(_mm_max_epu8(dg, nine), nine)) << (16 * h);
                        pmask |= (uint64_t)(unsigned)_mm_movemask_epi8(_mm_cmpeq_epi8(v, vdec))
                                 << (16 * h);
                        xmask |= (uint64_t)(unsigned)_mm_movemask_epi8(_mm_cmpeq_epi8(
                                     _mm_or_si128(v, _mm_set1_epi8(32)), _mm_set1_epi8(101)))
                                 << (16 * h); /* e or E */
                        emask |= (uint64_t)(unsigned)_mm_movemask_epi8(_mm_or_si128(
                                     _mm_cmpeq_epi8(v, vsep),
                                     _mm_or_si128(_mm_cmpeq_epi8(v, lf), _mm_cmpeq_epi8(v, cr))))
                                 << (16 * h);
                        uint64_t nd = ~dmask; /* bits past those loaded set: runs end there */
                        r1 = __builtin_ctzll(nd >> neg);
                        p = neg + r1; /* the byte after the integer digits */
                        r2 = 0;
                        q = p;
                        if ((pmask >> p) & 1) {
                            r2 = __builtin_ctzll(nd >> (p + 1));
                            q = p + 1 + r2;
                        }
                        t = q; /* where the cell must end */
                        r3 = -1; /* no exponent */
                        if ((xmask >> q) & 1) { /* e or E */
                            int s2 = q + 1, ch = buf[i + s2];
                            eneg = ch == 45;
                            s2 += (ch == 45) | (ch == 43);
                            r3 = __builtin_ctzll(nd >> s2);
                            es = s2;
                            t = s2 + r3;
                        }
                        if (t < 16 * (h + 1))
                            break;
                    }
                    if (r1 >= 1 && r1 <= 8 && r1 + r2 <= 19 && t < 32 && ((emask >> t) & 1) &&
                        (r3 < 0 || (r3 >= 1 && r3 <= 4))) {
                        uint64_t mant = digits_value8(load8(buf + i + neg), r1);
                        for (int k = 0; k < r2; k += 8) {
                            int r = r2 - k < 8 ? r2 - k : 8;
                            mant = mant * POW10_U[r] +
                                   digits_value8(load8(buf + i + p + 1 + k), r);
                        }
                        int64_t e10 = -(int64_t)r2;
                        if (r3 > 0) {
                            int64_t ex = (int64_t)digits_value8(load8(buf + i + es), r3);
                            e10 += eneg ? -ex : ex;
                        }
                        double val;
                        /* undecided here: the general path below reaches the same refusal */
                        if (decimal_to_double(mant, e10, 0, neg, pow10, pow10_128, &val)) {
                            orow[col * cs] = val;
                            c = buf[i + t];
                            i += t;
                            goto field_end;
                        }
                    }
                }
#endif
                int64_t start = i;
                double val = nan;
                c = AT(i);
                int64_t j = c == 45 ? i + 1 : i;
                int is_na = 0;
                if (j + 3 <= n) {
                    int a = buf[j], b = buf[j + 1], e = buf[j + 2];
                    if (a == 110 && b == 97 && e == 110)
                        is_na = 1; /* nan, -nan */
                    else if (a == 78 && b == 97 && e == 78)
                        is_na = 1; /* NaN, -NaN */
                    else if (a == 78 && b == 65 && e == 78 && j == i)
                        is_na = 1; /* NAN */
                    if (is_na && j + 3 < n) {
                        int t = buf[j + 3];
                        if (!IS_END(t))
                            is_na = 0;
                    }
                }
                if (is_na) {
                    i = j + 3;
                } else {
                    while (i < n && (buf[i] == 32 || (buf[i] == 9 && sep != 9)))
                        i++;
                    c = AT(i);
                    if (IS_END(c)) {
                        if (i > start)
                            return -1; /* a blank cell */
                    } else {
                        /* branch-free: the signs of a waveform's samples are random */
                        int neg = c == 45;
                        i += neg | (c == 43);
                        uint64_t mant = 0;
                        int64_t nsig = 0, ndig = 0, e10 = 0;
#ifdef PQ_SWAR
                        if (!digits_fast(buf, n, dec, &i, &mant, &ndig, &e10))
#endif
                        {
                            ndig += scan_digits(buf, n, &i, &mant, &nsig);
                            if (i < n && buf[i] == dec) {
                                i++;
                                int64_t frac = scan_digits(buf, n, &i, &mant, &nsig);
                                ndig += frac;
                                e10 -= frac;
                            }
                        }
                        if (ndig == 0)
                            return -1;
                        /* significant digits past the 19th are not in mant: the value lies
                         * in [mant, mant + 1) x 10^(e10 + dropped) */
                        int64_t dropped = nsig > 19 ? nsig - 19 : 0;
                        if (i < n && (buf[i] | 32) == 101) { /* e or E */
                            i++;
                            int eneg = 0;
                            if (i < n && buf[i] == 45) {
                                eneg = 1;
                                i++;
                            } else if (i < n && buf[i] == 43) {
                                i++;
                            }
                            int64_t ex = 0, nex = 0;
                            while (i < n) {
                                int d = (int)buf[i] - 48;
                                if (d < 0 || d > 9)
                                    break;
                                if (ex < 100000)
                                    ex = ex * 10 + d;
                                nex++;
                                i++;
                            }
                            if (nex == 0)
                                return -1;
                            e10 += eneg ? -ex : ex;
                        }
                        while (i < n && (buf[i] == 32 || (buf[i] == 9 && sep != 9)))
                            i++;
                        c = AT(i);
                        if (!IS_END(c))
                            return -1;
                        if (!decimal_to_double(mant, e10, dropped, neg, pow10, pow10_128, &val))
                            return -1;
                    }
                }
                orow[col * cs] = val;
            }
            c = AT(i);
#if PQ_X86 && defined(PQ_SWAR)
        field_end:
#endif
            if (c == sep) {
                f++;
                i++;
                if (f >= nf)
                    return -1; /* more fields than the header */
                continue;
            }
            if (c == 13) {
                if (i + 1 < n && buf[i + 1] == 10)
                    i += 2;
                else
                    return -1; /* a bare carriage return */
            } else {
                i++;
            }
            f++;
            for (; f < nf; f++) /* a short row: NaN */
                if (colmap[f] >= 0)
                    orow[colmap[f] * cs] = nan;
            row++;
            break;
        }
    }
    return row;
}

/* ------------------------------------------------------------------------------------ */
/* Time-domain statistics of the windows (pqcheck.dsp.spectrum._time_stats and the peaks)  */
/* ------------------------------------------------------------------------------------ */

/* 1 when every one of the n values is finite (neither NaN nor infinite), else 0. */
EXPORT int pq_all_finite(const double *x, int64_t n)
{
    /* x * 0 is +-0 (bits 0 or the sign bit alone) where x is finite and NaN (exponent bits
     * all ones) where it is not: the OR of those bits over a piece has exponent bits set
     * exactly when some value is NaN or infinite. A multiply and an OR vectorise with SSE2
     * (a 64-bit compare, the earlier form, does not: it ran at 0.7 ns a value). */
    const uint64_t expo = 0x7FF0000000000000ULL;
    const int64_t step = 1024;
    for (int64_t lo = 0; lo < n; lo += step) {
        int64_t hi = lo + step < n ? lo + step : n;
        uint64_t acc = 0;
        for (int64_t i = lo; i < hi; i++) {
            double z = x[i] * 0.0;
            uint64_t b;
            memcpy(&b, &z, 8);
            acc |= b;
        }
        if ((acc & expo) != 0)
            return 0;
    }
    return 1;
}

/* For each window w (samples lo[w] .. hi[w] - 1 of every channel of x, shape (c_n, n)):
 * the sum, the sum of squares and the largest magnitude of each channel, into
 * sum/sq/peak (n_win, c_n), and the sum of products of channels pa[j] and pb[j] into
 * prod (n_win, n_p). Four running sums per quantity, added as (s0 + s1) + (s2 + s3).
 * A window with hi <= lo is left untouched. The caller checks the bounds. */
EXPORT void pq_window_stats(const double *x, int64_t c_n, int64_t n, const int64_t *lo,
                            const int64_t *hi, int64_t n_win, const int64_t *pa,
                            const int64_t *pb, int64_t n_p, double *sum, double *sq,
                            double *peak, double *prod)
{
    for (int64_t w = 0; w < n_win; w++) {
        int64_t a = lo[w], len = hi[w] - lo[w];
        if (len <= 0)
            continue;
        int64_t len4 = len & ~(int64_t)3;
        for (int64_t c = 0; c < c_n; c++) {
            const double *p = x + c * n + a;
            double s[4] = {0, 0, 0, 0}, q[4] = {0, 0, 0, 0}, m[4] = {0, 0, 0, 0};
            int64_t i = 0;
            for (; i < len4; i += 4) {
                for (int k = 0; k < 4; k++) {
                    double v = p[i + k];
                    double av = fabs(v);
                    s[k] += v;
                    q[k] += v * v;
                    m[k] = av > m[k] ? av : m[k];
                }
            }
            for (int k = 0; i < len; i++, k++) {
                double v = p[i];
                double av = fabs(v);
                s[k] += v;
                q[k] += v * v;
                m[k] = av > m[k] ? av : m[k];
            }
            double mx = m[0] > m[1] ? m[0] : m[1];
            double my = m[2] > m[3] ? m[2] : m[3];
            sum[w * c_n + c] = (s[0] + s[1]) + (s[2] + s[3]);
            sq[w * c_n + c] = (q[0] + q[1]) + (q[2] + q[3]);
            peak[w * c_n + c] = mx > my ? mx : my;
        }
        for (int64_t j = 0; j < n_p; j++) {
            const double *u = x + pa[j] * n + a, *v = x + pb[j] * n + a;
            double r[4] = {0, 0, 0, 0};
            int64_t i = 0;
            for (; i < len4; i += 4)
                for (int k = 0; k < 4; k++)
                    r[k] += u[i + k] * v[i + k];
            for (int k = 0; i < len; i++, k++)
                r[k] += u[i] * v[i];
            prod[w * n_p + j] = (r[0] + r[1]) + (r[2] + r[3]);
        }
    }
}

/* ------------------------------------------------------------------------------------ */

static struct PyModuleDef pq_module = {PyModuleDef_HEAD_INIT, "_cext",
                                       "Native loops of pqcheck (used through ctypes).", -1,
                                       NULL, NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__cext(void) { return PyModule_Create(&pq_module); }

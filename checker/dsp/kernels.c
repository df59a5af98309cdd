/*
 * Compiled inner loops for the measuring pass (loaded by checker/dsp/native.py).
 *
 * Plain C functions on raw buffers, called through ctypes, which releases the GIL
 * for the length of each call (the read-ahead thread keeps decoding meanwhile).
 * Every function has a numpy twin in the module that uses it; tests/test_native.py
 * compares the two. Built with -ffp-contract=off so that no multiply-add is fused:
 * the K-weighting recursion then gives the same bits as scipy's sosfilt.
 *
 * Plain C: no Python headers. setuptools builds it as an extension module's file
 * (checker/dsp/_kernels.<platform suffix>), but nothing imports it as a module;
 * native.py opens the file with ctypes.
 */
#include <math.h>
#include <stdint.h>
#include <string.h>

#define EXPORT __attribute__((visibility("default")))
/* x86-64: also an AVX2 build of the reductions, chosen at load time by the CPU */
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__)
#define CLONES __attribute__((target_clones("avx2", "default")))
#else
#define CLONES
#endif

/* Version of the functions' signatures: written once, as ABI_VERSION in native.py, which
 * refuses a library with another one; setup.py passes it in as DC_ABI_VERSION. */
#ifndef DC_ABI_VERSION
#error "DC_ABI_VERSION is not defined (setup.py passes native.py's ABI_VERSION)"
#endif
EXPORT int64_t dc_abi_version(void) { return DC_ABI_VERSION; }

/* ------------------------------------------------------------------------ reading */

/* Interleaved int32 codes (n frames x ch) -> channel-major raw_t (ch x n) and
 * x_t = code * scale (ch x n). */
EXPORT void dc_deinterleave_i32(const int32_t *in, int64_t n, int64_t ch, int32_t *raw_t,
                                double *x_t, double scale)
{
    if (ch == 1) {
        for (int64_t t = 0; t < n; t++) {
            int32_t v = in[t];
            raw_t[t] = v;
            x_t[t] = (double)v * scale;
        }
        return;
    }
    if (ch == 2) {
        int32_t *r0 = raw_t, *r1 = raw_t + n;
        double *x0 = x_t, *x1 = x_t + n;
        for (int64_t t = 0; t < n; t++) {
            int32_t a = in[2 * t], b = in[2 * t + 1];
            r0[t] = a;
            r1[t] = b;
            x0[t] = (double)a * scale;
            x1[t] = (double)b * scale;
        }
        return;
    }
    for (int64_t t = 0; t < n; t++) {
        const int32_t *f = in + t * ch;
        for (int64_t c = 0; c < ch; c++) {
            raw_t[c * n + t] = f[c];
            x_t[c * n + t] = (double)f[c] * scale;
        }
    }
}

/* Interleaved doubles (n x ch) -> channel-major x_t (ch x n). */
EXPORT void dc_deinterleave_f64(const double *in, int64_t n, int64_t ch, double *x_t)
{
    if (ch == 2) {
        double *x0 = x_t, *x1 = x_t + n;
        for (int64_t t = 0; t < n; t++) {
            x0[t] = in[2 * t];
            x1[t] = in[2 * t + 1];
        }
        return;
    }
    for (int64_t t = 0; t < n; t++)
        for (int64_t c = 0; c < ch; c++)
            x_t[c * n + t] = in[t * ch + c];
}

/* ---------------------------------------------------------------------- K-weighting */

static inline double finite_or_zero(double v) { return isfinite(v) ? v : 0.0; }

typedef double v2d __attribute__((vector_size(16)));

/* K-weighted, channel-weighted power summed over pieces of the block:
 *   out[k] = sum over frames t of piece k of sum_r w[r] * y_r[t]^2,
 * y_r = x row rows[r] through the two sections of sos (2 x 6), state zi (nrows x 2 sections
 * x 2) carried across calls. x: ch rows of n frames, row r at x + rows[r] * n. Piece k ends
 * (exclusive) at cuts[k] (rising, <= n); the last piece (index ncuts) runs to n. Non-finite
 * samples are taken as 0. Rows are filtered two at a time, one per lane of a two-double
 * vector (element-wise IEEE arithmetic: the same bits as one row at a time). Within a piece
 * the frames are added in order; pieces of each row pair are added pair after pair. */
EXPORT void dc_kweight_sums(const double *x, int64_t n, const int64_t *rows, int64_t nrows,
                            const double *sos, double *zi, const double *w, const int64_t *cuts,
                            int64_t ncuts, double *out)
{
    const double *s1 = sos, *s2 = sos + 6;
    const v2d b10 = {s1[0], s1[0]}, b11 = {s1[1], s1[1]}, b12 = {s1[2], s1[2]};
    const v2d a11 = {s1[4], s1[4]}, a12 = {s1[5], s1[5]};
    const v2d b20 = {s2[0], s2[0]}, b21 = {s2[1], s2[1]}, b22 = {s2[2], s2[2]};
    const v2d a21 = {s2[4], s2[4]}, a22 = {s2[5], s2[5]};
    for (int64_t k = 0; k <= ncuts; k++)
        out[k] = 0.0;
    for (int64_t r = 0; r < nrows; r += 2) {
        const int pair = r + 1 < nrows;
        const double *xa = x + rows[r] * n;
        const double *xb = pair ? x + rows[r + 1] * n : xa;
        double *za = zi + 4 * r, *zb = pair ? zi + 4 * (r + 1) : za;
        v2d z10 = {za[0], zb[0]}, z11 = {za[1], zb[1]};
        v2d z20 = {za[2], zb[2]}, z21 = {za[3], zb[3]};
        const double wa = w[r], wb = pair ? w[r + 1] : 0.0;
        int64_t t = 0;
        for (int64_t k = 0; k <= ncuts; k++) {
            const int64_t end = k < ncuts ? cuts[k] : n;
            double acc = 0.0;
            for (; t < end; t++) {
                const v2d u = {finite_or_zero(xa[t]), finite_or_zero(xb[t])};
                /* direct form II transposed, in the order of scipy's _sosfilt */
                v2d y = b10 * u + z10;
                z10 = b11 * u - a11 * y + z11;
                z11 = b12 * u - a12 * y;
                v2d v = b20 * y + z20;
                z20 = b21 * y - a21 * v + z21;
                z21 = b22 * y - a22 * v;
                double q = wa * (v[0] * v[0]);
                if (pair)
                    q = q + wb * (v[1] * v[1]);
                acc += q;
            }
            out[k] += acc;
        }
        za[0] = z10[0]; za[1] = z11[0]; za[2] = z20[0]; za[3] = z21[0];
        if (pair) {
            zb[0] = z10[1]; zb[1] = z11[1]; zb[2] = z20[1]; zb[3] = z21[1];
        }
    }
}

/* --------------------------------------------------------------- sample-domain stats */

/* These reductions keep LANES partial results (element t goes to lane t % LANES), combined
 * in a fixed order at the end: the compiler vectorises across the lanes without reordering
 * any sum (no -ffast-math), so a result depends only on the data, never on how the buffer
 * happens to be aligned (a resumed batch reproduces its report byte for byte). */
#define LANES 8
/* Up to this many frames, float sums of code / 2^31 are exact (see dc_channel_stats). */
#define EXACT_SUM_FRAMES (INT64_C(1) << 21)

static inline __attribute__((always_inline)) double
lanes_sum(const double *l)
{
    return ((l[0] + l[1]) + (l[2] + l[3])) + ((l[4] + l[5]) + (l[6] + l[7]));
}

/* Four-double vectors, two per LANES group (one AVX2 register each, two SSE2 registers in
 * the default build); element-wise a > b ? a : b and a < b ? a : b on them. */
typedef double v4d __attribute__((vector_size(32)));
typedef int64_t v4i __attribute__((vector_size(32)));
#define VMAX4(a, b) ((v4d)((((v4i)((a) > (b))) & (v4i)(a)) | (~((v4i)((a) > (b))) & (v4i)(b))))
#define VMIN4(a, b) ((v4d)((((v4i)((a) < (b))) & (v4i)(a)) | (~((v4i)((a) < (b))) & (v4i)(b))))

/* Sums and squares of x[lo, end) into the lanes sl, ql, kept by the caller between calls
 * (lane j of element lo + i is i % LANES, lo being the start of a 100 ms piece or a
 * multiple of LANES after it; the tail after the last full group, which only the piece's
 * last call has, starts again at lane 0); the maximum and minimum into *hi_, *lo_. */
static inline __attribute__((always_inline)) void
tile_stats(const double *x, int64_t lo, int64_t end, double *hi_,
                              double *lo_, double *sl, double *ql)
{
    const v4d hv = {*hi_, *hi_, *hi_, *hi_}, lv = {*lo_, *lo_, *lo_, *lo_};
    v4d h[2] = {hv, hv}, l[2] = {lv, lv};
    v4d s[2], q[2]; /* lane j is element j % 4 of vector j / 4: the arrays' own order */
    memcpy(s, sl, sizeof s);
    memcpy(q, ql, sizeof q);
    int64_t t = lo;
    for (; t + LANES <= end; t += LANES) {
        for (int i = 0; i < 2; i++) {
            v4d v;
            memcpy(&v, x + t + 4 * i, sizeof v);
            h[i] = VMAX4(v, h[i]);
            l[i] = VMIN4(v, l[i]);
            s[i] += v;
            q[i] += v * v;
        }
    }
    double hh = *hi_, mm = *lo_;
    for (int j = 0; j < LANES; j++) {
        const double hj = h[j / 4][j % 4], mj = l[j / 4][j % 4];
        hh = hj > hh ? hj : hh;
        mm = mj < mm ? mj : mm;
    }
    memcpy(sl, s, sizeof s);
    memcpy(ql, q, sizeof q);
    for (int j = 0; t < end; t++, j++) {
        const double v = x[t];
        hh = v > hh ? v : hh;
        mm = v < mm ? v : mm;
        sl[j] += v;
        ql[j] += v * v;
    }
    *hi_ = hh;
    *lo_ = mm;
}

/* One channel's piece [lo, end): running max/min and sum, the sum of squares (returned) and
 * the count of exact zeros (*zeros), the sums and squares in LANES lanes (tile_stats). */
static inline __attribute__((always_inline)) double
piece_stats(const double *x, int64_t lo, int64_t end, double *hi_,
                                 double *lo_, double *sum_, int64_t *zeros)
{
    double sl[LANES] = {0.0}, ql[LANES] = {0.0};
    int64_t z = 0;
    for (int64_t t = lo; t < end; t++)
        z += x[t] == 0.0;
    tile_stats(x, lo, end, hi_, lo_, sl, ql);
    *sum_ += lanes_sum(sl);
    *zeros = z;
    return lanes_sum(ql);
}

/* Per channel row c of x (ch x n): maximum mx[c], minimum mn[c], sum sm[c]; per piece k
 * (piece k ends at cuts[k], the last runs to n) and channel: sum of squares sq[k * ch + c];
 * per piece: frames where every channel is exactly 0, zero[k]. With raw (ch x n int32
 * codes, may be NULL): exact int64 sums isum[c] and the OR of every code ors[c];
 * x_is_raw_scaled promises x == raw / 2^31 exactly (then the sums come from the float
 * sums). n >= 1. */
CLONES EXPORT void dc_channel_stats(const double *x, const int32_t *raw, int64_t ch, int64_t n,
                                    const int64_t *cuts, int64_t ncuts, double *mx, double *mn,
                                    double *sm, double *sq, int64_t *zero, int64_t *isum,
                                    int32_t *ors, int64_t x_is_raw_scaled)
{
    /* zero[k] first holds the fewest exact zeros any channel has in piece k: only a piece
     * where every channel has some needs the frame-by-frame count */
    for (int64_t k = 0; k <= ncuts; k++)
        zero[k] = INT64_MAX;
    for (int64_t c = 0; c < ch; c++) {
        const double *xc = x + c * n;
        double hi = xc[0], lo = xc[0], sum = 0.0;
        int64_t start = 0;
        for (int64_t k = 0; k <= ncuts; k++) {
            int64_t end = k < ncuts ? cuts[k] : n, zeros;
            sq[k * ch + c] = piece_stats(xc, start, end, &hi, &lo, &sum, &zeros);
            zero[k] = zeros < zero[k] ? zeros : zero[k];
            start = end;
        }
        mx[c] = hi;
        mn[c] = lo;
        sm[c] = sum;
        if (raw != NULL) {
            const int32_t *rc = raw + c * n;
            int32_t o = 0;
            for (int64_t t = 0; t < n; t++)
                o |= rc[t];
            ors[c] = o;
            if (n <= EXACT_SUM_FRAMES && x_is_raw_scaled) {
                /* every partial sum of x = code / 2^31 is a multiple of 2^-31 below 2^22 in
                 * magnitude: exact in a double, whatever the order, so this is the exact sum */
                isum[c] = (int64_t)(sum * 2147483648.0);
            } else {
                int64_t is = 0;
                for (int64_t t = 0; t < n; t++)
                    is += rc[t];
                isum[c] = is;
            }
        }
    }
    int64_t start = 0;
    for (int64_t k = 0; k <= ncuts; k++) {
        int64_t end = k < ncuts ? cuts[k] : n;
        if (zero[k] > 0 && ch == 2) {
            const double *x0 = x, *x1 = x + n;
            int64_t count = 0;
            for (int64_t t = start; t < end; t++)
                count += (x0[t] == 0.0) & (x1[t] == 0.0);
            zero[k] = count;
        } else if (zero[k] > 0 && ch > 2) {
            int64_t count = 0;
            for (int64_t t = start; t < end; t++) {
                int nonzero = 0;
                for (int64_t c = 0; c < ch; c++)
                    nonzero |= x[c * n + t] != 0.0;
                count += !nonzero;
            }
            zero[k] = count;
        }
        start = end;
    }
}

/* Sums of products a[t] * b[t] over [lo, end) into the lanes s (element t of the block to
 * lane t % LANES). */
static inline __attribute__((always_inline)) void
tile_pair(const double *a, const double *b, int64_t lo, int64_t end,
                             double *s)
{
    int64_t t = lo;
    for (; t < end && (t & (LANES - 1)); t++)
        s[t & (LANES - 1)] += a[t] * b[t];
    for (; t + LANES <= end; t += LANES)
        for (int j = 0; j < LANES; j++)
            s[j] += a[t + j] * b[t + j];
    for (; t < end; t++)
        s[t & (LANES - 1)] += a[t] * b[t];
}

/* Sums of products of row pairs (first[k], second[k]) of x (ch x n). */
CLONES EXPORT void dc_pair_products(const double *x, int64_t n, const int64_t *first,
                             const int64_t *second, int64_t npairs, double *out)
{
    for (int64_t k = 0; k < npairs; k++) {
        const double *a = x + first[k] * n, *b = x + second[k] * n;
        double s[LANES] = {0.0};
        tile_pair(a, b, 0, n, s);
        out[k] = lanes_sum(s);
    }
}

/* Frame scan for the silence meter over x (ch x n): a frame's level is its largest |x|; it is
 * loud when level >= threshold, zero when every channel is exactly 0. out = first loud,
 * last loud, first non-zero, last non-zero frame (-1 when none); found by scanning in from
 * both ends (they usually stop at once). When some frame is zero, zero_mask[t] = 1 for zero
 * frames and 0 otherwise (else untouched). Returns the number of zero frames. */
static inline __attribute__((always_inline)) double
frame_level(const double *x, int64_t ch, int64_t n, int64_t t)
{
    double level = fabs(x[t]);
    for (int64_t c = 1; c < ch; c++) {
        double a = fabs(x[c * n + t]);
        level = a > level ? a : level;
    }
    return level;
}

CLONES EXPORT int64_t dc_frame_scan(const double *x, int64_t ch, int64_t n, double threshold,
                                    int64_t *out, uint8_t *zero_mask)
{
    int64_t zeros = 0;
    if (ch == 1) {
        for (int64_t t = 0; t < n; t++)
            zeros += x[t] == 0.0;
    } else if (ch == 2) {
        const double *x0 = x, *x1 = x + n;
        for (int64_t t = 0; t < n; t++)
            zeros += (x0[t] == 0.0) & (x1[t] == 0.0);
    } else {
        for (int64_t t = 0; t < n; t++)
            zeros += frame_level(x, ch, n, t) == 0.0;
    }
    if (zeros && ch == 2) {
        const double *x0 = x, *x1 = x + n;
        for (int64_t t = 0; t < n; t++)
            zero_mask[t] = (x0[t] == 0.0) & (x1[t] == 0.0);
    } else if (zeros) {
        for (int64_t t = 0; t < n; t++)
            zero_mask[t] = frame_level(x, ch, n, t) == 0.0;
    }
    int64_t t;
    out[0] = out[1] = out[2] = out[3] = -1;
    for (t = 0; t < n && !(frame_level(x, ch, n, t) >= threshold); t++) {}
    if (t < n) {
        out[0] = t;
        for (t = n - 1; !(frame_level(x, ch, n, t) >= threshold); t--) {}
        out[1] = t;
    }
    if (zeros < n) {
        for (t = 0; frame_level(x, ch, n, t) == 0.0; t++) {}
        out[2] = t;
        for (t = n - 1; frame_level(x, ch, n, t) == 0.0; t--) {}
        out[3] = t;
    }
    return zeros;
}

/* ---------------------------------------------------------------- running median */

/* The median of every `size` (odd) consecutive points of x (n points), the ends padded with
 * the end values: out[i] = median(x[i - size / 2 .. i + size / 2]), indices clamped to
 * 0 .. n - 1 (numpy twin: checker/meters/bandwidth.py, median_filter_nearest). The window is
 * kept sorted in `work` (size doubles): each step overwrites the point that leaves with the
 * one that enters and moves it to its place. A median of an odd count is one of the points,
 * so this gives exactly the value a sort or a partition gives. Finite x only. */
EXPORT void dc_running_median(const double *x, int64_t n, int64_t size, double *work,
                              double *out)
{
    const int64_t half = size / 2;
    if (n <= 0)
        return;
    for (int64_t k = 0; k < size; k++) { /* the first window, by insertion */
        int64_t j = k - half;
        const double v = x[j < 0 ? 0 : (j > n - 1 ? n - 1 : j)];
        int64_t p = k;
        for (; p > 0 && work[p - 1] > v; p--)
            work[p] = work[p - 1];
        work[p] = v;
    }
    out[0] = work[half];
    for (int64_t i = 1; i < n; i++) {
        int64_t jo = i - 1 - half, ji = i + half;
        const double leave = x[jo < 0 ? 0 : jo];
        const double enter = x[ji > n - 1 ? n - 1 : ji];
        int64_t p = 0;
        while (work[p] != leave) /* present: it entered size steps ago */
            p++;
        for (; p > 0 && work[p - 1] > enter; p--)
            work[p] = work[p - 1];
        for (; p < size - 1 && work[p + 1] < enter; p++)
            work[p] = work[p + 1];
        work[p] = enter;
        out[i] = work[half];
    }
}

/* ------------------------------------------------------------------ the fused walk */

/* One walk over a block of interleaved integer codes does what dc_deinterleave_i32,
 * dc_channel_stats, dc_pair_products, dc_frame_scan and dc_kweight_sums do one after the
 * other, with the same arithmetic in the same order, so every output has the same bits
 * (tests/unit/test_walk.py compares them). Why: the K-weighting recursion is bound by the
 * latency of its feedback chain (a multiply and three adds per frame), which leaves the
 * core idle most of each frame; the other work fills that idle time while the frame's
 * codes are in registers, instead of walking the block four more times. The K-weighting
 * rows are filtered two per vector as in dc_kweight_sums, every pair in the same frame
 * loop (independent chains overlap: 5.1 pays for one chain instead of three).
 *
 * Inputs: in (n x ch interleaved codes), scale (code -> float). Outputs as the separate
 * kernels: raw_t, x_t (ch x n); per channel mx, mn, sm, isum, ors and per piece of
 * `cuts` the squares sq (pieces x ch) and all-zero frames zero; the pair sums prod;
 * scan[4] (first / last loud, first / last non-zero frame, -1 when none) with the zero
 * frames marked in zero_mask (every frame written); with nrows > 0 the K-weighted sums
 * kout per piece of kcuts, state zi updated. Returns the zero frames. n >= 1,
 * ch <= WALK_MAX_CHANNELS, nrows <= 2 * WALK_MAX_CHAINS, npairs <= WALK_MAX_PAIRS. */
#define WALK_MAX_CHANNELS 8
#define WALK_MAX_CHAINS 3
#define WALK_MAX_PAIRS 28

typedef struct {
    const int32_t *in;
    int64_t n, ch;
    double scale;
    int32_t *raw_t;
    double *x_t;
    const int64_t *cuts;
    int64_t ncuts;
    double *mx, *mn, *sm, *sq;
    int64_t *zero, *isum;
    int32_t *ors;
    const int64_t *first, *second;
    int64_t npairs;
    double *prod;
    double threshold;
    int64_t *scan;
    uint8_t *zero_mask;
    const int64_t *rows;
    int64_t nrows;
    const double *sos;
    double *zi;
    const double *w;
    const int64_t *kcuts;
    int64_t nkcuts;
    double *kout;
} walk_args;

/* Frames per tile: a multiple of LANES; a tile of 6 channels (codes, raw_t, x_t) fits in
 * the first-level cache, where every step after the deinterleaving reads it. */
#define WALK_TILE 512

/* CH channels, NCH K-weighting chains (0 when no rows): constants at each call site, so
 * the per-frame loops unroll and the filter states stay in registers. */
static inline __attribute__((always_inline)) int64_t walk_impl(const walk_args *a,
                                                              const int64_t CH, const int NCH)
{
    const int64_t n = a->n, npairs = a->npairs;
    const double scale = a->scale;
    const int32_t *restrict in = a->in;
    int32_t *restrict raw_t = a->raw_t;
    double *restrict x_t = a->x_t;
    uint8_t *restrict zmask = a->zero_mask;
    double hi[WALK_MAX_CHANNELS], lo[WALK_MAX_CHANNELS], sum[WALK_MAX_CHANNELS];
    double s[WALK_MAX_CHANNELS][LANES], q[WALK_MAX_CHANNELS][LANES];
    double pp[WALK_MAX_PAIRS][LANES];
    int32_t orr[WALK_MAX_CHANNELS];
    for (int64_t c = 0; c < CH; c++) {
        hi[c] = lo[c] = (double)in[c] * scale;
        sum[c] = 0.0;
        orr[c] = 0;
        for (int j = 0; j < LANES; j++)
            s[c][j] = q[c][j] = 0.0;
    }
    for (int64_t k = 0; k < npairs; k++)
        for (int j = 0; j < LANES; j++)
            pp[k][j] = 0.0;
    /* K-weighting: chain i filters rows 2i and 2i + 1 (lane 1 repeats lane 0 for an odd
     * last row), as in dc_kweight_sums */
    const double *s1 = a->sos, *s2 = a->sos + 6;
    const v2d b10 = {s1[0], s1[0]}, b11 = {s1[1], s1[1]}, b12 = {s1[2], s1[2]};
    const v2d a11 = {s1[4], s1[4]}, a12 = {s1[5], s1[5]};
    const v2d b20 = {s2[0], s2[0]}, b21 = {s2[1], s2[1]}, b22 = {s2[2], s2[2]};
    const v2d a21 = {s2[4], s2[4]}, a22 = {s2[5], s2[5]};
    v2d z10[WALK_MAX_CHAINS], z11[WALK_MAX_CHAINS], z20[WALK_MAX_CHAINS], z21[WALK_MAX_CHAINS];
    const double *xa[WALK_MAX_CHAINS], *xb[WALK_MAX_CHAINS];
    int pair[WALK_MAX_CHAINS];
    double wa[WALK_MAX_CHAINS], wb[WALK_MAX_CHAINS], acc[WALK_MAX_CHAINS];
    for (int i = 0; i < NCH; i++) {
        const int64_t r = 2 * i;
        pair[i] = r + 1 < a->nrows;
        xa[i] = x_t + a->rows[r] * n;
        xb[i] = pair[i] ? x_t + a->rows[r + 1] * n : xa[i];
        const double *za = a->zi + 4 * r, *zb = pair[i] ? a->zi + 4 * (r + 1) : za;
        z10[i] = (v2d){za[0], zb[0]};
        z11[i] = (v2d){za[1], zb[1]};
        z20[i] = (v2d){za[2], zb[2]};
        z21[i] = (v2d){za[3], zb[3]};
        wa[i] = a->w[r];
        wb[i] = pair[i] ? a->w[r + 1] : 0.0;
        acc[i] = 0.0;
    }
    if (a->kout != NULL) /* rows given, possibly none: every piece 0 */
        for (int64_t k = 0; k <= a->nkcuts; k++)
            a->kout[k] = 0.0;
    int64_t kk = 0; /* K-weighting piece in progress, ending (exclusive) at kend */
    int64_t kend = a->nkcuts > 0 ? a->kcuts[0] : n;
    int64_t zeros = 0, start = 0;
    for (int64_t k = 0; k <= a->ncuts; k++) {
        const int64_t end = k < a->ncuts ? a->cuts[k] : n;
        int64_t zpiece = 0;
        for (int64_t t0 = start; t0 < end; t0 += WALK_TILE) {
            const int64_t t1 = t0 + WALK_TILE < end ? t0 + WALK_TILE : end;
            /* deinterleave the tile (codes and floats), then from the codes' rows the OR
             * per channel and the all-zero frames */
            for (int64_t t = t0; t < t1; t++) {
                const int32_t *f = in + t * CH;
                for (int64_t c = 0; c < CH; c++) {
                    raw_t[c * n + t] = f[c];
                    x_t[c * n + t] = (double)f[c] * scale;
                }
            }
            for (int64_t c = 0; c < CH; c++) {
                const int32_t *rc = raw_t + c * n;
                int32_t o = 0;
                for (int64_t t = t0; t < t1; t++)
                    o |= rc[t];
                orr[c] |= o;
            }
            for (int64_t t = t0; t < t1; t++) {
                int32_t any = 0;
                for (int64_t c = 0; c < CH; c++)
                    any |= raw_t[c * n + t];
                zmask[t] = any == 0;
                zpiece += any == 0;
            }
            /* the K-weighting of the tile, every chain in one frame loop */
            if (NCH) {
                for (int64_t t = t0; t < t1; t++) {
                    while (kend == t && kk < a->nkcuts) { /* pieces ending here, empty too */
                        for (int i = 0; i < NCH; i++) {
                            a->kout[kk] += acc[i];
                            acc[i] = 0.0;
                        }
                        kk++;
                        kend = kk < a->nkcuts ? a->kcuts[kk] : n;
                    }
                    for (int i = 0; i < NCH; i++) {
                        const v2d u = {finite_or_zero(xa[i][t]), finite_or_zero(xb[i][t])};
                        v2d y = b10 * u + z10[i];
                        z10[i] = b11 * u - a11 * y + z11[i];
                        z11[i] = b12 * u - a12 * y;
                        v2d v = b20 * y + z20[i];
                        z20[i] = b21 * y - a21 * v + z21[i];
                        z21[i] = b22 * y - a22 * v;
                        double qq = wa[i] * (v[0] * v[0]);
                        if (pair[i])
                            qq = qq + wb[i] * (v[1] * v[1]);
                        acc[i] += qq;
                    }
                }
            }
            for (int64_t c = 0; c < CH; c++)
                tile_stats(x_t + c * n, t0, t1, &hi[c], &lo[c], s[c], q[c]);
            for (int64_t p = 0; p < npairs; p++)
                tile_pair(x_t + a->first[p] * n, x_t + a->second[p] * n, t0, t1, pp[p]);
        }
        for (int64_t c = 0; c < CH; c++) {
            sum[c] += lanes_sum(s[c]);
            a->sq[k * CH + c] = lanes_sum(q[c]);
            for (int j = 0; j < LANES; j++)
                s[c][j] = q[c][j] = 0.0;
        }
        a->zero[k] = zpiece;
        zeros += zpiece;
        start = end;
    }
    if (NCH) {
        while (kk <= a->nkcuts) { /* the pieces ending at n (the last, and empty ones) */
            for (int i = 0; i < NCH; i++) {
                a->kout[kk] += acc[i];
                acc[i] = 0.0;
            }
            kk++;
        }
        for (int i = 0; i < NCH; i++) {
            double *za = a->zi + 8 * i, *zb = za + 4;
            za[0] = z10[i][0]; za[1] = z11[i][0]; za[2] = z20[i][0]; za[3] = z21[i][0];
            if (pair[i]) {
                zb[0] = z10[i][1]; zb[1] = z11[i][1]; zb[2] = z20[i][1]; zb[3] = z21[i][1];
            }
        }
    }
    for (int64_t c = 0; c < CH; c++) {
        a->mx[c] = hi[c];
        a->mn[c] = lo[c];
        a->sm[c] = sum[c];
        a->ors[c] = orr[c];
        if (n <= EXACT_SUM_FRAMES) {
            a->isum[c] = (int64_t)(sum[c] * 2147483648.0); /* exact: see dc_channel_stats */
        } else {
            int64_t is = 0;
            for (int64_t t = 0; t < n; t++)
                is += raw_t[c * n + t];
            a->isum[c] = is;
        }
    }
    for (int64_t p = 0; p < npairs; p++)
        a->prod[p] = lanes_sum(pp[p]);
    /* first / last loud and non-zero frames, scanning in from both ends (dc_frame_scan) */
    int64_t *out = a->scan, t;
    out[0] = out[1] = out[2] = out[3] = -1;
    for (t = 0; t < n && !(frame_level(x_t, CH, n, t) >= a->threshold); t++) {}
    if (t < n) {
        out[0] = t;
        for (t = n - 1; !(frame_level(x_t, CH, n, t) >= a->threshold); t--) {}
        out[1] = t;
    }
    if (zeros < n) {
        for (t = 0; zmask[t]; t++) {}
        out[2] = t;
        for (t = n - 1; zmask[t]; t--) {}
        out[3] = t;
    }
    return zeros;
}

CLONES EXPORT int64_t dc_walk_i32(const int32_t *in, int64_t n, int64_t ch, double scale,
                           int32_t *raw_t, double *x_t, const int64_t *cuts, int64_t ncuts,
                           double *mx, double *mn, double *sm, double *sq, int64_t *zero,
                           int64_t *isum, int32_t *ors, const int64_t *first,
                           const int64_t *second, int64_t npairs, double *prod,
                           double threshold, int64_t *scan, uint8_t *zero_mask,
                           const int64_t *rows, int64_t nrows, const double *sos, double *zi,
                           const double *w, const int64_t *kcuts, int64_t nkcuts, double *kout)
{
    const walk_args a = {in, n, ch, scale, raw_t, x_t, cuts, ncuts, mx, mn, sm, sq, zero,
                         isum, ors, first, second, npairs, prod, threshold, scan, zero_mask,
                         rows, nrows, sos, zi, w, kcuts, nkcuts, kout};
    const int chains = (int)((nrows + 1) / 2);
    if (ch == 2 && chains == 1)
        return walk_impl(&a, 2, 1);
    if (ch == 1 && chains == 1)
        return walk_impl(&a, 1, 1);
    if (ch == 6 && chains == 3)
        return walk_impl(&a, 6, 3);
    switch (chains) {
    case 0: return walk_impl(&a, ch, 0);
    case 1: return walk_impl(&a, ch, 1);
    case 2: return walk_impl(&a, ch, 2);
    default: return walk_impl(&a, ch, 3);
    }
}

/* ------------------------------------------------------------------------ true peak */
/* The polyphase interpolator of checker/dsp/interp.py and the per-chunk work of
 * checker/meters/truepeak.py (numpy twins: ChunkInterpolator.grid and
 * TruePeakMeter._chunk / _skippable). Float32 like the numpy path. Each output is one sum
 * over the taps in tap order, a multiply then an add per tap (no fused multiply-add, no
 * reordering): vectors run across neighbouring outputs only, so every clone gives the same
 * bits whatever the buffer's alignment. */

/* 32-byte vectors in static inline helpers only (GCC notes an ABI change for them) */
#pragma GCC diagnostic ignored "-Wpsabi"
typedef float v8f __attribute__((vector_size(32)));
typedef int32_t v8i __attribute__((vector_size(32)));
typedef uint32_t v8u __attribute__((vector_size(32)));

#define TP_BLOCK 24 /* output positions per register block (3 vectors of 8) */
#define TP_MAX_VECS 1024 /* dc_tp_chunks keeps the grid of chunks up to 8 * this positions */
#define TP_MAX_PHASES 3 /* phases 1..factor-1 computed; factor <= 4 */

static inline __attribute__((always_inline)) v8f v8f_load(const float *p)
{
    v8f v;
    memcpy(&v, p, sizeof v);
    return v;
}

/* One block of 8 * nv positions (nv <= TP_BLOCK / 8): lane l of acc[p][k] = y at position
 * 8 k + l + (p + 1) / factor, i.e. the sum over q of taps[p * ntaps + q] * w[8 k + l + q],
 * added in tap order (w: the window from the first tap). nph and nv are constants at each
 * call, so the accumulators stay in registers. */
static inline __attribute__((always_inline)) void
tp_block_n(const float *w, const float *taps, int64_t ntaps, v8f acc[TP_MAX_PHASES][TP_BLOCK / 8],
           const int nph, const int nv_asked)
{
    const int nv = nv_asked < TP_BLOCK / 8 ? nv_asked : TP_BLOCK / 8;
    v8f a[TP_MAX_PHASES][TP_BLOCK / 8];
    for (int p = 0; p < nph; p++)
        for (int k = 0; k < nv; k++)
            a[p][k] = (v8f){0, 0, 0, 0, 0, 0, 0, 0};
    for (int64_t q = 0; q < ntaps; q++) {
        v8f x[TP_BLOCK / 8];
        for (int k = 0; k < nv; k++)
            x[k] = v8f_load(w + q + 8 * k);
        for (int p = 0; p < nph; p++) {
            const float t = taps[p * ntaps + q];
            const v8f tv = {t, t, t, t, t, t, t, t};
            for (int k = 0; k < nv; k++)
                a[p][k] = a[p][k] + tv * x[k];
        }
    }
    for (int p = 0; p < nph; p++)
        for (int k = 0; k < nv; k++)
            acc[p][k] = a[p][k];
}

#define TP_BLOCK_NV(nph)                                \
    switch (nv) {                                       \
    case 4: tp_block_n(w, taps, ntaps, acc, nph, 4); break; \
    case 3: tp_block_n(w, taps, ntaps, acc, nph, 3); break; \
    case 2: tp_block_n(w, taps, ntaps, acc, nph, 2); break; \
    default: tp_block_n(w, taps, ntaps, acc, nph, 1); break; \
    }

/* tp_block_n for nph phases (1 to TP_MAX_PHASES; 0 computes nothing) and nv vectors (1 to 4:
 * a full block of TP_BLOCK positions, or a tail of whole vectors). */
static inline __attribute__((always_inline)) void
tp_block(const float *w, const float *taps, int64_t nph, int64_t ntaps,
         v8f acc[TP_MAX_PHASES][TP_BLOCK / 8], int64_t nv)
{
    if (nph == 3) {
        TP_BLOCK_NV(3)
    } else if (nph == 2) {
        TP_BLOCK_NV(2)
    } else if (nph == 1) {
        TP_BLOCK_NV(1)
    }
}
#undef TP_BLOCK_NV

/* The same sum for one position (tails shorter than a vector): the same bits per output. */
static inline __attribute__((always_inline)) float tp_one(const float *w, const float *taps, int64_t ntaps)
{
    float acc = 0.0f;
    for (int64_t q = 0; q < ntaps; q++)
        acc = acc + taps[q] * w[q];
    return acc;
}

/* Oversampled grid of npos positions: out[i * factor + p] = y(i + p / factor), where the
 * input sample of position i is w[i + back] and w holds npos + ntaps - 1 samples; phase 0 is
 * that sample itself. taps: (factor - 1) x ntaps, phase p's taps at (p - 1) * ntaps. */
static inline __attribute__((always_inline)) void
tp_grid_impl(const float *w, int64_t npos, const float *taps, int64_t factor, int64_t ntaps,
             int64_t back, float *out)
{
    const int64_t nph = factor - 1;
    int64_t i = 0;
    if (nph > 0 && nph <= TP_MAX_PHASES) {
        v8f acc[TP_MAX_PHASES][TP_BLOCK / 8];
        for (; i + 8 <= npos; i += TP_BLOCK) {
            const int64_t nv = (npos - i) / 8 < TP_BLOCK / 8 ? (npos - i) / 8 : TP_BLOCK / 8;
            tp_block(w + i, taps, nph, ntaps, acc, nv);
            for (int k = 0; k < 8 * nv; k++) {
                out[(i + k) * factor] = w[i + k + back];
                for (int64_t p = 0; p < nph; p++)
                    out[(i + k) * factor + p + 1] = acc[p][k / 8][k % 8];
            }
            if (nv < TP_BLOCK / 8) {
                i += 8 * nv;
                break;
            }
        }
    }
    for (; i < npos; i++) {
        out[i * factor] = w[i + back];
        for (int64_t p = 0; p < nph; p++)
            out[i * factor + p + 1] = tp_one(w + i, taps + p * ntaps, ntaps);
    }
}

CLONES EXPORT void dc_tp_grid(const float *w, int64_t npos, const float *taps, int64_t factor,
                              int64_t ntaps, int64_t back, float *out)
{
    tp_grid_impl(w, npos, taps, factor, ntaps, back, out);
}

#define V8F_ABS(v) ((v8f)((v8i)(v) & (v8i){0x7fffffff, 0x7fffffff, 0x7fffffff, 0x7fffffff, \
                                           0x7fffffff, 0x7fffffff, 0x7fffffff, 0x7fffffff}))
/* element-wise a > b ? a : b */
#define V8F_MAX(a, b) ((v8f)((((v8i)((a) > (b))) & (v8i)(a)) | (~((v8i)((a) > (b))) & (v8i)(b))))

static inline __attribute__((always_inline)) float v8f_hmax(const v8f *v)
{
    float m = (*v)[0];
    for (int k = 1; k < 8; k++)
        m = (*v)[k] > m ? (*v)[k] : m;
    return m;
}

/* Largest |x| and largest |x[t + 1] - x[t]| over x[0..n) (float32 differences, as numpy's
 * np.diff on float32). Maxima are exact whatever the order. Always inlined, so that it is
 * compiled inside each target clone of its caller: as a function of its own it was built
 * for the default target only, where GCC split the 8-lane maxima into scalar compares
 * (17 us per 4176-sample window against about 1 us inlined in the AVX2 clone, measured
 * here). */
static inline __attribute__((always_inline)) void
tp_peak_and_step(const float *x, int64_t n, float *peak, float *step)
{
    v8f pk = {0, 0, 0, 0, 0, 0, 0, 0}, st = pk;
    int64_t t = 0;
    /* four independent maxima per quantity: one chain waits on each compare and blend */
    v8f pk4[4] = {pk, pk, pk, pk}, st4[4] = {pk, pk, pk, pk};
    for (; t + 33 <= n; t += 32)
        for (int k = 0; k < 4; k++) {
            v8f a = v8f_load(x + t + 8 * k), b = v8f_load(x + t + 8 * k + 1);
            pk4[k] = V8F_MAX(V8F_ABS(a), pk4[k]);
            st4[k] = V8F_MAX(V8F_ABS(b - a), st4[k]);
        }
    for (int k = 0; k < 4; k++) {
        pk = V8F_MAX(pk4[k], pk);
        st = V8F_MAX(st4[k], st);
    }
    for (; t + 9 <= n; t += 8) {
        v8f a = v8f_load(x + t), b = v8f_load(x + t + 1);
        pk = V8F_MAX(V8F_ABS(a), pk);
        st = V8F_MAX(V8F_ABS(b - a), st);
    }
    float p = v8f_hmax(&pk), s = v8f_hmax(&st);
    for (; t < n; t++) {
        float a = fabsf(x[t]);
        p = a > p ? a : p;
        if (t + 1 < n) {
            float d = fabsf(x[t + 1] - x[t]);
            s = d > s ? d : s;
        }
    }
    *peak = p;
    *step = s;
}

/* Bound on |y| anywhere inside a window whose samples peak at `peak` and step by at most
 * `step` (see truepeak.py, "Speed: skipping chunks"): min(sum |taps| * peak, dc * peak +
 * steps * step), times (1 + margin). bound[0..3] = sum |taps|, dc gain, steps, margin. */
static inline __attribute__((always_inline)) double tp_reach(double peak, double step, const double *bound)
{
    double a = bound[0] * peak, b = bound[1] * peak + bound[2] * step;
    return (a < b ? a : b) * (1.0 + bound[3]);
}

/* ------------------------------------------------------------- true-peak refinement */
/* The refinement of one chunk-channel whose grid could raise the running maximum (numpy
 * twin: TruePeakMeter._refine / _fine and interp.refine_peaks; float64 like them, every
 * operation in the same order except the fine sums, which add the taps in tap order). */

static inline __attribute__((always_inline)) double clip_d(double v, double lo, double hi)
{
    v = v > lo ? v : lo;
    return v < hi ? v : hi;
}

/* interp.refine_peaks for one point: |y0| * sqrt(1 + t^2), cos_max = cos(omega_max). */
static inline __attribute__((always_inline)) double
tp_sinusoid_peak(double ym, double y0, double yp, double cos_max)
{
    const double u0 = fabs(y0), s = y0 < 0 ? -1.0 : 1.0;
    const double um = s * ym, up = s * yp;
    const double safe_u0 = u0 > 0 ? u0 : 1.0;
    const double c = clip_d((um + up) / (2.0 * safe_u0), cos_max, 1.0);
    const double sin_w = sqrt(1.0 - c * c);
    const double limit = u0 * (1.0 - c);
    const double half_diff = clip_d((up - um) / 2.0, -limit, limit);
    double t = 0.0;
    if (limit > 0 && sin_w > 0 && u0 > 0)
        t = half_diff / (safe_u0 * sin_w);
    return u0 * sqrt(1.0 + t * t);
}

#define TP_MAX_CANDIDATES 16
#define TP_MAX_FINE 129 /* 2 * fine_steps + 1 with fine_steps <= 64 */
#define TP_MAX_ABOVE 4096 /* points above the threshold kept for the second pass */

/* Fine evaluation around window grid point k (TruePeakMeter._fine): the filter at
 * fine_steps / factor points per grid step over +-1 grid step; returns the largest |v|
 * refined by a sinusoid fit, and its window-local fine index in *at_fine. */
static inline __attribute__((always_inline)) double
tp_fine(const float *win, int64_t k, int64_t factor, const double *fine_taps,
                      int64_t ntaps, int64_t history, int64_t fine_steps, double cos_fine,
                      int64_t *at_fine)
{
    const int64_t step = fine_steps / factor, back = ntaps / 2 - 1, n = 2 * step + 1;
    double v[TP_MAX_FINE];
    int64_t at = 0;
    double best = -1.0;
    for (int64_t i = 0; i < n; i++) {
        const int64_t fine = k * step + i - step;
        const float *x = win + history + fine / fine_steps - back;
        const double *taps = fine_taps + (fine % fine_steps) * ntaps;
        double acc = 0.0;
        for (int64_t q = 0; q < ntaps; q++)
            acc = acc + (double)x[q] * taps[q];
        v[i] = acc;
        if (fabs(acc) > best) {
            best = fabs(acc);
            at = i;
        }
    }
    const int64_t j = at < 1 ? 1 : (at > n - 2 ? n - 2 : at);
    const double peak = tp_sinusoid_peak(v[j - 1], v[j], v[j + 1], cos_fine);
    *at_fine = k * step + at - step;
    return peak > best ? peak : best;
}

/* The refinement of TruePeakMeter._refine for one chunk-channel. win: its input window;
 * y: the window's grid (float32); centres are grid points lo..hi-1. Grid point k (window
 * index; file grid index base + k) counts when first <= base + k <= last or it is a sample
 * (phase 0), and may be refined (a candidate) when its two neighbours are such points
 * (pass first / last far out of range away from the file's edges). Candidates: local maxima
 * of |y| at or above max(best, top) / refine_bound (minus 1e-9), the ncand with the largest
 * sinusoid-fit estimates (ties: the earlier) evaluated finely. state[0] (best), state[1]
 * (best_inner, over points whose time lies in [edge_s, end_s]) and *best_index (fine index)
 * are updated in place. */
static inline __attribute__((always_inline)) void
tp_refine_impl(const float *win, const float *y, int64_t lo, int64_t hi, int64_t factor,
               int64_t base, int64_t first, int64_t last, const double *fine_taps, int64_t ntaps,
               int64_t history, int64_t fine_steps, int64_t ncand, double cos_refine,
               double cos_fine, double top, double refine_bound, double fine_rate, double edge_s,
               double end_s, double *state, int64_t *best_index)
{
    const double high = state[0] > top ? state[0] : top;
    const double threshold = high / refine_bound * (1.0 - 1e-9);
    const int64_t step = fine_steps / factor;
    int64_t cand[TP_MAX_CANDIDATES];
    double est[TP_MAX_CANDIDATES], fval[TP_MAX_CANDIDATES];
    int64_t fpos[TP_MAX_CANDIDATES];
    int64_t nc = 0;
    if (ncand > TP_MAX_CANDIDATES)
        ncand = TP_MAX_CANDIDATES;
#define TP_ELIGIBLE(g) (((g) >= first && (g) <= last) || (((g) % factor + factor) % factor) == 0)
    /* Points at or above the threshold, found 8 at a time against a float32 threshold that is
     * not above it (most of a chunk lies well below), then tested exactly one by one. */
    float thr_f = (float)threshold;
    if ((double)thr_f > threshold)
        thr_f = nextafterf(thr_f, -INFINITY);
    const v8f thr_v = {thr_f, thr_f, thr_f, thr_f, thr_f, thr_f, thr_f, thr_f};
    int64_t above[TP_MAX_ABOVE];
    int64_t nabove = 0, overflow = 0;
    /* pass 1: the candidates (local maxima above the threshold, best estimates first) */
    for (int64_t k0 = lo; k0 < hi; k0 += 8) {
        if (k0 + 8 <= hi) {
            const v8i hit = (v8i)(V8F_ABS(v8f_load(y + k0)) >= thr_v);
            int any = 0;
            for (int t = 0; t < 8; t++)
                any |= hit[t];
            if (!any)
                continue;
        }
        const int64_t k1 = k0 + 8 < hi ? k0 + 8 : hi;
        for (int64_t k = k0; k < k1; k++) {
            const float a = fabsf(y[k]);
            const double value = TP_ELIGIBLE(base + k) ? (double)a : 0.0;
            if (!(value >= threshold))
                continue;
            if (nabove < TP_MAX_ABOVE)
                above[nabove++] = k;
            else
                overflow = 1;
            if (!(a >= fabsf(y[k - 1]) && a >= fabsf(y[k + 1])))
                continue;
            if (!(base + k - 1 >= first && base + k + 1 <= last))
                continue;
            const double e = tp_sinusoid_peak(y[k - 1], y[k], y[k + 1], cos_refine);
            int64_t at = nc < ncand ? nc : ncand; /* insertion point, stable for ties */
            while (at > 0 && e > est[at - 1])
                at--;
            if (at >= ncand)
                continue;
            const int64_t last_slot = nc < ncand ? nc : ncand - 1;
            for (int64_t s = last_slot; s > at; s--) {
                est[s] = est[s - 1];
                cand[s] = cand[s - 1];
            }
            est[at] = e;
            cand[at] = k;
            if (nc < ncand)
                nc++;
        }
    }
    for (int64_t s = 0; s < nc; s++)
        fval[s] = tp_fine(win, cand[s], factor, fine_taps, ntaps, history, fine_steps, cos_fine,
                          &fpos[s]);
    /* pass 2: every point above the threshold, the candidates' fine values where larger */
    double top_value = -1.0, inner = state[1];
    int64_t top_pos = 0;
    const int64_t count = overflow ? hi - lo : nabove;
    for (int64_t i = 0; i < count; i++) {
        const int64_t k = overflow ? lo + i : above[i];
        const double grid = TP_ELIGIBLE(base + k) ? (double)fabsf(y[k]) : 0.0;
        if (!(grid >= threshold))
            continue;
        double value = grid;
        int64_t pos = k * step;
        for (int64_t s = 0; s < nc; s++)
            if (cand[s] == k && fval[s] > value) {
                value = fval[s];
                pos = fpos[s];
            }
        if (value > top_value) {
            top_value = value;
            top_pos = pos;
        }
        const double time_s = (double)(base * step + pos) / fine_rate;
        if (time_s >= edge_s && time_s <= end_s && value > inner)
            inner = value;
    }
#undef TP_ELIGIBLE
    if (top_value > state[0]) {
        state[0] = top_value;
        *best_index = base * step + top_pos;
    }
    state[1] = inner;
}

EXPORT void dc_tp_refine(const float *win, const float *y, int64_t lo, int64_t hi,
                         int64_t factor, int64_t base, int64_t first, int64_t last,
                         const double *fine_taps, int64_t ntaps, int64_t history,
                         int64_t fine_steps, int64_t ncand, double cos_refine, double cos_fine,
                         double top, double refine_bound, double fine_rate, double edge_s,
                         double end_s, double *state, int64_t *best_index)
{
    tp_refine_impl(win, y, lo, hi, factor, base, first, last, fine_taps, ntaps, history,
                   fine_steps, ncand, cos_refine, cos_fine, top, refine_bound, fine_rate, edge_s,
                   end_s, state, best_index);
}

/* Several chunks of several channels in one call. Channel c's input is the row
 * buf + c * row; chunk j's window starts at first + j * hop and holds `window` samples;
 * its centres are the grid points of npos positions from window sample lead (position i:
 * sample lead + i, window from lead + i - back). For each chunk, channel by channel:
 *   - skip test: reach * fine_gain <= best and reach <= ceiling (tp_reach over the whole
 *     window), with best[c] raised to each computed chunk's top as it goes (a lower bound
 *     of the meter's maximum, which only grows);
 *   - else the grid: top[j * ch + c] = largest |y| over the centres (-1 when skipped),
 *     overs: runs of |y| > ceiling_f carried over chunks by in_run[c] (a skipped chunk ends
 *     a run), counted in *overs; the first `cap` run starts of each channel (grid index
 *     relative to chunk 0's first centre) go to starts[c * cap ...], their number to
 *     nstarts[c].
 * Inside a computed chunk, a register block of TP_BLOCK positions is left out when its own
 * reach (tp_reach over the samples its filter windows read) times refine_bound is at most
 * best[c] and the reach is at most the ceiling: none of its grid points is an over (a run
 * ends there, as it would), and none can make top * refine_bound exceed best[c], which is
 * at most the meter's running maximum. So top is the exact largest |y| over the centres
 * whenever top * refine_bound > best[c] (the meter refines such a chunk from its whole grid,
 * dc_tp_grid); otherwise it is a lower bound of it that the meter uses in the same way (no
 * refinement; best[c] not raised, as the points left out lie below best[c]).
 * The grid is computed 8 positions per vector (TP_BLOCK per register block); whether a
 * grid point is above the ceiling becomes one bit, in time order, of a word per vector
 * (bit l * factor + p: lane l, phase p), so runs and their starts are bit operations.
 * File edges: edge = {origin, efirst, elast}, origin the file grid index of chunk 0's first
 * centre; an interpolated point (phase > 0) outside [efirst, elast] counts as 0 for top and
 * overs (the edge rule of checker/meters/truepeak_refine.py; samples always count).
 * Refinement (fine_taps not NULL): best, best_index and best_inner are the meter's own
 * state; each chunk-channel with top > 0 and top * refine_bound > best[c] is refined right
 * after its grid, in chunk order (tp_refine_impl, as dc_tp_refine after dc_tp_grid: the same
 * bits), so the skip tests above run against the running maximum itself. Its grid: the
 * vectors computed here (kept phase-major in the scratch after `grid`), the blocks left
 * out and iref[3] positions either side computed again (every output is one sum in tap
 * order, so the same bits whatever the grouping). iref = {history, fine steps, candidates,
 * positions either side, chunk-channels refined (out, added to)}; dref = {cos_refine,
 * cos_fine, fine points per second, edge_s, end_s}; grid: (npos + 2 iref[3]) * factor +
 * (factor - 1) * npos floats. NULL fine_taps: no refinement, best[c] raised to each top.
 * Returns the number of chunk-channels computed (wholly or in part). */
CLONES EXPORT int64_t dc_tp_chunks(const float *buf, int64_t ch, int64_t row, int64_t first,
                                   int64_t hop, int64_t nchunks, int64_t window, int64_t lead,
                                   int64_t npos, const float *taps, int64_t factor,
                                   int64_t ntaps, int64_t back, const double *bound,
                                   double fine_gain, double refine_bound, double ceiling,
                                   float ceiling_f, double *best, uint8_t *in_run, float *top,
                                   int64_t *overs, int64_t *starts, int64_t cap,
                                   int64_t *nstarts, const int64_t *edge,
                                   const double *fine_taps, int64_t *iref,
                                   const double *dref, int64_t *best_index,
                                   double *best_inner, float *grid)
{
    const int64_t origin = edge[0], efirst = edge[1], elast = edge[2];
    uint8_t have[TP_MAX_VECS];
    /* scratch after the grid: phases 1.. of the computed positions, phase-major */
    float *keep = grid == NULL ? NULL : grid + (npos + 2 * (iref ? iref[3] : 0)) * factor;
    const int64_t nph = factor - 1;
    const int vec = nph <= TP_MAX_PHASES && factor * 8 <= 32; /* a vector's bits fit a word */
    const v8f ceil_v = {ceiling_f, ceiling_f, ceiling_f, ceiling_f,
                        ceiling_f, ceiling_f, ceiling_f, ceiling_f};
    v8u bit[TP_MAX_PHASES + 1]; /* bit[p] lane l: 1 << (l * factor + p) */
    for (int64_t p = 0; p <= TP_MAX_PHASES; p++)
        for (int l = 0; l < 8; l++)
            bit[p][l] = vec && p < factor ? 1u << (l * factor + p) : 0u;
    const int nbits = (int)(8 * factor);
    int64_t computed = 0;
    for (int64_t j = 0; j < nchunks; j++) {
        for (int64_t c = 0; c < ch; c++) {
            const float *win = buf + c * row + first + j * hop;
            float peak, step;
            tp_peak_and_step(win, window, &peak, &step);
            const double reach = tp_reach(peak, step, bound);
            if (reach * fine_gain <= best[c] && reach <= ceiling) {
                top[j * ch + c] = -1.0f;
                in_run[c] = 0;
                continue;
            }
            computed++;
            const float *w = win + lead - back;
            /* for the refinement: which vectors of 8 positions were computed here (their
             * phases kept phase-major in keep), so that only the rest is computed again */
            const int keeping = fine_taps != NULL && npos / 8 <= TP_MAX_VECS;
            if (keeping)
                memset(have, 0, (size_t)(npos / 8));
            const int64_t base = j * npos * factor; /* grid index of this chunk's first centre */
            v8f mv = {0, 0, 0, 0, 0, 0, 0, 0};
            float m = 0.0f;
            uint32_t run = in_run[c];
            int64_t i = 0;
            v8f acc[TP_MAX_PHASES][TP_BLOCK / 8];
            while (vec && i + 8 <= npos) {
                const int64_t nv = (npos - i) / 8 < TP_BLOCK / 8 ? (npos - i) / 8 : TP_BLOCK / 8;
                float local_peak, local_step;
                tp_peak_and_step(w + i, 8 * nv + ntaps - 1, &local_peak, &local_step);
                const double local = tp_reach(local_peak, local_step, bound);
                if (local * refine_bound <= best[c] && local <= ceiling) {
                    run = 0;
                    i += 8 * nv;
                    continue;
                }
                tp_block(w + i, taps, nph, ntaps, acc, nv);
                if (keeping) {
                    for (int64_t p = 0; p < nph; p++)
                        for (int64_t k = 0; k < nv; k++)
                            memcpy(keep + p * npos + i + 8 * k, &acc[p][k], sizeof(v8f));
                    for (int64_t k = 0; k < nv; k++)
                        have[i / 8 + k] = 1;
                }
                /* |y| of every point (abs[0]: the samples, abs[p + 1]: phase p + 1) and the
                 * block's maximum, reduced as a tree (exact in any order) */
                v8f abs_y[TP_MAX_PHASES + 1][TP_BLOCK / 8], kmax[TP_BLOCK / 8];
                for (int64_t k = 0; k < nv; k++) {
                    abs_y[0][k] = V8F_ABS(v8f_load(w + i + 8 * k + back));
                    for (int64_t p = 0; p < nph; p++)
                        abs_y[p + 1][k] = V8F_ABS(acc[p][k]);
                }
                /* near a file edge, interpolated points outside [efirst, elast] count as 0 */
                const int64_t g0 = origin + base + i * factor;
                if (g0 < efirst || g0 + 8 * nv * factor - 1 > elast)
                    for (int64_t k = 0; k < nv; k++)
                        for (int l = 0; l < 8; l++)
                            for (int64_t p = 1; p < factor; p++) {
                                const int64_t g = g0 + (8 * k + l) * factor + p;
                                if (g < efirst || g > elast)
                                    abs_y[p][k][l] = 0.0f;
                            }
                for (int64_t k = 0; k < nv; k++) {
                    kmax[k] = abs_y[0][k];
                    for (int64_t p = 0; p < nph; p++)
                        kmax[k] = V8F_MAX(abs_y[p + 1][k], kmax[k]);
                }
                v8f bmv = kmax[0];
                for (int64_t k = 1; k < nv; k++)
                    bmv = V8F_MAX(kmax[k], bmv);
                mv = V8F_MAX(bmv, mv);
                const v8i hit = (v8i)(bmv > ceil_v);
                int any = 0;
                for (int l = 0; l < 8; l++)
                    any |= hit[l];
                if (!any) {
                    run = 0;
                    i += 8 * nv;
                    continue;
                }
                for (int64_t k = 0; k < nv; k++) {
                    v8u word = {0, 0, 0, 0, 0, 0, 0, 0};
                    for (int64_t p = 0; p < factor; p++)
                        word |= (v8u)(abs_y[p][k] > ceil_v) & bit[p];
                    uint32_t above = 0; /* the 8 * factor points of these 8 positions */
                    for (int l = 0; l < 8; l++)
                        above |= word[l];
                    uint32_t rising = above & ~((above << 1) | run);
                    *overs += __builtin_popcount(rising);
                    for (; rising && nstarts[c] < cap; rising &= rising - 1)
                        starts[c * cap + nstarts[c]++] =
                            base + (i + 8 * k) * factor + __builtin_ctz(rising);
                    run = (above >> (nbits - 1)) & 1u;
                }
                i += 8 * nv;
            }
            for (; i < npos; i++) { /* positions after the last whole vector */
                for (int64_t p = 0; p < factor; p++) {
                    const int64_t g = origin + base + i * factor + p;
                    const float a = p == 0 ? fabsf(w[i + back])
                                    : (g < efirst || g > elast)
                                        ? 0.0f
                                        : fabsf(tp_one(w + i, taps + (p - 1) * ntaps, ntaps));
                    m = a > m ? a : m;
                    const uint32_t above = a > ceiling_f;
                    if (above && !run) {
                        ++*overs;
                        if (nstarts[c] < cap)
                            starts[c * cap + nstarts[c]++] = base + i * factor + p;
                    }
                    run = above;
                }
            }
            const float vm = v8f_hmax(&mv);
            m = vm > m ? vm : m;
            in_run[c] = (uint8_t)run;
            top[j * ch + c] = m;
            if (fine_taps == NULL) {
                if (m > best[c])
                    best[c] = m;
            } else if (m > 0.0f && (double)m * refine_bound > best[c]) {
                /* the refinement, here in chunk order: the chunk's whole grid (the bits of
                 * dc_tp_grid, rows_before positions either side of the centres) */
                const int64_t history = iref[0], fine_steps = iref[1], ncand = iref[2];
                const int64_t before = iref[3], lo = before * factor;
                if (!keeping) {
                    tp_grid_impl(win + lead - before - back, npos + 2 * before, taps, factor,
                                 ntaps, back, grid);
                } else {
                    float *g = grid + lo; /* the centres */
                    tp_grid_impl(win + lead - before - back, before, taps, factor, ntaps, back,
                                 grid);
                    tp_grid_impl(w + npos, before, taps, factor, ntaps, back,
                                 g + npos * factor);
                    const int64_t nvec = npos / 8;
                    for (int64_t v = 0; v < nvec;) {
                        int64_t e = v;
                        if (have[v]) {
                            for (; e < nvec && have[e]; e++)
                                for (int64_t t = 8 * e; t < 8 * e + 8; t++) {
                                    g[t * factor] = w[t + back];
                                    for (int64_t p = 0; p < nph; p++)
                                        g[t * factor + p + 1] = keep[p * npos + t];
                                }
                        } else {
                            for (; e < nvec && !have[e]; e++)
                                ;
                            tp_grid_impl(w + 8 * v, 8 * (e - v), taps, factor, ntaps, back,
                                         g + 8 * v * factor);
                        }
                        v = e;
                    }
                    if (8 * nvec < npos)
                        tp_grid_impl(w + 8 * nvec, npos - 8 * nvec, taps, factor, ntaps, back,
                                     g + 8 * nvec * factor);
                }
                double state[2] = {best[c], best_inner[c]};
                tp_refine_impl(win, grid, lo, lo + npos * factor, factor, origin + base - lo,
                               efirst, elast, fine_taps, ntaps, history, fine_steps, ncand,
                               dref[0], dref[1], (double)m, refine_bound, dref[2], dref[3],
                               dref[4], state, &best_index[c]);
                best[c] = state[0];
                best_inner[c] = state[1];
                iref[4]++; /* chunk-channels refined */
            }
        }
    }
    return computed;
}


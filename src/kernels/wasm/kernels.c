// defines: gemm_f32 (strided, any transpose), erf, the fused training kernels, and the
// job runner that cuts each of them into tasks for several threads (job_run, pool_run,
// pool_helper)
//
// Fast paths for the tfjs wasm backend, compiled to WebAssembly SIMD by build.sh.
// The module IMPORTS a linear memory: the tfjs backend's own heap, or (when that heap is
// not shared and several threads are wanted) the kernel pool's shared memory, which the
// TypeScript side copies operands into (src/kernels/threads.ts). Every pointer below is
// a byte address inside that memory. Nothing here owns memory: there are no globals, no
// data segments, and no address-taken locals, so the module needs no stack of its own
// in that shared memory (build.sh checks that the linked module has no data section).
//
// Why a GEMM of our own: stock tfjs 4.22 sends every transposed or batched
// BatchMatMul to a scalar loop (1-2 GFLOP/s measured here); every matMul
// gradient is transposed and attention is batched.
//
// Four builds of this one file (build.sh): with or without shared memory (threads), and
// with or without relaxed SIMD, whose f32x4.relaxed_madd the GEMM micro-kernel uses for
// its multiply-adds (a fused multiply-add where the hardware has one).

#include <wasm_simd128.h>

typedef __SIZE_TYPE__ size_t;

// acc + a·b, four lanes: one relaxed (possibly fused) multiply-add where the build has
// relaxed SIMD, else a multiply and an add, each rounded
#ifdef __wasm_relaxed_simd__
#define MADD(acc, a, b) wasm_f32x4_relaxed_madd(a, b, acc)
#else
#define MADD(acc, a, b) wasm_f32x4_add(acc, wasm_f32x4_mul(a, b))
#endif

// ---------------------------------------------------------------------------
// GEMM: C[M,N] (+)= A[M,K] · B[K,N]
//
// A(i,k) = A[i*rsA + k*csA], B(k,j) = B[k*rsB + j*csB]: a transposed operand is
// just swapped strides, handled while packing. C is row-major with row stride ldc.
//
// The blocking is the usual Goto/BLIS layout:
//   1. for each NC-column block of B and KC-deep slice, pack B into NR-wide panels
//   2. for each MC-row block of A, pack A into MR-tall panels (k-major)
//   3. a register-blocked MR×NR micro-kernel (6×8: 12 f32x4 accumulators, which
//      with two B vectors and one broadcast fits x86-64's 16 vector registers)
//      runs over every panel pair; the first KC slice stores, later ones add.
// ---------------------------------------------------------------------------

#define MR 6
#define NR 8
#define KC 256
#define MC 72   // multiple of MR; MC*KC floats (72 KiB) stay in L2
#define NC 2048 // multiple of NR

// Scratch floats the caller must provide (16-byte aligned): packed A, packed B and
// one MR×NR edge tile.
size_t gemm_workspace_floats(void) { return MC * KC + KC * NC + MR * NR; }

static void pack_a(int mc, int kc, const float *a, int rs, int cs, float *dst) {
  for (int i0 = 0; i0 < mc; i0 += MR) {
    int mr = mc - i0 < MR ? mc - i0 : MR;
    const float *src = a + (size_t)i0 * rs;
    if (mr == MR) {
      for (int k = 0; k < kc; k++) {
        const float *s = src + (size_t)k * cs;
        dst[0] = s[0];
        dst[1] = s[rs];
        dst[2] = s[2 * rs];
        dst[3] = s[3 * rs];
        dst[4] = s[4 * rs];
        dst[5] = s[5 * rs];
        dst += MR;
      }
    } else {
      for (int k = 0; k < kc; k++) {
        const float *s = src + (size_t)k * cs;
        for (int i = 0; i < MR; i++) dst[i] = i < mr ? s[(size_t)i * rs] : 0.0f;
        dst += MR;
      }
    }
  }
}

static void pack_b(int kc, int nc, const float *b, int rs, int cs, float *dst) {
  for (int j0 = 0; j0 < nc; j0 += NR) {
    int nr = nc - j0 < NR ? nc - j0 : NR;
    const float *src = b + (size_t)j0 * cs;
    if (nr == NR && cs == 1) {
      for (int k = 0; k < kc; k++) {
        const float *s = src + (size_t)k * rs;
        wasm_v128_store(dst, wasm_v128_load(s));
        wasm_v128_store(dst + 4, wasm_v128_load(s + 4));
        dst += NR;
      }
    } else if (nr == NR) {
      for (int k = 0; k < kc; k++) {
        const float *s = src + (size_t)k * rs;
        for (int j = 0; j < NR; j++) dst[j] = s[(size_t)j * cs];
        dst += NR;
      }
    } else {
      for (int k = 0; k < kc; k++) {
        const float *s = src + (size_t)k * rs;
        for (int j = 0; j < NR; j++) dst[j] = j < nr ? s[(size_t)j * cs] : 0.0f;
        dst += NR;
      }
    }
  }
}

// c[0..MR)[0..NR) (+)= a-panel · b-panel over kc steps. `c` rows are ldc apart.
static void micro_6x8(int kc, const float *a, const float *b, float *c, int ldc,
                      int accumulate) {
  v128_t c00 = wasm_f32x4_splat(0), c01 = c00, c10 = c00, c11 = c00, c20 = c00,
         c21 = c00, c30 = c00, c31 = c00, c40 = c00, c41 = c00, c50 = c00,
         c51 = c00;
  for (int k = 0; k < kc; k++) {
    v128_t b0 = wasm_v128_load(b), b1 = wasm_v128_load(b + 4);
    v128_t a0 = wasm_v128_load32_splat(a);
    c00 = MADD(c00, a0, b0);
    c01 = MADD(c01, a0, b1);
    v128_t a1 = wasm_v128_load32_splat(a + 1);
    c10 = MADD(c10, a1, b0);
    c11 = MADD(c11, a1, b1);
    v128_t a2 = wasm_v128_load32_splat(a + 2);
    c20 = MADD(c20, a2, b0);
    c21 = MADD(c21, a2, b1);
    v128_t a3 = wasm_v128_load32_splat(a + 3);
    c30 = MADD(c30, a3, b0);
    c31 = MADD(c31, a3, b1);
    v128_t a4 = wasm_v128_load32_splat(a + 4);
    c40 = MADD(c40, a4, b0);
    c41 = MADD(c41, a4, b1);
    v128_t a5 = wasm_v128_load32_splat(a + 5);
    c50 = MADD(c50, a5, b0);
    c51 = MADD(c51, a5, b1);
    a += MR;
    b += NR;
  }
#define STORE_ROW(r, v0, v1)                                                   \
  do {                                                                         \
    float *p = c + (size_t)(r) * ldc;                                          \
    if (accumulate) {                                                          \
      v0 = wasm_f32x4_add(v0, wasm_v128_load(p));                              \
      v1 = wasm_f32x4_add(v1, wasm_v128_load(p + 4));                          \
    }                                                                          \
    wasm_v128_store(p, v0);                                                    \
    wasm_v128_store(p + 4, v1);                                                \
  } while (0)
  STORE_ROW(0, c00, c01);
  STORE_ROW(1, c10, c11);
  STORE_ROW(2, c20, c21);
  STORE_ROW(3, c30, c31);
  STORE_ROW(4, c40, c41);
  STORE_ROW(5, c50, c51);
#undef STORE_ROW
}

static void gemm_f32(int M, int N, int K, const float *A, int rsA, int csA,
                     const float *B, int rsB, int csB, float *C, int ldc, float *ws) {
  float *ap = ws;
  float *bp = ws + MC * KC;
  float *edge = bp + KC * NC;
  if (K == 0) {
    for (int i = 0; i < M; i++)
      for (int j = 0; j < N; j++) C[(size_t)i * ldc + j] = 0.0f;
    return;
  }
  for (int jc = 0; jc < N; jc += NC) {
    int nc = N - jc < NC ? N - jc : NC;
    for (int pc = 0; pc < K; pc += KC) {
      int kc = K - pc < KC ? K - pc : KC;
      int accumulate = pc > 0;
      pack_b(kc, nc, B + (size_t)pc * rsB + (size_t)jc * csB, rsB, csB, bp);
      for (int ic = 0; ic < M; ic += MC) {
        int mc = M - ic < MC ? M - ic : MC;
        pack_a(mc, kc, A + (size_t)ic * rsA + (size_t)pc * csA, rsA, csA, ap);
        for (int jr = 0; jr < nc; jr += NR) {
          int nr = nc - jr < NR ? nc - jr : NR;
          const float *bpanel = bp + (size_t)jr * kc;
          for (int ir = 0; ir < mc; ir += MR) {
            int mr = mc - ir < MR ? mc - ir : MR;
            const float *apanel = ap + (size_t)ir * kc;
            float *c = C + (size_t)(ic + ir) * ldc + jc + jr;
            if (mr == MR && nr == NR) {
              micro_6x8(kc, apanel, bpanel, c, ldc, accumulate);
            } else {
              // partial tile: compute the full tile aside, copy the valid part
              micro_6x8(kc, apanel, bpanel, edge, NR, 0);
              for (int i = 0; i < mr; i++)
                for (int j = 0; j < nr; j++) {
                  float v = edge[i * NR + j];
                  c[(size_t)i * ldc + j] =
                      accumulate ? c[(size_t)i * ldc + j] + v : v;
                }
            }
          }
        }
      }
    }
  }
}

// ---------------------------------------------------------------------------
// erf, exact-GELU's building block, 4 lanes at a time.
//
//   1. |x| <= 1:  erf(x) = x + x·P(x²)
//   2. |x| >  1:  erf(x) = 1 − exp(−x²)·R(t),  t = 1 / (1 + |x|/2)
//   sign restored at the end; NaN propagates, ±Inf gives ±1.
// P and R are our own weighted least-squares fits (fit-erf.py, float64 reference
// Python math.erf / math.erfc); measured max abs error vs float64 is in the tests.
// ---------------------------------------------------------------------------

// exp(x) for x <= 0, |rel err| ~1e-7: x = n·ln2 + r, |r| <= ln2/2, Taylor to r^7
// (remainder r^8/8! < 6e-9), 2^n built in the exponent bits. Inputs below −87 are
// clamped (the result, ~1.6e-38, only ever multiplies something < 1 here).
static v128_t exp_neg(v128_t x) {
  x = wasm_f32x4_max(x, wasm_f32x4_splat(-87.0f));
  v128_t n = wasm_f32x4_nearest(wasm_f32x4_mul(x, wasm_f32x4_splat(1.44269504f)));
  // Cody–Waite split of ln 2 so n·ln2 is subtracted without rounding loss
  v128_t r = wasm_f32x4_sub(x, wasm_f32x4_mul(n, wasm_f32x4_splat(0.693359375f)));
  r = wasm_f32x4_sub(r, wasm_f32x4_mul(n, wasm_f32x4_splat(-2.12194440e-4f)));
  v128_t p = wasm_f32x4_splat(1.0f / 5040.0f);
  p = wasm_f32x4_add(wasm_f32x4_mul(p, r), wasm_f32x4_splat(1.0f / 720.0f));
  p = wasm_f32x4_add(wasm_f32x4_mul(p, r), wasm_f32x4_splat(1.0f / 120.0f));
  p = wasm_f32x4_add(wasm_f32x4_mul(p, r), wasm_f32x4_splat(1.0f / 24.0f));
  p = wasm_f32x4_add(wasm_f32x4_mul(p, r), wasm_f32x4_splat(1.0f / 6.0f));
  p = wasm_f32x4_add(wasm_f32x4_mul(p, r), wasm_f32x4_splat(0.5f));
  p = wasm_f32x4_add(wasm_f32x4_mul(p, r), wasm_f32x4_splat(1.0f));
  p = wasm_f32x4_add(wasm_f32x4_mul(p, r), wasm_f32x4_splat(1.0f));
  v128_t e = wasm_i32x4_shl(
      wasm_i32x4_add(wasm_i32x4_trunc_sat_f32x4(n), wasm_i32x4_splat(127)), 23);
  return wasm_f32x4_mul(p, e);
}

#define HORNER(acc, v, c) acc = wasm_f32x4_add(wasm_f32x4_mul(acc, v), wasm_f32x4_splat(c))

static v128_t erf4(v128_t x) {
  v128_t ax = wasm_f32x4_abs(x);
  v128_t u = wasm_f32x4_mul(x, x);
  // 1. small |x|
  v128_t p = wasm_f32x4_splat(7.647131861e-05f);
  HORNER(p, u, -7.942361408e-04f);
  HORNER(p, u, 5.179750267e-03f);
  HORNER(p, u, -2.684859186e-02f);
  HORNER(p, u, 1.128343046e-01f);
  HORNER(p, u, -3.761260509e-01f);
  HORNER(p, u, 1.283791512e-01f);
  v128_t small = wasm_f32x4_add(ax, wasm_f32x4_mul(ax, p));
  // 2. large |x|
  v128_t t = wasm_f32x4_div(
      wasm_f32x4_splat(1.0f),
      wasm_f32x4_add(wasm_f32x4_splat(1.0f), wasm_f32x4_mul(ax, wasm_f32x4_splat(0.5f))));
  v128_t r = wasm_f32x4_splat(-2.913844213e-02f);
  HORNER(r, t, 2.488216311e-01f);
  HORNER(r, t, -7.213214040e-01f);
  HORNER(r, t, 8.376445174e-01f);
  HORNER(r, t, -2.905381024e-01f);
  HORNER(r, t, 4.287920892e-01f);
  HORNER(r, t, 2.378938645e-01f);
  HORNER(r, t, 2.882429659e-01f);
  HORNER(r, t, -3.754891222e-04f);
  v128_t big = wasm_f32x4_sub(wasm_f32x4_splat(1.0f),
                              wasm_f32x4_mul(exp_neg(wasm_f32x4_neg(u)), r));
  // |x| = Inf makes u = Inf and t = 0: exp_neg(−Inf) is tiny, so big = 1.
  v128_t y = wasm_v128_bitselect(small, big, wasm_f32x4_le(ax, wasm_f32x4_splat(1.0f)));
  // restore the sign bit of x (NaN inputs already gave NaN)
  v128_t sign = wasm_v128_and(x, wasm_i32x4_splat((int)0x80000000));
  return wasm_v128_or(y, sign);
}

static void erf_range(const float *x, float *y, int n) {
  int i = 0;
  for (; i + 4 <= n; i += 4) wasm_v128_store(y + i, erf4(wasm_v128_load(x + i)));
  if (i < n) {
    // tail of 1-3 values: lanes past n are computed on zeros and dropped
    int m = n - i;
    v128_t v = wasm_f32x4_make(x[i], m > 1 ? x[i + 1] : 0.0f, m > 2 ? x[i + 2] : 0.0f, 0.0f);
    v128_t r = erf4(v);
    y[i] = wasm_f32x4_extract_lane(r, 0);
    if (m > 1) y[i + 1] = wasm_f32x4_extract_lane(r, 1);
    if (m > 2) y[i + 2] = wasm_f32x4_extract_lane(r, 2);
  }
}

// ---------------------------------------------------------------------------
// Reductions and row moves the training step repeats: a Sum over leading axes
// (every bias gradient), the rows of an embedding lookup and of its gradient.
// ---------------------------------------------------------------------------

// y[j] = Σ_{i<m} x[i·ld + j] for j < n: the columns of an [m, ld] matrix (or n of them)
// summed over its rows, in row order (the order tfjs's cpu backend adds in). 32 columns
// at a time in 8 accumulators, so x is read once and y written once. Each column's sum
// is the same whichever block of columns it is computed in.
static void sum_cols(const float *x, float *y, int m, int n, int ld) {
  int j = 0;
  for (; j + 32 <= n; j += 32) {
    v128_t a0 = wasm_f32x4_splat(0), a1 = a0, a2 = a0, a3 = a0, a4 = a0, a5 = a0,
           a6 = a0, a7 = a0;
    const float *p = x + j;
    for (int i = 0; i < m; i++, p += ld) {
      a0 = wasm_f32x4_add(a0, wasm_v128_load(p));
      a1 = wasm_f32x4_add(a1, wasm_v128_load(p + 4));
      a2 = wasm_f32x4_add(a2, wasm_v128_load(p + 8));
      a3 = wasm_f32x4_add(a3, wasm_v128_load(p + 12));
      a4 = wasm_f32x4_add(a4, wasm_v128_load(p + 16));
      a5 = wasm_f32x4_add(a5, wasm_v128_load(p + 20));
      a6 = wasm_f32x4_add(a6, wasm_v128_load(p + 24));
      a7 = wasm_f32x4_add(a7, wasm_v128_load(p + 28));
    }
    wasm_v128_store(y + j, a0);
    wasm_v128_store(y + j + 4, a1);
    wasm_v128_store(y + j + 8, a2);
    wasm_v128_store(y + j + 12, a3);
    wasm_v128_store(y + j + 16, a4);
    wasm_v128_store(y + j + 20, a5);
    wasm_v128_store(y + j + 24, a6);
    wasm_v128_store(y + j + 28, a7);
  }
  for (; j + 4 <= n; j += 4) {
    v128_t a = wasm_f32x4_splat(0);
    const float *p = x + j;
    for (int i = 0; i < m; i++, p += ld) a = wasm_f32x4_add(a, wasm_v128_load(p));
    wasm_v128_store(y + j, a);
  }
  for (; j < n; j++) {
    float a = 0.0f;
    const float *p = x + j;
    for (int i = 0; i < m; i++, p += ld) a += *p;
    y[j] = a;
  }
}

// out[s·inner ..] = Σ over p with ids[p] = s of x[p·inner ..], for the segments s in
// [s0, s1) only (a task's share); those rows of out are zeroed first and ids outside
// [0, segments) are skipped (TensorFlow's UnsortedSegmentSum). Each segment adds its
// rows in the order of p, whichever range it falls in.
static void segment_sum_range(const float *x, const int *ids, float *out, int count,
                              int inner, int s0, int s1) {
  float *base = out + (size_t)s0 * inner;
  size_t total = (size_t)(s1 - s0) * inner;
  size_t z = 0;
  for (; z + 4 <= total; z += 4) wasm_v128_store(base + z, wasm_f32x4_splat(0));
  for (; z < total; z++) base[z] = 0.0f;
  for (int p = 0; p < count; p++) {
    int s = ids[p];
    if (s < s0 || s >= s1) continue;
    const float *src = x + (size_t)p * inner;
    float *dst = out + (size_t)s * inner;
    int i = 0;
    for (; i + 4 <= inner; i += 4)
      wasm_v128_store(dst + i, wasm_f32x4_add(wasm_v128_load(dst + i), wasm_v128_load(src + i)));
    for (; i < inner; i++) dst[i] += src[i];
  }
}

// ---------------------------------------------------------------------------
// Fused multi-head attention (forward and backward), per head h = (b, n):
//
//   S = scale · Q_h K_hᵀ + bias_b     [T, T]   bias_b: 0 or −10000 per key
//   P = softmax_rows(S)               [T, T]   kept for the backward when asked
//   Pd = P ⊙ M / keep                 [T, T]   M: the dropout mask (below)
//   C_h = Pd V_h                      [T, D]
//
// Q, K, V and C stay in the Linear layers' [B·T, H] layout: head h of row t is
// the D floats at (b·T + t)·H + n·D, so the head split and merge are strides in
// the GEMM calls, never transposes.
//
// Dropout mask: element e = ((b·N + n)·T + i)·T + j of the [B, N, T, T] tensor is
// kept iff hash(e·0x9E3779B9 + mix) >= threshold (unsigned), hash = lowbias32
// (Chris Wellons' hash-prospector; constants from memory — the TypeScript twin in
// src/kernels/dropout-mask.ts must and is tested to agree bit for bit). The mask
// is a pure function of (mix, e), so the backward recomputes it instead of
// storing it, and runs repeat exactly.
// ---------------------------------------------------------------------------

#define GOLDEN 0x9E3779B9u

static inline v128_t hash4(v128_t x) {
  x = wasm_v128_xor(x, wasm_u32x4_shr(x, 16));
  x = wasm_i32x4_mul(x, wasm_i32x4_splat(0x7feb352d));
  x = wasm_v128_xor(x, wasm_u32x4_shr(x, 15));
  x = wasm_i32x4_mul(x, wasm_i32x4_splat((int)0x846ca68bu));
  x = wasm_v128_xor(x, wasm_u32x4_shr(x, 16));
  return x;
}

// lanes of `v` where the mask keeps element e0 + lane, times scale; others 0
static inline v128_t drop4(v128_t v, unsigned e0, unsigned mix, unsigned threshold,
                           float scale) {
  v128_t e = wasm_i32x4_add(wasm_i32x4_splat((int)e0), wasm_i32x4_make(0, 1, 2, 3));
  v128_t h = hash4(wasm_i32x4_add(wasm_i32x4_mul(e, wasm_i32x4_splat((int)GOLDEN)),
                                  wasm_i32x4_splat((int)mix)));
  v128_t keep = wasm_u32x4_ge(h, wasm_i32x4_splat((int)threshold));
  return wasm_v128_and(wasm_f32x4_mul(v, wasm_f32x4_splat(scale)), keep);
}

// dst[j] = src[j]·mask(e0 + j)·scale for j < n (src may equal dst)
static void drop_row(const float *src, float *dst, int n, unsigned e0, unsigned mix,
                     unsigned threshold, float scale) {
  int j = 0;
  for (; j + 4 <= n; j += 4)
    wasm_v128_store(dst + j, drop4(wasm_v128_load(src + j), e0 + j, mix, threshold, scale));
  for (; j < n; j++)
    dst[j] = wasm_f32x4_extract_lane(
        drop4(wasm_f32x4_splat(src[j]), e0 + j, mix, threshold, scale), 0);
}

static inline float hmax4(v128_t v) {
  float a = wasm_f32x4_extract_lane(v, 0), b = wasm_f32x4_extract_lane(v, 1);
  float c = wasm_f32x4_extract_lane(v, 2), d = wasm_f32x4_extract_lane(v, 3);
  a = a > b ? a : b;
  c = c > d ? c : d;
  return a > c ? a : c;
}

static inline float hsum4(v128_t v) {
  return (wasm_f32x4_extract_lane(v, 0) + wasm_f32x4_extract_lane(v, 1)) +
         (wasm_f32x4_extract_lane(v, 2) + wasm_f32x4_extract_lane(v, 3));
}

// row = softmax(scale·row + bias) over n entries, in place:
//   1. x = scale·s + bias and its maximum  2. e = exp(x − max), Σe  3. e / Σe
static void softmax_row(float *row, const float *bias, int n, float scale) {
  v128_t vs = wasm_f32x4_splat(scale);
  v128_t vmax = wasm_f32x4_splat(-__builtin_inff());
  float smax = -__builtin_inff();
  int j = 0;
  for (; j + 4 <= n; j += 4) {
    v128_t x = wasm_f32x4_add(wasm_f32x4_mul(wasm_v128_load(row + j), vs), wasm_v128_load(bias + j));
    wasm_v128_store(row + j, x);
    vmax = wasm_f32x4_max(vmax, x);
  }
  for (; j < n; j++) {
    float x = row[j] * scale + bias[j];
    row[j] = x;
    smax = x > smax ? x : smax;
  }
  float m = hmax4(vmax);
  m = m > smax ? m : smax;
  v128_t vm = wasm_f32x4_splat(m);
  v128_t vsum = wasm_f32x4_splat(0);
  float ssum = 0.0f;
  for (j = 0; j + 4 <= n; j += 4) {
    v128_t e = exp_neg(wasm_f32x4_sub(wasm_v128_load(row + j), vm));
    wasm_v128_store(row + j, e);
    vsum = wasm_f32x4_add(vsum, e);
  }
  for (; j < n; j++) {
    float e = wasm_f32x4_extract_lane(exp_neg(wasm_f32x4_splat(row[j] - m)), 0);
    row[j] = e;
    ssum += e;
  }
  v128_t inv = wasm_f32x4_splat(1.0f / (hsum4(vsum) + ssum));
  for (j = 0; j + 4 <= n; j += 4) wasm_v128_store(row + j, wasm_f32x4_mul(wasm_v128_load(row + j), inv));
  for (; j < n; j++) row[j] *= wasm_f32x4_extract_lane(inv, 0);
}

// Forward of head h = b·N + n. q, k, v, ctx: [B·T, H] with H = N·D; bias: [B, T];
// probs: [B·N, T, T] receives P when not null (the backward needs it); scratch: 2·T·T
// floats of the calling thread; ws: its GEMM workspace. dropout = 0 skips the mask.
// Heads write disjoint parts of ctx and probs, so they may run on any thread.
static void attention_forward_head(const float *q, const float *k, const float *v,
                                   const float *bias, float *ctx, float *probs,
                                   float *scratch, int h, int T, int N, int D, float scale,
                                   int dropout, unsigned mix, unsigned threshold,
                                   float keep_scale, float *ws) {
  int H = N * D;
  size_t tt = (size_t)T * T;
  size_t head = (size_t)h;
  int b = h / N, n = h % N;
  size_t off = (size_t)b * T * H + (size_t)n * D;
  float *p = probs ? probs + head * tt : scratch;
  // 1. raw scores Q_h K_hᵀ (K_hᵀ by strides)
  gemm_f32(T, T, D, q + off, H, 1, k + off, 1, H, p, T, ws);
  // 2. scale, bias, softmax per query row
  for (int i = 0; i < T; i++) softmax_row(p + (size_t)i * T, bias + (size_t)b * T, T, scale);
  // 3. dropout into the second scratch (P itself is kept unmasked)
  const float *a = p;
  if (dropout) {
    float *pd = scratch + tt;
    for (int i = 0; i < T; i++)
      drop_row(p + (size_t)i * T, pd + (size_t)i * T, T, (unsigned)((head * T + i) * T),
               mix, threshold, keep_scale);
    a = pd;
  }
  // 4. C_h = Pd V_h, written into head n's columns of ctx
  gemm_f32(T, D, T, a, T, 1, v + off, H, 1, ctx + off, H, ws);
}

// Backward, from P (the forward's probs) and dC = dctx, per head:
//   1. dPd = dC V_hᵀ                       (inverts "C_h = Pd V_h")
//   2. dV_h = Pdᵀ dC, Pd rebuilt from P and the recomputed mask
//   3. dP = dPd ⊙ M / keep                 (inverts "Pd = P ⊙ M / keep")
//   4. dS = P ⊙ (dP − rowsum(dP ⊙ P))      (inverts the softmax)
//   5. dQ_h = scale · dS K_h, dK_h = scale · dSᵀ Q_h   (inverts "S = scale·Q Kᵀ + bias")
// Head h = b·N + n; scratch: 2·T·T floats of the calling thread. dq, dk, dv: [B·T, H],
// the head's columns fully overwritten (heads write disjoint parts).
static void attention_backward_head(const float *q, const float *k, const float *v,
                                    const float *probs, const float *dctx, float *dq,
                                    float *dk, float *dv, float *scratch, int h, int T,
                                    int N, int D, float scale, int dropout, unsigned mix,
                                    unsigned threshold, float keep_scale, float *ws) {
  int H = N * D;
  size_t tt = (size_t)T * T;
  float *g = scratch;
  float *pd = scratch + tt;
  v128_t vs = wasm_f32x4_splat(scale);
  size_t head = (size_t)h;
  int b = h / N, n = h % N;
  size_t off = (size_t)b * T * H + (size_t)n * D;
  const float *p = probs + head * tt;
  // 1.
  gemm_f32(T, T, D, dctx + off, H, 1, v + off, 1, H, g, T, ws);
  // 2.
  const float *a = p;
  if (dropout) {
    for (int i = 0; i < T; i++)
      drop_row(p + (size_t)i * T, pd + (size_t)i * T, T, (unsigned)((head * T + i) * T),
               mix, threshold, keep_scale);
    a = pd;
  }
  gemm_f32(T, D, T, a, 1, T, dctx + off, H, 1, dv + off, H, ws);
  // 3–4. row by row, folding in the scale of step 5
  for (int i = 0; i < T; i++) {
    float *gr = g + (size_t)i * T;
    const float *pr = p + (size_t)i * T;
    if (dropout)
      drop_row(gr, gr, T, (unsigned)((head * T + i) * T), mix, threshold, keep_scale);
    v128_t vr = wasm_f32x4_splat(0);
    float sr = 0.0f;
    int j = 0;
    for (; j + 4 <= T; j += 4)
      vr = wasm_f32x4_add(vr, wasm_f32x4_mul(wasm_v128_load(gr + j), wasm_v128_load(pr + j)));
    for (; j < T; j++) sr += gr[j] * pr[j];
    v128_t r = wasm_f32x4_splat(hsum4(vr) + sr);
    for (j = 0; j + 4 <= T; j += 4)
      wasm_v128_store(gr + j, wasm_f32x4_mul(wasm_f32x4_mul(wasm_v128_load(pr + j),
                                                            wasm_f32x4_sub(wasm_v128_load(gr + j), r)),
                                             vs));
    for (; j < T; j++) gr[j] = pr[j] * (gr[j] - wasm_f32x4_extract_lane(r, 0)) * scale;
  }
  // 5.
  gemm_f32(T, D, T, g, T, 1, k + off, H, 1, dq + off, H, ws);
  gemm_f32(T, D, T, g, 1, T, q + off, H, 1, dk + off, H, ws);
}

// ---------------------------------------------------------------------------
// Fused bias + exact GELU (the feed-forward's first Linear), rows of width n:
//   forward   u = x + b,  y = ½·u·(1 + erf(u/√2))
//   backward  dx = dy · (½·(1 + erf(u/√2)) + u·exp(−u²/2)/√(2π))   (d/du of the
//             forward line), db = Σ_rows dx — u is rebuilt from x and b.
// ---------------------------------------------------------------------------

#define SQRT_HALF 0.70710678118654752f
#define INV_SQRT_2PI 0.39894228040143268f

static inline v128_t gelu4(v128_t u) {
  v128_t e = erf4(wasm_f32x4_mul(u, wasm_f32x4_splat(SQRT_HALF)));
  return wasm_f32x4_mul(wasm_f32x4_mul(u, wasm_f32x4_splat(0.5f)),
                        wasm_f32x4_add(wasm_f32x4_splat(1.0f), e));
}

static inline v128_t gelu_grad4(v128_t u) {
  v128_t e = erf4(wasm_f32x4_mul(u, wasm_f32x4_splat(SQRT_HALF)));
  v128_t cdf = wasm_f32x4_mul(wasm_f32x4_splat(0.5f), wasm_f32x4_add(wasm_f32x4_splat(1.0f), e));
  v128_t pdf = wasm_f32x4_mul(exp_neg(wasm_f32x4_mul(wasm_f32x4_mul(u, u), wasm_f32x4_splat(-0.5f))),
                              wasm_f32x4_splat(INV_SQRT_2PI));
  return wasm_f32x4_add(cdf, wasm_f32x4_mul(u, pdf));
}

// lanes [j, j + m) of a row, m < 4, as a vector (zeros past m)
static inline v128_t load_tail(const float *p, int m) {
  return wasm_f32x4_make(p[0], m > 1 ? p[1] : 0.0f, m > 2 ? p[2] : 0.0f, 0.0f);
}

static inline void store_tail(float *p, v128_t v, int m) {
  p[0] = wasm_f32x4_extract_lane(v, 0);
  if (m > 1) p[1] = wasm_f32x4_extract_lane(v, 1);
  if (m > 2) p[2] = wasm_f32x4_extract_lane(v, 2);
}

static void bias_gelu_rows(const float *x, const float *b, float *y, int rows, int n) {
  for (int r = 0; r < rows; r++) {
    const float *xr = x + (size_t)r * n;
    float *yr = y + (size_t)r * n;
    int j = 0;
    for (; j + 4 <= n; j += 4)
      wasm_v128_store(yr + j, gelu4(wasm_f32x4_add(wasm_v128_load(xr + j), wasm_v128_load(b + j))));
    if (j < n)
      store_tail(yr + j, gelu4(wasm_f32x4_add(load_tail(xr + j, n - j), load_tail(b + j, n - j))), n - j);
  }
}

// dx: [rows, n]; db, the column sums of dx, is a second job (sum_cols by columns)
static void bias_gelu_dx_rows(const float *x, const float *b, const float *dy, float *dx,
                              int rows, int n) {
  for (int r = 0; r < rows; r++) {
    const float *xr = x + (size_t)r * n;
    const float *dyr = dy + (size_t)r * n;
    float *dxr = dx + (size_t)r * n;
    int j = 0;
    for (; j + 4 <= n; j += 4) {
      v128_t u = wasm_f32x4_add(wasm_v128_load(xr + j), wasm_v128_load(b + j));
      wasm_v128_store(dxr + j, wasm_f32x4_mul(wasm_v128_load(dyr + j), gelu_grad4(u)));
    }
    if (j < n) {
      int m = n - j;
      v128_t u = wasm_f32x4_add(load_tail(xr + j, m), load_tail(b + j, m));
      store_tail(dxr + j, wasm_f32x4_mul(load_tail(dyr + j, m), gelu_grad4(u)), m);
    }
  }
}

// ---------------------------------------------------------------------------
// LayerNorm over rows of width n (Ba et al. 2016; biased variance as PyTorch):
//   forward   μ = mean(x), σ⁻¹ = 1/√(mean((x − μ)²) + eps), x̂ = (x − μ)·σ⁻¹,
//             y = x̂·γ + β; mean and rstd [rows] are kept when not null
//   backward  g = dy·γ,  dx = σ⁻¹·(g − mean(g) − x̂·mean(g·x̂)),
//             dγ = Σ_rows dy·x̂,  dβ = Σ_rows dy     (inverting the forward line)
// ---------------------------------------------------------------------------

static inline float row_sum(const float *p, int n) {
  v128_t acc = wasm_f32x4_splat(0);
  int j = 0;
  for (; j + 4 <= n; j += 4) acc = wasm_f32x4_add(acc, wasm_v128_load(p + j));
  float s = 0.0f;
  for (; j < n; j++) s += p[j];
  return hsum4(acc) + s;
}

static void layer_norm_rows(const float *x, const float *gamma, const float *beta, float *y,
                            float *mean_out, float *rstd_out, int rows, int n, float eps) {
  float inv_n = 1.0f / (float)n;
  for (int r = 0; r < rows; r++) {
    const float *xr = x + (size_t)r * n;
    float *yr = y + (size_t)r * n;
    float mu = row_sum(xr, n) * inv_n;
    v128_t vmu = wasm_f32x4_splat(mu);
    v128_t acc = wasm_f32x4_splat(0);
    float s = 0.0f;
    int j = 0;
    for (; j + 4 <= n; j += 4) {
      v128_t c = wasm_f32x4_sub(wasm_v128_load(xr + j), vmu);
      acc = wasm_f32x4_add(acc, wasm_f32x4_mul(c, c));
    }
    for (; j < n; j++) s += (xr[j] - mu) * (xr[j] - mu);
    float var = (hsum4(acc) + s) * inv_n;
    float rstd = 1.0f / wasm_f32x4_extract_lane(wasm_f32x4_sqrt(wasm_f32x4_splat(var + eps)), 0);
    v128_t vr = wasm_f32x4_splat(rstd);
    for (j = 0; j + 4 <= n; j += 4) {
      v128_t h = wasm_f32x4_mul(wasm_f32x4_sub(wasm_v128_load(xr + j), vmu), vr);
      wasm_v128_store(yr + j, wasm_f32x4_add(wasm_f32x4_mul(h, wasm_v128_load(gamma + j)), wasm_v128_load(beta + j)));
    }
    for (; j < n; j++) yr[j] = (xr[j] - mu) * rstd * gamma[j] + beta[j];
    if (mean_out) mean_out[r] = mu;
    if (rstd_out) rstd_out[r] = rstd;
  }
}

// The backward in two jobs: dx by rows (each row needs only its own sums), then dγ and
// dβ by columns (each column sums over all rows, in row order), so that every output is
// written by one task and its sums keep one order whatever the thread count.
static void layer_norm_dx_rows(const float *x, const float *gamma, const float *mean,
                               const float *rstd, const float *dy, float *dx, int rows,
                               int n) {
  float inv_n = 1.0f / (float)n;
  int j;
  for (int r = 0; r < rows; r++) {
    const float *xr = x + (size_t)r * n;
    const float *dyr = dy + (size_t)r * n;
    float *dxr = dx + (size_t)r * n;
    v128_t vmu = wasm_f32x4_splat(mean[r]);
    v128_t vr = wasm_f32x4_splat(rstd[r]);
    // 1. mean(g) and mean(g·x̂)
    v128_t sg = wasm_f32x4_splat(0), sgh = sg;
    float tg = 0.0f, tgh = 0.0f;
    for (j = 0; j + 4 <= n; j += 4) {
      v128_t h = wasm_f32x4_mul(wasm_f32x4_sub(wasm_v128_load(xr + j), vmu), vr);
      v128_t g = wasm_f32x4_mul(wasm_v128_load(dyr + j), wasm_v128_load(gamma + j));
      sg = wasm_f32x4_add(sg, g);
      sgh = wasm_f32x4_add(sgh, wasm_f32x4_mul(g, h));
    }
    for (; j < n; j++) {
      float h = (xr[j] - mean[r]) * rstd[r];
      float g = dyr[j] * gamma[j];
      tg += g;
      tgh += g * h;
    }
    v128_t mg = wasm_f32x4_splat((hsum4(sg) + tg) * inv_n);
    v128_t mgh = wasm_f32x4_splat((hsum4(sgh) + tgh) * inv_n);
    // 2. dx
    for (j = 0; j + 4 <= n; j += 4) {
      v128_t h = wasm_f32x4_mul(wasm_f32x4_sub(wasm_v128_load(xr + j), vmu), vr);
      v128_t g = wasm_f32x4_mul(wasm_v128_load(dyr + j), wasm_v128_load(gamma + j));
      v128_t t = wasm_f32x4_sub(wasm_f32x4_sub(g, mg), wasm_f32x4_mul(h, mgh));
      wasm_v128_store(dxr + j, wasm_f32x4_mul(t, vr));
    }
    for (; j < n; j++) {
      float h = (xr[j] - mean[r]) * rstd[r];
      float g = dyr[j] * gamma[j];
      dxr[j] = (g - wasm_f32x4_extract_lane(mg, 0) - h * wasm_f32x4_extract_lane(mgh, 0)) * rstd[r];
    }
  }
}

// dγ[j] = Σ_r dy·x̂ and dβ[j] = Σ_r dy for the columns j in [j0, j1), fully overwritten
static void layer_norm_dparams_cols(const float *x, const float *mean, const float *rstd,
                                    const float *dy, float *dgamma, float *dbeta, int rows,
                                    int n, int j0, int j1) {
  int j;
  for (j = j0; j < j1; j++) dgamma[j] = dbeta[j] = 0.0f;
  for (int r = 0; r < rows; r++) {
    const float *xr = x + (size_t)r * n;
    const float *dyr = dy + (size_t)r * n;
    v128_t vmu = wasm_f32x4_splat(mean[r]);
    v128_t vr = wasm_f32x4_splat(rstd[r]);
    for (j = j0; j + 4 <= j1; j += 4) {
      v128_t d = wasm_v128_load(dyr + j);
      v128_t h = wasm_f32x4_mul(wasm_f32x4_sub(wasm_v128_load(xr + j), vmu), vr);
      wasm_v128_store(dgamma + j, wasm_f32x4_add(wasm_v128_load(dgamma + j), wasm_f32x4_mul(d, h)));
      wasm_v128_store(dbeta + j, wasm_f32x4_add(wasm_v128_load(dbeta + j), d));
    }
    for (; j < j1; j++) {
      float h = (xr[j] - mean[r]) * rstd[r];
      dgamma[j] += dyr[j] * h;
      dbeta[j] += dyr[j];
    }
  }
}

// ---------------------------------------------------------------------------
// Inverted dropout of n values with the attention op's counter-based mask
// (element e kept iff hash(e·0x9E3779B9 + mix) >= threshold, kept values scaled):
// the same call on dy is its backward, since the mask is recomputed from the seed.
// ---------------------------------------------------------------------------

// element e0 + j of the whole tensor for j < n: a task's range of it
static void dropout_range(const float *x, float *y, int n, unsigned e0, unsigned mix,
                          unsigned threshold, float scale) {
  drop_row(x, y, n, e0, mix, threshold, scale);
}

// ---------------------------------------------------------------------------
// One AdamW update of n parameters, in torch.optim.AdamW's order and in the same
// float32 operations, one rounding each, as src/train/adamw.ts's tfjs ops:
//   g ← g·gscale;  p ← p·decay;  m ← m·b1 + g·(1 − b1);  v ← v·b2 + (g·(1 − b2))·g
//   p ← p + (m·(−step)) / (√v / c2 + eps)
// Outputs go to new buffers (tfjs tensors are immutable); the caller assigns them.
// ---------------------------------------------------------------------------

static void adamw_range(const float *p, const float *g, const float *m, const float *v,
               float *p_out, float *m_out, float *v_out, int n, float gscale,
               int scaled, float decay, int decayed, float b1, float one_minus_b1,
               float b2, float one_minus_b2, float neg_step, float c2, float eps) {
  v128_t vgs = wasm_f32x4_splat(gscale), vdec = wasm_f32x4_splat(decay);
  v128_t vb1 = wasm_f32x4_splat(b1), v1b1 = wasm_f32x4_splat(one_minus_b1);
  v128_t vb2 = wasm_f32x4_splat(b2), v1b2 = wasm_f32x4_splat(one_minus_b2);
  v128_t vst = wasm_f32x4_splat(neg_step), vc2 = wasm_f32x4_splat(c2), veps = wasm_f32x4_splat(eps);
  int i = 0;
  for (; i + 4 <= n; i += 4) {
    v128_t gi = wasm_v128_load(g + i);
    if (scaled) gi = wasm_f32x4_mul(gi, vgs);
    v128_t pi = wasm_v128_load(p + i);
    if (decayed) pi = wasm_f32x4_mul(pi, vdec);
    v128_t mi = wasm_f32x4_add(wasm_f32x4_mul(wasm_v128_load(m + i), vb1), wasm_f32x4_mul(gi, v1b1));
    v128_t vi = wasm_f32x4_add(wasm_f32x4_mul(wasm_v128_load(v + i), vb2),
                               wasm_f32x4_mul(wasm_f32x4_mul(gi, v1b2), gi));
    v128_t den = wasm_f32x4_add(wasm_f32x4_div(wasm_f32x4_sqrt(vi), vc2), veps);
    wasm_v128_store(p_out + i, wasm_f32x4_add(pi, wasm_f32x4_div(wasm_f32x4_mul(mi, vst), den)));
    wasm_v128_store(m_out + i, mi);
    wasm_v128_store(v_out + i, vi);
  }
  for (; i < n; i++) {
    float gi = scaled ? g[i] * gscale : g[i];
    float pi = decayed ? p[i] * decay : p[i];
    float mi = m[i] * b1 + gi * one_minus_b1;
    float vi = v[i] * b2 + (gi * one_minus_b2) * gi;
    float den = wasm_f32x4_extract_lane(wasm_f32x4_sqrt(wasm_f32x4_splat(vi)), 0) / c2 + eps;
    p_out[i] = pi + (mi * neg_step) / den;
    m_out[i] = mi;
    v_out[i] = vi;
  }
}

// ---------------------------------------------------------------------------
// Jobs: each kernel above as a list of tasks that write disjoint outputs.
//
// The TypeScript side (src/kernels/jobs.ts) writes a job — its kind, its task count and
// up to JOB_ARGS int arguments (pointers, sizes, float bits) — into a pool_t, then calls
//   job_run   the tasks in order on the calling thread (every build), or
//   pool_run  the tasks shared with the helper threads (shared-memory builds): the
//             caller publishes the job, wakes the helpers sleeping in pool_helper, takes
//             tasks itself, and sleeps until the last one is done.
// Tasks are claimed from one atomic word holding (tasks << 16) | next, so a claim names
// the job it belongs to, and a task's arguments are read only after it is claimed: a
// helper that wakes late can claim nothing but a task of the current job. A job is not
// replaced before all its tasks are done, so its arguments stay put while any runs.
//
// How a kernel is cut never changes what an output element sums or in which order
// (row blocks, column blocks, whole heads; the GEMM's K blocking is the same in every
// block), so the results are the same bits on any number of threads.
// ---------------------------------------------------------------------------

#define MAX_THREADS 32
#define JOB_ARGS 32

typedef struct {
  int gen;     // [0] bumped when a job is published; helpers sleep on it
  int claim;   // [1] (tasks << 16) | next task to claim
  int done;    // [2] tasks finished; the caller sleeps on it
  int kind;    // [3] JOB_*
  int tasks;   // [4] task count of the job being written (< 32768)
  int active;  // [5] threads that may take part, the caller included
  int quit;    // [6] set (then gen bumped) to end pool_helper
  int alive;   // [7] helpers inside pool_helper
  int spin;    // [8] polls of gen before a helper sleeps
  int failed;  // [9] set by a helper thread whose loop trapped (threads.ts)
  int reserved[6];
  float *ws[MAX_THREADS]; // [16] per-thread GEMM workspace (gemm_workspace_floats each)
  int arg[JOB_ARGS];      // [48] the job's arguments
  int taken[MAX_THREADS]; // [80] tasks each thread has run in pool_run (benchmarks read it)
} pool_t;

enum {
  JOB_GEMM = 1,
  JOB_ATTENTION_FORWARD = 2,
  JOB_ATTENTION_BACKWARD = 3,
  JOB_BIAS_GELU = 4,
  JOB_BIAS_GELU_DX = 5,
  JOB_SUM_COLS = 6,
  JOB_LAYER_NORM = 7,
  JOB_LAYER_NORM_DX = 8,
  JOB_LAYER_NORM_DPARAMS = 9,
  JOB_DROPOUT = 10,
  JOB_ADAMW = 11,
  JOB_ERF = 12,
  JOB_SEGMENT_SUM = 13,
};

static inline float as_float(int bits) {
  union { int i; float f; } u;
  u.i = bits;
  return u.f;
}

#define PTR(i) ((float *)(size_t)(unsigned)a[i])
#define CPTR(i) ((const float *)(size_t)(unsigned)a[i])
#define F32(i) as_float(a[i])
#define MIN(x, y) ((x) < (y) ? (x) : (y))

// task t of the job in p on thread `self`
static void run_task(const pool_t *p, int t, int self) {
  const int *a = p->arg;
  float *ws = p->ws[self];
  switch (p->kind) {
  case JOB_GEMM: {
    // M N K A rsA csA B rsB csB C ldc tileM tileN tilesN tilesPerBatch bsA bsB bsC
    int M = a[0], N = a[1], K = a[2], rsA = a[4], csA = a[5], rsB = a[7], csB = a[8];
    int ldc = a[10], tileM = a[11], tileN = a[12], tilesN = a[13], perBatch = a[14];
    int batch = t / perBatch, r = t % perBatch;
    int i0 = (r / tilesN) * tileM, j0 = (r % tilesN) * tileN;
    const float *A = CPTR(3) + (size_t)batch * (unsigned)a[15] + (size_t)i0 * rsA;
    const float *B = CPTR(6) + (size_t)batch * (unsigned)a[16] + (size_t)j0 * csB;
    float *C = PTR(9) + (size_t)batch * (unsigned)a[17] + (size_t)i0 * ldc + j0;
    gemm_f32(MIN(tileM, M - i0), MIN(tileN, N - j0), K, A, rsA, csA, B, rsB, csB, C, ldc, ws);
    break;
  }
  case JOB_ATTENTION_FORWARD: // q k v bias ctx probs scratch stride T N D scale drop mix thr keep
    attention_forward_head(CPTR(0), CPTR(1), CPTR(2), CPTR(3), PTR(4), PTR(5),
                           PTR(6) + (size_t)self * (unsigned)a[7], t, a[8], a[9], a[10],
                           F32(11), a[12], (unsigned)a[13], (unsigned)a[14], F32(15), ws);
    break;
  case JOB_ATTENTION_BACKWARD: // q k v probs dctx dq dk dv scratch stride T N D scale drop mix thr keep
    attention_backward_head(CPTR(0), CPTR(1), CPTR(2), CPTR(3), CPTR(4), PTR(5), PTR(6),
                            PTR(7), PTR(8) + (size_t)self * (unsigned)a[9], t, a[10], a[11],
                            a[12], F32(13), a[14], (unsigned)a[15], (unsigned)a[16],
                            F32(17), ws);
    break;
  case JOB_BIAS_GELU: { // x b y rows n per
    int n = a[4], r0 = t * a[5], rows = MIN(a[5], a[3] - r0);
    size_t o = (size_t)r0 * n;
    bias_gelu_rows(CPTR(0) + o, CPTR(1), PTR(2) + o, rows, n);
    break;
  }
  case JOB_BIAS_GELU_DX: { // x b dy dx rows n per
    int n = a[5], r0 = t * a[6], rows = MIN(a[6], a[4] - r0);
    size_t o = (size_t)r0 * n;
    bias_gelu_dx_rows(CPTR(0) + o, CPTR(1), CPTR(2) + o, PTR(3) + o, rows, n);
    break;
  }
  case JOB_SUM_COLS: { // x y m n per — columns [t·per, …) of an [m, n] matrix
    int n = a[3], j0 = t * a[4];
    sum_cols(CPTR(0) + j0, PTR(1) + j0, a[2], MIN(a[4], n - j0), n);
    break;
  }
  case JOB_LAYER_NORM: { // x gamma beta y mean rstd rows n eps per
    int n = a[7], r0 = t * a[9], rows = MIN(a[9], a[6] - r0);
    size_t o = (size_t)r0 * n;
    float *mean = a[4] ? PTR(4) + r0 : 0, *rstd = a[5] ? PTR(5) + r0 : 0;
    layer_norm_rows(CPTR(0) + o, CPTR(1), CPTR(2), PTR(3) + o, mean, rstd, rows, n, F32(8));
    break;
  }
  case JOB_LAYER_NORM_DX: { // x gamma mean rstd dy dx rows n per
    int n = a[7], r0 = t * a[8], rows = MIN(a[8], a[6] - r0);
    size_t o = (size_t)r0 * n;
    layer_norm_dx_rows(CPTR(0) + o, CPTR(1), CPTR(2) + r0, CPTR(3) + r0, CPTR(4) + o,
                       PTR(5) + o, rows, n);
    break;
  }
  case JOB_LAYER_NORM_DPARAMS: { // x mean rstd dy dgamma dbeta rows n per
    int n = a[7], j0 = t * a[8];
    layer_norm_dparams_cols(CPTR(0), CPTR(1), CPTR(2), CPTR(3), PTR(4), PTR(5), a[6], n, j0,
                            MIN(j0 + a[8], n));
    break;
  }
  case JOB_DROPOUT: { // x y n mix threshold scale per
    int s = t * a[6];
    dropout_range(CPTR(0) + s, PTR(1) + s, MIN(a[6], a[2] - s), (unsigned)s,
                  (unsigned)a[3], (unsigned)a[4], F32(5));
    break;
  }
  case JOB_ADAMW: { // p g m v pOut mOut vOut n gscale scaled decay decayed b1 1-b1 b2 1-b2 -step c2 eps per
    int s = t * a[19];
    adamw_range(CPTR(0) + s, CPTR(1) + s, CPTR(2) + s, CPTR(3) + s, PTR(4) + s, PTR(5) + s,
                PTR(6) + s, MIN(a[19], a[7] - s), F32(8), a[9], F32(10), a[11], F32(12),
                F32(13), F32(14), F32(15), F32(16), F32(17), F32(18));
    break;
  }
  case JOB_ERF: { // x y n per
    int s = t * a[3];
    erf_range(CPTR(0) + s, PTR(1) + s, MIN(a[3], a[2] - s));
    break;
  }
  case JOB_SEGMENT_SUM: { // x ids out count inner segments per
    int s0 = t * a[6];
    segment_sum_range(CPTR(0), (const int *)(size_t)(unsigned)a[1], PTR(2), a[3], a[4], s0,
                      MIN(s0 + a[6], a[5]));
    break;
  }
  default:
    __builtin_trap();
  }
}

// every task of the job in p, in order, on the calling thread
void job_run(pool_t *p) {
  for (int t = 0; t < p->tasks; t++) run_task(p, t, 0);
}

#ifdef __wasm_atomics__
#define SEQ __ATOMIC_SEQ_CST

// claim and run tasks until none is left; the thread finishing the last wakes the caller
static void work(pool_t *p, int self) {
  for (;;) {
    unsigned w = __atomic_fetch_add((unsigned *)&p->claim, 1u, SEQ);
    int t = (int)(w & 0xffffu), tasks = (int)(w >> 16);
    if (t >= tasks) return;
    run_task(p, t, self);
    p->taken[self]++;
    if (__atomic_add_fetch(&p->done, 1, SEQ) == tasks)
      __builtin_wasm_memory_atomic_notify(&p->done, 1);
  }
}

// The caller's side: publish the job written in p (kind, tasks, arg), take part, and
// return once every task is done (or a helper has failed: the caller checks p->failed).
// Only one thread ever calls this on a given p.
void pool_run(pool_t *p) {
  int tasks = p->tasks;
  __atomic_store_n(&p->done, 0, SEQ);
  __atomic_store_n(&p->claim, tasks << 16, SEQ);
  __atomic_fetch_add(&p->gen, 1, SEQ);
  __builtin_wasm_memory_atomic_notify(&p->gen, 0xffffffffu);
  work(p, 0);
  for (;;) {
    int d = __atomic_load_n(&p->done, SEQ);
    if (d >= tasks || __atomic_load_n(&p->failed, SEQ)) return;
    __builtin_wasm_memory_atomic_wait32(&p->done, d, -1);
  }
}

// A helper thread's whole life (thread `self`, 1 ≤ self < MAX_THREADS): poll gen a
// little (a job often follows a job), then sleep on it; on a new job, take part when
// self < active. Returns when quit is set.
void pool_helper(pool_t *p, int self) {
  __atomic_fetch_add(&p->alive, 1, SEQ);
  int seen = __atomic_load_n(&p->gen, SEQ);
  for (;;) {
    int g = __atomic_load_n(&p->gen, SEQ);
    for (int i = 0, spin = __atomic_load_n(&p->spin, SEQ); g == seen && i < spin; i++)
      g = __atomic_load_n(&p->gen, SEQ);
    if (g == seen) {
      __builtin_wasm_memory_atomic_wait32(&p->gen, seen, -1);
      continue;
    }
    seen = g;
    if (__atomic_load_n(&p->quit, SEQ)) break;
    if (self < __atomic_load_n(&p->active, SEQ)) work(p, self);
  }
  __atomic_fetch_sub(&p->alive, 1, SEQ);
}
#endif

// defines: gemm_f32 (strided, any transpose), erf_f32, exp-based helpers
//
// Fast paths for the tfjs wasm backend, compiled to WebAssembly SIMD by build.sh.
// The module IMPORTS the tfjs backend's linear memory, so every pointer below is
// a byte address inside the tfjs heap (a tensor's memoryOffset, or scratch that
// the TypeScript side allocated with the backend's malloc). Nothing here owns
// memory: there are no globals, no data segments, and no address-taken locals,
// so the module needs no stack of its own in that shared memory (build.sh checks
// that the linked module has no data section).
//
// Why a GEMM of our own: stock tfjs 4.22 sends every transposed or batched
// BatchMatMul to a scalar loop (1-2 GFLOP/s measured here); every matMul
// gradient is transposed and attention is batched.

#include <wasm_simd128.h>

typedef __SIZE_TYPE__ size_t;

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
    c00 = wasm_f32x4_add(c00, wasm_f32x4_mul(a0, b0));
    c01 = wasm_f32x4_add(c01, wasm_f32x4_mul(a0, b1));
    v128_t a1 = wasm_v128_load32_splat(a + 1);
    c10 = wasm_f32x4_add(c10, wasm_f32x4_mul(a1, b0));
    c11 = wasm_f32x4_add(c11, wasm_f32x4_mul(a1, b1));
    v128_t a2 = wasm_v128_load32_splat(a + 2);
    c20 = wasm_f32x4_add(c20, wasm_f32x4_mul(a2, b0));
    c21 = wasm_f32x4_add(c21, wasm_f32x4_mul(a2, b1));
    v128_t a3 = wasm_v128_load32_splat(a + 3);
    c30 = wasm_f32x4_add(c30, wasm_f32x4_mul(a3, b0));
    c31 = wasm_f32x4_add(c31, wasm_f32x4_mul(a3, b1));
    v128_t a4 = wasm_v128_load32_splat(a + 4);
    c40 = wasm_f32x4_add(c40, wasm_f32x4_mul(a4, b0));
    c41 = wasm_f32x4_add(c41, wasm_f32x4_mul(a4, b1));
    v128_t a5 = wasm_v128_load32_splat(a + 5);
    c50 = wasm_f32x4_add(c50, wasm_f32x4_mul(a5, b0));
    c51 = wasm_f32x4_add(c51, wasm_f32x4_mul(a5, b1));
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

void gemm_f32(int M, int N, int K, const float *A, int rsA, int csA,
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

void erf_f32(const float *x, float *y, int n) {
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

// y[j] = Σ_{i<m} x[i·n + j]: a [m, n] matrix summed over its rows, in row order
// (the order tfjs's cpu backend adds in). 32 columns at a time in 8 accumulators,
// so x is read once and y written once.
void sum_leading_f32(const float *x, float *y, int m, int n) {
  int j = 0;
  for (; j + 32 <= n; j += 32) {
    v128_t a0 = wasm_f32x4_splat(0), a1 = a0, a2 = a0, a3 = a0, a4 = a0, a5 = a0,
           a6 = a0, a7 = a0;
    const float *p = x + j;
    for (int i = 0; i < m; i++, p += n) {
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
    for (int i = 0; i < m; i++, p += n) a = wasm_f32x4_add(a, wasm_v128_load(p));
    wasm_v128_store(y + j, a);
  }
  for (; j < n; j++) {
    float a = 0.0f;
    const float *p = x + j;
    for (int i = 0; i < m; i++, p += n) a += *p;
    y[j] = a;
  }
}

// out[s·inner ..] = Σ over p with ids[p] = s of x[p·inner ..]; out is zeroed first
// and ids outside [0, segments) are skipped (TensorFlow's UnsortedSegmentSum).
void segment_sum_f32(const float *x, const int *ids, float *out, int count,
                     int inner, int segments) {
  size_t total = (size_t)segments * inner;
  size_t z = 0;
  for (; z + 4 <= total; z += 4) wasm_v128_store(out + z, wasm_f32x4_splat(0));
  for (; z < total; z++) out[z] = 0.0f;
  for (int p = 0; p < count; p++) {
    int s = ids[p];
    if (s < 0 || s >= segments) continue;
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

// Forward. q, k, v, ctx: [B·T, H] with H = N·D; bias: [B, T]; probs: [B·N, T, T]
// receives P when not null (the backward needs it); scratch: 2·T·T floats; ws:
// the GEMM workspace. dropout = 0 skips the mask.
void attention_forward(const float *q, const float *k, const float *v, const float *bias,
                       float *ctx, float *probs, float *scratch, int B, int T, int N,
                       int D, float scale, int dropout, unsigned mix, unsigned threshold,
                       float keep_scale, float *ws) {
  int H = N * D;
  size_t tt = (size_t)T * T;
  for (int b = 0; b < B; b++) {
    for (int n = 0; n < N; n++) {
      size_t head = (size_t)b * N + n;
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
          drop_row(p + (size_t)i * T, pd + (size_t)i * T, T,
                   (unsigned)((head * T + i) * T), mix, threshold, keep_scale);
        a = pd;
      }
      // 4. C_h = Pd V_h, written into head n's columns of ctx
      gemm_f32(T, D, T, a, T, 1, v + off, H, 1, ctx + off, H, ws);
    }
  }
}

// Backward, from P (the forward's probs) and dC = dctx, per head:
//   1. dPd = dC V_hᵀ                       (inverts "C_h = Pd V_h")
//   2. dV_h = Pdᵀ dC, Pd rebuilt from P and the recomputed mask
//   3. dP = dPd ⊙ M / keep                 (inverts "Pd = P ⊙ M / keep")
//   4. dS = P ⊙ (dP − rowsum(dP ⊙ P))      (inverts the softmax)
//   5. dQ_h = scale · dS K_h, dK_h = scale · dSᵀ Q_h   (inverts "S = scale·Q Kᵀ + bias")
// scratch: 2·T·T floats. dq, dk, dv: [B·T, H], fully overwritten.
void attention_backward(const float *q, const float *k, const float *v,
                        const float *probs, const float *dctx, float *dq, float *dk,
                        float *dv, float *scratch, int B, int T, int N, int D,
                        float scale, int dropout, unsigned mix, unsigned threshold,
                        float keep_scale, float *ws) {
  int H = N * D;
  size_t tt = (size_t)T * T;
  float *g = scratch;
  float *pd = scratch + tt;
  v128_t vs = wasm_f32x4_splat(scale);
  for (int b = 0; b < B; b++) {
    for (int n = 0; n < N; n++) {
      size_t head = (size_t)b * N + n;
      size_t off = (size_t)b * T * H + (size_t)n * D;
      const float *p = probs + head * tt;
      // 1.
      gemm_f32(T, T, D, dctx + off, H, 1, v + off, 1, H, g, T, ws);
      // 2.
      const float *a = p;
      if (dropout) {
        for (int i = 0; i < T; i++)
          drop_row(p + (size_t)i * T, pd + (size_t)i * T, T,
                   (unsigned)((head * T + i) * T), mix, threshold, keep_scale);
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
  }
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

void bias_gelu_f32(const float *x, const float *b, float *y, int rows, int n) {
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

// dx: [rows, n]; db: [n] (the column sums of dx)
void bias_gelu_grad_f32(const float *x, const float *b, const float *dy, float *dx,
                        float *db, int rows, int n) {
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
  sum_leading_f32(dx, db, rows, n);
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

void layer_norm_f32(const float *x, const float *gamma, const float *beta, float *y,
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

// dgamma, dbeta: [n], fully overwritten
void layer_norm_grad_f32(const float *x, const float *gamma, const float *mean,
                         const float *rstd, const float *dy, float *dx, float *dgamma,
                         float *dbeta, int rows, int n) {
  float inv_n = 1.0f / (float)n;
  int j;
  for (j = 0; j < n; j++) dgamma[j] = dbeta[j] = 0.0f;
  for (int r = 0; r < rows; r++) {
    const float *xr = x + (size_t)r * n;
    const float *dyr = dy + (size_t)r * n;
    float *dxr = dx + (size_t)r * n;
    v128_t vmu = wasm_f32x4_splat(mean[r]);
    v128_t vr = wasm_f32x4_splat(rstd[r]);
    // 1. mean(g) and mean(g·x̂); the parameter gradients on the way
    v128_t sg = wasm_f32x4_splat(0), sgh = sg;
    float tg = 0.0f, tgh = 0.0f;
    for (j = 0; j + 4 <= n; j += 4) {
      v128_t d = wasm_v128_load(dyr + j);
      v128_t h = wasm_f32x4_mul(wasm_f32x4_sub(wasm_v128_load(xr + j), vmu), vr);
      v128_t g = wasm_f32x4_mul(d, wasm_v128_load(gamma + j));
      sg = wasm_f32x4_add(sg, g);
      sgh = wasm_f32x4_add(sgh, wasm_f32x4_mul(g, h));
      wasm_v128_store(dgamma + j, wasm_f32x4_add(wasm_v128_load(dgamma + j), wasm_f32x4_mul(d, h)));
      wasm_v128_store(dbeta + j, wasm_f32x4_add(wasm_v128_load(dbeta + j), d));
    }
    for (; j < n; j++) {
      float h = (xr[j] - mean[r]) * rstd[r];
      float g = dyr[j] * gamma[j];
      tg += g;
      tgh += g * h;
      dgamma[j] += dyr[j] * h;
      dbeta[j] += dyr[j];
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

// ---------------------------------------------------------------------------
// Inverted dropout of n values with the attention op's counter-based mask
// (element e kept iff hash(e·0x9E3779B9 + mix) >= threshold, kept values scaled):
// the same call on dy is its backward, since the mask is recomputed from the seed.
// ---------------------------------------------------------------------------

void dropout_f32(const float *x, float *y, int n, unsigned mix, unsigned threshold,
                 float scale) {
  drop_row(x, y, n, 0, mix, threshold, scale);
}

// ---------------------------------------------------------------------------
// One AdamW update of n parameters, in torch.optim.AdamW's order and in the same
// float32 operations, one rounding each, as src/train/adamw.ts's tfjs ops:
//   g ← g·gscale;  p ← p·decay;  m ← m·b1 + g·(1 − b1);  v ← v·b2 + (g·(1 − b2))·g
//   p ← p + (m·(−step)) / (√v / c2 + eps)
// Outputs go to new buffers (tfjs tensors are immutable); the caller assigns them.
// ---------------------------------------------------------------------------

void adamw_f32(const float *p, const float *g, const float *m, const float *v,
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

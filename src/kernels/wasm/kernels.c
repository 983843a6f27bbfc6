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

"""Fits the two polynomials behind the wasm `erf_f32` kernel (kernels.c).

Run: /usr/bin/python3 src/kernels/wasm/fit-erf.py   (needs numpy; prints C constants)

The method (our own fit; the reference is Python's math.erf / math.erfc, float64):
  1. |x| <= SPLIT:  erf(x) = x + x * P(x^2)         P fitted to erf(x)/x - 1 in u = x^2
                    (adding the exact x last keeps the float32 rounding error small)
  2. |x| >  SPLIT:  erf(x) = 1 - exp(-x^2) * R(t),  t = 1 / (1 + x / 2),
                    R fitted to erfcx(x) = exp(x^2) * erfc(x), weighted by exp(-x^2)
                    so the fit minimises the absolute error of erf itself.
Least squares on Chebyshev-spaced points, then a few rounds of Lawson reweighting
to push the fit toward minimax. Coefficients are printed as float32 literals; the
script also simulates the float32 Horner evaluation and reports the max abs error.
"""
import math
import numpy as np

SPLIT = 1.0
DEG_P = 6   # degree in u = x^2
DEG_R = 8  # degree in t


def cheb_points(a, b, n):
    k = np.arange(n)
    return 0.5 * (a + b) + 0.5 * (b - a) * np.cos(np.pi * (k + 0.5) / n)


def lawson_fit(v, target, weight, deg, rounds=60):
    """Weighted polynomial fit in v minimising max |weight * (p(v) - target)|."""
    V = np.vander(v, deg + 1, increasing=True)
    lw = np.ones_like(v)
    for _ in range(rounds):
        sw = np.sqrt(lw) * weight
        coef, *_ = np.linalg.lstsq(V * sw[:, None], target * sw, rcond=None)
        err = np.abs(weight * (V @ coef - target))
        lw = lw * (err / err.max() + 1e-12)
        lw /= lw.sum()
    return coef, err.max()


def horner32(coef, v):
    acc = np.float32(coef[-1]) * np.ones_like(v, dtype=np.float32)
    for c in coef[-2::-1]:
        acc = (acc * v + np.float32(c)).astype(np.float32)
    return acc


x1 = cheb_points(1e-6, SPLIT, 4000)
u1 = x1 * x1
p, e1 = lawson_fit(u1, np.array([math.erf(x) / x - 1.0 for x in x1]), x1, DEG_P)

x2 = np.concatenate([cheb_points(SPLIT, 4.0, 4000), cheb_points(4.0, 12.0, 1000)])
t2 = 1.0 / (1.0 + 0.5 * x2)
erfcx = np.array([math.exp(x * x) * math.erfc(x) for x in x2])
r, e2 = lawson_fit(t2, erfcx, np.exp(-x2 * x2), DEG_R)

p32 = [float(np.float32(c)) for c in p]
r32 = [float(np.float32(c)) for c in r]

# float32 simulation of the kernel (exp taken exact here; the kernel's own exp adds ~1 ulp)
xs = np.linspace(0, 6, 200001).astype(np.float32)
small = (xs + (xs * horner32(p32, (xs * xs).astype(np.float32))).astype(np.float32)).astype(np.float32)
tt = (np.float32(1) / (np.float32(1) + np.float32(0.5) * xs)).astype(np.float32)
big = (np.float32(1) - (np.exp(-(xs.astype(np.float64) ** 2)).astype(np.float32) * horner32(r32, tt))).astype(np.float32)
y = np.where(xs <= SPLIT, small, big)
ref = np.array([math.erf(float(x)) for x in xs])
print(f"// fit error (float64): P {e1:.3g}, R {e2:.3g}; float32 simulation max abs error {np.abs(y - ref).max():.3g}")
print("// P, lowest degree first")
print(",\n".join(f"{c:.9e}f" for c in p32))
print("// R, lowest degree first")
print(",\n".join(f"{c:.9e}f" for c in r32))

"""Reference for Kinglet's integer-only requantisation and multiplier decomposition.

Source of the method: B. Jacob et al., "Quantization and Training of Neural Networks for Efficient
Integer-Arithmetic-Only Inference", CVPR 2018, section 2.2 and appendix; the rounding primitives follow
the gemmlowp reference definitions `SaturatingRoundingDoublingHighMul` and `RoundingDivideByPOT`
(gemmlowp, fixedpoint/fixedpoint.h).

Convention used by the Kinglet runtime:

    requantize(acc: i32, multiplier: i32, shift: i8, zero_point: i8, act_min: i8, act_max: i8) -> i8

* `shift` is the total RIGHT shift; the real multiplier is M = multiplier * 2^-31 * 2^-shift, with
  `multiplier` in [2^30, 2^31 - 1] and `shift` in [-31, 31].
* shift < 0: x = saturate_i32(acc * 2^-shift), rs = 0; otherwise x = acc, rs = shift.
* h = SRDHM(x, multiplier); y = RDBPOT(h, rs); out = clamp(y + zero_point, act_min, act_max).

The result is rounded twice (once in SRDHM at 2^-31, once in RDBPOT), so it can differ by one LSB from
the exactly rounded value round_half_away(acc * M) + zero_point. This script asserts that the two
implementations below (vectorised numpy int64 and plain Python ints) agree exactly, and that the
result is within 1 of the exact rational value whenever the left shift did not saturate.

Writes `requant_cases.csv` and `multiplier_cases.csv` into the output directory (default:
tests/fixtures next to this script's parent).

Usage: python requant_ref.py [OUT_DIR]
"""

from __future__ import annotations

import csv
import math
import sys
from fractions import Fraction
from pathlib import Path

import numpy as np

INT32_MIN = -(2**31)
INT32_MAX = 2**31 - 1
MULT_MIN = 2**30
MULT_MAX = 2**31 - 1
SEED = 20180101

DEFAULT_OUT = Path(__file__).resolve().parent.parent / "fixtures"


# ---------------------------------------------------------------------------------------------
# Vectorised numpy int64 implementation
# ---------------------------------------------------------------------------------------------


def _trunc_div_pow2(v: np.ndarray, bits: int) -> np.ndarray:
    """Division by 2^bits rounding toward zero (C semantics), for int64 arrays."""
    return np.where(v >= 0, v >> bits, -((-v) >> bits))


def srdhm_np(x: np.ndarray, b: np.ndarray) -> np.ndarray:
    """gemmlowp SaturatingRoundingDoublingHighMul on int64 arrays holding int32 values."""
    x = np.asarray(x, dtype=np.int64)
    b = np.asarray(b, dtype=np.int64)
    overflow = (x == INT32_MIN) & (b == INT32_MIN)
    ab = x * b  # |ab| <= 2^62, fits in int64
    nudge = np.where(ab >= 0, np.int64(1 << 30), np.int64(1 - (1 << 30)))
    h = _trunc_div_pow2(ab + nudge, 31)
    return np.where(overflow, np.int64(INT32_MAX), h)


def rdbpot_np(h: np.ndarray, rs: np.ndarray) -> np.ndarray:
    """gemmlowp RoundingDivideByPOT (round half away from zero) on int64 arrays, rs in [0, 31]."""
    h = np.asarray(h, dtype=np.int64)
    rs = np.asarray(rs, dtype=np.int64)
    mask = (np.int64(1) << rs) - 1
    rem = h & mask
    thr = (mask >> 1) + (h < 0).astype(np.int64)
    return (h >> rs) + (rem > thr).astype(np.int64)


def requantize_np_unclamped(acc, multiplier, shift):
    """Returns (y, left_shift_saturated) before the zero point and clamp, as int64 arrays."""
    acc = np.asarray(acc, dtype=np.int64)
    multiplier = np.asarray(multiplier, dtype=np.int64)
    shift = np.asarray(shift, dtype=np.int64)
    left = np.where(shift < 0, -shift, 0)
    shifted = acc << left  # |acc| * 2^31 <= 2^62, fits in int64
    x = np.clip(shifted, INT32_MIN, INT32_MAX)
    saturated = shifted != x
    rs = np.where(shift < 0, 0, shift)
    return rdbpot_np(srdhm_np(x, multiplier), rs), saturated


def requantize_np(acc, multiplier, shift, zero_point, act_min, act_max) -> np.ndarray:
    """Vectorised requantisation; returns int64 array of int8 values."""
    y, _ = requantize_np_unclamped(acc, multiplier, shift)
    out = y + np.asarray(zero_point, dtype=np.int64)
    return np.clip(out, np.asarray(act_min, dtype=np.int64), np.asarray(act_max, dtype=np.int64))


# ---------------------------------------------------------------------------------------------
# Independent plain-Python-int implementation
# ---------------------------------------------------------------------------------------------


def srdhm_py(a: int, b: int) -> int:
    if a == INT32_MIN and b == INT32_MIN:
        return INT32_MAX
    ab = a * b
    nudge = (1 << 30) if ab >= 0 else 1 - (1 << 30)
    num = ab + nudge
    q = abs(num) // (1 << 31)  # truncation toward zero
    return q if num >= 0 else -q


def rdbpot_py(h: int, rs: int) -> int:
    assert 0 <= rs <= 31
    mask = (1 << rs) - 1
    rem = h & mask  # Python ints behave as infinite two's complement
    thr = (mask >> 1) + (1 if h < 0 else 0)
    return (h >> rs) + (1 if rem > thr else 0)


def requantize_py(acc: int, multiplier: int, shift: int, zero_point: int, act_min: int, act_max: int) -> int:
    if shift < 0:
        x = max(INT32_MIN, min(INT32_MAX, acc * (1 << -shift)))
        rs = 0
    else:
        x = acc
        rs = shift
    y = rdbpot_py(srdhm_py(x, multiplier), rs)
    return max(act_min, min(act_max, y + zero_point))


def exact_rounded(acc: int, multiplier: int, shift: int) -> int:
    """round_half_away_from_zero(acc * multiplier * 2^-31 * 2^-shift), exact rational arithmetic."""
    v = Fraction(acc * multiplier) / Fraction(2) ** (31 + shift)
    mag = abs(v)
    r = math.floor(mag + Fraction(1, 2))
    return r if v >= 0 else -r


# ---------------------------------------------------------------------------------------------
# Multiplier decomposition
# ---------------------------------------------------------------------------------------------


def decompose_multiplier(real: float) -> tuple[int, int]:
    """Positive real multiplier -> (multiplier, shift) with real ~= multiplier * 2^-31 * 2^-shift.

    m, e = frexp(real), m in [0.5, 1); multiplier = round(m * 2^31) using numpy's round-half-to-even
    (`int(np.round(...))`; Python's built-in `round` on a float is also half-to-even, the two agree);
    if the rounding reaches 2^31 the mantissa is halved and the exponent incremented; shift = -e.
    """
    if not real > 0.0:
        raise ValueError(f"real multiplier must be positive, got {real!r}")
    m, e = math.frexp(real)
    q = int(np.round(m * float(1 << 31)))
    if q == (1 << 31):
        q //= 2
        e += 1
    return q, -e


# ---------------------------------------------------------------------------------------------
# Case construction
# ---------------------------------------------------------------------------------------------


def _rand_mult(rng, n):
    return rng.integers(MULT_MIN, MULT_MAX, size=n, endpoint=True, dtype=np.int64)


def _rand_acc_mag(rng, n):
    """Accumulators spread over magnitudes 2^0 .. 2^31, both signs."""
    bits = rng.integers(0, 32, size=n)
    mags = np.array([int(rng.integers(0, 1 << int(b), endpoint=True)) for b in bits], dtype=np.int64)
    signs = rng.choice(np.array([-1, 1], dtype=np.int64), size=n)
    return np.clip(mags * signs, INT32_MIN, INT32_MAX)


def _rand_i8(rng, n, lo=-128, hi=127):
    return rng.integers(lo, hi, size=n, endpoint=True, dtype=np.int64)


def _shift_for_target(acc_mag: int, mult: int, target_bits: int) -> int:
    """A right shift that brings |acc * M| to about 2^target_bits, clamped to [-31, 31]."""
    if acc_mag == 0:
        return 0
    bits = acc_mag.bit_length() + mult.bit_length() - 1 - 31
    return max(-31, min(31, bits - target_bits))


def build_cases(rng) -> list[tuple[int, int, int, int, int, int]]:
    cases: list[tuple[int, int, int, int, int, int]] = []

    def add(acc, mult, shift, zp, lo=-128, hi=127):
        cases.append((int(acc), int(mult), int(shift), int(zp), int(lo), int(hi)))

    # 1. Random magnitudes with shifts chosen so the output lands in (or near) the int8 range.
    n = 900
    accs = _rand_acc_mag(rng, n)
    mults = _rand_mult(rng, n)
    zps = _rand_i8(rng, n)
    targets = rng.integers(-2, 9, size=n)
    for a, m, z, t in zip(accs, mults, zps, targets):
        add(a, m, _shift_for_target(abs(int(a)), int(m), int(t)), z)

    # 2. Fully random shifts over [-31, 31] (many saturate).
    n = 300
    accs = _rand_acc_mag(rng, n)
    for a, m, s, z in zip(accs, _rand_mult(rng, n), rng.integers(-31, 31, size=n, endpoint=True), _rand_i8(rng, n)):
        add(a, m, s, z)

    # 3. SRDHM exact ties: x * b = (2k + 1) * 2^30, i.e. ab / 2^31 has fractional part exactly .5.
    #    b = c * 2^j (c odd), x = odd * 2^(30 - j).
    for _ in range(160):
        j = int(rng.integers(0, 31))  # 0..30
        lo_c = -(-MULT_MIN // (1 << j))
        hi_c = MULT_MAX // (1 << j)
        c = int(rng.integers(lo_c, hi_c, endpoint=True))
        if c % 2 == 0:
            c = c + 1 if c + 1 <= hi_c else c - 1
        b = c << j
        if not (MULT_MIN <= b <= MULT_MAX) or c % 2 == 0:
            continue
        unit = 1 << (30 - j)
        max_odd = INT32_MAX // unit
        odd = int(rng.integers(0, max(1, min(max_odd, 1 << 12)), endpoint=True)) | 1
        sign = 1 if rng.random() < 0.5 else -1
        x = sign * odd * unit
        if not (INT32_MIN <= x <= INT32_MAX):
            continue
        assert (x * b) % (1 << 31) == (1 << 30)
        # shift 0 exposes the SRDHM tie directly; small shifts also exercise RDBPOT after it.
        s = int(rng.choice([0, 0, 1, 2, 5]))
        add(x, b, s, _rand_i8(rng, 1)[0])

    # 4. RDBPOT exact ties: h = (2k + 1) * 2^(rs - 1) produced exactly by SRDHM.
    for _ in range(200):
        rs = int(rng.integers(1, 32))
        k = int(rng.integers(0, 1 << max(0, min(8, 31 - rs)), endpoint=True))
        sign = 1 if rng.random() < 0.5 else -1
        h = sign * (2 * k + 1) * (1 << (rs - 1))
        if not (INT32_MIN // 2 <= h <= INT32_MAX // 2):
            continue
        if rng.random() < 0.5:
            b = MULT_MIN  # SRDHM(x, 2^30) = x / 2 exactly for even x
            x = 2 * h
        else:
            # Search an x near h * 2^31 / b with SRDHM(x, b) == h for a random b.
            b = int(_rand_mult(rng, 1)[0])
            guess = (h * (1 << 31)) // b
            x = None
            for cand in range(guess - 3, guess + 4):
                if INT32_MIN <= cand <= INT32_MAX and srdhm_py(cand, b) == h:
                    x = cand
                    break
            if x is None:
                continue
        if not (INT32_MIN <= x <= INT32_MAX):
            continue
        assert srdhm_py(x, b) == h
        add(x, b, rs, _rand_i8(rng, 1)[0])

    # 5. Both roundings tie: odd x with b = 2^30 gives h = x/2 tie; then RDBPOT on the result.
    for _ in range(40):
        x = int(rng.integers(-(1 << 20), 1 << 20)) | 1
        add(x, MULT_MIN, int(rng.integers(0, 6)), _rand_i8(rng, 1)[0])

    # 6. Saturation at -128 / 127 (large |acc * M| and zero points pushing over the edge).
    for _ in range(100):
        a = int(_rand_acc_mag(rng, 1)[0])
        m = int(_rand_mult(rng, 1)[0])
        s = _shift_for_target(abs(a), m, int(rng.integers(7, 12)))
        add(a, m, s, _rand_i8(rng, 1)[0])
    for zp in (-128, -1, 0, 1, 127):
        for a in (1000, -1000, 127, -128, 128, -129, 255, -256):
            add(a, MULT_MAX, 0, zp)  # M ~ 1

    # 7. INT32 extremes.
    for a in (INT32_MIN, INT32_MIN + 1, -1, 0, 1, INT32_MAX - 1, INT32_MAX):
        for m in (MULT_MIN, MULT_MIN + 1, 3 << 29, MULT_MAX - 1, MULT_MAX):
            for s in (-31, -1, 0, 1, 23, 24, 30, 31):
                add(a, m, s, 0)
    add(INT32_MIN, MULT_MAX, 24, -128)
    add(INT32_MAX, MULT_MAX, 24, 127)

    # 8. Negative shifts (saturating left shift), both non-saturating and saturating accumulators.
    for _ in range(180):
        s = -int(rng.integers(1, 32))
        if rng.random() < 0.5:
            lim = max(1, (1 << (31 + s)) - 1)  # keeps acc * 2^-s inside int32
            a = int(rng.integers(-lim, lim, endpoint=True))
        else:
            a = int(_rand_acc_mag(rng, 1)[0])
        m = int(_rand_mult(rng, 1)[0])
        add(a, m, s, _rand_i8(rng, 1)[0])
    for s in (-1, -2, -8, -16, -30, -31):
        for a in (1, -1, 2, -2, 1 << (31 + s - 1) if 31 + s - 1 >= 0 else 1, -(1 << (31 + s))):
            add(a, MULT_MIN, s, 0)

    # 9. ReLU clamps with non-zero zero point (act_min = zero_point, act_max = 127).
    for _ in range(200):
        zp = int(rng.integers(-128, 127, endpoint=True))
        if zp == 0:
            zp = -5
        a = int(_rand_acc_mag(rng, 1)[0])
        m = int(_rand_mult(rng, 1)[0])
        s = _shift_for_target(abs(a), m, int(rng.integers(0, 8)))
        add(a, m, s, zp, zp, 127)
    # Narrow clamp windows too (e.g. a fused ReLU6-like range).
    for _ in range(40):
        lo = int(rng.integers(-128, 100))
        hi = int(rng.integers(lo, 127, endpoint=True))
        a = int(_rand_acc_mag(rng, 1)[0])
        m = int(_rand_mult(rng, 1)[0])
        add(a, m, _shift_for_target(abs(a), m, 6), int(rng.integers(-128, 127, endpoint=True)), lo, hi)

    return cases


def check_cases(cases) -> np.ndarray:
    arr = np.array(cases, dtype=np.int64)
    acc, mult, shift, zp, lo, hi = (arr[:, i] for i in range(6))
    assert np.all((mult >= MULT_MIN) & (mult <= MULT_MAX)), "multiplier out of range"
    assert np.all((shift >= -31) & (shift <= 31)), "shift out of range"
    assert np.all((acc >= INT32_MIN) & (acc <= INT32_MAX)), "acc out of range"
    assert np.all(lo <= hi)
    out_np = requantize_np(acc, mult, shift, zp, lo, hi)
    y_np, saturated = requantize_np_unclamped(acc, mult, shift)
    for i, c in enumerate(cases):
        py = requantize_py(*c)
        if py != int(out_np[i]):
            raise AssertionError(f"numpy and Python implementations disagree on case {c}: {int(out_np[i])} vs {py}")
        if not saturated[i]:
            exact = exact_rounded(c[0], c[1], c[2])
            if abs(int(y_np[i]) - exact) > 1:
                raise AssertionError(f"case {c}: integer result {int(y_np[i])} vs exact {exact} differ by more than 1")
    assert np.all((out_np >= -128) & (out_np <= 127))
    return out_np


def build_multiplier_cases(rng) -> list[tuple[float, int, int]]:
    reals: list[float] = []
    # Log-uniform over 1e-9 .. 1e3.
    reals += [float(v) for v in 10.0 ** rng.uniform(-9.0, 3.0, size=257)]
    # Exact powers of two (mantissa exactly 0.5 -> multiplier exactly 2^30).
    reals += [math.ldexp(1.0, e) for e in range(-29, 10, 3)]
    # Mantissa so close to 1 that rounding reaches 2^31 (must renormalise).
    reals += [math.ldexp(1.0 - 2.0**-40, e) for e in (-20, -3, 0, 5)]
    reals += [math.ldexp(1.0 - 2.0**-33, e) for e in (-7, 2)]
    # Exact half-way mantissas: m * 2^31 = k + 0.5 (half-to-even decides), k even and odd.
    for k in ((1 << 30) + 2, (1 << 30) + 3, 1518500250, 1518500251, (1 << 31) - 2, (1 << 31) - 3):
        for e in (-10, 0, 4):
            reals.append(math.ldexp((k + 0.5) / float(1 << 31), e))
    # A few typical scale ratios.
    reals += [0.0078125 * 0.0039215686 / 0.02, 1.0 / 255.0, 0.5, 0.999999, 1.000001, 123.456]
    rows = []
    for r in reals:
        q, s = decompose_multiplier(r)
        if not -31 <= s <= 31:
            continue
        assert MULT_MIN <= q <= MULT_MAX
        # The decomposition is within half an LSB of the 31-bit mantissa.
        assert abs(Fraction(q, 1 << 31) * Fraction(2) ** (-s) - Fraction(r)) <= Fraction(1, 1 << 32) * Fraction(2) ** (-s)
        rows.append((r, q, s))
    return rows


def main(argv: list[str]) -> int:
    out = Path(argv[1]) if len(argv) > 1 else DEFAULT_OUT
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(SEED)
    cases = build_cases(rng)
    expected = check_cases(cases)
    with open(out / "requant_cases.csv", "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["acc", "multiplier", "shift", "zero_point", "act_min", "act_max", "expected"])
        for c, e in zip(cases, expected):
            w.writerow([*c, int(e)])
    mrows = build_multiplier_cases(rng)
    with open(out / "multiplier_cases.csv", "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["real", "multiplier", "shift"])
        for r, q, s in mrows:
            w.writerow([repr(r), q, s])
    print(f"requant_cases.csv: {len(cases)} rows; multiplier_cases.csv: {len(mrows)} rows -> {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))

"""The project's integer arithmetic against independent oracles.

- fxpmath 0.4.10 (an independent fixed-point library) for quantising the
  constant, rounding products and overflow handling. Its rounding names, from
  its README (section "rounding"): ``floor`` rounds toward -infinity (our
  ``floor``, the hardware LSB drop); ``nearest_posinf`` rounds to nearest with
  exact half-way ties toward +infinity (our ``half-up``, add half then floor);
  ``around`` rounds to nearest with ties to even (our ``half-even``, numpy
  ``around``). Overflow ``saturate`` clamps and ``wrap`` keeps the low bits.
  fxpmath converts through float64, so every value here stays below 2**52,
  where float64 holds it exactly (IEEE 754-2008, sec. 3.4: 53-bit significand).
- A brute-force enumeration of signed-digit sums for the best K-digit
  constant (G. W. Reitwiesner, "Binary arithmetic", Advances in Computers 1,
  1960, pp. 231-308: the non-adjacent form has the fewest non-zero digits, so
  searching by NAF weight, as the library does, finds the same integers).
- fxpmath once more as an end-to-end oracle for the fast pipeline's
  thresholds, from the statistic the float golden model gives.
"""

from __future__ import annotations

import itertools
import os

import numpy as np
import pytest
from fxpmath import Fxp
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.fixed_arith import apply_overflow, best_csd_constant, naf_digits, quantise_constant, round_shift, scale_product
from refmodel.floatmodel.float_cfar import cfar_1d
from refmodel.fixedpoint.pipeline_fast import run_fast

LONG = os.environ.get("CFARVEC_LONG") == "1"
HYP = settings(max_examples=2000 if LONG else 100, deadline=None, derandomize=not LONG,
               suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])

FXP_ROUNDING = {"floor": "floor", "half-up": "nearest_posinf", "half-even": "around"}


def fxp_raw(values, n_frac: int, rounding: str = "trunc", n_word: int = 62, overflow: str = "wrap") -> np.ndarray:
    """fxpmath's stored integers for unsigned ``values`` at ``n_frac`` fraction bits."""
    return np.asarray(Fxp(np.asarray(values, dtype=float), signed=False, n_word=n_word, n_frac=n_frac,
                          rounding=rounding, overflow=overflow).raw(), dtype=np.int64)


# ---- the fxpmath names really are the modes we map them to (fxpmath README, "rounding") ----

def test_fxpmath_tie_behaviour():
    halves = [0.5, 1.5, 2.5, 3.25, 3.75]
    assert fxp_raw(halves, 0, "floor").tolist() == [0, 1, 2, 3, 3]
    assert fxp_raw(halves, 0, "nearest_posinf").tolist() == [1, 2, 3, 3, 4]
    assert fxp_raw(halves, 0, "around").tolist() == [0, 2, 2, 3, 4]


# ---- constant quantisation (docs/bit-true.md section 4, alpha_csd_digits = 0) ----

@HYP
@given(alpha=st.floats(0.01, 200.0), f_a=st.integers(0, 24), divisor=st.sampled_from([1, 2, 3, 6, 8, 12, 32, 40]))
def test_constant_rounds_like_fxpmath_nearest_posinf(alpha, f_a, divisor):
    target = alpha * 2.0**f_a / divisor
    assert quantise_constant(target, 0) == fxp_raw([alpha / divisor], f_a, "nearest_posinf")[0]


# The divisor D of docs/bit-true.md section 4, written per case: 2R for ca, R for go and so, 1 for os.
@pytest.mark.parametrize("kind, r, alpha, f_a, divisor", [("ca", 8, 4.7, 10, 16), ("go", 3, 13.0, 7, 3),
                                                          ("so", 5, 2.25, 3, 5), ("os", 6, 9.99, 12, 1),
                                                          ("ca", 4, 0.375, 4, 8)])
def test_spec_constant_matches_fxpmath(kind, r, alpha, f_a, divisor):
    det = {"kind": kind, "ref_cells_per_side": r, "alpha": alpha, "rank": r if kind == "os" else None}
    spec = spec_from_dict({"detector": det, "fixed": {"alpha_frac_bits": f_a}})
    assert spec.alpha_int == fxp_raw([alpha / divisor], f_a, "nearest_posinf")[0]


# ---- rounding of products (section 5) ----

@HYP
@given(q=st.lists(st.integers(0, 2**30), min_size=1, max_size=30), d=st.integers(1, 20), data=st.data())
def test_round_shift_matches_fxpmath(q, d, data):
    # Each P = q * 2^d + r with r drawn to hit 0, exact halves and their neighbours often.
    rem = data.draw(st.lists(st.sampled_from([0, 1, 2 ** (d - 1) - 1, 2 ** (d - 1), 2 ** (d - 1) + 1, 2**d - 1])
                             | st.integers(0, 2**d - 1), min_size=len(q), max_size=len(q)))
    p = np.array([a * 2**d + max(0, b) for a, b in zip(q, rem)], dtype=np.int64)
    value = p / 2.0**d  # exact: p < 2^51
    for mode, name in FXP_ROUNDING.items():
        want = fxp_raw(value, 0, name)
        assert round_shift(p, d, mode).tolist() == want.tolist(), mode
        assert [round_shift(int(v), d, mode) for v in p] == want.tolist(), mode  # Python ints too


@HYP
@given(s=st.lists(st.integers(0, 2**24), min_size=1, max_size=20), a=st.integers(1, 2**20), f_p=st.integers(0, 24),
       f_t=st.integers(0, 24), mode=st.sampled_from(sorted(FXP_ROUNDING)))
def test_scale_product_matches_fxpmath(s, a, f_p, f_t, mode):
    assume(f_t <= f_p)
    s = np.array(s, dtype=np.int64)
    want = fxp_raw(s * a / 2.0**f_p, f_t, FXP_ROUNDING[mode])  # the real product S * A / 2^F_P at F_T bits
    assert scale_product(s, a, f_p - f_t, mode).tolist() == want.tolist()


# ---- overflow (section 6) ----

@pytest.mark.parametrize("mode", ["saturate", "wrap"])
@pytest.mark.parametrize("width", [1, 3, 8, 13, 31])
def test_overflow_matches_fxpmath(mode, width):
    rng = np.random.default_rng(width)
    t = np.concatenate([rng.integers(0, 2**40, 40), np.arange(2**width - 3, 2**width + 3), [0, 2**width - 1, 2**width]])
    t = t[t >= 0].astype(np.int64)
    want = fxp_raw(t, 0, n_word=width, overflow=mode)  # small arrays: fxpmath saturate loops in Python
    assert apply_overflow(t, width, mode).tolist() == want.tolist()
    assert [apply_overflow(int(v), width, mode) for v in t] == want.tolist()


# ---- best K-digit signed-digit constant ----

def brute_force_signed_digit_values(k: int, max_power: int) -> np.ndarray:
    """Every integer >= 0 that is a sum of at most k terms +-2^p with distinct p in 0..max_power."""
    values = {0}
    for j in range(1, k + 1):
        for powers in itertools.combinations(range(max_power + 1), j):
            for signs in itertools.product((1, -1), repeat=j):
                v = sum(sg << p for sg, p in zip(signs, powers))
                if v >= 0:
                    values.add(v)
    return np.array(sorted(values), dtype=np.int64)


BRUTE = {k: brute_force_signed_digit_values(k, 13) for k in (1, 2, 3)}


@HYP
@given(target=st.floats(0.0, 1023.0), k=st.sampled_from([1, 2, 3]))
def test_best_csd_constant_against_brute_force(target, k):
    cand = BRUTE[k]  # targets below 2^10: the best value lies below 2^11, whose NAF fits powers 0..12
    err = np.abs(cand - target)
    best = int(cand[err == err.min()].min())  # ties to the smaller integer (docs/bit-true.md section 4)
    assert best_csd_constant(target, k) == best


@pytest.mark.parametrize("target, k", [(52.8, 1), (52.8, 2), (96.0, 2), (3.0, 1), (2.5, 1), (6.0, 1), (1000.5, 3)])
def test_best_csd_constant_directed(target, k):
    cand = BRUTE[k]
    err = np.abs(cand - target)
    assert best_csd_constant(target, k) == int(cand[err == err.min()].min())


@pytest.mark.parametrize("a", range(0, 300))
def test_naf_is_a_minimal_weight_signed_digit_form(a):
    """The NAF of a sums to a, has no two adjacent non-zero digits and the fewest terms (Reitwiesner 1960)."""
    digits = naf_digits(a)
    assert sum(sg << p for sg, p in digits) == a
    powers = sorted(p for _, p in digits)
    assert all(q - p >= 2 for p, q in zip(powers, powers[1:]))
    weights = [k for k in (1, 2, 3) if a in BRUTE[k]]  # BRUTE[k] holds every value of at most k terms
    if a == 0:
        assert digits == []
    elif weights:
        assert len(digits) == weights[0]
    else:
        assert len(digits) > 3


# ---- end to end: pipeline thresholds against fxpmath ----

# Formats written from the definitions (docs/bit-true.md sections 4 to 6), R = 8, alpha = 6.1, F_A = 9:
# D = 2R = 16 (ca), R = 8 (go, so), 1 (os); s = log2 D = 4 only with mean_by_shift (last case);
# F_P = F_A + s; F_T and W_T as the case gives them (W_T None: the default, which holds the largest
# threshold, so nothing overflows and fxpmath needs no overflow handling; its width is then checked
# as the bit length of the largest threshold, at full-scale input S_max = D (2^10 - 1)).
@pytest.mark.parametrize("kind, edge, fixed, divisor, shift, f_t, w_t", [
    ("ca", "zero-pad", {"rounding": "half-up"}, 16, 0, 0, None),
    ("ca", "one-sided", {"rounding": "half-even", "threshold_frac_bits": 2}, 16, 0, 2, None),
    ("go", "circular", {"rounding": "floor", "threshold_frac_bits": 1, "threshold_bits": 12, "overflow": "saturate"},
     8, 0, 1, 12),
    ("so", "skip", {"rounding": "half-even", "alpha_csd_digits": 2}, 8, 0, 0, None),
    ("os", "one-sided", {"rounding": "half-up", "threshold_bits": 9, "overflow": "wrap"}, 1, 0, 0, 9),
    ("ca", "circular", {"rounding": "floor", "mean_by_shift": True, "threshold_bits": 10, "overflow": "wrap"},
     16, 4, 0, 10),
])
def test_pipeline_thresholds_match_fxpmath(kind, edge, fixed, divisor, shift, f_t, w_t):
    """T = the product S * A / 2^F_P quantised to F_T fraction bits and W_T bits by fxpmath, with S from the float model."""
    det = {"kind": kind, "ref_cells_per_side": 8, "guard_cells_per_side": 1, "alpha": 6.1, "edge": edge,
           "rank": 11 if kind == "os" else None}
    try:
        spec = spec_from_dict({"detector": det, "fixed": {"input_bits": 10, "alpha_frac_bits": 9, **fixed}})
    except SpecError as exc:  # pragma: no cover - the table above holds valid specs
        pytest.fail(str(exc))
    f_p = 9 + shift
    rounding = FXP_ROUNDING[fixed["rounding"]]
    # A (section 4): fxpmath's nearest_posinf of alpha 2^s / D at F_A = 9 bits; with 2 CSD digits the
    # nearest value of BRUTE[2] (every sum of at most 2 signed powers of two; target 6.1 * 512 / 8 = 390.4).
    target = 6.1 * 2.0**f_p / divisor
    if fixed.get("alpha_csd_digits"):
        err = np.abs(BRUTE[2] - target)
        a = int(BRUTE[2][err == err.min()].min())
    else:
        a = int(fxp_raw([6.1 * 2.0**shift / divisor], 9, "nearest_posinf")[0])
    assert spec.alpha_int == a
    rng = np.random.default_rng(17)
    frame = np.minimum(rng.exponential(150.0, 300), 1023).astype(np.int64)
    out = run_fast(spec, frame, np.r_[np.zeros(299, dtype=bool), True])
    ref = cfar_1d(frame.astype(float), kind, 8, 1, 6.1, rank=det["rank"], edge=edge)
    decided = ~np.isnan(ref.estimate)
    s = np.rint(ref.estimate[decided] * divisor)  # integer statistic (exact sums of integers)
    value = s * a / 2.0**f_p
    if w_t is None:
        want = fxp_raw(value, f_t, rounding)
        top = fxp_raw([divisor * 1023 * a / 2.0**f_p], f_t, rounding)[0]
        assert spec.threshold_bits == int(top).bit_length()
    else:
        want = fxp_raw(value, f_t, rounding, n_word=w_t, overflow=fixed["overflow"])
    assert out.threshold[decided].tolist() == want.tolist()
    if edge == "skip":
        assert not out.threshold[~decided].any()

"""The block spec's derived widths and constants against docs/bit-true.md, worked by hand.

Source: this project's arithmetic contract, ``docs/bit-true.md`` sections 3
to 8 (and ``docs/block-spec.md`` for the field names), read here by plain
integer arithmetic; the NAF and its minimal weight from D. Hankerson,
A. Menezes, S. Vanstone, "Guide to Elliptic Curve Cryptography", Springer,
2004, Algorithm 3.30, and G. W. Reitwiesner, "Binary arithmetic", Advances in
Computers 1, 1960, pp. 231-308.

The first half of this file is a small set of helpers that derive every
constant from the spec's *input* fields (kind, R, alpha, input_bits,
alpha_frac_bits, alpha_csd_digits, mean_by_shift, threshold_frac_bits,
rounding, truncate_partials, overflow) and never from a derived property of
the object under test. Other test files import them (the plain reading of the
pipeline in ``test_pipeline_fast.py``, the brute-force Pfa in
``test_exact_pfa.py``, the float-against-fixed bounds). The second half checks
``BlockSpec`` against literal values worked out by hand in the comments, and
against the helpers on random specs.
"""

from __future__ import annotations

import itertools
import math
from bisect import bisect_left
from functools import lru_cache

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError

# --------------------------------------------------------------------------
# Helpers: docs/bit-true.md read literally, from the spec's input fields only.
# --------------------------------------------------------------------------


def divisor(kind: str, r: int) -> int:
    """Section 4: D = 2R (ca), R (go, so), 1 (os)."""
    return {"ca": 2 * r, "go": r, "so": r, "os": 1}[kind]


def mean_shift(kind: str, r: int, by_shift: bool) -> int:
    """Section 4: s = log2 D when mean_by_shift (D a power of two), else 0."""
    d = divisor(kind, r)
    if not by_shift:
        return 0
    assert d & (d - 1) == 0, "mean_by_shift needs a power-of-two divisor"
    return d.bit_length() - 1


def naf(a: int) -> list[tuple[int, int]]:
    """Non-adjacent form of a >= 0 as (sign, power) pairs, lowest power first.

    Hankerson, Menezes, Vanstone 2004, Algorithm 3.30 (NAF of a positive integer).
    """
    digits, power = [], 0
    while a > 0:
        if a % 2:
            k = 2 - a % 4
            a -= k
            digits.append((k, power))
        a //= 2
        power += 1
    return digits


@lru_cache(maxsize=None)
def _signed_digit_values(k: int, max_power: int) -> tuple[int, ...]:
    """Every integer >= 0 that is a sum of at most k terms +-2^p, p in 0..max_power (sorted)."""
    values = {0}
    for j in range(1, k + 1):
        for powers in itertools.combinations(range(max_power + 1), j):
            for signs in itertools.product((1, -1), repeat=j):
                v = sum(sg << p for sg, p in zip(signs, powers))
                if v >= 0:
                    values.add(v)
    return tuple(sorted(values))


def nearest_k_digit(target: float, k: int) -> int:
    """Section 4, alpha_csd_digits = K: the integer nearest target whose NAF has at most K
    non-zero digits, ties to the smaller; by brute force over all sums of at most K signed
    powers of two (the NAF has the fewest non-zero digits of all signed-digit forms:
    Reitwiesner 1960, so "NAF weight <= K" and "a sum of <= K signed powers" are the same set).

    Range: with b = bitlen(floor(target)), 2^b >= target is a 1-digit candidate, so the answer is
    below 2^(b+1), whose NAF uses powers up to b + 1.
    """
    b = int(math.floor(target)).bit_length()
    values = _signed_digit_values(k, 8 * ((b + 8) // 8))  # powers 0..b+1 at least; few cache keys
    i = bisect_left(values, target)
    below = [values[i - 1]] if i > 0 else []
    above = [values[i]] if i < len(values) else []
    return min(below + above, key=lambda v: (abs(v - target), v))


def constant_a(spec) -> int:
    """Section 4: A from alpha, kind, R, F_A, mean_by_shift and alpha_csd_digits."""
    d, s = divisor(spec.kind, spec.ref_per_side), mean_shift(spec.kind, spec.ref_per_side, spec.mean_by_shift)
    target = spec.alpha * 2.0 ** (spec.alpha_frac_bits + s) / d
    if spec.alpha_csd_digits == 0:
        return math.floor(target + 0.5)
    return nearest_k_digit(target, spec.alpha_csd_digits)


def dropped_bits(spec) -> int:
    """Section 5: d = F_P - F_T with F_P = F_A + s."""
    s = mean_shift(spec.kind, spec.ref_per_side, spec.mean_by_shift)
    return spec.alpha_frac_bits + s - spec.threshold_frac_bits


def t0_of(s: int, a: int, d: int, rounding: str, truncate: bool) -> int:
    """Section 5: the threshold before overflow handling, for one integer statistic s."""
    s = int(s)
    if truncate:
        return sum(sign * ((s << p) >> d) for sign, p in naf(a))
    p = s * a
    if d == 0:
        return p
    if rounding == "floor":
        return p >> d
    q = (p + 2 ** (d - 1)) >> d
    if rounding == "half-up":
        return q
    return q - 1 if p & (2**d - 1) == 2 ** (d - 1) and q % 2 == 1 else q


def statistic_max(spec) -> int:
    """Largest S at full-scale input (section 3): 2R (2^W_in - 1) (ca), R (2^W_in - 1) (go, so), 2^W_in - 1 (os)."""
    full = 2**spec.input_bits - 1
    return {"ca": 2 * spec.ref_per_side, "go": spec.ref_per_side, "so": spec.ref_per_side, "os": 1}[spec.kind] * full


def default_threshold_bits(spec) -> int:
    """Section 6: max(1, bitlen(T_max)); T_max = T0 at S_max, or with truncate_partials the sum
    over the positive NAF digits of the truncated terms ((S_max << p) >> d). At least 1 (a word
    has at least one bit; the field's allowed range is 1..62, docs/block-spec.md)."""
    a, d, s_max = constant_a(spec), dropped_bits(spec), statistic_max(spec)
    if spec.truncate_partials:
        top = sum((s_max << p) >> d for sign, p in naf(a) if sign > 0)
    else:
        top = t0_of(s_max, a, d, spec.rounding, False)
    return max(1, top.bit_length())


def threshold_word(s: int, spec, threshold_bits: int | None = None) -> int:
    """Sections 5 and 6: T from the statistic; ``threshold_bits`` is the width the spec *gave*
    (None: the default of section 6, derived here)."""
    w_t = default_threshold_bits(spec) if threshold_bits is None else threshold_bits
    t0 = t0_of(s, constant_a(spec), dropped_bits(spec), spec.rounding, spec.truncate_partials)
    return min(t0, 2**w_t - 1) if spec.overflow == "saturate" else t0 % 2**w_t


def threshold_error_bound(spec, s):
    """Bound on |T / 2^F_T - alpha S / D| (input LSBs) where nothing overflows, without float allowance.

    Written derivation (docs/bit-true.md sections 4 and 5; the rounding intervals of standard
    rounding-error analysis, N. J. Higham, "Accuracy and Stability of Numerical Algorithms",
    2nd ed., 2002, ch. 2): T / 2^F_T - alpha S / D = S (A - A_exact) / 2^F_P + (rounding of
    S A / 2^F_P to F_T bits), A_exact = alpha 2^F_P / D. The rounding lies in (-1, 0] threshold
    LSB for floor, [-1/2, 1/2] LSB for half-up and half-even, and, with truncate_partials, each
    NAF digit's truncated term adds at most one LSB, so r = one LSB, half an LSB, or one LSB per
    NAF digit.
    """
    d, sh = divisor(spec.kind, spec.ref_per_side), mean_shift(spec.kind, spec.ref_per_side, spec.mean_by_shift)
    f_p = spec.alpha_frac_bits + sh
    a = constant_a(spec)
    a_exact = spec.alpha * 2.0**f_p / d
    lsb = 2.0**-spec.threshold_frac_bits
    if spec.truncate_partials:
        r = len(naf(a)) * lsb
    elif spec.rounding == "floor":
        r = lsb
    else:
        r = 0.5 * lsb
    return s * abs(a - a_exact) / 2.0**f_p + r


# Float allowance for comparing against a float64 model: the float threshold alpha * (S / D) takes
# two roundings, A_exact one, the difference T / 2^F_T - threshold one, each at most u = eps / 2
# relative (Higham 2002, ch. 2, standard model); 8 eps (1 + alpha S / D) covers them with room.
FLOAT_EPS = 2.0**-52


def float_allowance(spec, s):
    return 8 * FLOAT_EPS * (1.0 + spec.alpha * s / divisor(spec.kind, spec.ref_per_side))


# --------------------------------------------------------------------------
# Checks of the helpers themselves (hand values).
# --------------------------------------------------------------------------


def test_helpers_on_hand_values():
    # NAF of 7 = 8 - 1; of 43 = 64 - 16 - 4 - 1 (43 = 101011b has no NAF of fewer terms).
    assert naf(7) == [(-1, 0), (1, 3)]
    assert naf(43) == [(-1, 0), (-1, 2), (-1, 4), (1, 6)]
    # 52.8: 1 digit -> 64 (|11.2|) against 32 (|20.8|); 2 digits -> 48 = 32 + 16 (|4.8|) against 56 = 64 - 8 (|3.2|).
    assert nearest_k_digit(52.8, 1) == 64 and nearest_k_digit(52.8, 2) == 56
    # 6 lies halfway between the 1-digit values 4 and 8: the tie goes to the smaller.
    assert nearest_k_digit(6.0, 1) == 4
    # Half-even at d = 2: 6/4 = 1.5 -> 2, 10/4 = 2.5 -> 2, 11/4 = 2.75 -> 3; half-up 10/4 -> 3; floor 11/4 -> 2.
    assert [t0_of(s, 1, 2, "half-even", False) for s in (6, 10, 11)] == [2, 2, 3]
    assert t0_of(10, 1, 2, "half-up", False) == 3 and t0_of(11, 1, 2, "floor", False) == 2
    # Truncated partials of A = 7 = 8 - 1 at d = 2, S = 5: (40 >> 2) - (5 >> 2) = 10 - 1 = 9 (exact 35/4 = 8.75).
    assert t0_of(5, 7, 2, "floor", True) == 9


# --------------------------------------------------------------------------
# BlockSpec against hand-worked values.
# --------------------------------------------------------------------------


def _spec(det, fixed=None, stream=None):
    data = {"detector": det, "fixed": fixed or {}}
    if stream is not None:
        data["stream"] = stream
    return spec_from_dict(data)


def test_ca_default_synthesis_configuration():
    """CA, R = 16, G = 2, W_in = 16, alpha = 17.28, F_A = 12 (defaults otherwise: half-up, F_T = 0, 2 stages)."""
    spec = _spec({"kind": "ca", "ref_cells_per_side": 16, "guard_cells_per_side": 2, "alpha": 17.28},
                 {"input_bits": 16})
    assert spec.window_length == 37  # 2*16 + 2*2 + 1
    assert spec.side_sum_bits == 20  # 16 * 65535 = 1048560 < 2^20 = 1048576, >= 2^19
    assert spec.sum_bits == 20  # default: the minimum
    assert spec.statistic_bits == 21  # W_S + 1 (section 3, ca)
    assert spec.statistic_max == 2097120  # 32 * 65535
    assert spec.mean_divisor == 32 and spec.mean_shift == 0
    assert spec.alpha_int == 2212  # 17.28 * 4096 / 32 = 2211.84; floor(2212.34) = 2212
    assert spec.alpha_bits == 12  # 2048 <= 2212 < 4096
    assert spec.drop_bits == 12  # F_P - F_T = 12 - 0
    assert spec.product_bits == 33  # 21 + 12
    # (2097120 * 2212 + 2048) >> 12 = 4638831488 >> 12 = 1132527; 2^20 <= 1132527 < 2^21
    assert spec.threshold_bits == 21
    assert spec.realised_alpha == 17.28125  # 2212 * 32 / 4096
    assert spec.output_bits == 40  # 16 + 21 + 3
    assert spec.latency_cycles == 20  # H + stages = 18 + 2
    assert spec.drain_cycles == 18


def test_go_mean_by_shift_floor_with_threshold_fraction_bits():
    """GO, R = 8 (D = 8, s = 3), W_in = 12, alpha = 6.3, F_A = 8, F_T = 2, floor."""
    spec = _spec({"kind": "go", "ref_cells_per_side": 8, "alpha": 6.3},
                 {"input_bits": 12, "alpha_frac_bits": 8, "mean_by_shift": True, "threshold_frac_bits": 2,
                  "rounding": "floor"})
    assert spec.window_length == 17  # G = 0
    assert spec.side_sum_bits == 15  # 8 * 4095 = 32760 < 32768 = 2^15
    assert spec.statistic_bits == 15  # go: W_S
    assert spec.statistic_max == 32760
    assert spec.mean_divisor == 8 and spec.mean_shift == 3
    assert spec.alpha_int == 1613  # 6.3 * 2^11 / 8 = 1612.8 -> 1613
    assert spec.alpha_bits == 11  # 1024 <= 1613 < 2048
    assert spec.drop_bits == 9  # 8 + 3 - 2
    assert spec.product_bits == 26  # 15 + 11
    # floor: 32760 * 1613 = 52841880, >> 9 = 103206 (52841880 / 512 = 103206.8); 2^16 <= 103206 < 2^17
    assert spec.threshold_bits == 17
    assert spec.realised_alpha == 6.30078125  # 1613 * 8 / 2048 = 12904 / 2048
    assert spec.output_bits == 32  # 12 + 17 + 3
    assert spec.latency_cycles == 10  # 8 + 0 + 2


def test_so_with_a_wider_sum_register():
    """SO, R = 3 (D = 3, no shift possible), W_in = 10, sum_bits = 14 given, alpha = 4.0, F_A = 5."""
    spec = _spec({"kind": "so", "ref_cells_per_side": 3, "guard_cells_per_side": 1, "alpha": 4.0},
                 {"input_bits": 10, "sum_bits": 14, "alpha_frac_bits": 5}, {"pipeline_stages": 4})
    assert spec.side_sum_bits == 12  # 3 * 1023 = 3069; 2048 <= 3069 < 4096
    assert spec.sum_bits == 14 and spec.statistic_bits == 14  # so: the side-sum register, as given
    assert spec.statistic_max == 3069
    assert spec.mean_divisor == 3 and spec.mean_shift == 0
    assert spec.alpha_int == 43  # 4 * 32 / 3 = 42.67 -> floor(43.17) = 43
    assert spec.drop_bits == 5
    # half-up: (3069 * 43 + 16) >> 5 = (131967 + 16) >> 5 = 131983 >> 5 = 4124 (131983 / 32 = 4124.47);
    # 2^12 <= 4124 < 2^13
    assert spec.threshold_bits == 13
    assert spec.realised_alpha == 43 * 3 / 32  # 4.03125
    assert spec.output_bits == 26  # 10 + 13 + 3
    assert spec.window_length == 9 and spec.latency_cycles == 8  # H = 4, 4 stages


def test_os_csd_half_even_circular():
    """OS, R = 6, k = 9, W_in = 8, alpha = 3.1, F_A = 10, 2 CSD digits, F_T = 3, half-even, circular,
    L = 100, 3 stages."""
    spec = _spec({"kind": "os", "ref_cells_per_side": 6, "rank": 9, "alpha": 3.1, "edge": "circular"},
                 {"input_bits": 8, "alpha_frac_bits": 10, "alpha_csd_digits": 2, "threshold_frac_bits": 3,
                  "rounding": "half-even"},
                 {"frame_length": 100, "pipeline_stages": 3})
    assert spec.side_sum_bits == 11  # 6 * 255 = 1530; 1024 <= 1530 < 2048
    assert spec.statistic_bits == 8 and spec.statistic_max == 255  # os: one input word
    assert spec.mean_divisor == 1 and spec.mean_shift == 0
    # target 3.1 * 1024 = 3174.4. Two-digit values 2^a +- 2^b near it: 3072 = 2^11 + 2^10 = 2^12 - 2^10
    # (|102.4|), 3584 = 2^12 - 2^9 (|409.6|), 2560 = 2^11 + 2^9; nothing with two digits between.
    assert spec.alpha_int == 3072
    assert nearest_k_digit(3174.4, 2) == 3072  # the same by the brute-force helper
    assert spec.alpha_bits == 12
    assert spec.drop_bits == 7  # 10 - 3
    assert spec.product_bits == 20  # 8 + 12
    # 255 * 3072 = 783360 = 6120 * 128 exactly, so half-even gives 6120; 2^12 <= 6120 < 2^13
    assert spec.threshold_bits == 13
    assert spec.realised_alpha == 3.0  # 3072 / 1024
    assert spec.output_bits == 24  # 8 + 13 + 3
    assert spec.window_length == 13
    assert spec.latency_cycles == 115  # circular: L + 2H + stages = 100 + 12 + 3


def test_ca_truncated_partials_three_digits_by_shift():
    """CA, R = 4 (D = 8, s = 3), W_in = 8, alpha = 5.3, F_A = 6, 3 CSD digits, truncate_partials, floor."""
    spec = _spec({"kind": "ca", "ref_cells_per_side": 4, "alpha": 5.3},
                 {"input_bits": 8, "alpha_frac_bits": 6, "alpha_csd_digits": 3, "truncate_partials": True,
                  "mean_by_shift": True, "rounding": "floor"})
    assert spec.side_sum_bits == 10 and spec.statistic_bits == 11  # 4 * 255 = 1020 < 1024
    assert spec.statistic_max == 2040
    assert spec.mean_divisor == 8 and spec.mean_shift == 3
    # target 5.3 * 2^9 / 8 = 339.2. Three-digit values near it: 336 = 2^8 + 2^6 + 2^4 (|3.2|) below,
    # 352 = 2^8 + 2^7 - 2^5 (|12.8|) above; 338, 340, 344, 348 need four digits.
    assert spec.alpha_int == 336
    assert nearest_k_digit(339.2, 3) == 336
    assert spec.alpha_bits == 9 and spec.product_bits == 20  # 256 <= 336 < 512; 11 + 9
    assert spec.drop_bits == 9  # 6 + 3 - 0
    # Positive digits 2^8, 2^6, 2^4 at S_max = 2040: (522240 >> 9) + (130560 >> 9) + (32640 >> 9)
    # = 1020 + 255 + 63 = 1338; 2^10 <= 1338 < 2^11
    assert spec.threshold_bits == 11
    assert spec.realised_alpha == 5.25  # 336 * 8 / 512
    assert spec.output_bits == 22  # 8 + 11 + 3


# --------------------------------------------------------------------------
# BlockSpec against the helpers on random specs.
# --------------------------------------------------------------------------


@settings(max_examples=150, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.filter_too_much])
@given(data=st.data())
def test_derived_quantities_follow_the_written_rules(data):
    kind = data.draw(st.sampled_from(["ca", "go", "so", "os"]))
    r = data.draw(st.integers(1, 40))
    det = {"kind": kind, "ref_cells_per_side": r, "guard_cells_per_side": data.draw(st.integers(0, 5)),
           "alpha": data.draw(st.floats(0.2, 200.0)), "edge": data.draw(st.sampled_from(["skip", "circular"]))}
    if kind == "os":
        det["rank"] = data.draw(st.integers(1, 2 * r))
    truncate = data.draw(st.booleans())
    csd = data.draw(st.sampled_from([0, 0, 1, 2, 3]))
    # CSD constants stay below about 2^20: the library's CSD search scans linearly around the
    # target, which grows slow (and memory-hungry) for large targets with few digits.
    f_a = data.draw(st.integers(0, 12 if csd else 20))
    d = divisor(kind, r)
    fixed = {"input_bits": data.draw(st.integers(1, 24)), "alpha_frac_bits": f_a,
             "alpha_csd_digits": csd, "truncate_partials": truncate,
             "mean_by_shift": kind != "os" and d & (d - 1) == 0 and data.draw(st.booleans()),
             "threshold_frac_bits": data.draw(st.integers(0, f_a)),
             "rounding": "floor" if truncate else data.draw(st.sampled_from(["floor", "half-up", "half-even"]))}
    stream = {"pipeline_stages": data.draw(st.integers(1, 16))}
    try:
        spec = _spec(det, fixed, stream)
    except SpecError:
        assume(False)
    w_in, h = spec.input_bits, spec.ref_per_side + spec.guard_per_side
    side = (r * (2**w_in - 1)).bit_length()
    assert spec.window_length == 2 * h + 1
    assert spec.side_sum_bits == side == spec.sum_bits
    assert spec.statistic_bits == {"ca": side + 1, "go": side, "so": side, "os": w_in}[kind]
    assert spec.statistic_max == statistic_max(spec)
    assert spec.mean_divisor == d
    assert spec.mean_shift == mean_shift(kind, r, spec.mean_by_shift)
    a = constant_a(spec)
    assert spec.alpha_int == a
    assert spec.drop_bits == dropped_bits(spec)
    # Section 5: the product's width bitlen(S_max) + bitlen(A) (default sum width, so S_max fills W_S (+1)).
    assert spec.product_bits == statistic_max(spec).bit_length() + a.bit_length()
    assert spec.threshold_bits == default_threshold_bits(spec)
    assert spec.realised_alpha == a * d / 2.0 ** (f_a + spec.mean_shift)
    assert spec.output_bits == w_in + spec.threshold_bits + 3
    stages = stream["pipeline_stages"]
    want_latency = spec.frame_length + 2 * h + stages if det["edge"] == "circular" else h + stages
    assert spec.latency_cycles == want_latency


def _random_format(rng, narrow: bool) -> dict:
    """One random spec mapping; ``narrow``: truncated partials, few input bits, F_T = 0 (where the
    sum of truncated terms and the truncated sum most often differ in bit length)."""
    kind = str(rng.choice(["ca", "go", "so", "os"]))
    r = int(rng.integers(1, 9 if narrow else 41))
    det = {"kind": kind, "ref_cells_per_side": r, "guard_cells_per_side": int(rng.integers(0, 3)),
           "alpha": float(rng.uniform(0.2, 10.0 if narrow else 200.0))}
    if kind == "os":
        det["rank"] = int(rng.integers(1, 2 * r + 1))
    truncate = narrow or bool(rng.integers(0, 2))
    csd = int(rng.choice([0, 0, 1, 2, 3]))
    f_a = int(rng.integers(0, 13 if csd else 21))
    d = divisor(kind, r)
    fixed = {"input_bits": int(rng.integers(1, 5 if narrow else 25)), "alpha_frac_bits": f_a,
             "alpha_csd_digits": csd, "truncate_partials": truncate,
             "mean_by_shift": bool(kind != "os" and d & (d - 1) == 0 and rng.integers(0, 2)),
             "threshold_frac_bits": 0 if narrow else int(rng.integers(0, f_a + 1)),
             "rounding": "floor" if truncate else str(rng.choice(["floor", "half-up", "half-even"]))}
    return {"detector": det, "fixed": fixed}


def test_issue15_truncated_partials_width_is_the_sum_of_truncated_terms():
    """Issue 15 repro: SO, R = 7, G = 0, alpha = 4.43, W_in = 1, F_A = 5, truncated partials, floor.

    Worked by hand from docs/bit-true.md sections 4-6: D = 7, target 4.43 * 32 / 7 = 20.25,
    A = 20 = 2^4 + 2^2, d = 5, S_max = 7. Truncated terms (112 >> 5) + (28 >> 5) = 3 + 0 = 3,
    2 bits; the largest threshold formed (S = 0..7) is 3. The truncated sum 140 >> 5 = 4 would
    need 3 bits.
    """
    spec = _spec({"kind": "so", "ref_cells_per_side": 7, "guard_cells_per_side": 0, "alpha": 4.43},
                 {"input_bits": 1, "alpha_frac_bits": 5, "truncate_partials": True, "rounding": "floor"})
    assert spec.alpha_int == 20 and spec.drop_bits == 5
    assert max(t0_of(s, 20, 5, "floor", True) for s in range(8)) == 3
    assert spec.threshold_bits == 2


@pytest.mark.parametrize("narrow", [True, False])
def test_default_threshold_width_is_the_documented_formula(narrow):
    """Section 6's formula, evaluated here from the document (helpers above), against the spec's
    default threshold width on 8000 random formats per draw (seeded; before the fix about one
    narrow format in 130 disagreed)."""
    rng = np.random.default_rng(15 + narrow)
    checked = 0
    while checked < 8000:
        try:
            spec = spec_from_dict(_random_format(rng, narrow))
        except SpecError:
            continue
        checked += 1
        assert spec.threshold_bits == default_threshold_bits(spec), spec.to_dict()


def test_default_threshold_width_holds_every_threshold_formed():
    """The default width holds the largest T0 over every statistic S = 0..S_max (every value is
    reachable: any split of the cells, section 3), by enumeration on small formats; without
    truncation it is also the least width that does (T0 at S_max is the largest)."""
    rng = np.random.default_rng(1515)
    checked = 0
    while checked < 400:
        data = _random_format(rng, narrow=bool(checked % 2))
        data["fixed"]["input_bits"] = min(data["fixed"]["input_bits"], 6)
        data["detector"]["ref_cells_per_side"] = min(data["detector"]["ref_cells_per_side"], 8)
        data["detector"].pop("rank", None)
        if data["detector"]["kind"] == "os":
            data["detector"]["rank"] = 1
        try:
            spec = spec_from_dict(data)
        except SpecError:
            continue
        checked += 1
        a, d = constant_a(spec), dropped_bits(spec)
        top = max(t0_of(s, a, d, spec.rounding, spec.truncate_partials) for s in range(statistic_max(spec) + 1))
        assert top < 2**spec.threshold_bits
        if not spec.truncate_partials:
            assert spec.threshold_bits == max(1, top.bit_length())


# --------------------------------------------------------------------------
# Validation: each error names the field (cases not in test_design_spec.py).
# --------------------------------------------------------------------------

BASE = {"kind": "ca", "ref_cells_per_side": 4, "alpha": 3.0}


@pytest.mark.parametrize("data, field", [
    ({"detector": {**BASE, "rank": 2}}, "detector.rank"),  # rank only with os
    ({"detector": {**BASE, "kind": "os", "rank": 9}}, "detector.rank"),  # 1..2R = 1..8
    ({"detector": {**BASE, "kind": "os", "rank": 0}}, "detector.rank"),
    ({"detector": {**BASE, "design_pfa": 1e-3}}, "detector.alpha"),  # exactly one of alpha, design_pfa
    ({"detector": {"kind": "ca", "ref_cells_per_side": 4, "design_pfa": 1.0}}, "detector.design_pfa"),
    ({"detector": {"kind": "ca", "alpha": 3.0}}, "detector.ref_cells_per_side"),
    ({"detector": {**BASE, "compare": "<"}}, "detector.compare"),
    ({"detector": {**BASE, "edge": "wrap"}}, "detector.edge"),
    ({"detector": BASE, "fixed": {"truncate_partials": True, "rounding": "half-up"}}, "fixed.rounding"),
    ({"detector": {**BASE, "kind": "os", "rank": 3}, "fixed": {"mean_by_shift": True}}, "fixed.mean_by_shift"),
    # F_T may not exceed F_P = F_A + s = 4 + 0
    ({"detector": BASE, "fixed": {"alpha_frac_bits": 4, "threshold_frac_bits": 5}}, "fixed.threshold_frac_bits"),
    # 32-bit input, R = 4096: S is bitlen(8192 * (2^32 - 1)) = 45 bits; A = 3 * 2^40 / 8192 = 3 * 2^27 has 29: 74 > 62
    ({"detector": {**BASE, "ref_cells_per_side": 4096}, "fixed": {"input_bits": 32, "alpha_frac_bits": 40},
      "stream": {"frame_length": 8193}}, "fixed.alpha_frac_bits"),
    ({"detector": BASE, "fixed": {"input_bits": 33}}, "fixed.input_bits"),
    ({"detector": BASE, "fixed": {"threshold_bits": 0}}, "fixed.threshold_bits"),
    ({"detector": BASE, "fixed": {"truncate_partials": "yes"}}, "fixed.truncate_partials"),
    ({"detector": BASE, "fixed": {"overflow": "clip"}}, "fixed.overflow"),
    ({"detector": BASE, "stream": {"pipeline_stages": 0}}, "stream.pipeline_stages"),
    ({"detector": BASE, "stream": {"clock_mhz": 100}}, "stream.clock_mhz"),
    ({"detector": 3}, "detector"),
])
def test_bad_fields_are_named(data, field):
    with pytest.raises(SpecError) as err:
        spec_from_dict(data)
    assert err.value.field == field
    assert err.value.allowed

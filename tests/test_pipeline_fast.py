"""Outside checks of the fast bit-accurate pipeline model (refmodel.fixedpoint.pipeline_fast).

None of these checks takes its expected values from the code under test:

1. worked examples: tiny frames whose output words are computed in this file
   by hand from the written definitions of docs/bit-true.md and written down
   as literal numbers;
2. a deliberately plain per-CUT reading of docs/bit-true.md sections 1-8
   (Python integers, explicit index lists, ``sorted``), compared word for word
   with the vectorised model on random specs and streams (hypothesis), whole
   and split into chunks at random points;
3. the fixed-point thresholds against the float golden model
   (refmodel.floatmodel.float_cfar) within the rounding-error bound, and detection
   disagreements only where the CUT lies within that bound of the float
   threshold;
4. bad input.
"""

from __future__ import annotations

import os

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from refmodel.fixedpoint import pipeline_fast
from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError
from refmodel.floatmodel.float_cfar import cfar_1d
from refmodel.fixedpoint.pipeline_fast import FastPipeline, run_fast, statistic
from refmodel.fixedpoint.word_format import FIELDS, PipelineOutput
from test_block_spec import (constant_a, default_threshold_bits, divisor, dropped_bits, float_allowance, naf,
                             threshold_error_bound)

KINDS = ("ca", "go", "so", "os")
EDGES = ("skip", "zero-pad", "one-sided", "circular")

LONG = os.environ.get("CFARVEC_LONG") == "1"
# Common practice, no source: modest example counts by default, many more with
# CFARVEC_LONG=1. deadline=None because tests never time anything.
HYP = settings(
    max_examples=3000 if LONG else 150,
    deadline=None,
    derandomize=not LONG,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much, HealthCheck.data_too_large],
)


# --------------------------------------------------------------------------
# A plain reading of docs/bit-true.md, one CUT at a time.
# --------------------------------------------------------------------------


def direct_words(spec, samples, last, threshold_bits: int | None = None) -> PipelineOutput:
    """docs/bit-true.md sections 1-8 read literally (the arithmetic contract of this project).

    Every constant comes from the spec's input fields through the helpers of
    ``test_block_spec.py``: A (section 4: floor(target + 1/2), or the nearest K-digit value by
    brute force), d = F_A + s - F_T (section 5) and, unless ``threshold_bits`` gives the width the
    spec was written with, the default threshold width of section 6.
    """
    r, g = spec.ref_per_side, spec.guard_per_side
    h = r + g
    a, d = constant_a(spec), dropped_bits(spec)
    w_t = default_threshold_bits(spec) if threshold_bits is None else threshold_bits
    f_t = spec.threshold_frac_bits
    words = []
    start = 0
    for end in [i for i, m in enumerate(last) if m]:
        frame = [int(v) for v in samples[start : end + 1]]
        length = len(frame)

        def cell(i):  # section 2, edge table
            if 0 <= i < length:
                return frame[i]
            return frame[i % length] if spec.edge == "circular" else 0

        for n in range(length):
            lag = [cell(i) for i in range(n - h, n - g)]  # x[n-H] .. x[n-G-1]
            lead = [cell(i) for i in range(n + g + 1, n + h + 1)]  # x[n+G+1] .. x[n+H]
            v = h <= n <= length - 1 - h
            side = None
            if spec.edge == "one-sided" and n < h:
                side = lead
            elif spec.edge == "one-sided" and n > length - 1 - h:
                side = lag
            # Section 3, statistic table.
            if spec.kind == "ca":
                s = 2 * sum(side) if side is not None else sum(lag) + sum(lead)
            elif spec.kind in ("go", "so"):
                pick = max if spec.kind == "go" else min
                s = sum(side) if side is not None else pick(sum(lag), sum(lead))
            elif side is not None:
                s = sorted(side)[(spec.rank + 1) // 2 - 1]  # ceil(k/2)-th smallest of the side
            else:
                s = sorted(lag + lead)[spec.rank - 1]
            # Section 5.
            if spec.truncate_partials:
                t0 = sum(sign * ((s << p) >> d) for sign, p in naf(a))
            else:
                p = s * a
                if d == 0:
                    t0 = p
                elif spec.rounding == "floor":
                    t0 = p >> d
                elif spec.rounding == "half-up":
                    t0 = (p + 2 ** (d - 1)) >> d
                else:
                    q = (p + 2 ** (d - 1)) >> d
                    t0 = q - 1 if p & (2**d - 1) == 2 ** (d - 1) and q % 2 == 1 else q
            # Section 6.
            top = 2**w_t - 1
            t = min(t0, top) if spec.overflow == "saturate" else t0 % 2**w_t
            # Section 7.
            c = frame[n] << f_t
            det = c > t if spec.compare == ">" else c >= t
            if spec.edge == "skip" and not v:
                t, det = 0, False
            words.append((frame[n], t, det, v, n == length - 1))
        start = end + 1
    cols = list(zip(*words)) if words else [[]] * 5
    return PipelineOutput(*(np.array(c, dtype=np.int64 if i < 2 else bool) for i, c in enumerate(cols)))


def first_difference(got: PipelineOutput, want: PipelineOutput) -> str:
    if len(got) != len(want):
        return f"{len(got)} words, expected {len(want)}"
    for f in FIELDS:
        bad = np.flatnonzero(getattr(got, f) != getattr(want, f))
        if bad.size:
            i = int(bad[0])
            return f"word {i}: {f} = {getattr(got, f)[i]}, expected {getattr(want, f)[i]}"
    return "equal"


def assert_words(got: PipelineOutput, want: PipelineOutput) -> None:
    assert got.equals(want), first_difference(got, want)


def stream(*frames) -> tuple[np.ndarray, np.ndarray]:
    x = np.concatenate([np.asarray(f, dtype=np.int64) for f in frames])
    last = np.zeros(x.size, dtype=bool)
    last[np.cumsum([len(f) for f in frames]) - 1] = True
    return x, last


def make_spec(kind="ca", r=2, g=1, alpha=4.0, edge="zero-pad", compare=">", rank=None, **fixed):
    det = {"kind": kind, "ref_cells_per_side": r, "guard_cells_per_side": g, "alpha": alpha, "edge": edge,
           "compare": compare}
    if rank is not None:
        det["rank"] = rank
    return spec_from_dict({"detector": det, "fixed": {"input_bits": 4, "alpha_frac_bits": 4, **fixed}})


# --------------------------------------------------------------------------
# Random specs and streams.
# --------------------------------------------------------------------------


@st.composite
def specs_and_width(draw, narrow_threshold=True):
    """A random spec and the threshold width it was written with (None: the default)."""
    kind = draw(st.sampled_from(KINDS))
    r, g = draw(st.integers(1, 5)), draw(st.integers(0, 3))
    det = {"kind": kind, "ref_cells_per_side": r, "guard_cells_per_side": g,
           "compare": draw(st.sampled_from([">", ">="])), "edge": draw(st.sampled_from(EDGES)),
           "alpha": draw(st.floats(0.3, 40.0))}
    if kind == "os":
        det["rank"] = draw(st.integers(1, 2 * r))
    truncate = draw(st.booleans())
    f_a = draw(st.integers(0, 14))
    w_in = draw(st.integers(1, 16))
    div = {"ca": 2 * r, "go": r, "so": r}.get(kind)
    fixed = {
        "input_bits": w_in,
        "sum_bits": (r * (2**w_in - 1)).bit_length() + draw(st.sampled_from([0, 0, 2])),
        "alpha_frac_bits": f_a,
        "alpha_csd_digits": draw(st.sampled_from([0, 0, 1, 2, 3])),
        "truncate_partials": truncate,
        "mean_by_shift": div is not None and div & (div - 1) == 0 and draw(st.booleans()),
        "threshold_frac_bits": draw(st.integers(0, f_a)),
        "rounding": "floor" if truncate else draw(st.sampled_from(["floor", "half-up", "half-even"])),
        "overflow": draw(st.sampled_from(["saturate", "wrap"])),
    }
    try:
        spec = spec_from_dict({"detector": det, "fixed": fixed})
    except SpecError:
        assume(False)
    if narrow_threshold and draw(st.booleans()):
        fixed["threshold_bits"] = draw(st.integers(1, spec.threshold_bits))
        spec = spec_from_dict({"detector": det, "fixed": fixed})
    return spec, fixed.get("threshold_bits")


def specs(narrow_threshold=True):
    """Random specs (every kind, edge policy, rounding, overflow, CSD, truncation, narrow thresholds)."""
    return specs_and_width(narrow_threshold).map(lambda pair: pair[0])


@st.composite
def streams(draw, spec, max_frames=4):
    top = 2**spec.input_bits - 1
    w = spec.window_length
    frames = []
    for _ in range(draw(st.integers(1, max_frames))):
        n = draw(st.integers(w, w + 12))
        style = draw(st.sampled_from(["random", "random", "zero", "full", "spikes"]))
        if style == "zero":
            frames.append([0] * n)
        elif style == "full":
            frames.append([top] * n)
        else:
            values = st.sampled_from([0, 0, 1, top]) if style == "spikes" else st.integers(0, top)
            frames.append(draw(st.lists(values, min_size=n, max_size=n)))
    return stream(*frames)


@HYP
@given(data=st.data())
def test_words_match_a_direct_reading_of_the_spec(data):
    """Every kind, edge policy, rounding, overflow, CSD and truncated constant; frames from W up."""
    spec, w_t = data.draw(specs_and_width())
    x, last = data.draw(streams(spec))
    assert_words(run_fast(spec, x, last), direct_words(spec, x, last, w_t))


@HYP
@given(data=st.data())
def test_chunk_splits_do_not_change_the_words(data):
    """Any split points (inside a frame, on a frame end, empty chunks): same words as one call."""
    spec, w_t = data.draw(specs_and_width())
    x, last = data.draw(streams(spec))
    cuts = sorted(data.draw(st.lists(st.integers(0, x.size), max_size=8)))
    pipe = FastPipeline(spec)
    parts, prev = [], 0
    for c in cuts + [x.size]:
        parts.append(pipe.push(x[prev:c], last[prev:c]))
        prev = c
    parts.append(pipe.finish())
    assert_words(PipelineOutput.concat(parts), direct_words(spec, x, last, w_t))


# --------------------------------------------------------------------------
# Worked examples. Spec: R = 2, G = 1 (W = 7, H = 3), 4-bit input, 4 fraction
# bits for A. CA: target = alpha * 2^4 / (2R) = 4 * 16 / 4 = 16, so A = 16 and,
# with d = 4 and half-up, T0 = (16 S + 8) >> 4 = S: the threshold equals S.
# Frame x = 1, 2, ..., 8; CUT n has lagging cells n-3, n-2 and leading cells
# n+2, n+3 (docs/bit-true.md section 2).
# --------------------------------------------------------------------------

RAMP = [1, 2, 3, 4, 5, 6, 7, 8]

# S by hand, CUT n = 0..7 (lag sum + lead sum):
CA_RAMP = {
    # cells outside the frame are 0: (0)+(3+4), (0)+(4+5), (1)+(5+6), (1+2)+(6+7), (2+3)+(7+8), (3+4)+(8), (4+5), (5+6)
    "zero-pad": [7, 9, 12, 16, 20, 15, 9, 11],
    # n < 3: twice the leading sum; n > 4: twice the lagging sum
    "one-sided": [14, 18, 22, 16, 20, 14, 18, 22],
    # x[i mod 8]: (6+7)+(3+4), (7+8)+(4+5), (8+1)+(5+6), 16, 20, (3+4)+(8+1), (4+5)+(1+2), (5+6)+(2+3)
    "circular": [20, 24, 20, 16, 20, 16, 12, 16],
    # only n = 3, 4 are window-valid (H <= n <= L-1-H); elsewhere T = 0
    "skip": [0, 0, 0, 16, 20, 0, 0, 0],
}


@pytest.mark.parametrize("edge", EDGES)
def test_worked_example_ca(edge):
    spec = make_spec("ca", edge=edge)
    assert spec.alpha_int == 16 and spec.drop_bits == 4  # the premise of the hand computation
    out = run_fast(spec, *stream(RAMP))
    assert out.threshold.tolist() == CA_RAMP[edge]
    assert out.cut.tolist() == RAMP
    assert out.valid.tolist() == [False, False, False, True, True, False, False, False]
    assert out.last.tolist() == [False] * 7 + [True]
    assert not out.det.any()  # x[n] <= T everywhere on this ramp


def test_worked_example_statistic_helper():
    assert statistic(make_spec("ca", edge="zero-pad"), RAMP).tolist() == CA_RAMP["zero-pad"]
    assert statistic(make_spec("ca", edge="one-sided"), RAMP).tolist() == CA_RAMP["one-sided"]
    # GO zero-pad: max(lag, lead) = max(0,7), max(0,9), max(1,11), max(3,13), max(5,15), max(7,8), max(9,0), max(11,0)
    assert statistic(make_spec("go"), RAMP).tolist() == [7, 9, 11, 13, 15, 8, 9, 11]
    # OS k = 3 zero-pad: 3rd smallest of {0,0,3,4}, {0,0,4,5}, {0,1,5,6}, {1,2,6,7}, {2,3,7,8}, {0,3,4,8}, {0,0,4,5}, {0,0,5,6}
    assert statistic(make_spec("os", rank=3), RAMP).tolist() == [3, 4, 5, 6, 7, 4, 4, 5]


# GO/SO: divisor R = 2, target = 4 * 16 / 2 = 32, A = 32, T0 = (32 S + 8) >> 4 = 2 S.
# OS (k = 3): divisor 1, target = 64, A = 64, T0 = 4 S.
@pytest.mark.parametrize("kind, rank, edge, expected", [
    # 2 * max(lag, lead), sums as in CA_RAMP["zero-pad"]
    ("go", None, "zero-pad", [14, 18, 22, 26, 30, 16, 18, 22]),
    # 2 * min(lag, lead): min(0,7), min(0,9), min(1,11), min(3,13), min(5,15), min(7,8), min(9,0), min(11,0)
    ("so", None, "zero-pad", [0, 0, 2, 6, 10, 14, 0, 0]),
    # one-sided GO/SO use the complete side's sum: lead 7, 9, 11 for n < 3, lag 7, 9, 11 for n > 4
    ("so", None, "one-sided", [14, 18, 22, 6, 10, 14, 18, 22]),
    # 4 * 3rd smallest of the 4 cells: {0,0,3,4}, {0,0,4,5}, {0,1,5,6}, {1,2,6,7}, {2,3,7,8}, {3,4,8,0}, {4,5,0,0}, {5,6,0,0}
    ("os", 3, "zero-pad", [12, 16, 20, 24, 28, 16, 16, 20]),
    # one-sided OS: ceil(3/2) = 2nd smallest of the complete side's 2 cells: {3,4}, {4,5}, {5,6}, -, -, {3,4}, {4,5}, {5,6}
    ("os", 3, "one-sided", [16, 20, 24, 24, 28, 16, 20, 24]),
])
def test_worked_example_other_kinds(kind, rank, edge, expected):
    out = run_fast(make_spec(kind, rank=rank, edge=edge), *stream(RAMP))
    assert out.threshold.tolist() == expected


def test_one_sided_uses_the_complete_side_only():
    """Large values in the cells beyond the frame's ends would change S if the incomplete side were used."""
    spec = make_spec("ca", edge="one-sided")
    # Second frame: the same ramp. Its first CUTs must not see the previous frame's 15s.
    out = run_fast(spec, *stream([15] * 9, RAMP, [15] * 9))
    assert out.threshold[9:17].tolist() == CA_RAMP["one-sided"]


# Overflow: a 4-bit threshold (top 15) on the CA ramp, S = T0 = 7, 9, 12, 16, 20, 15, 9, 11.
@pytest.mark.parametrize("overflow, expected", [
    ("saturate", [7, 9, 12, 15, 15, 15, 9, 11]),  # min(T0, 15)
    ("wrap", [7, 9, 12, 0, 4, 15, 9, 11]),  # T0 mod 16
])
def test_narrow_threshold_ramp(overflow, expected):
    out = run_fast(make_spec("ca", threshold_bits=4, overflow=overflow), *stream(RAMP))
    assert out.threshold.tolist() == expected


def test_wrap_and_saturate_at_full_scale_with_an_uneven_constant():
    """alpha = 3.3, F_A = 6, R = 2: target = 3.3 * 64 / 4 = 52.8, A = 53, d = 6.

    Full-scale 4-bit frame of 8 cells, zero-pad: the number of reference
    cells inside the frame is 2, 2, 3, 4, 4, 3, 2, 2, so S = 30, 30, 45, 60,
    60, 45, 30, 30. Half-up: T0 = (53 S + 32) >> 6 =
    1622 >> 6 = 25 (S = 30), 2417 >> 6 = 37 (S = 45), 3212 >> 6 = 50 (S = 60).
    """
    base = dict(edge="zero-pad", alpha=3.3, alpha_frac_bits=6, threshold_bits=5)
    t0 = [25, 25, 37, 50, 50, 37, 25, 25]
    x, last = stream([15] * 8)
    spec = make_spec("ca", overflow="wrap", **base)
    assert spec.alpha_int == 53 and spec.drop_bits == 6
    wrapped = run_fast(spec, x, last)
    assert wrapped.threshold.tolist() == [t % 32 for t in t0]  # 25, 25, 5, 18, 18, 5, 25, 25
    assert wrapped.det.tolist() == [15 > t % 32 for t in t0]
    saturated = run_fast(make_spec("ca", overflow="saturate", **base), x, last)
    assert saturated.threshold.tolist() == [min(t, 31) for t in t0]
    assert not saturated.det.any()


@pytest.mark.parametrize("edge", EDGES)
@pytest.mark.parametrize("kind", KINDS)
def test_all_zero_frame(kind, edge):
    """T = 0 everywhere; '>' never detects; '>=' detects wherever the policy decides (0 >= 0)."""
    rank = 2 if kind == "os" else None
    x, last = stream([0] * 11)
    for compare in (">", ">="):
        out = run_fast(make_spec(kind, rank=rank, edge=edge, compare=compare), x, last)
        assert not out.threshold.any()
        decided = out.valid if edge == "skip" else np.ones(11, dtype=bool)
        assert out.det.tolist() == (decided.tolist() if compare == ">=" else [False] * 11)


@pytest.mark.parametrize("kind", KINDS)
def test_full_scale_frame_interior(kind):
    """Interior (window-valid) cells of a full-scale frame: every reference cell is 15.

    S = 4 * 15 = 60 (CA), 2 * 15 = 30 (GO, SO), 15 (OS), and with the A of the
    worked examples T = S, 2 S, 2 S, 4 S = 60 in every case.
    """
    rank = 4 if kind == "os" else None
    out = run_fast(make_spec(kind, rank=rank, edge="skip"), *stream([15] * 12))
    assert out.threshold[out.valid].tolist() == [60] * 6
    assert out.valid.tolist() == [False] * 3 + [True] * 6 + [False] * 3


def test_frame_of_window_length():
    """L = W = 7: only the centre CUT n = 3 is window-valid; its window is the whole frame."""
    x = [1, 2, 3, 4, 5, 6, 7]
    out = run_fast(make_spec("ca", edge="skip"), *stream(x))
    assert out.valid.tolist() == [False, False, False, True, False, False, False]
    assert out.threshold.tolist() == [0, 0, 0, 1 + 2 + 6 + 7, 0, 0, 0]
    # circular: n = 0 sees lag x[4], x[5] and lead x[2], x[3]
    out = run_fast(make_spec("ca", edge="circular"), *stream(x))
    assert out.threshold[0] == 5 + 6 + 3 + 4


@pytest.mark.parametrize("pos", [0, 1, 2, 3, 9, 17, 18, 19])
def test_single_impulse(pos):
    """A 15 at `pos` in a zero frame (CA zero-pad, T = S): T = 15 exactly at CUTs that hold it as a
    reference cell (G+1 <= |n - pos| <= H, i.e. 2 <= |n - pos| <= 3), 0 elsewhere; only the impulse is detected."""
    frame = [0] * 20
    frame[pos] = 15
    out = run_fast(make_spec("ca"), *stream(frame))
    assert out.threshold.tolist() == [15 if 2 <= abs(n - pos) <= 3 else 0 for n in range(20)]
    assert np.flatnonzero(out.det).tolist() == [pos]


@pytest.mark.parametrize("edge", EDGES)
def test_back_to_back_frames_never_mix(edge):
    """A frame's words are the same alone and between frames of other lengths."""
    spec = make_spec("os", rank=3, edge=edge)
    rng = np.random.default_rng(5)
    frames = [rng.integers(0, 16, n) for n in (7, 12, 9, 30, 7)]
    together = run_fast(spec, *stream(*frames))
    start = 0
    for f in frames:
        alone = run_fast(spec, *stream(f))
        part = PipelineOutput(*(getattr(together, k)[start : start + f.size] for k in FIELDS))
        assert_words(part, alone)
        start += f.size


def test_skip_zeroes_threshold_and_detection():
    """Under skip, T = 0 and det = 0 where v = 0, even where the CUT would exceed T (docs/bit-true.md section 7)."""
    frame = [15, 15, 15, 0, 0, 0, 0, 0, 15, 15, 15]
    out = run_fast(make_spec("ca", edge="skip"), *stream(frame))
    invalid = ~out.valid
    assert invalid.tolist() == [True] * 3 + [False] * 5 + [True] * 3
    assert not out.threshold[invalid].any() and not out.det[invalid].any()
    # Under zero-pad the same cells decide: n = 0 has S = x[2] + x[3] = 15, and 15 > 15 is false,
    # n = 10 has S = x[7] + x[8] = 15 as well.
    zp = run_fast(make_spec("ca", edge="zero-pad"), *stream(frame))
    assert zp.threshold[[0, 10]].tolist() == [15, 15]


def test_minimal_and_maximal_formats():
    """1-bit input (values 0, 1) and 28-bit input (full scale 2^28 - 1, the widest whose CA threshold
    still fits a 64-bit output word unsaturated) both give the definition's words."""
    for bits, alpha in ((1, 1.0), (28, 2.0)):
        spec = spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": 1, "alpha": alpha, "edge": "zero-pad"},
                               "fixed": {"input_bits": bits, "alpha_frac_bits": 0}})
        top = 2**bits - 1
        x, last = stream([top, 0, top], [top] * 4)
        assert_words(run_fast(spec, x, last), direct_words(spec, x, last))
    # 28-bit: R = 1, D = 2, A = floor(2 * 1 / 2 + 1/2) = 1, d = 0: T = S.
    # Frame 2, CUT 1: S = x[0] + x[2] = 2 (2^28 - 1).
    assert run_fast(spec, x, last).threshold[4] == 2 * top


# --------------------------------------------------------------------------
# Streaming behaviour.
# --------------------------------------------------------------------------


@pytest.mark.parametrize("edge", EDGES)
def test_words_are_released_once_determined(edge):
    """CUT n of an open frame is determined once x[n + H] has arrived (circular: the whole frame)."""
    spec = make_spec("ca", edge=edge)  # H = 3
    pipe = FastPipeline(spec)
    counts = [len(pipe.push(np.full(k, 5), np.zeros(k, dtype=bool))) for k in (2, 2, 5, 1)]
    released = [0, 0, 0, 0] if edge == "circular" else [0, 1, 5, 1]  # after 2, 4, 9, 10 samples
    assert counts == released
    end = pipe.push(np.array([5]), np.array([True]))
    assert len(end) == (11 if edge == "circular" else 4)
    assert len(pipe.finish()) == 0


def test_state_stays_bounded_on_a_long_open_frame():
    """A frame that never ends keeps only a bounded tail (2H samples), however much is pushed."""
    spec = make_spec("ca", edge="zero-pad")
    pipe = FastPipeline(spec)
    for _ in range(50):
        pipe.push(np.full(1000, 3), np.zeros(1000, dtype=bool))
    assert pipe._tail.size <= 2 * spec.half_window


def test_finish_without_last_marker():
    pipe = FastPipeline(make_spec())
    pipe.push(np.arange(9), np.zeros(9, dtype=bool))
    with pytest.raises(SpecError) as err:
        pipe.finish()
    assert err.value.field == "last"


def test_uniform_frames_use_the_row_layout_and_match():
    """Many frames of one length, large enough to span several work blocks."""
    spec = spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": 16, "guard_cells_per_side": 2,
                                        "alpha": 5.0, "edge": "one-sided"},
                           "fixed": {"input_bits": 16}})
    rng = np.random.default_rng(3)
    frames = [rng.integers(0, 2**16, 4096) for _ in range(40)]
    x, last = stream(*frames)
    whole = run_fast(spec, x, last)
    # Reference: each frame's interior from the written CA formula (lag + lead sums, A, half-up, d):
    # D = 2R = 32, F_A = 12 (default), target = 5 * 4096 / 32 = 640 exactly, so A = 640; d = 12 - 0.
    a, d = 640, 12
    f = frames[17].astype(np.int64)
    n = 1000
    s = int(f[n - 18 : n - 2].sum() + f[n + 3 : n + 19].sum())
    assert whole.threshold[17 * 4096 + n] == (s * a + 2 ** (d - 1)) >> d
    # A frame in the middle is the same alone.
    alone = run_fast(spec, *stream(frames[17]))
    assert np.array_equal(whole.threshold[17 * 4096 : 18 * 4096], alone.threshold)


def test_long_frames_split_into_blocks(monkeypatch):
    """Frames longer than a work block, and OS with many cells per CUT, still match the reading."""
    monkeypatch.setattr(pipeline_fast, "BLOCK_CELLS", 64)
    for kind, edge in (("ca", "circular"), ("os", "one-sided"), ("go", "skip")):
        spec = make_spec(kind, rank=3 if kind == "os" else None, edge=edge, r=3, g=2)
        rng = np.random.default_rng(9)
        x, last = stream(rng.integers(0, 16, 300), rng.integers(0, 16, 41), rng.integers(0, 16, 11))
        assert_words(run_fast(spec, x, last), direct_words(spec, x, last))


@pytest.mark.parametrize("kind, edge", [("ca", "one-sided"), ("os", "circular"), ("so", "skip"), ("go", "zero-pad")])
def test_many_frames_of_varied_lengths(kind, edge):
    """More runs of equal lengths than the row layout takes: frames are grouped by length and scattered back."""
    spec = make_spec(kind, rank=3 if kind == "os" else None, edge=edge)
    rng = np.random.default_rng(21)
    frames = [rng.integers(0, 16, n) for n in rng.integers(7, 12, pipeline_fast.MAX_RUNS * 3)]
    x, last = stream(*frames)
    assert_words(run_fast(spec, x, last), direct_words(spec, x, last))


def test_sample_dtypes():
    """Narrow unsigned, signed and uint64 sample arrays, and 0/1 integer markers, give the same words."""
    spec = make_spec("go", edge="circular")
    x, last = stream(RAMP, RAMP[::-1])
    want = direct_words(spec, x, last)
    for dt in (np.uint8, np.int16, np.uint32, np.uint64, np.int64):
        assert_words(run_fast(spec, x.astype(dt), last.astype(np.uint8)), want)
    assert_words(run_fast(spec, x.tolist(), last.tolist()), want)


# --------------------------------------------------------------------------
# Fixed point against the float golden model.
# The fixed threshold differs from alpha * S / D by the constant's quantisation
# (S |A - A_exact| / 2^F_P, A_exact = alpha 2^F_P / D) plus the product's
# rounding (r = at most one threshold LSB for floor, one per partial product
# when each is truncated, half an LSB for rounding to nearest): standard
# rounding-error analysis, e.g. A. V. Oppenheim, R. W. Schafer, "Discrete-Time
# Signal Processing", 3rd ed., 2010, sec. 6.7 (coefficient quantisation) and
# sec. 6.6 (the error intervals of rounding and truncation; section numbers
# from memory); N. J. Higham, "Accuracy and Stability of Numerical
# Algorithms", 2nd ed., 2002, ch. 2 (rounding error model). The bound is
# computed here (test_block_spec.threshold_error_bound, with D, s and A derived
# from the spec's input fields), plus a float allowance for the float64 model
# (test_block_spec.float_allowance). spec.threshold_error_bound(S) must state
# the same bound plus its documented allowance of 1e-9 (1 + S).
# --------------------------------------------------------------------------


def check_against_float(spec, frame):
    """Threshold and detections of one frame against the float model; specs keep the automatic
    threshold width, so nothing saturates."""
    frame = np.asarray(frame, dtype=np.int64)
    out = run_fast(spec, *stream(frame))
    ref = cfar_1d(frame.astype(float), spec.kind, spec.ref_per_side, spec.guard_per_side, spec.alpha,
                  rank=spec.rank, compare=spec.compare, edge=spec.edge)
    decided = ~np.isnan(ref.threshold)
    # The integer statistic from the float model's estimate (exact sums of integers; D from section 4).
    s = np.rint(ref.estimate[decided] * divisor(spec.kind, spec.ref_per_side))
    core = threshold_error_bound(spec, s)
    bound = core + float_allowance(spec, s)
    t_fixed = out.threshold[decided] / 2.0**spec.threshold_frac_bits
    err = np.abs(t_fixed - ref.threshold[decided])
    assert (err <= bound).all(), f"worst error {err.max()} > bound at S = {s[np.argmax(err - bound)]}"
    # The library states the same bound (its docstring: plus 1e-9 (1 + S) for double precision).
    stated = spec.threshold_error_bound(s)
    assert np.all(np.abs(stated - (core + 1e-9 * (1.0 + s))) <= float_allowance(spec, s))
    differ = out.det != ref.detections
    assert not differ[~decided].any()
    close = np.abs(frame[decided] - ref.threshold[decided]) <= bound
    assert not (differ[decided] & ~close).any()
    return int(differ.sum())


@pytest.mark.parametrize("edge", EDGES)
@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("fixed", [
    {"rounding": "half-up"},
    {"rounding": "floor", "threshold_frac_bits": 3},
    {"rounding": "half-even", "alpha_csd_digits": 2},
    {"rounding": "floor", "truncate_partials": True, "alpha_csd_digits": 3},
])
def test_fixed_threshold_within_bound_of_float(kind, edge, fixed):
    rank = 12 if kind == "os" else None
    spec = spec_from_dict({"detector": {"kind": kind, "ref_cells_per_side": 8, "guard_cells_per_side": 2,
                                        "alpha": 4.7, "rank": rank, "edge": edge, "compare": ">="},
                           "fixed": {"input_bits": 12, "alpha_frac_bits": 10, **fixed}})
    rng = np.random.default_rng(2024)
    # Exponential (square-law) noise around 200 with a few strong cells, clipped to 12 bits.
    frame = np.minimum(rng.exponential(200.0, 400), 4095).astype(np.int64)
    frame[rng.integers(0, 400, 8)] = 4095
    check_against_float(spec, frame)


@HYP
@given(data=st.data())
def test_fixed_threshold_within_bound_of_float_random(data):
    spec = data.draw(specs(narrow_threshold=False))
    top = 2**spec.input_bits - 1
    n = data.draw(st.integers(spec.window_length, spec.window_length + 30))
    frame = data.draw(st.lists(st.integers(0, top), min_size=n, max_size=n))
    check_against_float(spec, frame)


# --------------------------------------------------------------------------
# Bad input.
# --------------------------------------------------------------------------


@pytest.mark.parametrize("samples, last, field", [
    ([0, 1, 16, 2, 3, 4, 5], [0, 0, 0, 0, 0, 0, 1], "samples"),  # 16 does not fit 4 bits
    ([0, 1, -1, 2, 3, 4, 5], [0, 0, 0, 0, 0, 0, 1], "samples"),
    (np.arange(7, dtype=float), [0, 0, 0, 0, 0, 0, 1], "samples"),
    ([0, 1, 2, 3, 4, 5, 6], [0, 0, 0, 0, 0, 1], "last"),  # shapes differ
    ([[0, 1, 2, 3, 4, 5, 6]], [[0, 0, 0, 0, 0, 0, 1]], "last"),  # not one-dimensional
    ([0, 1, 2, 3, 4, 5, 6], [0, 0, 2, 0, 0, 0, 1], "last"),
    ([0, 1, 2, 3, 4, 5, 6], [0.0, 0, 0, 0, 0, 0, 1], "last"),
    ([0, 1, 2, 3, 4, 5, 6], [0, 0, 0, 0, 0, 0, 0], "last"),  # no final marker
])
def test_bad_input(samples, last, field):
    with pytest.raises(SpecError) as err:
        run_fast(make_spec(), samples, last)
    assert err.value.field == field


def test_short_frame_names_its_index_and_the_window():
    x, last = stream(RAMP, [1, 2, 3, 4, 5, 6], RAMP)  # frame 1 has 6 < W = 7 samples
    with pytest.raises(SpecError) as err:
        run_fast(make_spec(), x, last)
    assert err.value.field == "frame length"
    assert "frame 1" in err.value.problem and "7" in err.value.allowed
    # The same when the short frame straddles two chunks: nothing is returned for it.
    pipe = FastPipeline(make_spec())
    pipe.push(x[:10], last[:10])
    with pytest.raises(SpecError, match="frame 1"):
        pipe.push(x[10:], last[10:])


def test_circular_frame_longer_than_the_store(monkeypatch):
    monkeypatch.setattr(pipeline_fast, "MAX_CIRCULAR_FRAME", 20)
    pipe = FastPipeline(make_spec(edge="circular"))
    pipe.push(np.zeros(15, dtype=np.int64), np.zeros(15, dtype=bool))
    with pytest.raises(SpecError) as err:
        pipe.push(np.zeros(15, dtype=np.int64), np.zeros(15, dtype=bool))
    assert err.value.field == "frame length"


def test_failed_push_leaves_the_state_alone():
    spec = make_spec()
    x, last = stream(RAMP, RAMP)
    pipe = FastPipeline(spec)
    first = pipe.push(x[:5], last[:5])
    with pytest.raises(SpecError):
        pipe.push(np.array([99]), np.array([False]))
    rest = pipe.push(x[5:], last[5:])
    assert_words(PipelineOutput.concat([first, rest]), direct_words(spec, x, last))
